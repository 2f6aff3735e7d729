"""Playing one episode for a gallery, through an environment's public interface only.

Each step is drawn twice: the agent's view (the spec's first-person or top-down pixels, or else
``render()``, a top-down picture of what its observation shows) and ``ground_truth()`` (the
hidden value drawn: the true cue and the goals it names, or the hidden path), labelled by the
task kind. Policies read only what ``step`` returns (``info["analysis_only"]`` for the ones that
know the hidden value).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import math
from pathlib import Path

import numpy as np
from PIL import Image, ImageDraw, ImageFont

from ..factory import make
from ..kinds import kind_of
from ..spec import Spec

MIN_FRAME = 160      # a frame is scaled up (nearest neighbour, by a whole factor) to at least this height
GAP = 8              # pixels between the agent's view and the ground truth, and around a cell
TEXT = 15            # label size in pixels
FONT = Path(__file__).resolve().parent.parent / "render" / "fonts" / "DejaVuSans.ttf"   # shipped, with its licence


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
    panels: tuple[int, int, int] = (0, 0, 0)   # height, agent view width, ground truth width (pixels)


def font(size: int = TEXT) -> Any:
    """DejaVu Sans, shipped with taskgen, so labels are the same pixels on every machine (with one Pillow)."""
    return ImageFont.truetype(str(FONT), size)


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
    """One step of a gallery: the agent's view and the ground truth side by side (never split), with
    ``lines`` of caption below, in a cell with a margin."""
    height = max(agent.height, truth.height)
    frame = Image.new("RGB", (GAP + agent.width + GAP + truth.width + GAP, GAP + height + (TEXT + 4) * len(lines)
                              + GAP), (255, 255, 255))
    frame.paste(agent, (GAP, GAP))
    frame.paste(truth, (GAP + agent.width + GAP, GAP))
    draw = ImageDraw.Draw(frame)
    for i, line in enumerate(lines):
        draw.text((GAP, GAP + height + 2 + i * (TEXT + 4)), line, fill=(0, 0, 0), font=typeface)
    return frame


def record(spec: Spec, variant_seed: int, policy: str, episode: int, seed: int, scale: int | None = None) -> Episode:
    """Play one episode of variant ``variant_seed`` with a policy (reset seed ``seed + episode``) and draw
    each step's agent view beside its ground truth, scaled up (``scale``; see :func:`frame_height`)."""
    kind = kind_of(spec)
    policy = resolve_policy(spec, policy)
    env = make(spec, variant=variant_seed, render_mode="rgb_array", analysis_info=True)
    model = env.model
    choose = kind.policy(policy, model, env.observations, seed + episode)
    typeface = font()
    obs, info = env.reset(seed=seed + episode)
    frames, labels, total, reward, t, done = [], [], 0.0, 0.0, 0, False
    height, panels = 0, (0, 0, 0)
    while True:
        parts = obs if isinstance(obs, dict) else {env.observations.names[0]: obs}
        view = next((parts[name] for name in ("first_person", "pixels") if name in parts), None)
        agent = view if view is not None else env.render()
        assert agent is not None
        height = height or frame_height(agent, scale)
        action = None if done else choose(t, info)
        text = (f"t={t} " + ("end" if action is None else model.action_names[action]) + f" r={reward:+.2f}"
                + kind.caption(model, info))
        seen, truth = scaled(agent, height), scaled(env.ground_truth(), height)
        panels = (height, seen.width, truth.width)
        frames.append(_frame(seen, truth, [text, kind.truth_label(model, info)], typeface))
        labels.append(text)
        if action is None:
            return Episode(episode, frames, labels, total, kind.succeeded(model, info), model.variant_id, policy,
                           panels)
        obs, reward, terminated, truncated, info = env.step(action)
        total += reward
        t += 1
        done = terminated or truncated
