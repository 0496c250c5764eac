"""Centrifugal loads: classical results, handbook formulas and an independent brute-force route."""

import math

import numpy as np
import pytest
import trimesh
from scipy.spatial.transform import Rotation

from bladesolid.frame import hub_frame, measure_blade_angle
from bladesolid.loads import (
    CtmCurve,
    centrifugal_force,
    ctm_curve,
    operating_loads,
    second_about,
    size_counterweight,
    counterweight_position,
    moments_at_angle,
    centrifugal_twisting_moment,
)
from bladesolid.mesh import tetrahedralise_surface
from bladesolid.moments import moved, point_mass, surface_volume_moments, tet_volume_moments
from bladesolid.units import to_customary

RHO = 2810.0


def omega(rpm):
    return rpm * 2 * math.pi / 60


def plate(chord=0.2, span=0.8, thick=0.004, root=0.2):
    """A flat rectangular plate: chord along x, span along y (outboard), thickness along z."""
    box = trimesh.creation.box([chord, span, thick])
    box.apply_translation([0.0, root + span / 2, 0.0])
    return box


def test_flat_plate_ctm_classical():
    # Thin flat blade at blade angle β: CTM = −(Ω²/2) sin 2β (J_cc − J_nn), zero at 0° and 90°,
    # largest at 45°, toward fine. Classical propeller mechanics (e.g. W. C. Nelson,
    # "Airplane Propeller Principles", Wiley 1944, chapter on blade stresses — from memory).
    p = plate()
    frame = hub_frame()
    m0 = surface_volume_moments(p.vertices, p.faces).scaled(RHO)
    J = second_about(m0, frame.P)
    Jcc, Jnn = J[0, 0], J[2, 2]
    curve = ctm_curve(m0, frame, 0.0)
    w = omega(2500)
    betas = np.linspace(0, 90, 19)
    expected = -(w**2 / 2) * np.sin(np.radians(2 * betas)) * (Jcc - Jnn)
    got = curve.ctm(betas, w)
    np.testing.assert_allclose(got, expected, rtol=1e-10, atol=1e-9 * abs(expected).max())
    assert abs(curve.ctm(0.0, w)) < 1e-9 * abs(expected).max()
    assert abs(curve.ctm(90.0, w)) < 1e-9 * abs(expected).max()
    assert betas[np.argmin(got)] == 45.0 and np.all(got[1:-1] < 0)  # toward fine
    # the same through the full operating-point route
    op = operating_loads(m0, frame, 0.0, 30.0, 2500)
    assert op.ctm_Nm == pytest.approx(-(w**2 / 2) * math.sin(math.radians(60)) * (Jcc - Jnn), rel=1e-10)


def test_radial_pull_is_m_omega2_rcg():
    # F = m Ω² r_cg (any dynamics handbook, e.g. Meriam & Kraige, Dynamics — from memory)
    p = plate()
    m0 = surface_volume_moments(p.vertices, p.faces).scaled(RHO)
    for rpm in (1000.0, 2500.0):
        op = operating_loads(m0, hub_frame(), 0.0, 20.0, rpm)
        assert op.radial_pull_N == pytest.approx(m0.mass * omega(rpm) ** 2 * 0.6, rel=1e-12)


def test_thin_blade_free_pitch_frequency_ratio_tends_to_one():
    # ν/Ω → 1 for a thin blade at small blade angle: the classical "tennis racket" result of
    # rotor-blade pitch dynamics (W. Johnson, Helicopter Theory, 1980 — from memory).
    frame = hub_frame()
    for thick, beta, tol in ((0.004, 0.5, 1e-3), (0.0005, 0.05, 2e-5)):
        p = plate(thick=thick)
        m0 = surface_volume_moments(p.vertices, p.faces).scaled(RHO)
        op = operating_loads(m0, frame, 0.0, beta, 2500)
        assert op.free_pitch_frequency_ratio == pytest.approx(1.0, abs=tol)
        assert op.free_pitch_frequency_ratio < 1.0  # thickness and blade angle lower it


