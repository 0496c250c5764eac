"""Surface formats of bladesolid.io: STL (ASCII and binary), OBJ, PLY, OFF.

Round trips through every format against trimesh's own volume of the mesh written (reference
library); binary STL headers that lie are refused before anything is allocated.
"""

from __future__ import annotations

import struct
import tracemalloc

import numpy as np
import pytest
import trimesh

from bladesolid.io import LoadedMesh, read_mesh

from .iohelp import SURFACE_KINDS, box, box_arrays, refused, sphere, stl, surface_volume, write_surface_as


@pytest.mark.parametrize("kind", list(SURFACE_KINDS))
def test_surface_round_trip(tmp_path, kind):
    ref = sphere()
    path = tmp_path / f"blade.{SURFACE_KINDS[kind]}"
    write_surface_as(ref, path, kind)
    loaded = read_mesh(path, "mm")
    assert isinstance(loaded, LoadedMesh)
    assert loaded.path == str(path) and loaded.units == "mm"
    assert [b.name for b in loaded.bodies] == ["body 1"]
    body = loaded.bodies[0]
    assert body.tets is None
    assert body.vertices.dtype == np.float64 and body.faces.dtype == np.int64
    # coincident corners merged back to the 642 vertices of a level-2 icosphere
    assert len(body.vertices) == len(ref.vertices) and len(body.faces) == len(ref.faces)
    # trimesh (reference library) volume of what was written, mm³ -> m³; STL stores float32
    assert surface_volume(body) == pytest.approx(ref.volume * 1e-9, rel=1e-6)
    assert trimesh.Trimesh(body.vertices, body.faces).is_watertight
    assert loaded.warnings == ()


def test_binary_stl_header_starting_with_solid_is_binary(tmp_path):
    # binary files whose 80-byte header starts with "solid" exist in the wild (from memory)
    data = bytearray(trimesh.exchange.stl.export_stl(box()))
    data[:80] = b"solid exported by a CAD tool".ljust(80, b" ")
    path = tmp_path / "b.stl"
    path.write_bytes(bytes(data))
    loaded = read_mesh(path, "mm")
    assert loaded.file_format == "binary STL"
    assert surface_volume(loaded.bodies[0]) == pytest.approx(100 * 200 * 300 * 1e-9)


def test_ascii_garbage_with_stl_extension(tmp_path):
    path = tmp_path / "garbage.stl"
    path.write_text("this is not a mesh, just words\n" * 20)
    refused(path, "STL")


def test_ascii_stl_without_facets(tmp_path):
    path = tmp_path / "nofacets.stl"
    path.write_text("solid empty\nendsolid empty\n")
    refused(path, "no triangles")


def test_other_format_with_stl_extension_is_named(tmp_path):
    path = tmp_path / "really_ply.stl"
    path.write_bytes(trimesh.creation.box().export(file_type="ply"))
    refused(path, "looks like PLY")


def test_truncated_binary_stl(tmp_path):
    v, f = box_arrays()
    path = stl(tmp_path, "t.stl", v, f)
    data = path.read_bytes()
    path.write_bytes(data[:-30])  # 12 triangles claimed, 11.4 present
    refused(path, "claims 12 triangles but the file holds 11")


def test_binary_stl_claiming_4_billion_triangles_refused_without_allocating(tmp_path):
    path = tmp_path / "liar.stl"
    path.write_bytes(b"\0" * 80 + struct.pack("<I", 0xFFFFFFFF) + b"\1" * (12 * 50))
    tracemalloc.start()
    try:
        text = refused(path, "claims 4294967295 triangles but the file holds 12")
    finally:
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
    assert peak < 1_000_000, peak  # 4e9 triangles would be 200 GB; nothing like it allocated
    assert "84-byte header" in text


def test_binary_stl_with_zero_triangles(tmp_path):
    path = tmp_path / "zero.stl"
    path.write_bytes(b"\0" * 80 + struct.pack("<I", 0))
    refused(path, "no triangles")
