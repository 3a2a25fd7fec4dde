"""Benchmark: environment sampling throughput and image encode/decode times; prints ONE JSON line.

Run: ``python tests/benchmarks/bench_imaging.py`` (about 10 s on one core).  asv-style: ``setup()``
builds the inputs and warms the JIT, each ``time_*()`` returns seconds for one run.
"""

from __future__ import annotations

import json
import tempfile
import time
from pathlib import Path

import numpy as np

from variantshot.imaging import files
from variantshot.transport.environment import make_environment, sample_environment

STATE: dict = {}


def setup(env_h: int = 1024, env_w: int = 2048, image_px: int = 1024, n_samples: int = 1_000_000):
    rng = np.random.default_rng(0)
    env_img = np.exp(rng.normal(0.0, 1.0, (env_h, env_w, 3))).astype(np.float32)
    env_img[: env_h // 5] = 1.0  # a flat sky band gives the run-length coder long runs
    folder = Path(tempfile.mkdtemp(prefix="vs-bench-"))
    hdr = files.write_hdr(folder / "env.hdr", env_img)
    env = make_environment(env_img)
    u = rng.random((n_samples, 2))
    sample_environment(env, u[:16])  # compile / load the kernels
    STATE.update(env_img=env_img, hdr=hdr, env=env, u=u, rgb=rng.random((image_px, image_px, 3)),
                 folder=folder, env_shape=[env_h, env_w], image_px=image_px, n_samples=n_samples)


def _timed(fn) -> float:
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def time_env_sample() -> float:
    return _timed(lambda: sample_environment(STATE["env"], STATE["u"]))


def time_make_environment() -> float:
    return _timed(lambda: make_environment(STATE["env_img"]))


def time_read_hdr() -> float:
    return _timed(lambda: files.read_hdr(STATE["hdr"]))


def time_encode_png8() -> float:
    return _timed(lambda: files.encode_image(STATE["rgb"], "png"))


def time_encode_png16() -> float:
    return _timed(lambda: files.encode_image(STATE["rgb"], "png", bit_depth=16))


def time_encode_jpg() -> float:
    return _timed(lambda: files.encode_image(STATE["rgb"], "jpg"))


def main() -> None:
    setup()
    sample_s = min(time_env_sample() for _ in range(3))
    result = {
        "bench": "imaging",
        "env_shape": STATE["env_shape"],
        "image_px": STATE["image_px"],
        "env_samples_per_s": round(STATE["n_samples"] / sample_s),
        "make_environment_s": round(min(time_make_environment() for _ in range(3)), 4),
        "read_hdr_s": round(min(time_read_hdr() for _ in range(2)), 4),
        "encode_png8_s": round(min(time_encode_png8() for _ in range(2)), 4),
        "encode_png16_s": round(min(time_encode_png16() for _ in range(2)), 4),
        "encode_jpg_s": round(min(time_encode_jpg() for _ in range(2)), 4),
    }
    for p in STATE["folder"].iterdir():
        p.unlink()
    STATE["folder"].rmdir()
    print(json.dumps(result))


if __name__ == "__main__":
    main()
