"""`taskgen evaluate` and `taskgen score`: a policy's results on a suite's variants, against the baselines
the manifest already holds.

Per variant: the success rate with its exact (Clopper–Pearson) 95% interval, the mean return with its
standard error, the score normalised between chance and optimal, ``(R − chance) / (optimal − chance)``,
and a one-sided exact binomial test of the successes against the chance success rate; the p-values
are Holm-corrected across the variants. Overall: the pooled success rate and return, the mean
normalised score over variants, and how many variants are significantly above chance.

The chance figures are the manifest's: ``chance`` is the upper end of its certified ``chance_level``
(no memoryless policy scores more, so a positive normalised score is above every memoryless agent);
the chance success rate is the larger of the success rates of the memoryless policies the analyses
found (the return-best deterministic one and the stochastic one).

A policy is a callable from a batch of observations to a batch of actions. One with state (a
recurrent network) may also have ``reset(mask)``: it is called with ``bool[N]`` before the first
step (all True) and whenever environments start new episodes (those True), so it clears their state.
Episodes run in batches of ``num_envs`` environments of one variant with same-step autoreset; each
environment plays a fixed share of the episodes, so short episodes are not favoured.
"""

from __future__ import annotations

import importlib
import json
import math
import os
import sys
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any, Callable, Iterable, Sequence

import numpy as np
from gymnasium import spaces

from ..envs import TaskVectorEnv
from ..errors import TaskgenError
from ..kinds import family_observations, kind_of
from ..manifest import ManifestError, entry_model, load_manifest, split_entries, suite_widths
from .output import write_text_atomic

ALPHA = 0.05          # the significance level of "above chance" (after Holm's correction)
CONFIDENCE = 0.95     # of the success rate's interval

Policy = Callable[[Any], Any]


class EvaluationError(TaskgenError, ValueError):
    """A policy, an episodes file or a request that cannot be evaluated (says what and where)."""


@dataclass(frozen=True)
class Episode:
    """One finished episode: the variant it played, its (discounted) return, success and length."""

    variant_id: str
    ret: float
    success: bool
    length: int

    def to_dict(self) -> dict[str, Any]:
        """One line of an episodes file."""
        return {"variant_id": self.variant_id, "return": self.ret, "success": self.success, "length": self.length}


@dataclass(frozen=True)
class VariantScore:
    """A policy's figures on one variant, beside the variant's baselines."""

    variant_id: str
    split: str
    episodes: int
    successes: int
    success_rate: float
    success_low: float            # Clopper–Pearson interval at CONFIDENCE
    success_high: float
    mean_return: float
    return_se: float              # sample sd / √n (0 for one episode)
    optimal: float
    chance: float                 # the upper end of the certified chance level
    chance_lower: float
    chance_success: float | None  # the chance success rate the test compares with (None: unknown)
    normalised: float | None      # (R − chance) / (optimal − chance); None when optimal ≤ chance
    p_value: float | None         # one-sided exact binomial test of success > chance success
    p_holm: float | None          # the same, Holm-corrected across the variants
    above_chance: bool            # p_holm < ALPHA


@dataclass(frozen=True)
class Evaluation:
    """Per-variant scores and the overall figures of one policy on one split (or on logged episodes)."""

    split: str
    variants: list[VariantScore]
    overall: dict[str, Any]

    def to_dict(self) -> dict[str, Any]:
        """Plain data (``--json``)."""
        return {"split": self.split, "alpha": ALPHA, "confidence": CONFIDENCE,
                "variants": [asdict(v) for v in self.variants], "overall": self.overall}


# -- statistics -----------------------------------------------------------------------------------------
def clopper_pearson(successes: int, n: int, confidence: float = CONFIDENCE) -> tuple[float, float]:
    """The exact (Clopper–Pearson) interval of a binomial proportion, from scipy.stats.binomtest."""
    from scipy import stats   # on first use: scipy.stats takes most of a second to import
    ci = stats.binomtest(successes, n).proportion_ci(confidence_level=confidence, method="exact")
    return float(ci.low), float(ci.high)


def above_chance_p(successes: int, n: int, chance: float) -> float:
    """One-sided exact binomial test of ``successes`` in ``n`` against the success rate ``chance``."""
    from scipy import stats
    return float(stats.binomtest(successes, n, min(max(chance, 0.0), 1.0), alternative="greater").pvalue)


