"""Rendering a batch on a Dask ``distributed`` cluster (``variantshot render --cluster ...``).

The client (the machine running ``variantshot render``) keeps everything that touches the output
folder: the lock, the plan, the atomic image writes and the manifest.  Each out-of-date shot
becomes one Dask task carrying a :class:`~variantshot.batch.runner.ShotTask` (the scene as
self-contained glTF bytes, the rig, the quality preset, the output spec, the calibrated
exposure) and returning a :class:`~variantshot.batch.runner.ShotResult` (encoded image bytes, QA
verdict, metrics).  Workers therefore need variantshot installed, not the output folder.

Cluster address
---------------
``tcp://HOST:PORT`` (also ``tls://``, ``ucx://``, ``ws://``, ``wss://``, ``inproc://``, or a bare
``HOST:PORT``) connects to a running scheduler; ``local:N`` starts a scheduler and N worker
processes on this machine (one Dask thread each, the machine's cores split between their numba
pools) and stops them at the end.

Faults
------
* A worker lost mid-shot: the scheduler runs the shot again on another worker.  After
  ``distributed.scheduler.allowed-failures`` losses of the same shot (set here for ``local:N``
  from ``retries``; a remote scheduler uses its own setting) the task errs with ``KilledWorker``
  and the shot is recorded as failed; the batch goes on.
* The client killed: the scheduler drops the tasks of a client that went away; the output
  folder holds what a local run killed at the same moment would hold (every file and the
  manifest are replaced atomically, shots in flight are lost) and the next run resumes.
* At most ``window`` tasks are in flight at a time (by default four per worker thread), so a
  catalog of thousands of shots neither fills the scheduler's memory with scene bytes nor
  loses more than a window of work when the client dies.
* A worker whose variantshot version or kernel sources differ from the client's refuses the shot
  (the images would not match the shot keys): the shot is recorded as failed with both versions.

Determinism: a shot's image depends only on its task (scene, settings, seed), never on the
machine's thread count (hashed per-sample randomness), so a cluster run gives the same bytes as a
local run.  ``dask`` is imported only inside this module's functions.
"""

from __future__ import annotations

import asyncio
import concurrent.futures
import functools
import logging
import os
import re
import threading
import time
import uuid
from dataclasses import dataclass
from typing import Callable, Iterable, Iterator

from ..errors import InputError

__all__ = ["ClusterSpec", "parse_cluster", "require_distributed", "DaskExecutor", "MISSING_EXTRA"]

log = logging.getLogger(__name__)

#: What to install when ``dask`` / ``distributed`` is missing.
MISSING_EXTRA = "pip install 'variantshot[cluster]' (installs dask and distributed)"

_SCHEMES = ("tcp", "tls", "ucx", "ws", "wss", "inproc")
_HOST_PORT = re.compile(r"^[A-Za-z0-9_.\-\[\]:]+:\d{1,5}$")


@dataclass(frozen=True)
class ClusterSpec:
    """A parsed ``--cluster`` value: either a scheduler ``address`` or ``local_workers`` > 0."""

    address: str | None = None
    local_workers: int | None = None

    def __str__(self) -> str:
        return self.address if self.address is not None else f"local:{self.local_workers}"


def parse_cluster(text: str) -> ClusterSpec:
    """Parse a ``--cluster`` value.

    Parameters
    ----------
    text : str
        ``local:N`` (N >= 1 worker processes on this machine), ``SCHEME://HOST:PORT`` with a
        scheme Dask speaks, or ``HOST:PORT`` (TCP).

    Returns
    -------
    ClusterSpec

    Raises
    ------
    InputError
        Anything else, naming the value and what is accepted.
    """
    value = (text or "").strip()
    accepted = "local:N (N >= 1 worker processes here), tcp://HOST:PORT of a Dask scheduler, or HOST:PORT"
    if value.lower().startswith("local:"):
        n = value.split(":", 1)[1]
        if not n.isdigit() or int(n) < 1:
            raise InputError(f"--cluster {text!r}: the number of local workers must be a whole number >= 1",
                             accepted=accepted)
        return ClusterSpec(local_workers=int(n))
    if "://" in value:
        scheme, rest = value.split("://", 1)
        if scheme.lower() not in _SCHEMES or not rest:
            raise InputError(f"--cluster {text!r}: not a Dask scheduler address", accepted=accepted)
        return ClusterSpec(address=value)
    if _HOST_PORT.match(value):
        return ClusterSpec(address=f"tcp://{value}")
    raise InputError(f"--cluster {text!r}: not a Dask scheduler address", accepted=accepted)


