"""Tetrahedral volume formats of bladesolid.io: Gmsh .msh, VTK .vtu, keyword decks of tetrahedra .inp.

Files written by meshio from TetGen's tetrahedra of trimesh spheres (reference libraries); the
sum of the tetrahedra must equal the enclosed volume of the boundary and trimesh's volume.
"""

from __future__ import annotations

import meshio
import numpy as np
import pytest

from bladesolid.errors import InputError
from bladesolid.io import read_mesh

from .iohelp import VOLUME_WRITERS, box, refused, sphere, surface_volume, tet_meshio, tet_volume, tetrahedralise, tets


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


def test_nan_node_in_volume_mesh(tmp_path):
    nodes, elems = tets()
    nodes[elems[0, 0]] = np.nan
    path = tmp_path / "nan.msh"
    meshio.write(str(path), meshio.Mesh(nodes, [("tetra", elems)]), file_format="gmsh22",
                 binary=False)
    refused(path, "non-finite")
