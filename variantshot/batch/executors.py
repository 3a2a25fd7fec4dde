"""Where shots are rendered: in this process, in local worker processes, or on a Dask cluster.

An executor takes picklable :class:`~variantshot.batch.runner.ShotTask` objects (scene bytes, rig,
quality, output spec: nothing that needs a shared file system) and yields
:class:`~variantshot.batch.runner.ShotResult` objects (encoded image bytes and metrics) as they
finish, in any order.  It never writes a file: the client writes every result, so a worker on
another machine needs no access to the output folder.

* :class:`LocalExecutor` with ``workers=1`` renders in the calling process, one shot at a time,
  with numba's parallel loops using every core (DESIGN.md: one shot per process, all cores).
* With ``workers=N > 1`` it starts N worker processes (``spawn``, so no forked numba thread pools)
  and splits the cores between them; useful when shots are small and per-shot overheads dominate.
* :class:`DaskExecutor` submits each task to a ``distributed`` cluster (``--cluster
  tcp://host:8786``), retrying a task whose worker was lost; ``dask`` is imported only here.
"""

from __future__ import annotations

import logging
import os
from typing import Callable, Iterable, Iterator

__all__ = ["LocalExecutor", "DaskExecutor", "make_executor"]

log = logging.getLogger(__name__)


def _failed(task, exc):
    from .runner import ShotResult

    return ShotResult(task.shot_id, False, error=f"worker failed: {type(exc).__name__}: {exc}")


def _worker_init(threads: int) -> None:
    os.environ.setdefault("NUMBA_NUM_THREADS", str(threads))
    from .. import _jit

    _jit.set_threads(threads)
    from .runner import warmup

    warmup()


class LocalExecutor:
    """Run tasks on this machine.

    Parameters
    ----------
    workers : int
        1: in this process; N > 1: N spawned worker processes.
    threads : int, optional
        numba threads per worker (default: the machine's cores divided by ``workers``).
    """

    def __init__(self, workers: int = 1, threads: int | None = None):
        self.workers = max(1, int(workers))
        cores = os.cpu_count() or 1
        self.threads = threads or max(1, cores // self.workers)

    def map(self, fn: Callable, tasks: Iterable) -> Iterator:
        """Yield ``fn(task)`` for every task, as each finishes."""
        tasks = list(tasks)
        if self.workers == 1 or len(tasks) <= 1:
            for t in tasks:
                yield fn(t)
            return
        import concurrent.futures as cf
        import multiprocessing as mp

        with cf.ProcessPoolExecutor(
            max_workers=self.workers, mp_context=mp.get_context("spawn"), initializer=_worker_init, initargs=(self.threads,)
        ) as pool:
            futures = {pool.submit(fn, t): t for t in tasks}
            try:
                for f in cf.as_completed(futures):
                    try:
                        yield f.result()
                    except Exception as exc:  # noqa: BLE001 - a dead worker fails its shot only
                        yield _failed(futures[f], exc)
            finally:
                for f in futures:
                    f.cancel()

    def close(self) -> None:
        return None


class DaskExecutor:
    """Run tasks on a Dask ``distributed`` cluster; results come back to the client as bytes.

    Parameters
    ----------
    address : str
        The scheduler, e.g. ``tcp://host:8786``.
    retries : int
        How many times a task is resubmitted when its worker is lost or it raises.
    """

    def __init__(self, address: str, retries: int = 2):
        try:
            from distributed import Client
        except ImportError as exc:  # pragma: no cover - depends on the optional extra
            from ..errors import InputError

            raise InputError(
                f"--cluster needs the 'distributed' package ({exc})", accepted="pip install 'variantshot[cluster]'"
            ) from None
        self.client = Client(address)
        self.retries = retries

    def map(self, fn: Callable, tasks: Iterable) -> Iterator:
        from distributed import as_completed

        futures = {self.client.submit(fn, t, pure=False, retries=self.retries, key=f"shot-{t.shot_id}"): t
                   for t in tasks}
        for f in as_completed(list(futures)):
            try:
                yield f.result()
            except Exception as exc:  # noqa: BLE001 - retries exhausted: the shot fails, the batch goes on
                yield _failed(futures[f], exc)

    def close(self) -> None:
        self.client.close()


def make_executor(workers: int = 1, cluster: str | None = None):
    """The executor the CLI options ask for."""
    if cluster:
        return DaskExecutor(cluster)
    return LocalExecutor(workers)