def require_distributed():
    """Import and return ``distributed``; a clear :class:`InputError` when the extra is missing."""
    try:
        import dask  # noqa: F401
        import distributed
    except ImportError as exc:
        raise InputError(f"--cluster needs Dask, which is not installed here ({exc})",
                         accepted=MISSING_EXTRA) from None
    return distributed


# --------------------------------------------------------------------------- on the worker

_WARM = {"pid": None}
# One shot at a time per worker process (DESIGN.md: one shot per process, numba on all its
# cores), even when a worker was started with more than one Dask thread.
_SHOT_LOCK = threading.Lock()


@functools.lru_cache(maxsize=1)
def _fingerprint() -> str:
    """``variantshot X.Y.Z+<kernel sources hash>``: what must agree between client and workers
    (computed once per process, when it first renders or submits, as the code it runs)."""
    from .. import __version__, _jit

    return f"variantshot {__version__}+{_jit._kernel_sources_hash()}"


def run_on_worker(fn: Callable, task, fingerprint: str, log_level: int | None = None):
    """What a Dask task runs: check the worker's variantshot matches the client's, warm the
    kernels once per process (outside the shot's timing), then ``fn(task)``.

    ``log_level`` is the client's level for the ``variantshot`` loggers; records at that level
    are forwarded to the client (``Client.forward_logging``), so a cluster run logs what a local
    run logs.
    """
    if log_level is not None:
        logging.getLogger("variantshot").setLevel(log_level)
    mine = _fingerprint()
    if mine != fingerprint:
        from .runner import ShotResult

        return ShotResult(task.shot_id, False, error=f"worker has {mine}, the client {fingerprint}: install the "
                          "same variantshot on every worker")
    with _SHOT_LOCK:
        if _WARM["pid"] != os.getpid():
            from .. import _jit
            from .runner import warmup

            _jit.set_threads(getattr(task, "threads", None))
            warmup()
            _WARM["pid"] = os.getpid()
        return fn(task)


# --------------------------------------------------------------------------- on the client


