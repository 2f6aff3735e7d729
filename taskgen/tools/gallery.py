"""`taskgen gallery`: episode filmstrips, animations and index pages for documentation.

Each episode is drawn twice per step: the agent's view (the spec's first-person or top-down
pixels, or else a top-down picture of what its observation shows) and a ground-truth view (the
whole map, the true cue and the goal it names, even while the agent cannot see them). Pictures
and pages are written atomically; pages last, so an interrupted run leaves no page that links
to a missing picture.
"""

from __future__ import annotations

import html
import io
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Sequence

import numpy as np
import yaml
from PIL import Image, ImageDraw, ImageFont
from tqdm import tqdm

from ..analysis import best_memoryless, optimal_policy
from ..analysis.field_policies import Explorer, MemorylessRollout, best_memoryless_paths
from ..analysis.fields import FieldReport, sample_paths
from ..envs import FieldEnv, TaskEnv, build_field, resolve_spec
from ..model import TaskModel, compile_variant
from ..render import TopDownRenderer, observation_set
from ..render.field import FieldPictures, marks_seen, view_classes
from ..render.palette import AGENT, CUE_COLOURS
from ..spec import Spec
from ..variant import make_variant
from .check import check_variant, observation_tables
from .field_check import FIELD_BASELINES
from .output import child_path, write_text_atomic

POLICIES = ("auto", "optimal", "random", "chance", "explorer")
POLICY_WORDS = {
    "optimal": "the optimal agent, which knows the hidden cue (an analysis policy, not a learner)",
    "random": "uniform-random actions",
    "chance": "the best memoryless policy found (acts on the current observation only)",
}
FIELD_POLICY_WORDS = {**POLICY_WORDS,
                      "optimal": "the optimal agent, which knows the hidden path (an analysis policy, not a learner)",
                      "explorer": "the explorer, which remembers where it fell but does not know the path"}


def resolve_policy(spec: Spec, policy: str) -> str:
    """'auto' is the optimal agent for cue tasks and the explorer for hidden-path fields (whose
    optimal agent knows the path and never falls, so its episodes show no marks)."""
    if policy == "auto":
        return "explorer" if spec.layout.family == "field" else "optimal"
    if policy == "explorer" and spec.layout.family != "field":
        raise ValueError(f"{spec.name}: the explorer policy plays hidden-path fields only")
    return policy
VIEW_HEIGHT = 96
PER_ROW = 8
FRAME_MS = 250


def _font() -> ImageFont.ImageFont:
    """Pillow's built-in bitmap font: the same pixels on every machine."""
    loader = getattr(ImageFont, "load_default_imagefont", None)
    return loader() if loader else ImageFont.load_default()


def _scaled(image: np.ndarray, height: int = VIEW_HEIGHT) -> Image.Image:
    picture = Image.fromarray(image)
    width = max(1, round(picture.width * height / picture.height))
    return picture.resize((width, height), Image.NEAREST)


@dataclass
class Episode:
    """The frames of one recorded episode and what happened at each step."""

    index: int
    frames: list[Image.Image]
    labels: list[str]
    total_return: float
    success: bool


def _policy(name: str, model: TaskModel, spec: Spec, seed: int):
    """A function (step, info) → action for the named policy."""
    if name == "optimal":
        table = optimal_policy(model)
        return lambda t, info: int(table[min(t, model.horizon - 1), info["analysis_only"]["state"]])
    if name == "chance":
        table = best_memoryless(model, observation_tables(model, spec)).state_policy(model.horizon)
        return lambda t, info: int(table[min(t, model.horizon - 1), info["analysis_only"]["state"]])
    rng = np.random.default_rng(seed)
    return lambda t, info: int(rng.integers(model.num_actions))


