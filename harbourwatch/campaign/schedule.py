"""Scheduling chunk tasks on dask.distributed, with a progress bar over tasks.

Where the work runs, in order of precedence:

1. ``--scheduler ADDRESS`` (``tcp://host:8786``): an existing cluster;
2. dask's own configuration (``scheduler-address``, e.g. the
   ``DASK_SCHEDULER_ADDRESS`` environment variable): an existing cluster;
3. otherwise a ``LocalCluster`` on 127.0.0.1 sized to the machine: one
   single-threaded worker process per usable core (the filter is Python
   bound, so processes rather than threads), no dashboard.

The local cluster's workers start with the environment of
:data:`WORKER_ENV`: one thread for the OpenMP, OpenBLAS, MKL and numba pools
(each worker owns one core; a pool per worker would only contend), and
*without* dask's default ``MALLOC_TRIM_THRESHOLD_``. That setting makes the
C allocator hand freed memory back at once and fixes its threshold for
mapping large blocks, so every large numpy temporary of the filter is mapped
and zero-filled afresh: on the benchmark archive a chunk took three times
the page faults and about a fifth more CPU time than the same chunk in a
plain process. Nor do they run dask's task profiler (:data:`WORKER_CONFIG`).
Workers of an existing cluster keep the environment and configuration they
were started with (README, "Archive campaigns").

``executor="inline"`` runs the same tasks one after another in this process
(the one-process baseline of the benchmark). Workers must be able to import
harbourwatch and see the campaign's files under the same paths.
"""

from __future__ import annotations

import logging
import os
import sys
import uuid
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from typing import Any, TypeVar

from harbourwatch.errors import HarbourwatchError

__all__ = ["Runner", "open_runner", "usable_cores", "WORKER_ENV", "WORKER_CONFIG"]

T = TypeVar("T")
log = logging.getLogger("harbourwatch.campaign")

#: Environment set before each local worker process starts (``None``: left unset).
WORKER_ENV: dict[str, str | None] = {
    "OMP_NUM_THREADS": "1",
    "OPENBLAS_NUM_THREADS": "1",
    "MKL_NUM_THREADS": "1",
    "NUMBA_NUM_THREADS": "1",
    "MALLOC_TRIM_THRESHOLD_": None,
}
#: Dask configuration of the local workers: no task profiler (a thread that samples
#: the running task's stack every 10 ms, for a dashboard that is not started).
WORKER_CONFIG: dict[str, Any] = {"distributed.worker.profile.enabled": False}


def usable_cores() -> int:
    """Cores this process may run on."""
    try:
        return max(len(os.sched_getaffinity(0)), 1)
    except AttributeError:  # pragma: no cover - not Linux
        return max(os.cpu_count() or 1, 1)


class Runner:
    """Runs functions over items, on a dask client or inline; yields results as they finish."""

    def __init__(self, client: Any | None, *, where: str, progress: bool) -> None:
        self.client = client
        self.where = where
        self.progress = progress

    def map(self, fn: Callable[[T], Any], items: Sequence[T], *, label: str,
            names: Sequence[str]) -> Iterator[tuple[int, Any, BaseException | None]]:
        """``(index, result, error)`` for every item, in completion order.

        An error raised by ``fn`` or by the engine (a worker lost too often:
        dask's ``KilledWorker``) is returned, never raised, so one failing
        item does not stop the others. Dask itself moves a task whose worker
        died to another worker (up to ``distributed.scheduler.allowed-failures``
        times); a task that raised is tried once more (``retries=1``).
        """
        from tqdm import tqdm

        bar = tqdm(total=len(items), desc=label, unit="chunk" if label == "chunks" else "file",
                   file=sys.stderr, disable=not self.progress or not sys.stderr.isatty(),
                   leave=True)
        try:
            if self.client is None:
                for i, item in enumerate(items):
                    try:
                        yield i, fn(item), None
                    except Exception as exc:  # reported per item
                        yield i, None, exc
                    bar.update(1)
                return
            from distributed import as_completed

            tag = uuid.uuid4().hex[:8]
            futures = {
                self.client.submit(fn, item, key=f"hw-{label}-{name}-{tag}", retries=1,
                                   pure=False): i
                for i, (item, name) in enumerate(zip(items, names, strict=True))
            }
            for fut in as_completed(list(futures)):
                i = futures[fut]
                try:
                    yield i, fut.result(), None
                except Exception as exc:  # KilledWorker, a task error, a lost connection
                    yield i, None, exc
                finally:
                    fut.release()
                bar.update(1)
        finally:
            bar.close()

    def workers(self) -> int:
        """Number of workers (1 inline)."""
        if self.client is None:
            return 1
        return len(self.client.scheduler_info().get("workers", {}))


def _local_cluster(factory: Callable[..., Any], n: int) -> Any:
    """A local cluster of ``n`` single-threaded worker processes started with :data:`WORKER_ENV`.

    Dask's nanny writes the variables into this process's environment before
    spawning a worker (they must be there when the worker's interpreter
    starts); the client's own environment is put back afterwards. A worker
    that dies and is restarted gets the same environment.
    """
    import dask

    before = dict(os.environ)
    try:
        with dask.config.set({"distributed.nanny.pre-spawn-environ": dict(WORKER_ENV),
                              **WORKER_CONFIG}):
            return factory(n_workers=n, threads_per_worker=1, processes=True, host="127.0.0.1",
                           dashboard_address=None, silence_logs=logging.WARNING)
    finally:
        for k in set(os.environ) - set(before):
            del os.environ[k]
        os.environ.update({k: v for k, v in before.items() if os.environ.get(k) != v})


@contextmanager
def open_runner(*, scheduler: str | None, executor: str = "dask", n_workers: int | None = None,
                progress: bool = True) -> Iterator[Runner]:
    """A :class:`Runner` on the chosen cluster, closed (and a local cluster stopped) afterwards."""
    if executor == "inline":
        yield Runner(None, where="this process, one chunk at a time", progress=progress)
        return
    if executor != "dask":
        raise ValueError(f"unknown executor {executor!r}")
    import dask
    from distributed import Client, LocalCluster

    address = scheduler or dask.config.get("scheduler-address", None)
    cluster = None
    try:
        if address:
            try:
                client = Client(address, timeout="20s")
            except (OSError, TimeoutError) as exc:
                raise HarbourwatchError(f"cannot reach the dask scheduler at {address}: {exc}") from exc
            where = f"the cluster at {address}"
        else:
            n = n_workers or usable_cores()
            cluster = _local_cluster(LocalCluster, n)
            client = Client(cluster)
            where = f"a local cluster of {n} worker process{'es' if n != 1 else ''}"
        try:
            runner = Runner(client, where=where, progress=progress)
            log.info("running on %s (%d workers)", where, runner.workers())
            yield runner
        finally:
            client.close()
    finally:
        if cluster is not None:
            cluster.close()
