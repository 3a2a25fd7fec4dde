"""Expansion: catalog variants through sandboxed Jinja templates into checked glTF scenes.

For each variant the product's template is rendered with

``row``
    every cell of the catalog row by column name (``row.sku``, ``row.cap_colour``, ...);
``colour``
    the row's :class:`~.colour.ColourSpec` (``colour.linear`` / ``colour.factor`` linear sRGB for
    ``baseColorFactor``, ``colour.srgb``, ``colour.lab``, ``colour.hex``);
``finish``
    the row's :class:`~.finishes.Finish` (``finish.name``, ``finish.material``, ...);
``finishes``, ``product``, ``sku``
    the whole finish library, the product entry (name, angles) and the SKU;
``material(finish, colour=None, name=None)``
    the glTF material of a finish (object or name) in a colour, as a dict: write
    ``{{ material(finish, colour, "body") | tojson }}``;
``colour_of(text)``
    parses another colour cell (``colour_of(row.cap_colour)``), same rules as ``colour``.

The environment is Jinja's ``ImmutableSandboxedEnvironment`` with ``StrictUndefined``: an
undefined name is an error, attributes starting with ``_`` and mutating methods are refused,
and ``include`` / ``import`` can only load files below the templates folder (Jinja's
``FileSystemLoader`` refuses ``..`` and absolute paths).  Any template error is reported as
``TEMPLATE:LINE: message (catalog CATALOG:ROW, sku SKU)``.

The output must parse as JSON and pass :func:`~.gltf_check.check_gltf`; the expander then

* bakes a KHR_materials_variants entry in when the row asks for one (``material_variant``;
  ``*`` gives one scene per entry, with SKU ``<sku>-<entry name>``);
* adds one perspective camera node per preset angle, named after the angle, auto-framed on the
  product's vertices (:func:`~.angles.frame_angle`), unless the template already has a camera
  node of that name, which is kept as written; camera nodes of the template are extra angles:
  a row with an empty ``angles`` cell gets the product's default angles *plus* every template
  camera (by node name), a row that lists its angles gets exactly those;
* sets ``extensionsUsed`` to every extension the scene uses, and records the variant in
  ``asset.extras.variantshot`` (sku, product, finish, colourway, colour with its Lab, angles,
  background, rig) for the batch and QA.

Output files
------------
:func:`write_scenes` writes ``<out>/scenes/<safe sku>.gltf``.  External buffers and images
(a template's relative URIs, resolved next to the product's model) are *copied* next to the
scenes, once per distinct file (``bottle.bin``; ``bottle-<hash8>.bin`` if two different files
share a name), and the URIs rewritten, so every scene loads from ``scenes/`` alone and the
output stays small.  Data URIs are kept as they are.  Every path is checked to lie inside
``<out>/scenes`` before anything is written, and nothing is written unless every variant
expanded cleanly.
"""

from __future__ import annotations

import copy
import functools
import hashlib
import json
import logging
import traceback
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .._atomic import atomic_write
from ..errors import InputError, InputErrors
from . import angles as angle_lib
from . import variants as mv_lib
from .colour import ColourSyntaxError, parse_colour
from .finishes import Finish, renderer_extensions
from .gltf_check import camera_nodes, check_gltf, load_buffers, used_extensions, world_positions
from .schema import Variant, safe_file_name
from .validate import Catalog, Library, Product, closest, unknown_name_message

log = logging.getLogger(__name__)


@functools.lru_cache(maxsize=4096)
def _resolve_str(text: str) -> Path:
    return Path(text).resolve()


def _resolved(path) -> Path:
    """``Path(path).resolve()``, memoised (expansion resolves the same few paths per row)."""
    return _resolve_str(str(path))


def display_path(path) -> str:
    """``path`` relative to the working folder when it is below it (for messages)."""
    p = Path(path)
    try:
        return str(_resolved(p).relative_to(_resolved(Path.cwd())))
    except ValueError:
        return str(p)


