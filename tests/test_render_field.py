"""Field observations: marks land on their cell's tile only, the view never depends on the
path, observation classes follow what the agent sees, and only the ground truth draws the path."""

from __future__ import annotations

import numpy as np
import pytest

import taskgen
from taskgen.generate.paths import OFF
from taskgen.render import PathPictures, key_classes, path_observation_set
from taskgen.render.palette import MARK, PATH, PATH_END
from taskgen.render.topdown import tile_boxes

from conftest import field_spec_text


def _built(observation, **fields):
    spec = taskgen.load_spec_text(field_spec_text(observation=observation, **fields))
    model = taskgen.build_model(spec)
    obs = path_observation_set(model, spec.observation)
    return model, obs, obs.marks


@pytest.mark.parametrize("view", ["full", "window"])
def test_a_mark_paints_the_floor_of_its_own_tile_only(view):
    """Marking one cell changes exactly the floor pixels of that cell's tile (its box from
    tile_boxes), all to the mark colour; in the window view a cell outside the window changes
    nothing (common practice)."""
    model, obs, overlay = _built({"vector": None, "pixels": {"height": 60, "width": 48, "view": view, "window": 3}},
                                 width=4, height=5)
    agent = np.array([model.paths.num_cells - 2])                 # bottom row
    for cell, visible in ((agent[0] - 4, True), (0, view == "full")):
        frames = {"pixels": obs.pixels[agent].copy()}
        marked = np.zeros((1, model.paths.num_cells), dtype=bool)
        marked[0, cell] = True
        overlay.apply(frames, agent, marked)
        changed = (frames["pixels"][0] != obs.pixels[agent[0]]).any(axis=2)
        assert changed.any() == visible
        if visible:
            boxes = tile_boxes(model, 60, 48, view, 3)
            dr, dc = model.layout.cells[cell] - model.layout.cells[agent[0]] + 1   # its place in the window
            top, bottom, left, right = boxes[cell if view == "full" else dr * 3 + dc]
            inside = np.zeros_like(changed)
            inside[top:bottom, left:right] = True
            assert not (changed & ~inside).any()
            assert (frames["pixels"][0][changed] == MARK).all()


def test_the_agent_view_is_rendered_without_the_path():
    """The view tables come from a model whose layout and observation keys hold no path (a key is a
    cell), and every path's model gives the agent the same observation keys in the same states
    (common practice)."""
    model, obs, overlay = _built({"vector": {"position": "one_hot"}, "pixels": {"height": 32, "width": 32}},
                                 width=5, height=6, turns=2, start="random")
    rule = model.paths
    assert not {"path", "path_end"} & set(model.layout.sites)
    assert np.array_equal(model.key_cell, np.arange(rule.num_cells))
    kind, start = rule.draw(np.random.default_rng(0).random((5, rule.draws)))
    for k, s in zip(kind, start):
        path = rule.path_model(k, int(s))
        assert np.array_equal(path.obs_key, rule.state_cell) and (k != OFF).any()


def test_observation_classes_follow_what_the_agent_sees():
    """With one-hot positions every cell is its own class; with neither position nor walls every
    cell looks the same; with walls only, cells group by which field edges they touch (9 kinds
    of cell on a field at least 3 × 3: corners, edges, interior; common practice)."""
    for vector, expect in (({"position": "one_hot"}, 20), ({"position": "none", "walls": False}, 1),
                           ({"position": "none", "walls": True}, 9)):
        model, obs, overlay = _built({"vector": vector}, width=4, height=5)
        assert np.unique(key_classes(obs)).size == expect


def test_only_the_ground_truth_draws_the_path():
    """The truth picture fills every path cell (its end in the end colour); the agent picture
    has neither colour; a marked cell shows the mark colour in both (common practice)."""
    model, _, _ = _built(None, width=5, height=6, turns=2, start="random")
    kind, start = model.paths.draw(np.random.default_rng(3).random((1, model.paths.draws)))
    pictures = PathPictures(model, cell_px=10)
    marked = np.zeros(model.paths.num_cells, dtype=bool)
    off = int(np.flatnonzero(kind[0] == OFF)[0])
    marked[off] = True
    truth = pictures.truth(kind[0], int(start[0]), marked)
    agent = pictures.agent(int(start[0]), marked)
    for picture, shows in ((truth, True), (agent, False)):
        assert (picture == PATH).all(axis=2).any() == shows
        assert (picture == PATH_END).all(axis=2).any() == shows
        assert (picture == MARK).all(axis=2).any()
    on_cells = 0
    for cell in np.flatnonzero(kind[0] != OFF):
        r, c = model.layout.cells[cell]
        left, top, right, bottom = pictures.renderer.box(int(r), int(c))
        colour = PATH_END if kind[0][cell] == 2 else PATH
        on_cells += (truth[top:bottom + 1, left:right + 1] == colour).all(axis=2).any()
    assert on_cells == int((kind[0] != OFF).sum())