def _ground_truth(renderer: TopDownRenderer, model: TaskModel, state: int, length: int,
                  font: ImageFont.ImageFont) -> Image.Image:
    """The whole map with the agent, the true cue (a sequence of ``length`` values) and the goals
    it names outlined."""
    picture = Image.fromarray(renderer.frame(int(model.obs_key[state])))
    draw = ImageDraw.Draw(picture)
    cue = int(model.hidden[state])
    k = model.cue_values
    sequence = [(cue // k ** j) % k for j in range(length)]
    goals = model.layout.sites.get("goal", [])
    for value in sequence:
        if value < len(goals):
            r, c = model.layout.cells[goals[value]]
            left, top, right, bottom = renderer.box(int(r), int(c))
            draw.rectangle((left - 1, top - 1, right + 1, bottom + 1), outline=AGENT, width=2)
    draw.rectangle((0, 0, picture.width - 1, renderer.lamp_rows * renderer.px - 1), fill=CUE_COLOURS[sequence[0]])
    draw.text((2, 1), f"true cue {'-'.join(map(str, sequence))}", fill=(0, 0, 0), font=font)
    return picture


def _agent_view(env: TaskEnv, obs: Any, renderer: TopDownRenderer) -> np.ndarray:
    parts = obs if isinstance(obs, dict) else {env.observations.names[0]: obs}
    for name in ("first_person", "pixels"):
        if name in parts:
            return parts[name]
    return renderer.frame(int(env.model.obs_key[env._state]))


def _frame(agent: Image.Image, truth: Image.Image, text: str, font: ImageFont.ImageFont) -> Image.Image:
    """One gallery frame: the agent's view, the ground truth beside it, a caption below."""
    frame = Image.new("RGB", (agent.width + truth.width + 4, VIEW_HEIGHT + 14), (255, 255, 255))
    frame.paste(agent, (0, 0))
    frame.paste(truth, (agent.width + 4, 0))
    ImageDraw.Draw(frame).text((2, VIEW_HEIGHT + 2), text, fill=(0, 0, 0), font=font)
    return frame


def _field_policy(name: str, env: FieldEnv, variant_seed: int, seed: int):
    """A function (step, info) → action for the named policy on a field."""
    model = env.model
    if name == "optimal":   # knows this episode's path: its table is made at the episode's first step
        cache: dict[str, Any] = {}

        def act(t: int, info: dict[str, Any]) -> int:
            if t == 0:
                known = info["analysis_only"]
                cache["table"] = optimal_policy(model.path_model(known["path"], known["start"]))
            return int(cache["table"][min(t, model.horizon - 1), info["analysis_only"]["state"]])
        return act
    if name == "explorer":
        explorer, core = Explorer(model, 1), env.core
        last: dict[str, np.ndarray] = {}

        def act(t: int, info: dict[str, Any]) -> int:
            if t > 0:   # tell it what its last move did (the step rule, applied to that one move)
                out = model.outcome(last["state"], last["action"], core.kind, core.start)
                explorer.observe(model.state_cell[last["state"]], last["action"], out, np.ones(1, dtype=bool))
            state = core.state.copy()
            action = explorer.act(t, model.state_cell[state], core.until > t, np.ones(1, dtype=bool))
            last.update(state=state, action=action)
            return int(action[0])
        return act
    if name == "chance":
        kind, start = sample_paths(model, variant_seed, 64)
        observations, overlay = env.core.observations, env.core.overlay
        rollout = MemorylessRollout(model, kind, start, view_classes(observations, overlay), marks_seen(overlay))
        table, _, _ = best_memoryless_paths(rollout)
        core = env.core
        return lambda t, info: int(table[rollout.classify(model.state_cell[core.state], core.shown_marks())[0]])
    rng = np.random.default_rng(seed)
    return lambda t, info: int(rng.integers(model.num_actions))


def _play(env: Any, seed: int, choose: Any, views: Any, caption: Any, font: ImageFont.ImageFont,
          ) -> tuple[list[Image.Image], list[str], float]:
    """Play one episode: at each step (and once after the end) draw ``views(obs)`` (the agent's
    view and the ground truth) with ``caption(t, action, reward)`` below. Returns the frames,
    their captions and the return."""
    obs, info = env.reset(seed=seed)
    frames, labels, total, reward, t, done = [], [], 0.0, 0.0, 0, False
    while True:
        agent, truth = views(obs)
        action = None if done else choose(t, info)
        text = caption(t, action, reward)
        frames.append(_frame(_scaled(agent), _scaled(truth), text, font))
        labels.append(text)
        if done:
            return frames, labels, total
        obs, reward, terminated, truncated, info = env.step(action)
        total += reward
        t += 1
        done = terminated or truncated


def record_field(spec: Spec, variant_seed: int, policy: str, episode: int, seed: int) -> Episode:
    """Play one field episode: the agent's view (never the path) beside the ground truth."""
    env = FieldEnv(*build_field(spec, variant_seed))
    model, core = env.model, env.core
    pictures = FieldPictures(model)
    font = _font()

    def views(obs: Any) -> tuple[np.ndarray, np.ndarray]:
        cell = int(model.state_cell[core.state[0]])
        marked = core.shown_marks()[0]
        parts = obs if isinstance(obs, dict) else {core.observations.names[0]: obs}
        truth = Image.fromarray(pictures.truth(core.kind[0], cell, marked))
        ImageDraw.Draw(truth).text((2, 1), f"falls {int(core.falls[0])}", fill=(0, 0, 0), font=font)
        return parts["pixels"] if "pixels" in parts else pictures.agent(cell, marked), np.asarray(truth)

    def caption(t: int, action: int | None, reward: float) -> str:
        return f"t={t} " + ("end" if action is None else model.action_names[action]) + f" r={reward:+.2f}"

    choose = _field_policy(policy, env, variant_seed, seed + episode)
    frames, labels, total = _play(env, seed + episode, choose, views, caption, font)
    success = bool(model.path_model(core.kind[0], int(core.start[0])).success[core.state[0]])
    return Episode(episode, frames, labels, total, success)


def record(spec: Spec, variant_seed: int, policy: str, episode: int, seed: int) -> Episode:
    """Play one episode with a policy and draw each step's agent and ground-truth views."""
    policy = resolve_policy(spec, policy)
    if spec.layout.family == "field":
        return record_field(spec, variant_seed, policy, episode, seed)
    model = compile_variant(make_variant(spec, variant_seed))
    env = TaskEnv(model, observation_set(model, spec.observation))
    renderer = TopDownRenderer(model, cell_px=12)
    font = _font()

    def views(obs: Any) -> tuple[np.ndarray, np.ndarray]:
        truth = _ground_truth(renderer, model, env._state, spec.cue.sequence_length, font)
        return _agent_view(env, obs, renderer), np.asarray(truth)

    def caption(t: int, action: int | None, reward: float) -> str:
        shown = bool(model.cue_shown()[env._state])
        return (f"t={t} " + ("end" if action is None else model.action_names[action]) +
                f" r={reward:+.2f} cue {'shown' if shown else 'hidden'}")

    frames, labels, total = _play(env, seed + episode, _policy(policy, model, spec, seed + episode), views,
                                  caption, font)
    return Episode(episode, frames, labels, total, bool(model.success[env._state]))


def filmstrip(frames: Sequence[Image.Image], per_row: int = PER_ROW) -> Image.Image:
    """Frames in rows of ``per_row``, wrapped."""
    w, h = frames[0].size
    rows = -(-len(frames) // per_row)
    sheet = Image.new("RGB", (w * min(per_row, len(frames)), h * rows), (255, 255, 255))
    for i, frame in enumerate(frames):
        sheet.paste(frame, ((i % per_row) * w, (i // per_row) * h))
    return sheet


def _save_atomic(path: Path, image: Image.Image, **options: Any) -> None:
    """Encode in memory, then write and rename: never a partial picture on disk."""
    buffer = io.BytesIO()
    image.save(buffer, **options)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(buffer.getvalue())
        os.chmod(tmp, 0o644)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def _save_gif(path: Path, frames: Sequence[Image.Image]) -> None:
    palette = [f.convert("P", palette=Image.ADAPTIVE, colors=64, dither=Image.Dither.NONE) for f in frames]
    _save_atomic(path, palette[0], format="GIF", save_all=True, append_images=palette[1:], duration=FRAME_MS,
                 loop=0, optimize=False, disposal=1)


def spec_gallery(spec: Spec, source: str, out: str | os.PathLike[str], episodes: int = 2,
                 policy: str = "auto", seed: int = 0, variant_seed: int = 0,
                 progress: bool | None = None) -> Path:
    """Write the gallery of one spec into ``out/<spec name>/``; returns its HTML index."""
    policy = resolve_policy(spec, policy)
    folder = child_path(out, spec.name)
    folder.mkdir(parents=True, exist_ok=True)
    report = check_variant(spec, variant_seed)
    items = []
    for e in tqdm(range(episodes), desc=f"gallery {spec.name}", unit="episode",
                  disable=None if progress is None else not progress, leave=False):
        episode = record(spec, variant_seed, policy, e, seed)
        png, gif = f"episode-{e}.png", f"episode-{e}.gif"
        _save_atomic(folder / png, filmstrip(episode.frames), format="PNG", optimize=False)
        _save_gif(folder / gif, episode.frames)
        items.append((episode, png, gif))
    text = Path(source).read_text(encoding="utf-8") if Path(source).is_file() else \
        yaml.safe_dump(spec.model_dump(mode="json"), sort_keys=False)
    write_text_atomic(folder / "index.md", _markdown(spec, text, report, items, policy, variant_seed, seed))
    write_text_atomic(folder / "index.html", _html(spec, text, report, items, policy, variant_seed, seed))
    return folder / "index.html"


def _baseline_rows(report: Any) -> list[tuple[str, str, str, str]]:
    rows = []
    if isinstance(report, FieldReport):   # mean ± standard error over sampled paths
        for name in FIELD_BASELINES:
            b = report.baselines[name]
            rows.append((name, f"{b.success_rate.mean:.4f} ± {b.success_rate.standard_error:.4f}",
                         f"{b.mean_return.mean:.4f} ± {b.mean_return.standard_error:.4f}", b.method))
        return rows
    for name in ("optimal", "chance", "cue_blind", "random"):
        b = report.baselines[name].to_dict()
        fmt = (lambda v: "n/a" if v is None else f"{v:.4f}")
        rows.append((name, fmt(b["success_rate"]), fmt(b["mean_return"]), b["method"]))
    return rows


def _legend(spec: Spec) -> str:
    if spec.layout.family == "field":
        return ("Each frame: the agent's view (left: the agent and its marks, never the path) and the "
                "ground truth (right: the hidden path in green, its end in yellow, marks outlined).")
    return ("Each frame: the agent's view (left) and the ground truth (right: the whole map, the true "
            "cue and the goal it names, outlined).")


def _policy_words(spec: Spec, policy: str) -> str:
    return (FIELD_POLICY_WORDS if spec.layout.family == "field" else POLICY_WORDS)[policy]


def _markdown(spec, text, report, items, policy, variant_seed, seed) -> str:
    lines = [f"# {spec.name}", "", spec.description or "", "",
             f"Variant `{report.variant_id}` (variant seed {variant_seed}); episodes seeded from {seed}; "
             f"policy: {_policy_words(spec, policy)}.", "", _legend(spec), "",
             "| parameter | value |", "| --- | --- |"]
    lines += [f"| {k} | {v} |" for k, v in report.params.items()]
    lines += ["", "| baseline | success | mean return | method |", "| --- | --- | --- | --- |"]
    lines += [f"| {n} | {s} | {r} | {m} |" for n, s, r, m in _baseline_rows(report)]
    lines += ["", "| check | result | reason |", "| --- | --- | --- |"]
    lines += [f"| {c.name} | {'pass' if c.passed else ('n/a' if c.passed is None else 'FAIL')} | {c.reason} |"
              for c in report.checks]
    for episode, png, gif in items:
        lines += ["", f"## Episode {episode.index}: return {episode.total_return:+.3f}, "
                  f"{'success' if episode.success else 'no success'}", "",
                  f"![episode {episode.index} filmstrip]({png})", "", f"[animation]({gif})"]
    lines += ["", "## Spec", "", "```yaml", text.rstrip(), "```", ""]
    return "\n".join(lines)


def _html(spec, text, report, items, policy, variant_seed, seed) -> str:
    e = html.escape
    rows = "".join(f"<tr><td>{e(str(k))}</td><td>{e(str(v))}</td></tr>" for k, v in report.params.items())
    base = "".join(f"<tr><td>{e(n)}</td><td>{s}</td><td>{r}</td><td>{e(m)}</td></tr>"
                   for n, s, r, m in _baseline_rows(report))
    checks = "".join(f"<tr><td>{e(c.name)}</td><td>{'pass' if c.passed else ('n/a' if c.passed is None else 'FAIL')}"
                     f"</td><td>{e(c.reason)}</td></tr>" for c in report.checks)
    body = "".join(
        f"<h2>Episode {ep.index}: return {ep.total_return:+.3f}, {'success' if ep.success else 'no success'}</h2>"
        f'<p><img src="{png}" alt="episode {ep.index} filmstrip"></p><p><a href="{gif}">animation</a></p>'
        for ep, png, gif in items)
    return (f"<!DOCTYPE html><html><head><meta charset=\"utf-8\"><title>{e(spec.name)}</title></head><body>"
            f"<h1>{e(spec.name)}</h1><p>{e(spec.description or '')}</p>"
            f"<p>Variant <code>{e(report.variant_id)}</code> (variant seed {variant_seed}); episodes seeded from "
            f"{seed}; policy: {e(_policy_words(spec, policy))}.</p>"
            f"<p>{e(_legend(spec))}</p>"
            f"<table><tr><th>parameter</th><th>value</th></tr>{rows}</table>"
            f"<table><tr><th>baseline</th><th>success</th><th>mean return</th><th>method</th></tr>{base}</table>"
            f"<table><tr><th>check</th><th>result</th><th>reason</th></tr>{checks}</table>"
            f"{body}<h2>Spec</h2><pre>{e(text)}</pre></body></html>\n")


def gallery(sources: Sequence[str], out: str, episodes: int = 2, policy: str = "auto", seed: int = 0,
            variant_seed: int = 0) -> list[Path]:
    """Galleries of several specs, plus a top-level index of every spec gallery in ``out``."""
    pages = []
    for source in sources:
        spec = resolve_spec(source)
        pages.append(spec_gallery(spec, source, out, episodes, policy, seed, variant_seed))
    root = Path(out)
    names = sorted(p.parent.name for p in root.glob("*/index.html"))
    md = ["# Episode galleries", "", "One page per spec: filmstrips, animations, baselines and the spec.", ""]
    md += [f"- [{n}]({n}/index.md)" for n in names]
    links = "".join(f'<li><a href="{n}/index.html">{html.escape(n)}</a></li>' for n in names)
    write_text_atomic(root / "index.md", "\n".join(md) + "\n")
    write_text_atomic(root / "index.html", "<!DOCTYPE html><html><head><meta charset=\"utf-8\"><title>Episode "
                      f"galleries</title></head><body><h1>Episode galleries</h1><ul>{links}</ul></body></html>\n")
    return pages