@dataclass
class ExpandedScene:
    """One variant's finished glTF scene, in memory.

    Attributes
    ----------
    variant : Variant
        The catalog row it came from.
    sku, safe_name : str
        The SKU (``<sku>-<entry>`` for a material-variant entry) and its safe file stem.
    material_variant : str or None
        The KHR_materials_variants entry baked in.
    gltf : dict
        The scene; external buffer/image URIs still as the template wrote them.
    resources : dict
        ``{("buffers"|"images", index): source Path}`` for external files.
    angles : tuple of str
        The scene's camera node names, in the row's order.
    cameras : dict
        ``{angle: (4, 4) float64 world_from_camera}``.
    input_files : list of Path
        Files whose bytes determine the scene (template, model, buffers, finish file).
    bounds : (2, 3) float64 ndarray
        World-space bounding box of the product's vertices.
    """

    variant: Variant
    sku: str
    safe_name: str
    material_variant: str | None
    gltf: dict
    resources: dict = field(default_factory=dict)
    angles: tuple[str, ...] = ()
    cameras: dict = field(default_factory=dict)
    input_files: list = field(default_factory=list)
    bounds: np.ndarray | None = None

    @property
    def scene_file(self) -> str:
        return f"{self.safe_name}.gltf"


@dataclass
class CheckReport:
    """What :func:`check_expanded` found: the catalog, its scenes and the warnings."""

    catalog: Catalog
    scenes: list[ExpandedScene]
    warnings: list[InputError]


# ----------------------------------------------------------------------------- Jinja sandbox


class TemplateColourError(ValueError):
    """``colour_of()`` was given text that is not a colour."""


@functools.lru_cache(maxsize=16)
def _environment(templates_dir: str):
    from jinja2 import FileSystemLoader, StrictUndefined, Undefined
    from jinja2.sandbox import ImmutableSandboxedEnvironment

    env = ImmutableSandboxedEnvironment(
        loader=FileSystemLoader(templates_dir, followlinks=False),
        undefined=StrictUndefined,
        autoescape=False,
        keep_trailing_newline=True,
        auto_reload=True,
    )

    def colour_of(text):
        try:
            return parse_colour(str(text))
        except ColourSyntaxError as exc:
            raise TemplateColourError(f"colour_of({text!r}): {exc} (accepted: {exc.accepted})") from None

    def tojson(value, indent=None):
        # Jinja's own tojson would serialise an undefined value as a TypeError; raise the
        # undefined-name error instead, and do not HTML-escape (the output is JSON, not HTML)
        def default(obj):
            if isinstance(obj, Undefined):
                obj._fail_with_undefined_error()
            if hasattr(obj, "as_dict"):
                return obj.as_dict()
            raise TypeError(f"{type(obj).__name__} cannot be written as JSON")

        return json.dumps(value, indent=indent, default=default, ensure_ascii=False)

    env.globals["colour_of"] = colour_of
    env.filters["tojson"] = tojson
    return env


def _template_place(exc: BaseException, template_file: str) -> tuple[str, int | None]:
    """``(template file, line)`` where a template error happened (an included file if there)."""
    if getattr(exc, "lineno", None) and getattr(exc, "filename", None):  # syntax errors
        return exc.filename, exc.lineno
    place = (template_file, getattr(exc, "lineno", None))
    for frame in traceback.extract_tb(exc.__traceback__):
        # Jinja rewrites tracebacks so that template frames carry the template's file and line
        if frame.filename and (frame.filename == template_file or frame.filename.endswith(".j2")):
            place = (frame.filename, frame.lineno)
    return place


def render_template(product: Product, library: Library, variant: Variant) -> str:
    """Render a product's template for one variant (see the module docstring for the context).

    Raises
    ------
    InputError
        Naming the template file and line and the catalog row.
    """
    from jinja2 import TemplateError

    env = _environment(str(_resolved(library.templates_dir)))
    where = f"catalog {variant.file}:{variant.line}, sku {variant.sku}"
    try:
        name = _resolved(product.template).relative_to(_resolved(library.templates_dir)).as_posix()
    except ValueError:
        raise InputError(f"template {product.template} is outside the templates folder", file=product.template,
                         accepted=f"a template in {library.templates_dir}") from None
    finishes = library.finishes

    def material(finish, colour=None, name=None):
        if isinstance(finish, str):
            if finish not in finishes:
                raise TemplateColourError(unknown_name_message("finish", finish, finishes))
            finish = finishes[finish]
        if not isinstance(finish, Finish):
            raise TemplateColourError("material() needs a finish (or a finish name) first")
        return finish.material_for(colour, name)

    context = {
        "row": dict(variant.row),
        "colour": variant.colour,
        "finish": finishes[variant.finish],
        "finishes": dict(finishes),
        "product": {"name": product.name, "angles": list(product.angles), "description": product.description},
        "sku": variant.sku,
        "material": material,
    }
    template_file = str(_resolved(product.template))
    try:
        template = env.get_template(name)
        template_file = template.filename or template_file
        return template.render(context)
    except TemplateError as exc:
        file, line = _template_place(exc, template_file)
        kind = type(exc).__name__
        message = exc.message if getattr(exc, "message", None) else str(exc)
        if kind == "TemplateNotFound":
            missing = getattr(exc, "name", None) or message
            message = (f"cannot include {missing!r}: templates may only include files inside "
                       f"{display_path(library.templates_dir)}")
        elif kind == "SecurityError":
            message = f"refused by the template sandbox: {message}"
        raise InputError(f"{message} ({where})", file=display_path(file), row=line) from None
    except Exception as exc:  # errors raised by Python code the template called
        file, line = _template_place(exc, template_file)
        text = str(exc) if isinstance(exc, TemplateColourError) else f"{type(exc).__name__}: {exc}"
        raise InputError(f"{text} ({where})", file=display_path(file), row=line) from None


