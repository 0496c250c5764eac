"""Blade angle as the trade measures it: the nose-to-tail chord line, the face line, sections on a
ring of the mesh, angles past 90° (docs/CONVENTIONS.md §2).

Every section here is built from its own closed form in chord units (ξ from the leading edge 0
to the trailing edge 1, η toward the suction side) and set to a blade angle β by the convention
itself: the chord direction (trailing to leading edge) is cos β t + sin β f, the suction side
a × that. So the expected readings are known exactly.
"""

import math

import numpy as np
import pytest
import trimesh

from bladesolid import api
from bladesolid.frame import (
    cut_section_lines,
    hub_frame,
    measure_blade_angle,
    outer_loops,
    polygon_area,
    section_loops,
)
from bladesolid.loads import operating_loads
from bladesolid.moments import surface_volume_moments

RHO = 2810.0


def _to_hub(ring, frame, beta_deg, chord=0.2, xp=0.3):
    """(n, 2) section points (ξ, η) in chord units → (n, 3) hub points at y = 0, blade angle β."""
    b = math.radians(beta_deg)
    c_hat = math.cos(b) * frame.t + math.sin(b) * frame.f
    s_hat = np.cross(frame.a, c_hat)
    return ((xp - ring[:, 0])[:, None] * c_hat + ring[:, 1][:, None] * s_hat) * chord


def loft(rings_y, frame, chord=0.2, xp=0.3):
    """A closed surface through section rings [(y, ring (n, 2) in chord units, β deg), ...] (all
    rings with the same number of points), capped at both ends by a fan from the ring's mean."""
    V, F = [], []
    n = len(rings_y[0][1])
    for y, ring, beta in rings_y:
        V.append(_to_hub(ring, frame, beta, chord, xp) + [0.0, y, 0.0])
    V = np.vstack(V)
    for k in range(len(rings_y) - 1):
        for i in range(n):
            j = (i + 1) % n
            a, b, c, d = k * n + i, k * n + j, (k + 1) * n + j, (k + 1) * n + i
            F += [[a, b, c], [a, c, d]]
    caps = []
    for k, side in ((0, 1), (len(rings_y) - 1, -1)):
        centre = len(V) + len(caps)
        caps.append(V[k * n:(k + 1) * n].mean(axis=0))
        for i in range(n):
            j = (i + 1) % n
            F.append([centre, k * n + j, k * n + i] if side > 0 else [centre, k * n + i, k * n + j])
    V = np.vstack([V, np.array(caps)])
    F = np.array(F, dtype=np.int64)
    m = trimesh.Trimesh(V, F, process=False)
    if m.volume < 0:
        F = F[:, ::-1]
    return V, F


def prism(ring, frame, beta, chord=0.2, y0=0.2, y1=1.0):
    """A straight blade of one section from y0 to y1 (surfaces for the frame functions)."""
    return [loft([(y0, ring, beta), (y1, ring, beta)], frame, chord)]


def rectangle(t_over_c):
    """Square-edged flat plate, chord 1, thickness t/c, centred on η = 0."""
    h = 0.5 * t_over_c
    return np.array([[0.0, -h], [1.0, -h], [1.0, h], [0.0, h]])


def naca_blunt(n=80, tau=0.12, base=0.015):
    """Symmetric NACA 4-digit section (thickness τ) opened to a square trailing-edge base of
    ``base`` chord by a linear term (NACA 4-digit half-thickness, from memory). The ring runs
    trailing edge → upper side → nose → lower side; the base closes it."""
    x = 0.5 * (1.0 - np.cos(np.linspace(0.0, np.pi, n + 1)))  # includes the nose x = 0

    def half(xx):
        return 5 * tau * (0.2969 * np.sqrt(xx) - 0.1260 * xx - 0.3516 * xx**2 + 0.2843 * xx**3 - 0.1015 * xx**4)

    yt = half(x) + x * (0.5 * base - half(1.0))
    upper = np.column_stack([x, yt])[::-1]
    lower = np.column_stack([x, -yt])[1:]
    return np.vstack([upper, lower])


# --- square and blunt edges -----------------------------------------------------------------


