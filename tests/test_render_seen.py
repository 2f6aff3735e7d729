"""The agent's observation made visible: drawings read back square by square equal the observation the
env returned (the env's own output is the reference), and distractors are named where they show."""

from __future__ import annotations

import numpy as np
import pytest

import taskgen
from taskgen.render.grid import GRID_CHANNELS
from taskgen.render.palette import AGENT, CUE_COLOURS, FLOOR, MARK, WALL
from taskgen.render.seen import (NOISE, OFF, ON, PAD, PER_ROW, SQUARE, distractors_seen, font, grid_picture,
                                 vector_picture)

DISTRACTED = dict(observation__distractors={"decoy_probability": 1.0, "lure_probability": 0.5})


def _label_width(obs) -> int:
    """Where the squares start: after the widest block label (as vector_picture lays them out)."""
    from PIL import Image, ImageDraw
    from taskgen.render.seen import _BLOCK_LABELS, GAP, TEXT
    probe = ImageDraw.Draw(Image.new("RGB", (1, 1)))
    return max(int(probe.textlength(_BLOCK_LABELS.get(n, n), font=font(TEXT - 2))) for n in obs.vector.blocks) + GAP


def _read_vector(picture: np.ndarray, obs) -> dict[str, list[tuple[int, int, int]]]:
    """The fill colour at the centre of every element's square, block by block."""
    left, step, y, out = _label_width(obs), SQUARE + 2, 0, {}
    for name, block in obs.vector.blocks.items():
        size = block.stop - block.start
        out[name] = [tuple(int(v) for v in picture[y + (j // PER_ROW) * step + SQUARE // 2,
                                                    left + (j % PER_ROW) * step + SQUARE // 2]) for j in range(size)]
        y += max(1, -(-size // PER_ROW)) * step + 4
    return out


@pytest.mark.parametrize("name", ["seed-cache", "hedge-chimes", "marsh-stones"])
def test_the_vector_drawing_reads_back_as_the_observation(name):
    """Along an episode of random actions, every square's colour is its element's value: cue bits lit in
    their cue colour, noise bits grey, marks in the mark colour, other elements dark (1) or light (0),
    coordinates grey between; padding (the observation mask's False) blank."""
    env = taskgen.make(name, variant=1)
    obs_set, mask = env.observations, env.observation_mask()
    vector, _ = env.reset(seed=4)
    rng = np.random.default_rng(0)
    for _ in range(30):
        picture = np.asarray(vector_picture(obs_set, vector, mask))
        read = _read_vector(picture, obs_set)
        for block_name, block in obs_set.vector.blocks.items():
            for j, (value, colour) in enumerate(zip(vector[block].tolist(), read[block_name])):
                if not mask[block.start + j]:
                    expected = PAD
                elif block_name == "cue":
                    expected = CUE_COLOURS[j] if value else OFF
                elif block_name == "noise":
                    expected = NOISE if value else OFF
                elif block_name == "marks":
                    expected = MARK if value else OFF
                else:
                    expected = tuple(round(a + (b - a) * value) for a, b in zip(OFF, ON))
                assert colour == expected, (block_name, j, value)
        vector, _, terminated, truncated, _ = env.step(int(rng.integers(env.action_space.n)))
        if terminated or truncated:
            vector, _ = env.reset()


def test_the_grid_drawing_reads_back_as_the_grid_view():
    """Each cell of a drawn 5×5 grid view: closed cells in the wall colour, the agent's cell white at its
    centre, goals in their cue colour, open cells floor at a point off-centre; with turns, a wedge."""
    for turns in (False, True):
        env = taskgen.make("orchard-hives", observation__vector=None, observation__grid={"size": 5},
                           **({"agent": {"actions": "turns"}} if turns else {}))
        grid, _ = env.reset(seed=2)
        px = 20
        picture = np.asarray(grid_picture(grid, px, headings=turns))
        ch = {n: i for i, n in enumerate(GRID_CHANNELS)}
        for r in range(5):
            for c in range(5):
                centre = tuple(picture[r * px + px // 2, c * px + px // 2])
                corner = tuple(picture[r * px + px // 2 + px // 4, c * px + px // 2 - px // 4 - 1])
                if not grid[r, c, ch["open"]]:
                    assert centre == WALL
                elif grid[r, c, ch["agent"]]:
                    assert centre == AGENT
                elif grid[r, c, ch["goal"]]:
                    assert centre == CUE_COLOURS[grid[r, c, ch["goal"]] - 1]
                elif not grid[r, c, ch["cue"]]:
                    assert corner == FLOOR


def test_decoys_are_named_with_the_value_the_agent_saw():
    """With decoys on every step where the cue is hidden, each such step names a decoy whose value is the
    cue bit lit in the observation (and the grid's agent cell agrees); steps where the cue shows name none;
    without distractors nothing is named (the noise-free table row is the reference)."""
    env = taskgen.make("lantern-hall", observation__grid={"size": 3}, analysis_info=True, **DISTRACTED)
    obs, info = env.reset(seed=0)
    cue = env.observations.vector.blocks["cue"]
    named = 0
    for t in range(12):
        state = info["analysis_only"]["state"]
        key = int(env.model.obs_key[state])
        seen = distractors_seen(env.observations, obs, key)
        decoys = [s for s in seen if s.startswith("decoy")]
        if env.model.cue.window[state]:
            assert not decoys
        else:
            assert decoys == [f"decoy {int(np.argmax(obs['vector'][cue]))}"]
            assert obs["grid"][1, 1, GRID_CHANNELS.index("cue")] == int(decoys[0].split()[1]) + 1
            named += 1
        obs, _, terminated, truncated, info = env.step(1)
        if terminated or truncated:
            break
    assert named >= 3
    plain = taskgen.make("lantern-hall", observation__grid={"size": 3}, analysis_info=True)
    obs, info = plain.reset(seed=0)
    for _ in range(8):
        assert distractors_seen(plain.observations, obs, int(plain.model.obs_key[info["analysis_only"]["state"]])) == []
        obs, *_, info = plain.step(1)


def test_a_gallery_frame_draws_the_decoy_the_agent_saw():
    """In a recorded episode with decoys, a step that names a decoy shows that value's cue colour in the
    agent's panel while its truth label names the true cue; the caption of the last step says why the
    episode ended."""
    from taskgen.tools.playback import GAP, record
    from taskgen.factory import resolve_spec
    spec = resolve_spec(str(taskgen.bundled_specs()["lantern-hall"]),
                                **{"observation.distractors.decoy_probability": 1.0})
    episode = record(spec, 0, "optimal", 0, 0)
    decoyed = [i for i, label in enumerate(episode.labels) if "decoy" in label]
    assert decoyed
    height, agent_width, _ = episode.panels
    for i in decoyed:
        value = int(episode.labels[i].split("decoy ")[1].split()[0])
        agent = np.asarray(episode.frames[i])[GAP:GAP + height, GAP:GAP + agent_width]
        assert (agent == CUE_COLOURS[value]).all(axis=2).sum() >= (SQUARE - 4) ** 2
    assert episode.labels[-1].split(" r=")[0].endswith(("end: terminal, success", "end: terminal, no success",
                                                        "end: step limit"))