# ----------------------------------------------------------------------------- expansion


class _BufferCache:
    """Per-run memo: file bytes, and world positions / framed cameras per geometry."""

    def __init__(self):
        self.files: dict[Path, bytes | None] = {}
        self.geometry: dict[str, tuple] = {}

    def read(self, path: Path) -> bytes | None:
        path = _resolved(path)
        if path not in self.files:
            try:
                self.files[path] = path.read_bytes()
            except OSError:
                self.files[path] = None
        return self.files[path]


def _external_resources(gltf: dict, base_dir: Path) -> dict:
    from .gltf_check import resolve_uri

    out = {}
    for kind in ("buffers", "images"):
        for i, item in enumerate(gltf.get(kind, []) or []):
            uri = item.get("uri") if isinstance(item, dict) else None
            if uri and not uri.startswith("data:"):
                out[(kind, i)] = _resolved(resolve_uri(uri, base_dir))
    return out


def expand_variant(variant: Variant, library: Library, *, cache: _BufferCache | None = None,
                   fill_frac: float = angle_lib.DEFAULT_FILL_FRAC,
                   yfov_rad: float = angle_lib.DEFAULT_YFOV_RAD) -> list[ExpandedScene]:
    """Expand one catalog variant into its scene(s) in memory.

    Returns one scene, or one per material-variant entry when the row asks for ``*``.

    Raises
    ------
    InputErrors
        Template, glTF, angle and material-variant problems, naming the template and the row.
    """
    cache = cache or _BufferCache()
    product = library.products[variant.product]
    where = f"catalog {variant.file}:{variant.line}, sku {variant.sku}"
    tfile = display_path(product.template)
    text = render_template(product, library, variant)
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        lines = text.splitlines()
        snippet = lines[exc.lineno - 1].strip()[:60] if 0 < exc.lineno <= len(lines) else ""
        raise InputErrors([InputError(
            f"the template's output is not JSON: {exc.msg} at output line {exc.lineno} column {exc.colno} "
            f"({snippet!r}) ({where})", file=tfile, accepted="a template that renders glTF 2.0 JSON")]) from None
    if not isinstance(doc, dict):
        raise InputErrors([InputError(f"the template's output is not a JSON object ({where})", file=tfile)])

    names = mv_lib.variant_names(doc)
    mv = variant.material_variant
    if mv is None:
        docs = [(None, mv_lib.strip_variants(doc))]
    elif not names:
        raise InputErrors([InputError(
            f"material variant {mv!r} asked, but the scene has no KHR_materials_variants",
            file=variant.file, row=variant.line, column="material_variant",
            accepted="an empty cell for this product")])
    elif mv == mv_lib.ALL_VARIANTS:
        docs = [(n, mv_lib.apply_variant(doc, n)) for n in names]
    elif mv not in names:
        raise InputErrors([InputError(
            unknown_name_message("material variant", mv, names), file=variant.file, row=variant.line,
            column="material_variant", accepted=", ".join(names) + ", or * for all")])
    else:
        docs = [(mv, mv_lib.apply_variant(doc, mv))]

    out = []
    base_dir = product.base_dir
    for mv_name, gltf in docs:
        used = used_extensions(gltf)
        if used or gltf.get("extensionsUsed"):
            gltf["extensionsUsed"] = sorted(set(used) | set(gltf.get("extensionsUsed", [])))
        resources = _external_resources(gltf, base_dir)
        allowed = [_resolved(base_dir), _resolved(library.templates_dir)]
        outside = [(k, p) for k, p in resources.items() if not any(_inside(p, folder) for folder in allowed)]
        if outside:
            raise InputErrors([InputError(
                f"/{kind}/{i}: uri {gltf[kind][i]['uri']!r} points outside the model and templates folders ({where})",
                file=tfile, accepted=f"relative URIs of files in {display_path(base_dir)} or "
                f"{display_path(library.templates_dir)}, or data: URIs") for (kind, i), _ in outside])
        buffers = load_buffers(gltf, base_dir=None)  # data URIs; files below
        for (kind, i), path in resources.items():
            if kind == "buffers":
                buffers[i] = cache.read(path)
        issues = check_gltf(gltf, base_dir, buffers=buffers)
        if issues:
            raise InputErrors([InputError(f"{issue} ({where})", file=tfile,
                                          accepted="glTF 2.0 (Khronos specification)") for issue in issues])
        # positions and framing depend only on the geometry: memoise them per run
        geo_key = hashlib.sha256(json.dumps(
            [str(base_dir), gltf.get("scene", 0), gltf.get("scenes"), gltf.get("nodes"),
             [[{k: v for k, v in p.items() if k != "material"} for p in m.get("primitives", [])]
              for m in gltf.get("meshes", [])],
             gltf.get("accessors"), gltf.get("bufferViews"), gltf.get("buffers"), fill_frac, yfov_rad],
            sort_keys=True, default=str).encode()).hexdigest()
        if geo_key not in cache.geometry:
            cache.geometry[geo_key] = (world_positions(gltf, buffers), {})
        positions, framed = cache.geometry[geo_key]
        if positions.shape[0] == 0:
            raise InputErrors([InputError(f"the scene draws no triangles ({where})", file=tfile,
                                          accepted="a scene whose default scene has mesh nodes")])
        existing = camera_nodes(gltf)
        angles = variant.angles
        errors = []
        from_products = not variant.row.get("angles")  # the product's default angles
        if from_products:  # the template's own cameras are extra angles of every such row
            angles = tuple(dict.fromkeys([*angles, *existing]))
        for a in angles:
            if a not in existing and a not in angle_lib.ANGLE_PRESETS:
                choices = sorted(set(angle_lib.ANGLE_PRESETS) | set(existing))
                message = unknown_name_message("angle", a, choices)
                if from_products:
                    message += f" (a default angle of product {variant.product!r} in products.toml)"
                errors.append(InputError(message, file=variant.file, row=variant.line, column="angles",
                                         accepted=", ".join(choices) + " (';'-separated)"))
        if errors:
            raise InputErrors(errors)
        cameras = {}
        scene_index = gltf.get("scene", 0)
        for a in angles:
            if a in existing:
                cameras[a] = _node_world_matrix(gltf, existing[a])
                continue
            if a not in framed:
                m = angle_lib.frame_angle(positions, a, fill_frac=fill_frac, yfov_rad=yfov_rad)
                framed[a] = (m, *angle_lib.camera_gltf(a, m, positions, yfov_rad=yfov_rad))
            world_from_camera, cam, node = framed[a]
            cam, node = copy.deepcopy(cam), dict(node)
            gltf.setdefault("cameras", []).append(cam)
            node["camera"] = len(gltf["cameras"]) - 1
            gltf.setdefault("nodes", []).append(node)
            gltf["scenes"][scene_index].setdefault("nodes", []).append(len(gltf["nodes"]) - 1)
            cameras[a] = world_from_camera
        derived = mv == mv_lib.ALL_VARIANTS  # one scene per entry: each gets its own SKU
        sku = f"{variant.sku}-{mv_name}" if derived else variant.sku
        extras = gltf.setdefault("asset", {}).setdefault("extras", {})
        extras["variantshot"] = {
            "sku": sku,
            "product": variant.product,
            "finish": variant.finish,
            "colourway": variant.colourway,
            "colour": variant.colour.as_dict(),
            "material_variant": mv_name,
            "angles": list(angles),
            "template_cameras": [a for a in angles if a in existing],
            "background": variant.background,
            "rig": variant.rig,
            "catalog_row": variant.line,
        }
        inputs = [_resolved(product.template)]
        if product.model is not None:
            inputs.append(_resolved(product.model))
        inputs.extend(sorted(set(resources.values())))
        inputs.append(_resolved(library.finishes[variant.finish].source))
        out.append(ExpandedScene(
            variant=variant, sku=sku, safe_name=safe_file_name(sku) if derived else variant.safe_sku,
            material_variant=mv_name, gltf=gltf, resources=resources, angles=tuple(angles), cameras=cameras,
            input_files=list(dict.fromkeys(inputs)),
            bounds=np.stack([positions.min(axis=0), positions.max(axis=0)]),
        ))
    return out


