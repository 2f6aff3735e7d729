"""`taskgen bench`: environment steps per second, with references measured in the same run.

Every figure is env-steps per second (a batch of N environments stepping once counts N), with
uniform-random actions drawn before timing (a block of 4,096 steps, cycled). All environments are the raw classes,
without gymnasium's checker wrappers, so the comparison is like for like. The runtimes are timed in
interleaved rounds and each one's fastest run counts. Each spec is also timed with
distractors switched on (``DISTRACTORS``: decoys, and lures where the kind has them) to give what
they cost. ``--all`` times every bundled spec in one run and prints one row each.
"""

from __future__ import annotations

import datetime
import os
import platform
import time
from dataclasses import dataclass
from typing import Any, Callable

import gymnasium as gym
import numpy as np

from ..factory import make, make_vec
from ..kinds import kind_of
from ..spec import Spec

#: The distractor probabilities of the "with distractors" runs (lures only where the kind has them).
DISTRACTORS = {"decoy_probability": 0.2, "lure_probability": 0.2}

def frozen_lake() -> gym.Env[Any, Any]:
    """The reference env: FrozenLake-v1, 8×8, not slippery, without gymnasium's checker wrappers."""
    return gym.make("FrozenLake-v1", map_name="8x8", is_slippery=False).unwrapped


@dataclass(frozen=True)
class Timing:
    """One measured runtime."""

    name: str
    env_steps_per_s: float
    seconds: float
    env_steps: int


REPEATS = 3   # timed rounds; each runtime's fastest run counts

#: A runtime to time: its name, the environments one call steps, and run(steps).
Runtime = tuple[str, int, Callable[[int], None]]


def _calibrate(run: Callable[[int], None], share: float) -> int:
    """A step count for which ``run`` lasts about ``share`` seconds (after a warm-up)."""
    run(10)
    steps = 16
    while True:
        start = time.perf_counter()
        run(steps)
        elapsed = time.perf_counter() - start
        if elapsed >= share or steps >= 1 << 26:
            return steps
        steps = int(steps * max(2.0, 1.2 * share / max(elapsed, 1e-6)))


def _time_all(runtimes: list[Runtime], budget: float) -> list[Timing]:
    """Time each runtime for about ``budget`` seconds: REPEATS rounds, each running every runtime
    once in turn, keeping each one's fastest run. Interleaving puts a drift in the machine's
    speed on every runtime alike, so ratios hold; the fastest run leaves out other load (timeit's
    advice)."""
    steps = [_calibrate(run, budget / REPEATS) for _, _, run in runtimes]
    best = [float("inf")] * len(runtimes)
    for _ in range(REPEATS):
        for i, (_, _, run) in enumerate(runtimes):
            start = time.perf_counter()
            run(steps[i])
            best[i] = min(best[i], time.perf_counter() - start)
    return [Timing(name, n * envs / elapsed, elapsed, n * envs)
            for (name, envs, _), n, elapsed in zip(runtimes, steps, best)]


ACTION_BLOCK = 4096   # actions are drawn before timing and cycled through


def _actions(space: gym.Space[Any]) -> int:
    if not isinstance(space, gym.spaces.Discrete):
        raise ValueError(f"the bench draws discrete actions, got {space}")
    return int(space.n)


def _single_loop(env: gym.Env[Any, Any], rng: np.random.Generator) -> Callable[[int], None]:
    env.reset(seed=0)
    actions = rng.integers(_actions(env.action_space), size=ACTION_BLOCK).tolist()

    def run(steps: int) -> None:
        for i in range(steps):
            _, _, terminated, truncated, _ = env.step(actions[i % ACTION_BLOCK])
            if terminated or truncated:
                env.reset()
    return run


