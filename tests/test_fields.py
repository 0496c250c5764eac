"""Per-element fields, share bands and hot spots: closed forms and independent references."""

import dataclasses
import math

import numpy as np
import pytest
import shapely.geometry
import trimesh

from bladesolid import api
from bladesolid.fields import (
    LEADING_EDGE,
    MID_CHORD,
    REGIONS,
    SHANK,
    TIP,
    TRAILING_EDGE,
    element_fields,
    hot_spots,
    rpm_to_rad_s,
    share_bands,
)
from bladesolid.frame import hub_frame, measure_blade_angle
from bladesolid.mesh import tetrahedralise_surface
from bladesolid.moments import ElementMoments, point_mass, surface_volume_moments, tet_volume_moments

RHO = 2810.0
RPM = 2500.0


# --- blades -------------------------------------------------------------------------------


def blade_from_solid(vertices, faces, rho=RHO, max_volume=None, name="solid"):
    """A meshed :class:`api.Blade` from a closed surface already in the hub frame (metres)."""
    frame = hub_frame()
    v, f = np.asarray(vertices, float), np.asarray(faces, np.int64)
    nodes, tets = tetrahedralise_surface(v, f, max_volume=max_volume)
    vol = tet_volume_moments(nodes, tets)
    el = ElementMoments(vol.mass * rho, vol.first * rho, vol.second * rho)
    tip = float(v[:, 1].max())
    ref = 0.75 * tip
    return api.Blade(
        name=name, source=name, units="m", frame=frame,
        materials=(api.BodyMaterial(rho, "test", "given"),), surfaces=((v, f),),
        body_moments=(surface_volume_moments(v, f).scaled(rho),), lumped=(),
        lumped_moments=point_mass(0.0, np.zeros(3)), tip_radius_m=tip, reference_radius_m=ref,
        modelled_angle=measure_blade_angle([(v, f)], frame, ref), elements=el, element_nodes=nodes,
        element_tets=tets, element_body=np.zeros(len(tets), dtype=np.int32),
    )


CHORD, THICK, SPAN, ROOT, CHAMFER = 0.20, 0.02, 0.60, 0.20, 0.03


def flat_plate():
    """A flat plate modelled at blade angle 0: chord along x (leading edge at −x, facing
    t = −x for right-hand rotation), thickness along z, span along y from ROOT to ROOT+SPAN.
    The edges are chamfered to points so the chord line is exactly the x axis; the pitch
    axis (the y axis) runs along mid-chord, mid-thickness."""
    c, t, w = CHORD / 2, THICK / 2, CHAMFER
    poly = shapely.geometry.Polygon([(-c, 0), (-c + w, -t), (c - w, -t), (c, 0), (c - w, t), (-c + w, t)])
    m = trimesh.creation.extrude_polygon(poly, SPAN)  # along +z
    R = trimesh.transformations.rotation_matrix(-math.pi / 2, [1, 0, 0])
    m.apply_transform(R)  # (px, py, h) -> (px, h, -py)
    m.apply_translation([0.0, ROOT, 0.0])
    # small surface triangles, so the elements (which keep the surface) are small everywhere
    v, f = trimesh.remesh.subdivide_to_size(m.vertices, m.faces, max_edge=0.02)
    m = trimesh.Trimesh(v, f, process=True)
    assert m.is_watertight and m.volume > 0
    return blade_from_solid(m.vertices, m.faces, max_volume=CHORD * THICK * SPAN / 1500, name="plate")


@pytest.fixture(scope="module")
def plate():
    return flat_plate()


@pytest.fixture(scope="module")
def demo(demo_path):
    return api.load_blade(demo_path, "mm", ["2810 kg/m^3"])


@pytest.fixture(scope="module")
def demo_fields(demo):
    return element_fields(demo, RPM, 25.0)


# --- the fields add up ---------------------------------------------------------------------


