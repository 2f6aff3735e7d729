"""`taskgen bench`: environment steps per second, with references measured in the same run.

Every figure is env-steps per second (a batch of N environments stepping once counts N), with
uniform-random actions drawn before timing (a block of 4,096 steps, cycled). All environments are the raw classes, without
gymnasium's checker wrappers, so the comparison is like for like.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from typing import Any, Callable

import gymnasium as gym
import numpy as np

from ..factory import make, make_vec
from ..kinds import kind_of
from ..spec import Spec

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


def _timed(name: str, envs: int, run: Callable[[int], None], budget: float) -> Timing:
    """Time ``run(steps)`` with enough steps to last about ``budget`` seconds."""
    run(10)  # warm up
    steps = 16
    while True:
        start = time.perf_counter()
        run(steps)
        elapsed = time.perf_counter() - start
        if elapsed >= budget or steps >= 1 << 26:
            return Timing(name, steps * envs / elapsed, elapsed, steps * envs)
        steps = int(steps * max(2.0, 1.2 * budget / max(elapsed, 1e-6)))


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
            obs[:, :width] = table[keys[state]]
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


def _common_timings(spec: Spec, batched: Any, num_envs: int, sync_envs: int, budget: float,
                    rng: np.random.Generator) -> list[Timing]:
    """Our single, batched and SyncVectorEnv runs, and FrozenLake's single and SyncVectorEnv runs."""
    return [
        _timed("taskgen single env", 1, _single_loop(make(spec), rng), budget),
        _timed(f"taskgen batched env ({num_envs})", num_envs, _vector_loop(batched, rng), budget),
        _timed(f"SyncVectorEnv over taskgen env ({sync_envs})", sync_envs,
               _vector_loop(gym.vector.SyncVectorEnv([lambda: make(spec)] * sync_envs), rng), budget),
        _timed("FrozenLake-v1 8x8 single env", 1,
               _single_loop(frozen_lake(), rng), budget),
        _timed(f"SyncVectorEnv over FrozenLake-v1 ({sync_envs})", sync_envs,
               _vector_loop(gym.vector.SyncVectorEnv([frozen_lake] * sync_envs),
                            rng), budget),
    ]


def run_bench(spec: Spec, num_envs: int = 1024, budget: float = 1.0, sync_envs: int | None = None,
              seed: int = 0) -> dict[str, Any]:
    """Measure every runtime and the references; returns timings, ratios and memory."""
    rng = np.random.default_rng(seed)
    sync_envs = sync_envs or num_envs
    batched = make_vec(spec, num_envs)
    timings = _common_timings(spec, batched, num_envs, sync_envs, budget, rng)
    timings.append(_timed(f"raw numpy table step ({num_envs})", num_envs, _raw_numpy_loop(batched, num_envs, rng),
                          budget))
    pixels = make_vec(spec, num_envs, observation__vector=None, observation__grid=None,
                      observation__pixels={"height": 64, "width": 64})
    frames = pixels.core.observations.pixels
    assert frames is not None
    timings += [
        _timed(f"taskgen batched top-down 64×64 pixels ({num_envs})", num_envs, _vector_loop(pixels, rng), budget),
        _timed(f"numpy gather of 64×64×3 frames ({num_envs})", num_envs,
               _frame_gather_loop(frames, num_envs, rng), budget),
    ]
    if "first_person" in kind_of(spec).modalities:
        first_person = make_vec(spec, num_envs, agent__actions="turns", observation__vector=None,
                                observation__grid=None, observation__pixels=None,
                                observation__first_person={"height": 64, "width": 64})
        timings.append(_timed(f"taskgen batched first-person 64×64 ({num_envs})", num_envs,
                              _vector_loop(first_person, rng), budget))
    single, vec, sync_ours, fl_single, fl_sync, raw, pix, gather = (t.env_steps_per_s for t in timings[:8])
    ratios = {
        "batched / SyncVectorEnv(FrozenLake)": vec / fl_sync,
        "batched / raw numpy table step": vec / raw,
        "single / FrozenLake single": single / fl_single,
        "batched / SyncVectorEnv(taskgen env)": vec / sync_ours,
        "batched / single": vec / single,
        "top-down pixels / numpy frame gather": pix / gather,
    }
    if len(timings) > 8:
        ratios["first-person / SyncVectorEnv(FrozenLake)"] = timings[8].env_steps_per_s / fl_sync
    memory = batched.memory_bytes()
    vector = batched.core.observations.vector
    return {"spec": spec.name, "num_envs": num_envs, "noise_bits": vector.noise_bits if vector is not None else 0,
            "timings": [t.__dict__ for t in timings], "env_steps_per_s": {t.name: t.env_steps_per_s for t in timings},
            "ratios": ratios, "memory_bytes": {"per_env": memory["per_env"], "shared_tables": memory["shared"]}}


def format_bench(result: dict[str, Any]) -> str:
    """A table of the timings, then the ratios and memory."""
    lines = [f"{result['spec']}: {result['num_envs']} envs, {result['noise_bits']} noise bits, "
             "uniform-random actions", "", f"  {'runtime':<46} {'env-steps/s':>14}"]
    for t in result["timings"]:
        lines.append(f"  {t['name']:<46} {t['env_steps_per_s']:>14,.0f}")
    lines += ["", "  ratios (same run)"]
    for name, value in result["ratios"].items():
        lines.append(f"  {name:<46} {value:>10.2f}×")
    mem = result["memory_bytes"]
    lines += ["", f"  memory: {mem['per_env']:,} bytes per environment, "
              f"{mem['shared_tables']:,} bytes of shared tables"]
    return "\n".join(lines)