@pytest.mark.parametrize("t, c", [(0.006, 0.300), (0.010, 0.200)])
@pytest.mark.parametrize("rotation", ["right", "left"])
def test_square_edged_plate_reads_its_own_angle(t, c, rotation):
    # A square-edged flat plate modelled at 0°: its nose-to-tail chord runs from the middle of
    # one square edge to the middle of the other, along the plate (elementary geometry). The
    # two points farthest apart — the diagonal — read −atan(t/c) instead: −1.15° for 6 × 300 mm,
    # −2.86° for 10 × 200 mm.
    frame = hub_frame(rotation=rotation)
    for beta in (0.0, 33.0, -12.5):
        ba = measure_blade_angle(prism(rectangle(t / c), frame, beta, chord=c), frame, 0.75)
        assert ba.angle_deg == pytest.approx(beta, abs=1e-9)
        assert ba.chord_deg == ba.angle_deg and ba.reference_line == "chord"
        assert ba.chord_m == pytest.approx(c, rel=1e-12)
        assert ba.thickness_m == pytest.approx(t, rel=1e-9)
        # the flat face is a face line of the same angle; a flat plate has no shape to tell the
        # leading edge by, so the end facing the direction of motion leads
        assert ba.face_deg == pytest.approx(beta, abs=1e-9)
        assert ba.lead_from == "direction of motion"
        assert (ba.leading_edge - ba.trailing_edge) @ frame.t > 0
    diagonal = math.degrees(math.atan(t / c))
    assert diagonal == pytest.approx({0.006: 1.1457, 0.010: 2.8624}[t], abs=1e-4)


@pytest.mark.parametrize("beta", [0.0, 25.0, 60.0])
@pytest.mark.parametrize("rotation", ["right", "left"])
def test_blunt_symmetric_section_reads_its_set_angle(beta, rotation):
    # NACA 0012 with a trailing-edge base of 1.5 % chord: the trailing-edge point is the middle of
    # the base, the leading edge the nose (by symmetry the point farthest from it), so the chord is
    # the section's own axis (construction). The farthest-apart points — nose to a base corner —
    # would read atan(0.0075) = 0.43° off.
    frame = hub_frame(rotation=rotation)
    ba = measure_blade_angle(prism(naca_blunt(), frame, beta), frame, 0.75)
    assert ba.angle_deg == pytest.approx(beta, abs=1e-9)
    assert ba.chord_m == pytest.approx(0.2, rel=1e-12)
    assert ba.lead_from == "shape"  # thickest near 30 % chord: the nose end leads
    np.testing.assert_allclose(ba.trailing_edge, _to_hub(np.array([[1.0, 0.0]]), frame, beta)[0] + [0, 0.75, 0],
                               atol=1e-15)
    assert math.degrees(math.atan(0.0075)) == pytest.approx(0.43, abs=0.005)


def test_plano_convex_section_face_and_chord():
    # Flat face from the nose (0, 0) to the tail (1, 0), back η = h ξ + A ξ (1 − ξ)² (thickest
    # near ξ = 1/3), square base of height h at the tail. Face line: the flat, at the set angle.
    # Chord: nose (0, 0) to the middle of the base (1, h/2), turned from the face by −atan(h/2)
    # toward the face (construction; elementary geometry).
    h, A = 0.02, 0.4
    x = np.linspace(0.0, 1.0, 101)
    back = np.column_stack([x, h * x + A * x * (1 - x) ** 2])[::-1]  # tail (1, h) → nose (0, 0)
    face = np.column_stack([x, np.zeros_like(x)])[1:]               # (0.01, 0) → tail (1, 0)
    ring = np.vstack([back, face])
    for rotation in ("right", "left"):
        frame = hub_frame(rotation=rotation)
        for beta in (0.0, 18.0, 41.0):
            surfaces = prism(ring, frame, beta)
            ba = measure_blade_angle(surfaces, frame, 0.75)
            delta = math.degrees(math.atan(h / 2))
            assert ba.chord_deg == pytest.approx(beta - delta, abs=1e-9)
            assert ba.face_deg == pytest.approx(beta, abs=1e-9)
            assert ba.face_minus_chord_deg == pytest.approx(delta, abs=1e-9)
            assert ba.angle_deg == ba.chord_deg and ba.lead_from == "shape"
            # the face line is the whole flat: from the tail (1, 0) to the nose (0, 0)
            ends = _to_hub(np.array([[1.0, 0.0], [0.0, 0.0]]), frame, beta) + [0, 0.75, 0]
            np.testing.assert_allclose([ba.face_trailing, ba.face_leading], ends, atol=1e-15)
            # measured on the face: the angle and the thickness normal to the face (the largest
            # height of the back above the flat, brute force over the ring's own points)
            bf = measure_blade_angle(surfaces, frame, 0.75, line="face")
            assert bf.angle_deg == pytest.approx(beta, abs=1e-9) and bf.reference_line == "face"
            assert bf.chord_deg == ba.chord_deg
            assert bf.thickness_m == pytest.approx(0.2 * ring[:, 1].max(), rel=1e-9)