def holm(p_values: Sequence[float]) -> np.ndarray:
    """Holm's step-down adjusted p-values (Holm 1979): the i-th smallest times (m − i + 1), made
    non-decreasing in that order and capped at 1; returned in the input order."""
    p = np.asarray(p_values, dtype=float)
    m = p.size
    order = np.argsort(p, kind="stable")
    adjusted = np.minimum(1.0, np.maximum.accumulate(p[order] * (m - np.arange(m))))
    out = np.empty(m)
    out[order] = adjusted
    return out


# -- scoring ----------------------------------------------------------------------------------------------
def _figure(baseline: dict[str, Any] | None, name: str) -> float | None:
    figure = (baseline or {}).get(name)
    return None if figure is None else float(figure["mean"])


def _variant_score(entry: dict[str, Any], episodes: list[Episode]) -> VariantScore:
    """One variant's figures from its episodes and its manifest entry."""
    n = len(episodes)
    k = sum(e.success for e in episodes)
    returns = np.array([e.ret for e in episodes])
    baselines = entry.get("baselines") or {}
    if "chance" not in baselines:
        raise EvaluationError(f"variant {entry['id']} has no chance level in the manifest (it was written with "
                              "--baselines fast or none): write the suite with --baselines full to score against it")
    optimal = _figure(baselines.get("optimal"), "mean_return")
    level = entry.get("chance_level") or {}
    chance = level.get("upper", _figure(baselines.get("chance"), "mean_return"))
    if optimal is None or chance is None:
        raise EvaluationError(f"variant {entry['id']}: the manifest has no optimal or chance return")
    chance_lower = level.get("lower", chance)
    rates = [r for r in (_figure(baselines.get("chance"), "success_rate"),
                         _figure(baselines.get("chance_stochastic"), "success_rate")) if r is not None]
    chance_success = max(rates) if rates else None
    low, high = clopper_pearson(k, n)
    mean = float(returns.mean())
    return VariantScore(
        variant_id=entry["id"], split=entry["split"], episodes=n, successes=k, success_rate=k / n,
        success_low=low, success_high=high, mean_return=mean,
        return_se=float(returns.std(ddof=1) / math.sqrt(n)) if n > 1 else 0.0,
        optimal=float(optimal), chance=float(chance), chance_lower=float(chance_lower),
        chance_success=chance_success,
        normalised=(mean - chance) / (optimal - chance) if optimal > chance else None,
        p_value=above_chance_p(k, n, chance_success) if chance_success is not None else None,
        p_holm=None, above_chance=False)


def score(episodes: Iterable[Episode], manifest: dict[str, Any], split: str = "all") -> Evaluation:
    """Figures of logged episodes, matched to the manifest's variants by id (each variant with at least
    one episode counts; an id the manifest does not list is an error)."""
    entries = {v["id"]: v for v in manifest["variants"]}
    grouped: dict[str, list[Episode]] = {}
    for e in episodes:
        if e.variant_id not in entries:
            raise EvaluationError(f"variant {e.variant_id!r} is not in the manifest")
        grouped.setdefault(e.variant_id, []).append(e)
    if not grouped:
        raise EvaluationError("no episodes to score")
    order = [v["id"] for v in manifest["variants"] if v["id"] in grouped]
    scores = [_variant_score(entries[i], grouped[i]) for i in order]
    tested = [j for j, s in enumerate(scores) if s.p_value is not None]
    adjusted = holm([scores[j].p_value for j in tested]) if tested else np.array([])   # type: ignore[misc]
    for j, p in zip(tested, adjusted):
        scores[j] = _with_holm(scores[j], float(p))
    every = [e for i in order for e in grouped[i]]
    k, n = sum(e.success for e in every), len(every)
    returns = np.array([e.ret for e in every])
    normalised = [s.normalised for s in scores if s.normalised is not None]
    low, high = clopper_pearson(k, n)
    overall = {
        "variants": len(scores), "episodes": n, "successes": k, "success_rate": k / n,
        "success_low": low, "success_high": high, "mean_return": float(returns.mean()),
        "return_se": float(returns.std(ddof=1) / math.sqrt(n)) if n > 1 else 0.0,
        "normalised": float(np.mean(normalised)) if normalised else None,
        "normalised_se": float(np.std(normalised, ddof=1) / math.sqrt(len(normalised)))
        if len(normalised) > 1 else None,
        "above_chance": sum(s.above_chance for s in scores), "tested": len(tested),
    }
    return Evaluation(split, scores, overall)


