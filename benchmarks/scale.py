"""Variants per second of `taskgen variants` (draw and analyse) in one process, in a process pool of
two and on a two-worker local Dask cluster, on the same suite; prints the ratios against the pool,
measured in one run. Needs the extra taskgen[dask].

    python benchmarks/scale.py [--variants 60]

Dask's cost is reported two ways: with the local cluster's start-up (what `--scheduler local:2`
costs a user) and against an already running cluster (what a long-lived scheduler costs per variant).
"""

from __future__ import annotations

import argparse
import time

from dask.distributed import LocalCluster

import taskgen
from taskgen.tools.variants import SuiteRequest, build_suite, manifest_text


def timed(spec: taskgen.Spec, request: SuiteRequest, **where: object) -> tuple[float, str]:
    start = time.perf_counter()
    text = manifest_text(build_suite(spec, request, progress=False, **where))   # type: ignore[arg-type]
    return time.perf_counter() - start, text


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--variants", type=int, default=60)
    n = parser.parse_args().variants
    print("| spec | variants | 1 process (v/s) | pool of 2 (v/s) | local:2 with start-up (v/s) | running "
          "2-worker cluster (v/s) | running cluster / pool | overhead per variant vs pool (ms) |")
    print("|---|---:|---:|---:|---:|---:|---:|---:|")
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0",
                      silence_logs=50) as cluster:
        for name in ("orchard-hives", "lantern-hall"):
            spec = taskgen.load_spec(taskgen.bundled_specs()[name])
            request = SuiteRequest(splits=(("train", n),), disjoint_layouts=name == "orchard-hives")
            one, reference = timed(spec, request, workers=1)
            pool, text_pool = timed(spec, request, workers=2)
            local, text_local = timed(spec, request, scheduler="local:2")
            running, text_running = timed(spec, request, scheduler=cluster.scheduler_address)
            assert reference == text_pool == text_local == text_running, "manifests differ"
            print(f"| {name} | {n} | {n / one:.1f} | {n / pool:.1f} | {n / local:.1f} | {n / running:.1f} | "
                  f"{pool / running:.2f} | {(running - pool) / n * 1000:.1f} |")


if __name__ == "__main__":
    main()
