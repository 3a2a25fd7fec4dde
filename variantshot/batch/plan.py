"""The shot plan: every variant x angle of a catalog, keyed, with its status in an output folder.

A *shot* is one variant from one angle.  Its id is ``<safe_sku>--<angle>`` (the SKU first, so
``--only 'SKU*'`` selects a variant's shots; a safe file name, see
:func:`variantshot.catalog.schema.safe_file_name`).  Its key is :func:`.cache.shot_key` over
the inputs that decide its pixels.  Its status compares the key with ``<out>/manifest.json``:

``new``
    no manifest entry for the id;
``up-to-date``
    an entry rendered with the same key whose image files are intact;
``changed``
    anything else (another key, a failed render, a missing or altered image).

Planning reads the manifest but never writes or moves anything; it expands every template in
memory (so template cameras and material-variant entries are known) and raises
:class:`~variantshot.errors.InputErrors` for an invalid catalog.
"""

from __future__ import annotations

import json
from dataclasses import asdict, dataclass
from pathlib import Path

from ..catalog import angles as angle_lib
from .cache import renderer_identity, shot_key

STATUSES = ("new", "changed", "up-to-date")
SHOT_ID_SEPARATOR = "--"


@dataclass(frozen=True)
class Shot:
    """One planned shot.

    Attributes
    ----------
    id : str
        ``<safe_sku>--<angle>``.
    sku, safe_sku, product, colourway, finish, angle, background, rig : str
    material_variant : str or None
    scene : str
        The variant's scene, relative to the output folder (``scenes/<safe_sku>.gltf``), as
        ``variantshot expand`` writes it.
    key : str
        64 hex digits (:func:`.cache.shot_key`).
    status : str
        ``new``, ``changed`` or ``up-to-date``.
    colour_text : str
        The catalog colour as written.
    colour_lab_d65 : tuple of 3 float
        The specified colour (CIELAB D65) for the QA colour check.
    colour_in_gamut : bool
    catalog_file : str
    catalog_row : int
    """

    id: str
    sku: str
    safe_sku: str
    product: str
    colourway: str
    finish: str
    angle: str
    background: str
    rig: str
    material_variant: str | None
    scene: str
    key: str
    status: str
    colour_text: str
    colour_lab_d65: tuple
    colour_in_gamut: bool
    catalog_file: str
    catalog_row: int

    def as_dict(self) -> dict:
        d = asdict(self)
        d["colour_lab_d65"] = list(self.colour_lab_d65)
        return d


def shot_id(safe_sku: str, angle: str) -> str:
    """``<safe_sku>--<angle>``."""
    return f"{safe_sku}{SHOT_ID_SEPARATOR}{angle}"


def _read_manifest_shots(out_dir) -> dict:
    """The manifest's ``shots`` without side effects (a damaged file counts as empty)."""
    path = Path(out_dir) / "manifest.json"
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    shots = data.get("shots") if isinstance(data, dict) else None
    return shots if isinstance(shots, dict) else {}


def _entry_current(out_dir, entry, key: str) -> bool:
    try:
        from .manifest import entry_is_current
    except ImportError:  # pragma: no cover - the manifest module is part of the package
        return bool(entry) and entry.get("key") == key and entry.get("status") == "rendered"
    return entry_is_current(out_dir, entry, key)


def _rig_definition(name: str, library):
    path = library.rigs.get(name) if library is not None else None
    if path is not None:
        return Path(path).read_bytes()
    try:
        from ..geometry.rig import load_rig

        spec = load_rig(name)
        return spec.digest() if hasattr(spec, "digest") else repr(spec)
    except Exception:  # an unknown rig is reported by the batch when it loads it
        return name


def _settings_background(settings) -> str | None:
    """The batch background carried by the settings (an OutputSpec-like ``background``), if any."""
    items = settings if isinstance(settings, (tuple, list)) else (settings,)
    for item in items:
        bg = item.get("background") if isinstance(item, dict) else getattr(item, "background", None)
        if isinstance(bg, str) and bg:
            return bg
    return None


def default_rig_name() -> str:
    try:
        from ..geometry.rig import DEFAULT_RIG
    except Exception:  # pragma: no cover
        return "soft-even"
    return DEFAULT_RIG


