"""Spanwise stage: exact station cuts against hand-checked tetrahedra, closed-form rotating bars
and plates, an independent surface-clipping route and trimesh's plane sections."""

import json
import math

import numpy as np
import pytest
import trimesh

from bladesolid import api, cli
from bladesolid.errors import OutputExistsError
from bladesolid.frame import hub_frame
from bladesolid.moments import surface_volume_moments, tet_volume_moments
from bladesolid.span import (
    cut_tetrahedra,
    section_of,
    integrate_outboard,
    outboard_volume,
    plot_span,
    span_table,
    spanwise_rows,
    station_radii,
    triangle_area_moments,
)

RHO = 2810.0
RPM = 2500.0
OMEGA = RPM * 2 * math.pi / 60


def _load(tmp_path, mesh, name="part.stl", frame=None, densities=None, lumped=()):
    path = tmp_path / name
    mesh.export(path)
    return api.load_blade(path, "m", densities or [f"{RHO} kg/m^3"], frame=frame, lumped=lumped)


def _outboard_by_surface(vertices, faces, r):
    """Independent route: clip the closed surface by y = r, cap it, integrate the closed surface."""
    m = trimesh.Trimesh(vertices, faces, process=False)
    part = trimesh.intersections.slice_mesh_plane(m, [0.0, 1.0, 0.0], [0.0, r, 0.0], cap=True)
    assert part.is_watertight
    return surface_volume_moments(part.vertices, part.faces)


# --- single tetrahedra, checked by hand -----------------------------------------------------


def test_two_vertices_outboard_hand_checked():
    # Tetrahedron with edge AB at y = 0 and edge CD at y = 1, AB ⟂ CD, |AB × CD| = 1: the section
    # at height y is a parallelogram of area y(1 − y) (elementary geometry, worked by hand), so the
    # part above y = r has volume ∫_r^1 y(1 − y) dy and first moment ∫_r^1 y²(1 − y) dy.
    nodes = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 1, 1]])
    tets = np.array([[0, 1, 2, 3]])
    for r in (0.3, 0.5, 0.8):
        vol = (0.5 - 1 / 3) - (r**2 / 2 - r**3 / 3)
        fy = (1 / 3 - 1 / 4) - (r**3 / 3 - r**4 / 4)
        assert outboard_volume(nodes, tets, r) == pytest.approx(vol, rel=1e-13)
        c = cut_tetrahedra(nodes, tets, r)
        assert len(c.pieces) == 3 and not c.whole.any()  # the prism, split in three
        p = len(c.pieces)
        vm = tet_volume_moments(c.pieces.reshape(-1, 3), np.arange(4 * p).reshape(p, 4))
        assert vm.first[:, 1].sum() == pytest.approx(fy, rel=1e-13)
        area = triangle_area_moments(c.triangles[:, :, [0, 2]])[:, 0].sum()
        assert area == pytest.approx(r * (1 - r), rel=1e-13)
    assert outboard_volume(nodes, tets, 0.5) == pytest.approx(1 / 12, rel=1e-13)  # half, by symmetry


def test_one_and_three_vertices_outboard_hand_checked():
    # Corner tetrahedron (0,0,0),(1,0,0),(0,1,0),(0,0,1), volume 1/6: the part above y = r is a
    # similar tetrahedron scaled by (1 − r), volume (1 − r)³/6 (similar solids, by hand).
    nodes = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]])
    tets = np.array([[0, 1, 2, 3]])
    for r in (0.1, 0.5, 0.9):
        assert outboard_volume(nodes, tets, r) == pytest.approx((1 - r) ** 3 / 6, rel=1e-12)
    # mirrored (y → 1 − y): three vertices outboard of y = r, volume 1/6 − r³/6
    mirrored = nodes * [1, -1, 1] + [0, 1, 0]
    for r in (0.1, 0.5, 0.9):
        c = cut_tetrahedra(mirrored, tets, r)
        assert c.whole.all() and (c.piece_sign == -1).all()
        assert outboard_volume(mirrored, tets, r) == pytest.approx(1 / 6 - r**3 / 6, rel=1e-12)
    # outside the element: nothing, or all of it
    assert outboard_volume(nodes, tets, 1.0) == 0.0
    assert outboard_volume(nodes, tets, -0.1) == pytest.approx(1 / 6, rel=1e-15)


