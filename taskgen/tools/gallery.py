"""`taskgen gallery`: episode filmstrips, animations and index pages for documentation.

Episodes are played by playback.py; this module writes the pictures and the pages. Pictures
and pages are written atomically; pages last, so an interrupted run leaves no page that links
to a missing picture.
"""

from __future__ import annotations

import html
import io
import json
import os
from dataclasses import replace
from pathlib import Path
from typing import Any, Mapping, Sequence
from urllib.parse import quote

import yaml
from PIL import Image, ImageDraw

from ..analysis import Report
from ..factory import resolve_spec
from ..kinds import compile_variant, kind_of, make_variant
from ..render.seen import GAP, TEXT, font
from ..spec import Spec
from . import plots
from .check import check_variant
from .output import child_path, locked_folder, refuse_overwrite, write_bytes_atomic, write_text_atomic
from .playback import MIN_FRAME, Episode, record, resolve_policy
from .progress import Progress

POLICIES = ("auto", "optimal", "random", "chance", "explorer")
MAX_WIDTH = 1600     # a filmstrip's rows wrap before this width (as many whole steps as fit, at least one)
CHART = "variants.png"   # the strip chart of the page's variants (taskgen[plots])
FRAME_MS = 250

__all__ = ["FRAME_MS", "MAX_WIDTH", "MIN_FRAME", "POLICIES", "Episode", "filmstrip", "gallery", "record",
           "spec_gallery"]