def plan_shots(catalog, out_dir, settings=None, *, rig: str | None = None, templates_dir=None,
               progress=None) -> list:
    """Every shot of a catalog with its key and status in ``out_dir``.

    Parameters
    ----------
    catalog : str, Path, Catalog or CheckReport
        A catalog file (read and checked here), or an already checked one.
    out_dir : str or Path
        The output folder whose ``manifest.json`` is compared (may not exist yet).
    settings : object, optional
        Render settings that enter every key (a dataclass such as the batch's quality preset
        and output spec, or a mapping / tuple of them).  The batch must pass the same object
        it renders with, or every shot looks changed.
    rig : str, optional
        Rig for rows whose ``rig`` cell is empty (default: the package's default rig).
        Likewise a row's empty ``background`` cell takes the ``background`` the settings carry
        (an ``OutputSpec``), else ``white``.
    templates_dir : str or Path, optional
        See :func:`variantshot.catalog.validate.find_templates_dir`.

    Returns
    -------
    list of Shot
        Catalog order, then the row's angle order.

    Raises
    ------
    InputErrors
        When the catalog, a template or a model is invalid.
    """
    from ..catalog.expand import CheckReport, check_expanded
    from ..catalog.validate import Catalog, read_catalog

    if isinstance(catalog, CheckReport):
        report = catalog
    else:
        if not isinstance(catalog, Catalog):
            catalog = read_catalog(catalog, templates_dir=templates_dir)
        report = check_expanded(catalog, progress=progress, keep_documents=False)
    library = report.catalog.library
    default_rig = rig or default_rig_name()
    batch_background = _settings_background(settings) or "white"
    manifest = _read_manifest_shots(out_dir)
    renderer = renderer_identity()
    rig_defs: dict[str, object] = {}
    digests: dict = {}
    shots = []
    for scene in report.scenes:
        v = scene.variant
        rig_name = v.rig or default_rig
        if rig_name not in rig_defs:
            rig_defs[rig_name] = _rig_definition(rig_name, library)
        n_templates = 1
        template_files = scene.input_files[:n_templates] + scene.input_files[-1:]  # template, finish file
        model_files = scene.input_files[n_templates:-1]
        for angle in scene.angles:
            preset = angle_lib.ANGLE_PRESETS.get(angle)
            existing_camera = angle in scene.gltf.get("asset", {}).get("extras", {}).get("variantshot", {}).get(
                "template_cameras", [])
            angle_def = None if (preset is None or existing_camera) else {
                "preset": asdict(preset), "fill_frac": angle_lib.DEFAULT_FILL_FRAC,
                "yfov_rad": angle_lib.DEFAULT_YFOV_RAD}
            key = shot_key(
                renderer_version=renderer, template_files=template_files, row=v.row, model_files=model_files,
                rig_name=rig_name, rig_definition=rig_defs[rig_name], settings=settings, angle=angle,
                angle_definition=angle_def, material_variant=scene.material_variant, digests=digests,
            )
            sid = shot_id(scene.safe_name, angle)
            entry = manifest.get(sid)
            if entry is None:
                status = "new"
            elif _entry_current(out_dir, entry, key):
                status = "up-to-date"
            else:
                status = "changed"
            shots.append(Shot(
                id=sid, sku=scene.sku, safe_sku=scene.safe_name, product=v.product, colourway=v.colourway,
                finish=v.finish, angle=angle, background=v.row.get("background") or batch_background, rig=rig_name,
                material_variant=scene.material_variant, scene=f"scenes/{scene.scene_file}", key=key,
                status=status, colour_text=v.colour.text, colour_lab_d65=tuple(v.colour.lab),
                colour_in_gamut=v.colour.in_gamut, catalog_file=v.file, catalog_row=v.line,
            ))
    return shots


def batch_settings(quality="draft", output=None):
    """The settings object that enters shot keys for a batch: ``(Quality, OutputSpec)``.

    ``variantshot plan`` and ``variantshot render`` both key shots with this, so a plan made
    with ``--quality draft`` predicts what a draft render will re-render.
    """
    from .quality import OutputSpec, quality_preset

    return (quality_preset(quality), output if output is not None else OutputSpec())