def test_random_tetrahedra_against_surface_clipping():
    # Every moment of the clipped part of random tetrahedra equals the closed-surface integral of
    # the same tetrahedron clipped and capped by trimesh (reference library, independent route).
    rng = np.random.default_rng(7)
    for _ in range(12):
        v = rng.normal(size=(4, 3))
        tet = trimesh.convex.convex_hull(v)
        r = float(rng.uniform(v[:, 1].min(), v[:, 1].max()))
        c = cut_tetrahedra(v, np.array([[0, 1, 2, 3]]), r)
        p = len(c.pieces)
        vm = tet_volume_moments(c.pieces.reshape(-1, 3), np.arange(4 * p).reshape(p, 4))
        whole = tet_volume_moments(v, np.array([[0, 1, 2, 3]])) if c.whole[0] else None
        sgn = c.piece_sign
        got = [np.sum(sgn * vm.mass), (sgn[:, None] * vm.first).sum(0), (sgn[:, None, None] * vm.second).sum(0)]
        if whole is not None:
            got = [got[0] + whole.mass[0], got[1] + whole.first[0], got[2] + whole.second[0]]
        ref = _outboard_by_surface(tet.vertices, tet.faces, r)
        scale = max(abs(ref.mass), 1e-12)
        assert got[0] == pytest.approx(ref.mass, rel=1e-9, abs=1e-14)
        np.testing.assert_allclose(got[1], ref.first, atol=1e-10 * scale * 3)
        np.testing.assert_allclose(got[2], ref.second, atol=1e-10 * scale * 10)


def test_triangle_area_moments_against_shapely():
    # Area and centroid of a cut polygon against shapely (reference library).
    from shapely.geometry import Polygon

    tri = np.array([[[0.1, -0.2], [0.7, 0.1], [0.2, 0.5]]])
    m = triangle_area_moments(tri)[0]
    poly = Polygon(tri[0])
    assert m[0] == pytest.approx(poly.area, rel=1e-14)
    assert m[1] / m[0] == pytest.approx(poly.centroid.x, rel=1e-13)
    assert m[2] / m[0] == pytest.approx(poly.centroid.y, rel=1e-13)


def test_square_section_is_round():
    # A square b × b has I = b⁴/12 about every centroidal axis (b h³/12, any handbook): no principal
    # direction, so the section is flagged round and axis 1 is taken along t.
    frame = hub_frame()
    sq = np.array([[-1.0, 0.3, -1.0], [1.0, 0.3, -1.0], [1.0, 0.3, 1.0], [-1.0, 0.3, 1.0]])
    tris = sq[[[0, 1, 2], [0, 2, 3]]]
    sec = section_of(tris, np.array([1.0, 1.0]), 0.3, frame)
    assert sec.area_m2 == 4.0 and sec.is_round
    assert sec.I1_m4 == pytest.approx(16 / 12, rel=1e-14) and sec.I2_m4 == pytest.approx(16 / 12, rel=1e-14)
    np.testing.assert_array_equal(sec.u1, frame.t)
    assert sec.chord_m == pytest.approx(2 * math.sqrt(2), rel=1e-14)  # the diagonal


def test_integrate_outboard_trapezoid():
    # Trapezoid rule is exact for a linear integrand (numerical analysis, any text — from memory).
    r = np.array([0.0, 0.25, 0.5, 1.0])
    g = 1.0 - r  # zero at the tip radius 1: the end piece adds nothing
    np.testing.assert_allclose(integrate_outboard(r, g, 1.0), (1.0 - r) ** 2 / 2, rtol=1e-14)


# --- closed-form rotating solids --------------------------------------------------------------


