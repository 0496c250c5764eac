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
    pitch_axis  : (3,) unit e (outboard) of the blade as modelled, model frame
    pitch_point : (3,) P, a point of the pitch axis of the blade as modelled, model frame, m
    rotation    : +1 right-handed about k, −1 left-handed
    applied_precone_deg : precone φ applied to the modelled blade: the blade — its solid, pitch
      axis, pitch point and everything fixed to it — is turned by φ about the hub's x axis
      through O, the tip moving toward +k for φ > 0 (docs/CONVENTIONS.md §1). 0 when the blade
      is modelled coned (its ``pitch_axis`` then tilted forward of the plane of rotation).

    Representation: the hub-frame coordinates of a point fixed to the blade are its coordinates
    in the frame O; x = y × z, y = e, z = the component of k normal to e, *as seen from the
    blade*. Coning turns the blade together with that frame about x, so the blade's
    coordinates are the same coned or not (:meth:`model_to_hub` does not depend on the
    precone), and the precone shows only in the rotation axis, which the blade sees tilted
    back: k = (0, sin φ, cos φ) in the hub frame. Every formula of docs/CONVENTIONS.md §4 is
    written with that k, so the moments of the solid turn with the blade, not just its axis.
    """

    origin: np.ndarray
    thrust_axis: np.ndarray
    pitch_axis: np.ndarray
    pitch_point: np.ndarray
    rotation: int = 1
    applied_precone_deg: float = 0.0

    @property
    def thrust_axis_seen_from_blade(self) -> np.ndarray:
        """(3,) unit k in the model frame of the blade as modelled: k turned by −φ about the
        coning axis e × k, φ the applied precone (k itself when none is applied)."""
        k = self.thrust_axis
        if self.applied_precone_deg == 0.0:
            return k
        x = np.cross(self.pitch_axis, k)
        return rotation_about(x, -math.radians(self.applied_precone_deg)) @ k

    @property
    def basis(self) -> np.ndarray:
        """(3, 3) rows are the hub axes x, y, z in the model coordinates of the blade as modelled."""
        e = self.pitch_axis
        k = self.thrust_axis_seen_from_blade
        z = k - np.dot(k, e) * e
        z = z / np.linalg.norm(z)
        return np.array([np.cross(e, z), e, z])

    def model_to_hub(self) -> tuple[np.ndarray, np.ndarray]:
        """Rigid motion (R, t) with r_hub = R r_model + t, for points fixed to the blade
        (the mesh, lumped masses, the pitch point), precone included."""
        R = self.basis
        return R, -R @ self.origin

    def to_hub(self, points) -> np.ndarray:
        """Model-frame points (..., 3) fixed to the blade, m → hub frame."""
        R, t = self.model_to_hub()
        return np.asarray(points, dtype=float) @ R.T + t

    def to_model(self, points) -> np.ndarray:
        """Hub-frame points (..., 3), m → model frame of the blade as modelled."""
        R, t = self.model_to_hub()
        return (np.asarray(points, dtype=float) - t) @ R

    # hub-frame vectors ---------------------------------------------------------------
    @property
    def k(self) -> np.ndarray:
        """(3,) rotation axis in the hub frame: (0, sin precone, cos precone)."""
        return self.basis @ self.thrust_axis_seen_from_blade

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
        """Angle of the pitch axis forward (+) of the plane of rotation, degrees (applied or
        modelled)."""
        return math.degrees(math.asin(float(np.clip(self.k[1], -1, 1))))


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

    ``precone_deg``, when given, cones the blade by that angle (docs/CONVENTIONS.md §1): the
    modelled blade with everything fixed to it turns about the hub's x axis through O, tip
    forward for positive values. The given pitch axis must then lie in the plane of rotation
    (a blade modelled coned gives its tilted pitch axis instead, and no precone).

    >>> f = hub_frame()
    >>> f.k.tolist(), f.t.tolist()
    ([0.0, 0.0, 1.0], [-1.0, 0.0, 0.0])
    >>> np.round(hub_frame(precone_deg=30.0).k, 12).tolist()   # the blade sees k tilted back
    [0.0, 0.5, 0.866025403784]
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
    phi = 0.0
    if precone_deg is not None:
        phi = float(precone_deg)
        if not math.isfinite(phi) or abs(phi) > 30.0:
            raise InputError(source, f"precone must be within ±30°, got {precone_deg!r}")
        if abs(cos_ke) > 1e-9:
            raise InputError(
                source,
                "give either precone or a pitch_axis tilted out of the plane of rotation, not both",
            )
    if pitch_point is None:
        P = O.copy()
    else:
        P = _point(pitch_point, source, "pitch_point")
        # keep P on the line but report it as given
    return HubFrame(O, k, e, P, s, phi)


def pitch_motion(frame: HubFrame, delta_deg: float) -> tuple[np.ndarray, np.ndarray]:
    """Rigid motion (R, t), hub frame, that sets the blade ``delta_deg`` toward coarse.

    r' = P + R (r − P), R the right-handed rotation by Δβ about a = s·e (docs/CONVENTIONS.md §2).
    """
    R = rotation_about(frame.a, math.radians(delta_deg))
    P = frame.P
    return R, P - R @ P


# --- sections normal to the pitch axis ----------------------------------------------------
#
# Tie rule, the same for every cut normal to the pitch axis (the reference station here, the
# spanwise stations and their element cuts in bladesolid.span, lumped masses): a point with
# y > r is outboard of the station r, a point with y ≤ r — one on the plane included — inboard.
# A section is the boundary of the outboard part of the solid. So a ring of the surface lying
# in the plane (a CAD loft with a ring at the station) is the section itself, a face lying in
# the plane with the solid outboard of it (a root face) is the section, and one with the solid
# inboard of it (a tip face) leaves nothing outboard: an empty section.


def _cut_graph(v: np.ndarray, f: np.ndarray, radius: float) -> tuple[np.ndarray, np.ndarray]:
    """Points (p, 3) and segments (q, 2) (indices into the points) where the plane
    y = ``radius`` cuts one closed triangle surface, by the tie rule above.

    Each cut point is named by what it lies on — the mesh edge from an outboard to an inboard
    vertex, or the vertex itself when that lies on the plane — so the segments of neighbouring
    triangles share their end points exactly, with no matching of coordinates.
    """
    v = np.asarray(v, dtype=float)
    f = np.asarray(f, dtype=np.int64)
    d = v[:, 1] - float(radius)
    out = d > 0.0
    fo = out[f]
    n_out = fo.sum(axis=1)
    sel = (n_out == 1) | (n_out == 2)
    if not np.any(sel):
        return np.empty((0, 3)), np.empty((0, 2), dtype=np.int64)
    F, FO = f[sel], fo[sel]
    nv = np.int64(len(v))
    K = np.full((len(F), 3), -1, dtype=np.int64)
    for c, (i, j) in enumerate(((0, 1), (1, 2), (2, 0))):
        a = np.where(FO[:, i], F[:, i], F[:, j])  # the outboard end
        b = np.where(FO[:, i], F[:, j], F[:, i])  # the inboard end (maybe on the plane)
        key = np.where(d[b] == 0.0, b * nv + b, np.minimum(a, b) * nv + np.maximum(a, b))
        K[:, c] = np.where(FO[:, i] != FO[:, j], key, -1)
    pair = np.sort(K, axis=1)[:, 1:]  # the two crossing edges of each triangle (−1 sorts first)
    pair = pair[pair[:, 0] != pair[:, 1]]  # both at one vertex on the plane: no segment
    if not len(pair):
        return np.empty((0, 3)), np.empty((0, 2), dtype=np.int64)
    keys, inv = np.unique(pair, return_inverse=True)
    i, j = keys // nv, keys % nv
    a = np.where(out[i], i, j)
    b = np.where(out[i], j, i)
    w = np.where(i == j, 0.0, d[a] / np.where(i == j, 1.0, d[a] - d[b]))
    pts = np.where((i == j)[:, None], v[b], v[a] + w[:, None] * (v[b] - v[a]))
    pts[:, 1] = float(radius)
    return pts, inv.reshape(-1, 2)


def _chain(seg: np.ndarray, n: int) -> list[np.ndarray]:
    """Chain segments (q, 2) over n points into closed loops (arrays of point indices, the
    first not repeated). A closed 2-manifold surface gives every point two segments; an open
    or non-manifold cut is chained as far as it goes, each chain taken as closed."""
    adj: list[list[tuple[int, int]]] = [[] for _ in range(n)]
    for s, (p, q) in enumerate(seg.tolist()):
        adj[p].append((q, s))
        adj[q].append((p, s))
    used = np.zeros(len(seg), dtype=bool)
    loops = []
    for s0 in range(len(seg)):
        if used[s0]:
            continue
        used[s0] = True
        start, cur = int(seg[s0, 0]), int(seg[s0, 1])
        path = [start]
        while cur != start:
            path.append(cur)
            nxt = next(((w, s) for w, s in adj[cur] if not used[s]), None)
            if nxt is None:
                break
            used[nxt[1]] = True
            cur = nxt[0]
        loops.append(np.array(path, dtype=np.int64))
    return loops


def section_loops(surfaces, radius: float) -> list[np.ndarray]:
    """The closed contours (each (p, 3), hub frame m, the first point not repeated) where the
    plane y = ``radius`` cuts the given closed surfaces, by the tie rule of this module.

    surfaces : iterable of (vertices (n, 3) hub frame m, faces (m, 3)); separate bodies (a
    sheath, a spar) give their own contours. Contours of fewer than three distinct points
    (a surface touching the plane along an edge) are dropped.

    >>> import trimesh
    >>> box = trimesh.creation.box([0.2, 1.0, 0.01])     # vertices at y = ±0.5
    >>> [len(p) for p in section_loops([(box.vertices, box.faces)], -0.5)]   # the root face
    [4]
    >>> section_loops([(box.vertices, box.faces)], 0.5)                      # the tip face
    []
    """
    loops = []
    for v, f in surfaces:
        pts, seg = _cut_graph(v, f, radius)
        for ix in _chain(seg, len(pts)):
            if len(ix) >= 3:
                loops.append(pts[ix])
    return loops


def section_points(surfaces, radius: float) -> np.ndarray:
    """(p, 3) the points of all contours of the section y = ``radius`` (hub frame), by the
    tie rule of this module (see :func:`section_loops`)."""
    loops = section_loops(surfaces, radius)
    return np.concatenate(loops) if loops else np.empty((0, 3))


def _plane(points) -> np.ndarray:
    """(p, 2) the (x, z) hub coordinates of points in a plane normal to e."""
    return np.asarray(points, dtype=float)[:, [0, 2]]


def polygon_area(q: np.ndarray) -> float:
    """Signed area of a closed polygon (p, 2), + counter-clockwise (shoelace formula).

    >>> polygon_area(np.array([[0.0, 0.0], [2.0, 0.0], [2.0, 1.0], [0.0, 1.0]]))
    2.0
    """
    x, z = q[:, 0], q[:, 1]
    return 0.5 * float(np.dot(x, np.roll(z, -1)) - np.dot(z, np.roll(x, -1)))


def _inside(points: np.ndarray, poly: np.ndarray) -> np.ndarray:
    """(p,) bool: points (p, 2) strictly inside the closed polygon (m, 2), even-odd rule."""
    a, b = poly, np.roll(poly, -1, axis=0)
    x, z = points[:, 0:1], points[:, 1:2]
    straddle = (a[:, 1] > z) != (b[:, 1] > z)
    dz = np.where(b[:, 1] == a[:, 1], 1.0, b[:, 1] - a[:, 1])
    xc = a[:, 0] + (z - a[:, 1]) * (b[:, 0] - a[:, 0]) / dz
    return (np.sum(straddle & (x < xc), axis=1) % 2) == 1


def outer_loops(loops) -> list[np.ndarray]:
    """The contours that are not inside another one (hub frame, (p, 3) each).

    A cut through a cavity gives nested contours: the cavity's own contour (and anything
    inside it) lies within the larger outer one and is dropped. Contours lie inside another
    when most of their points are strictly inside a contour of larger area; separate bodies
    side by side (a blade and its sheath, touching along the leading edge) all stay.
    """
    loops = [np.asarray(p, dtype=float) for p in loops]
    q2 = [_plane(p) for p in loops]
    area = [abs(polygon_area(q)) for q in q2]
    order = np.argsort(area)[::-1]
    keep = []
    for n, i in enumerate(order):
        if area[i] == 0.0:
            continue
        if any(area[j] > area[i] and 2 * int(np.sum(_inside(q2[i], q2[j]))) > len(q2[i]) for j in order[:n]):
            continue
        keep.append(i)
    return [loops[i] for i in sorted(keep)]


#: What faces an end of a section: the run of its convex hull whose outward normals lie within
#: this angle of the chord direction there, bounded by the corners where the surface turns
#: back (our rule: the sides of blade sections run within a few tens of degrees of the chord,
#: a square or blunt base faces along it).
END_FACING_DEG = 45.0

#: Hull edges whose normals agree within this angle make one straight facet (a base or flat
#: meshed as several edges; our rule).
FLAT_TOLERANCE_DEG = 2.0

#: Sections are thickest at 25–40 % of the chord (common practice, no source). The leading
#: edge is read from the shape when the thickest point (the middle of the chordwise band
#: within THICKEST_BAND of the largest thickness) lies farther than SYMMETRY_BAND of the chord
#: from mid-chord; otherwise the section has no such asymmetry (a flat plate, a biconvex or
#: elliptic section) and the leading edge is the end facing the direction of motion t.
THICKEST_BAND = 0.02
SYMMETRY_BAND = 0.05


def _hull(q: np.ndarray) -> np.ndarray | None:
    """(h, 2) convex hull vertices, counter-clockwise, or None for a degenerate point set."""
    from scipy.spatial import ConvexHull, QhullError

    if len(q) < 3:
        return None
    try:
        return q[ConvexHull(q).vertices]
    except (QhullError, ValueError):
        return None


def _facing_run(H: np.ndarray, d: np.ndarray):
    """The hull edges facing the unit direction d, around the hull vertex extreme along d.

    H : (h, 2) hull, counter-clockwise. Returns (i0, run, L, N): the extreme vertex, the
    indices of the run of consecutive edges (edge i runs from H[i] to H[i + 1]) whose outward
    normals lie within :data:`END_FACING_DEG` of d (empty for a sharp end), and all edges'
    lengths (h,) and unit outward normals (h, 2).
    """
    h = len(H)
    E = np.roll(H, -1, axis=0) - H
    L = np.hypot(E[:, 0], E[:, 1])
    N = np.column_stack([E[:, 1], -E[:, 0]]) / np.where(L > 0, L, 1.0)[:, None]
    facing = (N @ d >= math.cos(math.radians(END_FACING_DEG))) & (L > 0)
    i0 = int(np.argmax(H @ d))
    lo, hi = i0, i0  # the run covers edges lo .. hi − 1 (cyclic)
    while facing[(lo - 1) % h] and i0 - lo < h - 1:
        lo -= 1
    while facing[hi % h] and hi - lo < h - 1:
        hi += 1
    return i0, np.arange(lo, hi) % h, L, N


def _tail_point(H: np.ndarray, d: np.ndarray) -> np.ndarray:
    """(2,) trailing-edge point of a hull H (h, 2, counter-clockwise), d the unit direction
    aft along the chord: the middle (by length) of the run of hull edges facing d — the middle
    of a blunt or square base between the two corners where the surface turns back, the apex
    of a rounded one — or, no edge facing d (a sharp edge), the tail vertex itself."""
    i0, run, L, _ = _facing_run(H, d)
    if not len(run):
        return H[i0].copy()
    h = len(H)
    chain = H[np.append(run, (run[-1] + 1) % h)]
    cum = np.concatenate([[0.0], np.cumsum(L[run])])
    half = 0.5 * cum[-1]
    k = min(int(np.searchsorted(cum, half, side="right")) - 1, len(run) - 1)
    w = (half - cum[k]) / L[run[k]]
    return chain[k] + w * (chain[k + 1] - chain[k])


def _nose_point(H: np.ndarray, d: np.ndarray) -> np.ndarray:
    """(2,) leading-edge point of a hull H (h, 2, counter-clockwise), d the unit direction
    from the trailing-edge point to the hull point farthest from it: that farthest point, or
    the middle of the flat it lies on (a square leading edge).

    A flat: among the hull edges facing d (:func:`_facing_run`), consecutive edges whose
    normals agree within :data:`FLAT_TOLERANCE_DEG` make one straight facet; the longest facet
    is a flat when it is more than half the run's length (a rounded nose, finely or coarsely
    meshed, is many facets of about equal length).
    """
    i0, run, L, N = _facing_run(H, d)
    if not len(run):
        return H[i0].copy()
    h = len(H)
    cos_tol = math.cos(math.radians(FLAT_TOLERANCE_DEG))
    best, best_len, start, length = (run[0], run[0]), -1.0, run[0], 0.0
    for n, i in enumerate(run):
        if n and N[i] @ N[start] < cos_tol:
            start, length = i, 0.0
        length += L[i]
        if length > best_len:
            best, best_len = (start, i), length
    if best_len > 0.5 * float(L[run].sum()):
        return 0.5 * (H[best[0]] + H[(best[1] + 1) % h])
    return H[i0].copy()


def _thickest_fraction(outlines: list[np.ndarray], start: np.ndarray, end: np.ndarray, n: int = 200) -> float:
    """Chordwise position (0 at ``start``, 1 at ``end``) of the thickest point of the section.

    The thickness at a chordwise station is the extent of the section along the normal of
    start→end on the line through that station (n stations, mid-points of equal intervals);
    the thickest point is the middle of the stations within :data:`THICKEST_BAND` of the
    largest thickness (so a section of constant thickness reads 0.5).
    """
    u = end - start
    length = float(np.hypot(*u))
    u = u / length
    nrm = np.array([-u[1], u[0]])
    s = start @ u + (np.arange(n) + 0.5) / n * length
    lo = np.full(n, np.inf)
    hi = np.full(n, -np.inf)
    for q in outlines:
        a0, b0 = q @ u, q @ nrm
        a1, b1 = np.roll(a0, -1), np.roll(b0, -1)
        cross = (a0[:, None] <= s) != (a1[:, None] <= s)
        da = np.where(a1 == a0, 1.0, a1 - a0)[:, None]
        b = b0[:, None] + (s - a0[:, None]) / da * (b1 - b0)[:, None]
        lo = np.minimum(lo, np.where(cross, b, np.inf).min(axis=0))
        hi = np.maximum(hi, np.where(cross, b, -np.inf).max(axis=0))
    T = np.where(hi > lo, hi - lo, 0.0)
    if not T.max() > 0:
        return 0.5
    band = (np.arange(n) + 0.5)[T >= (1.0 - THICKEST_BAND) * T.max()] / n
    return float(0.5 * (band.min() + band.max()))


def _farthest_pair(H: np.ndarray, block: int = 1024) -> tuple[np.ndarray, np.ndarray]:
    """The two points of H (h, 2) farthest apart (in blocks of rows: memory O(block · h))."""
    best, pair = -1.0, (0, 0)
    for s in range(0, len(H), block):
        d2 = np.sum((H[s:s + block, None, :] - H[None, :, :]) ** 2, axis=-1)
        k = int(np.argmax(d2))
        if d2.flat[k] > best:
            best, pair = float(d2.flat[k]), (s + k // len(H), k % len(H))
    return H[pair[0]], H[pair[1]]


@dataclass(frozen=True)
class SectionLines:
    """The reference lines of one section normal to the pitch axis (hub frame, m; docs/CONVENTIONS.md §2).

    leading_edge, trailing_edge : (3,) ends of the nose-to-tail chord line
    face_trailing, face_leading : (3,) ends of the face line (the longest hull edge on the
      face side: pressure side, aft), trailing-edge end first
    chord_deg, face_deg : blade angles of the two lines, degrees; the face angle is kept within
      180° of the chord angle
    thickness_chord_m, thickness_face_m : largest thickness of the section normal to each line
    lead_from : ``"shape"`` (the end nearer the thickest point leads) or ``"direction of motion"``
      (a section without that asymmetry: the end facing t leads)
    """

    radius_m: float
    leading_edge: np.ndarray
    trailing_edge: np.ndarray
    face_trailing: np.ndarray
    face_leading: np.ndarray
    chord_deg: float
    face_deg: float
    thickness_chord_m: float
    thickness_face_m: float
    lead_from: str

    @property
    def chord_m(self) -> float:
        return float(np.linalg.norm(self.leading_edge - self.trailing_edge))

    def line(self, which: str) -> tuple[np.ndarray, np.ndarray]:
        """(trailing end, leading end) of the ``"chord"`` or ``"face"`` line."""
        if which == "face":
            return self.face_trailing, self.face_leading
        return self.trailing_edge, self.leading_edge

    def angle_deg(self, which: str) -> float:
        return self.face_deg if which == "face" else self.chord_deg

    def thickness_m(self, which: str) -> float:
        return self.thickness_face_m if which == "face" else self.thickness_chord_m


ANGLE_LINES = ("chord", "face")


def _wrap_near(angle_deg: float, ref_deg: float) -> float:
    """``angle_deg`` shifted by whole turns to lie within 180° of ``ref_deg``."""
    return ref_deg + ((angle_deg - ref_deg + 180.0) % 360.0 - 180.0)


def section_lines(outlines, frame: HubFrame, radius: float) -> SectionLines | None:
    """Chord and face lines of a section from its outer contours (each (p, 3), hub frame, in
    the plane y = ``radius``); None when the section has no area.

    Nose to tail (docs/CONVENTIONS.md §2):

    1. The two hull points farthest apart give the two ends. The leading end is the one nearer
       the thickest point (:func:`_thickest_fraction`); for a section without that asymmetry,
       the end facing the direction of motion t — so an asymmetric section reads its angle
       continuously past ±90°, a symmetric one reads within ±90°.
    2. Trailing-edge point (:func:`_tail_point`): the middle of a blunt or square base between
       its two corners, the tail of a sharp edge. Leading-edge point (:func:`_nose_point`): the
       section point farthest from it, or the middle of the flat it lies on (a square leading
       edge). Repeated with the chord so found until it no longer changes (one
       repeat for a square-edged plate, whose first estimate, the diagonal, is off by atan(t/c)).
    3. Face line: the longest hull edge on the face side (outward normal toward c × a, aft for
       blade angles within ±90°), oriented trailing to leading edge.
    """
    q2 = [_plane(p) for p in outlines if len(p) >= 3]
    if not q2:
        return None
    pts = np.concatenate(q2)
    H = _hull(pts)
    t2, f2 = frame.t[[0, 2]], frame.f[[0, 2]]
    if H is None:  # all points on a line (a section of no thickness), or fewer than three
        s = (pts - pts.mean(axis=0)) @ np.linalg.svd(pts - pts.mean(axis=0))[2][0]
        te, le = pts[int(np.argmin(s))], pts[int(np.argmax(s))]
        if not np.any(le != te):
            return None
        H = np.array([te, le])
        lead_from = "direction of motion"
    else:
        A, B = _farthest_pair(H)
        s_thick = _thickest_fraction(q2, A, B)
        if abs(s_thick - 0.5) > SYMMETRY_BAND:
            lead_from = "shape"
            le, te = (A, B) if s_thick < 0.5 else (B, A)
        else:
            lead_from = "direction of motion"
            le, te = A, B
        u = (le - te) / np.linalg.norm(le - te)
        for _ in range(16):
            te = _tail_point(H, -u)
            far = H[int(np.argmax(np.linalg.norm(H - te, axis=1)))]
            d = (far - te) / np.linalg.norm(far - te)
            le = _nose_point(H, d)
            u_new = (le - te) / np.linalg.norm(le - te)
            done = float(np.linalg.norm(u_new - u)) <= 1e-14
            u = u_new
            if done:
                break
    c = le - te
    if lead_from == "direction of motion":
        ct, cf = float(c @ t2), float(c @ f2)
        if ct < -1e-12 * np.linalg.norm(c) or (abs(ct) <= 1e-12 * np.linalg.norm(c) and cf < 0):
            le, te = te, le
            c = -c
    cu = c / np.linalg.norm(c)
    # face side: outward normal toward c × a (in the plane: s·(−c_z, c_x))
    n_face = frame.rotation * np.array([-cu[1], cu[0]])
    if len(H) >= 3:
        E = np.roll(H, -1, axis=0) - H
        L = np.hypot(E[:, 0], E[:, 1])
        N = np.column_stack([E[:, 1], -E[:, 0]]) / np.where(L > 0, L, 1.0)[:, None]
        on_face = (N @ n_face) > 1e-9
        k = int(np.argmax(np.where(on_face, L, -1.0)))
        p, q = H[k], H[(k + 1) % len(H)]
        fa, fb = (p, q) if (q - p) @ c >= 0 else (q, p)
    else:
        fa, fb = te, le

    def to3(x):
        return np.array([x[0], float(radius), x[1]])

    def angle(v):
        return math.degrees(math.atan2(float(v @ f2), float(v @ t2)))

    def thickness(v):
        n = np.array([-v[1], v[0]]) / np.linalg.norm(v)
        h = pts @ n
        return float(h.max() - h.min())

    chord_deg = angle(c)
    face_deg = _wrap_near(angle(fb - fa), chord_deg)
    return SectionLines(float(radius), to3(le), to3(te), to3(fa), to3(fb), chord_deg, face_deg,
                        thickness(c), thickness(fb - fa), lead_from)


def cut_section_lines(surfaces, frame: HubFrame, radius: float) -> SectionLines | None:
    """:func:`section_lines` of the section y = ``radius`` of closed surfaces (hub frame, m):
    their contours by :func:`section_loops`, the cavities' contours dropped (:func:`outer_loops`)."""
    return section_lines(outer_loops(section_loops(surfaces, radius)), frame, radius)


