"""Stage 3 of the pipeline: a validated spec and a seed → one concrete variant."""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from .errors import LayoutError
from .generate import GridLayout, corridor_layout
from .generate.grid import grid_from_cells
from .generate.paths import FieldFrame, PathShape
from .generate.maze import backtracker_maze, braid, dead_ends, maze_layout, rooms_maze, wilson_maze
from .generate.placement import PlacementError, PlacementRules, place
from .limits import check_bytes, check_work
from .spec import Spec

# Streams spawned from a variant seed, so each kind of draw has its own and adding a draw to
# one never shifts another.
_PARAMS_STREAM = 0
_LAYOUT_STREAM = 1
_PLACEMENT_STREAM = 2
# stream 3 is the field analyses' sample of paths (analysis/fields.py, PATHS_STREAM)


@dataclass(frozen=True, eq=False)
class Variant:
    """One draw of a spec: concrete parameter values and the layout they give."""

    spec: Spec
    seed: int
    params: dict[str, Any]
    layout: GridLayout

    @property
    def variant_id(self) -> str:
        """Stable name of this variant: ``<spec name>-s<seed>``."""
        return f"{self.spec.name}-s{self.seed}"


MAX_LAYOUT_ATTEMPTS = 50   # layouts drawn for one variant before its placement rules are declared unmeetable


def variant_rng(seed: int, stream: int, attempt: int = 0) -> np.random.Generator:
    """The generator of one named stream of a variant seed (and of one layout attempt)."""
    key = (stream,) if attempt == 0 else (stream, attempt)
    return np.random.default_rng(np.random.SeedSequence(entropy=seed, spawn_key=key))


def make_variant(spec: Spec, seed: int = 0) -> Variant:
    """Draw the variant of ``spec`` that ``seed`` names (same spec and seed, same variant)."""
    if not isinstance(seed, (int, np.integer)) or isinstance(seed, bool) or seed < 0:
        raise ValueError(f"variant seed must be an integer ≥ 0, got {seed!r}")
    seed = int(seed)
    if spec.layout.family == "maze":
        return _maze_variant(spec, seed)
    if spec.layout.family == "field":
        return _field_variant(spec, seed)
    rng = variant_rng(seed, _PARAMS_STREAM)
    corridor = spec.layout.corridor
    params = {
        "length": corridor.length.sample(rng),
        "arm_length": corridor.arm_length.sample(rng),
        "width": corridor.width,
        "cue_values": spec.cue.values,
        "visible_steps": spec.cue.visible_steps,
    }
    _check_size(spec, params, f"{spec.name}-s{seed}")
    layout = corridor_layout(params["length"], params["arm_length"], params["cue_values"], params["width"])
    return Variant(spec=spec, seed=seed, params=params, layout=layout)


def _maze_variant(spec: Spec, seed: int) -> Variant:
    """Draw a maze's size, carve it, braid it and place its start, goals and cue site."""
    maze = spec.layout.maze
    what = f"{spec.name}-s{seed}"
    rng = variant_rng(seed, _PARAMS_STREAM)
    params: dict[str, Any] = {"width": maze.width.sample(rng), "height": maze.height.sample(rng),
                              "generator": maze.generator, "braid": maze.braid,
                              "cue_values": spec.cue.values, "visible_steps": spec.cue.visible_steps}
    cells = params["width"] * params["height"]
    horizon = spec.episode.max_steps
    if horizon == "auto":   # a path in a maze visits each cell at most once
        horizon = int(np.ceil(spec.episode.max_steps_factor * cells))
    n = 0 if spec.cue.display == "site" else spec.cue.visible_steps
    m = spec.cue.sequence_length
    # progress 0 … m−1 can be anywhere; the two end states of each goal add little
    check_work(what, cells * max(m * n + 1, 2) * m * spec.cue.values ** m, 4, max(horizon, 1))
    _check_tables(spec, what, cells, params["height"], params["width"])
    h, w = params["height"], params["width"]
    fixed = [maze.start_cell] if maze.start_cell is not None else []
    fixed += list(maze.goal_cells or [])
    for r, c in fixed:
        if not (0 <= r < h and 0 <= c < w):
            raise LayoutError(f"{what} ({w}×{h} {maze.generator} maze, variant seed {seed}): cell [{r}, {c}] "
                              "is outside the maze")
    if maze.goal_cells is not None and len(maze.goal_cells) != spec.cue.values:
        raise LayoutError(f"{what} ({w}×{h} {maze.generator} maze, variant seed {seed}): goal_cells names "
                          f"{len(maze.goal_cells)} cells for {spec.cue.values} cue values")
    rules = PlacementRules(start=maze.start, goals=spec.cue.values,
                           goals_in_dead_ends=maze.goals_in_dead_ends,
                           goals_hidden_from_start=maze.goals_hidden_from_start,
                           min_start_distance=maze.min_goal_distance,
                           min_goal_spacing=maze.min_goal_spacing,
                           min_branch_distance=maze.min_branch_distance,
                           cue_site=maze.cue_site if spec.cue.display == "site" else "",
                           start_cell=None if maze.start_cell is None else maze.start_cell[0] * w + maze.start_cell[1],
                           goal_cells=None if maze.goal_cells is None else tuple(r * w + c for r, c in maze.goal_cells))
    for attempt in range(MAX_LAYOUT_ATTEMPTS):   # redraw the maze until the rules can be met
        layout_rng = variant_rng(seed, _LAYOUT_STREAM, attempt)
        try:
            passages = carve(layout_rng, maze.generator, h, w, maze.room_size, maze.braid)
            neighbour = maze_layout(passages, 0, []).neighbour
            start, goals, cue_site = place(variant_rng(seed, _PLACEMENT_STREAM, attempt), neighbour,
                                           (h, w), rules)
            break
        except PlacementError as exc:
            problem = str(exc)
        except ValueError as exc:
            raise LayoutError(f"{what} ({w}×{h} {maze.generator} maze, variant seed {seed}): {exc}") from None
    else:
        raise LayoutError(f"{what} ({w}×{h} {maze.generator} maze, variant seed {seed}): in "
                          f"{MAX_LAYOUT_ATTEMPTS} layouts drawn, the placement rules were never met; "
                          f"in the last, {problem}")
    params["layout_attempt"] = attempt
    params["dead_ends"] = int(dead_ends(passages).size)
    return Variant(spec=spec, seed=seed, params=params, layout=maze_layout(passages, start, goals, cue_site))