def _with_holm(s: VariantScore, p: float) -> VariantScore:
    return VariantScore(**{**asdict(s), "p_holm": p, "above_chance": p < ALPHA})


# -- running a policy ---------------------------------------------------------------------------------------
def _actions(policy: Policy, obs: Any, n: int, num_actions: int) -> np.ndarray:
    """The policy's actions for a batch, checked (a wrong shape or value names what came back)."""
    actions = np.asarray(policy(obs))
    if actions.shape != (n,) or actions.dtype.kind not in "iu" or (actions < 0).any() or (actions >= num_actions).any():
        raise EvaluationError(f"the policy must return {n} integer actions in [0, {num_actions}), "
                              f"got {actions!r}"[:300])
    return actions.astype(np.int64)


def run_policy(policy: Policy, manifest_path: str | os.PathLike[str], split: str = "test", episodes: int = 100,
               num_envs: int = 64, seed: int = 0) -> list[Episode]:
    """Play ``episodes`` episodes of ``policy`` on every variant of ``split``, in batches of up to
    ``num_envs`` environments (env i seeded ``seed + i``); returns them in variant order."""
    if episodes < 1 or num_envs < 1:
        raise EvaluationError(f"episodes and num_envs must be ≥ 1, got {episodes} and {num_envs}")
    manifest = load_manifest(manifest_path, splits=[split])
    widths = suite_widths(manifest, str(manifest_path))
    reset = getattr(policy, "reset", None)
    out: list[Episode] = []
    for entry in split_entries(manifest, split, str(manifest_path)):
        spec, model = entry_model(manifest, entry, str(manifest_path))
        n = min(num_envs, episodes)
        core = kind_of(spec).core([(model, family_observations(model, spec, widths))] * n, n)
        env = TaskVectorEnv(core, autoreset_mode="same_step")
        quota = episodes // n + (np.arange(n) < episodes % n)
        done = np.zeros(n, dtype=np.int64)
        returns, lengths = np.zeros(n), np.zeros(n, dtype=np.int64)
        gamma = float(spec.episode.discount)
        obs, _ = env.reset(seed=seed)
        if reset is not None:
            reset(np.ones(n, dtype=bool))
        num_actions = env.single_action_space.n        # type: ignore[attr-defined]
        while (done < quota).any():
            obs, reward, terminated, truncated, info = env.step(_actions(policy, obs, n, num_actions))
            returns += reward * gamma ** lengths
            lengths += 1
            ended = terminated | truncated
            if ended.any():
                success = info["final_info"]["is_success"]
                for i in np.flatnonzero(ended & (done < quota)).tolist():
                    out.append(Episode(entry["id"], float(returns[i]), bool(success[i]), int(lengths[i])))
                done += ended
                returns[ended], lengths[ended] = 0.0, 0
                if reset is not None:
                    reset(ended.copy())
    return out


def evaluate(policy: Policy, manifest: str | os.PathLike[str], split: str = "test", episodes: int = 100,
             num_envs: int = 64, seed: int = 0) -> Evaluation:
    """Run ``policy`` on every variant of ``split`` and score it against the manifest's baselines
    (the Python form of ``taskgen evaluate``)."""
    played = run_policy(policy, manifest, split, episodes, num_envs, seed)
    return score(played, load_manifest(manifest, splits=[split]), split)


def load_policy(reference: str, observation_space: spaces.Space[Any], action_space: spaces.Space[Any]) -> Policy:
    """``module:factory`` → ``factory(observation_space, action_space)``, the policy it returns (the
    current folder is importable, as for ``python -m``)."""
    module_name, _, name = reference.partition(":")
    if not module_name or not name:
        raise EvaluationError(f"--policy: expected MODULE:FACTORY, e.g. mypolicies:load, got {reference!r}")
    if os.getcwd() not in sys.path:
        sys.path.insert(0, os.getcwd())
    try:
        module = importlib.import_module(module_name)
    except ImportError as exc:
        raise EvaluationError(f"--policy: cannot import {module_name!r}: {exc}") from None
    factory = getattr(module, name, None)
    if not callable(factory):
        raise EvaluationError(f"--policy: {module_name} has no callable {name!r}")
    policy = factory(observation_space, action_space)
    if not callable(policy):
        raise EvaluationError(f"--policy: {reference}(observation_space, action_space) returned "
                              f"{type(policy).__name__}, not a callable policy")
    return policy


