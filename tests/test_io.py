"""Reading blade solids: round trips through every format, units, bodies, warnings.

Reference values come from outside bladesolid: trimesh's own mass properties of the mesh that
was written (reference library), and closed-form volumes of boxes.
"""

from __future__ import annotations

import numpy as np
import pytest

from bladesolid.errors import InputError
from bladesolid.io import Body, LoadedMesh, merge_coincident, read_mesh

trimesh = pytest.importorskip("trimesh")
meshio = pytest.importorskip("meshio")


# --------------------------------------------------------------------------- helpers


def sphere(radius=100.0, subdivisions=2, centre=(0.0, 0.0, 0.0)):
    s = trimesh.creation.icosphere(subdivisions=subdivisions, radius=radius)
    s.apply_translation(centre)
    return s


def box(extents=(100.0, 200.0, 300.0), centre=(0.0, 0.0, 0.0)):
    b = trimesh.creation.box(extents=extents)
    b.apply_translation(centre)
    return b


def surface_volume(body: Body) -> float:
    """Enclosed volume by trimesh (reference library) of a body's boundary, m³."""
    return float(trimesh.Trimesh(body.vertices, body.faces, process=False).volume)


def tet_volume(body: Body) -> float:
    p, t = body.vertices, body.tets
    a = p[t[:, 0]]
    d = np.einsum("ij,ij->i", p[t[:, 1]] - a, np.cross(p[t[:, 2]] - a, p[t[:, 3]] - a))
    assert (d > 0).all(), "tetrahedra must be positively oriented"
    return float(d.sum() / 6.0)


def tetrahedralise(mesh):
    import tetgen

    nodes, elems = tetgen.TetGen(mesh.vertices, mesh.faces).tetrahedralize()[:2]
    return np.asarray(nodes, float), np.asarray(elems, np.int64)


def write_surface_as(mesh, path, kind):
    if kind == "stl-ascii":
        path.write_text(trimesh.exchange.stl.export_stl_ascii(mesh))
    elif kind == "stl-binary":
        path.write_bytes(trimesh.exchange.stl.export_stl(mesh))
    else:
        mesh.export(str(path), file_type=kind)


SURFACE_KINDS = {"stl-ascii": "stl", "stl-binary": "stl", "obj": "obj", "ply": "ply", "off": "off"}


# --------------------------------------------------------------------------- surfaces


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


def test_two_bodies_in_one_file_by_descending_volume(tmp_path):
    small = box((10.0, 10.0, 10.0), (0.0, 0.0, 0.0))
    big = sphere(radius=50.0, centre=(200.0, 0.0, 0.0))
    path = tmp_path / "two.stl"
    write_surface_as(trimesh.util.concatenate([small, big]), path, "stl-binary")
    loaded = read_mesh(path, "mm")
    assert [b.name for b in loaded.bodies] == ["body 1", "body 2"]
    assert surface_volume(loaded.bodies[0]) == pytest.approx(big.volume * 1e-9, rel=1e-6)
    assert surface_volume(loaded.bodies[1]) == pytest.approx(1000 * 1e-9, rel=1e-6)
    assert len(loaded.bodies[1].vertices) == 8  # each body holds only its own vertices


def test_equal_bodies_ordered_by_first_face(tmp_path):
    a = box((10.0, 10.0, 10.0), (0.0, 0.0, 0.0))
    b = box((10.0, 10.0, 10.0), (50.0, 0.0, 0.0))
    path = tmp_path / "two.obj"
    write_surface_as(trimesh.util.concatenate([b, a]), path, "obj")
    first, second = read_mesh(path, "mm").bodies
    assert first.vertices[:, 0].mean() == pytest.approx(0.050)
    assert second.vertices[:, 0].mean() == pytest.approx(0.0)


def test_inside_out_body_is_flipped_with_warning(tmp_path):
    inv = box()
    inv.invert()
    path = tmp_path / "inv.stl"
    write_surface_as(inv, path, "stl-binary")
    loaded = read_mesh(path, "mm")
    assert surface_volume(loaded.bodies[0]) == pytest.approx(100 * 200 * 300 * 1e-9)
    assert len(loaded.warnings) == 1 and "inside out" in loaded.warnings[0]


def test_touching_bodies_are_accepted(tmp_path):
    # two cubes sharing a whole face, as two solids of one ASCII STL (a sheath on a blade)
    a = box((10.0, 10.0, 10.0), (0.0, 0.0, 0.0))
    b = box((10.0, 10.0, 10.0), (10.0, 0.0, 0.0))
    text = trimesh.exchange.stl.export_stl_ascii(a) + trimesh.exchange.stl.export_stl_ascii(b)
    path = tmp_path / "touch.stl"
    path.write_text(text)
    loaded = read_mesh(path, "mm")
    assert len(loaded.bodies) == 2


def test_bodies_with_overlapping_boxes_but_apart_are_accepted(tmp_path):
    # the boxes overlap in [9, 10]^3 mm but the cube corner lies outside the sphere
    s = sphere(radius=10.0, subdivisions=3)
    c = box((3.0, 3.0, 3.0), (10.5, 10.5, 10.5))
    path = tmp_path / "apart.ply"
    write_surface_as(trimesh.util.concatenate([s, c]), path, "ply")
    assert len(read_mesh(path, "mm").bodies) == 2