def test_rpm_scaling_is_omega_squared(demo_mesh):
    m0 = surface_volume_moments(demo_mesh.vertices, demo_mesh.faces).scaled(RHO)
    f = hub_frame()
    a = operating_loads(m0, f, 0.0, 25.0, 1000)
    b = operating_loads(m0, f, 0.0, 25.0, 3000)
    for key in ("radial_pull_N", "ctm_Nm", "pitch_stiffness_Nm_per_rad", "bending_out_of_plane_Nm"):
        assert getattr(b, key) == pytest.approx(9.0 * getattr(a, key), rel=1e-12)
    assert b.feathering_inertia_kgm2 == pytest.approx(a.feathering_inertia_kgm2, rel=1e-14)


def test_unit_conversions_of_outputs():
    # 1 lbf = 4.4482216152605 N and 1 in = 0.0254 m exactly (NIST SP 811); so
    # 1 N·m = 8.850745791 in·lbf and 1 N = 0.2248089431 lbf (NIST SP 811, appendix B — from memory)
    assert to_customary(1.0, "moment") == pytest.approx(8.850745791, rel=1e-9)
    assert to_customary(1.0, "force") == pytest.approx(0.2248089431, rel=1e-9)
    assert to_customary(1.0, "mass") == pytest.approx(2.20462262185, rel=1e-11)


# --- the independent brute-force route --------------------------------------------------

# Keast's 4-point rule on a tetrahedron is exact for polynomials of degree 2 (P. Keast 1986,
# "Moderate-degree tetrahedral quadrature formulas", CMAME 55 — from memory); the loads are
# quadratic in position, so the rule gives them exactly with no use of the moment formulas.
_A, _B = 0.5854101966249685, 0.1381966011250105
_BARY = np.array([[_A, _B, _B, _B], [_B, _A, _B, _B], [_B, _B, _A, _B], [_B, _B, _B, _A]])


def brute_force_loads(nodes, tets, rho, O, k, e, P, s, delta_deg, w):
    """Move every vertex (model frame) by Δβ about s·e through P, then sum r × dF by quadrature."""
    rot = Rotation.from_rotvec(s * e * math.radians(delta_deg))
    moved_nodes = P + rot.apply(nodes - P)
    v = moved_nodes[tets]
    vol = np.abs(np.einsum("ij,ij->i", np.cross(v[:, 1] - v[:, 0], v[:, 2] - v[:, 0]), v[:, 3] - v[:, 0])) / 6
    F = np.zeros(3)
    M_hub = np.zeros(3)
    ctm = 0.0
    for q in range(4):
        r = np.einsum("a,kai->ki", _BARY[q], v)  # quadrature points, model frame
        rel = r - O
        perp = rel - np.outer(rel @ k, k)
        dF = rho * w**2 * perp * (vol / 4)[:, None]
        F += dF.sum(axis=0)
        M_hub += np.cross(rel, dF).sum(axis=0)
        ctm += (np.cross(r - P, dF) @ (s * e)).sum()
    return F, M_hub, ctm


FRAMES = [
    dict(),  # identity, right-hand rotation
    dict(rotation="left"),
    dict(pitch_point=(0.012, 0.0, -0.008)),  # offset pitch axis
    dict(precone_deg=4.0),
    dict(precone_deg=-3.0, rotation="left", pitch_point=(-0.01, 0.0, 0.005)),
]


@pytest.fixture(scope="module")
def demo_elements(demo_mesh):
    nodes, tets = tetrahedralise_surface(demo_mesh.vertices, demo_mesh.faces)
    return nodes, tets


