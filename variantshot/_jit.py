"""The one place numba is configured: decorator presets, fastmath flags, dtypes, cache folder.

Every ``*_kernels.py`` module imports this module *before* numba, so the cache folder is set
before numba reads its configuration.  The cache folder is keyed by the package version and a
hash of every kernel source file: numba does not invalidate a cached caller when a callee in
another file changes, so any kernel edit must start a fresh cache.
"""

from __future__ import annotations

import hashlib
import os
from pathlib import Path

import numpy as np

from . import __version__

_PACKAGE_DIR = Path(__file__).resolve().parent


def _kernel_sources_hash() -> str:
    digest = hashlib.sha256()
    for path in sorted(_PACKAGE_DIR.rglob("*_kernels.py")):
        digest.update(path.relative_to(_PACKAGE_DIR).as_posix().encode())
        digest.update(path.read_bytes())
    return digest.hexdigest()[:16]


def _user_cache_dir() -> Path:
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "variantshot" / "jit"


def cache_dir() -> Path:
    """Folder numba caches compiled kernels in (``NUMBA_CACHE_DIR`` wins when the user set it)."""
    if os.environ.get("NUMBA_CACHE_DIR"):
        return Path(os.environ["NUMBA_CACHE_DIR"])
    return _user_cache_dir() / f"{__version__}-{_kernel_sources_hash()}"


if not os.environ.get("NUMBA_CACHE_DIR"):
    os.environ["NUMBA_CACHE_DIR"] = str(cache_dir())

import numba  # noqa: E402  (must follow the cache-folder setting)

# Fast-math without nnan/ninf, so np.isfinite / math.isinf guards keep working.
FASTMATH = {"nsz", "arcp", "contract", "afn", "reassoc"}  # numba wants a set, not a frozenset

# Leaf kernels: compiled once, cached on disk, release the GIL.
KERNEL = dict(cache=True, nogil=True, fastmath=FASTMATH, error_model="numpy")
# The single outer parallel loop of a stage.
PARALLEL = dict(cache=True, nogil=True, fastmath=FASTMATH, error_model="numpy", parallel=True)

FLOAT = np.float32  # geometry, rays, BSDF values
ACCUM = np.float64  # film sums
INDEX = np.int32  # triangle, node, material indices

njit = numba.njit
prange = numba.prange


def set_threads(n: int | None) -> int:
    """Set numba's thread count for this process (None: all cores); return the count in use."""
    if n is not None:
        numba.set_num_threads(max(1, min(int(n), numba.config.NUMBA_NUM_THREADS)))
    return numba.get_num_threads()