@pytest.fixture(scope="module")
def cylinder_setup(tmp_path_factory):
    # 24-sided prism, axis along the pitch axis y, from y0 to y1.
    a, y0, y1, n = 0.05, 0.1, 0.6, 24
    cyl = trimesh.creation.cylinder(radius=a, height=y1 - y0, sections=n)
    cyl.apply_transform(trimesh.transformations.rotation_matrix(-math.pi / 2, [1, 0, 0]))
    cyl.apply_translation([0.0, 0.5 * (y0 + y1), 0.0])
    tmp = tmp_path_factory.mktemp("cyl")
    blade = _load(tmp, cyl, "cyl.stl")
    return blade, a, y0, y1, n, tmp


def _ring(blade):
    """The end polygon of the loaded prism as it is stored (STL holds float32 coordinates), and
    the two end radii."""
    v = blade.surfaces[0][0]
    y0, y1 = v[:, 1].min(), v[:, 1].max()
    ring = v[v[:, 1] == y1][:, [0, 2]]
    ring = ring[np.hypot(ring[:, 0], ring[:, 1]) > 0.5 * np.abs(ring).max()]  # not the cap's centre
    ring = ring[np.argsort(np.arctan2(ring[:, 1], ring[:, 0]))]
    return ring, float(y0), float(y1)


def _shoelace(p):
    """Polygon area by the surveyor's (shoelace) formula (elementary geometry)."""
    x, z = p[:, 0], p[:, 1]
    return 0.5 * abs(np.dot(x, np.roll(z, -1)) - np.dot(z, np.roll(x, -1)))


def test_cylinder_uniform_rotating_bar(cylinder_setup):
    # Uniform bar rotating about an axis through its root end: at station r,
    #   P = ρ A Ω² (y1² − r²)/2,  σ = P/A = ρ Ω² (y1² − r²)/2
    # (the classical rotating-bar result, any strength-of-materials / machine-design text — from
    # memory). The polygonal cylinder has its polygon's area exactly (shoelace formula on the
    # coordinates as stored; the STL file keeps them in single precision).
    blade, a, _, _, n, _ = cylinder_setup
    ring, y0, y1 = _ring(blade)
    A = _shoelace(ring)
    assert A == pytest.approx(0.5 * n * a**2 * math.sin(2 * math.pi / n), rel=1e-6)  # regular n-gon
    radii = [0.123, 0.25, 0.3777, 0.5, 0.59]
    T = span_table(blade, RPM, stations=radii, allowable_Pa=200e6)
    r = np.array(radii)
    np.testing.assert_allclose(T.area_m2, A, rtol=1e-12)
    np.testing.assert_allclose(T.mass_outboard_kg, RHO * A * (y1 - r), rtol=1e-11)
    P = RHO * A * OMEGA**2 * (y1**2 - r**2) / 2
    np.testing.assert_allclose(T.cf_outboard_N, P, rtol=1e-11)
    sigma = RHO * OMEGA**2 * (y1**2 - r**2) / 2
    np.testing.assert_allclose(T.stress_Pa, sigma, rtol=1e-11)
    np.testing.assert_allclose(T.margin_of_safety, 200e6 / sigma - 1, rtol=1e-10)
    # regular polygon: I = (n a⁴/24) sin(2π/n) (2 + cos(2π/n)) about any centroidal axis
    # (polygon second moment of area, handbook formula — from memory); single-precision storage
    # of the coordinates leaves ~1e-7 of anisotropy, well above round-off: not "round"
    I = n * a**4 / 24 * math.sin(2 * math.pi / n) * (2 + math.cos(2 * math.pi / n))
    np.testing.assert_allclose(T.I1_m4, I, rtol=1e-6)
    np.testing.assert_allclose(T.I2_m4, I, rtol=1e-6)
    # on the axis and symmetric: no CTM, no bending, no side force (symmetry)
    scale = RHO * A * OMEGA**2 * y1 * a
    assert np.all(np.abs(T.ctm_outboard_Nm) < 1e-9 * scale)
    assert np.all(np.abs(T.bending_principal_1_Nm) < 1e-9 * scale)
    assert np.all(np.abs(T.bending_principal_2_Nm) < 1e-9 * scale)
    assert np.all(np.abs(T.ctm_strip_outboard_Nm) < 1e-9 * scale)
    np.testing.assert_allclose(T.centroid_m[:, [0, 2]], 0.0, atol=1e-12)
    np.testing.assert_allclose(T.centroid_m[:, 1], r, rtol=1e-15)


