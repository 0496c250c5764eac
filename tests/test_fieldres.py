"""Field resolution: simplified copies of a blade surface for the element fields, and the blade
whose fields are made on one while mass, tensor and loads stay exact.

The copies must be closed, manifold, outward, not crossing themselves, close in volume and
moments, and fillable by TetGen (how fast: ``scripts/bench.py``).

References outside the project: trimesh's watertightness / winding checks and its mass
properties (an independent integration), TetGen itself (it refuses self-intersecting
surfaces when the facets are preserved).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import trimesh

from bladesolid import api, fieldres, fields
from bladesolid.cli import main
from bladesolid.demo import blade_surface, large_blade_surface
from bladesolid.mesh import tetrahedralise_surface
from bladesolid.moments import relative_difference, surface_volume_moments


def assert_valid_copy(v, f, v0, f0, max_volume_change=fieldres.MAX_VOLUME_CHANGE):
    m = trimesh.Trimesh(v, f, process=True)
    assert m.is_watertight and m.is_winding_consistent  # trimesh's own checks
    assert m.volume > 0  # outward
    assert len(m.split(only_watertight=False)) == len(trimesh.Trimesh(v0, f0).split(only_watertight=False))
    ref = trimesh.Trimesh(v0, f0, process=False)
    assert abs(m.volume / ref.volume - 1) <= max_volume_change
    assert fieldres.surface_problems(v, f) == []
    assert len(fieldres.self_intersections(v, f)) == 0
    assert len(np.unique(f)) == len(v)  # no unused vertices left


@pytest.fixture(scope="module")
def large():
    v, f = large_blade_surface(240_000)
    return v * 1e-3, f


def test_240k_blade_to_a_20k_copy_that_tetgen_fills(large):
    v0, f0 = large
    info = {}
    v, f = fieldres.field_surface(v0, f0, 20_000, report=info)
    assert info["method"] == "decimate_pro" and 15_000 <= len(f) <= 22_000, info
    assert_valid_copy(v, f, v0, f0, 0.01)
    # moments of the copy within 1 % of the full surface's (the fields are pictures; the
    # totals always come from the full surface)
    assert relative_difference(surface_volume_moments(v, f), surface_volume_moments(v0, f0)) < 0.01
    nodes, tets = tetrahedralise_surface(v, f)  # facets preserved (pYQ): refuses crossings
    # (how fast: scripts/bench.py, "field copy" rows)
    vol = np.abs(np.einsum("ij,ij->i", np.cross(nodes[tets[:, 1]] - nodes[tets[:, 0]], nodes[tets[:, 2]] - nodes[tets[:, 0]]),
                           nodes[tets[:, 3]] - nodes[tets[:, 0]])).sum() / 6
    assert vol == pytest.approx(trimesh.Trimesh(v, f).volume, rel=1e-9)


@pytest.mark.parametrize("mesh", ["demo_blade.stl", "demo_blade_tip_dressed.stl", "demo_blade_le_blend_scanned.stl"])
@pytest.mark.parametrize("target", [3000, 8000])
def test_demo_meshes_give_valid_copies(mesh, target, demo_path):
    m = trimesh.load(demo_path.parent / mesh, force="mesh")
    v0, f0 = np.asarray(m.vertices) * 1e-3, np.asarray(m.faces)
    info = {}
    v, f = fieldres.field_surface(v0, f0, target, report=info)
    assert info["method"] != "input", info
    assert len(f) <= 2.5 * target
    assert_valid_copy(v, f, v0, f0)
    nodes, tets = tetrahedralise_surface(v, f)
    assert len(tets) > 0


def test_small_surface_is_returned_unchanged():
    v0, f0 = blade_surface()
    v, f = fieldres.field_surface(v0, f0, len(f0))
    assert v is not None and np.array_equal(f, f0) and np.array_equal(v, v0)


def test_a_rejected_copy_falls_back(monkeypatch):
    # a simplifier that returns an open surface must not be used
    v0, f0 = blade_surface()

    def broken(v, f, target):
        return v, f[:-5]

    monkeypatch.setitem(fieldres.METHODS, "decimate_pro", broken)
    info = {}
    v, f = fieldres.field_surface(v0, f0, 5000, report=info)
    assert info["method"] == "quadric" and all("boundary" in r for r in info["rejected"]), info
    assert_valid_copy(v, f, v0, f0)
    monkeypatch.setitem(fieldres.METHODS, "quadric", broken)
    v, f = fieldres.field_surface(v0, f0, 5000, report=info)
    assert info["method"] == "input" and np.array_equal(f, f0)


def test_checks_catch_what_they_claim():
    b = trimesh.creation.box()
    v, f = np.asarray(b.vertices), np.asarray(b.faces)
    assert fieldres.surface_problems(v, f) == []
    assert fieldres.surface_problems(v, f[:, ::-1]) == ["inward (negative volume) winding"]
    flipped = f.copy()
    flipped[0] = flipped[0, ::-1]
    assert "inconsistent winding" in fieldres.surface_problems(v, flipped)[0]
    assert "boundary" in fieldres.surface_problems(v, f[1:])[0]
    # two boxes overlapping: every face is fine alone, the pair crosses
    c = trimesh.creation.box()
    c.apply_translation([0.3, 0.2, 0.1])
    both = trimesh.util.concatenate([b, c])
    assert len(fieldres.self_intersections(both.vertices, both.faces)) > 0
    assert fieldres.pieces(both.faces, len(both.vertices)) == 2
    # the same two boxes apart do not cross
    c.apply_translation([5.0, 0.0, 0.0])
    apart = trimesh.util.concatenate([b, c])
    assert len(fieldres.self_intersections(apart.vertices, apart.faces)) == 0
    # a fold: one vertex of an icosphere pushed through the opposite side
    s = trimesh.creation.icosphere(subdivisions=2)
    vs = np.asarray(s.vertices).copy()
    vs[0] = -1.5 * vs[0]
    assert len(fieldres.self_intersections(vs, s.faces)) > 0


# --------------------------------------------------------------------------- a blade with a field copy


@pytest.fixture(scope="module")
def coarse(demo_path):
    return api.load_blade(demo_path, "mm", ["2810"], field_faces=5000)


@pytest.fixture(scope="module")
def full(demo_path):
    return api.load_blade(demo_path, "mm", ["2810"])


def test_simplified_fields_keep_the_exact_totals(coarse, full):
    assert full.elements_exact and not coarse.elements_exact
    info = coarse.field_resolution
    # (the simplifier may keep up to twice the target to avoid folding a thin edge)
    assert info["faces_full"] == 19440 and info["faces_field"] <= 10000
    assert abs(info["volume_change"]) < 0.02
    # mass properties and loads come from the full closed surface in both cases
    assert relative_difference(coarse.moments, full.moments) < 1e-12
    a = api.loads_at(coarse, 2500, 22.0)
    b = api.loads_at(full, 2500, 22.0)
    assert a.ctm_Nm == pytest.approx(b.ctm_Nm, rel=1e-12)
    assert api.mass_properties(coarse).surface_check_method == "closed surface vs trimesh mass properties"
    # the fields live on fewer elements and add up to the copy's totals, close to the exact ones
    f = fields.element_fields(coarse, 2500, 22.0)
    assert len(f.ctm_Nm) < len(full.elements)
    assert f.ctm_Nm.sum() == pytest.approx(f.totals.ctm_Nm, rel=1e-12)
    assert f.totals.ctm_Nm == pytest.approx(b.ctm_Nm, rel=0.05)
    assert info["moments_rel_difference"] < 0.05
    assert any("simplified copy" in w for w in coarse.warnings)


def test_report_says_so(demo_path, tmp_path, capsys):
    job = tmp_path / "job.toml"
    job.write_text(f'mesh = {json.dumps(str(demo_path))}\nunits = "mm"\nmaterial = "al-2025-t6"\n'
                   'stations = 4\nfield_faces = 5000\n[[operating_point]]\nrpm = 2500\n')
    assert main(["check", str(job), "--out", str(tmp_path / "out")]) == 0
    r = json.loads((tmp_path / "out" / "report.json").read_text())
    assert r["input"]["field_resolution"]["faces_field"] <= 10000
    assert "simplified copy" in r["spanwise_note"]
    assert any("simplified copy" in w for w in r["warnings"])
    np.testing.assert_allclose(r["mass_properties"]["mass_kg"], 6.898443, rtol=1e-6)
