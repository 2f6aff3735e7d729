"""Plots of suites and checks (the optional extra ``taskgen[plots]``: matplotlib, Agg, no display).

Two charts: how the baselines' returns move with a swept parameter (from a manifest), and a strip
chart of each variant's memory gap and recall distance (from reports or manifest entries). Each PNG
carries the numbers it draws as JSON in a text chunk (``taskgen-data``), so a reader or a test can
take them back out and compare them with the manifest. Colours are the Okabe–Ito colour-blind-safe
palette of render/palette.py; the style is matplotlib's default, whatever the user's settings, so the
same numbers give the same picture.
"""

from __future__ import annotations

import io
import json
import math
import os
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterable, Mapping, Sequence

from ..errors import TaskgenError
from ..render.palette import CUE_COLOURS
from .output import write_bytes_atomic

if TYPE_CHECKING:
    from matplotlib.figure import Figure

    from ..analysis import Report

DATA_KEY = "taskgen-data"   # the PNG text chunk holding the plotted numbers (JSON)
BASELINES = ("optimal", "chance", "cue_blind", "explorer", "random")   # drawn in this order, when present
LABELS = {"optimal": "optimal", "chance": "chance (best memoryless; band: its interval)", "cue_blind": "cue-blind",
          "explorer": "explorer", "random": "uniform random"}
COLOURS = {"optimal": CUE_COLOURS[4], "chance": CUE_COLOURS[5], "cue_blind": CUE_COLOURS[2],
           "explorer": CUE_COLOURS[6], "random": CUE_COLOURS[0]}
GAP_COLOUR, RECALL_COLOUR = CUE_COLOURS[4], CUE_COLOURS[2]


class PlotError(TaskgenError, ValueError):
    """A plot that cannot be drawn: matplotlib is missing, or there are no figures to plot."""


def _hex(rgb: tuple[int, int, int]) -> str:
    return "#{:02x}{:02x}{:02x}".format(*rgb)


def _figure(rows: int = 1) -> Figure:
    """An empty figure on the Agg canvas (no pyplot, no display), or PlotError without matplotlib."""
    try:
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure
    except ImportError:
        raise PlotError("plots need matplotlib: pip install 'taskgen[plots]'") from None
    figure = Figure(figsize=(7.0, 2.6 + 2.2 * rows), dpi=100, layout="constrained")
    FigureCanvasAgg(figure)
    return figure


def available() -> bool:
    """Whether matplotlib can be imported (galleries draw their chart only then)."""
    import importlib.util
    return importlib.util.find_spec("matplotlib") is not None


def require() -> None:
    """PlotError unless matplotlib is installed: asked before a long run, not after it."""
    if not available():
        raise PlotError("plots need matplotlib: pip install 'taskgen[plots]'")


def save_png(figure: Figure, path: str | os.PathLike[str], data: Mapping[str, Any]) -> Path:
    """Encode ``figure`` as PNG in memory with ``data`` (JSON) in its text chunk, then write it atomically."""
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", metadata={"Software": None, DATA_KEY: json.dumps(data, allow_nan=False)})
    write_bytes_atomic(Path(path), buffer.getvalue())
    return Path(path)


def read_data(path: str | os.PathLike[str]) -> dict[str, Any]:
    """The numbers a taskgen plot draws, read back from its PNG."""
    from PIL import Image

    with Image.open(path) as image:
        text = getattr(image, "text", {}).get(DATA_KEY)
    if text is None:
        raise PlotError(f"{path}: not a taskgen plot (no {DATA_KEY} text chunk)")
    loaded: dict[str, Any] = json.loads(text)
    return loaded


def _mean(values: Sequence[float]) -> float:
    return math.fsum(values) / len(values)


def _number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