def suite_spaces(manifest_path: str | os.PathLike[str], split: str) -> tuple[spaces.Space[Any], spaces.Space[Any]]:
    """The observation and action space of one environment of a split (a policy factory gets them)."""
    manifest = load_manifest(manifest_path, splits=[split])
    entry = split_entries(manifest, split, str(manifest_path))[0]
    spec, model = entry_model(manifest, entry, str(manifest_path))
    core = kind_of(spec).core([(model, family_observations(model, spec, suite_widths(manifest)))], 1)
    return core.single_observation_space(), spaces.Discrete(core.num_actions)


def read_episodes(path: str | os.PathLike[str]) -> list[Episode]:
    """An episodes file: one JSON object per line with ``variant_id``, ``return`` and ``success``
    (``length`` optional); a bad line is an error naming the file and line."""
    out: list[Episode] = []
    try:
        lines = Path(path).read_text(encoding="utf-8").splitlines()
    except (OSError, UnicodeDecodeError) as exc:
        raise EvaluationError(f"{path}: expected a readable UTF-8 file of JSON lines: {exc}") from None
    for number, line in enumerate(lines, 1):
        if not line.strip():
            continue
        try:
            row = json.loads(line)
            ret, success = row["return"], row["success"]
            if not isinstance(row["variant_id"], str) or isinstance(ret, bool) or \
                    not isinstance(ret, (int, float)) or not math.isfinite(ret) or not isinstance(success, bool):
                raise TypeError
            out.append(Episode(row["variant_id"], float(ret), success, int(row.get("length", 0))))
        except (ValueError, KeyError, TypeError, AttributeError):
            raise EvaluationError(f"{path}:{number}: expected {{\"variant_id\": text, \"return\": number, "
                                  f"\"success\": true|false}}, got {line[:80]!r}") from None
    return out


def write_episodes(episodes: Sequence[Episode], path: str | os.PathLike[str]) -> None:
    """Write episodes as JSON lines (what ``read_episodes`` and ``taskgen score`` read)."""
    write_text_atomic(path, "".join(json.dumps(e.to_dict()) + "\n" for e in episodes))


def _number(x: float | None, digits: int = 3) -> str:
    return "–" if x is None else f"{x:.{digits}f}"


def format_evaluation(result: Evaluation) -> str:
    """The per-variant table and the overall line, as `taskgen evaluate` prints them."""
    lines = [f"split {result.split}: {len(result.variants)} variants (success: {CONFIDENCE:.0%} Clopper–Pearson "
             f"interval; p: one-sided exact binomial test against the chance success rate, Holm-corrected)", "",
             "| variant | episodes | success | 95% interval | return ± SE | chance | optimal | normalised | p (Holm) |",
             "|---|---:|---:|---|---:|---:|---:|---:|---:|"]
    for v in result.variants:
        p = "–" if v.p_holm is None else (f"{v.p_holm:.2g}" + (" *" if v.above_chance else ""))
        lines.append(f"| {v.variant_id} | {v.episodes} | {v.success_rate:.3f} | [{v.success_low:.3f}, "
                     f"{v.success_high:.3f}] | {v.mean_return:.3f} ± {v.return_se:.3f} | {v.chance:.3f} | "
                     f"{v.optimal:.3f} | {_number(v.normalised)} | {p} |")
    o = result.overall
    lines += ["", f"overall: {o['episodes']} episodes, success {o['success_rate']:.3f} "
              f"[{o['success_low']:.3f}, {o['success_high']:.3f}], return {o['mean_return']:.3f} ± "
              f"{o['return_se']:.3f}, normalised {_number(o['normalised'])}"
              + (f" ± {o['normalised_se']:.3f}" if o["normalised_se"] is not None else "")
              + f" (mean over variants); {o['above_chance']} of {o['tested']} variants above chance "
              f"(* : Holm-corrected p < {ALPHA})"]
    return "\n".join(lines) + "\n"


__all__ = ["ALPHA", "Episode", "Evaluation", "EvaluationError", "ManifestError", "VariantScore", "above_chance_p",
           "clopper_pearson", "evaluate", "format_evaluation", "holm", "load_policy", "read_episodes", "run_policy",
           "score", "suite_spaces", "write_episodes"]