@pytest.mark.parametrize("kw", FRAMES)
@pytest.mark.parametrize("model_motion", [False, True])
def test_closed_forms_equal_brute_force(demo_elements, kw, model_motion):
    nodes_hub, tets = demo_elements
    # optionally put the blade in an arbitrary model frame (as a CAD model might be)
    if model_motion:
        Rm = Rotation.from_euler("zyx", [20, -35, 50], degrees=True).as_matrix()
        tm = np.array([0.3, -0.1, 0.7])
    else:
        Rm, tm = np.eye(3), np.zeros(3)
    nodes = nodes_hub @ Rm.T + tm
    O = tm
    k0, e0 = Rm @ [0, 0, 1.0], Rm @ [0, 1.0, 0]
    pp = kw.get("pitch_point")
    P = (Rm @ np.asarray(pp) + tm) if pp is not None else O
    frame = hub_frame(origin=O, thrust_axis=k0, pitch_axis=e0, pitch_point=P,
                      rotation=kw.get("rotation", "right"), precone_deg=kw.get("precone_deg"))
    s = frame.rotation
    # moments once, in the hub frame
    el = tet_volume_moments(nodes, tets).total().scaled(RHO)
    R, t = frame.model_to_hub()
    m0 = moved(el, R, t)
    curve = ctm_curve(m0, frame, 0.0)
    w = omega(2700)
    # precone cones the blade itself (docs/CONVENTIONS.md §1): the brute force turns the vertices,
    # the pitch point and the pitch axis about the hub's x axis (e × k) through O, tip forward
    C = Rotation.from_rotvec(np.cross(e0, k0) * math.radians(kw.get("precone_deg") or 0.0)).as_matrix()
    nodes_c, P_c, e_c = O + (nodes - O) @ C.T, O + C @ (P - O), C @ e0
    to_hub = R @ C.T  # vectors of the coned blade in the model frame -> hub frame
    for delta in (-37.0, -5.0, 0.0, 12.5, 44.0, 90.0, 133.0):
        op = operating_loads(m0, frame, 0.0, delta, 2700, curve=curve)
        F, M, ctm = brute_force_loads(nodes_c, tets, RHO, O, frame.thrust_axis, e_c, P_c, s, delta, w)
        # closed-form results are in the hub frame; bring the brute force there too
        np.testing.assert_allclose(op.cf_N, to_hub @ F, rtol=0, atol=1e-9 * np.linalg.norm(F))
        np.testing.assert_allclose(op.moment_hub_Nm, to_hub @ M, rtol=0, atol=1e-9 * np.linalg.norm(M))
        scale = max(abs(ctm), 1e-9 * np.linalg.norm(M))
        assert abs(op.ctm_Nm - ctm) <= 1e-9 * scale
        assert abs(float(curve.ctm(delta, w)) - ctm) <= 1e-9 * scale


def test_blade_angle_sign_matches_pitch_rotation(demo_mesh):
    # rotating the solid by +Δβ about a = s·e must raise the measured blade angle by Δβ
    for rot in ("right", "left"):
        frame = hub_frame(rotation=rot)
        v, f = demo_mesh.vertices, demo_mesh.faces
        if rot == "left":  # mirror the blade so that it is a left-hand blade
            v = v * [-1, 1, 1]
            f = f[:, ::-1]
        b0 = measure_blade_angle([(v, f)], frame, 0.75).angle_deg
        R = Rotation.from_rotvec(frame.a * math.radians(10.0))
        b1 = measure_blade_angle([(R.apply(v), f)], frame, 0.75).angle_deg
        assert b1 - b0 == pytest.approx(10.0, abs=1e-6)
        assert 10.0 < b0 < 40.0  # a propeller blade's angle at 0.75R (common practice, no source)


def test_ctm_zeros_and_stiffness_are_consistent():
    c = CtmCurve(np.array([0.3, -0.2, 0.1, -1.0, 0.4]))
    zs = c.zeros(-180, 180)
    assert len(zs) in (2, 4)
    for z in zs:
        assert abs(float(c.ctm(z, 1.0))) < 1e-12
    h = 1e-6
    for b in (-30.0, 10.0, 70.0):
        num = -(c.ctm(b + h, 1.0) - c.ctm(b - h, 1.0)) / (2 * math.radians(h))
        assert float(c.pitch_stiffness(b, 1.0)) == pytest.approx(float(num), rel=1e-6)