def test_cylinder_lumped_mass_and_ends(cylinder_setup, tmp_path):
    # A point mass m at radius y_p adds m Ω² y_p to the tension inboard of it and nothing outboard
    # (elementary mechanics: centripetal force of a point mass, m Ω² r).
    blade0, a, y0, y1, n, tmp = cylinder_setup
    lm = api.LumpedMass("tip weight", 0.2, np.array([0.0, 0.45, 0.0]))
    blade = api.load_blade(tmp / "cyl.stl", "m", [f"{RHO} kg/m^3"], lumped=[lm])
    T0 = span_table(blade0, RPM, stations=[0.3, 0.5])
    T = span_table(blade, RPM, stations=[0.3, 0.5])
    assert T.mass_outboard_kg[0] - T0.mass_outboard_kg[0] == pytest.approx(0.2, rel=1e-12)
    assert T.cf_outboard_N[0] - T0.cf_outboard_N[0] == pytest.approx(0.2 * OMEGA**2 * 0.45, rel=1e-9)
    assert T.cf_outboard_N[1] == T0.cf_outboard_N[1]
    # just inboard of the root face: everything; at the tip: nothing
    _, y0, y1 = _ring(blade0)
    T = span_table(blade0, RPM, stations=[y0 - 1e-3, y1, y1 + 0.1])
    assert T.mass_outboard_kg[0] == pytest.approx(blade0.moments.mass, rel=1e-14)
    assert T.cf_outboard_N[0] == pytest.approx(api.loads_at(blade0, RPM).radial_pull_N, rel=1e-12)
    assert T.area_m2[0] == 0.0 and T.mass_outboard_kg[1] == 0.0 and T.mass_outboard_kg[2] == 0.0
    rows = spanwise_rows(T)
    assert rows[0]["stress_Pa"] is None and rows[0]["centroid_m"] == [None, None, None]


def _plate(frame, c0, c1, t, y0, y1):
    """Plate of thickness t, chord tapering linearly c0 → c1 from y0 to y1, centred on the pitch
    axis, chord direction (4 t + 3 f)/5: blade angle θ = atan(3/4). With c and t multiples of
    5·2⁻ᵏ every corner is exact in single precision (the STL file stores float32)."""
    U1 = 4 * frame.t + 3 * frame.f  # |U1| = 5
    U2 = np.cross(frame.a, U1)
    pts = []
    for y, c in ((y0, c0), (y1, c1)):
        for s1 in (-1, 1):
            for s2 in (-1, 1):
                pts.append((s1 * c * U1 + s2 * t * U2) / 10 + [0.0, y, 0.0])
    return trimesh.convex.convex_hull(np.array(pts))


THETA = math.degrees(math.atan2(3, 4))
C0, C1, THICK, Y0, Y1 = 5 / 16, 5 / 32, 5 / 256, 0.25, 1.0


