"""The field kind: a field traversed along a hidden path drawn afresh at every reset (very many values, sampled)."""

from __future__ import annotations

from dataclasses import dataclass, fields, replace
from typing import Any, Sequence

import numpy as np

from ..analysis import Report, analyse_paths, optimal_policy
from ..analysis.paths import PathDetailsJSON, path_parts
from ..analysis.explorer import Explorer
from ..analysis.pathchance import Seen, path_chance
from ..analysis.policysearch import NODES
from ..envs.core import Core
from ..envs.paths import PathCore
from ..errors import LayoutError
from ..generate.grid import GridLayout, grid_from_cells
from ..generate.maze import carve, dead_ends, maze_layout
from ..generate.paths import OFF, FieldFrame, PathShape, path_bank
from ..limits import check_bytes, check_work
from ..model import PathRule, TaskModel
from ..model.paths import MARK_FOREVER
from ..render import ObservationSet, key_classes, path_observation_set
from ..render.palette import AGENT, FLOOR, MARK, PATH, PATH_END, WALL
from ..spec import FieldSpec, Spec
from ..spec.schema import Observation
from ..variant import LAYOUT_STREAM, PARAMS_STREAM, Variant, horizon, variant_name, variant_rng
from . import SAMPLES, Policy


@dataclass(frozen=True)
class FieldParams:
    """A field variant's drawn size and path shape (an open field) or walls (a walled one)."""

    width: int
    height: int
    start_side: str
    start: str
    turns: int | None = None          # open fields: the path's direction changes
    path_width: int | None = None     # open fields: cells across the path
    walls: str | None = None          # walled fields: the generator of the walls
    braid: float | None = None
    dead_ends: int | None = None

    def to_dict(self) -> dict[str, Any]:
        """The values that apply, as plain data."""
        return {f.name: getattr(self, f.name) for f in fields(self) if getattr(self, f.name) is not None}

    def geometry(self) -> tuple[FieldFrame, PathShape]:
        """The frame the paths are drawn in and the shape every path of the variant shares."""
        frame = FieldFrame(self.height, self.width, self.start_side)
        return frame, PathShape(frame.depth, frame.across, self.turns or 0, self.path_width or 1, self.start)


def _field_spec(spec: Spec) -> FieldSpec:
    if not isinstance(spec, FieldSpec):
        raise ValueError(f"{spec.name} is not a field task")
    return spec


def _params(variant: Variant) -> FieldParams:
    if not isinstance(variant.params, FieldParams):
        raise ValueError(f"{variant.variant_id} is not a field variant")
    return variant.params


def draw_field(spec: FieldSpec, seed: int) -> Variant:
    """Draw a field's size and turns (or walls); its paths are drawn per episode."""
    field = spec.layout.field
    what = variant_name(spec, seed)
    rng = variant_rng(seed, PARAMS_STREAM)
    width, height = field.width.sample(rng), field.height.sample(rng)
    params = FieldParams(width, height, field.path.start_side, field.path.start)
    if field.maze is None:    # with walls the passages decide the path's turns and width
        params = replace(params, turns=field.path.turns.sample(rng), path_width=field.path.width)
    frame, shape = params.geometry()
    words = f"{width}×{height} field, " + (f"{params.turns} turns" if field.maze is None else
                                           f"{field.maze.generator} walls")
    problem = shape.problem() if field.maze is None else \
        (None if frame.depth >= 2 else f"a path needs at least 2 rows from side to side, the field has {frame.depth}")
    if problem is not None:
        raise LayoutError.for_variant(what, words, seed, problem)
    cells = height * width
    # a path through walls visits each cell at most once
    longest = cells - 1 if field.maze is not None else shape.longest
    check_work(what, cells * ((field.misstep.limit or 0) + 1), 4, horizon(spec.episode, longest))
    obs = spec.observation
    if obs.vector is not None:
        check_bytes(f"{what}: the vector table", cells * (2 * cells + 4) * 4)
    if obs.pixels is not None:
        check_bytes(f"{what}: the pixel table", cells * obs.pixels.height * obs.pixels.width * 3)
    check_bytes(f"{what}: a top-down picture", (height + 3) * (width + 2) * 12 * 12 * 3)
    layout: GridLayout
    if field.maze is None:
        layout = grid_from_cells((height, width), [(r, c) for r in range(height) for c in range(width)], (0, 0), {})
    else:
        try:
            passages = carve(variant_rng(seed, LAYOUT_STREAM), field.maze.generator, height, width,
                             field.maze.room_size, field.maze.braid)
        except ValueError as exc:
            raise LayoutError.for_variant(what, words, seed, str(exc)) from None
        layout = maze_layout(passages, 0, [])
        params = replace(params, walls=field.maze.generator, braid=field.maze.braid,
                         dead_ends=int(dead_ends(passages).size))
    index = frame.cell_index()
    layout = replace(layout, start=int(index[0, 0]), sites={"start_side": index[0], "far_side": index[-1]})
    return Variant(spec=spec, seed=seed, params=params, layout=layout)


