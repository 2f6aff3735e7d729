"""Where a suite runs: the manifest is the same bytes in this process, in a process pool and on a Dask
cluster (the reference is the single-process run), and a Dask run survives losing a worker."""

from __future__ import annotations

import os

import pytest

import taskgen
from taskgen.tools.progress import Progress
from taskgen.tools.scale import Dask, ScaleError, runner
from taskgen.tools.variants import SuiteRequest, build_suite, manifest_text

distributed = pytest.importorskip("dask.distributed")

LANTERN = str(taskgen.bundled_specs()["lantern-hall"])
REQUEST = SuiteRequest(splits=(("train", 24), ("test", 6)), holdout=("layout.corridor.length", (12,)))


@pytest.fixture(scope="module")
def cluster():
    """A two-worker local Dask cluster (processes, one thread each), shared by this module's tests."""
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0",
                                  silence_logs=50) as local:
        yield local


def test_manifest_is_byte_identical_wherever_the_suite_runs(cluster):
    """One process, a pool of two, a local:2 cluster and a running scheduler write the same manifest."""
    spec = taskgen.load_spec(LANTERN)
    reference = manifest_text(build_suite(spec, REQUEST, workers=1, progress=False))
    assert manifest_text(build_suite(spec, REQUEST, workers=2, progress=False)) == reference
    assert manifest_text(build_suite(spec, REQUEST, scheduler="local:2", progress=False)) == reference
    assert manifest_text(build_suite(spec, REQUEST, scheduler=cluster.scheduler_address, progress=False)) == reference


def test_a_lost_worker_does_not_change_the_results(cluster, tmp_path):
    """A task whose worker process dies mid-chunk (the test kills it from inside the task, once) is
    rescheduled on another worker: the ordered results are those of a run without the loss."""
    marker = str(tmp_path / "killed")

    def work(job):
        if job == 21 and not os.path.exists(marker):
            open(marker, "w").close()
            os._exit(1)                  # the worker process dies while running this chunk
        return job * job

    dask = Dask(cluster.scheduler_address)
    try:
        done = []
        assert dask.map(work, list(range(64)), done.append) == [j * j for j in range(64)]
        assert os.path.exists(marker) and sum(done) == 64
    finally:
        dask.close()


def test_bad_schedulers_are_refused_plainly():
    """local:N needs a positive N; the embedded default needs no Dask."""
    with pytest.raises(ScaleError, match="local:N needs a number of workers"):
        runner(scheduler="local:x")
    assert type(runner(workers=1)).__name__ == "InProcess"


def test_progress_lines_off_a_terminal(tmp_path):
    """Off a terminal, progress is a line with the count, the rate and an ETA (every few seconds), and
    nothing with quiet."""
    with open(tmp_path / "log", "w") as stream:
        progress = Progress(10, "drawing x", stream=stream)
        progress.last -= 60                 # as if the last line were a minute old
        progress.update(4)
        quiet = Progress(10, "drawing y", quiet=True, stream=stream)
        quiet.last -= 60
        quiet.update(4)
    text = (tmp_path / "log").read_text()
    assert text.startswith("drawing x: 4/10 variants, ") and "/s, ETA " in text and "drawing y" not in text
