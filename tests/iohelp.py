"""Meshes and checks shared by the tests of bladesolid.io (written here, in memory or tmp_path).

Reference values come from outside bladesolid: trimesh's own volumes of the meshes written
(reference library), TetGen's tetrahedra of them, and closed-form volumes of boxes.
"""

from __future__ import annotations

import meshio
import numpy as np
import pytest
import trimesh

from bladesolid.errors import InputError
from bladesolid.io import Body, read_mesh, write_surface


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


def tet_meshio(nodes, elems, **kw):
    return meshio.Mesh(nodes, [("tetra", elems)], **kw)


VOLUME_WRITERS = {
    "gmsh22-ascii": ("msh", lambda p, m: meshio.write(p, m, file_format="gmsh22", binary=False)),
    "gmsh41-binary": ("msh", lambda p, m: meshio.write(p, m, file_format="gmsh", binary=True)),
    "vtu": ("vtu", lambda p, m: meshio.write(p, m, file_format="vtu")),
    "inp": ("inp", lambda p, m: meshio.write(p, m, file_format="abaqus")),
}


EXTENSIONS = (".stl", ".obj", ".ply", ".off", ".msh", ".vtu", ".inp")


def refused(path, match=None, units="mm", **kw) -> str:
    """Assert read_mesh refuses the file with a one-line message starting with its path."""
    with pytest.raises(InputError) as err:
        read_mesh(path, units, **kw)
    text = str(err.value)
    assert text.startswith(str(path) + ": "), text
    assert "\n" not in text and "\r" not in text, text
    if match is not None:
        assert match in text, text
    return text


def box_arrays(extents=(10.0, 10.0, 10.0), centre=(0.0, 0.0, 0.0)):
    b = trimesh.creation.box(extents=extents)
    b.apply_translation(centre)
    return np.asarray(b.vertices, float), np.asarray(b.faces, np.int64)


def stl(tmp_path, name, vertices, faces):
    path = tmp_path / name
    write_surface(path, vertices, faces)
    return path


def tets():
    import tetgen

    s = trimesh.creation.icosphere(subdivisions=1, radius=10.0)
    nodes, elems = tetgen.TetGen(s.vertices, s.faces).tetrahedralize()[:2]
    return np.asarray(nodes, float), np.asarray(elems, np.int64)
