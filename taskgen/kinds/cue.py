"""The cue kind: corridors and mazes whose hidden value is a cue shown early and needed late."""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any, Sequence

import numpy as np

from ..analysis import Report, analyse_cue, best_memoryless, optimal_policy
from ..analysis.policysearch import NODES
from ..analysis.cue import CueDetailsJSON
from ..analysis.fingerprint import fingerprint
from ..envs.core import Core
from ..envs.tables import TableCore
from ..errors import LayoutError
from ..generate import corridor_layout
from ..generate.maze import carve, count_spanning_trees, dead_ends, maze_layout
from ..generate.placement import PlacementError, PlacementRules, place
from ..limits import check_bytes, check_work
from ..model import TaskModel, compile_cue
from ..render import ObservationSet, observation_set
from ..render.palette import AGENT, CUE_COLOURS, FLOOR, WALL
from ..render.pictures import cue_sequence
from ..render.seen import distractors_seen
from ..spec import CueTaskSpec, Spec
from ..spec.params import IntParam
from ..spec.schema import Maze, Observation
from ..variant import (LAYOUT_STREAM, PARAMS_STREAM, PLACEMENT_STREAM, Variant, horizon, variant_name,
                       variant_rng)
from . import Policy

MAX_LAYOUT_ATTEMPTS = 50   # layouts drawn for one variant before its placement rules are declared unmeetable


@dataclass(frozen=True)
class CorridorParams:
    """A corridor variant's drawn lengths and the cue it shows."""

    length: int
    arm_length: int
    width: int
    cue_values: int
    visible_steps: int

    def to_dict(self) -> dict[str, Any]:
        """The values as plain data."""
        return asdict(self)


@dataclass(frozen=True)
class MazeParams:
    """A maze variant's drawn size, how it was carved and placed, and the cue it shows."""

    width: int
    height: int
    generator: str
    braid: float
    cue_values: int
    visible_steps: int
    layout_attempt: int
    dead_ends: int

    def to_dict(self) -> dict[str, Any]:
        """The values as plain data."""
        return asdict(self)


def _cue_spec(spec: Spec) -> CueTaskSpec:
    if not isinstance(spec, CueTaskSpec):
        raise ValueError(f"{spec.name} is not a cue task")
    return spec


def draw_corridor(spec: CueTaskSpec, seed: int) -> Variant:
    """Draw a corridor's lengths and lay it out."""
    corridor = spec.layout.corridor
    assert corridor is not None
    rng = variant_rng(seed, PARAMS_STREAM)
    params = CorridorParams(length=corridor.length.sample(rng), arm_length=corridor.arm_length.sample(rng),
                            width=corridor.width, cue_values=spec.cue.values, visible_steps=spec.cue.visible_steps)
    k, n, m = params.cue_values, params.visible_steps, spec.cue.sequence_length
    cells = params.length * params.width + (2 * k - 1) + k * params.arm_length
    longest = params.length + (k - 1) + params.arm_length       # the farthest arm end
    what = variant_name(spec, seed)
    check_work(what, cells * (m * n + 1) * m * k ** m, 4, horizon(spec.episode, longest))
    rows, cols = max(2 * k - 1, k - 1 + params.width), params.length + params.arm_length + 1
    _check_tables(spec, what, cells, rows, cols)
    layout = corridor_layout(params.length, params.arm_length, k, params.width)
    return Variant(spec=spec, seed=seed, params=params, layout=layout)