def test_fields_add_up_to_blade_totals(demo, demo_fields, demo_mesh):
    f = demo_fields
    op = api.loads_at(demo, RPM, 25.0)
    # The solid's totals by the same formulas, and the blade figures of the API (no lumped masses).
    assert f.ctm_Nm.sum() == pytest.approx(f.totals.ctm_Nm, rel=1e-12)
    assert f.radial_pull_N.sum() == pytest.approx(f.totals.radial_pull_N, rel=1e-12)
    assert f.mass_kg.sum() == pytest.approx(f.totals.mass_kg, rel=1e-12)
    assert f.totals.ctm_Nm == pytest.approx(op.ctm_Nm, rel=1e-12)
    assert f.totals.radial_pull_N == pytest.approx(op.radial_pull_N, rel=1e-12)
    # Independent reference: trimesh's mass properties of the same surface (volume, centre of
    # mass) give the mass and the radial pull m Ω² c·e; the CG lies on the pitch-axis side of
    # the modelled solid, and the pitch rotation about e leaves c·e unchanged.
    w = rpm_to_rad_s(RPM)
    assert f.mass_kg.sum() == pytest.approx(RHO * demo_mesh.volume, rel=1e-9)
    assert f.radial_pull_N.sum() == pytest.approx(RHO * demo_mesh.volume * w**2 * demo_mesh.center_mass[1], rel=1e-9)
    # element volumes from the nodes add up to the enclosed volume
    assert f.volume_m3.sum() == pytest.approx(demo_mesh.volume, rel=1e-9)
    assert f.blade_angle_deg == 25.0 and f.rpm == RPM


def test_lumped_masses_are_rows_of_their_own(demo, demo_fields):
    weight = api.LumpedMass("balance weight", 0.25, np.array([0.03, 0.18, 0.02]))
    blade = dataclasses.replace(demo, lumped=(weight,), lumped_moments=point_mass(0.25, weight.position_m))
    f = element_fields(blade, RPM, 25.0)
    op = api.loads_at(blade, RPM, 25.0)
    assert len(f.lumped) == 1 and f.lumped[0].name == "balance weight"
    np.testing.assert_array_equal(f.ctm_Nm, demo_fields.ctm_Nm)  # elements untouched
    assert f.totals == demo_fields.totals
    total = f.total_with_lumped
    assert total.ctm_Nm == pytest.approx(op.ctm_Nm, rel=1e-12)
    assert total.radial_pull_N == pytest.approx(op.radial_pull_N, rel=1e-12)
    assert total.mass_kg == pytest.approx(demo_fields.totals.mass_kg + 0.25, rel=1e-15)
    # a point mass's own pull: m Ω² r (on the pitch axis side, r = its y)
    assert f.lumped[0].radial_pull_N == pytest.approx(0.25 * rpm_to_rad_s(RPM) ** 2 * 0.18, rel=1e-12)


def test_modelled_angle_is_the_default(demo):
    f = element_fields(demo, 1000.0)
    assert f.blade_angle_deg == demo.modelled_deg
    np.testing.assert_allclose(f.centroid_m, f.modelled_centroid_m, atol=1e-15)


def test_unmeshed_blade_is_refused(demo):
    with pytest.raises(ValueError, match="without mass elements"):
        element_fields(dataclasses.replace(demo, elements=None), RPM)


# --- flat plate: closed form per element ---------------------------------------------------------