@pytest.mark.parametrize("rotation", ["right", "left"])
def test_tapered_plate_closed_form(tmp_path, rotation):
    # Flat plate, constant thickness t, chord c(y) linear, centroid on the pitch axis, at blade
    # angle θ. Rectangle section: A = c t, I1 = t c³/12, I2 = c t³/12 (b h³/12, any handbook);
    # outboard CTM = −(ρΩ²/2) sin 2θ ∫ (I1 − I2) dy, the thin-blade CTM of docs/CONVENTIONS.md §4
    # (classical propeller mechanics, W. C. Nelson, "Airplane Propeller Principles", Wiley 1944 —
    # from memory), exact here because every section centroid lies on the pitch axis.
    frame = hub_frame(rotation=rotation)
    c0, c1, t, y0, y1 = C0, C1, THICK, Y0, Y1
    blade = _load(tmp_path, _plate(frame, c0, c1, t, y0, y1), "plate.stl", frame=frame)
    # the modelled angle is measured on the nose-to-tail chord: from the middle of one square edge
    # to the middle of the other, the plate's own direction (docs/CONVENTIONS.md §2)
    assert blade.modelled_deg == pytest.approx(THETA, abs=1e-9)
    radii = np.linspace(y0 + 1e-4, y1 - 1e-4, 41)
    beta = 40.0
    T = span_table(blade, RPM, blade_angle_deg=beta, stations=radii)
    th = THETA + (beta - blade.modelled_deg)  # every direction of the blade turns by Δβ
    cpoly = np.polynomial.Polynomial([c0 - (c1 - c0) / (y1 - y0) * y0, (c1 - c0) / (y1 - y0)])
    c = cpoly(radii)
    np.testing.assert_allclose(T.area_m2, c * t, rtol=1e-11)
    np.testing.assert_allclose(T.I1_m4, t * c**3 / 12, rtol=1e-10)
    np.testing.assert_allclose(T.I2_m4, c * t**3 / 12, rtol=1e-9)
    np.testing.assert_allclose(T.principal_angle_deg, th, atol=1e-9)
    # a rectangle's nose-to-tail chord is its length c, its thickness normal to it t, and its local
    # blade angle that of the plate itself, the header's reading (elementary geometry)
    np.testing.assert_allclose(T.chord_m, c, rtol=1e-11)
    np.testing.assert_allclose(T.thickness_m, t, rtol=1e-9)
    np.testing.assert_allclose(T.local_blade_angle_deg, th, atol=1e-9)
    mass = RHO * t * (cpoly.integ()(y1) - cpoly.integ()(radii))
    np.testing.assert_allclose(T.mass_outboard_kg, mass, rtol=1e-11)
    yc = (cpoly * np.polynomial.Polynomial([0, 1])).integ()
    np.testing.assert_allclose(T.cf_outboard_N, RHO * t * OMEGA**2 * (yc(y1) - yc(radii)), rtol=1e-11)
    dI = (t * cpoly**3 / 12 - cpoly * t**3 / 12).integ()
    k = -(RHO * OMEGA**2 / 2) * math.sin(math.radians(2 * th))
    ctm = k * (dI(y1) - dI(radii))
    np.testing.assert_allclose(T.ctm_outboard_Nm, ctm, rtol=1e-10)
    assert np.all(T.ctm_outboard_Nm < 0)  # toward fine at 0 < β < 90 (docs/CONVENTIONS.md §4)
    # bending about the section principal axes vanishes by symmetry (centroids on the axis)
    assert np.all(np.abs(T.bending_principal_1_Nm) < 1e-9 * abs(ctm[0]))
    assert np.all(np.abs(T.bending_principal_2_Nm) < 1e-9 * abs(ctm[0]))
    assert np.all(np.abs(T.ctm_offset_outboard_Nm) < 1e-9 * abs(ctm[0]))  # centroids on the axis
    # strip estimate: exactly the trapezoid sum of the handbook integrand over the same stations
    g = k * (t * c**3 / 12 - c * t**3 / 12)
    np.testing.assert_allclose(T.ctm_strip_per_length_N, g, rtol=1e-9)
    np.testing.assert_allclose(T.ctm_strip_outboard_Nm, integrate_outboard(radii, g, y1), rtol=1e-9)
    # ... and close to the exact integral (trapezoid error of a cubic over 40 steps)
    assert T.ctm_strip_outboard_Nm[0] == pytest.approx(ctm[0], rel=2e-3)


@pytest.mark.parametrize("angle_line", ["chord", "face"])
def test_square_edged_plate_at_zero_reads_zero_everywhere(tmp_path, angle_line):
    # A 10 mm square-edged flat plate modelled at 0° (chord along t, face aft): at every station
    # its thickness is 10 mm and its local blade angle 0°, on either reference line, the header's
    # reading; set to 30° every station reads 30° (elementary geometry; docs/CONVENTIONS.md §2).
    # The plate's corners are exact in the STL file's single precision (binary fractions).
    plate = trimesh.creation.box([0.25, 0.75, 0.0078125])
    plate.apply_translation([0.0, 0.625, 0.0])
    path = tmp_path / "plate.stl"
    plate.export(path)
    blade = api.load_blade(path, "m", [f"{RHO} kg/m^3"], angle_line=angle_line)
    assert blade.modelled_deg == 0.0 and blade.modelled_angle.reference_line == angle_line
    radii = np.linspace(0.26, 0.99, 9)
    T = span_table(blade, RPM, stations=radii)
    np.testing.assert_allclose(T.thickness_m, 0.0078125, rtol=1e-12)
    np.testing.assert_allclose(T.chord_m, 0.25, rtol=1e-12)
    np.testing.assert_allclose(T.local_blade_angle_deg, 0.0, atol=1e-12)
    T = span_table(blade, RPM, blade_angle_deg=30.0, stations=radii)
    np.testing.assert_allclose(T.local_blade_angle_deg, 30.0, atol=1e-12)


