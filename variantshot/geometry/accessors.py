"""glTF 2.0 binary data: buffers, bufferViews and accessors decoded into fresh numpy arrays.

:class:`GltfData` wraps a parsed glTF JSON document together with a loader for its binary
buffers.  It offers checked access to the JSON (every bad field becomes a
:class:`~variantshot.errors.SceneError` naming the file and the object) and decodes accessors
with numpy: the struct layout of glTF 2.0 §3.6.2 (``byteOffset``, ``byteStride``, component
types 5120-5126, matrix column padding), normalised integers per §3.11 and sparse
substitution per §3.6.2.3.  Every extent is checked against the declared sizes *before*
anything is allocated, so a file claiming 10**12 elements fails at once.

References
----------
The Khronos Group, *glTF 2.0 Specification*, §3.6 "Buffers, buffer views and accessors",
§3.11 "Animations" (the normalised-integer table).
"""

from __future__ import annotations

import math
from typing import Callable

import numpy as np

from ..errors import SceneError

# glTF 2.0 §3.6.2.2: componentType -> little-endian numpy dtype
COMPONENT_DTYPES = {
    5120: np.dtype("i1"),  # BYTE
    5121: np.dtype("u1"),  # UNSIGNED_BYTE
    5122: np.dtype("<i2"),  # SHORT
    5123: np.dtype("<u2"),  # UNSIGNED_SHORT
    5125: np.dtype("<u4"),  # UNSIGNED_INT
    5126: np.dtype("<f4"),  # FLOAT
}
COMPONENT_NAMES = {
    5120: "BYTE",
    5121: "UNSIGNED_BYTE",
    5122: "SHORT",
    5123: "UNSIGNED_SHORT",
    5125: "UNSIGNED_INT",
    5126: "FLOAT",
}
FLOAT = 5126
# glTF 2.0 §3.6.2.2: accessor.type -> (columns, rows); a vector is one column
ELEMENT_SHAPES = {
    "SCALAR": (1, 1),
    "VEC2": (1, 2),
    "VEC3": (1, 3),
    "VEC4": (1, 4),
    "MAT2": (2, 2),
    "MAT3": (3, 3),
    "MAT4": (4, 4),
}
# glTF 2.0 §3.11 (normalised integers): float = max(c / divisor, -1.0)
NORMALIZED_DIVISORS = {5120: 127.0, 5121: 255.0, 5122: 32767.0, 5123: 65535.0}
SPARSE_INDEX_TYPES = (5121, 5123, 5125)

#: An accessor with no bufferView is all zeros (§3.6.2.3); its declared size is capped here,
#: since nothing in the file bounds it.
MAX_UNBACKED_BYTES = 1 << 28

_MISSING = object()


def normalized_to_float(values: np.ndarray, component_type: int) -> np.ndarray:
    """Convert normalised integer components to float32 as glTF 2.0 §3.11 specifies.

    Parameters
    ----------
    values : ndarray of int8, uint8, int16 or uint16
        Raw components.
    component_type : int
        5120 (BYTE), 5121 (UNSIGNED_BYTE), 5122 (SHORT) or 5123 (UNSIGNED_SHORT).

    Returns
    -------
    ndarray of float32, same shape
        ``max(c / 127, -1)``, ``c / 255``, ``max(c / 32767, -1)`` or ``c / 65535``.
    """
    divisor = NORMALIZED_DIVISORS[component_type]
    out = values.astype(np.float32) / np.float32(divisor)
    if component_type in (5120, 5122):
        np.maximum(out, np.float32(-1.0), out=out)
    return out


def element_layout(component_type: int, type_name: str) -> tuple[int, int, int, int]:
    """Byte layout of one accessor element: ``(n_components, column_bytes, column_stride, size)``.

    Matrix columns start on 4-byte boundaries (glTF 2.0 §3.6.2.4), so MAT2 of bytes and MAT3
    of bytes or shorts carry padding after each column; ``size`` includes it (8, 12 and 24
    bytes for those three).
    """
    cols, rows = ELEMENT_SHAPES[type_name]
    comp = COMPONENT_DTYPES[component_type].itemsize
    column_bytes = rows * comp
    column_stride = column_bytes if cols == 1 else (column_bytes + 3) // 4 * 4
    return cols * rows, column_bytes, column_stride, column_stride * cols