def test_flat_plate_at_45deg_closed_form_per_element(plate):
    # docs/CONVENTIONS.md §4: a thin flat blade gives CTM = −(Ω²/2) sin 2β (J_cc − J_nn). The same
    # algebra holds per element: a point at chordwise s and thickness-wise u from the pitch axis
    # at blade angle β has x z = −(s² − u²) sin β cos β + s u (sin²β − cos²β), so at 45° each
    # element contributes −(Ω²/2)(∫s² dm − ∫u² dm) exactly. The plate is modelled at 0° with
    # s = −x, u = z about P = O, so ∫s² dm = S_xx and ∫u² dm = S_zz of the modelled element.
    assert plate.modelled_deg == pytest.approx(0.0, abs=1e-12)
    f = element_fields(plate, RPM, 45.0)
    w = rpm_to_rad_s(RPM)
    S = plate.elements.second
    expected = -(w**2 / 2) * (S[:, 0, 0] - S[:, 2, 2])
    np.testing.assert_allclose(f.ctm_Nm, expected, rtol=0, atol=1e-12 * np.abs(expected).max())
    # Sign pattern: material far from the pitch axis chordwise drives toward fine, at both
    # edges alike; only material nearer the axis chordwise than thickness-wise drives toward
    # coarse, and then its centroid lies within half the thickness of the axis (∫s² ≥ m x_c²,
    # ∫u² ≤ m (t/2)²).
    xc = f.modelled_centroid_m[:, 0]
    le, te = xc < -CHORD / 4, xc > CHORD / 4
    assert le.sum() > 50 and te.sum() > 50
    assert np.all(f.ctm_Nm[le] < 0) and np.all(f.ctm_Nm[te] < 0)
    coarse = f.ctm_Nm > 0
    assert coarse.any()
    assert np.all(np.abs(xc[coarse]) < THICK / 2)
    assert f.totals.ctm_Nm < 0
    # both edge bands drive toward fine by about the same amount (plate symmetric about the axis)
    assert f.ctm_Nm[le].sum() == pytest.approx(f.ctm_Nm[te].sum(), rel=0.05)


def test_flat_plate_at_0_and_90_deg_has_no_total_ctm(plate):
    # docs/CONVENTIONS.md §4: zero at 0° and 90°. Per element the cross term s u remains; it cancels
    # over the plate, which is symmetric about its mid-thickness plane (the elements fill the
    # surface exactly, so the cancellation is to round-off).
    for beta in (0.0, 90.0):
        f = element_fields(plate, RPM, beta)
        scale = np.abs(f.ctm_Nm).sum()
        assert scale > 0 and abs(f.totals.ctm_Nm) < 1e-12 * scale


# --- share bands -----------------------------------------------------------------------------------


@pytest.mark.parametrize("quantity", ["ctm_Nm", "radial_pull_N"])
def test_share_bands_are_nested_and_minimal(demo_fields, quantity):
    f = demo_fields
    values = getattr(f, quantity)
    bands = f.ctm_shares if quantity == "ctm_Nm" else f.pull_shares
    band = f.ctm_share_band if quantity == "ctm_Nm" else f.pull_share_band
    np.testing.assert_array_equal(band, bands.band)
    total = values.sum()
    ranked = np.sign(total) * values
    order = np.argsort(-ranked, kind="stable")
    assert np.all(np.diff(band[order]) >= 0)  # monotone along the ranking
    assert set(np.unique(band)) <= {50, 80, 95, 100}
    assert list(bands.counts) == sorted(bands.counts) and bands.counts[0] > 0
    for level, n, carried in zip(bands.levels, bands.counts, bands.carried_pct):
        chosen = band <= level
        assert chosen.sum() == n
        share = values[chosen].sum() / total
        assert share >= level / 100 - 1e-12
        assert carried == pytest.approx(100 * share, rel=1e-9)
        # minimal: without its smallest member the set falls short
        smallest = ranked[chosen].min()
        assert (values[chosen].sum() - np.sign(total) * smallest) / total < level / 100
    np.testing.assert_allclose(bands.volumes_m3, [f.volume_m3[band <= lv].sum() for lv in bands.levels])
    assert bands.opposing_pct >= 0.0


def test_share_bands_radial_pull_has_no_opposition(demo_fields):
    assert demo_fields.pull_shares.opposing_pct == 0.0  # every element is outboard of the hub