def test_counterweight_brings_ctm_to_target(demo_mesh):
    frame = hub_frame()
    m0 = surface_volume_moments(demo_mesh.vertices, demo_mesh.faces).scaled(RHO)
    ba = measure_blade_angle([(demo_mesh.vertices, demo_mesh.faces)], frame, 0.75)
    chord = ba.leading_edge - ba.trailing_edge
    pos = counterweight_position(frame, chord, 0.16, 0.09, 90.0)
    for target in (0.0, 50.0):
        s = size_counterweight(m0, frame, ba.angle_deg, pos, 30.0, 2500, target)
        assert s.mass_kg > 0
        total = m0 + point_mass(s.mass_kg, pos)
        ctm = centrifugal_twisting_moment(moments_at_angle(total, frame, 30.0 - ba.angle_deg), frame, omega(2500))
        assert float(ctm) == pytest.approx(target, abs=1e-8 * abs(s.ctm_per_kg_Nm))
        F = centrifugal_force(moments_at_angle(point_mass(s.mass_kg, pos), frame, 30.0 - ba.angle_deg),
                              frame.k, omega(2500))
        assert s.added_radial_pull_N == pytest.approx(F[1], rel=1e-12)
    # a counterweight on the chord line itself drives toward fine: it cannot balance
    with pytest.raises(ValueError):
        size_counterweight(m0, frame, ba.angle_deg, counterweight_position(frame, chord, 0.16, 0.09, 0.0),
                           30.0, 2500, 0.0)


# --- precone: the blade itself is coned ------------------------------------------------------


@pytest.mark.parametrize("phi, kw", [(6.0, {}), (-4.0, dict(rotation="left", pitch_point=(0.01, 0.0, -0.004)))])
def test_precone_equals_moving_the_mesh(phi, kw):
    # Precone φ (docs/CONVENTIONS.md §1) cones the blade about the hub's x axis through O. The same
    # blade moved by hand — its vertices and pitch point rotated with numpy, analysed with the
    # tilted pitch axis and no precone — must give the same hub moment, forces and CTM, and so must
    # the independent Keast quadrature over the moved elements (brute_force_loads above).
    p = plate()
    p.apply_translation([0.015, 0.0, 0.006])  # off the pitch axis: every term of the moment counts
    nodes, tets = tetrahedralise_surface(p.vertices, p.faces)
    C = Rotation.from_rotvec([math.radians(phi), 0.0, 0.0]).as_matrix()  # about x = e × k, tip to +k
    coned = hub_frame(precone_deg=phi, **kw)
    P = np.asarray(kw.get("pitch_point", (0.0, 0.0, 0.0)))
    by_hand = hub_frame(pitch_axis=C @ [0.0, 1.0, 0.0], pitch_point=C @ P, rotation=kw.get("rotation", "right"))
    moved_nodes = nodes @ C.T
    m_c = tet_volume_moments(coned.to_hub(nodes), tets).total().scaled(RHO)
    m_h = tet_volume_moments(by_hand.to_hub(moved_nodes), tets).total().scaled(RHO)
    np.testing.assert_allclose(coned.k, by_hand.k, atol=1e-15)
    assert coned.precone_deg == pytest.approx(phi, abs=1e-12) and by_hand.precone_deg == pytest.approx(phi, abs=1e-12)
    w = omega(2500)
    R_hub = by_hand.model_to_hub()[0]
    for beta in (0.0, 20.0, 65.0):
        a = operating_loads(m_c, coned, 0.0, beta, 2500)
        b = operating_loads(m_h, by_hand, 0.0, beta, 2500)
        F, M, ctm = brute_force_loads(moved_nodes, tets, RHO, np.zeros(3), np.array([0.0, 0.0, 1.0]),
                                      C @ [0.0, 1.0, 0.0], C @ P, coned.rotation, beta, w)
        scale = np.linalg.norm(M)
        for got in (a, b):
            np.testing.assert_allclose(got.cf_N, R_hub @ F, rtol=0, atol=1e-10 * np.linalg.norm(F))
            np.testing.assert_allclose(got.moment_hub_Nm, R_hub @ M, rtol=0, atol=1e-10 * scale)
            assert got.ctm_Nm == pytest.approx(ctm, abs=1e-10 * scale)
        assert a.bending_out_of_plane_Nm == pytest.approx(b.bending_out_of_plane_Nm, abs=1e-10 * scale)