class GltfData:
    """A parsed glTF document plus its binary buffers, with checked access.

    Parameters
    ----------
    doc : dict
        The glTF JSON object.
    file : str
        The file's name as the user gave it (used in every message).
    load_buffer : callable
        ``load_buffer(index) -> bytes`` returning the bytes of ``buffers[index]`` (at least
        ``byteLength`` of them); it raises :class:`SceneError` itself on failure.
    """

    def __init__(self, doc: dict, file: str, load_buffer: Callable[[int], bytes]):
        self.doc = doc
        self.file = file
        self._load_buffer = load_buffer
        self._buffers: dict[int, bytes] = {}
        self._accessor_cache: dict[tuple[int, bool], np.ndarray] = {}
        self.where: str | None = None  # the object being read, for unexpected failures

    # ------------------------------------------------------------------ errors and JSON
    def error(self, where: str | None, message: str) -> SceneError:
        """A :class:`SceneError` for this file (returned, for ``raise data.error(...)``)."""
        return SceneError(self.file, where, message)

    def array(self, key: str) -> list:
        """A top-level array such as ``"meshes"`` ([] when absent)."""
        value = self.doc.get(key, [])
        if not isinstance(value, list):
            raise self.error(key, f"must be an array, got {_kind(value)}")
        return value

    def obj(self, key: str, index, where: str | None, label: str | None = None) -> dict:
        """``doc[key][index]`` after checking the index, as referenced from ``where``."""
        items = self.array(key)
        label = label or key
        if not _is_int(index) or not 0 <= int(index) < len(items):
            raise self.error(
                where,
                f"{label} {_show(index)} is out of range (the file has {len(items)} {key})",
            )
        item = items[int(index)]
        if not isinstance(item, dict):
            raise self.error(f"{key}[{int(index)}]", f"must be an object, got {_kind(item)}")
        return item

    def dict_field(self, obj: dict, key: str, where: str) -> dict:
        value = obj.get(key, {})
        if not isinstance(value, dict):
            raise self.error(where, f"{key} must be an object, got {_kind(value)}")
        return value

    def list_field(self, obj: dict, key: str, where: str) -> list:
        value = obj.get(key, [])
        if not isinstance(value, list):
            raise self.error(where, f"{key} must be an array, got {_kind(value)}")
        return value

    def int_field(self, obj: dict, key: str, where: str, default=_MISSING, minimum=None,
                  maximum=None) -> int:
        """An integer field (integral floats such as ``3.0`` are accepted)."""
        if key not in obj:
            if default is _MISSING:
                raise self.error(where, f"{key} is required")
            return default
        value = obj[key]
        if not _is_int(value):
            raise self.error(where, f"{key} must be an integer, got {_show(value)}")
        value = int(value)
        if minimum is not None and value < minimum:
            raise self.error(where, f"{key} must be >= {minimum}, got {value}")
        if maximum is not None and value > maximum:
            raise self.error(where, f"{key} must be <= {maximum}, got {value}")
        return value

    def number_field(self, obj: dict, key: str, where: str, default=_MISSING, minimum=None,
                     maximum=None) -> float:
        """A finite number field, optionally range-checked (inclusive)."""
        if key not in obj:
            if default is _MISSING:
                raise self.error(where, f"{key} is required")
            return default
        value = obj[key]
        if not _is_number(value):
            raise self.error(where, f"{key} must be a finite number, got {_show(value)}")
        value = float(value)
        if (minimum is not None and value < minimum) or (maximum is not None and value > maximum):
            lo = "-inf" if minimum is None else f"{minimum:g}"
            hi = "inf" if maximum is None else f"{maximum:g}"
            raise self.error(where, f"{key} must be in [{lo}, {hi}], got {value:g}")
        return value

    def numbers_field(self, obj: dict, key: str, n: int, where: str, default=_MISSING,
                      minimum=None, maximum=None) -> tuple[float, ...]:
        """A field holding exactly ``n`` finite numbers."""
        if key not in obj:
            if default is _MISSING:
                raise self.error(where, f"{key} is required")
            return default
        value = obj[key]
        if not isinstance(value, list) or len(value) != n or not all(map(_is_number, value)):
            raise self.error(where, f"{key} needs {n} finite numbers, got {_show(value)}")
        out = tuple(float(v) for v in value)
        if (minimum is not None and min(out) < minimum) or (maximum is not None and max(out) > maximum):
            raise self.error(where, f"{key} needs {n} numbers in [{minimum:g}, {maximum:g}], got {_show(value)}")
        return out

    def str_field(self, obj: dict, key: str, where: str, default=_MISSING) -> str:
        if key not in obj:
            if default is _MISSING:
                raise self.error(where, f"{key} is required")
            return default
        value = obj[key]
        if not isinstance(value, str):
            raise self.error(where, f"{key} must be a string, got {_show(value)}")
        return value

    def bool_field(self, obj: dict, key: str, where: str, default: bool) -> bool:
        value = obj.get(key, default)
        if not isinstance(value, bool):
            raise self.error(where, f"{key} must be true or false, got {_show(value)}")
        return value

    # ------------------------------------------------------------------ buffers
    def buffer(self, index: int, where: str) -> bytes:
        """The bytes of ``buffers[index]`` (exactly ``byteLength`` of them)."""
        if index not in self._buffers:
            buf = self.obj("buffers", index, where, "buffer")
            length = self.int_field(buf, "byteLength", f"buffers[{index}]", minimum=1)
            data = self._load_buffer(index)
            if len(data) < length:
                raise self.error(
                    f"buffers[{index}]",
                    f"holds {len(data)} bytes but declares byteLength {length}",
                )
            self._buffers[index] = data[:length] if len(data) > length else data
        return self._buffers[index]

    def buffer_view_bytes(self, view_index: int, where: str) -> memoryview:
        """The bytes of one bufferView (used for images), after checking its extent."""
        view, buffer_index, offset, length, _ = self._view(view_index, where, f"bufferView {view_index}")
        data = self.buffer(buffer_index, f"bufferViews[{view_index}]")
        return memoryview(data)[offset : offset + length]

    def _view(self, view_index, where: str, label: str):
        """Check ``bufferViews[view_index]``: returns (view, buffer, byteOffset, byteLength, byteStride)."""
        view = self.obj("bufferViews", view_index, where, "bufferView")
        vw = f"bufferViews[{int(view_index)}]"
        buffer_index = self.int_field(view, "buffer", vw, minimum=0)
        buf = self.obj("buffers", buffer_index, vw, "buffer")
        buffer_length = self.int_field(buf, "byteLength", f"buffers[{buffer_index}]", minimum=1)
        offset = self.int_field(view, "byteOffset", vw, default=0, minimum=0)
        length = self.int_field(view, "byteLength", vw, minimum=1)
        stride = self.int_field(view, "byteStride", vw, default=None, minimum=4, maximum=252)
        if stride is not None and stride % 4:
            raise self.error(vw, f"byteStride must be a multiple of 4, got {stride}")
        if offset + length > buffer_length:
            raise self.error(
                where,
                f"{label} reads past the end of buffer {buffer_index} (bufferView {int(view_index)} "
                f"ends at byte {offset + length}, the buffer has {buffer_length})",
            )
        return view, buffer_index, offset, length, stride

    # ------------------------------------------------------------------ accessors
    def accessor_info(self, index, where: str, semantic: str = "") -> dict:
        """Validate ``accessors[index]`` and its extent in its bufferView and buffer, reading no data.

        Returns a dict with ``count``, ``type``, ``component_type``, ``normalized``,
        ``n_components`` and ``label`` (``"accessor 7 (POSITION)"``, for messages).
        """
        acc = self.obj("accessors", index, where, "accessor")
        index = int(index)
        label = f"accessor {index}" + (f" ({semantic})" if semantic else "")
        aw = f"accessors[{index}]"
        ctype = self.int_field(acc, "componentType", aw)
        if ctype not in COMPONENT_DTYPES:
            accepted = ", ".join(f"{k} {v}" for k, v in COMPONENT_NAMES.items())
            raise self.error(aw, f"componentType {ctype} is not a glTF 2.0 component type ({accepted})")
        type_name = self.str_field(acc, "type", aw)
        if type_name not in ELEMENT_SHAPES:
            raise self.error(aw, f"type {type_name!r} is not one of {', '.join(ELEMENT_SHAPES)}")
        count = self.int_field(acc, "count", aw, minimum=1)
        normalized = self.bool_field(acc, "normalized", aw, False)
        if normalized and ctype not in NORMALIZED_DIVISORS:
            raise self.error(aw, f"normalized must not be true for {COMPONENT_NAMES[ctype]} components")
        n_comp, _, _, elem_size = element_layout(ctype, type_name)
        byte_offset = self.int_field(acc, "byteOffset", aw, default=0, minimum=0)
        info = {
            "index": index,
            "accessor": acc,
            "count": count,
            "type": type_name,
            "component_type": ctype,
            "normalized": normalized,
            "n_components": n_comp,
            "label": label,
            "byte_offset": byte_offset,
            "element_size": elem_size,
            "view": None,
        }
        if "bufferView" in acc:
            view_index = acc["bufferView"]
            _, buffer_index, view_offset, view_length, stride = self._view(view_index, where, label)
            stride = stride or elem_size
            if stride < elem_size:
                raise self.error(
                    where,
                    f"{label}: bufferView {int(view_index)} byteStride {stride} is smaller than "
                    f"one {type_name} element of {COMPONENT_NAMES[ctype]} ({elem_size} bytes)",
                )
            needed = byte_offset + stride * (count - 1) + elem_size
            if needed > view_length:
                raise self.error(
                    where,
                    f"{label} reads past the end of bufferView {int(view_index)} (count {count} "
                    f"needs {needed} bytes from the view's start, the view has {view_length})",
                )
            info["view"] = (int(view_index), buffer_index, view_offset, stride)
        else:
            if byte_offset:
                raise self.error(aw, "byteOffset must not be set when there is no bufferView")
            if count * elem_size > MAX_UNBACKED_BYTES:
                raise self.error(
                    where,
                    f"{label} declares {count} elements with no bufferView ({count * elem_size} "
                    f"bytes of zeros; the limit is {MAX_UNBACKED_BYTES})",
                )
        return info

    def read_accessor(self, index, where: str, semantic: str = "", *, as_float: bool = False) -> np.ndarray:
        """Decode ``accessors[index]`` into a C-contiguous array of its own (never a view of the file).

        The result is cached and marked read-only, because primitives often share accessors;
        copy it (or compute a new array from it) before changing it.

        Parameters
        ----------
        index : int
            The accessor index.
        where : str
            The referencing object, for messages (``"meshes[2].primitives[0]"``).
        semantic : str, optional
            What the data is for (``"POSITION"``), for messages.
        as_float : bool, optional
            If true, return float32, applying the §3.11 normalisation when the accessor is
            ``normalized`` (otherwise integers are converted by value).

        Returns
        -------
        ndarray
            ``(count,)`` for SCALAR, ``(count, n)`` for VECn and ``(count, n, n)`` for MATn
            (indexed ``[element, column, row]``, glTF's column-major order); the component
            dtype of the file (native byte order) unless ``as_float``.

        Raises
        ------
        SceneError
            On any bad field, an extent past the end of a bufferView or buffer, or a sparse
            index out of range.
        """
        key = (int(index) if _is_int(index) else -1, as_float)
        cached = self._accessor_cache.get(key)
        if cached is not None:
            return cached
        info = self.accessor_info(index, where, semantic)
        acc = info["accessor"]
        ctype, type_name, count = info["component_type"], info["type"], info["count"]
        dtype = COMPONENT_DTYPES[ctype]
        n_comp, column_bytes, column_stride, elem_size = element_layout(ctype, type_name)
        cols, rows = ELEMENT_SHAPES[type_name]
        if info["view"] is not None:
            view_index, buffer_index, view_offset, stride = info["view"]
            data = self.buffer(buffer_index, f"bufferViews[{view_index}]")
            comp = dtype.itemsize
            if cols == 1:
                shape, strides = (count, rows), (stride, comp)
            else:
                shape, strides = (count, cols, rows), (stride, column_stride, comp)
            raw = np.ndarray(shape, dtype=dtype, buffer=data, offset=view_offset + info["byte_offset"],
                             strides=strides)
            values = np.array(raw, dtype=dtype.newbyteorder("="), order="C", copy=True)
        else:
            shape = (count, rows) if cols == 1 else (count, cols, rows)
            values = np.zeros(shape, dtype=dtype.newbyteorder("="))

        if "sparse" in acc:
            self._apply_sparse(acc, values, info, where)

        if type_name == "SCALAR":
            values = values.reshape(count)
        if as_float:
            if info["normalized"]:
                values = normalized_to_float(values, ctype)
            else:
                values = values.astype(np.float32)
        values = np.ascontiguousarray(values)
        values.flags.writeable = False
        self._accessor_cache[key] = values
        return values

    def _apply_sparse(self, acc: dict, values: np.ndarray, info: dict, where: str) -> None:
        """Substitute ``accessor.sparse`` values into ``values`` in place (§3.6.2.3)."""
        label, count = info["label"], info["count"]
        sw = f"accessors[{info['index']}].sparse"
        sparse = acc["sparse"]
        if not isinstance(sparse, dict):
            raise self.error(sw, f"must be an object, got {_kind(sparse)}")
        n = self.int_field(sparse, "count", sw, minimum=1, maximum=count)
        indices = self.dict_field(sparse, "indices", sw)
        vals = self.dict_field(sparse, "values", sw)
        if not indices or not vals:
            raise self.error(sw, "indices and values are required")
        iw, vw = sw + ".indices", sw + ".values"
        ictype = self.int_field(indices, "componentType", iw)
        if ictype not in SPARSE_INDEX_TYPES:
            raise self.error(iw, f"componentType {ictype} is not 5121, 5123 or 5125")
        idx = self._read_packed(indices, iw, where, label, COMPONENT_DTYPES[ictype], (n,))
        if idx.size and int(idx.max()) >= count:
            bad = int(np.argmax(idx >= count))
            raise self.error(
                where,
                f"{label}: sparse index {int(idx[bad])} (entry {bad}) is out of range (count {count})",
            )
        sub = self._read_packed(vals, vw, where, label, values.dtype, (n,) + values.shape[1:],
                                ctype=info["component_type"], type_name=info["type"])
        values[idx.astype(np.int64)] = sub

    def _read_packed(self, obj: dict, ow: str, where: str, label: str, dtype: np.dtype, shape,
                     ctype=None, type_name="SCALAR") -> np.ndarray:
        """Read tightly packed sparse indices or values (their bufferViews have no stride)."""
        view_index = self.int_field(obj, "bufferView", ow, minimum=0)
        offset = self.int_field(obj, "byteOffset", ow, default=0, minimum=0)
        _, buffer_index, view_offset, view_length, _ = self._view(view_index, where, label)
        if ctype is not None and type_name.startswith("MAT"):
            _, _, _, elem = element_layout(ctype, type_name)
            if elem != math.prod(shape[1:]) * dtype.itemsize:  # padded matrix columns
                raise self.error(ow, "sparse values of padded matrix types are not supported")
        needed = offset + math.prod(shape) * dtype.itemsize
        if needed > view_length:
            raise self.error(
                where,
                f"{label}: {ow.rsplit('.', 1)[-1]} read past the end of bufferView {view_index} "
                f"(need {needed} bytes, the view has {view_length})",
            )
        data = self.buffer(buffer_index, f"bufferViews[{view_index}]")
        raw = np.ndarray(shape, dtype=dtype.newbyteorder("<") if dtype.itemsize > 1 else dtype,
                         buffer=data, offset=view_offset + offset)
        return np.array(raw, dtype=dtype.newbyteorder("="), copy=True)


def _is_int(value) -> bool:
    if isinstance(value, bool):
        return False
    if isinstance(value, int):
        return True
    return isinstance(value, float) and math.isfinite(value) and value.is_integer()


def _is_number(value) -> bool:
    return not isinstance(value, bool) and isinstance(value, (int, float)) and math.isfinite(value)


def _kind(value) -> str:
    return {dict: "an object", list: "an array", str: "a string", bool: "a boolean"}.get(
        type(value), "null" if value is None else "a number"
    )


def _show(value, limit: int = 40) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."