def test_implausibly_long_for_declared_unit_warns_with_better_unit(tmp_path):
    path = tmp_path / "blade.stl"
    write_surface_as(box((2000.0, 150.0, 40.0)), path, "stl-binary")
    loaded = read_mesh(path, "m")  # 2000 m long: really mm
    assert len(loaded.warnings) == 1
    w = loaded.warnings[0]
    assert "2000 m long" in w and "did you mean --units mm" in w
    assert "\n" not in w


def test_implausibly_short_for_declared_unit_warns(tmp_path):
    path = tmp_path / "blade.off"
    write_surface_as(box((1.2, 0.15, 0.04)), path, "off")
    w = read_mesh(path, "mm").warnings  # 1.2 mm: really m
    assert len(w) == 1 and "short" in w[0] and "--units m " in w[0]
    assert read_mesh(path, "m").warnings == ()


def test_merge_coincident_is_exact():
    v = np.array([[0.0, 0, 0], [1, 0, 0], [1 + 1e-15, 0, 0], [-0.0, 0, 0]])
    out, f = merge_coincident(v, np.array([[0, 1, 2], [3, 2, 1]]))
    assert len(out) == 3  # 1 and 1+1e-15 stay apart, 0 and -0 merge
    assert f.tolist() == [[0, 1, 2], [0, 2, 1]]


def test_merge_coincident_matches_numpy_unique_on_many_points():
    rng = np.random.default_rng(1)
    pts = rng.integers(0, 20, size=(5000, 3)).astype(np.float64) * 0.1
    out, f = merge_coincident(pts, np.arange(4998).reshape(-1, 3))
    assert len(out) == len(np.unique(pts, axis=0))
    assert np.array_equal(out[f], pts[:4998].reshape(-1, 3, 3))


# --------------------------------------------------------------------------- volume meshes


def tet_meshio(nodes, elems, **kw):
    return meshio.Mesh(nodes, [("tetra", elems)], **kw)


VOLUME_WRITERS = {
    "gmsh22-ascii": ("msh", lambda p, m: meshio.write(p, m, file_format="gmsh22", binary=False)),
    "gmsh41-binary": ("msh", lambda p, m: meshio.write(p, m, file_format="gmsh", binary=True)),
    "vtu": ("vtu", lambda p, m: meshio.write(p, m, file_format="vtu")),
    "inp": ("inp", lambda p, m: meshio.write(p, m, file_format="abaqus")),
}


@pytest.mark.parametrize("kind", list(VOLUME_WRITERS))
def test_volume_round_trip(tmp_path, kind):
    ref = sphere(radius=100.0, subdivisions=2)
    nodes, elems = tetrahedralise(ref)
    ext, write = VOLUME_WRITERS[kind]
    path = tmp_path / f"blade.{ext}"
    write(str(path), tet_meshio(nodes, elems))
    loaded = read_mesh(path, "mm")
    assert [b.name for b in loaded.bodies] == ["body 1"]
    body = loaded.bodies[0]
    assert body.tets.shape == elems.shape
    # sum of tetrahedra = enclosed volume of the outward boundary (divergence theorem) and
    # = trimesh's volume of the surface that was tetrahedralised (reference library)
    assert tet_volume(body) == pytest.approx(surface_volume(body), rel=1e-12)
    assert tet_volume(body) == pytest.approx(ref.volume * 1e-9, rel=1e-9)
    assert len(body.faces) == len(ref.faces)
    assert loaded.warnings == ()


def test_volume_mesh_negative_tets_are_reordered(tmp_path):
    nodes, elems = tetrahedralise(sphere(radius=100.0, subdivisions=1))
    path = tmp_path / "neg.vtu"
    meshio.write(str(path), tet_meshio(nodes, elems[:, [1, 0, 2, 3]]))
    loaded = read_mesh(path, "mm")
    assert tet_volume(loaded.bodies[0]) > 0
    assert any("negative orientation" in w for w in loaded.warnings)


def test_volume_mesh_physical_groups_are_bodies(tmp_path):
    a = sphere(radius=100.0, subdivisions=1)
    b = sphere(radius=30.0, subdivisions=1, centre=(300.0, 0.0, 0.0))
    na, ea = tetrahedralise(a)
    nb, eb = tetrahedralise(b)
    nodes = np.vstack([na, nb])
    elems = np.vstack([ea, eb + len(na)])
    tags = np.r_[np.full(len(ea), 7), np.full(len(eb), 3)]
    mesh = meshio.Mesh(
        nodes,
        [("tetra", elems)],
        cell_data={"gmsh:physical": [tags], "gmsh:geometrical": [tags]},
        field_data={"blade": np.array([7, 3]), "sheath": np.array([3, 3])},
    )
    path = tmp_path / "groups.msh"
    meshio.write(str(path), mesh, file_format="gmsh22", binary=False)
    loaded = read_mesh(path, "mm")
    assert [(b.name, b.group) for b in loaded.bodies] == [("body 1", "blade"), ("body 2", "sheath")]
    assert tet_volume(loaded.bodies[1]) == pytest.approx(b.volume * 1e-9, rel=1e-9)
    assert loaded.bodies[1].tets.max() < len(loaded.bodies[1].vertices)