def _box_moments(c, L, t, yc, zc):
    """Mass and ∫y², ∫z², ∫yz dm of a box c × L × t (along x, y, z) centred at (0, yc, zc), density
    RHO (parallel-axis theorem, any mechanics text)."""
    m = RHO * c * L * t
    return m, m * (yc**2 + L**2 / 12), m * (zc**2 + t**2 / 12), m * yc * zc


@pytest.mark.parametrize("zc", [0.0, 0.01, -0.01])
def test_precone_relieves_out_of_plane_bending(zc):
    # A point (x, y, z) of the blade coned by φ about x sits at Y = y cos φ − z sin φ,
    # Z = y sin φ + z cos φ; its centrifugal force Ω² (X, Y, 0) dm has the moment −Ω² Z Y dm about
    # the x axis (the out-of-plane bending, + tipping the blade forward). Integrated:
    #   M = −Ω² [sin φ cos φ (∫y² − ∫z²) + cos 2φ ∫yz]          (hand derivation)
    # — for small φ the coned rotor blade's centrifugal restoring moment −Ω² φ ∫ r² dm (rotor
    # flapping, W. Johnson, Helicopter Theory, 1980 — from memory). Precone therefore makes the
    # bending more negative, relieving the forward bending of the thrust; a CG forward of the
    # plane (zc > 0) already bends aft at φ = 0, one aft of it (zc < 0) bends forward until the
    # precone with tan 2φ = −2∫yz / (∫y² − ∫z²) balances it.
    c, L, t, root = 0.2, 0.8, 0.01, 0.2
    box = trimesh.creation.box([c, L, t])
    box.apply_translation([0.0, root + L / 2, zc])
    _, yy, zz, yz = _box_moments(c, L, t, root + L / 2, zc)
    w = omega(2500)
    got = []
    for phi in (0.0, 2.0, 5.0, 10.0):
        frame = hub_frame(precone_deg=phi)
        m0 = surface_volume_moments(frame.to_hub(box.vertices), box.faces).scaled(RHO)
        op = operating_loads(m0, frame, 0.0, 0.0, 2500)
        f = math.radians(phi)
        expected = -(w**2) * (math.sin(f) * math.cos(f) * (yy - zz) + math.cos(2 * f) * yz)
        assert op.bending_out_of_plane_Nm == pytest.approx(expected, rel=1e-10, abs=1e-9 * w**2 * yy)
        got.append(op.bending_out_of_plane_Nm)
    assert all(b < a for a, b in zip(got, got[1:]))  # falls with precone
    assert got[0] == pytest.approx(-(w**2) * yz, abs=1e-9 * w**2 * yy)
    if zc < 0:  # the balancing precone
        phi0 = 0.5 * math.degrees(math.atan(-2 * yz / (yy - zz)))
        frame = hub_frame(precone_deg=phi0)
        m0 = surface_volume_moments(frame.to_hub(box.vertices), box.faces).scaled(RHO)
        assert abs(operating_loads(m0, frame, 0.0, 0.0, 2500).bending_out_of_plane_Nm) < 1e-9 * w**2 * yy
