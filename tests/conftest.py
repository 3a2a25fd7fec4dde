"""Shared fixtures: where ../shared is, small scenes, output folders."""

from __future__ import annotations

import os
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
SHARED = Path(os.environ.get("VARIANTSHOT_SHARED", REPO.parent / "shared"))


@pytest.fixture(scope="session")
def shared_dir() -> Path:
    """The read-only ``../shared`` folder of published test data; skip when it is absent."""
    if not SHARED.is_dir():
        pytest.skip(f"{SHARED} is absent (a user's clone has no ../shared; CI has it)")
    return SHARED


@pytest.fixture(scope="session")
def gltf_samples(shared_dir) -> Path:
    path = shared_dir / "gltf-samples"
    if not path.is_dir():
        pytest.skip(f"{path} is absent")
    return path


@pytest.fixture(scope="session")
def repo_dir() -> Path:
    return REPO
