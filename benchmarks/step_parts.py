"""Where a batched step's time goes: microseconds per call of each part, on bundled specs.

    python benchmarks/step_parts.py [SPEC ...] [--num-envs 1024] [--calls 3000]

For each spec: a whole ``step`` with uniform-random actions; the core's ``advance`` and ``observe``;
the infos (none ended, and 5% ended); a restart of 5% of the environments (their next episodes'
keys, start states and noise); and, for scale, one ``np.take`` and one ``np.add`` over N int64s —
numpy's per-call cost, which bounds how far a step of ~30 calls can come down. Absolute numbers
depend on the machine; compare parts within one run.
"""

from __future__ import annotations

import argparse
import time
from typing import Callable

import numpy as np

import taskgen


def per_call(run: Callable[[], object], calls: int) -> float:
    """Microseconds per call of ``run`` (after one warm-up call)."""
    run()
    start = time.perf_counter()
    for _ in range(calls):
        run()
    return (time.perf_counter() - start) / calls * 1e6


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("specs", nargs="*", default=["lantern-hall", "signal-tower", "seed-cache", "marsh-stones"])
    parser.add_argument("--num-envs", type=int, default=1024)
    parser.add_argument("--calls", type=int, default=3000)
    args = parser.parse_args()
    n, calls = args.num_envs, args.calls
    for name in args.specs:
        env = taskgen.make_vec(name, n)
        env.reset(seed=0)
        core = env.core
        actions = np.random.default_rng(0).integers(core.num_actions, size=(256, n))
        counter = iter(range(1 << 62))
        ended = np.zeros(n, dtype=bool)
        ended[::20] = True
        rows = np.flatnonzero(ended)
        parts = {
            "step": lambda: env.step(actions[next(counter) % 256]),
            "advance": lambda: core.advance(actions[0]),
            "observe": core.observe,
            "infos": env._infos,
            "infos, 5% ended": lambda: env._infos(ended),
            "restart 5%": lambda: env._next.restart(rows),
        }
        print(f"{name} ({n} environments): " + ", ".join(f"{part} {per_call(run, calls):.1f} µs"
                                                         for part, run in parts.items()))
    x = np.zeros(n, dtype=np.int64)
    print(f"numpy per call on {n} int64s: take {per_call(lambda: np.take(x, x), calls):.1f} µs, "
          f"add {per_call(lambda: np.add(x, 1), calls):.1f} µs")


if __name__ == "__main__":
    main()
