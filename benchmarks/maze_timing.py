"""Time one large maze variant through the pipeline: generate, compile, analyse.

    python benchmarks/maze_timing.py [--size 41] [--generator uniform] [--seed 0]

Prints seconds for drawing the variant (maze and placement), compiling the model, and each
analysis (solvability, optimal, chance, cue-blind, random) on it.
"""

from __future__ import annotations

import argparse
import time

import yaml

import taskgen
from taskgen.analysis import best_memoryless, cue_blind_baseline, optimal_baseline, random_baseline, shortest_steps
from taskgen.tools.check import observation_tables


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, default=41)
    parser.add_argument("--generator", default="uniform")
    parser.add_argument("--seed", type=int, default=0)
    args = parser.parse_args()
    spec = taskgen.load_spec_text(yaml.safe_dump({
        "format_version": 1, "name": "big-maze",
        "layout": {"maze": {"width": args.size, "height": args.size, "generator": args.generator,
                            "goals_in_dead_ends": True, "min_goal_distance": args.size}},
        "cue": {"values": 2}, "rewards": {"correct": 1.0, "wrong": -1.0, "step": -0.001, "timeout": -1.0}}))
    timings = {}

    def timed(name, fn):
        start = time.perf_counter()
        out = fn()
        timings[name] = time.perf_counter() - start
        return out

    variant = timed("generate variant", lambda: taskgen.make_variant(spec, args.seed))
    model = timed("compile model", lambda: taskgen.compile_variant(variant))
    tables = observation_tables(model, spec)
    timed("solvability", lambda: shortest_steps(model))
    timed("optimal (exact)", lambda: optimal_baseline(model))
    timed("cue-blind (exact)", lambda: cue_blind_baseline(model))
    timed("random (exact)", lambda: random_baseline(model))
    result = timed("chance (memoryless search)", lambda: best_memoryless(model, tables))
    print(f"{args.size}×{args.size} {args.generator} maze: {model.num_states} states, "
          f"step limit {model.horizon}")
    for name, seconds in timings.items():
        print(f"  {name:<28} {seconds:8.3f} s")
    print(f"  chance method: {result.method} ({result.detail})")


if __name__ == "__main__":
    main()