def _vector_loop(env: gym.vector.VectorEnv[Any, Any, Any], rng: np.random.Generator) -> Callable[[int], None]:
    env.reset(seed=0)
    actions = rng.integers(_actions(env.single_action_space), size=(ACTION_BLOCK, env.num_envs))

    def run(steps: int) -> None:
        for i in range(steps):
            env.step(actions[i % ACTION_BLOCK])
    return run


def _raw_numpy_loop(vec: Any, num_envs: int, rng: np.random.Generator) -> Callable[[int], None]:
    """The floor of a table step: gathers of next state, reward and observation, and noise bits, on the
    model's tables (a field's: over its sampled paths)."""
    model, vector = vec.model, vec.core.observations.vector
    next_state, reward, keys = model.next_state, model.reward, model.obs_key
    table = vector.table if vector is not None else np.zeros((model.num_keys, 0), dtype=np.float32)
    bits, width = (vector.noise_bits if vector is not None else 0), table.shape[1]
    p = vector.flip_probability if vector is not None else 0.0
    state = np.zeros(num_envs, dtype=np.int64)
    obs = np.zeros((num_envs, width + bits), dtype=np.float32)

    actions = rng.integers(next_state.shape[1], size=(ACTION_BLOCK, num_envs))

    def run(steps: int) -> None:
        nonlocal state
        for i in range(steps):
            a = actions[i % ACTION_BLOCK]
            reward[state, a]          # gathered as a real step does, result unused
            state = next_state[state, a]
            obs[:, :width] = np.take(table, np.take(keys, state), axis=0)   # the fastest row gather
            if bits:
                obs[:, width:] = rng.random((num_envs, bits)) < p
    return run


def _frame_gather_loop(table: np.ndarray, num_envs: int, rng: np.random.Generator) -> Callable[[int], None]:
    """The floor of a pixel step: gathering N frames from a table into a preallocated buffer."""
    buffer = np.empty((num_envs,) + table.shape[1:], dtype=table.dtype)

    keys = rng.integers(table.shape[0], size=(ACTION_BLOCK, num_envs))

    def run(steps: int) -> None:
        for i in range(steps):
            np.take(table, keys[i % ACTION_BLOCK], axis=0, out=buffer, mode="clip")   # 'raise' buffers out
    return run


def _common_runtimes(spec: Spec, batched: Any, num_envs: int, sync_envs: int,
                     rng: np.random.Generator) -> list[Runtime]:
    """Our single, batched and SyncVectorEnv runs, and FrozenLake's single and SyncVectorEnv runs."""
    return [
        ("taskgen single env", 1, _single_loop(make(spec), rng)),
        (f"taskgen batched env ({num_envs})", num_envs, _vector_loop(batched, rng)),
        (f"SyncVectorEnv over taskgen env ({sync_envs})", sync_envs,
         _vector_loop(gym.vector.SyncVectorEnv([lambda: make(spec)] * sync_envs), rng)),
        ("FrozenLake-v1 8x8 single env", 1, _single_loop(frozen_lake(), rng)),
        (f"SyncVectorEnv over FrozenLake-v1 ({sync_envs})", sync_envs,
         _vector_loop(gym.vector.SyncVectorEnv([frozen_lake] * sync_envs), rng)),
    ]


def describe(spec: Spec) -> dict[str, Any]:
    """What a spec's agent gets, for a bench header: its modalities, noise and distractors."""
    obs = spec.observation
    noise = []
    if obs.vector is not None and obs.vector.noise is not None:
        noise.append(f"{obs.vector.noise.bits} noise bits (flip {obs.vector.noise.flip_probability:g})")
    if obs.pixels is not None and obs.pixels.noise is not None:
        noise.append(f"{obs.pixels.noise.kind} pixel noise {obs.pixels.noise.amplitude:g}")
    dist = obs.distractors
    distractors = [f"{name} {value:g}" for name, value in (("decoys", dist.decoy_probability),
                                                            ("lures", dist.lure_probability)) if value > 0]
    return {"kind": kind_of(spec).name, "modalities": obs.modalities(), "noise": noise, "distractors": distractors}


