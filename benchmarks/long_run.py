"""Long run: a million batched steps with memory that stays flat.

    python benchmarks/long_run.py [--steps 1000000] [--num-envs 64] [--spec seed-cache]

Prints the resident set size and the Python heap (tracemalloc) after a warm-up and at the end,
and exits 1 if either grew by more than 5% (plus 2 MiB for allocator noise).
"""

from __future__ import annotations

import argparse
import resource
import sys
import time
import tracemalloc

import numpy as np

import taskgen


def rss_bytes() -> int:
    """Current resident set size, from /proc (Linux), else the peak from getrusage."""
    try:
        with open("/proc/self/statm") as f:
            return int(f.read().split()[1]) * resource.getpagesize()
    except OSError:
        return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--steps", type=int, default=1_000_000, help="batched step() calls")
    parser.add_argument("--num-envs", type=int, default=64)
    parser.add_argument("--spec", default="seed-cache")
    args = parser.parse_args()
    env = taskgen.make_vec(args.spec, args.num_envs)
    env.reset(seed=0)
    rng = np.random.default_rng(0)
    block = rng.integers(4, size=(1000, args.num_envs))
    for a in block:                      # warm-up: caches and allocator pools settle
        env.step(a)
    tracemalloc.start()
    heap0, rss0 = tracemalloc.get_traced_memory()[0], rss_bytes()
    start = time.perf_counter()
    for i in range(args.steps):
        env.step(block[i % 1000])
    elapsed = time.perf_counter() - start
    heap1, rss1 = tracemalloc.get_traced_memory()[0], rss_bytes()
    tracemalloc.stop()
    print(f"{args.steps:,} batched steps × {args.num_envs} envs of {args.spec} in {elapsed:.1f} s")
    print(f"resident set: {rss0 / 2**20:.1f} MiB → {rss1 / 2**20:.1f} MiB")
    print(f"python heap (tracemalloc): {heap0 / 2**10:.1f} KiB → {heap1 / 2**10:.1f} KiB")
    slack = 2 * 2**20
    grew = rss1 > rss0 * 1.05 + slack or heap1 > heap0 * 1.05 + slack
    print("memory grew" if grew else "memory flat")
    return 1 if grew else 0


if __name__ == "__main__":
    sys.exit(main())
