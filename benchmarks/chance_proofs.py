"""How long the chance proof takes and how much gap is left, over corridors and mazes of growing size.

    python benchmarks/chance_proofs.py [--budget 2000000] [--quick] [--mazes-only] [--corridors-only]

For each case: the deterministic memoryless search (branch and bound, policysearch.py) with its
proof time, nodes, classes and final gap (upper − lower; 0 when proven), then the stochastic
search's time and value. Corridors: length 10–200 × 2–5 cue values × widths 1–3. Uniform mazes:
5×5 to 21×21 × 2–3 goals in dead ends, the agent seeing its position and walls. Every figure is
measured in this run; nothing is compared with a stored number.
"""

from __future__ import annotations

import argparse
import time
from typing import Any

import yaml

import taskgen
from taskgen.analysis.memoryless import solve_memoryless
from taskgen.analysis.policysearch import NODES
from taskgen.analysis.stochastic import best_stochastic
from taskgen.render.observations import key_classes


def corridor(length: int, values: int, width: int) -> dict[str, Any]:
    """A corridor spec: the cue shown for one step, ±1 at the arms, a small step cost."""
    layout: dict[str, Any] = {"length": length, "arm_length": 2}
    if width > 1:
        layout["width"] = width
    return {"format_version": 1, "name": f"bench-corridor-{length}-{values}-{width}", "layout": {"corridor": layout},
            "cue": {"values": values}, "rewards": {"correct": 1.0, "wrong": -1.0, "step": -0.01, "timeout": -1.0}}


def maze(size: int, goals: int) -> dict[str, Any]:
    """A uniform maze spec with ``goals`` goals in dead ends."""
    return {"format_version": 1, "name": f"bench-maze-{size}-{goals}",
            "layout": {"maze": {"width": size, "height": size, "generator": "uniform", "start": "corner",
                                "goals_in_dead_ends": True, "min_goal_distance": 2}},
            "cue": {"values": goals}, "rewards": {"correct": 1.0, "wrong": -1.0, "step": -0.01, "timeout": -1.0},
            "observation": {"vector": {"cue": True, "position": "one_hot", "walls": True}}}


def run(doc: dict[str, Any], budget: int) -> str:
    """One case, as a printed row."""
    spec = taskgen.load_spec_text(yaml.safe_dump(doc, sort_keys=False))
    model = taskgen.compile_variant(taskgen.make_variant(spec, 0))
    classes = key_classes(taskgen.observation_set(model, spec.observation))[model.obs_key]
    began = time.perf_counter()
    det = solve_memoryless(model, classes, budget)
    proof = time.perf_counter() - began
    began = time.perf_counter()
    stoch = best_stochastic(model, classes, [det.policy])
    stochastic = time.perf_counter() - began
    return (f"{doc['name']:<26} {model.num_states:>7} {model.horizon:>5} {det.proof.classes:>7} "
            f"{det.proof.nodes:>10,} {proof:>8.2f} {det.method:>8} {det.upper - det.mean_return:>9.4f} "
            f"{det.mean_return:>9.4f} {stoch.mean_return:>9.4f} {stochastic:>8.2f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--budget", type=int, default=NODES, help="nodes per search (the CLI's --chance-budget)")
    parser.add_argument("--quick", action="store_true", help="the smallest and largest of each sweep only")
    parser.add_argument("--mazes-only", action="store_true")
    parser.add_argument("--corridors-only", action="store_true")
    args = parser.parse_args()
    lengths = [10, 200] if args.quick else [10, 25, 50, 100, 200]
    values = [2, 5] if args.quick else [2, 3, 4, 5]
    sizes = [5, 21] if args.quick else [5, 7, 9, 11, 15, 21]
    print(f"{'case':<26} {'states':>7} {'steps':>5} {'classes':>7} {'nodes':>10} {'proof s':>8} {'method':>8} "
          f"{'gap':>9} {'chance':>9} {'stoch.':>9} {'stoch. s':>8}")
    if not args.mazes_only:
        for width in (1, 2, 3):
            for k in values:
                for length in lengths:
                    print(run(corridor(length, k, width), args.budget), flush=True)
    if not args.corridors_only:
        for size in sizes:
            for goals in (2, 3):
                print(run(maze(size, goals), args.budget), flush=True)


if __name__ == "__main__":
    main()
