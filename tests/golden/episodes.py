"""Golden episode hashes: the first 1,000 steps of every example spec, and of the variations in
``VARIATIONS`` (turn actions and first-person pixels, which no example uses), under a fixed seed and
action sequence. `python tests/golden/episodes.py` prints them as JSON; `--write` updates
episodes.json. Update only when a change to the dynamics or the randomness is intended, and say
so in CHANGELOG.md: old seeds then give new episodes."""

from __future__ import annotations

import hashlib
import json
import sys
from pathlib import Path
from typing import Any

import numpy as np

import taskgen

STEPS = 1000
HERE = Path(__file__).resolve().parent
#: Extra golden runs: name → (example spec, overrides).
VARIATIONS: dict[str, tuple[str, dict[str, Any]]] = {
    "orchard-hives+turns+first-person": ("orchard-hives", {
        "agent__actions": "turns", "observation__vector": None,
        "observation__first_person": {"height": 24, "width": 32}}),
    "lantern-hall+turns+egocentric-grid": ("lantern-hall", {
        "agent__actions": "turns", "observation__vector": None,
        "observation__grid": {"size": 3, "frame": "egocentric"}}),
    "seed-cache+decoys+lures": ("seed-cache", {
        "observation__grid": {"size": 3}, "observation__pixels": {"height": 24, "width": 24},
        "observation__distractors": {"decoy_probability": 0.3, "lure_probability": 0.4}}),
    "lantern-hall+vector+decoys": ("lantern-hall", {"observation__distractors": {"decoy_probability": 0.3}}),
    "marsh-stones+decoy-marks": ("marsh-stones", {
        "observation__pixels": {"height": 24, "width": 24}, "observation__distractors": {"decoy_probability": 0.3}}),
    "marsh-stones+vector+decoy-marks": ("marsh-stones", {"observation__distractors": {"decoy_probability": 0.3}}),
}


def _digest(h: Any, obs: Any) -> None:
    """Add an observation (an array, or a dict of them in key order) to hash ``h``."""
    if isinstance(obs, dict):
        for name in sorted(obs):
            h.update(obs[name].tobytes())
    else:
        h.update(obs.tobytes())


def episode_hash(spec_name: str, **overrides: Any) -> str:
    """sha256 of observations, rewards and flags of 1,000 steps (variant 0, reset seed 0)."""
    env = taskgen.make(spec_name, variant=0, **overrides)
    actions = np.random.default_rng(2024).integers(env.action_space.n, size=STEPS)
    h = hashlib.sha256()
    obs, _ = env.reset(seed=0)
    _digest(h, obs)
    for a in actions:
        obs, reward, terminated, truncated, _ = env.step(int(a))
        _digest(h, obs)
        h.update(np.float64(reward).tobytes())
        h.update(bytes([terminated, truncated]))
        if terminated or truncated:
            obs, _ = env.reset()
            _digest(h, obs)
    return h.hexdigest()


def all_hashes() -> dict[str, str]:
    """The hash of every bundled spec and of every variation."""
    hashes = {name: episode_hash(name) for name in taskgen.bundled_specs()}
    hashes.update({name: episode_hash(spec, **over) for name, (spec, over) in VARIATIONS.items()})
    return dict(sorted(hashes.items()))


if __name__ == "__main__":
    hashes = all_hashes()
    text = json.dumps(hashes, indent=2) + "\n"
    if "--write" in sys.argv:
        (HERE / "episodes.json").write_text(text)
    sys.stdout.write(text)