class DaskExecutor:
    """Run shot tasks on a Dask ``distributed`` cluster; results come back to the client as bytes.

    Parameters
    ----------
    cluster : str or ClusterSpec
        See :func:`parse_cluster`.
    retries : int
        For ``local:N``: how many worker losses a shot survives before it is recorded as failed
        (``distributed.scheduler.allowed-failures``).  A remote scheduler keeps its own setting.
    threads : int, optional
        numba threads per local worker (default: cores // N).
    window : int, optional
        Tasks in flight at once (default: 4 per worker thread, at least 4).
    connect_timeout_s : float
        How long to wait for the scheduler.

    Attributes
    ----------
    dashboard_link : str or None
        The scheduler's dashboard, when it serves one (it needs ``bokeh``).
    """

    def __init__(self, cluster, *, retries: int = 2, threads: int | None = None, window: int | None = None,
                 connect_timeout_s: float = 30.0):
        distributed = require_distributed()
        import dask

        from ..errors import RenderError

        spec = cluster if isinstance(cluster, ClusterSpec) else parse_cluster(cluster)
        self.spec = spec
        self.retries = max(0, int(retries))
        self.window = window
        self.cluster = None
        if spec.local_workers is not None:
            n = spec.local_workers
            per_worker = threads or max(1, (os.cpu_count() or 1) // n)
            with dask.config.set({"distributed.scheduler.allowed-failures": self.retries}):
                self.cluster = distributed.LocalCluster(
                    n_workers=n, threads_per_worker=1, processes=True, dashboard_address=":0",
                    silence_logs=logging.WARNING,
                    env={"NUMBA_NUM_THREADS": str(per_worker), "OMP_NUM_THREADS": str(per_worker)},
                )
            try:
                self.client = distributed.Client(self.cluster, timeout=connect_timeout_s)
            except BaseException:
                self.cluster.close()
                raise
        else:
            try:
                self.client = distributed.Client(spec.address, timeout=connect_timeout_s)
            except (OSError, TimeoutError) as exc:
                raise RenderError(f"--cluster {spec.address}: cannot reach the Dask scheduler ({exc})") from None
        self.dashboard_link = None
        try:
            if "dashboard" in (self.client.scheduler_info().get("services") or {}):
                self.dashboard_link = self.client.dashboard_link
        except Exception:  # noqa: BLE001 - the dashboard is a convenience only
            self.dashboard_link = None
        self._fingerprint = _fingerprint()
        self._log_level = logging.getLogger("variantshot").getEffectiveLevel()
        try:
            self.client.forward_logging("variantshot", level=self._log_level)
        except Exception:  # noqa: BLE001 - older distributed: worker logs stay on the workers
            log.debug("worker logs are not forwarded (distributed too old)")

    # The window follows the cluster as workers join and leave.
    def _window(self) -> int:
        if self.window:
            return max(1, int(self.window))
        try:
            threads = sum(self.client.nthreads().values())
        except Exception:  # noqa: BLE001
            threads = 1
        return max(4, 4 * threads)

    def worker_pids(self) -> dict:
        """``{worker address: process id}`` of the workers connected now."""
        return self.client.run(os.getpid)

    def map(self, fn: Callable, tasks: Iterable) -> Iterator:
        """Yield ``fn(task)`` for every task as each finishes (any order); a shot whose worker was
        lost more often than allowed, or whose task raised, yields a failed result."""
        from distributed import as_completed

        from ..errors import RenderError

        todo = list(tasks)[::-1]  # pop() from the end keeps the plan's order
        run = f"{uuid.uuid4().hex[:8]}"
        futures: dict = {}
        ac = as_completed()
        last_window, window = 0.0, 0

        def submit_more():
            nonlocal last_window, window
            if time.monotonic() - last_window > 5.0:
                window, last_window = self._window(), time.monotonic()
            while todo and len(futures) < window:
                t = todo.pop()
                f = self.client.submit(run_on_worker, fn, t, self._fingerprint, self._log_level, pure=False,
                                       key=f"shot-{t.shot_id}-{run}")
                futures[f.key] = (f, t)
                ac.add(f)

        try:
            submit_more()
            for f in ac:
                _, task = futures.pop(f.key)
                try:
                    result = f.result()
                except (concurrent.futures.CancelledError, asyncio.CancelledError) as exc:
                    # only the scheduler cancels our tasks: it is gone, stop the batch here (what
                    # finished is recorded; the next run resumes from it)
                    raise RenderError(f"--cluster {self.spec}: lost the Dask scheduler ({exc}); the output "
                                      "folder is consistent, run again to resume") from None
                except Exception as exc:  # noqa: BLE001 - this shot fails, the batch goes on
                    result = self._failed(task, exc)
                try:
                    submit_more()
                except Exception as exc:  # noqa: BLE001 - the client was closed under us
                    raise RenderError(f"--cluster {self.spec}: cannot submit shots ({type(exc).__name__}: {exc}); "
                                      "run again to resume") from None
                yield result
        finally:
            for f, _ in futures.values():
                try:
                    f.cancel()
                except Exception:  # noqa: BLE001 - a closed client has nothing left to cancel
                    pass

    def _failed(self, task, exc):
        from .runner import ShotResult

        name = type(exc).__name__
        if name == "KilledWorker":
            text = f"worker lost while rendering this shot, more often than allowed ({exc})"
        else:
            text = f"worker failed: {name}: {exc}"
        log.warning("%s: %s", task.shot_id, text)
        return ShotResult(task.shot_id, False, error=text)

    def close(self) -> None:
        """Disconnect; for ``local:N`` stop the workers and the scheduler too."""
        try:
            self.client.close()
        except Exception:  # noqa: BLE001 - already closed after a lost scheduler
            log.debug("closing the Dask client failed", exc_info=True)
        finally:
            if self.cluster is not None:
                self.cluster.close()
                self.cluster = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