def test_two_bodies_area_weighted_density(tmp_path):
    # Two separate boxes of different densities: the solid figures use each body's own density;
    # the strip uses ρ = Σ ρ_i A_i / Σ A_i (area-weighted mean, definition).
    # (sizes exact in single precision)
    b1 = trimesh.creation.box([0.125, 0.5, 0.03125])
    b1.apply_translation([0.0, 0.5, 0.0])
    b2 = trimesh.creation.box([0.0625, 0.375, 0.03125])
    b2.apply_translation([0.25, 0.5625, 0.0])
    mesh = trimesh.util.concatenate([b1, b2])
    blade = _load(tmp_path, mesh, "two.stl", densities=["2810 kg/m^3", "7850 kg/m^3"])
    T = span_table(blade, RPM, stations=[0.5])
    A1, A2 = 0.125 * 0.03125, 0.0625 * 0.03125
    assert T.area_m2[0] == pytest.approx(A1 + A2, rel=1e-12)
    assert T.density_kg_m3[0] == pytest.approx((2810 * A1 + 7850 * A2) / (A1 + A2), rel=1e-12)
    assert T.mass_outboard_kg[0] == pytest.approx(2810 * A1 * 0.25 + 7850 * A2 * 0.25, rel=1e-11)
    assert "area-weighted" in T.density_note


# --- the demo blade -----------------------------------------------------------------------------


@pytest.fixture(scope="module")
def demo_blade(demo_path):
    return api.load_blade(demo_path, "mm", ["2810 kg/m^3"])


def test_demo_against_surface_clipping(demo_blade, demo_mesh):
    # Everything outboard of a station, by an independent route: trimesh clips and caps the closed
    # surface, our divergence-theorem integral sums it (reference library + independent formula).
    b = demo_blade
    radii = station_radii(b, 16)
    T = span_table(b, RPM, stations=radii)
    for i in (0, 3, 9, 14):
        ref = _outboard_by_surface(demo_mesh.vertices, demo_mesh.faces, radii[i]).scaled(RHO)
        assert T.mass_outboard_kg[i] == pytest.approx(ref.mass, rel=1e-9)
        assert T.cf_outboard_N[i] == pytest.approx(OMEGA**2 * ref.first[1], rel=1e-9)
        from bladesolid.loads import centrifugal_twisting_moment

        ctm = centrifugal_twisting_moment(ref, b.frame, OMEGA)
        assert T.ctm_outboard_Nm[i] == pytest.approx(ctm, rel=1e-8)
    # innermost station (inside the root face by 0.1 % of the span): nearly all the blade
    assert T.mass_outboard_kg[0] < b.moments.mass
    assert T.mass_outboard_kg[-1] < 1e-3 * b.moments.mass


def test_demo_section_area_against_trimesh(demo_blade, demo_mesh):
    # Plane section area from trimesh.section → to_planar → area (reference library).
    T = span_table(demo_blade, RPM, stations=[0.15, 0.26, 0.4, 0.75, 0.95])
    for r, A in zip(T.radius_m, T.area_m2):
        sec = demo_mesh.section(plane_origin=[0.0, r, 0.0], plane_normal=[0.0, 1.0, 0.0])
        planar, _ = sec.to_planar()
        assert A == pytest.approx(planar.area, rel=1e-9)
    # the shank is a circle of 38 mm radius (demo geometry, bladesolid/demo.py), polygonised
    assert T.area_m2[0] == pytest.approx(math.pi * 0.038**2, rel=2e-3)


