"""variantshot: catalog rows to finished, checked product images.

The package is one subpackage per stage of the data flow (see DEVELOPERS.md):
``catalog`` (CSV -> variants -> glTF scenes), ``geometry`` (glTF loading, BVH),
``transport`` (the path tracer), ``imaging`` (film, colour, files), ``batch``
(shot plan, cache, manifest, runner), ``review`` (QA, approvals, sheets) and
``cli`` (a thin Typer layer).  ``import variantshot`` stays light: the entry points
below are imported on first use, so nothing here pulls in numba.
"""

from __future__ import annotations

import importlib

__version__ = "0.1.0"

# public name -> "module:attribute"; resolved lazily by __getattr__
_ENTRY_POINTS = {
    "load_gltf": "variantshot.geometry.gltf:load_gltf",
    "Scene": "variantshot.geometry.scene:Scene",
    "build_bvh": "variantshot.geometry.bvh:build_bvh",
    "read_catalog": "variantshot.catalog.validate:read_catalog",
    "check_catalog": "variantshot.catalog.validate:check_catalog",
    "expand_catalog": "variantshot.catalog.expand:expand_catalog",
    "plan_shots": "variantshot.batch.plan:plan_shots",
    "frame_angle": "variantshot.catalog.angles:frame_angle",
}

__all__ = ["__version__", *_ENTRY_POINTS]


def __getattr__(name: str):
    target = _ENTRY_POINTS.get(name)
    if target is None:
        raise AttributeError(f"module 'variantshot' has no attribute {name!r}")
    module_name, attr = target.split(":")
    value = getattr(importlib.import_module(module_name), attr)
    globals()[name] = value
    return value