def compile_rule(variant: Variant) -> PathRule:
    """A field variant's path-free dynamics: state = missteps · C + cell (missteps only with a misstep limit)."""
    spec, layout, params = _field_spec(variant.spec), variant.layout, _params(variant)
    f = spec.layout.field
    frame, shape = params.geometry()
    C, A = layout.num_cells, 4
    levels = (f.misstep.limit or 0) + 1
    S = C * levels
    missteps, cell = np.divmod(np.arange(S), C)
    own = np.arange(C)[:, None]
    aim = np.where(layout.neighbour >= 0, layout.neighbour, own)[cell]            # [S, A]
    move_next = missteps[:, None] * C + aim
    counted = f.misstep.limit is not None
    next_missteps = np.minimum(missteps + 1, levels - 1) if counted else missteps
    to_start = f.misstep.to == "start"
    misstep_cell = np.zeros_like(cell) if to_start else cell
    misstep_next = np.broadcast_to((next_missteps * C + misstep_cell)[:, None], (S, A)).copy()
    state_out = (missteps == levels - 1) if counted else np.zeros(S, dtype=bool)
    bank_kind = bank_start = None
    longest = shape.longest
    if f.maze is not None:
        index = frame.cell_index()
        bank_kind, bank_start = path_bank(layout.neighbour, index[0], index[-1])
        longest = int((bank_kind != OFF).sum(axis=1).max()) - 1
    mark = f.mark
    mark_steps = 0 if mark is None else MARK_FOREVER if mark.steps == "episode" else int(mark.steps)
    colour = (int(mark.colour[0]), int(mark.colour[1]), int(mark.colour[2])) if mark is not None else MARK
    r = spec.rewards
    return PathRule(
        variant_id=variant.variant_id, params=params, layout=layout, frame=frame, shape=shape, levels=levels,
        misstep_limit=f.misstep.limit, to_start=to_start, mark_steps=mark_steps, step_reward=r.step,
        goal_reward=r.correct, misstep_reward=r.misstep, timeout_reward=r.timeout,
        horizon=horizon(spec.episode, longest),
        discount=spec.episode.discount, aim=aim, move_next=move_next, misstep_next=misstep_next, state_cell=cell,
        state_out=state_out, bank_kind=bank_kind, bank_start=bank_start, mark_colour=colour)


def _rule(model: TaskModel) -> PathRule:
    if model.paths is None:
        raise ValueError(f"{model.variant_id} is not a model of hidden paths")
    return model.paths