def test_unknown_reference_line_is_refused():
    from bladesolid.errors import InputError

    frame = hub_frame()
    with pytest.raises(InputError, match="chord.*face"):
        measure_blade_angle(prism(rectangle(0.05), frame, 0.0), frame, 0.75, line="protractor")


# --- a station on a ring of the mesh --------------------------------------------------------


def _loft_rings():
    """A square-edged plate lofted through rings at 0.2, 0.5, 0.75 and 1.0 m with its blade angle
    changing 23° → 21.5° → 20° → 19°: a ring lies exactly at the reference station 0.75 × 1.0 m."""
    return [(0.2, 23.0), (0.5, 21.5), (0.75, 20.0), (1.0, 19.0)]


@pytest.mark.parametrize("rotation", ["right", "left"])
def test_station_on_a_ring_is_that_ring(rotation):
    # The plane meets the loft only at the ring's vertices: the section is that ring itself, not
    # an interpolation between neighbouring rings (a strict crossing test finds nothing there).
    frame = hub_frame(rotation=rotation)
    plate = rectangle(0.05)
    V, F = loft([(y, plate, b) for y, b in _loft_rings()], frame)
    loops = section_loops([(V, F)], 0.75)
    assert len(loops) == 1 and len(loops[0]) == 4
    ring = _to_hub(plate, frame, 20.0) + [0.0, 0.75, 0.0]
    got = {tuple(np.round(p, 15)) for p in loops[0]}
    assert got == {tuple(np.round(p, 15)) for p in ring}
    assert abs(polygon_area(loops[0][:, [0, 2]])) == pytest.approx(0.2 * 0.2 * 0.05, rel=1e-12)
    ba = measure_blade_angle([(V, F)], frame, 0.75)
    assert ba.angle_deg == pytest.approx(20.0, abs=1e-9)
    # the stations either side cut the loft between rings: angles between their rings'
    assert 19.0 < measure_blade_angle([(V, F)], frame, 0.8).angle_deg < 20.0
    assert 20.0 < measure_blade_angle([(V, F)], frame, 0.7).angle_deg < 21.5


def test_faces_lying_in_the_plane_follow_the_tie_rule():
    # Outboard is y > r, inboard y ≤ r: a root face in the plane is the section (the whole blade is
    # outboard of it), a tip face in the plane leaves nothing outboard — an empty section.
    frame = hub_frame()
    surfaces = prism(rectangle(0.05), frame, 10.0, y0=0.2, y1=1.0)
    root = section_loops(surfaces, 0.2)
    assert len(root) == 1 and abs(polygon_area(root[0][:, [0, 2]])) == pytest.approx(0.2 * 0.01, rel=1e-12)
    assert section_loops(surfaces, 1.0) == []
    assert cut_section_lines(surfaces, frame, 1.0) is None


def test_cavity_keeps_the_outer_contour():
    # A hollow blade: the outer skin and an inner skin (the cavity) give two nested contours; only
    # the outer one is the section's outline, and the reading is that of the solid section.
    frame = hub_frame()
    outer = prism(naca_blunt(), frame, 22.0)[0]
    inner = naca_blunt(tau=0.06, base=0.0)
    inner = np.column_stack([0.3 + 0.4 * inner[:, 0], 0.4 * inner[:, 1]])  # well inside the skin
    V2, F2 = loft([(0.2, inner, 22.0), (1.0, inner, 22.0)], frame)
    loops = section_loops([outer, (V2, F2[:, ::-1])], 0.75)
    assert len(loops) == 2
    kept = outer_loops(loops)
    areas = [abs(polygon_area(p[:, [0, 2]])) for p in loops]
    assert len(kept) == 1 and abs(polygon_area(kept[0][:, [0, 2]])) == max(areas)
    assert measure_blade_angle([outer, (V2, F2[:, ::-1])], frame, 0.75).angle_deg == pytest.approx(22.0, abs=1e-9)


def test_sheath_beside_the_blade_is_part_of_the_section():
    # A separate body along the leading edge (a sheath) stays in the outline: the leading edge is
    # then the sheath's nose (a longer chord), the trailing edge the blade's.
    frame = hub_frame()
    plate = rectangle(0.05)
    sheath = np.array([[-0.1, -0.025], [0.0, -0.025], [0.0, 0.025], [-0.1, 0.025]])
    surfaces = prism(plate, frame, 15.0) + prism(sheath, frame, 15.0)
    lines = cut_section_lines(surfaces, frame, 0.75)
    assert lines.chord_m == pytest.approx(0.2 * 1.1, rel=1e-12)
    assert lines.chord_deg == pytest.approx(15.0, abs=1e-9)