def test_volume_mesh_conformal_groups_share_a_face(tmp_path):
    # two halves of one tetrahedralised box split by x < 0: a conformal interface
    nodes, elems = tetrahedralise(box((100.0, 100.0, 100.0)))
    x = nodes[elems].mean(axis=1)[:, 0]
    sets = {"left": [np.flatnonzero(x < 0).astype(np.int32)],
            "right": [np.flatnonzero(x >= 0).astype(np.int32)]}
    path = tmp_path / "halves.inp"
    meshio.write(str(path), meshio.Mesh(nodes, [("tetra", elems)], cell_sets=sets),
                 file_format="abaqus")
    loaded = read_mesh(path, "mm")
    assert sorted(b.group for b in loaded.bodies) == ["left", "right"]
    total = sum(tet_volume(b) for b in loaded.bodies)
    assert total == pytest.approx(1e-3, rel=1e-12)  # 100 mm cube (closed form)
    for b in loaded.bodies:  # each half's boundary is closed and encloses its tetrahedra
        assert surface_volume(b) == pytest.approx(tet_volume(b), rel=1e-12)


def test_tetra10_read_by_corners_with_warning(tmp_path):
    nodes, elems = tetrahedralise(sphere(radius=100.0, subdivisions=1))
    pairs = [(0, 1), (1, 2), (0, 2), (0, 3), (1, 3), (2, 3)]
    edges = np.sort(np.concatenate([elems[:, list(p)] for p in pairs]), axis=1)
    uniq, inv = np.unique(edges, axis=0, return_inverse=True)
    mid = 0.5 * (nodes[uniq[:, 0]] + nodes[uniq[:, 1]])
    ids = (len(nodes) + inv.reshape(len(pairs), -1).T).astype(np.int64)
    cells10 = np.hstack([elems, ids])
    path = tmp_path / "quad.msh"
    meshio.write(str(path), meshio.Mesh(np.vstack([nodes, mid]), [("tetra10", cells10)]),
                 file_format="gmsh22", binary=False)
    loaded = read_mesh(path, "mm")
    body = loaded.bodies[0]
    assert len(body.vertices) == len(nodes)  # mid-edge nodes are not kept
    assert any("tetra10" in w and "nothing is lost" in w for w in loaded.warnings)


def test_triangles_in_a_volume_container_are_a_surface(tmp_path):
    s = sphere()
    path = tmp_path / "skin.vtu"
    meshio.write(str(path), meshio.Mesh(s.vertices, [("triangle", s.faces)]))
    body = read_mesh(path, "mm").bodies[0]
    assert body.tets is None
    assert surface_volume(body) == pytest.approx(s.volume * 1e-9, rel=1e-12)


def test_hexahedra_are_refused(tmp_path):
    pts = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0],
                    [0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]], float)
    path = tmp_path / "hex.vtu"
    meshio.write(str(path), meshio.Mesh(pts, [("hexahedron", np.arange(8)[None])]))
    with pytest.raises(InputError, match="hexahedron"):
        read_mesh(path, "m")


def test_gmsh_boundary_triangles_beside_tetrahedra_are_ignored(tmp_path):
    # Gmsh output usually carries the tagged boundary triangles next to the tetrahedra
    s = sphere(radius=100.0, subdivisions=1)
    nodes, elems = tetrahedralise(s)
    tri = s.faces
    mesh = meshio.Mesh(
        nodes,
        [("triangle", tri), ("tetra", elems)],
        cell_data={"gmsh:physical": [np.full(len(tri), 1), np.full(len(elems), 2)],
                   "gmsh:geometrical": [np.full(len(tri), 1), np.full(len(elems), 1)]},
        field_data={"skin": np.array([1, 2]), "blade": np.array([2, 3])},
    )
    path = tmp_path / "tagged.msh"
    meshio.write(str(path), mesh, file_format="gmsh22", binary=True)
    loaded = read_mesh(path, "mm")
    assert [(b.name, b.group) for b in loaded.bodies] == [("body 1", "blade")]
    assert tet_volume(loaded.bodies[0]) == pytest.approx(s.volume * 1e-9, rel=1e-9)


def test_components_match_scipy():
    # scipy.sparse.csgraph.connected_components as the reference implementation
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    from bladesolid.io.checks import components as _components

    rng = np.random.default_rng(7)
    for n, e in [(1, 0), (10, 3), (500, 400), (2000, 1990), (3000, 6000)]:
        u, v = rng.integers(0, n, e), rng.integers(0, n, e)
        ours = _components(n, u, v)
        k, ref = connected_components(coo_matrix((np.ones(e), (u, v)), shape=(n, n)),
                                      directed=False)
        assert ours.max() + 1 == k
        # same partition: the label pairs correspond one to one
        assert len(set(zip(ours.tolist(), ref.tolist()))) == k
