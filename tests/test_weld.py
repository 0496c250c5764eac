"""Welding of CAD-style STL exports: corners written facet by facet with float noise.

The exports are made here the way CAD exporters make them: every facet's three corners
written on their own, with the float noise such exporters leave (a zero coordinate that comes
out as -0.0, ±1e-17, -5e-17 or 2e-33 on one facet and 0.0 on the next; other coordinates a
few units in the last place apart, ``np.nextafter``), in float64 and in float32 (binary STL).
References outside the project: trimesh's watertightness and winding checks and its mass
properties of the clean mesh; brute-force distances computed in the tests.
"""

from __future__ import annotations

import numpy as np
import pytest

from bladesolid.demo import blade_surface
from bladesolid.errors import InputError
from bladesolid.weld import DEFAULT_REL_TOL, weld

trimesh = pytest.importorskip("trimesh")

NOISE_AT_ZERO = (0.0, -0.0, 1e-17, -1e-17, -5e-17, 2e-33)


def cad_export(vertices, faces, rng, dtype=np.float64):
    """Triangle soup as a facet-by-facet exporter writes it: (3m, 3) corners, faces arange."""
    c = np.asarray(vertices, dtype=dtype)[np.asarray(faces)].reshape(-1, 3).copy()
    zero = c == 0
    c[zero] = rng.choice(np.array(NOISE_AT_ZERO, dtype=dtype), size=int(zero.sum()))
    steps = rng.integers(-2, 3, size=c.shape)  # up to two units in the last place either way
    for s in (1, 2):
        for sign in (1.0, -1.0):
            m = (steps == sign * s) & ~zero
            x = c[m]
            for _ in range(s):
                x = np.nextafter(x, dtype(sign * np.inf))
            c[m] = x
    return c.astype(np.float64), np.arange(len(c), dtype=np.int64).reshape(-1, 3)


def loft():
    """A blade-like loft: the demo blade surface (cambered, twisted sections closed by fans)."""
    v, f = blade_surface()
    return trimesh.Trimesh(v, f, process=False)


SHAPES = {
    "box": lambda: trimesh.creation.box([20.0, 30.0, 40.0]),  # centred: many zero coordinates
    "cylinder": lambda: trimesh.creation.cylinder(radius=10.0, height=30.0, sections=64),
    "loft": loft,
}


@pytest.mark.parametrize("dtype", [np.float64, np.float32])
@pytest.mark.parametrize("shape", list(SHAPES))
def test_noisy_cad_export_welds_closed_with_the_clean_volume(shape, dtype):
    clean = SHAPES[shape]()
    rng = np.random.default_rng(7)
    v, f = cad_export(clean.vertices, clean.faces, rng, dtype)
    # the export as written: a bit-exact merge leaves it open (the defect being fixed)
    exact, inverse = np.unique(v + 0.0, axis=0, return_inverse=True)
    assert not trimesh.Trimesh(exact, inverse.reshape(-1)[f], process=False).is_watertight
    w = weld(v, f)
    # every corner copy goes back to one vertex: the clean mesh's vertex count (constructed)
    assert len(w.vertices) == len(clean.vertices) and len(w.dropped) == 0 and len(w.faces) == len(f)
    assert w.merged == len(v) - len(clean.vertices)
    m = trimesh.Trimesh(w.vertices, w.faces, process=False)
    assert m.is_watertight and m.is_winding_consistent  # trimesh's own checks
    ref = clean.mass_properties  # trimesh's mass properties of the clean mesh
    rel = 1e-12 if dtype is np.float64 else 1e-6  # float32 rounds coordinates to ~6e-8
    assert m.mass_properties["volume"] == pytest.approx(ref["volume"], rel=rel)
    assert np.allclose(m.mass_properties["center_mass"], ref["center_mass"], atol=rel * clean.scale)
    # no vertex moved by more than tol (brute force over the input corners)
    assert np.linalg.norm(w.vertices[w.index] - v, axis=1).max() <= w.tol
    assert w.tol == pytest.approx(DEFAULT_REL_TOL * np.linalg.norm(np.ptp(v, axis=0)))


def test_different_parts_are_never_welded():
    # two boxes sharing a face (a sheath on a core): coincident corners, different materials
    a = trimesh.creation.box([1.0, 1.0, 1.0])
    b = trimesh.creation.box([1.0, 1.0, 1.0])
    b.apply_translation([1.0, 0.0, 0.0])
    rng = np.random.default_rng(3)
    va, fa = cad_export(a.vertices, a.faces, rng)
    vb, fb = cad_export(b.vertices, b.faces, rng)
    v = np.vstack([va, vb])
    f = np.vstack([fa, fb + len(va)])
    part = np.repeat([0, 1], [len(va), len(vb)])
    w = weld(v, f, part=part)
    assert len(w.vertices) == 16  # 8 + 8: the four shared corners stay two vertices each
    assert np.array_equal(np.bincount(w.part), [8, 8])
    for k in (0, 1):
        sub = w.faces[np.all(w.part[w.faces] == k, axis=1)]
        assert len(sub) == 12 and trimesh.Trimesh(w.vertices, sub, process=False).is_watertight
    # no face joins vertices of two parts
    assert np.all(w.part[w.faces] == w.part[w.faces][:, :1])
    # without the labels the shared corners merge (12 vertices): the labels did the work
    assert len(weld(v, f).vertices) == 12