# --- past 90° -------------------------------------------------------------------------------


@pytest.mark.parametrize("beta", [95.0, 120.0, 170.0, -100.0])
@pytest.mark.parametrize("rotation", ["right", "left"])
def test_blade_turned_past_90_reads_continuously(beta, rotation):
    # The leading edge is read from the section's shape, so a blade modelled at 95° reads 95°,
    # not −85°; its loads at that angle equal those of the same blade modelled at 25° and set to
    # β (the same solid in the same place: the in-plane force and bending keep their sign).
    frame = hub_frame(rotation=rotation)
    ring = naca_blunt()
    s_b, s_25 = prism(ring, frame, beta)[0], prism(ring, frame, 25.0)[0]
    got = measure_blade_angle([s_b], frame, 0.75).angle_deg
    assert got == pytest.approx(beta, abs=1e-9)
    m_b = surface_volume_moments(*s_b).scaled(RHO)
    m_25 = surface_volume_moments(*s_25).scaled(RHO)
    a = operating_loads(m_b, frame, got, beta, 2500)
    b = operating_loads(m_25, frame, measure_blade_angle([s_25], frame, 0.75).angle_deg, beta, 2500)
    scale = np.linalg.norm(a.moment_hub_Nm)
    np.testing.assert_allclose(a.cf_N, b.cf_N, rtol=0, atol=1e-9 * np.linalg.norm(a.cf_N))
    np.testing.assert_allclose(a.moment_hub_Nm, b.moment_hub_Nm, rtol=0, atol=1e-9 * scale)
    assert a.ctm_Nm == pytest.approx(b.ctm_Nm, abs=1e-9 * scale)
    assert a.bending_in_plane_Nm == pytest.approx(b.bending_in_plane_Nm, abs=1e-9 * scale)


# --- spanwise stations on a ring -----------------------------------------------------------


def test_span_station_on_a_ring_is_exact(tmp_path):
    # The loft of test_station_on_a_ring_is_that_ring as a meshed blade, cut at 0.75 m exactly:
    # the section is the ring (area c·t, chord c, thickness t, the ring's 20° — the header's
    # line and sign), and the mass outboard equals ρ × the volume of the outboard part of the
    # loft closed by the ring, from trimesh (reference library): no element counted twice or lost.
    from bladesolid.span import span_table

    frame = hub_frame()
    c, t = 0.2, 0.01
    V, F = loft([(y, rectangle(t / c), b) for y, b in _loft_rings()], frame, chord=c)
    path = tmp_path / "loft.stl"
    trimesh.Trimesh(V, F, process=False).export(path)
    blade = api.load_blade(path, "m", [f"{RHO} kg/m^3"])
    assert blade.reference_radius_m == 0.75
    assert blade.modelled_deg == pytest.approx(20.0, abs=1e-5)  # float32 corners in the STL file
    T = span_table(blade, 2500, stations=[0.5, 0.75, 0.9])
    v, f = blade.surfaces[0]
    ring = v[v[:, 1] == 0.75]
    assert len(ring) == 4
    order = np.argsort(np.arctan2(ring[:, 2] - ring[:, 2].mean(), ring[:, 0] - ring[:, 0].mean()))
    q = ring[order][:, [0, 2]]
    assert T.area_m2[1] == pytest.approx(abs(polygon_area(q)), rel=1e-12)
    assert T.chord_m[1] == pytest.approx(c, rel=1e-6) and T.thickness_m[1] == pytest.approx(t, rel=1e-5)
    assert T.local_blade_angle_deg[1] == pytest.approx(blade.modelled_deg, abs=1e-9)
    # outboard part: the faces with every vertex at y ≥ 0.75, closed by the ring
    keep = np.all(v[f][:, :, 1] >= 0.75, axis=1)
    fo = f[keep]
    centre = len(v)
    ring_ix = np.flatnonzero(v[:, 1] == 0.75)[order]
    cap = [[centre, ring_ix[(i + 1) % 4], ring_ix[i]] for i in range(4)]
    closed = trimesh.Trimesh(np.vstack([v, ring.mean(axis=0)]), np.vstack([fo, cap]), process=False)
    closed.fix_normals()
    assert closed.is_watertight
    assert T.mass_outboard_kg[1] == pytest.approx(RHO * abs(closed.volume), rel=1e-10)
