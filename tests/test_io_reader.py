"""The front door, bladesolid.io.read_mesh: units, formats, bodies, and anything thrown at it.

Besides the hand-made cases, hypothesis feeds random bytes and mutated valid files of every
format to the loader: each must load or raise InputError with one line naming the file,
nothing else. Reference values: closed-form volumes of boxes, trimesh's volumes (reference
library).
"""

from __future__ import annotations

import meshio
import numpy as np
import pytest
import trimesh
from hypothesis import given, settings
from hypothesis import strategies as st

from bladesolid.errors import InputError
from bladesolid.io import LoadedMesh, read_mesh, write_surface

from .iohelp import EXTENSIONS, box, refused, sphere, surface_volume, tets, write_surface_as


def test_units_scaling_1000_mm_cube_is_1_m(tmp_path):
    path = tmp_path / "cube.stl"
    write_surface_as(box((1000.0, 1000.0, 1000.0), (500.0, 500.0, 500.0)), path, "stl-binary")
    body = read_mesh(path, "mm").bodies[0]
    assert body.vertices.min(axis=0) == pytest.approx([0, 0, 0])
    assert body.vertices.max(axis=0) == pytest.approx([1, 1, 1])
    assert surface_volume(body) == pytest.approx(1.0)  # 1000 mm cube = 1 m³ (closed form)


@pytest.mark.parametrize("unit,scale", [("mm", 1e-3), ("cm", 1e-2), ("m", 1.0),
                                        ("in", 0.0254), ("ft", 0.3048)])
def test_every_unit_scales_exactly(tmp_path, unit, scale):
    # 1 in = 25.4 mm and 1 ft = 12 in exactly (international yard and pound, 1959)
    path = tmp_path / "box.obj"
    write_surface_as(box((2.0, 3.0, 4.0), (1.0, 1.5, 2.0)), path, "obj")
    body = read_mesh(path, unit).bodies[0]
    assert body.vertices.max(axis=0) == pytest.approx(np.array([2.0, 3.0, 4.0]) * scale)


def test_unknown_unit_is_refused(tmp_path):
    path = tmp_path / "box.stl"
    write_surface_as(box(), path, "stl-binary")
    with pytest.raises(InputError) as err:
        read_mesh(path, "furlong")
    assert str(err.value).startswith(str(path)) and "mm" in str(err.value)


def test_unknown_extension(tmp_path):
    path = tmp_path / "blade.dxf"
    path.write_text("0\nSECTION\n")
    text = refused(path, "unknown mesh format '.dxf'")
    assert "or a CAD file (.step, .stp, .iges, .igs, .brep)" in text


def test_cad_files_go_to_the_cad_reader(tmp_path, monkeypatch):
    # read_mesh hands STEP/IGES/BREP to bladesolid.cad.read_cad, with the units (None: the
    # file's own) and the chord tolerance, and returns its bodies with the model as ``cad``
    from bladesolid import cad

    seen = {}

    class Model:
        file_format = "STEP"

        def loaded_mesh(self):
            return LoadedMesh(str(path), "in", (), (), "STEP", cad=self)

    def fake(source, units, *, cad_tolerance=None, max_bytes=None):
        seen.update(source=source, units=units, cad_tolerance=cad_tolerance)
        return Model()

    monkeypatch.setattr(cad, "read_cad", fake)
    path = tmp_path / "blade.STP"
    loaded = read_mesh(path, None, cad_tolerance=1e-4)
    assert seen == {"source": str(path), "units": None, "cad_tolerance": 1e-4}
    assert loaded.units == "in" and isinstance(loaded.cad, Model)
    # a truncated STEP file is refused by the CAD reader itself
    monkeypatch.undo()
    bad = tmp_path / "cut.step"
    bad.write_text("ISO-10303-21;\nDATA;\n")
    refused(bad, "STEP file is truncated")


def test_a_mesh_without_units_is_refused(tmp_path):
    path = tmp_path / "tet.stl"
    write_surface(path, np.array([[0, 0, 0], [10, 0, 0], [0, 10, 0], [0, 0, 10]], float),
                  np.array([[0, 2, 1], [0, 1, 3], [1, 2, 3], [0, 3, 2]]))
    with pytest.raises(InputError, match="no length unit given"):
        read_mesh(path, None)


