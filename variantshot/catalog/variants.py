"""KHR_materials_variants: list a model's material variants and bake one into a plain scene.

A glTF file may carry several material sets for the same geometry (extension
``KHR_materials_variants``: a root list of named ``variants`` and, per mesh primitive,
``mappings`` of ``{material, variants: [variant indices]}``).  The catalog column
``material_variant`` picks one by name, or ``*`` asks for one catalog variant per entry.
Baking a variant sets each primitive's ``material`` to the mapped material (primitives without
a mapping for it keep their default material) and removes the extension, so the renderer sees
an ordinary scene.

Reference: Khronos, KHR_materials_variants extension specification (glTF extension registry).
"""

from __future__ import annotations

import copy

EXT = "KHR_materials_variants"
ALL_VARIANTS = "*"


def variant_names(gltf: dict) -> list[str]:
    """The names of the document's material variants, in file order (``[]`` when it has none)."""
    variants = ((gltf.get("extensions") or {}).get(EXT) or {}).get("variants", [])
    return [str(v.get("name", f"variant{i}")) for i, v in enumerate(variants)]


def apply_variant(gltf: dict, name: str) -> dict:
    """A copy of ``gltf`` with material variant ``name`` baked in and the extension removed.

    Parameters
    ----------
    gltf : dict
        A glTF document with a root ``KHR_materials_variants`` extension.
    name : str
        One of :func:`variant_names`.

    Returns
    -------
    dict
        A new document; ``gltf`` is not modified.

    Raises
    ------
    KeyError
        When the document has no variant called ``name``.
    """
    names = variant_names(gltf)
    if name not in names:
        raise KeyError(name)
    index = names.index(name)
    out = copy.deepcopy(gltf)
    for mesh in out.get("meshes", []):
        for prim in mesh.get("primitives", []):
            ext = (prim.get("extensions") or {}).pop(EXT, None)
            if ext is not None:
                for mapping in ext.get("mappings", []):
                    if index in mapping.get("variants", []):
                        prim["material"] = mapping["material"]
                        break
            if "extensions" in prim and not prim["extensions"]:
                del prim["extensions"]
    root_ext = out.get("extensions") or {}
    root_ext.pop(EXT, None)
    if "extensions" in out and not out["extensions"]:
        del out["extensions"]
    for key in ("extensionsUsed", "extensionsRequired"):
        if key in out:
            out[key] = [e for e in out[key] if e != EXT]
            if not out[key]:
                del out[key]
    out.setdefault("asset", {}).setdefault("extras", {})["materialVariant"] = name
    return out


def strip_variants(gltf: dict) -> dict:
    """Remove the extension but keep every primitive's default material (no variant asked)."""
    if not variant_names(gltf):
        return gltf
    out = copy.deepcopy(gltf)
    for mesh in out.get("meshes", []):
        for prim in mesh.get("primitives", []):
            (prim.get("extensions") or {}).pop(EXT, None)
            if "extensions" in prim and not prim["extensions"]:
                del prim["extensions"]
    (out.get("extensions") or {}).pop(EXT, None)
    if "extensions" in out and not out["extensions"]:
        del out["extensions"]
    for key in ("extensionsUsed", "extensionsRequired"):
        if key in out:
            out[key] = [e for e in out[key] if e != EXT]
            if not out[key]:
                del out[key]
    return out