def draw_maze(spec: CueTaskSpec, seed: int) -> Variant:
    """Draw a maze's size, carve it, braid it and place its start, goals and cue site (redrawn until
    the placement rules can be met)."""
    maze = spec.layout.maze
    assert maze is not None
    what = variant_name(spec, seed)
    rng = variant_rng(seed, PARAMS_STREAM)
    w, h = maze.width.sample(rng), maze.height.sample(rng)
    words = f"{w}×{h} {maze.generator} maze"
    cells = w * h
    n = 0 if spec.cue.display == "site" else spec.cue.visible_steps
    m = spec.cue.sequence_length
    # a path in a maze visits each cell at most once; progress 0 … m−1 can be anywhere, the two end
    # states of each goal add little
    check_work(what, cells * max(m * n + 1, 2) * m * spec.cue.values ** m, 4, horizon(spec.episode, cells))
    _check_tables(spec, what, cells, h, w)
    fixed = [maze.start_cell] if maze.start_cell is not None else []
    fixed += list(maze.goal_cells or [])
    for r, c in fixed:
        if not (0 <= r < h and 0 <= c < w):
            raise LayoutError.for_variant(what, words, seed, f"cell [{r}, {c}] is outside the maze")
    if maze.goal_cells is not None and len(maze.goal_cells) != spec.cue.values:
        raise LayoutError.for_variant(what, words, seed, f"goal_cells names {len(maze.goal_cells)} cells for "
                                      f"{spec.cue.values} cue values")
    rules = _placement_rules(spec, maze, w)
    problem = ""
    for attempt in range(MAX_LAYOUT_ATTEMPTS):   # redraw the maze until the rules can be met
        try:
            passages = carve(variant_rng(seed, LAYOUT_STREAM, attempt), maze.generator, h, w, maze.room_size,
                             maze.braid)
            neighbour = maze_layout(passages, 0, []).neighbour
            start, goals, cue_site = place(variant_rng(seed, PLACEMENT_STREAM, attempt), neighbour, (h, w), rules)
            break
        except PlacementError as exc:
            problem = str(exc)
        except ValueError as exc:
            raise LayoutError.for_variant(what, words, seed, str(exc)) from None
    else:
        raise LayoutError.for_variant(what, words, seed, f"in {MAX_LAYOUT_ATTEMPTS} layouts drawn, the placement "
                                      f"rules were never met; in the last, {problem}")
    params = MazeParams(width=w, height=h, generator=maze.generator, braid=maze.braid, cue_values=spec.cue.values,
                        visible_steps=spec.cue.visible_steps, layout_attempt=attempt,
                        dead_ends=int(dead_ends(passages).size))
    return Variant(spec=spec, seed=seed, params=params, layout=maze_layout(passages, start, goals, cue_site))


def _placement_rules(spec: CueTaskSpec, maze: Maze, width: int) -> PlacementRules:
    return PlacementRules(
        start=maze.start, goals=spec.cue.values, goals_in_dead_ends=maze.goals_in_dead_ends,
        goals_hidden_from_start=maze.goals_hidden_from_start, min_start_distance=maze.min_goal_distance,
        min_goal_spacing=maze.min_goal_spacing, min_branch_distance=maze.min_branch_distance,
        cue_site=maze.cue_site if spec.cue.display == "site" else "",
        start_cell=None if maze.start_cell is None else maze.start_cell[0] * width + maze.start_cell[1],
        goal_cells=None if maze.goal_cells is None else tuple(r * width + c for r, c in maze.goal_cells))


def _check_tables(spec: CueTaskSpec, what: str, cells: int, rows: int, cols: int) -> None:
    """Refuse observation tables (one row per observation key) and pictures over the byte cap."""
    k = spec.cue.values
    keys = cells * (k + 1)                     # (cell, shown cue value or none)
    obs = spec.observation
    if obs.vector is not None:
        width = k + 4 + (cells if obs.vector.position == "one_hot" else 2)
        check_bytes(f"{what}: the vector table", keys * width * 4)
    if obs.pixels is not None:
        check_bytes(f"{what}: the pixel table", keys * obs.pixels.height * obs.pixels.width * 3)
    if obs.grid is not None:
        check_bytes(f"{what}: the grid-view table", keys * obs.grid.size ** 2 * 8)
    check_bytes(f"{what}: a top-down picture", (rows + 3) * (cols + 2) * 12 * 12 * 3)


def _count(param: IntParam) -> int:
    return len(set(param.choices)) if param.choices is not None else param.high - param.low + 1