def _node_world_matrix(gltf: dict, node_index: int) -> np.ndarray:
    from .gltf_check import _node_matrix

    parents = {}
    for i, n in enumerate(gltf.get("nodes", [])):
        for c in n.get("children", []):
            parents[c] = i
    m = np.eye(4)
    cur = node_index
    while cur is not None:
        m = _node_matrix(gltf["nodes"][cur]) @ m
        cur = parents.get(cur)
    return m


def check_models(catalog: Catalog) -> list[InputError]:
    """Structural problems of the model files of the products the catalog uses."""
    errors = []
    used = {v.product for v in catalog.variants}
    for name in sorted(used):
        product = catalog.library.products[name]
        if product.model is None:
            continue
        where = display_path(product.model)
        try:
            doc = json.loads(product.model.read_text(encoding="utf-8"))
        except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
            errors.append(InputError(f"model of product {name!r} cannot be read as glTF JSON: {exc}", file=where,
                                     accepted="a glTF 2.0 .gltf file"))
            continue
        for issue in check_gltf(doc, product.model.parent):
            errors.append(InputError(f"{issue}", file=where, accepted="glTF 2.0 (Khronos specification)"))
    return errors


def check_expanded(catalog: Catalog, *, supported_extensions=None, progress=None,
                   keep_documents: bool = True) -> CheckReport:
    """Expand every variant of a checked catalog in memory and collect every problem.

    Template problems are reported once per (template, line, message) with the first row and
    the number of rows affected.  Finishes and scenes using extensions the renderer does not
    render yet become warnings naming the first row (the scene keeps the extension).

    With ``keep_documents=False`` each scene keeps only ``asset`` and ``extensionsUsed`` of its
    glTF (enough for checking and planning), so a large catalog does not hold every scene in
    memory; such scenes cannot be written.

    Raises
    ------
    InputErrors
        When any variant fails to expand, or two scenes would get the same file name.
    """
    cache = _BufferCache()
    scenes: list[ExpandedScene] = []
    errors: list[InputError] = check_models(catalog)
    grouped: dict[tuple, list] = {}
    total = len(catalog.variants)
    for k, variant in enumerate(catalog.variants):
        try:
            expanded = expand_variant(variant, catalog.library, cache=cache)
            if not keep_documents:
                for e in expanded:
                    e.gltf = {"asset": e.gltf.get("asset", {}), "extensionsUsed": e.gltf.get("extensionsUsed", [])}
                    e.resources = {}
            scenes.extend(expanded)
        except InputErrors as exc:
            for e in exc.errors:
                if e.file == variant.file:
                    errors.append(e)
                else:
                    grouped.setdefault((e.file, e.row, e.message.rsplit(" (catalog ", 1)[0]), []).append((e, variant))
        except InputError as e:
            grouped.setdefault((e.file, e.row, e.message.rsplit(" (catalog ", 1)[0]), []).append((e, variant))
        if progress is not None:
            progress(k + 1, total, variant.sku)
    for items in grouped.values():
        first, _ = items[0]
        if len(items) > 1:
            first.message += f" and {len(items) - 1} more row(s)"
            first.args = (first.format(),)
        errors.append(first)
    seen: dict[str, ExpandedScene] = {}
    for s in scenes:
        key = s.safe_name.lower()
        if key in seen:
            other = seen[key]
            errors.append(InputError(
                f"scene file {s.scene_file!r} of SKU {s.sku!r} clashes with SKU {other.sku!r} (row {other.variant.line})",
                file=s.variant.file, row=s.variant.line, column="sku", accepted="SKUs giving distinct file names"))
        else:
            seen[key] = s
    if errors:
        raise InputErrors(errors)
    warnings = list(catalog.warnings)
    supported = renderer_extensions() if supported_extensions is None else frozenset(supported_extensions)
    flagged: dict[tuple, list] = {}
    for s in scenes:
        finish_exts = catalog.library.finishes[s.variant.finish].extensions
        for ext in s.gltf.get("extensionsUsed", []):
            if ext not in supported:
                origin = ("finish", s.variant.finish) if ext in finish_exts else ("product", s.variant.product)
                flagged.setdefault((origin, ext), []).append(s)
    found = []
    for ((kind, name), ext), items in flagged.items():
        first = items[0].variant
        more = f" (and {len(items) - 1} more row(s))" if len(items) > 1 else ""
        origin = f"finish {name!r}" if kind == "finish" else f"the {name!r} template"
        found.append(InputError(
            f"{origin} uses {ext}, which the renderer does not render yet; the scene keeps it, "
            f"but the image will not show it{more}", file=first.file, row=first.line, column=kind,
            accepted="extensions the renderer renders: " + ", ".join(sorted(supported))))
    warnings.extend(sorted(found, key=lambda w: (w.row, w.message)))
    return CheckReport(catalog=catalog, scenes=scenes, warnings=warnings)


