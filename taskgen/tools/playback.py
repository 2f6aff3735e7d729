"""Playing one episode for a gallery, through an environment's public interface only.

Each step is drawn twice: what the agent saw (its observation made visible, every modality:
render/seen.py) and ``ground_truth()`` (the hidden value drawn: the true cue and the goals it
names, or the hidden path), captioned by the task kind, with any decoy or lure the agent saw and,
at the end, why the episode ended. Policies read only what ``step`` returns
(``info["analysis_only"]`` for the ones that know the hidden value).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import math

import numpy as np
from PIL import Image, ImageDraw

from ..factory import make
from ..kinds import kind_of
from ..render.seen import GAP, TEXT, font, observation_picture, seen_swatches
from ..spec import Spec

MIN_FRAME = 160      # a frame is scaled up (nearest neighbour, by a whole factor) to at least this height
TITLE = TEXT + 4     # the line above each panel that names it


@dataclass
class Episode:
    """The frames of one recorded episode and what happened at each step."""

    index: int
    frames: list[Image.Image]
    labels: list[str]
    total_return: float
    success: bool
    variant_id: str = ""
    policy: str = ""
    panels: tuple[int, int, int] = (0, 0, 0)   # height, agent view width, ground truth width (pixels), each
                                               # panel below its TITLE line, GAP in from the cell's top left
    swatches: tuple[tuple[tuple[int, int, int], str], ...] = ()   # legend entries of the agent's drawn view


def scaled(image: np.ndarray, height: int) -> Image.Image:
    """A picture resized to ``height`` pixels, nearest neighbour (pixels stay crisp)."""
    picture = Image.fromarray(image)
    width = max(1, round(picture.width * height / picture.height))
    return picture.resize((width, height), Image.Resampling.NEAREST)


def frame_height(first: np.ndarray, scale: int | None) -> int:
    """The height a frame is drawn at: the agent's view times ``scale``, by default the smallest whole
    factor that makes it at least MIN_FRAME pixels high."""
    factor = scale if scale is not None else max(1, math.ceil(MIN_FRAME / first.shape[0]))
    return int(first.shape[0] * factor)


def resolve_policy(spec: Spec, policy: str) -> str:
    """'auto' is the kind's first policy (the optimal agent for cue tasks; the explorer on fields, whose
    optimal agent knows the path and never steps off, so its episodes would show no marks)."""
    policies = kind_of(spec).policies
    if policy == "auto":
        return next(iter(policies))
    if policy not in policies:
        raise ValueError(f"{spec.name}: the {policy} policy does not play this kind of task "
                         f"(it plays {', '.join(policies)})")
    return policy


def _frame(agent: Image.Image, truth: Image.Image, lines: list[str], typeface: Any) -> Image.Image:
    """One step of a gallery: what the agent saw (each modality under its title) and the ground truth
    (under its own) side by side (never split), with ``lines`` of caption below, in a cell with a margin."""
    height = max(agent.height, TITLE + truth.height)
    frame = Image.new("RGB", (GAP + agent.width + GAP + truth.width + GAP, GAP + height + (TEXT + 4) * len(lines)
                              + GAP), (255, 255, 255))
    frame.paste(agent, (GAP, GAP))
    frame.paste(truth, (GAP + agent.width + GAP, GAP + TITLE))
    draw = ImageDraw.Draw(frame)
    draw.text((GAP + agent.width + GAP, GAP), "ground truth", fill=(0, 0, 0), font=font(TEXT - 2))
    for i, line in enumerate(lines):
        draw.text((GAP, GAP + height + 2 + i * (TEXT + 4)), line, fill=(0, 0, 0), font=typeface)
    return frame


def record(spec: Spec, variant_seed: int, policy: str, episode: int, seed: int, scale: int | None = None) -> Episode:
    """Play one episode of variant ``variant_seed`` with a policy (reset seed ``seed + episode``) and draw
    each step's observation beside its ground truth, pixels scaled up (``scale``; see :func:`frame_height`)."""
    kind = kind_of(spec)
    policy = resolve_policy(spec, policy)
    env = make(spec, variant=variant_seed, render_mode="rgb_array", analysis_info=True)
    model = env.model
    observations = env.observations
    choose = kind.policy(policy, model, observations, seed + episode)
    typeface = font()
    mask = env.observation_mask() if observations.vector is not None else None
    egocentric = spec.observation.grid is not None and spec.observation.grid.frame == "egocentric"
    obs, info = env.reset(seed=seed + episode)
    frames, labels, total, reward, t = [], [], 0.0, 0.0, 0
    terminated = truncated = False
    height, panels = 0, (0, 0, 0)
    while True:
        truth_picture = env.ground_truth()
        if not height:     # pixels the agent gets set the scale; without them, the ground truth does
            parts = obs if isinstance(obs, dict) else {observations.names[0]: obs}
            view = next((parts[name] for name in ("first_person", "pixels") if name in parts), None)
            height = frame_height(view if view is not None else truth_picture, scale)
        seen = Image.fromarray(observation_picture(observations, obs, height, mask, egocentric))
        truth = scaled(truth_picture, height)
        done = terminated or truncated
        action = None if done else choose(t, info)
        text = (f"t={t} " + (_ending(terminated, kind.succeeded(model, info)) if action is None
                             else model.action_names[action]) + f" r={reward:+.2f}"
                + kind.caption(model, info, observations, obs))
        panels = (max(seen.height, TITLE + truth.height), seen.width, truth.width)
        frames.append(_frame(seen, truth, [text, kind.truth_label(model, info)], typeface))
        labels.append(text)
        if action is None:
            return Episode(episode, frames, labels, total, kind.succeeded(model, info), model.variant_id, policy,
                           panels, tuple(seen_swatches(observations, mask)))
        obs, reward, terminated, truncated, info = env.step(action)
        total += reward
        t += 1


def _ending(terminated: bool, success: bool) -> str:
    """Why an episode ended: a terminal state (a success or not), or the step limit."""
    if terminated:
        return "end: terminal, " + ("success" if success else "no success")
    return "end: step limit"