def per_row(frames: Sequence[Image.Image]) -> int:
    """Steps per filmstrip row: as many as fit in MAX_WIDTH (at least one)."""
    return max(1, min(len(frames), MAX_WIDTH // frames[0].width))


def filmstrip(frames: Sequence[Image.Image], header: Sequence[str] = (),
              swatches: Sequence[tuple[tuple[int, int, int], str]] = ()) -> Image.Image:
    """A figure: the ``header`` lines, the steps in rows (each step one cell: agent's view | ground truth,
    never split), and a legend strip of ``swatches`` (colour, meaning), wrapped to the rows' width."""
    w, h = frames[0].size
    n = per_row(frames)
    rows = -(-len(frames) // n)
    width = w * n
    typeface, title = font(), font(TEXT + 3)
    probe = ImageDraw.Draw(Image.new("RGB", (1, 1)))
    items = [(colour, text, TEXT + 6 + int(probe.textlength(text, font=typeface)) + 2 * GAP) for colour, text in swatches]
    legend: list[list[tuple[tuple[int, int, int], str, int]]] = [[]]
    for item in items:            # wrapped to the rows' width
        if legend[-1] and sum(i[2] for i in legend[-1]) + item[2] > width - 2 * GAP:
            legend.append([])
        legend[-1].append(item)
    top = GAP + (TEXT + 9) * len(header)
    bottom = (GAP + (TEXT + 8) * len(legend)) if items else 0
    sheet = Image.new("RGB", (width, top + h * rows + bottom), (255, 255, 255))
    draw = ImageDraw.Draw(sheet)
    for i, words in enumerate(header):
        draw.text((GAP, GAP + i * (TEXT + 9)), words, fill=(0, 0, 0), font=title)
    for i, frame in enumerate(frames):
        sheet.paste(frame, ((i % n) * w, top + (i // n) * h))
    y = top + h * rows + GAP // 2
    for entries in legend if items else []:
        x = GAP
        for colour, text, size in entries:
            draw.rectangle((x, y + 1, x + TEXT, y + 1 + TEXT), fill=colour, outline=(0, 0, 0))
            draw.text((x + TEXT + 6, y), text, fill=(0, 0, 0), font=typeface)
            x += size
        y += TEXT + 8
    return sheet


GENERATOR = '<meta name="generator" content="taskgen gallery">'   # marks the pages taskgen wrote
MD_MARK = "<!-- written by taskgen gallery -->"


def _save_atomic(path: Path, image: Image.Image, **options: Any) -> None:
    """Encode in memory, then write and rename: never a partial picture on disk."""
    buffer = io.BytesIO()
    image.save(buffer, **options)
    write_bytes_atomic(path, buffer.getvalue())


def _save_gif(path: Path, frames: Sequence[Image.Image]) -> None:
    palette = [f.convert("P", palette=Image.Palette.ADAPTIVE, colors=64, dither=Image.Dither.NONE) for f in frames]
    _save_atomic(path, palette[0], format="GIF", save_all=True, append_images=palette[1:], duration=FRAME_MS,
                 loop=0, optimize=False, disposal=1)


def spec_gallery(spec: Spec, source: str, out: str | os.PathLike[str], episodes: int = 1,
                 policy: str = "auto", seed: int = 0, variant_seed: int = 0,
                 progress: bool | None = None, scale: int | None = None, variants: int = 3) -> Path:
    """Write the gallery of one spec into ``out/<spec name>/`` (``<spec name>+<digest>`` for a spec with
    overrides): ``variants`` variants from ``variant_seed`` on, ``episodes`` episodes each; returns its
    HTML index."""
    policy = resolve_policy(spec, policy)
    folder = child_path(out, spec.name + spec.override_tag)
    folder.mkdir(parents=True, exist_ok=True)
    sections: list[Section] = []
    with Progress(episodes * variants, f"gallery {spec.name}", unit="episode", quiet=progress is False) as bar:
        for v in range(variant_seed, variant_seed + variants):
            report = check_variant(spec, v)
            compiled = compile_variant(make_variant(spec, v))
            items: Items = []
            for e in range(episodes):
                episode = record(spec, v, policy, e, seed, scale)
                png, gif = _picture(v, e, "png"), _picture(v, e, "gif")
                header = [f"{spec.name} · variant {episode.variant_id} · policy {episode.policy} · return "
                          f"{episode.total_return:+.2f} · {'success' if episode.success else 'no success'}",
                          "each step: what the agent saw, its observation drawn (left) | the ground truth (right)"]
                strip = filmstrip(episode.frames, header, kind_of(spec).swatches(compiled) + list(episode.swatches))
                _save_atomic(folder / png, strip, format="PNG", optimize=False)
                _save_gif(folder / gif, episode.frames)
                items.append((replace(episode, frames=[]), png, gif))   # on disk now: its frames are not kept
                bar.update(1)
            sections.append((v, report, items))
    chart = None
    if plots.available():   # each variant's memory gap and recall distance, drawn when taskgen[plots] is installed
        plots.strip_plot(plots.report_rows([report for _, report, _ in sections]), spec.name + spec.override_tag,
                         folder / CHART)
        chart = CHART
    if spec.overrides:      # the spec as run: the file's values with the overrides applied
        text = f"# {source}, with " + ", ".join(f"{key}={json.dumps(value)}" for key, value in spec.overrides.items()) \
            + "\n" + yaml.safe_dump(spec.model_dump(mode="json"), sort_keys=False)
    elif Path(source).is_file():
        text = Path(source).read_text(encoding="utf-8")
    else:
        text = yaml.safe_dump(spec.model_dump(mode="json"), sort_keys=False)
    write_text_atomic(folder / "index.md", _markdown(spec, text, sections, policy, seed, chart))
    write_text_atomic(folder / "index.html", _html(spec, text, sections, policy, seed, chart))
    return folder / "index.html"


def _baseline_rows(report: Report) -> list[tuple[str, str, str, str]]:
    """(name, success, return, method) per baseline: exact figures as they are, sampled ones ± their
    standard error."""
    rows = []
    for name, b in report.baselines.items():
        success = "n/a" if b.success_rate is None else b.success_rate.text(4)
        mean = "n/a" if b.mean_return is None else b.mean_return.text(4)
        rows.append((name, success, mean, b.method))
    return rows


Items = list[tuple[Episode, str, str]]
Section = tuple[int, Report, Items]          # a variant seed, its report and its episodes

STYLE = """
body { font-family: system-ui, -apple-system, "Segoe UI", sans-serif; margin: 0; color: #1d1d22; background: #fafafa; }
main { max-width: 1100px; margin: 0 auto; padding: 1rem 1.25rem 3rem; }
h1 { margin-bottom: .2rem; } h2 { margin-top: 2.2rem; border-bottom: 1px solid #ddd; padding-bottom: .2rem; }
img { max-width: 100%; height: auto; display: block; border: 1px solid #ddd; background: #fff; }
table { border-collapse: collapse; margin: .6rem 0 1rem; display: block; overflow-x: auto; max-width: 100%; }
th, td { border: 1px solid #ccc; padding: .25rem .55rem; text-align: left; vertical-align: top; }
th { background: #eee; } td.pass { color: #0a6a3a; } td.fail { color: #a01919; font-weight: 600; }
pre { background: #fff; border: 1px solid #ddd; padding: .7rem; overflow-x: auto; }
nav ul { columns: 2; } .note { color: #555; }
"""


def _verdict(check: Any) -> str:
    return "pass" if check.passed else ("n/a" if check.passed is None else "FAIL")


def _markdown(spec: Spec, text: str, sections: list[Section], policy: str, seed: int, chart: str | None) -> str:
    lines = [f"# {spec.name}", "", spec.description or "", "",
             f"{len(sections)} variant(s); episodes seeded from {seed}; policy: {kind_of(spec).policies[policy]}.", "",
             kind_of(spec).legend, "", "Contents:", ""]
    lines += [f"- [variant {report.variant_id}](#variant-{v})" for v, report, _ in sections] + ["- [spec](#spec)"]
    if chart:
        lines += ["", f"![memory gap and recall distance of each variant]({chart})"]
    for v, report, items in sections:
        lines += ["", f"## Variant {report.variant_id} <a id=\"variant-{v}\"></a>", "",
                  "| parameter | value |", "| --- | --- |"]
        lines += [f"| {k} | {val} |" for k, val in report.params.items()]
        lines += ["", "| baseline | success | mean return | method |", "| --- | --- | --- | --- |"]
        lines += [f"| {n} | {succ} | {r} | {m} |" for n, succ, r, m in _baseline_rows(report)]
        lines += ["", "| check | result | reason |", "| --- | --- | --- |"]
        lines += [f"| {c.name} | {_verdict(c)} | {c.reason} |" for c in report.checks]
        for episode, png, gif in items:
            lines += ["", f"### Episode {episode.index}: return {episode.total_return:+.3f}, "
                      f"{'success' if episode.success else 'no success'}", "",
                      f"![variant {v} episode {episode.index} filmstrip]({png})", "", f"[animation]({gif})"]
    lines += ["", "## Spec <a id=\"spec\"></a>", "", "```yaml", text.rstrip(), "```", ""]
    return "\n".join(lines)


def _html(spec: Spec, text: str, sections: list[Section], policy: str, seed: int, chart: str | None) -> str:
    e = html.escape
    contents = "".join(f'<li><a href="#variant-{v}">variant {e(report.variant_id)}</a></li>'
                       for v, report, _ in sections) + '<li><a href="#spec">spec</a></li>'
    body = []
    for v, report, items in sections:
        rows = "".join(f"<tr><td>{e(str(k))}</td><td>{e(str(val))}</td></tr>" for k, val in report.params.items())
        base = "".join(f"<tr><td>{e(n)}</td><td>{e(succ)}</td><td>{e(r)}</td><td>{e(m)}</td></tr>"
                       for n, succ, r, m in _baseline_rows(report))
        checks = "".join(f'<tr><td>{e(c.name)}</td><td class="{_verdict(c).lower().replace("/", "")}">{_verdict(c)}'
                         f"</td><td>{e(c.reason)}</td></tr>" for c in report.checks)
        episodes = "".join(
            f"<h3>Episode {ep.index}: return {ep.total_return:+.3f}, {'success' if ep.success else 'no success'}</h3>"
            f'<p><img src="{e(png)}" alt="variant {v}, episode {ep.index}: filmstrip" loading="lazy"></p>'
            f'<p><a href="{e(gif)}">animation</a></p>' for ep, png, gif in items)
        body.append(f'<section id="variant-{v}"><h2>Variant <code>{e(report.variant_id)}</code></h2>'
                    f"<table><tr><th>parameter</th><th>value</th></tr>{rows}</table>"
                    f"<table><tr><th>baseline</th><th>success</th><th>mean return</th><th>method</th></tr>{base}</table>"
                    f"<table><tr><th>check</th><th>result</th><th>reason</th></tr>{checks}</table>{episodes}</section>")
    return (f'<!DOCTYPE html><html lang="en"><head><meta charset="utf-8">{GENERATOR}'
            '<meta name="viewport" content="width=device-width, initial-scale=1">'
            f"<title>{e(spec.name)}</title><style>{STYLE}</style></head><body><main>"
            f"<h1>{e(spec.name)}</h1><p>{e(spec.description or '')}</p>"
            f'<p class="note">{len(sections)} variant(s); episodes seeded from {seed}; policy: '
            f"{e(kind_of(spec).policies[policy])}.</p><p class=\"note\">{e(kind_of(spec).legend)}</p>"
            f"<nav><h2>Contents</h2><ul>{contents}</ul></nav>"
            + (f'<p><img src="{e(chart)}" alt="memory gap and recall distance of each variant"></p>' if chart else "")
            + f"{''.join(body)}"
            f'<section id="spec"><h2>Spec</h2><pre>{e(text)}</pre></section></main></body></html>\n')


def spec_outputs(spec: Spec, out: str | os.PathLike[str], episodes: int, variants: Sequence[int] = (0,)) -> list[Path]:
    """The files a spec's gallery writes (its folder's pages and pictures)."""
    folder = child_path(out, spec.name + spec.override_tag)
    return [folder / "index.html", folder / "index.md", folder / CHART] + \
        [folder / _picture(v, e, ext) for v in variants for e in range(episodes) for ext in ("png", "gif")]


def _picture(variant: int, episode: int, ext: str) -> str:
    """The file name of a variant's episode picture."""
    return f"variant-{variant}-episode-{episode}.{ext}"


def _ours(page: Path) -> bool:
    """Whether an index page was written by taskgen gallery (it carries the generator line)."""
    try:
        with open(page, encoding="utf-8", errors="replace") as handle:
            head = handle.read(4096)
    except OSError:
        return False
    return GENERATOR in head or MD_MARK in head


def gallery(sources: Sequence[str], out: str, episodes: int = 1, policy: str = "auto", seed: int = 0,
            variant_seed: int = 0, overrides: Mapping[str, Any] | None = None, force: bool = False,
            progress: bool | None = None, scale: int | None = None, variants: int = 3) -> list[Path]:
    """Galleries of several specs (each with ``overrides``, dotted keys, applied), plus a top-level
    index of the spec galleries in ``out``. Existing pages and pictures are replaced only with ``force``
    (the root index also when taskgen wrote it); one run at a time writes into ``out``."""
    specs = [resolve_spec(source, **(overrides or {})) for source in sources]   # all validated before drawing
    root = Path(out)
    with locked_folder(root):
        mine = [path for spec in specs for path in
                spec_outputs(spec, root, episodes, range(variant_seed, variant_seed + variants))]
        mine += [page for page in (root / "index.html", root / "index.md") if page.exists() and not _ours(page)]
        refuse_overwrite(mine, force, "taskgen gallery")
        pages = [spec_gallery(spec, source, out, episodes, policy, seed, variant_seed, progress, scale, variants)
                 for source, spec in zip(sources, specs)]
        names = sorted(p.parent.name for p in root.glob("*/index.html") if _ours(p))   # taskgen's galleries only
        md = ["# Episode galleries", "", MD_MARK, "", "One page per spec: filmstrips, animations, baselines and the spec.",
              ""]
        md += [f"- [{n}]({quote(n)}/index.md)" for n in names]
        links = "".join(f'<li><a href="{html.escape(quote(n))}/index.html">{html.escape(n)}</a></li>' for n in names)
        write_text_atomic(root / "index.md", "\n".join(md) + "\n")
        write_text_atomic(root / "index.html", f'<!DOCTYPE html><html lang="en"><head><meta charset="utf-8">{GENERATOR}'
                          '<meta name="viewport" content="width=device-width, initial-scale=1">'
                          f"<title>Episode galleries</title><style>{STYLE}</style></head><body><main>"
                          f"<h1>Episode galleries</h1><ul>{links}</ul></main></body></html>\n")
    return pages
