"""Shot keys: a SHA-256 content hash over everything that decides a shot's pixels.

A shot is re-rendered exactly when its key changes.  The key covers, in this order and as
canonical JSON (sorted keys, no spaces, floats by ``repr``):

1. ``"variantshot-shot-key/1"`` (the key format),
2. the renderer's identity (:func:`renderer_identity`: ``variantshot X.Y.Z`` plus the versions
   of the libraries that shape the pixels or the file bytes -- Pillow encodes the images and
   embeds the sRGB ICC profile, pyoidn denoises), so upgrading either re-renders,
3. the template file's bytes (SHA-256) and the finish file's bytes,
4. the row's values (every column, after stripping spaces) and the material-variant entry,
5. the bytes of the product's model files (the model glTF and every buffer or image the
   scene references),
6. the rig's name and the bytes of its definition file (or its parsed digest),
7. the render settings (any dataclass, mapping or sequence, canonicalised: dataclasses by
   their fields and class name),
8. the angle, with its preset definition and the framing parameters.

File digests can be shared through a ``digests`` dict (one per planning run), so planning a
big catalog hashes each model once; nothing is cached between runs, so an edit that keeps a
file's size and time stamp is still seen.
"""

from __future__ import annotations

import dataclasses
import enum
import hashlib
import json
import math
from pathlib import Path

import numpy as np

KEY_FORMAT = "variantshot-shot-key/1"

#: Distributions whose version changes a shot's bytes (see :func:`renderer_identity`).
PIXEL_LIBRARIES = ("pillow", "pyoidn")


def renderer_identity() -> str:
    """``"variantshot X.Y.Z; pillow A; pyoidn B"`` (``pyoidn none`` when it is not installed).

    Read from the installed distributions' metadata, so nothing heavy is imported.
    """
    from importlib import metadata

    from .. import __version__

    parts = [f"variantshot {__version__}"]
    for name in PIXEL_LIBRARIES:
        try:
            parts.append(f"{name} {metadata.version(name)}")
        except metadata.PackageNotFoundError:
            parts.append(f"{name} none")
    return "; ".join(parts)


def canonical(obj):
    """A JSON-ready, deterministic form of ``obj`` (dataclasses, mappings, sequences, paths, arrays)."""
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return {"__class__": type(obj).__name__,
                **{f.name: canonical(getattr(obj, f.name)) for f in dataclasses.fields(obj)}}
    if isinstance(obj, enum.Enum):
        return canonical(obj.value)
    if isinstance(obj, dict):
        return {str(k): canonical(v) for k, v in sorted(obj.items(), key=lambda kv: str(kv[0]))}
    if isinstance(obj, (list, tuple)):
        return [canonical(v) for v in obj]
    if isinstance(obj, (set, frozenset)):
        return sorted(canonical(v) for v in obj)
    if isinstance(obj, np.ndarray):
        return canonical(obj.tolist())
    if isinstance(obj, np.generic):
        return canonical(obj.item())
    if isinstance(obj, float):
        return repr(obj) if not math.isfinite(obj) else float(repr(obj))
    if isinstance(obj, Path):
        return obj.as_posix()
    if obj is None or isinstance(obj, (str, int, bool)):
        return obj
    return repr(obj)


def canonical_json(obj) -> str:
    return json.dumps(canonical(obj), sort_keys=True, separators=(",", ":"), ensure_ascii=False)


def file_sha256(path, digests: dict | None = None) -> str:
    """SHA-256 hex of a file's bytes (memoised in ``digests`` when given)."""
    p = Path(path).resolve()
    if digests is not None and p in digests:
        return digests[p]
    digest = hashlib.sha256(p.read_bytes()).hexdigest()
    if digests is not None:
        digests[p] = digest
    return digest


def shot_key(
    *,
    renderer_version: str,
    template_files,
    row: dict,
    model_files,
    rig_name: str,
    rig_definition,
    settings,
    angle: str,
    angle_definition=None,
    material_variant: str | None = None,
    digests: dict | None = None,
) -> str:
    """The content-hash key of one shot (see the module docstring).

    Parameters
    ----------
    renderer_version : str
    template_files : sequence of path
        The template and the finish file.
    row : dict
        The catalog row's cells.
    model_files : sequence of path
        Model glTF and the buffers/images the scene references.
    rig_name : str
    rig_definition : bytes, str or object
        The rig file's bytes, or anything :func:`canonical` accepts.
    settings : object
        Render settings (dataclass, mapping, ...).
    angle : str
    angle_definition : object, optional
        The preset and framing parameters (None for a template camera).
    material_variant : str, optional
    digests : dict, optional
        Memo of file digests for one planning run.

    Returns
    -------
    str
        64 hex digits.
    """
    if isinstance(rig_definition, (bytes, bytearray)):
        rig_part = hashlib.sha256(bytes(rig_definition)).hexdigest()
    else:
        rig_part = canonical(rig_definition)
    parts = {
        "format": KEY_FORMAT,
        "renderer": renderer_version,
        "templates": [[Path(p).name, file_sha256(p, digests)] for p in template_files],
        "row": {k: row[k] for k in sorted(row)},
        "material_variant": material_variant,
        "models": [[Path(p).name, file_sha256(p, digests)] for p in model_files],
        "rig": [rig_name, rig_part],
        "settings": canonical(settings),
        "angle": [angle, canonical(angle_definition)],
    }
    return hashlib.sha256(canonical_json(parts).encode("utf-8")).hexdigest()
