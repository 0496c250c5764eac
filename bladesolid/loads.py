"""Centrifugal loads in steady rotation, in closed form from the mass moments (docs/CONVENTIONS.md §4).

Every function takes mass moments in the hub frame (a :class:`~bladesolid.moments.Moments`
or, broadcasting over elements, :class:`~bladesolid.moments.ElementMoments`) and the angular
speed Ω in rad/s, and returns SI values. No element is ever moved: a blade angle is applied
by the rigid motion of the moments (:func:`moments_at_angle`), and the CTM over the whole
blade-angle range is the trigonometric polynomial of :class:`CtmCurve`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .frame import HubFrame, pitch_motion
from .moments import Moments, moved, point_mass
from .units import rpm_to_rad_s


# --- the formulas, each written once ---------------------------------------------------


def normal_to_axis(v: np.ndarray, k: np.ndarray) -> np.ndarray:
    """The part of vectors (..., 3) normal to the unit axis k: v − (v·k) k."""
    return v - (v @ k)[..., None] * k


def centrifugal_force(m, k: np.ndarray, omega: float) -> np.ndarray:
    """F = Ω² ∫ r⊥ dm = Ω² (m c)⊥, N; (..., 3) in the frame of the moments."""
    return omega**2 * normal_to_axis(m.first, k)


def centrifugal_moment(m, point: np.ndarray, k: np.ndarray, omega: float) -> np.ndarray:
    """Centrifugal moment about ``point``: Ω² ∫ (r − Q) × r⊥ dm = Ω² [k × (S k) − Q × (m c)⊥], N·m."""
    Sk = m.second @ k
    return omega**2 * (np.cross(k, Sk) - np.cross(point, normal_to_axis(m.first, k)))


def centrifugal_twisting_moment(m, frame: HubFrame, omega: float):
    """CTM = a · Ω² ∫ (r − P) × r⊥ dm, N·m; + toward coarse (increasing blade angle)."""
    return centrifugal_moment(m, frame.P, frame.k, omega) @ frame.a


def second_about(m, point: np.ndarray) -> np.ndarray:
    """J = ∫ (r − Q)(r − Q)ᵀ dm, kg·m² (..., 3, 3)."""
    f = m.first
    mass = np.asarray(m.mass, dtype=float)
    return (
        m.second
        - f[..., :, None] * point
        - point[:, None] * f[..., None, :]
        + mass[..., None, None] * np.outer(point, point)
    )


def feathering_inertia(m, frame: HubFrame):
    """I_f = tr(J) − aᵀ J a with J the second moments about the pitch point, kg·m²."""
    J = second_about(m, frame.P)
    return np.trace(J, axis1=-2, axis2=-1) - frame.a @ J @ frame.a


def polar_inertia(m, k: np.ndarray):
    """Moment of inertia about the rotation axis, kᵀ I k = ∫ |r⊥|² dm, kg·m²."""
    S = m.second
    return np.trace(S, axis1=-2, axis2=-1) - k @ S @ k


def static_moment(m, k: np.ndarray):
    """Static moment m |c⊥| about the rotation axis, kg·m."""
    return np.linalg.norm(normal_to_axis(m.first, k), axis=-1)


def radial_pull(m, frame: HubFrame, omega: float):
    """Radial pull: the centrifugal force along the pitch axis, F·e, N."""
    return centrifugal_force(m, frame.k, omega) @ frame.e


def moments_at_angle(m0, frame: HubFrame, delta_deg: float):
    """Moments (hub frame) of the blade turned ``delta_deg`` toward coarse from the modelled
    position, by the rigid motion of docs/CONVENTIONS.md §3 (no element is moved)."""
    R, t = pitch_motion(frame, delta_deg)
    return moved(m0, R, t)


# --- CTM over the blade-angle range ----------------------------------------------------


@dataclass(frozen=True)
class CtmCurve:
    """CTM(β) = Ω² (a0 + a1 cos β + b1 sin β + a2 cos 2β + b2 sin 2β), N·m.

    coefficients : (5,) [a0, a1, b1, a2, b2] in kg·m² (CTM per Ω²), β the absolute blade angle.
    """

    coefficients: np.ndarray

    def ctm(self, beta_deg, omega: float):
        """CTM at blade angle(s) ``beta_deg`` (degrees) and Ω (rad/s), N·m."""
        a0, a1, b1, a2, b2 = self.coefficients
        b = np.radians(beta_deg)
        return omega**2 * (a0 + a1 * np.cos(b) + b1 * np.sin(b) + a2 * np.cos(2 * b) + b2 * np.sin(2 * b))

    def pitch_stiffness(self, beta_deg, omega: float):
        """Centrifugal pitch stiffness K = −dCTM/dβ, N·m/rad."""
        a0, a1, b1, a2, b2 = self.coefficients
        b = np.radians(beta_deg)
        d = -a1 * np.sin(b) + b1 * np.cos(b) - 2 * a2 * np.sin(2 * b) + 2 * b2 * np.cos(2 * b)
        return -(omega**2) * d

    def zeros(self, lo_deg: float = -180.0, hi_deg: float = 180.0) -> list[float]:
        """Blade angles (degrees, sorted, within [lo, hi]) where the CTM is zero.

        With z = e^{iβ} the curve times 2z² is a quartic in z; its roots on the unit
        circle are the zero crossings.
        """
        a0, a1, b1, a2, b2 = self.coefficients
        scale = max(np.abs(self.coefficients).max(), 1e-300)
        # 2 z² f(z) = (a2 − i b2) z⁴ + (a1 − i b1) z³ + 2 a0 z² + (a1 + i b1) z + (a2 + i b2)
        poly = np.array([a2 - 1j * b2, a1 - 1j * b1, 2 * a0, a1 + 1j * b1, a2 + 1j * b2]) / scale
        while len(poly) > 1 and abs(poly[0]) < 1e-14:
            poly = poly[1:]
        if len(poly) <= 1:
            return []
        out = []
        for z in np.roots(poly):
            if abs(abs(z) - 1.0) < 1e-6:
                beta = math.degrees(math.atan2(z.imag, z.real))
                for shift in (-360.0, 0.0, 360.0):
                    b = beta + shift
                    if lo_deg - 1e-9 <= b <= hi_deg + 1e-9:
                        out.append(self._polish(b))
        out = sorted(out)
        dedup = []
        for b in out:
            if not dedup or abs(b - dedup[-1]) > 1e-6:
                dedup.append(b)
        return dedup

    def _polish(self, beta_deg: float) -> float:
        """A few Newton steps on the closed form (roots of the quartic are good to ~1e-8)."""
        b = beta_deg
        for _ in range(3):
            k = self.pitch_stiffness(b, 1.0)
            if k == 0:
                break
            b = b + math.degrees(float(self.ctm(b, 1.0)) / float(k))
        return float(b)


def ctm_curve(m0, frame: HubFrame, modelled_deg: float) -> CtmCurve:
    """The five CTM coefficients from the moments at the modelled blade angle.

    The CTM is a trigonometric polynomial of degree 2 in β (R(Δβ) enters at most
    quadratically), so sampling it at eight equally spaced blade angles and taking the
    discrete Fourier sums gives the coefficients exactly (to round-off).
    """
    n = 8
    betas = np.arange(n) * (360.0 / n)
    ctm = np.array(
        [float(centrifugal_twisting_moment(moments_at_angle(m0, frame, b - modelled_deg), frame, 1.0)) for b in betas]
    )
    r = np.radians(betas)
    coeff = np.array(
        [
            ctm.mean(),
            2.0 / n * np.sum(ctm * np.cos(r)),
            2.0 / n * np.sum(ctm * np.sin(r)),
            2.0 / n * np.sum(ctm * np.cos(2 * r)),
            2.0 / n * np.sum(ctm * np.sin(2 * r)),
        ]
    )
    return CtmCurve(coeff)


# --- figures at an operating point -------------------------------------------------------


@dataclass(frozen=True)
class OperatingLoads:
    """Centrifugal loads of one blade at one speed and blade angle (hub frame, SI).

    cf_N : (3,) centrifugal force, N;  radial_pull_N : F·e, N
    moment_hub_Nm : (3,) centrifugal moment about the hub centre O, N·m, split into
      bending_out_of_plane_Nm (about e × f: + tips the blade forward),
      bending_in_plane_Nm (about e × t: + pushes the tip in the direction of rotation) and
      twisting_about_pitch_axis_at_hub_Nm (about e through O)
    ctm_Nm : CTM about the pitch axis, + toward coarse
    """

    name: str
    rpm: float
    omega_rad_s: float
    blade_angle_deg: float
    cf_N: np.ndarray
    radial_pull_N: float
    moment_hub_Nm: np.ndarray
    bending_out_of_plane_Nm: float
    bending_in_plane_Nm: float
    twisting_about_pitch_axis_at_hub_Nm: float
    ctm_Nm: float
    feathering_inertia_kgm2: float
    pitch_stiffness_Nm_per_rad: float
    free_pitch_frequency_ratio: float | None
    polar_inertia_kgm2: float
    static_moment_kgm: float


def frequency_ratio(stiffness: float, omega: float, inertia: float) -> float | None:
    """Free-pitch frequency ratio ν/Ω = sqrt(K / (Ω² I_f)); None when K ≤ 0 (no restoring)."""
    if omega <= 0 or inertia <= 0 or stiffness <= 0:
        return None
    return math.sqrt(stiffness / (omega**2 * inertia))


def operating_loads(m0: Moments, frame: HubFrame, modelled_deg: float, blade_angle_deg: float,
                    rpm: float, name: str = "", curve: CtmCurve | None = None) -> OperatingLoads:
    """All centrifugal figures of docs/CONVENTIONS.md §4 at one speed (rpm) and blade angle (deg)."""
    omega = rpm_to_rad_s(rpm)
    m = moments_at_angle(m0, frame, blade_angle_deg - modelled_deg)
    curve = curve or ctm_curve(m0, frame, modelled_deg)
    F = centrifugal_force(m, frame.k, omega)
    M = centrifugal_moment(m, np.zeros(3), frame.k, omega)
    e, f, t = frame.e, frame.f, frame.t
    If = float(feathering_inertia(m, frame))
    K = float(curve.pitch_stiffness(blade_angle_deg, omega))
    return OperatingLoads(
        name=name,
        rpm=float(rpm),
        omega_rad_s=omega,
        blade_angle_deg=float(blade_angle_deg),
        cf_N=F,
        radial_pull_N=float(F @ e),
        moment_hub_Nm=M,
        bending_out_of_plane_Nm=float(M @ np.cross(e, f)),
        bending_in_plane_Nm=float(M @ np.cross(e, t)),
        twisting_about_pitch_axis_at_hub_Nm=float(M @ e),
        ctm_Nm=float(centrifugal_twisting_moment(m, frame, omega)),
        feathering_inertia_kgm2=If,
        pitch_stiffness_Nm_per_rad=K,
        free_pitch_frequency_ratio=frequency_ratio(K, omega, If),
        polar_inertia_kgm2=float(polar_inertia(m, frame.k)),
        static_moment_kgm=float(static_moment(m, frame.k)),
    )


# --- proof load and counterweights -------------------------------------------------------

PROOF_FACTOR = 2.0
PROOF_SOURCE = ("14 CFR 35.35, centrifugal load tests: the hub, blade retention and counterweights carry twice "
                "the centrifugal force at the maximum rated rotational speed (from memory)")


def proof_load(radial_pull_N: float, factor: float = PROOF_FACTOR) -> float:
    """Centrifugal proof load, N: ``factor`` × the radial pull at the maximum rated speed."""
    return float(factor) * float(radial_pull_N)


@dataclass(frozen=True)
class ProofLoad:
    """Centrifugal proof load (docs/CONVENTIONS.md §4), N: ``factor`` × the radial pull at
    ``rpm`` of everything that turns with the blade, split into its parts.

    blade_angle_deg : the blade angle the pull is taken at (it depends on the blade angle only
      through the precone, which tilts the rotation axis out of the plane normal to e)
    """

    factor: float
    rpm: float
    blade_angle_deg: float
    radial_pull_solid_N: float
    radial_pull_lumped_N: float
    radial_pull_counterweight_N: float

    @property
    def radial_pull_N(self) -> float:
        return self.radial_pull_solid_N + self.radial_pull_lumped_N + self.radial_pull_counterweight_N

    @property
    def proof_load_N(self) -> float:
        return proof_load(self.radial_pull_N, self.factor)


def proof_load_at(solid: Moments, lumped: Moments, frame: HubFrame, modelled_deg: float, blade_angle_deg: float,
                  rpm: float, factor: float = PROOF_FACTOR, counterweight: Moments | None = None) -> ProofLoad:
    """The proof load at the maximum rated speed ``rpm`` and a blade angle (deg): the solid,
    the lumped masses and the counterweight (hub-frame moments at the modelled position; the
    counterweight None when there is none), each turned to the blade angle with the blade.

    A bar of 1 kg with its CG at 0.5 m, 1000 rpm, factor 2: 2 × m Ω² r
    (m Ω² r: centripetal force of a point mass, any dynamics text).

    >>> from bladesolid.frame import hub_frame
    >>> p = proof_load_at(point_mass(1.0, [0, 0.5, 0]), point_mass(0.0, [0, 0, 0]), hub_frame(), 0.0, 20.0, 1000.0)
    >>> round(p.proof_load_N, 6) == round(2 * 0.5 * (1000 * 2 * math.pi / 60) ** 2, 6)
    True
    """
    omega = rpm_to_rad_s(rpm)
    delta = blade_angle_deg - modelled_deg

    def pull(m):
        return 0.0 if m is None else float(radial_pull(moments_at_angle(m, frame, delta), frame, omega))

    return ProofLoad(float(factor), float(rpm), float(blade_angle_deg), pull(solid), pull(lumped), pull(counterweight))


@dataclass(frozen=True)
class CounterweightSizing:
    """A counterweight sized for a CTM target (hub frame, modelled blade position).

    mass_kg : counterweight mass;  position_m : (3,) where it sits at the modelled angle
    ctm_per_kg_Nm : its CTM per kg at the target angle and speed
    added_radial_pull_N : its own radial pull at the target speed
    net_ctm_Nm : blade + counterweight CTM at the target angle and speed
    """

    mass_kg: float
    position_m: np.ndarray
    ctm_per_kg_Nm: float
    added_radial_pull_N: float
    net_ctm_Nm: float


def counterweight_position(frame: HubFrame, chord_dir: np.ndarray, radius: float, arm: float,
                           clocking_deg: float) -> np.ndarray:
    """Hub-frame position of a counterweight at the modelled blade angle, m.

    It sits in the plane normal to the pitch axis at ``radius`` along e, at distance ``arm``
    from the pitch axis, clocked ``clocking_deg`` from the chord direction (trailing to
    leading edge) about a = s·e: 90° puts it on the normal to the chord, where it drives
    the blade toward coarse.
    """
    c = chord_dir - (chord_dir @ frame.e) * frame.e
    c = c / np.linalg.norm(c)
    n = np.cross(frame.a, c)
    g = math.radians(clocking_deg)
    P = frame.P
    foot = P + (radius - P @ frame.e) * frame.e
    return foot + arm * (math.cos(g) * c + math.sin(g) * n)


def size_counterweight(m0: Moments, frame: HubFrame, modelled_deg: float, position: np.ndarray,
                       blade_angle_deg: float, rpm: float, target_ctm_Nm: float = 0.0) -> CounterweightSizing:
    """Counterweight mass that brings the net CTM at ``blade_angle_deg`` and ``rpm`` to
    ``target_ctm_Nm`` (0: balanced; > 0: a chosen net moment toward coarse).

    The counterweight turns with the blade; its CTM is linear in its mass.
    Raises ValueError when no positive mass reaches the target at that position.
    """
    omega = rpm_to_rad_s(rpm)
    delta = blade_angle_deg - modelled_deg
    blade = float(centrifugal_twisting_moment(moments_at_angle(m0, frame, delta), frame, omega))
    unit = moments_at_angle(point_mass(1.0, position), frame, delta)
    per_kg = float(centrifugal_twisting_moment(unit, frame, omega))
    if per_kg == 0.0 or (target_ctm_Nm - blade) / per_kg <= 0.0:
        raise ValueError(
            f"a counterweight at this arm and clocking cannot bring the CTM from {blade:.4g} N·m to "
            f"{target_ctm_Nm:.4g} N·m (its CTM per kg is {per_kg:.4g} N·m); try a clocking 90° away"
        )
    mass = (target_ctm_Nm - blade) / per_kg
    pull = float(radial_pull(unit, frame, omega)) * mass
    return CounterweightSizing(mass, np.asarray(position, float), per_kg, pull, blade + mass * per_kg)