def test_a_gap_wider_than_tol_stays_open():
    box = trimesh.creation.box([2.0, 2.0, 2.0])
    v, f = cad_export(box.vertices, box.faces, np.random.default_rng(1))
    tol = DEFAULT_REL_TOL * np.linalg.norm(np.ptp(v, axis=0))
    v[0] += [10 * tol, 0.0, 0.0]  # one facet's corner pulled away: a genuine gap of 10 tol
    w = weld(v, f)
    assert len(w.vertices) == 9  # the pulled corner is a vertex of its own
    assert not trimesh.Trimesh(w.vertices, w.faces, process=False).is_watertight
    # an explicit tolerance wider than the gap closes it
    w = weld(v, f, tol=20 * tol)
    assert len(w.vertices) == 8 and trimesh.Trimesh(w.vertices, w.faces, process=False).is_watertight


def test_faces_that_collapse_are_dropped_and_reported():
    v = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0], [1e-9, 0, 0], [0, 0, 1]])
    f = np.array([[0, 1, 2], [0, 3, 4], [1, 2, 4]])  # face 1 has two corners 1e-9 apart
    w = weld(v, f, tol=1e-6)
    assert w.dropped.tolist() == [1] and w.faces.tolist() == [[0, 1, 2], [1, 2, 3]]
    assert w.merged == 1 and w.index.tolist() == [0, 1, 2, 0, 3]


def test_chains_are_cut_not_collapsed():
    # points 0.6 tol apart along a line: each within tol of the next, 1.8 tol end to end
    t = 1.0
    v = np.array([[0.0, 0, 0], [0.6, 0, 0], [1.2, 0, 0], [1.8, 0, 0]]) * t
    w = weld(v, np.zeros((0, 3), np.int64), tol=t)
    assert w.index.tolist() == [0, 0, 1, 1]  # representatives at 0 and 1.2 (first occurrence)
    assert w.vertices[:, 0].tolist() == [0.0, 1.2]


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_grouping_rules_hold_on_random_clusters(seed):
    # brute force over all pairs: every point within tol of its representative, and the
    # representatives more than tol apart from each other (no two groups could be one)
    rng = np.random.default_rng(seed)
    centres = rng.random((60, 3))
    pts = np.repeat(centres, 5, axis=0) + rng.normal(scale=0.004, size=(300, 3))
    pts = pts[rng.permutation(len(pts))]
    tol = 0.01
    w = weld(pts, np.zeros((0, 3), np.int64), tol=tol)
    assert np.linalg.norm(w.vertices[w.index] - pts, axis=1).max() <= tol
    d = np.linalg.norm(w.vertices[:, None] - w.vertices[None], axis=2)
    assert (d[np.triu_indices(len(d), 1)] > tol).all()
    # representatives are input points, in order of first occurrence
    firsts = [int(np.flatnonzero(w.index == k)[0]) for k in range(len(w.vertices))]
    assert firsts == sorted(firsts) and np.array_equal(w.vertices, pts[firsts])


def test_tol_zero_merges_exact_copies_only():
    v = np.array([[0.0, 0, 0], [-0.0, 0, 0], [5e-324, 0, 0], [1, 0, 0]])
    w = weld(v, np.zeros((0, 3), np.int64), tol=0.0)
    assert w.index.tolist() == [0, 0, 1, 2]


@pytest.mark.parametrize("tol", [-1.0, float("nan"), float("inf")])
def test_a_bad_tolerance_names_the_parameter(tol):
    with pytest.raises(InputError, match="^tol: "):
        weld(np.zeros((3, 3)), np.array([[0, 1, 2]]), tol=tol)


def test_bad_arrays_name_the_parameter():
    with pytest.raises(InputError, match="^faces: "):
        weld(np.zeros((3, 3)), np.array([[0, 1, 3]]))
    with pytest.raises(InputError, match="^vertices: "):
        weld(np.array([[0.0, np.nan, 0]]), np.zeros((0, 3), np.int64))
    with pytest.raises(InputError, match="^part: "):
        weld(np.zeros((3, 3)), np.array([[0, 1, 2]]), part=[0, 1])
