"""A repaired blade against its reference (bladesolid.compare.comparison).

References: meshes/demo_variants.json (volumes); manifold3d's boolean difference and trimesh's
mass properties (reference libraries) of the removed tip, with the docs/CONVENTIONS.md §4
formulas; a registered scan against the same repair analysed unmoved.
"""

from __future__ import annotations

import numpy as np
import pytest
import trimesh

from bladesolid import compare
from bladesolid.loads import centrifugal_twisting_moment, radial_pull
from bladesolid.moments import Moments

from .comparehelp import OMEGA, RHO, RPM, variants
from .conftest import demo_surfaces


def test_scanned_blend_agrees_with_the_unmoved_blend(scanned, blend_direct):
    # the registered scan against the same repair analysed directly in the reference frame
    assert scanned.removed_volume_m3 == pytest.approx(blend_direct.removed_volume_m3, rel=0.03)
    a, b = scanned.delta, blend_direct.delta
    assert a.mass_kg == pytest.approx(b.mass_kg, abs=1e-5)                  # 0.01 g
    assert a.ctm_Nm == pytest.approx(b.ctm_Nm, abs=2e-3)
    assert a.radial_pull_N == pytest.approx(b.radial_pull_N, abs=0.5)
    assert a.static_moment_kgm == pytest.approx(b.static_moment_kgm, abs=1e-5)
    assert np.allclose(a.cg_m, b.cg_m, atol=1e-6)
    assert abs(a.blade_angle_deg) < 1e-3     # the blend band 770-870 mm misses the 750 mm station


def test_comparison_section_has_the_contract_keys(scanned):
    s = compare.comparison_section(scanned)
    # docs/CONVENTIONS.md §7 keys
    assert set(s["registration"]) >= {"rms_m", "max_m", "transform"}
    assert np.asarray(s["registration"]["transform"]).shape == (4, 4)
    assert {"removed_volume_m3", "added_volume_m3", "delta", "verdict", "reasons"} <= set(s)
    assert set(s["delta"]) >= {"mass_kg", "cg_m", "static_moment_kgm", "radial_pull_N", "ctm_Nm"}
    assert len(s["delta"]["cg_m"]) == 3
    # no limits file: nothing checked, the verdict keeps the contract's two values
    assert s["verdict"] == "within limits" and s["reasons"] == [] and s["limits_checked"] is False
    assert "user's own" in s["limits_note"]


def test_tip_dressing_removed_volume_and_loads(reference, dressed):
    v = variants()
    removed_known = (v["demo_blade.stl"]["volume_mm3"] - v["demo_blade_tip_dressed.stl"]["volume_mm3"]) * 1e-9
    assert dressed.removed_volume_m3 == pytest.approx(removed_known, rel=1e-3)        # demo_variants.json
    assert dressed.added_volume_m3 < 1e-3 * removed_known
    assert dressed.delta.radial_pull_N < 0                                            # lighter tip, less pull
    # the removed tip piece on its own: manifold3d boolean + trimesh mass properties (reference
    # libraries), then the docs/CONVENTIONS.md §4 formulas on those moments
    a = compare.solid(reference.surfaces, "ref")
    b = compare.solid(demo_surfaces("demo_blade_tip_dressed.stl"), "dressed")
    g = (a - b).to_mesh64()
    piece = trimesh.Trimesh(np.asarray(g.vert_properties)[:, :3], np.asarray(g.tri_verts), process=False)
    mp = piece.mass_properties
    vol, c = float(mp["volume"]), np.asarray(mp["center_mass"])
    I_c = np.asarray(mp["inertia"]) / mp["density"]
    S = 0.5 * np.trace(I_c) * np.eye(3) - I_c + vol * np.outer(c, c)
    m = Moments(vol, vol * c, S).scaled(RHO)
    assert dressed.delta.mass_kg == pytest.approx(-m.mass, rel=1e-3)
    assert dressed.delta.radial_pull_N == pytest.approx(-float(radial_pull(m, reference.frame, OMEGA)), rel=2e-3)
    # the blade angle is unchanged at 750 mm, so both sit at the same pitch: ΔCTM is the piece's
    assert abs(dressed.delta.blade_angle_deg) < 1e-6
    ctm_piece = float(centrifugal_twisting_moment(m, reference.frame, OMEGA))
    assert dressed.delta.ctm_Nm == pytest.approx(-ctm_piece, rel=5e-3, abs=1e-4)


def test_blade_angle_change_is_measured(reference):
    # a re-pitched blade: the reference turned 0.5 deg toward coarse about the pitch axis
    from bladesolid.frame import pitch_motion

    R, t = pitch_motion(reference.frame, 0.5)
    turned = [(v @ R.T + t, f) for v, f in reference.surfaces]
    c = compare.compare_blade(reference, turned, RPM, transform=np.eye(4), volumes=False)
    assert c.delta.blade_angle_deg == pytest.approx(0.5, abs=2e-3)
    # both are set to the same measured blade angle: the same solid gives the same loads
    assert c.delta.ctm_Nm == pytest.approx(0.0, abs=1e-3 * abs(c.reference.loads.ctm_Nm))
    assert c.delta.mass_kg == pytest.approx(0.0, abs=1e-9)