def test_the_grid_view_marks_cells_in_its_window_in_the_mark_channel():
    """A field's grid view has the nine FIELD_GRID_CHANNELS; a marked cell inside the window sets
    the mark channel at its place, one outside sets nothing, and no goal is ever shown (common practice)."""
    from taskgen.render.marks import FIELD_GRID_CHANNELS, MARK_CHANNEL
    model, obs, overlay = _built({"vector": None, "grid": {"size": 3}}, width=4, height=5)
    assert obs.grid.shape[1:] == (3, 3, len(FIELD_GRID_CHANNELS)) and not obs.grid[..., 5].any()
    agent = np.array([9])                                  # row 2, column 1
    marked = np.zeros((1, model.paths.num_cells), dtype=bool)
    marked[0, [10, 0]] = True                              # east of the agent; far away
    parts = {"grid": obs.grid[agent].copy()}
    overlay.apply(parts, agent, marked)
    expect = np.zeros((3, 3), dtype=np.uint8)
    expect[1, 2] = 1
    assert np.array_equal(parts["grid"][0, ..., MARK_CHANNEL], expect)


def test_a_mark_colour_from_the_spec_is_drawn_and_reserved_colours_are_refused():
    """mark.colour paints marks in pixels; the floor, wall and agent colours are refused (the
    schema's list of them equals the palette's) (common practice)."""
    from taskgen.render.palette import AGENT, FLOOR, WALL
    model, obs, overlay = _built({"vector": None, "pixels": {"height": 40, "width": 40}}, width=3, height=4,
                                 mark={"steps": 2, "colour": [10, 200, 90]})
    frames = {"pixels": obs.pixels[[10]].copy()}
    marked = np.zeros((1, model.paths.num_cells), dtype=bool)
    marked[0, 0] = True
    overlay.apply(frames, np.array([10]), marked)
    assert (frames["pixels"][0] == (10, 200, 90)).all(axis=2).any()
    for colour in (FLOOR, WALL, AGENT):
        with pytest.raises(taskgen.SpecError, match="a colour other than"):
            taskgen.load_spec_text(field_spec_text(mark={"colour": list(colour)}))
    assert taskgen.spec.schema.Mark().colour == list(MARK)


def test_a_mark_is_a_ring_with_the_floor_showing_inside():
    """A mark paints a ring on its tile: every painted pixel's centre lies within the circle inscribed
    in the tile and at least 1.2 px from its centre, the pixels round the tile's centre keep the floor
    colour, and the ring reaches the inscribed circle's edge (common practice: an outline reads as a
    sign laid on the floor, not as a different floor)."""
    from taskgen.render.palette import FLOOR
    model, obs, overlay = _built({"vector": None, "pixels": {"height": 132, "width": 120}}, width=4, height=5)
    agent = np.array([model.paths.num_cells - 1])
    cell = 5
    frames = {"pixels": obs.pixels[agent].copy()}
    marked = np.zeros((1, model.paths.num_cells), dtype=bool)
    marked[0, cell] = True
    overlay.apply(frames, agent, marked)
    top, bottom, left, right = tile_boxes(model, 132, 120)[cell]
    tile = frames["pixels"][0][top:bottom, left:right]
    painted = (tile == MARK).all(axis=2)
    y, x = np.nonzero(painted)
    h, w = bottom - top, right - left
    distance = np.hypot(y + 0.5 - h / 2, x + 0.5 - w / 2)
    outer = min(h, w) / 2
    assert painted.any() and distance.max() <= outer and distance.min() >= 1.2 and distance.max() >= outer - 1
    assert (tile[h // 2 - 1:h // 2 + 1, w // 2 - 1:w // 2 + 1] == FLOOR).all()


@pytest.mark.parametrize("view", ["full", "window"])
def test_the_paint_table_paints_what_the_tiles_and_floor_masks_paint(view):
    """Marks painted from the precomputed paint table equal marks painted from the tiles and the
    agent's floor mask, for random sets of marks off the agent's cell in many environments at once
    (common practice: a fast path checked against the plain one)."""
    import dataclasses
    model, obs, overlay = _built({"vector": None, "pixels": {"height": 52, "width": 44, "view": view, "window": 5}},
                                 width=5, height=6)
    assert overlay.paint is not None
    plain = dataclasses.replace(overlay, paint=None)
    rng = np.random.default_rng(4)
    C = model.paths.num_cells
    agent = rng.integers(C, size=300)
    marked = rng.random((300, C)) < 0.3
    marked[np.arange(300), agent] = False
    fast, slow = {"pixels": obs.pixels[agent].copy()}, {"pixels": obs.pixels[agent].copy()}
    overlay.apply(fast, agent, marked)
    plain.apply(slow, agent, marked)
    assert np.array_equal(fast["pixels"], slow["pixels"]) and not np.array_equal(fast["pixels"], obs.pixels[agent])