class FieldKind:
    """Fields: a model covers a sample of paths drawn from the variant seed (a sampled hidden set)."""

    name: str = "field"
    layouts: tuple[str, ...] = ("field",)
    modalities: tuple[str, ...] = ("vector", "grid", "pixels")
    pools: bool = False
    policies: dict[str, str] = {
        "explorer": "the explorer, which remembers where it stepped off but does not know the path",
        "optimal": "the optimal agent, which knows the hidden path (an analysis policy, not a learner)",
        "random": "uniform-random actions",
        "chance": "the best deterministic memoryless policy (acts on the current observation, its marks included)",
    }
    legend: str = ("Each frame: what the agent saw (left: its observation drawn, marks included, never the path) "
                   "and the ground truth (right: the hidden path in green, its end in yellow, marks outlined).")
    details_json: type[Any] = PathDetailsJSON

    def draw(self, spec: Spec, seed: int) -> Variant:
        """A field's size and path shape or walls."""
        return draw_field(_field_spec(spec), seed)

    def compile(self, variant: Variant, samples: int = SAMPLES) -> TaskModel:
        """The path rule, and a model over ``samples`` paths from the variant seed (its tables are
        built when an analysis first reads them; a runtime never does)."""
        rule = compile_rule(variant)
        field = _field_spec(variant.spec).layout.field
        # the analyses' tables over every sampled path, bounded before a path is drawn
        check_work(f"{variant.variant_id}: {samples} sampled paths", samples * rule.num_cells *
                   ((field.misstep.limit or 0) + 1), rule.num_actions, rule.horizon,
                   "analyse fewer paths (--paths) or raise the cap with --max-work or TASKGEN_MAX_WORK")
        return rule.model(rule.sample(variant.seed, samples), variant.seed, deferred=True)

    def observations(self, model: TaskModel, spec: Observation) -> ObservationSet:
        """The agent's view per cell (never the path), with the overlay of its marks."""
        return path_observation_set(model, spec)

    def core(self, variants: Sequence[tuple[TaskModel, ObservationSet]], num_envs: int,
             draw: bool = False) -> Core:
        """Environments of one variant, each drawing its path at every reset."""
        return PathCore(variants, num_envs, draw)

    def analyse(self, model: TaskModel, observations: ObservationSet | None, min_gap: float,
                budget: int = NODES) -> Report:
        """Baselines exact per sampled path, solvability and the memory gap (see analysis/paths.py)."""
        if observations is None:
            return analyse_paths(model, np.arange(model.num_keys), None, min_gap, budget)
        return analyse_paths(model, key_classes(observations), _seen(model, observations), min_gap, budget)

    def fingerprint(self, model: TaskModel) -> str:
        """The digest of the path rule (paths are drawn per episode, so the rule is the variant)."""
        return _rule(model).digest()

    def widest(self, spec: Spec) -> dict[str, int]:
        """The widest vector blocks of any variant: one-hot position and marks, a bit per cell of the
        largest field."""
        field, vector = _field_spec(spec).layout.field, spec.observation.vector
        if vector is None:
            return {}
        cells = field.width.high * field.height.high
        return {"position": cells, "marks": cells} if vector.position == "one_hot" else {"marks": cells}

    def family_size(self, spec: Spec) -> int | None:
        """An open field's variants: combinations of width, height and path turns (walls: not counted)."""
        field = _field_spec(spec).layout.field
        if field.maze is not None:
            return None
        counts = [len(set(p.choices)) if p.choices is not None else p.high - p.low + 1
                  for p in (field.width, field.height, field.path.turns)]
        return counts[0] * counts[1] * counts[2]

    def family_words(self, spec: Spec) -> str:
        """What the family size counts."""
        return "one per combination of field width, height and path turns; paths are drawn per episode"

    def policy(self, name: str, model: TaskModel, observations: ObservationSet, seed: int) -> Policy:
        """explorer, optimal (knows this episode's path), chance or random; each reads only the env's info."""
        rule = _rule(model)
        if name == "optimal":
            return _optimal(rule)
        if name == "explorer":
            return _explorer(rule)
        if name == "chance":
            return _chance(rule, model, observations)
        rng = np.random.default_rng(seed)
        return lambda t, info: int(rng.integers(rule.num_actions))

    def swatches(self, model: TaskModel) -> list[tuple[tuple[int, int, int], str]]:
        """The hidden path and its end (ground truth only), the marks, the agent, walls and floor."""
        return [(PATH, "hidden path (truth only)"), (PATH_END, "its end"), (_rule(model).mark_colour, "mark (ring)"),
                (AGENT, "agent"), (WALL, "wall"), (FLOOR, "floor")]

    def truth_label(self, model: TaskModel, info: dict[str, Any]) -> str:
        """How often the agent has stepped off the path."""
        return f"missteps {int(info['analysis_only']['missteps'])}"

    def caption(self, model: TaskModel, info: dict[str, Any], observations: ObservationSet, observation: Any) -> str:
        """Nothing: the path is never shown, and a field's distractors are decoy marks, drawn as marks."""
        return ""

    def succeeded(self, model: TaskModel, info: dict[str, Any]) -> bool:
        """Whether the agent reached its path's end."""
        hidden = info["analysis_only"]
        return bool(_rule(model).path_model(hidden["path"], int(hidden["start"])).success[hidden["state"]])


