"""Hub frame, blade angle and pitch rotation (docs/CONVENTIONS.md §1–§2).

Hub frame: origin O at the hub centre; ``y = e`` the pitch-change axis (outboard);
``z`` the component of the rotation axis ``k`` normal to ``e`` (thrust, forward);
``x = y × z``. Without precone ``z = k``. Everything here is in metres and radians
inside; angles cross the interface in degrees.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import InputError


def _point(v, source: str, name: str) -> np.ndarray:
    """(3,) a point or vector given by the user, checked to be three finite numbers."""
    try:
        p = np.asarray(v, dtype=float).reshape(3)
    except (TypeError, ValueError):
        raise InputError(source, f"{name} must be three numbers X,Y,Z, got {v!r}") from None
    if not np.all(np.isfinite(p)):
        raise InputError(source, f"{name} must be finite, got {p.tolist()}")
    return p


def _unit(v, source: str, name: str) -> np.ndarray:
    """A direction given by the user, checked to be a finite unit vector."""
    a = _point(v, source, name)
    n = float(np.linalg.norm(a))
    if n == 0.0:
        raise InputError(source, f"{name} must not be the zero vector")
    if abs(n - 1.0) > 1e-6:
        sug = ", ".join(f"{x:.6g}" for x in a / n)
        raise InputError(source, f"{name} must be a unit vector; it has length {n:.6g} (did you mean [{sug}]?)")
    return a / n


def rotation_about(axis, angle_rad: float) -> np.ndarray:
    """(3, 3) right-handed rotation by ``angle_rad`` about the unit ``axis`` (Rodrigues).

    >>> np.round(rotation_about([0, 0, 1], math.pi / 2) @ [1, 0, 0], 12).tolist()
    [0.0, 1.0, 0.0]
    """
    a = np.asarray(axis, dtype=float)
    a = a / np.linalg.norm(a)
    K = np.array([[0.0, -a[2], a[1]], [a[2], 0.0, -a[0]], [-a[1], a[0], 0.0]])
    return np.eye(3) + math.sin(angle_rad) * K + (1.0 - math.cos(angle_rad)) * (K @ K)


@dataclass(frozen=True)
class HubFrame:
    """The hub frame as given in the model frame (metres), and its hub-frame vectors.

    origin      : (3,) O, hub centre, model frame, m
    thrust_axis : (3,) unit k (rotation axis, forward), model frame
    pitch_axis  : (3,) unit e (outboard), model frame
    pitch_point : (3,) P, a point of the pitch axis, model frame, m
    rotation    : +1 right-handed about k, −1 left-handed
    """

    origin: np.ndarray
    thrust_axis: np.ndarray
    pitch_axis: np.ndarray
    pitch_point: np.ndarray
    rotation: int = 1

    @property
    def basis(self) -> np.ndarray:
        """(3, 3) rows are the hub axes x, y, z in model coordinates."""
        e = self.pitch_axis
        z = self.thrust_axis - np.dot(self.thrust_axis, e) * e
        z = z / np.linalg.norm(z)
        return np.array([np.cross(e, z), e, z])

    def model_to_hub(self) -> tuple[np.ndarray, np.ndarray]:
        """Rigid motion (R, t) with r_hub = R r_model + t."""
        R = self.basis
        return R, -R @ self.origin

    def to_hub(self, points) -> np.ndarray:
        """Model-frame points (..., 3), m → hub frame."""
        R, t = self.model_to_hub()
        return np.asarray(points, dtype=float) @ R.T + t

    def to_model(self, points) -> np.ndarray:
        """Hub-frame points (..., 3), m → model frame."""
        R, t = self.model_to_hub()
        return (np.asarray(points, dtype=float) - t) @ R

    # hub-frame vectors ---------------------------------------------------------------
    @property
    def k(self) -> np.ndarray:
        """(3,) rotation axis in the hub frame: (0, sin precone, cos precone)."""
        return self.basis @ self.thrust_axis

    @property
    def e(self) -> np.ndarray:
        """(3,) pitch axis in the hub frame: (0, 1, 0)."""
        return np.array([0.0, 1.0, 0.0])

    @property
    def a(self) -> np.ndarray:
        """(3,) axis of increasing blade angle in the hub frame: s·e."""
        return self.rotation * self.e

    @property
    def P(self) -> np.ndarray:
        """(3,) the pitch point in the hub frame, m."""
        return self.to_hub(self.pitch_point)

    @property
    def t(self) -> np.ndarray:
        """(3,) unit direction of motion of the pitch axis: s (k × e), normalised."""
        v = np.cross(self.k, self.e)
        return self.rotation * v / np.linalg.norm(v)

    @property
    def f(self) -> np.ndarray:
        """(3,) unit component of k normal to e, in the hub frame: (0, 0, 1)."""
        return np.array([0.0, 0.0, 1.0])

    @property
    def precone_deg(self) -> float:
        """Angle of the pitch axis forward (+) of the plane of rotation, degrees."""
        return math.degrees(math.asin(float(np.clip(np.dot(self.thrust_axis, self.pitch_axis), -1, 1))))


def hub_frame(
    origin=(0.0, 0.0, 0.0),
    thrust_axis=(0.0, 0.0, 1.0),
    pitch_axis=(0.0, 1.0, 0.0),
    pitch_point=None,
    rotation="right",
    precone_deg: float | None = None,
    source: str = "hub frame",
) -> HubFrame:
    """Build and validate a :class:`HubFrame` from model-frame inputs (metres).

    ``precone_deg``, when given, tilts the pitch axis forward of the plane of rotation by
    that angle (the given pitch axis must then lie in the plane of rotation).

    >>> f = hub_frame()
    >>> f.k.tolist(), f.t.tolist()
    ([0.0, 0.0, 1.0], [-1.0, 0.0, 0.0])
    """
    O = _point(origin, source, "hub_centre")
    k = _unit(thrust_axis, source, "thrust_axis")
    e = _unit(pitch_axis, source, "pitch_axis")
    s = {"right": 1, "left": -1, 1: 1, -1: -1}.get(rotation)
    if s is None:
        raise InputError(source, f"rotation must be 'right' or 'left', got {rotation!r}")
    cos_ke = float(np.dot(k, e))
    if abs(cos_ke) > math.cos(math.radians(5.0)):
        raise InputError(
            source,
            f"pitch_axis and thrust_axis are (nearly) parallel ({math.degrees(math.acos(min(1, abs(cos_ke)))):.3g}° "
            "apart); the pitch axis must lie close to the plane of rotation",
        )
    if precone_deg is not None:
        phi = float(precone_deg)
        if not math.isfinite(phi) or abs(phi) > 30.0:
            raise InputError(source, f"precone must be within ±30°, got {precone_deg!r}")
        if abs(cos_ke) > 1e-9:
            raise InputError(
                source,
                "give either precone or a pitch_axis tilted out of the plane of rotation, not both",
            )
        e = math.cos(math.radians(phi)) * e + math.sin(math.radians(phi)) * k
    if pitch_point is None:
        P = O.copy()
    else:
        P = _point(pitch_point, source, "pitch_point")
        # keep P on the line but report it as given
    return HubFrame(O, k, e, P, s)


def pitch_motion(frame: HubFrame, delta_deg: float) -> tuple[np.ndarray, np.ndarray]:
    """Rigid motion (R, t), hub frame, that sets the blade ``delta_deg`` toward coarse.

    r' = P + R (r − P), R the right-handed rotation by Δβ about a = s·e (docs/CONVENTIONS.md §2).
    """
    R = rotation_about(frame.a, math.radians(delta_deg))
    P = frame.P
    return R, P - R @ P


@dataclass(frozen=True)
class BladeAngle:
    """The blade angle measured at a reference station (hub frame).

    radius_m : station radius along the pitch axis, m
    angle_deg : β, degrees, from the plane of rotation, + leading edge forward
    leading_edge, trailing_edge : (3,) the two section points farthest apart, m
    chord_m : their distance, m
    """

    radius_m: float
    angle_deg: float
    leading_edge: np.ndarray
    trailing_edge: np.ndarray
    chord_m: float


def section_points(surfaces, radius: float) -> np.ndarray:
    """(p, 3) points where the plane y = radius (hub frame) cuts the given surfaces.

    surfaces : iterable of (vertices (n, 3) hub frame m, faces (m, 3)).
    """
    pts = []
    for v, f in surfaces:
        y = v[:, 1] - radius
        fy = y[f]
        cross = (fy.min(axis=1) < 0) & (fy.max(axis=1) > 0)
        if not np.any(cross):
            continue
        tri = v[f[cross]]
        ty = fy[cross]
        for i, j in ((0, 1), (1, 2), (2, 0)):
            yi, yj = ty[:, i], ty[:, j]
            m = (yi < 0) != (yj < 0)
            if np.any(m):
                w = yi[m] / (yi[m] - yj[m])
                pts.append(tri[m, i] + w[:, None] * (tri[m, j] - tri[m, i]))
    if not pts:
        return np.empty((0, 3))
    return np.concatenate(pts)


def chord_line(points: np.ndarray, frame: HubFrame) -> tuple[np.ndarray, np.ndarray]:
    """(leading edge, trailing edge) of a section: the two points farthest apart, the one
    facing the direction of motion t being the leading edge (docs/CONVENTIONS.md §2)."""
    from scipy.spatial import ConvexHull, QhullError

    xz = points[:, [0, 2]]
    try:
        hull = points[ConvexHull(xz).vertices]
    except (QhullError, ValueError):
        hull = points
    d = np.linalg.norm(hull[:, None, [0, 2]] - hull[None, :, [0, 2]], axis=-1)
    i, j = np.unravel_index(int(np.argmax(d)), d.shape)
    p, q = hull[i], hull[j]
    if np.dot(p - q, frame.t) >= 0:
        return p, q
    return q, p


def blade_angle_from_chord(chord: np.ndarray, frame: HubFrame) -> float:
    """β = atan2(chord·f, chord·t) in degrees, chord from trailing to leading edge.

    >>> round(blade_angle_from_chord(np.array([-1.0, 0.0, 1.0]), hub_frame()), 9)
    45.0
    """
    return math.degrees(math.atan2(float(np.dot(chord, frame.f)), float(np.dot(chord, frame.t))))


def measure_blade_angle(surfaces, frame: HubFrame, radius: float, source: str = "mesh") -> BladeAngle:
    """Measure the modelled blade angle at the station ``radius`` (hub frame, m)."""
    pts = section_points(surfaces, radius)
    if len(pts) < 3:
        raise InputError(source, f"the reference station at r = {radius:.6g} m does not cut the blade")
    le, te = chord_line(pts, frame)
    chord = le - te
    return BladeAngle(float(radius), blade_angle_from_chord(chord, frame), le, te, float(np.linalg.norm(chord)))