def _with_distractors(spec: Spec) -> dict[str, Any]:
    """Overrides that switch the bench's distractors on (fields have no lures)."""
    chosen = dict(spec.observation.distractors.model_dump())
    chosen["decoy_probability"] = DISTRACTORS["decoy_probability"]
    if kind_of(spec).name != "field":
        chosen["lure_probability"] = DISTRACTORS["lure_probability"]
    return {"observation__distractors": chosen}


def run_bench(spec: Spec, num_envs: int = 1024, budget: float = 1.0, sync_envs: int | None = None,
              seed: int = 0) -> dict[str, Any]:
    """Measure every runtime and the references; returns timings, ratios and memory."""
    rng = np.random.default_rng(seed)
    sync_envs = sync_envs or num_envs
    batched = make_vec(spec, num_envs)
    runtimes = _common_runtimes(spec, batched, num_envs, sync_envs, rng)
    runtimes.append((f"raw numpy table step ({num_envs})", num_envs, _raw_numpy_loop(batched, num_envs, rng)))
    pixels = make_vec(spec, num_envs, observation__vector=None, observation__grid=None,
                      observation__pixels={"height": 64, "width": 64})
    frames = pixels.core.observations.pixels
    assert frames is not None
    runtimes += [
        (f"taskgen batched top-down 64×64 pixels ({num_envs})", num_envs, _vector_loop(pixels, rng)),
        (f"numpy gather of 64×64×3 frames ({num_envs})", num_envs, _frame_gather_loop(frames, num_envs, rng)),
    ]
    if "first_person" in kind_of(spec).modalities:
        first_person = make_vec(spec, num_envs, agent__actions="turns", observation__vector=None,
                                observation__grid=None, observation__pixels=None,
                                observation__first_person={"height": 64, "width": 64})
        runtimes.append((f"taskgen batched first-person 64×64 ({num_envs})", num_envs,
                         _vector_loop(first_person, rng)))
    distracted = _with_distractors(spec)
    runtimes += [("taskgen single env, distractors on", 1, _single_loop(make(spec, **distracted), rng)),
                 (f"taskgen batched env, distractors on ({num_envs})", num_envs,
                  _vector_loop(make_vec(spec, num_envs, **distracted), rng))]
    timings = _time_all(runtimes, budget)
    single, vec, sync_ours, fl_single, fl_sync, raw, pix, gather = (t.env_steps_per_s for t in timings[:8])
    ratios = {
        "batched / SyncVectorEnv(FrozenLake)": vec / fl_sync,
        "batched / raw numpy table step": vec / raw,
        "single / FrozenLake single": single / fl_single,
        "batched / SyncVectorEnv(taskgen env)": vec / sync_ours,
        "batched / single": vec / single,
        "top-down pixels / numpy frame gather": pix / gather,
    }
    if len(timings) > 10:
        ratios["first-person / SyncVectorEnv(FrozenLake)"] = timings[8].env_steps_per_s / fl_sync
    with_single, with_batched = (t.env_steps_per_s for t in timings[-2:])
    ratios["single with distractors / single"] = with_single / single
    ratios["batched with distractors / batched"] = with_batched / vec
    memory = batched.memory_bytes()
    vector = batched.core.observations.vector
    return {"spec": spec.name, "num_envs": num_envs, "noise_bits": vector.noise_bits if vector is not None else 0,
            "observes": describe(spec), "distractors_on": distracted["observation__distractors"],
            "timings": [t.__dict__ for t in timings], "env_steps_per_s": {t.name: t.env_steps_per_s for t in timings},
            "ratios": ratios, "memory_bytes": {"per_env": memory["per_env"], "shared_tables": memory["shared"]}}


