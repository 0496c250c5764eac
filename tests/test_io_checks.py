"""Checks of bladesolid.io: arrays, faces, edges, shells, tetrahedra, overlaps between bodies, size.

Each bad solid is refused with one line naming the file and where the problem lies; what can
be fixed (an inside-out shell) is fixed with a warning. References: numpy.unique and
scipy.sparse.csgraph (reference libraries) for the vertex merge and the components,
manifold3d's and trimesh's volumes.
"""

from __future__ import annotations

import meshio
import numpy as np
import pytest
import trimesh

from bladesolid.io import merge_coincident, read_mesh

from .iohelp import box, box_arrays, refused, sphere, stl, surface_volume, tets, write_surface_as


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


def test_nan_coordinates(tmp_path):
    v, f = box_arrays()
    v[[0, 3]] = np.nan
    path = tmp_path / "nan.obj"
    trimesh.Trimesh(v, f, process=False).export(str(path))
    refused(path, "2 vertices have non-finite coordinates (2 NaN, 0 infinite)")


def test_inf_coordinates_binary_stl(tmp_path):
    v, f = box_arrays()
    v[1, 2] = np.inf
    path = stl(tmp_path, "inf.stl", v, f)
    text = refused(path, "non-finite coordinates")
    assert "0 NaN" in text and "infinite" in text


def test_absurd_coordinates(tmp_path):
    v, f = box_arrays()
    v *= 1e35
    path = stl(tmp_path, "huge.stl", v, f)
    refused(path, "km from the origin")


def test_open_surface_box_with_one_face_removed(tmp_path):
    v, f = box_arrays()
    path = stl(tmp_path, "open.stl", v, f[2:])  # drop both triangles of one side
    text = refused(path, "open surface: 4 boundary edges")
    assert " mm" in text  # located in the declared unit


def test_non_manifold_two_cubes_sharing_an_edge(tmp_path):
    v1, f1 = box_arrays(centre=(0, 0, 0))
    v2, f2 = box_arrays(centre=(10, 10, 0))  # shares the edge x = y = 5
    v = np.vstack([v1, v2])
    f = np.vstack([f1, f2 + len(v1)])
    path = stl(tmp_path, "edge.stl", v, f)
    text = refused(path, "non-manifold surface: 1 edges are shared by more than two faces")
    assert "(5, 5, 0)" in text  # the shared edge's centre, mm


def test_non_manifold_fin(tmp_path):
    v, f = box_arrays()
    # a fin: one triangle hanging off the top edge y = 5, z = 5
    a = np.flatnonzero((v[:, 1] == 5) & (v[:, 2] == 5))
    v = np.vstack([v, [[0.0, 12.0, 12.0]]])
    f = np.vstack([f, [[a[0], a[1], len(v) - 1]]])
    path = stl(tmp_path, "fin.stl", v, f)
    refused(path, "non-manifold")


def test_inconsistent_winding_one_face_flipped(tmp_path):
    v, f = box_arrays()
    f = f.copy()
    f[5] = f[5, [0, 2, 1]]
    path = tmp_path / "flip.off"
    trimesh.Trimesh(v, f, process=False).export(str(path))
    refused(path, "inconsistent winding: 3 edges are traversed the same way")


def test_zero_volume_flat_closed_surface(tmp_path):
    # a tetrahedron squashed flat: apex in the plane of its base, inside it; closed, wound
    # consistently, every face with area, but no volume
    v = np.array([[0, 0, 0], [10, 0, 0], [0, 10, 0], [3, 3, 0]], float)
    f = np.array([[0, 2, 1], [0, 1, 3], [1, 2, 3], [2, 0, 3]])
    path = stl(tmp_path, "flat.stl", v, f)
    refused(path, "zero volume")


def test_degenerate_collinear_face(tmp_path):
    v, f = box_arrays()
    # split face 0 = (a, b, c) at the midpoint m of edge ab and close the T-junction with the
    # zero-area face (a, b, m): closed, consistently wound, one degenerate face
    a, b, c = f[0]
    v = np.vstack([v, 0.5 * (v[a] + v[b])])
    m = len(v) - 1
    f = np.vstack([f[1:], [[a, m, c], [m, b, c], [a, b, m]]])
    path = stl(tmp_path, "sliver.stl", v, f)
    refused(path, "1 degenerate faces (zero area: 0 with a repeated vertex, 1 with collinear")


def test_degenerate_repeated_vertex_face(tmp_path):
    v, f = box_arrays()
    f = np.vstack([f, [[0, 0, 1]]])
    path = tmp_path / "rep.obj"
    trimesh.Trimesh(v, f, process=False).export(str(path))
    refused(path, "with a repeated vertex")


def test_face_index_out_of_range(tmp_path):
    path = tmp_path / "bad.obj"
    path.write_text("v 0 0 0\nv 1 0 0\nv 0 1 0\nf 1 2 3\nf 1 2 9\n")
    refused(path)


def test_two_overlapping_bodies(tmp_path):
    v1, f1 = box_arrays(centre=(0, 0, 0))
    v2, f2 = box_arrays(centre=(5, 0, 0))
    path = stl(tmp_path, "overlap.stl", np.vstack([v1, v2]), np.vstack([f1, f2 + 8]))
    text = refused(path, "body 1 and body 2 overlap")
    assert "500 mm^3" in text and "50 %" in text  # half of a 10 mm cube (closed form)


def test_nested_bodies_are_an_insert_not_an_overlap(tmp_path):
    # a shell wound outward inside another is an insert (docs/CONVENTIONS.md §8; more cases in
    # test_io_bodies.py): no overlap refusal, the host's material excludes the insert's volume
    v1, f1 = box_arrays((40.0, 40.0, 40.0))
    v2, f2 = box_arrays((10.0, 10.0, 10.0))
    path = stl(tmp_path, "nested.stl", np.vstack([v1, v2]), np.vstack([f1, f2 + 8]))
    host, insert = read_mesh(path, "mm").bodies
    assert insert.host == "body 1" and surface_volume(host) == pytest.approx((40.0**3 - 10.0**3) * 1e-9, rel=1e-12)


def test_too_many_bodies(tmp_path):
    v0, f0 = box_arrays((1.0, 1.0, 1.0))
    vs = [v0 + [3.0 * i, 0, 0] for i in range(101)]
    fs = [f0 + 8 * i for i in range(101)]
    path = stl(tmp_path, "many.stl", np.vstack(vs), np.vstack(fs))
    refused(path, "101 separate closed shells")


def test_overlapping_tetrahedra(tmp_path):
    nodes, elems = tets()
    path = tmp_path / "dup.vtu"
    meshio.write(str(path), meshio.Mesh(nodes, [("tetra", np.vstack([elems, elems[:1]]))]))
    refused(path, "tetrahedra")


def test_zero_volume_tetrahedron(tmp_path):
    nodes, elems = tets()
    bad = np.vstack([elems, [[0, 0, 1, 2]]])
    path = tmp_path / "flat.inp"
    meshio.write(str(path), meshio.Mesh(nodes, [("tetra", bad)]), file_format="abaqus")
    refused(path, "zero volume")
