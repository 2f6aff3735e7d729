"""Renderers: vector blocks and the top-down picture read the model's observation keys."""

from __future__ import annotations

import numpy as np

from taskgen import load_spec_text, make_variant, compile_variant
from taskgen.render import TopDownRenderer, vector_layout
from taskgen.render.lamp import LAMP_OFF, lamp_disc
from taskgen.render.palette import CUE_COLOURS, WALL

from conftest import corridor_spec_text


def _model_and_spec(**vector):
    spec = load_spec_text(corridor_spec_text(length=3, values=3, vector=vector))
    return compile_variant(make_variant(spec, 0)), spec


def test_coordinates_are_scaled_cell_positions():
    """position: coordinates gives (row, column) / (shape − 1), so corners map to 0 and 1."""
    model, spec = _model_and_spec(position="coordinates", walls=False, cue=False)
    vec = vector_layout(model, spec.observation.vector)
    rows, cols = model.layout.shape
    expected = model.layout.cells[model.key_cell] / np.array([rows - 1, cols - 1])
    assert np.allclose(vec.table, expected)
    assert vec.table.min() == 0.0 and vec.table.max() == 1.0


def test_wall_bits_match_the_layout():
    """Wall bits are set exactly where a move would leave the open cells."""
    model, spec = _model_and_spec(position="none", cue=False)
    vec = vector_layout(model, spec.observation.vector)
    assert np.array_equal(vec.table.astype(bool), model.layout.neighbour[model.key_cell] < 0)


def test_empty_vector_has_zero_width():
    """With every block switched off the table is empty, not an error."""
    model, spec = _model_and_spec(position="none", cue=False, walls=False)
    assert vector_layout(model, spec.observation.vector).size == 0


def test_topdown_lamp_shows_the_cue_colour():
    """While the cue is visible, the lamp (a disc at the right end of the strip) is the cue's
    Okabe–Ito colour; otherwise it is the dark unlit lamp. The rest of the strip is always wall."""
    model, _ = _model_and_spec()
    renderer = TopDownRenderer(model, cell_px=10)
    disc = lamp_disc(10, renderer.background.shape[1])
    for key in range(model.num_keys):
        strip = renderer.frame(key)[:10]
        cue = model.cue.key_value[key]
        assert (strip[disc] == (CUE_COLOURS[cue] if cue >= 0 else LAMP_OFF)).all()
        assert (strip[~disc] == WALL).all()
    rows, cols = model.layout.shape
    assert strip.shape[1] == (cols + 2) * 10 and renderer.frame(0).shape == ((rows + 3) * 10, (cols + 2) * 10, 3)


def test_goal_flags_mark_the_goal_the_agent_stands_on():
    """The goals block has one bit per goal, set exactly on that goal's cell."""
    model, spec = _model_and_spec(goals=True, cue=False, walls=False, position="none")
    vec = vector_layout(model, spec.observation.vector)
    goals = model.layout.sites["goal"]
    for key in range(model.num_keys):
        expected = (goals == model.key_cell[key]).astype(np.float32)
        assert np.array_equal(vec.table[key, vec.blocks["goals"]], expected)