def _observes(result: dict[str, Any]) -> str:
    """One line on what the spec's agent gets."""
    what = result["observes"]
    return (f"{what['kind']}; {', '.join(what['modalities'])}; noise: {', '.join(what['noise']) or 'none'}; "
            f"distractors: {', '.join(what['distractors']) or 'none'}")


def _distractors_on(result: dict[str, Any]) -> str:
    on = result["distractors_on"]
    return ", ".join(f"{name.split('_')[0]}s {value:g}" for name, value in on.items() if value > 0)


def format_bench(result: dict[str, Any]) -> str:
    """A table of the timings, then the ratios and memory."""
    lines = [f"{result['spec']}: {result['num_envs']} envs, uniform-random actions",
             f"  observes: {_observes(result)}",
             f"  distractors on: {_distractors_on(result)}", "", f"  {'runtime':<46} {'env-steps/s':>14}"]
    for t in result["timings"]:
        lines.append(f"  {t['name']:<46} {t['env_steps_per_s']:>14,.0f}")
    lines += ["", "  ratios (same run)"]
    for name, value in result["ratios"].items():
        lines.append(f"  {name:<46} {value:>10.2f}×")
    mem = result["memory_bytes"]
    lines += ["", f"  memory: {mem['per_env']:,} bytes per environment, "
              f"{mem['shared_tables']:,} bytes of shared tables"]
    return "\n".join(lines)


#: The columns of the --all table: (heading, ratio or timing name); timings are in env-steps/s.
SUMMARY = (
    ("single", "taskgen single env"),
    ("batched", "taskgen batched env"),
    ("batched / Sync(FrozenLake)", "batched / SyncVectorEnv(FrozenLake)"),
    ("batched / raw table step", "batched / raw numpy table step"),
    ("single / FrozenLake", "single / FrozenLake single"),
    ("pixels / frame gather", "top-down pixels / numpy frame gather"),
    ("first-person / Sync(FrozenLake)", "first-person / SyncVectorEnv(FrozenLake)"),
    ("single, distractors on", "single with distractors / single"),
    ("batched, distractors on", "batched with distractors / batched"),
)


def _figure(result: dict[str, Any], name: str) -> str:
    if name in result["ratios"]:
        return f"{result['ratios'][name]:.2f}×"
    steps = next((v for k, v in result["env_steps_per_s"].items() if k.split(" (")[0] == name), None)
    return "–" if steps is None else f"{steps:,.0f}"


def bench_title() -> str:
    """A title that dates a bench and names the machine's kind (CPUs, Python, numpy, gymnasium)."""
    return (f"taskgen bench, {datetime.date.today().isoformat()}: {os.cpu_count()} CPUs ({platform.machine()}), "
            f"Python {platform.python_version()}, numpy {np.__version__}, gymnasium {gym.__version__}")


def format_all(results: list[dict[str, Any]], title: str = "") -> str:
    """A Markdown report of several specs' benches: what each spec's agent gets, then one row per spec
    with its steps/s and every ratio (all measured in one run)."""
    num_envs = results[0]["num_envs"] if results else 0
    lines = [f"# {title}" if title else "# taskgen bench", "",
             f"Env-steps per second with uniform-random actions; batches of {num_envs}; every ratio is between "
             "two runs of the same process. Ratios carry over between machines, absolute numbers do not.",
             f"Distractors on: decoys {DISTRACTORS['decoy_probability']:g}, lures "
             f"{DISTRACTORS['lure_probability']:g} (fields: decoy marks only).", "", "## What each spec observes", ""]
    lines += [f"- `{r['spec']}`: {_observes(r)}" for r in results]
    lines += ["", "## Figures", "", "| spec | " + " | ".join(h for h, _ in SUMMARY) + " |",
              "|---|" + "---:|" * len(SUMMARY)]
    lines += ["| " + " | ".join([f"`{r['spec']}`"] + [_figure(r, name) for _, name in SUMMARY]) + " |"
              for r in results]
    return "\n".join(lines) + "\n"