def test_share_bands_small_example():
    b = share_bands(np.array([-3.0, -1.0, 0.5, -0.5]), np.ones(4), np.ones(4))
    # total −4: ranked in the sense of the total 3, 1, 0.5, −0.5 → cumulated 75 %, 100 %, ...
    assert b.sense == -1 and b.band.tolist() == [50, 80, 100, 100]
    assert b.counts == (1, 2, 2) and b.opposing_pct == pytest.approx(12.5)
    empty = share_bands(np.array([1.0, -1.0]), np.ones(2), np.ones(2))
    assert empty.band.tolist() == [100, 100] and empty.counts == (0, 0, 0)
    with pytest.raises(ValueError, match="between 0 and 100"):
        share_bands(np.ones(3), np.ones(3), np.ones(3), levels=(50, 100))


# --- hot spots ------------------------------------------------------------------------------------


def test_hot_spot_shares_sum_to_100(demo, demo_fields):
    h = hot_spots(demo, demo_fields)
    assert [row["region"] for row in h.table] == list(REGIONS)
    for col in ("volume_pct", "mass_pct", "radial_pull_pct", "ctm_pct"):
        assert h.share_pct(col).sum() == pytest.approx(100.0, abs=1e-9)
    assert sum(row["elements"] for row in h.table) == len(demo_fields)
    # The demo's shank is circular to 230 mm and blends into the airfoil by 300 mm
    # (bladesolid.demo.BladeParams); the root transition must be found inside the blend.
    assert "circular shank" in h.root_rule
    assert 0.230 < h.root_boundary_m < 0.300
    assert h.tip_boundary_m == pytest.approx(h.root_m + 0.9 * (h.tip_m - h.root_m))
    # regions follow their definitions
    y = demo_fields.modelled_centroid_m[:, 1]
    assert np.all(h.region[y >= h.tip_boundary_m] == TIP)
    assert np.all(h.region[y < h.root_boundary_m] == SHANK)
    body = (y >= h.root_boundary_m) & (y < h.tip_boundary_m)
    assert np.all(h.chordwise[body & (h.region == LEADING_EDGE)] >= 0.85)
    assert np.all(h.chordwise[body & (h.region == TRAILING_EDGE)] <= 0.15)
    mid = body & (h.region == MID_CHORD)
    assert np.all((h.chordwise[mid] > 0.15) & (h.chordwise[mid] < 0.85))
    # the trailing edge lies far from the pitch axis (at 32 % chord): its CTM share is much
    # larger than its volume share
    te = h.table[TRAILING_EDGE]
    assert te["ctm_pct"] > 3 * te["volume_pct"]


def test_hot_spots_on_a_plate_use_the_span_rule_and_exact_chordwise_position(plate):
    f = element_fields(plate, RPM, 45.0)
    h = hot_spots(plate, f)
    assert "inner 25 %" in h.root_rule
    assert h.root_boundary_m == pytest.approx(ROOT + 0.25 * SPAN)
    # chord line along x from TE (+c/2) to LE (−c/2): position (c/2 − x)/c, exactly
    x = f.modelled_centroid_m[:, 0]
    np.testing.assert_allclose(h.chordwise, (CHORD / 2 - x) / CHORD, atol=1e-9)
    for col in ("mass_pct", "radial_pull_pct", "ctm_pct"):
        assert h.share_pct(col).sum() == pytest.approx(100.0, abs=1e-9)
    # equal-width edge bands of a plate symmetric about its pitch axis carry equal mass
    t = h.table
    assert t[LEADING_EDGE]["mass_pct"] == pytest.approx(t[TRAILING_EDGE]["mass_pct"], rel=0.1)


def test_summary_is_plain_json(demo, demo_fields):
    import json

    from bladesolid.fields import summary

    h = hot_spots(demo, demo_fields)
    data = json.loads(json.dumps(summary(demo_fields, h), allow_nan=False))
    assert data["elements"] == len(demo_fields)
    assert data["totals"]["ctm_Nm"] == pytest.approx(demo_fields.totals.ctm_Nm)
    assert [r["level_pct"] for r in data["share_bands"]] == [50, 80, 95, 50, 80, 95]
    assert [r["region"] for r in data["hot_spots"]["regions"]] == list(REGIONS)
    assert set(data["hot_spots"]["definitions"]) == set(REGIONS)