def test_two_bodies_in_one_file_in_file_order(tmp_path):
    # docs/CONVENTIONS.md §8: bodies are numbered in file order, the order densities are given in
    small = box((10.0, 10.0, 10.0), (0.0, 0.0, 0.0))
    big = sphere(radius=50.0, centre=(200.0, 0.0, 0.0))
    for first, second, name in ((small, big, "small-first"), (big, small, "big-first")):
        path = tmp_path / f"{name}.stl"
        write_surface_as(trimesh.util.concatenate([first, second]), path, "stl-binary")
        loaded = read_mesh(path, "mm")
        assert [b.name for b in loaded.bodies] == ["body 1", "body 2"]
        assert surface_volume(loaded.bodies[0]) == pytest.approx(first.volume * 1e-9, rel=1e-6)
        assert surface_volume(loaded.bodies[1]) == pytest.approx(second.volume * 1e-9, rel=1e-6)
    assert len(loaded.bodies[1].vertices) == 8  # each body holds only its own vertices


def test_equal_bodies_ordered_by_first_face(tmp_path):
    a = box((10.0, 10.0, 10.0), (0.0, 0.0, 0.0))
    b = box((10.0, 10.0, 10.0), (50.0, 0.0, 0.0))
    path = tmp_path / "two.obj"
    write_surface_as(trimesh.util.concatenate([b, a]), path, "obj")
    first, second = read_mesh(path, "mm").bodies
    assert first.vertices[:, 0].mean() == pytest.approx(0.050)
    assert second.vertices[:, 0].mean() == pytest.approx(0.0)


@pytest.mark.parametrize("ext", EXTENSIONS)
def test_random_bytes_with_mesh_extension(tmp_path, ext):
    rng = np.random.default_rng(sum(map(ord, ext)))
    for k in range(3):
        path = tmp_path / f"random{k}{ext}"
        path.write_bytes(rng.integers(0, 256, size=[100, 1000, 5000][k], dtype=np.uint8).tobytes())
        refused(path)


def seed_files(directory):
    """Small valid files of every format (bytes by extension name)."""
    s = trimesh.creation.icosphere(subdivisions=1, radius=10.0)
    seeds = {
        "bin.stl": trimesh.exchange.stl.export_stl(s),
        "ascii.stl": trimesh.exchange.stl.export_stl_ascii(s).encode(),
        "x.obj": s.export(file_type="obj").encode(),
        "x.ply": s.export(file_type="ply"),
        "x.off": s.export(file_type="off").encode(),
    }
    nodes, elems = tets()
    m = meshio.Mesh(nodes, [("tetra", elems)])
    for name, kw in {
        "a22.msh": dict(file_format="gmsh22", binary=False),
        "b41.msh": dict(file_format="gmsh", binary=True),
        "x.vtu": dict(file_format="vtu"),
        "x.inp": dict(file_format="abaqus"),
    }.items():
        p = directory / name
        meshio.write(str(p), m, **kw)
        seeds[name] = p.read_bytes()
    return seeds


@pytest.fixture(scope="module")
def fuzz_dir(tmp_path_factory):
    d = tmp_path_factory.mktemp("fuzz")
    return d, seed_files(d)


def load_or_refuse(path):
    try:
        read_mesh(path, "mm")
    except InputError as exc:
        text = str(exc)
        assert text.startswith(str(path) + ": ") and "\n" not in text, text


@settings(max_examples=60, deadline=None)
@given(data=st.binary(min_size=0, max_size=3000), ext=st.sampled_from(EXTENSIONS))
def test_fuzz_random_bytes(fuzz_dir, data, ext):
    d, _ = fuzz_dir
    path = d / f"random{ext}"
    path.write_bytes(data)
    load_or_refuse(path)


@settings(max_examples=60, deadline=None)
@given(
    name=st.sampled_from(["bin.stl", "ascii.stl", "x.obj", "x.ply", "x.off",
                          "a22.msh", "b41.msh", "x.vtu", "x.inp"]),
    edits=st.lists(st.tuples(st.floats(0, 1, exclude_max=True), st.integers(0, 255)),
                   max_size=8),
    cut=st.one_of(st.none(), st.floats(0, 1)),
)
def test_fuzz_mutated_valid_files(fuzz_dir, name, edits, cut):
    d, seeds = fuzz_dir
    data = bytearray(seeds[name])
    for where, byte in edits:
        data[int(where * len(data))] = byte
    if cut is not None:
        data = data[: int(cut * len(data))]
    path = d / f"mutated_{name}"
    path.write_bytes(bytes(data))
    load_or_refuse(path)