def hull_section_lines(points: np.ndarray, frame: HubFrame) -> SectionLines | None:
    """:func:`section_lines` of a section given only by its points (p, 3) in a plane normal to
    e (hub frame): their convex hull stands in for the contour (exact for a convex section;
    :func:`cut_section_lines` uses the contour itself)."""
    points = np.asarray(points, dtype=float).reshape(-1, 3)
    if len(points) == 0:
        return None
    r = float(points[:, 1].mean())
    H = _hull(_plane(points))
    outline = points if H is None else np.column_stack([H[:, 0], np.full(len(H), r), H[:, 1]])
    return section_lines([outline], frame, r)


def chord_line(points: np.ndarray, frame: HubFrame) -> tuple[np.ndarray, np.ndarray]:
    """(leading edge, trailing edge) of the nose-to-tail chord line of a section given by its
    points (p, 3) in a plane normal to e (hub frame), by :func:`hull_section_lines`."""
    lines = hull_section_lines(points, frame)
    if lines is None:
        p = np.asarray(points, dtype=float).reshape(-1, 3)
        return p[0].copy(), p[0].copy()
    return lines.leading_edge, lines.trailing_edge


@dataclass(frozen=True)
class BladeAngle:
    """The blade angle measured at a reference station (hub frame; docs/CONVENTIONS.md §2).

    radius_m : station radius along the pitch axis, m
    angle_deg : β on the chosen reference line, degrees, from the plane of rotation, + leading
      edge forward
    leading_edge, trailing_edge : (3,) ends of the nose-to-tail chord line, m
    chord_m : their distance, m
    chord_deg, face_deg : β on the chord line and on the face line, degrees
    reference_line : ``"chord"`` or ``"face"``, the line ``angle_deg`` is measured on
    face_trailing, face_leading : (3,) ends of the face line, m
    thickness_m : largest thickness of the section normal to the reference line, m
    lead_from : how the leading edge was told from the trailing edge (see :class:`SectionLines`)
    """

    radius_m: float
    angle_deg: float
    leading_edge: np.ndarray
    trailing_edge: np.ndarray
    chord_m: float
    chord_deg: float = float("nan")
    face_deg: float = float("nan")
    reference_line: str = "chord"
    face_trailing: np.ndarray | None = None
    face_leading: np.ndarray | None = None
    thickness_m: float = float("nan")
    lead_from: str = ""

    @property
    def face_minus_chord_deg(self) -> float:
        """Face angle minus chord angle, degrees."""
        return self.face_deg - self.chord_deg

    @property
    def line_ends(self) -> tuple[np.ndarray, np.ndarray]:
        """(trailing end, leading end) of the reference line, m."""
        if self.reference_line == "face" and self.face_trailing is not None:
            return self.face_trailing, self.face_leading
        return self.trailing_edge, self.leading_edge


