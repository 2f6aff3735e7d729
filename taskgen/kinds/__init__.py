"""Task kinds: what differs between families of tasks, registered by layout family.

Every family is one idea — a finite task whose dynamics depend on a hidden value drawn at
reset — so the pipeline, the report and the environment shells are shared. A kind supplies
what differs: how a spec's variants are drawn and compiled, how the agent's view is rendered,
the runtime core that steps its environments, its analyses, its layout fingerprint, and what
a gallery needs to play and caption its episodes. Callers make one :func:`kind_of` call and
never branch on the family.

- :mod:`taskgen.kinds.cue`: corridors and mazes, where the hidden value is a cue (few values,
  enumerated in the model's tables);
- :mod:`taskgen.kinds.field`: fields traversed along a hidden path (very many values, sampled).
"""

from __future__ import annotations

from typing import Any, Callable, Mapping, Protocol, Sequence

from ..analysis import Report
from ..analysis.policysearch import NODES
from ..envs.core import Core
from ..model import TaskModel
from ..render import ObservationSet
from ..render.observations import widened
from ..spec import Spec
from ..spec.schema import Observation
from ..variant import Variant, check_seed

SAMPLES = 64     # hidden values sampled per variant where there are too many to enumerate (paths)

#: A gallery policy: (step, info) → action, from the env's public info only.
Policy = Callable[[int, dict[str, Any]], int]


class TaskKind(Protocol):
    """What one family of tasks supplies to the shared pipeline."""

    name: str                       # "cue", "field": a model's ``kind``
    layouts: tuple[str, ...]        # the layout families it compiles
    modalities: tuple[str, ...]     # the observation modalities it offers
    pools: bool                     # whether one env or batch may hold several variants
    policies: dict[str, str]        # gallery policies it can play, with a sentence each; the first is 'auto'
    legend: str                     # what a gallery frame shows
    details_json: type[Any]         # the JSON shape of its reports' ``details`` (a TypedDict)

    def draw(self, spec: Spec, seed: int) -> Variant:
        """The variant ``seed`` of ``spec``: its parameters and layout."""

    def compile(self, variant: Variant, samples: int = SAMPLES) -> TaskModel:
        """The variant's model (``samples``: hidden values its tables cover, where they are sampled)."""

    def observations(self, model: TaskModel, spec: Observation) -> ObservationSet:
        """What the agent sees, rendered noise-free for every observation key."""

    def core(self, variants: Sequence[tuple[TaskModel, ObservationSet]], num_envs: int,
             draw: bool = False) -> Core:
        """The runtime core of ``num_envs`` environments (``draw``: each draws its variant from the pool)."""

    def analyse(self, model: TaskModel, observations: ObservationSet | None, min_gap: float,
                budget: int = NODES) -> Report:
        """Every figure and check of one variant, on what its agent observes (``budget``: nodes the search
        for its chance level may visit)."""

    def fingerprint(self, model: TaskModel) -> str:
        """A hash that equal layouts (and task settings) share however they were generated."""

    def widest(self, spec: Spec) -> dict[str, int]:
        """The width of each vector block that varies between variants, at its widest over the spec's
        parameter ranges (one-hot position, goals, marks): every variant is laid out in these."""

    def family_size(self, spec: Spec) -> int | None:
        """How many distinct variants the spec can produce, where that is countable (else None)."""

    def family_words(self, spec: Spec) -> str:
        """What :meth:`family_size` counts, in words."""

    def policy(self, name: str, model: TaskModel, observations: ObservationSet, seed: int) -> Policy:
        """A gallery policy by name (one of :attr:`policies`)."""

    def truth_label(self, model: TaskModel, info: dict[str, Any]) -> str:
        """The label of a ground-truth picture at ``info``'s state."""

    def caption(self, model: TaskModel, info: dict[str, Any], observations: ObservationSet, observation: Any) -> str:
        """What a frame's caption adds at ``info``'s state, where the agent got ``observation`` (may be empty)."""

    def succeeded(self, model: TaskModel, info: dict[str, Any]) -> bool:
        """Whether the episode ended in success at ``info``'s state."""

    def swatches(self, model: TaskModel) -> list[tuple[tuple[int, int, int], str]]:
        """A gallery legend: each colour its frames use, with what it means."""


def _registry() -> dict[str, TaskKind]:
    from .cue import CUE
    from .field import FIELD

    return {layout: kind for kind in (CUE, FIELD) for layout in kind.layouts}


def all_kinds() -> list[TaskKind]:
    """Every registered kind, once each."""
    return list({id(kind): kind for kind in _registry().values()}.values())


def kind_of(subject: Spec | TaskModel) -> TaskKind:
    """The kind of a spec (by its layout family) or of a compiled model (by its ``kind``)."""
    registry = _registry()
    if isinstance(subject, TaskModel):
        return next(kind for kind in registry.values() if kind.name == subject.kind)
    return registry[subject.layout.family]


def make_variant(spec: Spec, seed: int = 0) -> Variant:
    """Draw the variant of ``spec`` that ``seed`` names (same spec and seed, same variant)."""
    return kind_of(spec).draw(spec, check_seed(seed))


def compile_variant(variant: Variant, samples: int = SAMPLES) -> TaskModel:
    """Compile a variant into its model (``samples``: paths a field's model covers)."""
    return kind_of(variant.spec).compile(variant, samples)


def observation_set(model: TaskModel, spec: Observation) -> ObservationSet:
    """What the agent of ``model`` sees under the observation block ``spec``, noise-free, per key."""
    return kind_of(model).observations(model, spec)


def family_widths(specs: Sequence[Spec]) -> dict[str, int]:
    """Block widths wide enough for every variant of every spec given (a spec, or a suite's sweep points)."""
    out: dict[str, int] = {}
    for spec in specs:
        for name, width in kind_of(spec).widest(spec).items():
            out[name] = max(out.get(name, 0), width)
    return out


def family_observations(model: TaskModel, spec: Spec, widths: Mapping[str, int] | None = None) -> ObservationSet:
    """What the agent of a variant of ``spec`` sees, laid out in its family's observation space (``widths``
    from :func:`family_widths`; by default the spec's own), so that every variant has the same space."""
    observations = kind_of(model).observations(model, spec.observation)
    return widened(observations, family_widths([spec]) if widths is None else widths)


def analyse(model: TaskModel, observations: ObservationSet | None = None, min_gap: float = 0.0,
            budget: int = NODES) -> Report:
    """Every figure and check of one compiled variant (``observations``: what its agent sees, from
    :func:`observation_set`; without them the observation keys stand for what it sees; ``budget``: nodes
    the search for its chance level may visit, after which the level is an interval)."""
    return kind_of(model).analyse(model, observations, min_gap, budget)


__all__ = ["SAMPLES", "Policy", "TaskKind", "all_kinds", "analyse", "compile_variant", "family_observations",
           "family_widths", "kind_of", "make_variant", "observation_set"]
