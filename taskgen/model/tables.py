"""The compiled task model: the finite tables that analyses, runtimes and renderers all read.

One :class:`TaskModel` describes every family: a finite, deterministic task whose dynamics
depend on a hidden value drawn at reset. Its tables are over joint states — each state belongs
to one hidden value of the model's :class:`~taskgen.model.hidden.HiddenSet` — so the exact
machinery (backward induction, policy evaluation, hitting times) runs on any model unchanged,
and a figure per hidden value is the value of that value's start state.

What only one family has sits in its own record, read only by that family's code: the cue's
bookkeeping (:class:`CueStructure`) and a field's path rule (``paths``).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from typing import TYPE_CHECKING, Any, Callable

import numpy as np

from ..generate import GridLayout
from ..variant import Params
from .hidden import HiddenSet

if TYPE_CHECKING:   # the path rule builds TaskModels, so it is imported for types only
    from .paths import PathRule


@dataclass(frozen=True, eq=False)
class Tables:
    """Finite dynamics over joint states ``0 … S−1``.

    Taking action ``a`` in state ``s`` moves to ``next_state[s, a]`` and pays ``reward[s, a]``;
    entering a ``terminal`` state ends the episode (terminal states loop on themselves for free);
    ``success`` marks the terminal states that count as solving the task. ``initial`` is the
    distribution at reset (one start state per hidden value). ``value[s]`` is the index of the
    state's hidden value, ``local[s]`` its number in a runtime that steps that value's dynamics
    (the runtime's ``info["analysis_only"]["state"]``), ``cell`` and ``heading`` the agent's
    pose and ``obs_key`` what the agent sees there before noise.
    """

    next_state: np.ndarray      # int64[S, A]
    reward: np.ndarray          # float64[S, A]
    terminal: np.ndarray        # bool[S]
    success: np.ndarray         # bool[S]
    initial: np.ndarray         # float64[S]
    value: np.ndarray           # int64[S]
    local: np.ndarray           # int64[S]
    cell: np.ndarray            # int64[S]
    heading: np.ndarray         # int64[S], 0 north … 3 west, or −1 without headings
    obs_key: np.ndarray         # int64[S]


@dataclass(frozen=True)
class Deferred:
    """Tables built when first read: a sample a runtime never reads costs nothing until analysed."""

    build: Callable[..., Tables]
    args: tuple[Any, ...] = ()

    def __call__(self) -> Tables:
        """Build the tables."""
        return self.build(*self.args)


@dataclass(frozen=True, eq=False)
class CueStructure:
    """The cue's bookkeeping, read by the cue analyses and renderers only.

    ``key_value[k]`` is the cue value observation key ``k`` shows (−1 while hidden); ``window``
    marks the states in which the spec shows the cue, ``known`` those in which an agent with
    memory has already seen all of it, ``knowledge`` numbers what it knows (equal for cue twins it
    cannot tell apart); ``blind_state`` numbers the states with the cue forgotten (cue twins share
    one) and ``timer`` counts steps up to the display window (with a cue site: 1 once seen).
    """

    values: int                 # k: values one displayed cue element can take
    sequence_length: int        # m: elements shown one after another
    visible_steps: int          # n: observations each element is shown (0: shown at a cue site)
    key_value: np.ndarray       # int64[K]
    window: np.ndarray          # bool[S]
    known: np.ndarray           # bool[S]
    knowledge: np.ndarray       # int64[S]
    blind_state: np.ndarray     # int64[S]
    timer: np.ndarray           # int64[S]

    @property
    def by_site(self) -> bool:
        """True when the cue is shown at a cue site rather than for the first steps."""
        return self.visible_steps == 0


@dataclass(frozen=True, eq=False)
class TaskModel:
    """A compiled variant: its tables over the hidden values of ``hidden``, and how it is seen.

    Observation key ``k`` shows the agent at cell ``key_cell[k]`` with heading ``key_heading[k]``
    (and, in a cue task, the cue value ``cue.key_value[k]``). An episode that reaches ``horizon``
    steps without terminating is truncated and its last step also pays ``timeout_reward``.
    ``source`` holds the tables, or how to build them on first use (see :class:`Deferred`).
    """

    kind: str                   # the task kind that compiled it ("cue", "field")
    variant_id: str
    params: Params
    layout: GridLayout
    action_names: tuple[str, ...]
    horizon: int
    discount: float
    timeout_reward: float
    key_cell: np.ndarray        # int64[K]
    key_heading: np.ndarray     # int64[K]
    hidden: HiddenSet
    source: Tables | Deferred
    cue: CueStructure | None = None
    paths: PathRule | None = None

    @cached_property
    def tables(self) -> Tables:
        """The tables over the hidden set (built now if they were deferred)."""
        return self.source if isinstance(self.source, Tables) else self.source()

    @property
    def next_state(self) -> np.ndarray:
        """int64[S, A]: see :class:`Tables`."""
        return self.tables.next_state

    @property
    def reward(self) -> np.ndarray:
        """float64[S, A]."""
        return self.tables.reward

    @property
    def terminal(self) -> np.ndarray:
        """bool[S]."""
        return self.tables.terminal

    @property
    def success(self) -> np.ndarray:
        """bool[S]."""
        return self.tables.success

    @property
    def initial(self) -> np.ndarray:
        """float64[S]: the distribution at reset."""
        return self.tables.initial

    @property
    def value(self) -> np.ndarray:
        """int64[S]: the index of each state's hidden value."""
        return self.tables.value

    @property
    def local(self) -> np.ndarray:
        """int64[S]: each state's number in a runtime of its hidden value."""
        return self.tables.local

    @property
    def cell(self) -> np.ndarray:
        """int64[S]: the layout cell of the agent."""
        return self.tables.cell

    @property
    def heading(self) -> np.ndarray:
        """int64[S]: the agent's heading (−1 without headings)."""
        return self.tables.heading

    @property
    def obs_key(self) -> np.ndarray:
        """int64[S]: what the agent sees, before noise."""
        return self.tables.obs_key

    @property
    def num_states(self) -> int:
        """S, the number of states."""
        return int(self.next_state.shape[0])

    @property
    def num_actions(self) -> int:
        """A, the number of actions."""
        return len(self.action_names)

    @property
    def num_keys(self) -> int:
        """K, the number of distinct observation keys."""
        return int(self.key_cell.shape[0])

    def shown_cue(self) -> np.ndarray:
        """int64[K]: the cue value each observation key shows (−1: none; a task without a cue shows none)."""
        return self.cue.key_value if self.cue is not None else -np.ones(self.num_keys, dtype=np.int64)

    def initial_states(self) -> np.ndarray:
        """States with positive probability at reset."""
        return np.flatnonzero(self.initial > 0)

    def starts(self) -> np.ndarray:
        """int64[count]: the start state of each hidden value, in the hidden set's order."""
        states = self.initial_states()
        out = np.empty(self.hidden.count, dtype=np.int64)
        out[self.value[states]] = states
        return out

    def param_dict(self) -> dict[str, Any]:
        """The variant's parameters and its step limit, as plain data for reports and manifests."""
        return {**self.params.to_dict(), "max_steps": self.horizon}