# ----------------------------------------------------------------------------- writing


def _inside(path: Path, folder: Path) -> bool:
    try:
        path.resolve().relative_to(folder.resolve())
        return True
    except ValueError:
        return False


def scene_documents(scenes: list[ExpandedScene], cache: _BufferCache | None = None):
    """The final scene documents with URIs pointing at copied resources.

    Returns
    -------
    docs : list of (str, dict)
        ``(scene file name, glTF dict)``.
    copies : dict
        ``{file name in scenes/: source Path}``.
    """
    cache = cache or _BufferCache()
    copies: dict[str, Path] = {}
    by_source: dict[Path, str] = {}
    docs = []
    for s in scenes:
        gltf = copy.deepcopy(s.gltf)
        for (kind, i), src in sorted(s.resources.items()):
            name = by_source.get(src)
            if name is None:
                name = safe_file_name(src.stem) + src.suffix
                if name in copies and copies[name] != src:
                    digest = hashlib.sha256(cache.read(src) or b"").hexdigest()[:8]
                    name = f"{safe_file_name(src.stem)}-{digest}{src.suffix}"
                copies[name] = src
                by_source[src] = name
            gltf[kind][i]["uri"] = name
        docs.append((s.scene_file, gltf))
    return docs, copies


def write_scenes(scenes: list[ExpandedScene], out_dir) -> list[Path]:
    """Write scenes and their resource copies to ``<out_dir>/scenes/`` (atomic writes).

    Returns
    -------
    list of Path
        The scene files written, in catalog order.
    """
    if any("scenes" not in s.gltf for s in scenes):
        raise ValueError("write_scenes needs full scene documents (check_expanded(keep_documents=True))")
    folder = Path(out_dir) / "scenes"
    cache = _BufferCache()
    docs, copies = scene_documents(scenes, cache)
    targets = [folder / name for name, _ in docs] + [folder / name for name in copies]
    for t in targets:
        if not _inside(t, folder) or t.parent.resolve() != folder.resolve():
            raise InputError(f"refusing to write {t}: outside {folder}", file=str(t))
    for name, src in copies.items():
        data = cache.read(src)
        if data is None:
            raise InputError("cannot read", file=str(src))
        dest = folder / name
        if not (dest.is_file() and dest.read_bytes() == data):
            atomic_write(dest, data)
    written = []
    for name, gltf in docs:
        written.append(atomic_write(folder / name, json.dumps(gltf, indent=1) + "\n"))
    return written


def expand_catalog(path, out_dir, *, templates_dir=None, progress=None):
    """Check a catalog completely, then write every variant's scene to ``<out_dir>/scenes/``.

    Nothing is written when the catalog, a template or a model has an error.  The output
    folder's lock (:mod:`variantshot._lock`) is held while writing, so ``expand`` and a
    batch never write the same folder at once.

    Returns
    -------
    (CheckReport, list of Path)

    Raises
    ------
    InputErrors
    LockedError
        Another run holds the output folder.
    """
    from .._lock import acquire_lock
    from .validate import read_catalog

    catalog = read_catalog(path, templates_dir=templates_dir)
    report = check_expanded(catalog, progress=progress)
    with acquire_lock(out_dir):  # a batch writing the same folder holds it (LockedError)
        return report, write_scenes(report.scenes, out_dir)


__all__ = [
    "CheckReport", "ExpandedScene", "check_expanded", "expand_catalog", "expand_variant", "render_template",
    "scene_documents", "write_scenes", "closest",
]
