"""The finish library: named surface finishes as data files, each a glTF material block.

A finish is one TOML file ``<name>.toml`` in a finishes folder (``templates/finishes/`` for the
demo; see :func:`finish_dirs` for where else finishes are looked up).  The file holds the glTF 2.0
material properties of the finish, KHR material extensions included, in glTF's own spelling::

    description = "High-gloss lacquer: a clear coat over a smooth coloured base"
    colour_targets = ["baseColorFactor"]        # optional; this is the default

    [material.pbrMetallicRoughness]
    metallicFactor = 0.0
    roughnessFactor = 0.3

    [material.extensions.KHR_materials_clearcoat]
    clearcoatFactor = 1.0
    clearcoatRoughnessFactor = 0.03

``colour_targets`` says where the catalog colour goes: ``"baseColorFactor"`` (linear RGB plus
the finish's alpha) and/or ``"<EXTENSION>.<property>"`` (linear RGB), for example
``"KHR_materials_sheen.sheenColorFactor"`` or ``"KHR_materials_volume.attenuationColor"``.
A later folder's file of the same name replaces an earlier one, so a user extends or overrides
the library by adding files; nothing is built in beyond what the files say.
"""

from __future__ import annotations

import copy
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import InputError

FINISH_NAME_RE = re.compile(r"[a-z0-9][a-z0-9_-]*")
_MATERIAL_KEYS = {
    "name", "extensions", "extras", "pbrMetallicRoughness", "normalTexture", "occlusionTexture",
    "emissiveTexture", "emissiveFactor", "alphaMode", "alphaCutoff", "doubleSided",
}
_PBR_KEYS = {"baseColorFactor", "baseColorTexture", "metallicFactor", "roughnessFactor",
             "metallicRoughnessTexture", "extensions", "extras"}

# What the path tracer interprets today, as variantshot/transport/materials.py documents it; the
# renderer's own published list wins as soon as it has one
# (variantshot.transport.materials.SUPPORTED_EXTENSIONS), so this only matters until then.
# KHR_materials_variants never reaches the renderer: the expander bakes the chosen entry in.
FALLBACK_RENDERED_EXTENSIONS = frozenset(
    {
        "KHR_materials_emissive_strength", "KHR_materials_ior", "KHR_materials_specular",
        "KHR_texture_transform", "KHR_materials_variants",
    }
)


def renderer_extensions() -> frozenset[str]:
    """The glTF extensions the path tracer renders (its published list, else the fallback)."""
    try:
        from ..transport import materials  # noqa: PLC0415  (may import numba; only `check` asks)
    except Exception:  # the renderer is not importable: use the fallback list
        return FALLBACK_RENDERED_EXTENSIONS
    supported = getattr(materials, "SUPPORTED_EXTENSIONS", None)
    return frozenset(supported) | {"KHR_materials_variants"} if supported else FALLBACK_RENDERED_EXTENSIONS


@dataclass(frozen=True)
class Finish:
    """One finish preset (``finish`` in the template context).

    Attributes
    ----------
    name : str
    description : str
    material : dict
        The glTF material block (without ``name``), extensions included.
    colour_targets : tuple of str
    source : str
        The TOML file it came from.
    text : str
        That file's text (part of the shot key).
    """

    name: str
    description: str
    material: dict
    colour_targets: tuple[str, ...] = ("baseColorFactor",)
    source: str = ""
    text: str = field(default="", repr=False)

    @property
    def extensions(self) -> list[str]:
        """The glTF extensions this finish's material uses, sorted."""
        return sorted(self.material.get("extensions", {}))

    def material_for(self, colour=None, name: str | None = None) -> dict:
        """The glTF material of this finish in ``colour`` (a :class:`~.colour.ColourSpec`).

        Parameters
        ----------
        colour : ColourSpec, optional
            Written to every ``colour_targets`` entry; without it the finish's own values stay.
        name : str, optional
            The material's ``name``.

        Returns
        -------
        dict
            A fresh glTF material object.
        """
        mat = copy.deepcopy(self.material)
        if name:
            mat = {"name": name, **mat}
        if colour is not None:
            for target in self.colour_targets:
                if target == "baseColorFactor":
                    pbr = mat.setdefault("pbrMetallicRoughness", {})
                    alpha = pbr.get("baseColorFactor", [1.0, 1.0, 1.0, 1.0])[3]
                    pbr["baseColorFactor"] = [*colour.linear, float(alpha)]
                else:
                    ext, prop = target.split(".", 1)
                    mat.setdefault("extensions", {}).setdefault(ext, {})[prop] = list(colour.linear)
        return mat


