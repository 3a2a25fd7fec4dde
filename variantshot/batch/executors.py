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
* :class:`~variantshot.batch.cluster.DaskExecutor` (in ``cluster.py``) submits each task to a
  Dask ``distributed`` cluster (``--cluster tcp://host:8786`` or ``local:N``), re-running a shot
  whose worker was lost; ``dask`` is imported only there.
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


def __getattr__(name):
    # DaskExecutor lives in cluster.py (dask is imported only there, and only when used)
    if name == "DaskExecutor":
        from .cluster import DaskExecutor

        return DaskExecutor
    raise AttributeError(name)


def make_executor(workers: int = 1, cluster: str | None = None, *, retries: int = 2):
    """The executor the CLI options ask for.

    Parameters
    ----------
    workers : int
        ``--workers``: local worker processes (ignored with ``cluster``; 1 or N > 1).
    cluster : str, optional
        ``--cluster``: ``local:N`` or a Dask scheduler address (:func:`.cluster.parse_cluster`).
    retries : int
        Worker losses a shot survives on a ``local:N`` cluster.

    Raises
    ------
    InputError
        A bad ``--cluster`` value, ``--workers`` together with ``--cluster``, or Dask missing.
    """
    if cluster:
        from ..errors import InputError
        from .cluster import DaskExecutor, parse_cluster, require_distributed

        spec = parse_cluster(cluster)
        if workers and int(workers) > 1:
            raise InputError("--workers and --cluster exclude each other",
                             accepted="--cluster local:N for N worker processes on this machine")
        require_distributed()
        return DaskExecutor(spec, retries=retries)
    return LocalExecutor(workers)