# -- how the baselines move with a swept parameter -----------------------------------------------------------
def sweep_data(manifest: Mapping[str, Any], key: str) -> dict[str, Any]:
    """The numbers of a sweep plot of ``key``: at each swept value, over every variant there (all splits),
    each baseline's mean return (the mean of the variants' means) and its spread (their minimum and
    maximum), and the chance level's interval (the means of its lower and certified upper ends; None
    where some variant has no certified upper end)."""
    sweeps = dict(manifest["request"].get("sweeps") or {})
    if key not in sweeps:
        raise PlotError(f"the suite sweeps {', '.join(sweeps) or 'nothing'}, not {key}")
    entries = [v for v in manifest["variants"] if "baselines" in v]
    if not entries:
        raise PlotError("the suite has no figures to plot (written with --baselines none)")
    xs, lines = list(sweeps[key]), {}
    present = [name for name in BASELINES if all(name in v["baselines"] for v in entries)]
    groups = [[v for v in entries if (v.get("overrides") or {}).get(key) == x] for x in xs]
    for name in present:
        per = [[float(v["baselines"][name]["mean_return"]["mean"]) for v in group] for group in groups]
        lines[name] = {"mean": [_mean(p) for p in per], "low": [min(p) for p in per], "high": [max(p) for p in per]}
    chance: dict[str, list[float | None]] | None = None
    if all("chance_level" in v for v in entries):
        chance = {"lower": [_mean([float(v["chance_level"]["lower"]) for v in group]) for group in groups],
                  "upper": [None if any(v["chance_level"]["upper"] is None for v in group)
                            else _mean([float(v["chance_level"]["upper"]) for v in group]) for group in groups]}
    return {"kind": "sweep", "spec": manifest["spec"]["name"], "key": key, "x": xs,
            "variants": [len(g) for g in groups], "lines": lines, "chance_interval": chance}


def sweep_figure(data: Mapping[str, Any]) -> Figure:
    """Mean return against the swept values, one line per baseline with its spread over the variants
    shaded, and the chance level's interval hatched."""
    import matplotlib.style

    with matplotlib.style.context("default"):
        figure = _figure()
        axes = figure.add_subplot()
        xs = data["x"]
        numeric = all(_number(x) for x in xs)
        at = xs if numeric else list(range(len(xs)))
        for name, line in data["lines"].items():
            colour = _hex(COLOURS[name])
            chance = name == "chance"      # dashed and on top: it often equals the cue-blind line
            axes.plot(at, line["mean"], marker="o", color=colour, label=LABELS[name], linestyle="--" if chance else "-",
                      zorder=3 if chance else 2)
            axes.fill_between(at, line["low"], line["high"], color=colour, alpha=0.15, linewidth=0)
        interval = data.get("chance_interval")
        if interval is not None and all(u is not None for u in interval["upper"]):
            axes.fill_between(at, interval["lower"], interval["upper"], facecolor="none",
                              edgecolor=_hex(COLOURS["chance"]), hatch="///", linewidth=0)
        if not numeric:
            axes.set_xticks(at, [str(x) for x in xs])
        axes.set_xlabel(data["key"])
        axes.set_ylabel("mean return")
        counts = sorted(set(data["variants"]))
        axes.set_title(f"{data['spec']}: baselines against {data['key']} "
                       f"({'-'.join(map(str, counts))} variants per point; shaded: their spread)", fontsize=9)
        axes.grid(True, alpha=0.3)
        figure.legend(loc="outside lower center", ncols=2, fontsize=8)
    return figure


def sweep_plots(manifest: Mapping[str, Any], folder: str | os.PathLike[str]) -> list[Path]:
    """One sweep plot per swept key, ``sweep-<key>.png`` in ``folder``."""
    sweeps = manifest["request"].get("sweeps") or {}
    if not sweeps:
        raise PlotError("the suite has no sweep to plot (give --sweep KEY=VALUES)")
    out = []
    for key in sweeps:
        data = sweep_data(manifest, key)
        out.append(save_png(sweep_figure(data), Path(folder) / f"sweep-{key}.png", data))
    return out


# -- each variant's memory gap and recall distance -------------------------------------------------------------
def _spread(figure: Mapping[str, Any]) -> tuple[float, float, float]:
    return float(figure["mean"]), float(figure["minimum"]), float(figure["maximum"])


