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

import numpy as np
from PIL import Image, ImageDraw, ImageFont

from ..factory import make
from ..kinds import kind_of
from ..spec import Spec

VIEW_HEIGHT = 96


@dataclass
class Episode:
    """The frames of one recorded episode and what happened at each step."""

    index: int
    frames: list[Image.Image]
    labels: list[str]
    total_return: float
    success: bool


def font() -> Any:
    """Pillow's built-in bitmap font: the same pixels on every machine."""
    loader = getattr(ImageFont, "load_default_imagefont", None)
    return loader() if loader else ImageFont.load_default()


def scaled(image: np.ndarray, height: int = VIEW_HEIGHT) -> Image.Image:
    """A picture resized to ``height`` pixels, nearest neighbour (pixels stay crisp)."""
    picture = Image.fromarray(image)
    width = max(1, round(picture.width * height / picture.height))
    return picture.resize((width, height), Image.Resampling.NEAREST)


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


def _frame(agent: Image.Image, truth: Image.Image, text: str, typeface: Any) -> Image.Image:
    """One gallery frame: the agent's view, the ground truth beside it, a caption below."""
    frame = Image.new("RGB", (agent.width + truth.width + 4, VIEW_HEIGHT + 14), (255, 255, 255))
    frame.paste(agent, (0, 0))
    frame.paste(truth, (agent.width + 4, 0))
    ImageDraw.Draw(frame).text((2, VIEW_HEIGHT + 2), text, fill=(0, 0, 0), font=typeface)
    return frame


def record(spec: Spec, variant_seed: int, policy: str, episode: int, seed: int) -> Episode:
    """Play one episode of variant ``variant_seed`` with a policy (reset seed ``seed + episode``) and draw
    each step's agent view beside its ground truth."""
    kind = kind_of(spec)
    policy = resolve_policy(spec, policy)
    env = make(spec, variant=variant_seed, render_mode="rgb_array", analysis_info=True)
    model = env.model
    choose = kind.policy(policy, model, env.observations, seed + episode)
    typeface = font()
    obs, info = env.reset(seed=seed + episode)
    frames, labels, total, reward, t, done = [], [], 0.0, 0.0, 0, False
    while True:
        parts = obs if isinstance(obs, dict) else {env.observations.names[0]: obs}
        view = next((parts[name] for name in ("first_person", "pixels") if name in parts), None)
        agent = view if view is not None else env.render()
        truth = Image.fromarray(env.ground_truth())
        ImageDraw.Draw(truth).text((2, 1), kind.truth_label(model, info), fill=(0, 0, 0), font=typeface)
        action = None if done else choose(t, info)
        text = (f"t={t} " + ("end" if action is None else model.action_names[action]) + f" r={reward:+.2f}"
                + kind.caption(model, info))
        assert agent is not None
        frames.append(_frame(scaled(agent), scaled(np.asarray(truth)), text, typeface))
        labels.append(text)
        if action is None:
            return Episode(episode, frames, labels, total, kind.succeeded(model, info))
        obs, reward, terminated, truncated, info = env.step(action)
        total += reward
        t += 1
        done = terminated or truncated