def test_demo_refinement_changes_nothing(demo_blade):
    # The value at a radius does not depend on the other stations (property of an exact cut).
    b = demo_blade
    radii = np.linspace(0.12, 0.99, 40)
    r = float(radii[17])
    T40 = span_table(b, RPM, blade_angle_deg=35.0, stations=radii)
    T1 = span_table(b, RPM, blade_angle_deg=35.0, stations=[r])
    for key in ("area_m2", "mass_outboard_kg", "cf_outboard_N", "ctm_outboard_Nm", "stress_Pa",
                "bending_principal_1_Nm", "bending_principal_2_Nm", "I1_m4", "I2_m4", "chord_m"):
        assert getattr(T1, key)[0] == pytest.approx(getattr(T40, key)[17], rel=1e-12, abs=1e-300), key
    # The strip method takes each lamina about its own centroid; adding back the parallel-axis
    # term (each section's mass per length at its centroid) recovers the solid CTM as the
    # stations are refined (parallel-axis theorem, any statics text — from memory; no lumped
    # masses here). The strip alone misses it by far more.
    T = span_table(b, RPM, stations=64)
    total = T.ctm_strip_outboard_Nm[0] + T.ctm_offset_outboard_Nm[0]
    assert total == pytest.approx(T.ctm_outboard_Nm[0], rel=2e-3)
    assert abs(T.ctm_strip_outboard_Nm[0] - T.ctm_outboard_Nm[0]) > 20 * abs(total - T.ctm_outboard_Nm[0])
    # and the whole-blade CTM at the root equals the loads stage's CTM at the same blade angle
    T = span_table(b, RPM, blade_angle_deg=35.0, stations=[0.1])
    assert T.ctm_outboard_Nm[0] == pytest.approx(api.loads_at(b, RPM, 35.0).ctm_Nm, rel=1e-10)
    assert T.mass_outboard_kg[0] == pytest.approx(b.moments.mass, rel=1e-14)


def test_rows_plot_and_cli(cylinder_setup, tmp_path):
    blade, a, y0, y1, n, tmp = cylinder_setup
    T = span_table(blade, RPM, stations=4, allowable_Pa=200e6)
    rows = spanwise_rows(T)
    need = {"radius_m", "area_m2", "mass_outboard_kg", "cf_outboard_N", "ctm_outboard_Nm", "stress_Pa",
            "cf_outboard_vector_N", "centroid_m", "I1_m4", "I2_m4", "principal_angle_deg", "chord_m",
            "thickness_m", "bending_principal_1_Nm", "bending_principal_2_Nm", "margin_of_safety",
            "ctm_strip_outboard_Nm", "local_blade_angle_deg"}
    assert need <= set(rows[0]) and len(rows) == 4
    json.dumps(rows)
    assert [r["radius_m"] for r in rows] == sorted(r["radius_m"] for r in rows)
    png = tmp_path / "span.png"
    plot_span(T, png)
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    with pytest.raises(OutputExistsError):
        plot_span(T, png)  # refuses an existing file without force
    out = tmp_path / "s.json"
    args = [str(tmp / "cyl.stl"), "--units", "m", "--density", "2810", "--rpm", "2500",
            "--stations", "0.2,0.4", "--allowable", "200 MPa"]
    assert cli.main(["span", *args, "--json", str(out), "--csv", str(tmp_path / "s.csv"),
                     "--plot", str(tmp_path / "s.png")]) == 0
    data = json.loads(out.read_text())
    assert [r["radius_m"] for r in data["spanwise"]] == pytest.approx([0.2, 0.4])
    assert "centrifugal part only" in data["spanwise_note"]
    ring, _, y1 = _ring(blade)
    A = _shoelace(ring)
    assert data["spanwise"][0]["stress_Pa"] == pytest.approx(RHO * OMEGA**2 * (y1**2 - 0.04) / 2, rel=1e-10)
    assert data["spanwise"][0]["area_m2"] == pytest.approx(A, rel=1e-12)
    assert (tmp_path / "s.csv").read_text().splitlines()[1].startswith("radius_m,")  # after the caution line
    assert cli.main(["span", *args, "--json", str(out)]) == 2  # exists, no --force