def _check_finish(name: str, data: dict, file: str) -> list[InputError]:
    errors = []
    mat = data.get("material")
    if not isinstance(mat, dict):
        return [InputError("has no [material] table", file=file,
                           accepted="a [material] table holding glTF material properties")]
    for key in mat:
        if key not in _MATERIAL_KEYS:
            errors.append(InputError(f"material.{key} is not a glTF material property", file=file,
                                     accepted=", ".join(sorted(_MATERIAL_KEYS - {"name"}))))
    pbr = mat.get("pbrMetallicRoughness", {})
    if not isinstance(pbr, dict):
        errors.append(InputError("material.pbrMetallicRoughness must be a table", file=file))
        pbr = {}
    for key in pbr:
        if key not in _PBR_KEYS:
            errors.append(InputError(f"material.pbrMetallicRoughness.{key} is not a glTF property",
                                     file=file, accepted=", ".join(sorted(_PBR_KEYS))))
    for key in ("metallicFactor", "roughnessFactor"):
        v = pbr.get(key)
        if v is not None and not (isinstance(v, (int, float)) and 0.0 <= v <= 1.0):
            errors.append(InputError(f"material.pbrMetallicRoughness.{key} = {v!r} is not in [0, 1]",
                                     file=file, accepted="a number from 0 to 1"))
    exts = mat.get("extensions", {})
    if not isinstance(exts, dict):
        errors.append(InputError("material.extensions must be a table", file=file))
        exts = {}
    for ext in exts:
        if not re.fullmatch(r"[A-Z0-9]+_[A-Za-z0-9_]+", ext):
            errors.append(InputError(f"material.extensions.{ext} is not a glTF extension name",
                                     file=file, accepted="names like KHR_materials_clearcoat"))
    targets = data.get("colour_targets", ["baseColorFactor"])
    if not isinstance(targets, list) or not all(isinstance(t, str) for t in targets):
        errors.append(InputError("colour_targets must be a list of strings", file=file))
    else:
        for t in targets:
            if t != "baseColorFactor" and not (t.count(".") == 1 and t.split(".")[0] in exts):
                errors.append(
                    InputError(f"colour target {t!r} names no property of this finish", file=file,
                               accepted="baseColorFactor or <extension in material.extensions>.<property>")
                )
    return errors


def load_finish_file(path) -> Finish:
    """Read one finish TOML file.

    Raises
    ------
    InputErrors
        Naming the file (and for TOML syntax, the line) and what is accepted.
    """
    from ..errors import InputErrors

    path = Path(path)
    file = str(path)
    name = path.stem
    if not FINISH_NAME_RE.fullmatch(name):
        raise InputErrors([InputError(f"{name!r} is not a finish name", file=file,
                                      accepted="lower-case letters, digits, '-' and '_'")])
    try:
        text = path.read_text(encoding="utf-8")
        data = tomllib.loads(text)
    except UnicodeDecodeError:
        raise InputErrors([InputError("is not UTF-8 text", file=file, accepted="UTF-8 TOML")]) from None
    except tomllib.TOMLDecodeError as exc:
        raise InputErrors([InputError(f"is not valid TOML: {exc}", file=file, accepted="TOML 1.0")]) from None
    errors = _check_finish(name, data, file)
    if errors:
        raise InputErrors(errors)
    return Finish(
        name=name,
        description=str(data.get("description", "")),
        material=dict(data["material"]),
        colour_targets=tuple(data.get("colour_targets", ["baseColorFactor"])),
        source=file,
        text=text,
    )


def load_finishes(*dirs) -> dict[str, Finish]:
    """Load every ``*.toml`` finish of the given folders; later folders override earlier ones.

    Raises
    ------
    InputErrors
        Every bad file's problems at once.
    """
    from ..errors import InputErrors

    finishes: dict[str, Finish] = {}
    errors: list[InputError] = []
    for d in dirs:
        d = Path(d)
        if not d.is_dir():
            continue
        for path in sorted(d.glob("*.toml")):
            try:
                finishes[path.stem] = load_finish_file(path)
            except InputErrors as exc:
                errors.extend(exc.errors)
    if errors:
        raise InputErrors(errors)
    return finishes


def unsupported_extensions(finish: Finish, supported=None) -> list[str]:
    """The extensions of ``finish`` the renderer does not render (``variantshot check`` flags them)."""
    supported = renderer_extensions() if supported is None else supported
    return [e for e in finish.extensions if e not in supported]
