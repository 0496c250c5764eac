"""Geometry blade engineers bring, made here for the tests: damaged surfaces (each family of
self-intersection, an open root), a facet-by-facet CAD export with float noise, hollow bodies and
inserts. Lengths in mm. The builders already used by the tests of one module are imported from
there (one definition each).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import trimesh

from bladesolid.io import stl_bytes, write_surface

from .test_repair import fanned_tip_blade  # noqa: F401 - re-exported: the demo loft with a folded fanned tip cap
from .test_selfintersect import spiked_box
from .test_weld import cad_export  # noqa: F401 - re-exported: facet-by-facet export with float noise

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "meshes" / "demo_blade.stl"


def pierced_box():
    """A 40 x 40 x 20 mm box whose top face is fanned from a vertex pushed down through the
    bottom face (one closed shell whose spike pierces its own bottom). Constructed: the spike
    crosses z = 0 on the quadrilateral apex + (top corner - apex) / 3."""
    apex = np.array([0.1, 0.05, -0.5])
    v, f = spiked_box(apex)
    return v * 20.0, f, apex * 20.0


def folded_sphere():
    """An icosphere of radius 50 mm with one vertex pushed through the far side: the faces
    around it fold through the sphere (one closed shell)."""
    s = trimesh.creation.icosphere(subdivisions=3, radius=50.0)
    v = np.array(s.vertices)
    v[0] = -1.5 * v[0]
    return v, np.asarray(s.faces, np.int64)


def coplanar_fan_box(extents=(40.0, 300.0, 12.0)):
    """A box whose top face (z = +c/2) is fanned from a point in its plane but outside it:
    the fan's triangles overlap in the plane (a coplanar overlap) while the signed area, and so
    the enclosed volume, stays the box's (Green's theorem — from memory)."""
    a, b, c = (e / 2.0 for e in extents)
    v = np.array([[-a, -b, -c], [a, -b, -c], [a, b, -c], [-a, b, -c],
                  [-a, -b, c], [a, -b, c], [a, b, c], [-a, b, c],
                  [1.5 * a, 0.2 * b, c]])  # the apex: in the top plane, outside the face
    f = np.array([[0, 2, 1], [0, 3, 2],
                  [0, 1, 5], [0, 5, 4], [1, 2, 6], [1, 6, 5], [2, 3, 7], [2, 7, 6], [3, 0, 4], [3, 4, 7],
                  [8, 4, 5], [8, 5, 6], [8, 6, 7], [8, 7, 4]])  # the top: a fan from the apex
    return v, f


def demo_arrays():
    """The demo blade as (vertices mm, faces), merged (trimesh)."""
    m = trimesh.load(DEMO, force="mesh")
    return np.asarray(m.vertices, float), np.asarray(m.faces, np.int64)


def open_root():
    """The demo blade with its planar root (butt) face taken away: an open surface."""
    v, f = demo_arrays()
    root = np.isclose(v[:, 1], v[:, 1].min())
    return v, f[~root[f].all(axis=1)]


def on_disk(vertices) -> np.ndarray:
    """Coordinates as a binary STL stores them (float32), back in float64: references are
    computed on what the file holds."""
    return np.asarray(vertices, np.float32).astype(np.float64)


def shank_cylinder(radius, y0, y1, sections=48):
    """A closed cylinder about the demo blade's pitch axis (the y axis through x = z = 0),
    from r = y0 to y1 mm, wound outward (trimesh), its coordinates as a binary STL holds them."""
    c = trimesh.creation.cylinder(radius=radius, height=y1 - y0, sections=sections)
    c.apply_transform(trimesh.transformations.rotation_matrix(-np.pi / 2, [1, 0, 0]))  # z axis -> y axis
    c.apply_translation([0.0, 0.5 * (y0 + y1), 0.0])
    c = trimesh.Trimesh(on_disk(c.vertices), c.faces, process=False)
    assert c.is_watertight and c.volume > 0
    return c


def assemble(*shells):
    """(vertices, faces) of shells ``(trimesh or (v, f), reversed?)`` in one soup, in order."""
    vs, fs, off = [], [], 0
    for mesh, reverse in shells:
        v, f = (mesh.vertices, mesh.faces) if hasattr(mesh, "vertices") else mesh
        f = np.asarray(f, np.int64)
        vs.append(np.asarray(v, float))
        fs.append((f[:, ::-1] if reverse else f) + off)
        off += len(v)
    return np.vstack(vs), np.vstack(fs)


def write(path, vertices, faces, part=None):
    """Binary STL (or ASCII STL with one solid per part); returns the path."""
    if part is None:
        write_surface(path, vertices, faces)
    else:
        Path(path).write_bytes(stl_bytes(vertices, faces, part))
    return path


def moments_mm(mesh):
    """(volume m³, first moment m⁴, second moments S = ∫ r rᵀ dV m⁵) about the origin of a closed
    trimesh in mm, from trimesh's mass properties (the reference integration)."""
    mp = mesh.mass_properties
    vol = float(mp["volume"]) * 1e-9
    c = np.asarray(mp["center_mass"]) * 1e-3
    inertia_c = np.asarray(mp["inertia"]) / mp["density"] * 1e-15  # about the CG, per unit density
    s_c = 0.5 * np.trace(inertia_c) * np.eye(3) - inertia_c
    return vol, vol * c, s_c + vol * np.outer(c, c)


def inertia_hub(vol, first, second, rho):
    """Mass, CG and inertia about the origin of moments at density rho (I = tr(S)·1 − S)."""
    s = rho * second
    return rho * vol, first / vol, np.trace(s) * np.eye(3) - s
