"""Where a suite's drawing and analyses run: in this process, in a process pool, or on a Dask cluster.

Every runner maps a function over jobs and returns the results in the jobs' order, so what a suite
holds never depends on where it ran. A job is plain data — a spec as JSON text and a variant seed —
never a pickled model: a Dask worker rebuilds the variant from them, as a manifest's reader does.
Work goes out in chunks (not one task per variant); Dask retries a chunk whose worker was lost.
The process pool is the embedded default; Dask is the optional extra ``taskgen[dask]``.
"""

from __future__ import annotations

import ctypes
import functools
import json
import logging
import os
import signal
import sys
from concurrent.futures import ProcessPoolExecutor
from typing import Any, Callable, Protocol, Sequence

from .. import limits
from ..errors import TaskgenError

DASK_CHUNK = 16      # jobs per Dask task: few enough to spread, many enough that scheduling is cheap
POOL_CHUNK = 8       # jobs per pool message


class ScaleError(TaskgenError, ValueError):
    """A scheduler that cannot be used (says which and why)."""


class Runner(Protocol):
    """Maps a function over jobs, results in the jobs' order."""

    def map(self, fn: Callable[[Any], Any], jobs: Sequence[Any], done: Callable[[int], None] | None = None
            ) -> list[Any]:
        """``[fn(job) for job in jobs]``, wherever it runs; ``done(n)`` is told as jobs finish (progress)."""

    def close(self) -> None:
        """Release the workers (also on an error or an interrupt, without waiting for queued work)."""


class InProcess:
    """Runs every job here, one after another."""

    def map(self, fn: Callable[[Any], Any], jobs: Sequence[Any], done: Callable[[int], None] | None = None
            ) -> list[Any]:
        """Each job in turn."""
        out = []
        for job in jobs:
            out.append(fn(job))
            if done is not None:
                done(1)
        return out

    def close(self) -> None:
        """Nothing to release."""


def worker_start(caps: limits.Limits) -> None:
    """A pool worker: the parent's caps, the default SIGTERM action, and on Linux a SIGTERM when the
    parent dies (prctl PR_SET_PDEATHSIG), so that no worker outlives the run that started it."""
    limits.install(caps)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    if sys.platform.startswith("linux"):
        try:
            ctypes.CDLL(None).prctl(1, signal.SIGTERM)      # 1 = PR_SET_PDEATHSIG
        except (OSError, AttributeError):
            pass
        if os.getppid() == 1:                               # the parent died before prctl took effect
            os._exit(1)


class Pool:
    """A process pool of ``workers`` processes on this machine."""

    def __init__(self, workers: int) -> None:
        self.pool = ProcessPoolExecutor(max_workers=workers, initializer=worker_start, initargs=(limits.current(),))

    def map(self, fn: Callable[[Any], Any], jobs: Sequence[Any], done: Callable[[int], None] | None = None
            ) -> list[Any]:
        """The pool's ordered map."""
        out = []
        for result in self.pool.map(fn, jobs, chunksize=POOL_CHUNK):
            out.append(result)
            if done is not None:
                done(1)
        return out

    def close(self, wait: bool = True) -> None:
        """Stop the workers (without waiting for queued work when ``wait`` is False)."""
        self.pool.shutdown(wait=wait, cancel_futures=not wait)


def _chunk(fn: Callable[[Any], Any], jobs: Sequence[Any], caps: limits.Limits) -> list[Any]:
    """One Dask task: a chunk of jobs under the caps of the run that sent them."""
    limits.install(caps)
    return [fn(job) for job in jobs]


class Dask:
    """A Dask cluster: a running scheduler at ``tcp://host:port``, or ``local:N`` for a LocalCluster of N
    single-threaded worker processes started for this run."""

    def __init__(self, address: str) -> None:
        try:
            from dask.distributed import Client, LocalCluster
        except ImportError:
            raise ScaleError("--scheduler needs Dask: pip install 'taskgen[dask]'") from None
        self.cluster: Any = None
        logging.getLogger("distributed").setLevel(logging.ERROR)   # its INFO lines would bury taskgen's output
        if address.startswith("local:"):
            count = address.partition(":")[2]
            if not (count.isascii() and count.isdigit() and int(count) >= 1):
                raise ScaleError(f"--scheduler local:N needs a number of workers N ≥ 1, got {address!r}")
            self.cluster = LocalCluster(n_workers=int(count), threads_per_worker=1, processes=True,
                                        dashboard_address=":0", silence_logs=50)
            self.client = Client(self.cluster)
        else:
            try:
                self.client = Client(address, timeout=30)
            except (OSError, TimeoutError) as exc:
                raise ScaleError(f"--scheduler {address}: cannot reach the scheduler: {exc}") from None

    def map(self, fn: Callable[[Any], Any], jobs: Sequence[Any], done: Callable[[int], None] | None = None
            ) -> list[Any]:
        """Chunks of jobs as Dask tasks (retried when they fail; rescheduled when a worker is lost),
        gathered in order; progress from the futures as they complete."""
        from dask.distributed import as_completed

        caps = limits.current()
        futures = [self.client.submit(_chunk, fn, list(jobs[i:i + DASK_CHUNK]), caps, pure=False, retries=3)
                   for i in range(0, len(jobs), DASK_CHUNK)]
        sizes = {future.key: min(DASK_CHUNK, len(jobs) - i * DASK_CHUNK) for i, future in enumerate(futures)}
        try:
            if done is not None:
                for future in as_completed(futures):
                    done(sizes[future.key])
            return [result for chunk in self.client.gather(futures) for result in chunk]
        except BaseException:
            self.client.cancel(futures)
            raise

    def close(self, wait: bool = True) -> None:
        """Close the client, and the local cluster this run started."""
        self.client.close()
        if self.cluster is not None:
            self.cluster.close()


def runner(workers: int = 1, scheduler: str | None = None) -> InProcess | Pool | Dask:
    """The runner for ``--workers`` / ``--scheduler``."""
    if scheduler:
        return Dask(scheduler)
    return Pool(workers) if workers > 1 else InProcess()


def spec_text(spec: Any) -> tuple[str, str]:
    """A spec as it goes to a worker: its validated data and the overrides it was loaded with (they name
    its variants), as JSON text, never a pickled object."""
    return json.dumps(spec.model_dump(mode="json"), sort_keys=True), json.dumps(spec.overrides, sort_keys=True)


@functools.lru_cache(maxsize=64)
def spec_from_text(text: str, overrides: str = "{}") -> Any:
    """The spec :func:`spec_text` sent (each worker parses each spec once)."""
    from ..spec import load_spec_text
    from ..spec.loader import record_overrides
    spec = load_spec_text(text, "<sent spec>")
    if overrides != "{}":
        record_overrides(spec, json.loads(overrides))
    return spec