def strip_data(rows: Iterable[tuple[str, Mapping[str, Any], Mapping[str, Any]]], title: str) -> dict[str, Any]:
    """The numbers of a strip chart from (variant id, memory gap figure, details) per variant: the memory
    gap's mean and its range over the hidden values, and a cue task's recall distance (mean, minimum,
    maximum over the cue values that have one; None for a variant where none has, and in place of the
    whole panel for a kind without recall distances)."""
    ids, gap, recall = [], [], []
    for variant_id, memory_gap, details in rows:
        ids.append(variant_id)
        gap.append(_spread(memory_gap))
        distances = [float(d) for d in (details.get("recall_distance") or {}).values() if d is not None]
        recall.append((_mean(distances), min(distances), max(distances)) if distances else (None, None, None))
    if not ids:
        raise PlotError("no variants to plot")
    return {"kind": "strip", "title": title, "variants": ids,
            "memory_gap": {"mean": [g[0] for g in gap], "low": [g[1] for g in gap], "high": [g[2] for g in gap]},
            "recall_distance": None if all(r[0] is None for r in recall) else
            {"mean": [r[0] for r in recall], "low": [r[1] for r in recall], "high": [r[2] for r in recall]}}


def report_rows(reports: Sequence[Report]) -> list[tuple[str, Mapping[str, Any], Mapping[str, Any]]]:
    """Strip-chart rows from check reports."""
    return [(r.variant_id, dict(r.memory_gap.to_dict()), dict(r.details.to_dict()) if r.details is not None else {})
            for r in reports]


def entry_rows(entries: Sequence[Mapping[str, Any]]) -> list[tuple[str, Mapping[str, Any], Mapping[str, Any]]]:
    """Strip-chart rows from manifest entries (those with figures)."""
    rows = [(str(e["id"]), e["memory_gap"], e.get("details") or {}) for e in entries if "memory_gap" in e]
    if not rows:
        raise PlotError("the suite has no memory gaps to plot (written with --baselines fast or none)")
    return rows


def strip_figure(data: Mapping[str, Any]) -> Figure:
    """Each variant's memory gap (a dot at the mean, a bar over the hidden values' range) and, for a cue
    task, its recall distance, one variant per column."""
    import matplotlib.style

    recall = data.get("recall_distance")
    with matplotlib.style.context("default"):
        figure = _figure(2 if recall else 1)
        panels = figure.subplots(2 if recall else 1, 1, sharex=True, squeeze=False)[:, 0]
        at = list(range(len(data["variants"])))
        for axes, (name, values, colour, unit) in zip(panels, (
                ("memory gap", data["memory_gap"], GAP_COLOUR, "optimal − chance return"),
                ("recall distance", recall, RECALL_COLOUR, "steps from cue to decision"))):
            shown = [i for i in at if values["mean"][i] is not None]   # a variant without a value is left out
            mean = [values["mean"][i] for i in shown]
            low = [m - values["low"][i] for i, m in zip(shown, mean)]
            high = [values["high"][i] - m for i, m in zip(shown, mean)]
            axes.errorbar(shown, mean, yerr=[low, high], fmt="o", color=_hex(colour), ecolor=_hex(colour),
                          elinewidth=1, capsize=2, markersize=4)
            axes.set_ylabel(f"{name}\n({unit})", fontsize=8)
            axes.grid(True, alpha=0.3)
        panels[0].set_title(f"{data['title']}: per variant (dot: mean over hidden values; bar: their range)",
                            fontsize=9)
        panels[-1].set_xlabel("variant")
        if len(at) <= 12:
            panels[-1].set_xticks(at, [str(v).rsplit("-", 1)[-1] for v in data["variants"]])
    return figure


def strip_plot(rows: Sequence[tuple[str, Mapping[str, Any], Mapping[str, Any]]], title: str,
               path: str | os.PathLike[str]) -> Path:
    """Write the strip chart of ``rows`` to ``path``."""
    data = strip_data(rows, title)
    return save_png(strip_figure(data), path, data)