def field_geometry(params: dict[str, Any]) -> tuple[FieldFrame, PathShape]:
    """The frame and path shape a field variant's parameters give."""
    frame = FieldFrame(params["height"], params["width"], params["start_side"])
    return frame, PathShape(frame.depth, frame.across, params.get("turns", 0), params.get("path_width", 1),
                            params["start"])


def _field_variant(spec: Spec, seed: int) -> Variant:
    """Draw a field's size and turns; its open layout is fixed, its paths are drawn per episode."""
    field = spec.layout.field
    what = f"{spec.name}-s{seed}"
    rng = variant_rng(seed, _PARAMS_STREAM)
    params: dict[str, Any] = {"width": field.width.sample(rng), "height": field.height.sample(rng),
                              "start_side": field.path.start_side, "start": field.path.start}
    if field.maze is None:    # with walls the passages decide the path's turns and width
        params.update(turns=field.path.turns.sample(rng), path_width=field.path.width)
    frame, shape = field_geometry(params)
    problem = shape.problem()
    if field.maze is not None:
        problem = None if frame.depth >= 2 else \
            f"a path needs at least 2 rows from side to side, the field has {frame.depth}"
    if problem is not None:
        shape_words = f"{params['turns']} turns" if field.maze is None else f"{field.maze.generator} walls"
        raise LayoutError(f"{what} ({params['width']}×{params['height']} field, {shape_words}, "
                          f"variant seed {seed}): {problem}")
    rows, cols = params["height"], params["width"]
    horizon = spec.episode.max_steps
    if horizon == "auto":   # a path through walls visits each cell at most once
        longest = rows * cols - 1 if field.maze is not None else shape.longest
        horizon = int(np.ceil(spec.episode.max_steps_factor * longest))
    levels = (field.fall.max_falls or 0) + 1
    check_work(what, rows * cols * levels, 4, max(horizon, 1))
    obs = spec.observation
    cells = rows * cols
    if obs.vector is not None:
        check_bytes(f"{what}: the vector table", cells * (2 * cells + 4) * 4)
    if obs.pixels is not None:
        check_bytes(f"{what}: the pixel table", cells * obs.pixels.height * obs.pixels.width * 3)
    check_bytes(f"{what}: a top-down picture", (rows + 3) * (cols + 2) * 12 * 12 * 3)
    index = frame.cell_index()
    if field.maze is None:
        layout = grid_from_cells((rows, cols), [(r, c) for r in range(rows) for c in range(cols)], (0, 0), {})
    else:
        try:
            passages = carve(variant_rng(seed, _LAYOUT_STREAM), field.maze.generator, rows, cols,
                             field.maze.room_size, field.maze.braid)
        except ValueError as exc:
            raise LayoutError(f"{what} ({cols}×{rows} field with {field.maze.generator} walls, variant seed "
                              f"{seed}): {exc}") from None
        layout = maze_layout(passages, 0, [])
        params.update(walls=field.maze.generator, braid=field.maze.braid, dead_ends=int(dead_ends(passages).size))
    sides = {"start_side": index[0], "far_side": index[-1]}
    layout = replace(layout, start=int(index[0, 0]), sites=sides)
    return Variant(spec=spec, seed=seed, params=params, layout=layout)


def carve(rng: np.random.Generator, generator: str, height: int, width: int, room_size: int,
          fraction: float) -> np.ndarray:
    """Passages of one maze from the named generator, braided by ``fraction``."""
    if generator == "uniform":
        passages = wilson_maze(rng, height, width)
    elif generator == "backtracker":
        passages = backtracker_maze(rng, height, width)
    else:
        passages = rooms_maze(rng, height, width, room_size)
    return braid(rng, passages, fraction) if fraction > 0 else passages


def _check_size(spec: Spec, params: dict[str, Any], what: str) -> None:
    """Estimate the compiled sizes from the numbers alone and refuse what is over the caps."""
    k, n = params["cue_values"], params["visible_steps"]
    cells = params["length"] * params["width"] + (2 * k - 1) + k * params["arm_length"]
    longest = params["length"] + (k - 1) + params["arm_length"]       # farthest arm end
    horizon = spec.episode.max_steps
    if horizon == "auto":
        horizon = int(np.ceil(spec.episode.max_steps_factor * longest))
    m = spec.cue.sequence_length
    check_work(what, cells * (m * n + 1) * m * k ** m, 4, max(horizon, 1))
    rows, cols = max(2 * k - 1, k - 1 + params["width"]), params["length"] + params["arm_length"] + 1
    _check_tables(spec, what, cells, rows, cols)


def _check_tables(spec: Spec, what: str, cells: int, rows: int, cols: int) -> None:
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
