"""Accessor decoding against the glTF 2.0 data layout rules (§3.6.2) and normalisation table (§3.11)."""

from __future__ import annotations

import struct

import numpy as np
import pytest

from variantshot.errors import SceneError
from variantshot.geometry.accessors import GltfData, element_layout, normalized_to_float


def make(accessors, views, blob: bytes) -> GltfData:
    doc = {"accessors": accessors, "bufferViews": views, "buffers": [{"byteLength": len(blob)}]}
    return GltfData(doc, "a.gltf", lambda i: blob)


@pytest.mark.parametrize("ctype, raw, expected", [
    # glTF 2.0 §3.11 table: int8 max(c/127, -1), uint8 c/255, int16 max(c/32767, -1), uint16 c/65535
    (5120, np.array([-128, -127, 0, 127], np.int8), [-1.0, -1.0, 0.0, 1.0]),
    (5121, np.array([0, 51, 255], np.uint8), [0.0, 0.2, 1.0]),
    (5122, np.array([-32768, -32767, 0, 32767], np.int16), [-1.0, -1.0, 0.0, 1.0]),
    (5123, np.array([0, 13107, 65535], np.uint16), [0.0, 0.2, 1.0]),
])
def test_normalized_table(ctype, raw, expected):
    out = normalized_to_float(raw, ctype)
    assert out.dtype == np.float32
    np.testing.assert_allclose(out, expected, rtol=1e-7)


@pytest.mark.parametrize("ctype, type_, layout", [
    # glTF 2.0 §3.6.2.4: matrix columns start on 4-byte boundaries
    # (the spec's element sizes: MAT2 of bytes 8, MAT3 of bytes 12, MAT3 of shorts 24)
    (5121, "MAT2", (4, 2, 4, 8)),
    (5121, "MAT3", (9, 3, 4, 12)),
    (5122, "MAT3", (9, 6, 8, 24)),
    (5126, "MAT4", (16, 16, 16, 64)),
    (5126, "VEC3", (3, 12, 12, 12)),
])
def test_element_layout(ctype, type_, layout):
    assert element_layout(ctype, type_) == layout


def test_padded_mat2_of_bytes():
    # two tightly packed MAT2 elements of UNSIGNED_BYTE (columns [a b . .][c d . .]); no byteStride,
    # so the element size 8 is the stride
    blob = bytes([1, 2, 0, 0, 3, 4, 0, 0, 5, 6, 0, 0, 7, 8, 0, 0])
    g = make([{"bufferView": 0, "componentType": 5121, "type": "MAT2", "count": 2}],
             [{"buffer": 0, "byteLength": 16}], blob)
    out = g.read_accessor(0, "skins[0]")
    np.testing.assert_array_equal(out, [[[1, 2], [3, 4]], [[5, 6], [7, 8]]])  # [element, column, row]


def test_stride_extent_is_exact():
    # last element needs only its own 12 bytes, not a whole stride (§3.6.2.4 "byteStride")
    data = np.arange(3 * 8, dtype=np.float32).reshape(3, 8)
    blob = data.tobytes()[: 2 * 32 + 12]
    acc = [{"bufferView": 0, "componentType": 5126, "type": "VEC3", "count": 3}]
    g = make(acc, [{"buffer": 0, "byteLength": len(blob), "byteStride": 32}], blob)
    np.testing.assert_array_equal(g.read_accessor(0, "x"), data[:, :3])
    acc[0]["byteOffset"] = 4
    g = make(acc, [{"buffer": 0, "byteLength": len(blob), "byteStride": 32}], blob)
    with pytest.raises(SceneError, match=r"a\.gltf: x: accessor 0 reads past the end of bufferView 0 \(count 3 needs 80 bytes"):
        g.read_accessor(0, "x")


def test_sparse_before_normalisation_and_read_only_cache():
    base = np.array([0, 0, 0, 0], np.uint8)
    idx = np.array([1, 3], np.uint8)
    val = np.array([255, 51], np.uint8)
    blob = base.tobytes() + idx.tobytes() + val.tobytes()
    g = make([{"bufferView": 0, "componentType": 5121, "type": "SCALAR", "count": 4, "normalized": True,
               "sparse": {"count": 2, "indices": {"bufferView": 1, "componentType": 5121},
                          "values": {"bufferView": 2}}}],
             [{"buffer": 0, "byteLength": 4}, {"buffer": 0, "byteOffset": 4, "byteLength": 2},
              {"buffer": 0, "byteOffset": 6, "byteLength": 2}], blob)
    raw = g.read_accessor(0, "x")
    np.testing.assert_array_equal(raw, [0, 255, 0, 51])
    out = g.read_accessor(0, "x", as_float=True)
    np.testing.assert_allclose(out, [0, 1, 0, 0.2], rtol=1e-7)
    assert out.dtype == np.float32 and out.flags.c_contiguous
    assert not out.flags.writeable  # shared between primitives; the Scene arrays are fresh copies
    assert g.read_accessor(0, "x", as_float=True) is out
    # the decoded array is not a view of the file's bytes
    assert out.base is None or not isinstance(out.base, (bytes, memoryview))


def test_unaligned_and_big_offsets():
    blob = b"\0" + struct.pack("<3f", 1.5, -2.0, 3.25)
    g = make([{"bufferView": 0, "componentType": 5126, "type": "VEC3", "count": 1}],
             [{"buffer": 0, "byteOffset": 1, "byteLength": 12}], blob)
    np.testing.assert_array_equal(g.read_accessor(0, "x"), [[1.5, -2.0, 3.25]])
    g = make([{"bufferView": 0, "componentType": 5126, "type": "VEC3", "count": 1, "byteOffset": 2**40}],
             [{"buffer": 0, "byteLength": 13}], blob)
    with pytest.raises(SceneError, match="reads past the end of bufferView 0"):
        g.read_accessor(0, "x")