def _optimal(rule: PathRule) -> Policy:
    """Knows the episode's path: its table is made at the episode's first step."""
    table: list[np.ndarray] = []

    def act(t: int, info: dict[str, Any]) -> int:
        hidden = info["analysis_only"]
        if t == 0:
            table[:] = [optimal_policy(rule.path_model(hidden["path"], int(hidden["start"])))]
        return int(table[0][min(t, rule.horizon - 1), hidden["state"]])
    return act


def _explorer(rule: PathRule) -> Policy:
    """The explorer, told what each of its moves did (the step rule, applied to that one move)."""
    memory: dict[str, Any] = {}

    def act(t: int, info: dict[str, Any]) -> int:
        hidden, one = info["analysis_only"], np.ones(1, dtype=bool)
        if t == 0:
            memory["explorer"] = Explorer(rule, 1)
        explorer = memory["explorer"]
        if t > 0:
            state, action = memory["last"]
            out = rule.outcome(state, action, hidden["path"][None], np.asarray([hidden["start"]]))
            explorer.observe(rule.state_cell[state], action, out, one)
        state = np.asarray([hidden["state"]])
        action = explorer.act(t, rule.state_cell[state], np.zeros((1, rule.num_cells), dtype=bool), one)
        memory["last"] = (state, action)
        return int(action[0])
    return act


def _seen(model: TaskModel, observations: ObservationSet) -> Seen | None:
    """What the agent's observation shows of the marks, or None when no mark is ever in view."""
    marks = observations.marks
    return marks.seen if marks is not None and marks.shown and _rule(model).mark_steps > 0 else None


def _chance(rule: PathRule, model: TaskModel, observations: ObservationSet) -> Policy:
    """The best deterministic memoryless policy over the model's sampled paths, acting on the marks its own
    missteps leave (noise-free, as the analyses assume: decoy marks are not read)."""
    _, sample = path_parts(model)
    _, table = path_chance(model, rule, sample, key_classes(observations), _seen(model, observations))
    until = np.zeros(rule.num_cells, dtype=np.int64)
    memory: dict[str, Any] = {}

    def act(t: int, info: dict[str, Any]) -> int:
        hidden = info["analysis_only"]
        if t == 0:
            until[:] = 0
        elif rule.mark_steps and hidden["missteps"] > memory["missteps"]:
            state, action = memory["last"]
            until[rule.aim[state, action]] = rule.mark_until(t)
        cell = int(rule.state_cell[hidden["state"]])
        action = table.action(cell, frozenset(np.flatnonzero(until > t).tolist()))
        memory.update(last=(hidden["state"], action), missteps=hidden["missteps"])
        return action
    return act


FIELD = FieldKind()