def blade_angle_from_chord(chord: np.ndarray, frame: HubFrame) -> float:
    """β = atan2(chord·f, chord·t) in degrees, chord from trailing to leading edge.

    >>> round(blade_angle_from_chord(np.array([-1.0, 0.0, 1.0]), hub_frame()), 9)
    45.0
    """
    return math.degrees(math.atan2(float(np.dot(chord, frame.f)), float(np.dot(chord, frame.t))))


def check_angle_line(line: str, source: str = "angle_line") -> str:
    """The reference line name, checked: ``"chord"`` or ``"face"``."""
    if line not in ANGLE_LINES:
        raise InputError(source, f"must be \"chord\" or \"face\", got {line!r}")
    return line


def measure_blade_angle(surfaces, frame: HubFrame, radius: float, source: str = "mesh",
                        line: str = "chord") -> BladeAngle:
    """Measure the modelled blade angle at the station ``radius`` (hub frame, m) on the
    ``line`` (``"chord"``: nose to tail; ``"face"``: a straightedge on the face), both angles
    reported (docs/CONVENTIONS.md §2)."""
    check_angle_line(line)
    lines = cut_section_lines(surfaces, frame, radius)
    if lines is None:
        raise InputError(source, f"the reference station at r = {radius:.6g} m does not cut the blade")
    return BladeAngle(
        radius_m=float(radius),
        angle_deg=lines.angle_deg(line),
        leading_edge=lines.leading_edge,
        trailing_edge=lines.trailing_edge,
        chord_m=lines.chord_m,
        chord_deg=lines.chord_deg,
        face_deg=lines.face_deg,
        reference_line=line,
        face_trailing=lines.face_trailing,
        face_leading=lines.face_leading,
        thickness_m=lines.thickness_m(line),
        lead_from=lines.lead_from,
    )