class CueKind:
    """Corridors and mazes: every cue value is in the model's tables (an enumerated hidden set)."""

    name: str = "cue"
    layouts: tuple[str, ...] = ("corridor", "maze")
    modalities: tuple[str, ...] = ("vector", "grid", "pixels", "first_person")
    pools: bool = True
    policies: dict[str, str] = {
        "optimal": "the optimal agent, which knows the hidden cue (an analysis policy, not a learner)",
        "random": "uniform-random actions",
        "chance": "the best deterministic memoryless policy (acts on the current observation only)",
    }
    legend: str = ("Each frame: what the agent saw (left: its observation drawn, every modality, decoys and lures "
                   "where they showed) and the ground truth (right: the whole map, the true cue and the goal it "
                   "names, outlined).")
    details_json: type[Any] = CueDetailsJSON

    def draw(self, spec: Spec, seed: int) -> Variant:
        """A corridor's lengths, or a maze's size, passages and placements."""
        spec = _cue_spec(spec)
        return draw_maze(spec, seed) if spec.layout.family == "maze" else draw_corridor(spec, seed)

    def compile(self, variant: Variant, samples: int = 0) -> TaskModel:
        """Tables over (pose, timer, progress, cue) for every cue value (nothing is sampled)."""
        return compile_cue(variant)

    def observations(self, model: TaskModel, spec: Observation) -> ObservationSet:
        """Every requested modality, per observation key (cell, heading, shown cue)."""
        return observation_set(model, spec)

    def core(self, variants: Sequence[tuple[TaskModel, ObservationSet]], num_envs: int,
             draw: bool = False) -> Core:
        """Environments stepping the stacked tables of their variants."""
        return TableCore(variants, num_envs, draw)

    def analyse(self, model: TaskModel, observations: ObservationSet | None, min_gap: float,
                budget: int = NODES) -> Report:
        """Baselines, cue needed, leaks, carried cue and the memory gap (see analysis/cue.py)."""
        return analyse_cue(model, observations.tables() if observations is not None else None, min_gap, budget)

    def fingerprint(self, model: TaskModel) -> str:
        """The canonical hash of the model's tables and layout."""
        return fingerprint(model)

    def widest(self, spec: Spec) -> dict[str, int]:
        """The widest vector blocks of any variant: one-hot position over the largest layout (a corridor
        at its longest hall and arms, a maze at its largest width and height), a goal bit per cue value."""
        spec = _cue_spec(spec)
        corridor, maze, vector = spec.layout.corridor, spec.layout.maze, spec.observation.vector
        if vector is None:
            return {}
        if corridor is not None:
            cells = corridor_layout(corridor.length.high, corridor.arm_length.high, spec.cue.values,
                                    corridor.width).num_cells
        else:
            assert maze is not None
            cells = maze.width.high * maze.height.high
        return {"position": cells, "goals": spec.cue.values} if vector.position == "one_hot" else \
            {"goals": spec.cue.values}

    def family_size(self, spec: Spec) -> int | None:
        """Corridors: combinations of length and arm length; uniform unbraided mazes of a fixed size with
        fixed start and goals: the spanning trees of the grid."""
        spec = _cue_spec(spec)
        corridor, maze = spec.layout.corridor, spec.layout.maze
        if corridor is not None:
            return _count(corridor.length) * _count(corridor.arm_length)
        assert maze is not None
        if (maze.generator == "uniform" and maze.braid == 0 and maze.width.fixed and maze.height.fixed
                and maze.start_cell is not None and maze.goal_cells is not None
                and not (spec.cue.display == "site" and maze.cue_site == "random")):
            return count_spanning_trees(maze.height.low, maze.width.low)
        return None

    def family_words(self, spec: Spec) -> str:
        """What the family size counts."""
        maze = _cue_spec(spec).layout.maze
        if maze is None:
            return "one per combination of corridor length and arm length"
        return (f"perfect mazes of {maze.width.low}×{maze.height.low} cells with fixed start and goals: the "
                "spanning trees of the grid, by the matrix-tree theorem")

    def policy(self, name: str, model: TaskModel, observations: ObservationSet, seed: int) -> Policy:
        """optimal (knows the cue), chance (the best deterministic memoryless policy) or random."""
        if name in ("optimal", "chance"):
            table = optimal_policy(model) if name == "optimal" else \
                best_memoryless(model, observations.tables()).state_policy(model.horizon)
            return lambda t, info: int(table[min(t, model.horizon - 1), info["analysis_only"]["state"]])
        rng = np.random.default_rng(seed)
        return lambda t, info: int(rng.integers(model.num_actions))

    def truth_label(self, model: TaskModel, info: dict[str, Any]) -> str:
        """The true cue (its values in order)."""
        return f"true cue {'-'.join(map(str, cue_sequence(model, info['analysis_only']['state'])))}"

    def caption(self, model: TaskModel, info: dict[str, Any], observations: ObservationSet, observation: Any) -> str:
        """Whether the cue is shown at this step, and any decoy or lure the agent saw in ``observation``."""
        assert model.cue is not None
        state = info["analysis_only"]["state"]
        seen = distractors_seen(observations, observation, int(model.obs_key[state]))
        return f" cue {'shown' if model.cue.window[state] else 'hidden'}" + "".join(f", {s} seen" for s in seen)

    def swatches(self, model: TaskModel) -> list[tuple[tuple[int, int, int], str]]:
        """The cue colours with their values (goals are outlined in them, the lamp lights in them), the
        agent, walls and floor."""
        assert model.cue is not None
        return ([(CUE_COLOURS[v % len(CUE_COLOURS)], f"cue {v}") for v in range(model.cue.values)]
                + [(AGENT, "agent"), (WALL, "wall"), (FLOOR, "floor; lamp dark: no cue (lit: the cue or a decoy)")])

    def succeeded(self, model: TaskModel, info: dict[str, Any]) -> bool:
        """Whether the episode ended in a success state."""
        return bool(model.success[info["analysis_only"]["state"]])


CUE = CueKind()
