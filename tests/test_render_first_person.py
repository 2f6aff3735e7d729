"""First-person raycasting and heading-based movement."""

from __future__ import annotations

import warnings

import gymnasium as gym
import numpy as np
import pytest
import yaml
from gymnasium.utils.env_checker import check_env

import taskgen
from taskgen import compile_variant, load_spec_text, make_variant
from taskgen.render.first_person import cast, first_person_table, lamp_rows
from taskgen.render.grid import grid_table

from conftest import CUE_SPECS


def _room(size=9, start=(4, 1), height=60):
    """An empty square room: a rooms maze whose only room is the whole maze."""
    spec = load_spec_text(yaml.safe_dump({
        "format_version": 1, "name": "room", "agent": {"actions": "turns"},
        "layout": {"maze": {"width": size, "height": size, "generator": "rooms", "room_size": size,
                            "start_cell": list(start), "goal_cells": [[0, size - 1], [size - 1, size - 1]]}},
        "cue": {"values": 2}, "observation": {"vector": None, "first_person": {"height": height, "width": 64}}}))
    return compile_variant(make_variant(spec, 0))


@pytest.mark.parametrize("column", [1, 2, 4, 6, 7])
def test_wall_height_is_h_over_d_without_fisheye(column):
    """Facing a flat wall d cells away (from the cell centre), the rays meeting it report the
    same perpendicular distance d, and the centre column is H/d pixels tall within one pixel:
    the traversal of Amanatides & Woo (Eurographics 1987) gives perpendicular distances, so
    there is no fisheye bowing."""
    H, size = 60, 9
    model = _room(size, start=(4, column), height=H)
    d = size - column - 0.5
    distance, _, _ = cast(model, np.array([model.layout.start]), np.array([1]), 64, 66.0)
    assert np.allclose(distance[0, 16:48], d)
    frames = first_person_table(model, H, 64, 66.0)
    key = np.flatnonzero((model.key_cell == model.layout.start) & (model.key_heading == 1) & (model.cue.key_value < 0))[0]
    centre = frames[key][:, 32]
    lamp = lamp_rows(H)                          # the strip along the top holds the cue lamp, not the scene
    wall = [r for r in range(lamp, H) if tuple(centre[r]) not in ((8, 8, 12), (20, 20, 28))]   # not sky, not floor
    tall = min(H, H / d)
    assert abs(len(wall) - min(tall, H / 2 + tall / 2 - lamp)) <= 1


def test_four_turns_return_the_same_frame():
    """Turning left (or right) four times brings back the same first-person frame."""
    env = taskgen.make("orchard-hives", agent__actions="turns", observation__vector=None,
                       observation__first_person={"height": 32, "width": 40})
    env.reset(seed=0)
    for _ in range(4):       # let the cue's display window pass first (turning right in place)
        before, *_ = env.step(1)
    for action in (1, 2):
        for _ in range(4):
            after, *_ = env.step(action)
        assert np.array_equal(after, before)


def test_turns_change_heading_and_forward_moves():
    """Actions 0 forward, 1 turn right, 2 turn left (clockwise first, as the headings N, E, S, W
    run): the turns change only the heading; forward moves one cell where open (common practice)."""
    model = taskgen.build_model("lantern-hall", agent__actions="turns")
    assert model.action_names == ("forward", "turn_right", "turn_left") and model.num_actions == 3
    s = int(model.initial_states()[0])
    assert model.heading[s] == 1                                  # facing east, down the hall
    forward, right, left = model.next_state[s]
    assert model.cell[left] == model.cell[s] and model.heading[left] == 0
    assert model.cell[right] == model.cell[s] and model.heading[right] == 2
    assert model.cell[forward] == model.layout.neighbour[model.cell[s], 1]


def test_egocentric_grid_turns_with_the_agent():
    """In the egocentric grid, what lies ahead is always at the top: facing east, the east
    neighbour appears above the agent."""
    model = taskgen.build_model("orchard-hives", agent__actions="turns")
    north_up = grid_table(model, 3)
    ego = grid_table(model, 3, egocentric=True)
    for key in range(model.num_keys):
        heading = model.key_heading[key]
        ahead = {0: (0, 1), 1: (1, 2), 2: (2, 1), 3: (1, 0)}[int(heading)]
        assert ego[key, 0, 1, 0] == north_up[key][ahead][0]
        assert ego[key, 1, 1, 1] == north_up[key, 1, 1, 1 + heading]   # "wall ahead" bit


@pytest.mark.parametrize("spec_name", CUE_SPECS)
def test_first_person_envs_pass_the_checker_and_batch_equally(spec_name):
    """Every example runs with turns and a first-person view: gymnasium's checker passes, and the
    batch equals a SyncVectorEnv of single envs."""
    over = dict(agent__actions="turns", observation__first_person={"height": 24, "width": 32},
                observation__grid={"size": 3, "frame": "egocentric"})
    env = taskgen.make(spec_name, **over)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        warnings.filterwarnings("ignore", message=".*render modes.*")
        check_env(env)
    ours = taskgen.make_vec(spec_name, 3, **over)
    theirs = gym.vector.SyncVectorEnv([lambda: taskgen.make(spec_name, **over)] * 3)
    o1, _ = ours.reset(seed=4)
    o2, _ = theirs.reset(seed=4)
    rng = np.random.default_rng(0)
    for _ in range(300):
        for key in o1:
            assert np.array_equal(o1[key], o2[key])
        a = rng.integers(3, size=3)
        (o1, r1, *_), (o2, r2, *_) = ours.step(a), theirs.step(a)
        assert np.array_equal(r1, r2)


def test_first_person_needs_turns():
    """A first-person view without headings is refused with the reason."""
    with pytest.raises(taskgen.SpecError, match="expected agent.actions 'turns' for a first-person"):
        taskgen.make("lantern-hall", observation__first_person={"height": 16, "width": 16})
