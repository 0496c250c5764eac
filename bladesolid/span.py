"""Spanwise distributions: exact station cuts, section properties, centrifugal stress and the
classical strip estimate of the CTM.

At each station radius ``r`` the solid is cut by the plane ``y = r`` of the hub frame (normal to
the pitch axis ``e``, docs/CONVENTIONS.md §1). Every tetrahedral mass element the plane crosses is clipped
and its outboard part integrated in closed form; no element is counted whole or dropped whole:

* one vertex outboard — the outboard part is a small tetrahedron;
* three vertices outboard — the whole element minus the small inboard tetrahedron;
* two vertices outboard — a prism between the cut quadrilateral and the outboard edge (all its
  faces are planar: two lie in faces of the element, one in the cutting plane), split into
  three tetrahedra.

The sub-tetrahedra of all stations go through :func:`bladesolid.moments.tet_volume_moments` in
one call. The section itself is the union of the cut triangles and quadrilaterals, integrated
exactly in the plane (area, centroid, second moments of area).

The cut is made at the modelled position. A pitch change is a rotation about a line parallel to
``e``, which maps every plane ``y = r`` onto itself, so cutting at the modelled position and then
moving the outboard moments (:func:`bladesolid.loads.moments_at_angle`) is exact.

All figures are the centrifugal part only: bending from the aerodynamic loads, vibratory loads
and stress concentrations are not included.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import InputError
from .frame import SectionLines, cut_section_lines, hull_section_lines, pitch_motion
from .loads import centrifugal_force, centrifugal_moment, centrifugal_twisting_moment, moments_at_angle
from .moments import Moments, point_mass, tet_volume_moments
from .units import rpm_to_rad_s

#: What the spanwise figures include (reports print this beside the table).
SPAN_NOTE = (
    "centrifugal part only: tension P = F·e, nominal stress P/A, the centrifugal bending moments and "
    "the CTM of everything outboard of each station at the stated speed and blade angle; bending and "
    "aerodynamic loads, vibratory loads and stress concentrations are not included, so the margin of "
    "safety is not a strength substantiation. The strip CTM is the classical spanwise integration "
    "from section properties and the local blade angle, shown for comparison."
)

#: Relative anisotropy (I1 − I2)/(I1 + I2) below which a section is taken as round.
ROUND_SECTION = 1e-8

#: Default count stations sit this fraction of the solid's span inside its ends.
END_INSET = 1e-3


# --- cutting tetrahedra -----------------------------------------------------------------------


@dataclass(frozen=True)
class TetCut:
    """The part of a set of tetrahedra outboard of the plane y = radius (hub frame, m).

    whole : (k,) bool, elements whose moments are added whole (all four vertices outboard,
      and the three-outboard elements whose small inboard tetrahedron is subtracted)
    pieces : (p, 4, 3) vertices of the sub-tetrahedra, m
    piece_element : (p,) element of each sub-tetrahedron
    piece_sign : (p,) +1 added, −1 subtracted (the inboard corner of a three-outboard element)
    triangles : (q, 3, 3) the section polygons as triangles in the plane, m
    triangle_element : (q,) element each section triangle cuts

    A vertex exactly on the plane counts as inboard (the tie rule of :mod:`bladesolid.frame`,
    the same for the surface cut and the lumped masses); a cut point on an edge ending at such a
    vertex is that vertex exactly, so the pieces it makes have exactly zero volume and an
    element face lying in the plane is a section triangle with its own vertices.
    """

    whole: np.ndarray
    pieces: np.ndarray
    piece_element: np.ndarray
    piece_sign: np.ndarray
    triangles: np.ndarray
    triangle_element: np.ndarray


def _edge_points(V, D, i, j):
    """Points where the edges i→j of the tetrahedra V (c, 4, 3) meet the plane (D_i > 0 ≥ D_j);
    the vertex j itself, exactly, when it lies on the plane (D_j = 0)."""
    w = D[:, i] / (D[:, i] - D[:, j])
    p = V[:, i] + w[:, None] * (V[:, j] - V[:, i])
    return np.where((D[:, j] == 0.0)[:, None], V[:, j], p)


def cut_tetrahedra(nodes: np.ndarray, tets: np.ndarray, radius: float, tet_y=None) -> TetCut:
    """Clip tetrahedra by the plane y = ``radius`` and keep the outboard (y > radius) side.

    nodes : (n, 3) m;  tets : (k, 4) int;  tet_y : optional (k, 4) y of the vertices (speed).

    >>> nodes = np.array([[0., 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]])
    >>> c = cut_tetrahedra(nodes, np.array([[0, 1, 2, 3]]), 0.5)
    >>> len(c.pieces), int(c.whole.sum()), c.triangles.shape
    (1, 0, (1, 3, 3))
    """
    nodes = np.asarray(nodes, dtype=float)
    tets = np.asarray(tets, dtype=np.int64)
    Y = nodes[tets][:, :, 1] if tet_y is None else tet_y
    D_all = Y - float(radius)
    out = D_all > 0.0
    n_out = out.sum(axis=1)
    cut = np.flatnonzero((n_out > 0) & (n_out < 4))
    whole = (n_out == 4) | (n_out == 3)
    pieces, p_el, p_sign, tris, t_el = [], [], [], [], []
    if len(cut):
        order = np.argsort(~out[cut], axis=1, kind="stable")  # outboard vertices first
        ix = tets[cut][np.arange(len(cut))[:, None], order]
        V = nodes[ix]
        D = np.take_along_axis(D_all[cut], order, axis=1)
        nc = n_out[cut]

        s = nc == 1  # A outboard; B, C, D inboard: tetrahedron (A, pAB, pAC, pAD)
        if np.any(s):
            v, d = V[s], D[s]
            q1, q2, q3 = (_edge_points(v, d, 0, j) for j in (1, 2, 3))
            pieces.append(np.stack([v[:, 0], q1, q2, q3], axis=1))
            p_el.append(cut[s])
            p_sign.append(np.ones(int(s.sum())))
            tris.append(np.stack([q1, q2, q3], axis=1))
            t_el.append(cut[s])

        s = nc == 3  # D inboard: whole element minus the tetrahedron (D, pAD, pBD, pCD)
        if np.any(s):
            v, d = V[s], D[s]
            q0, q1, q2 = (_edge_points(v, d, i, 3) for i in (0, 1, 2))
            pieces.append(np.stack([v[:, 3], q0, q1, q2], axis=1))
            p_el.append(cut[s])
            p_sign.append(-np.ones(int(s.sum())))
            tris.append(np.stack([q0, q1, q2], axis=1))
            t_el.append(cut[s])

        s = nc == 2  # A, B outboard; C, D inboard: prism (A, pAC, pAD | B, pBC, pBD)
        if np.any(s):
            v, d = V[s], D[s]
            a0, a1, a2 = v[:, 0], _edge_points(v, d, 0, 2), _edge_points(v, d, 0, 3)
            b0, b1, b2 = v[:, 1], _edge_points(v, d, 1, 2), _edge_points(v, d, 1, 3)
            for quad in ((a0, a1, a2, b2), (a0, a1, b1, b2), (a0, b0, b1, b2)):
                pieces.append(np.stack(quad, axis=1))
                p_el.append(cut[s])
                p_sign.append(np.ones(int(s.sum())))
            # the cut quadrilateral pAC, pAD, pBD, pBC (convex) as two triangles
            tris.append(np.stack([a1, a2, b2], axis=1))
            tris.append(np.stack([a1, b2, b1], axis=1))
            t_el.extend([cut[s], cut[s]])

    def cat(parts, shape, dtype=float):
        return np.concatenate(parts) if parts else np.empty(shape, dtype=dtype)

    return TetCut(
        whole=whole,
        pieces=cat(pieces, (0, 4, 3)),
        piece_element=cat(p_el, (0,), np.int64),
        piece_sign=cat(p_sign, (0,)),
        triangles=cat(tris, (0, 3, 3)),
        triangle_element=cat(t_el, (0,), np.int64),
    )


def outboard_volume(nodes: np.ndarray, tets: np.ndarray, radius: float) -> float:
    """Volume (m³) of the tetrahedra outboard of the plane y = ``radius``, cut exactly.

    >>> nodes = np.array([[0., 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]])
    >>> round(outboard_volume(nodes, np.array([[0, 1, 2, 3]]), 0.5), 12)  # (1/6)(1/2)^3
    0.020833333333
    """
    c = cut_tetrahedra(nodes, tets, radius)
    whole = tet_volume_moments(nodes, np.asarray(tets)[c.whole]).mass.sum()
    p = len(c.pieces)
    parts = tet_volume_moments(c.pieces.reshape(-1, 3), np.arange(4 * p).reshape(p, 4)).mass
    return float(whole + np.sum(c.piece_sign * parts))


# --- plane sections ---------------------------------------------------------------------------


def triangle_area_moments(tri_xz: np.ndarray) -> np.ndarray:
    """Exact area moments of plane triangles (q, 3, 2): columns ∫dA, ∫x, ∫z, ∫x², ∫xz, ∫z².

    ∫ s dA = A (p0+p1+p2)/3;  ∫ s sᵀ dA = A/12 (Σ p pᵀ + (Σ p)(Σ p)ᵀ) (the plane case of the
    simplex formula of docs/CONVENTIONS.md §3).

    >>> triangle_area_moments(np.array([[[0., 0], [1, 0], [0, 1]]]))[0].round(6).tolist()
    [0.5, 0.166667, 0.166667, 0.083333, 0.041667, 0.083333]
    """
    p = np.asarray(tri_xz, dtype=float)
    e1, e2 = p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]
    A = 0.5 * np.abs(e1[:, 0] * e2[:, 1] - e1[:, 1] * e2[:, 0])
    s = p.sum(axis=1)
    pp = np.einsum("qai,qaj->qij", p, p) + np.einsum("qi,qj->qij", s, s)
    return np.column_stack([A, A * s[:, 0] / 3, A * s[:, 1] / 3,
                            A * pp[:, 0, 0] / 12, A * pp[:, 0, 1] / 12, A * pp[:, 1, 1] / 12])


@dataclass(frozen=True)
class Section:
    """Properties of one plane section y = radius at the modelled position (hub frame, m).

    area_m2; centroid_m (3,); I1_m4 ≥ I2_m4 the principal second moments of area about the
    centroid; u1 (3,) the chordwise principal direction (∫ (s·u1)² dA = I1, the direction in
    which the section extends, pointing to the side facing t), u2 = a × u1 the thickness
    direction; I1 is the second moment about the axis along u2, I2 about the axis along u1;
    is_round: I1 ≈ I2, every axis is principal, u1 is then taken along t;
    leading_edge, trailing_edge (3,) the ends of the nose-to-tail chord line, chord_m their
    distance; reference_line ``"chord"`` or ``"face"`` (docs/CONVENTIONS.md §2), line_angle_deg
    its blade angle at the modelled position (the same reading as the blade-angle header),
    thickness_m the largest thickness normal to it; density_kg_m3 area-weighted.
    """

    radius_m: float
    area_m2: float
    centroid_m: np.ndarray
    I1_m4: float
    I2_m4: float
    u1: np.ndarray
    u2: np.ndarray
    is_round: bool
    leading_edge: np.ndarray
    trailing_edge: np.ndarray
    chord_m: float
    thickness_m: float
    density_kg_m3: float
    reference_line: str = "chord"
    line_angle_deg: float = float("nan")


def _empty_section(radius: float, line: str = "chord") -> Section:
    nan3 = np.full(3, np.nan)
    return Section(float(radius), 0.0, nan3, 0.0, 0.0, nan3, nan3, False, nan3, nan3, 0.0, 0.0, float("nan"),
                   line, float("nan"))


def section_of(triangles: np.ndarray, densities: np.ndarray, radius: float, frame,
               lines: SectionLines | None = None, line: str = "chord") -> Section:
    """Section properties from its triangles (q, 3, 3) in the plane y = radius (hub frame).

    densities : (q,) density of the body each triangle belongs to, kg/m³ (for the
    area-weighted section density).
    lines : the section's chord and face lines from its contour
      (:func:`bladesolid.frame.cut_section_lines`); None: from the convex hull of the
      triangles (:func:`bladesolid.frame.hull_section_lines`, exact for a convex section)
    line : the reference line, ``"chord"`` or ``"face"``
    """
    if len(triangles) == 0:
        return _empty_section(radius, line)
    xz = triangles[:, :, [0, 2]]
    ref = xz.reshape(-1, 2).mean(axis=0)
    mom = triangle_area_moments(xz - ref)
    A, Sx, Sz, Sxx, Sxz, Szz = mom.sum(axis=0)
    if not A > 0:
        return _empty_section(radius, line)
    cx, cz = Sx / A, Sz / A
    J = np.array([[Sxx - A * cx * cx, Sxz - A * cx * cz], [Sxz - A * cx * cz, Szz - A * cz * cz]])
    w, v = np.linalg.eigh(J)
    I1, I2 = float(w[1]), float(w[0])
    is_round = (I1 - I2) <= ROUND_SECTION * (I1 + I2)
    if is_round:
        u1 = frame.t.copy()
    else:
        u1 = np.array([v[0, 1], 0.0, v[1, 1]])
        if np.dot(u1, frame.t) < 0 or (np.dot(u1, frame.t) == 0 and np.dot(u1, frame.f) < 0):
            u1 = -u1
    u2 = np.cross(frame.a, u1)
    centroid = np.array([ref[0] + cx, float(radius), ref[1] + cz])
    if lines is None:
        lines = hull_section_lines(triangles.reshape(-1, 3), frame)
    rho = float(np.sum(mom[:, 0] * densities) / A)
    if lines is None:
        nan3 = np.full(3, np.nan)
        return Section(float(radius), float(A), centroid, I1, I2, u1, u2, bool(is_round), nan3, nan3, 0.0, 0.0,
                       rho, line, float("nan"))
    return Section(float(radius), float(A), centroid, I1, I2, u1, u2, bool(is_round), lines.leading_edge,
                   lines.trailing_edge, lines.chord_m, lines.thickness_m(line), rho, line, lines.angle_deg(line))


# --- stations ---------------------------------------------------------------------------------


def station_radii(blade, stations=16) -> np.ndarray:
    """Station radii (m, ascending, unique) from a count or a list of radii.

    A count ``n`` spreads the stations evenly from just outboard of the innermost point of the
    solid to just inboard of the tip (each end inset by 0.1 % of the span, so the first station
    does not lie in the root face nor the last at the tip point); one station sits at mid-span.
    """
    if isinstance(stations, (bool, np.bool_)):
        raise InputError("stations", f"expected a count or a list of radii, got {stations!r}")
    if isinstance(stations, (int, np.integer)):
        n = int(stations)
        if n < 1:
            raise InputError("stations", f"station count must be at least 1, got {n}")
        y_lo = float(blade.element_nodes[:, 1].min()) if blade.element_nodes is not None else float(
            min(v[:, 1].min() for v, _ in blade.surfaces))
        y_hi = float(blade.tip_radius_m)
        if n == 1:
            return np.array([0.5 * (y_lo + y_hi)])
        d = END_INSET * (y_hi - y_lo)
        return np.linspace(y_lo + d, y_hi - d, n)
    try:
        r = np.asarray(stations, dtype=float).ravel()
    except (TypeError, ValueError):
        raise InputError("stations", f"expected a count or a list of radii in m, got {stations!r}") from None
    if r.size == 0 or not np.all(np.isfinite(r)):
        raise InputError("stations", "station radii must be finite numbers (m); none given or not a number")
    return np.unique(r)


# --- the table --------------------------------------------------------------------------------


@dataclass(frozen=True)
class SpanTable:
    """Spanwise table at one speed and blade angle (hub frame at that blade angle, SI).

    Per station (arrays of length n, inboard first):
      radius_m; area_m2; centroid_m (n, 3); I1_m4 ≥ I2_m4 principal second moments of area
      about the centroid (I1 about the thickness-direction axis u2, I2 about the chordwise
      axis u1); principal_angle_deg the blade angle of the chordwise principal direction u1
      (NaN for a round section); chord_m the nose-to-tail chord; thickness_m the largest
      thickness normal to the reference line, and local_blade_angle_deg the blade angle of that
      line — the line of the blade-angle header (chord or face, docs/CONVENTIONS.md §2), same sign;
      density_kg_m3 (area-weighted over bodies);
      outboard: mass_outboard_kg, cf_outboard_vector_N (n, 3), cf_outboard_N = tension F·e,
      bending_principal_1_Nm (about the axis of I1 through the centroid, along u2: edgewise),
      bending_principal_2_Nm (about the axis of I2, along u1: flatwise), ctm_outboard_Nm about
      the pitch axis (+ toward coarse); stress_Pa = P/A; margin_of_safety = allowable/(P/A) − 1
      (centrifugal part only; NaN without an allowable); strip: ctm_strip_per_length_N
      (dCTM/dr, N·m/m) and ctm_strip_outboard_Nm; ctm_offset_outboard_Nm, what the strip
      method leaves out by taking each lamina about its own centroid: the CTM of each section's
      mass per length ρA lumped at its centroid, integrated the same way (parallel-axis term).
      For a blade without lumped masses, strip + offset → the solid CTM as the stations are refined.
    outboard_moments : per station, the outboard mass moments at the blade angle.
    """

    name: str
    rpm: float
    omega_rad_s: float
    blade_angle_deg: float
    modelled_deg: float
    allowable_Pa: float | None
    tip_radius_m: float
    density_note: str
    radius_m: np.ndarray
    area_m2: np.ndarray
    centroid_m: np.ndarray
    I1_m4: np.ndarray
    I2_m4: np.ndarray
    principal_angle_deg: np.ndarray
    chord_m: np.ndarray
    thickness_m: np.ndarray
    local_blade_angle_deg: np.ndarray
    density_kg_m3: np.ndarray
    mass_outboard_kg: np.ndarray
    cf_outboard_vector_N: np.ndarray
    cf_outboard_N: np.ndarray
    bending_principal_1_Nm: np.ndarray
    bending_principal_2_Nm: np.ndarray
    ctm_outboard_Nm: np.ndarray
    stress_Pa: np.ndarray
    margin_of_safety: np.ndarray
    ctm_strip_per_length_N: np.ndarray
    ctm_strip_outboard_Nm: np.ndarray
    ctm_offset_outboard_Nm: np.ndarray
    outboard_moments: tuple[Moments, ...]

    def __len__(self) -> int:
        return int(self.radius_m.shape[0])


def strip_ctm_per_length(density, I1, I2, theta_deg, omega):
    """Classical strip CTM per unit span, N·m/m: dCTM/dr = −(ρ Ω²/2)(I1 − I2) sin 2θ.

    The classical strip method of propeller-blade CTM (e.g. W. C. Nelson, "Airplane Propeller
    Principles", Wiley 1944 — from memory): each slice is a thin lamina about its own centroid,
    with I1 ≥ I2 its principal second moments of area and θ the blade angle of the chordwise
    principal direction (the direction along which the section extends). It ignores the
    offset of the section centroids from the pitch axis, lumped masses and the 3-D shape of the
    shank and tip.

    >>> round(float(strip_ctm_per_length(1000.0, 2.0, 1.0, 45.0, 1.0)), 12)
    -500.0
    """
    return -(np.asarray(density) * omega**2 / 2.0) * (np.asarray(I1) - np.asarray(I2)) * np.sin(
        np.radians(2.0 * np.asarray(theta_deg)))


def integrate_outboard(radii: np.ndarray, g: np.ndarray, tip: float) -> np.ndarray:
    """∫ from each station to the tip of g(r) dr by the trapezoid rule over the stations;
    from the last station to the tip the integrand is taken to fall linearly to zero.

    >>> integrate_outboard(np.array([0.0, 1.0]), np.array([2.0, 2.0]), 2.0).tolist()
    [3.0, 1.0]
    """
    r = np.asarray(radii, dtype=float)
    g = np.asarray(g, dtype=float)
    seg = 0.5 * (g[:-1] + g[1:]) * np.diff(r)
    end = 0.5 * g[-1] * max(tip - r[-1], 0.0)
    out = np.empty_like(r)
    out[-1] = end
    if len(seg):
        out[:-1] = end + np.cumsum(seg[::-1])[::-1]
    return out


def _angle_deg(u, frame) -> float:
    return math.degrees(math.atan2(float(u @ frame.f), float(u @ frame.t)))


def span_table(blade, rpm: float, blade_angle_deg: float | None = None, stations=16,
               allowable_Pa: float | None = None, *, pitch_change_deg: float | None = None,
               name: str = "") -> SpanTable:
    """The spanwise table of a meshed blade at ``rpm`` and a blade angle.

    blade : :class:`bladesolid.api.Blade` with its tetrahedral mass elements
    rpm : speed, rpm;  blade_angle_deg / pitch_change_deg : as :func:`bladesolid.api.resolve_blade_angle`
      (default: the modelled blade angle)
    stations : a count (see :func:`station_radii`) or a sequence of radii along the pitch axis, m
    allowable_Pa : material allowable stress for the centrifugal margin of safety, Pa
    """
    from .api import resolve_blade_angle  # the semantics of the documented API, written once

    if blade.elements is None or blade.element_tets is None:
        raise InputError(blade.source, "spanwise cuts need the tetrahedral mass elements: load the blade with elements=True")
    if allowable_Pa is not None and not (allowable_Pa > 0 and math.isfinite(allowable_Pa)):
        raise InputError("allowable", f"the allowable stress must be a positive number of Pa, got {allowable_Pa!r}")
    beta = resolve_blade_angle(blade, blade_angle_deg, pitch_change_deg)
    delta = beta - blade.modelled_deg
    omega = rpm_to_rad_s(rpm)
    frame = blade.frame
    radii = station_radii(blade, stations)
    n = len(radii)

    nodes, tets = blade.element_nodes, blade.element_tets
    el = blade.elements
    rho_body = np.array([m.density_kg_m3 for m in blade.materials])
    rho_el = rho_body[blade.element_body]
    E = np.column_stack([el.mass, el.first, el.second.reshape(-1, 9)])
    tet_y = nodes[tets][:, :, 1]
    line = blade.modelled_angle.reference_line if blade.modelled_angle is not None else "chord"

    whole = np.zeros((n, 13))
    pieces, p_station, p_weight, sections = [], [], [], []
    for i, r in enumerate(radii):
        c = cut_tetrahedra(nodes, tets, r, tet_y)
        whole[i] = E[c.whole].sum(axis=0)
        pieces.append(c.pieces)
        p_station.append(np.full(len(c.pieces), i))
        p_weight.append(c.piece_sign * rho_el[c.piece_element])
        lines = cut_section_lines(blade.surfaces, frame, r)  # the header's reading, same surfaces
        sections.append(section_of(c.triangles, rho_el[c.triangle_element], r, frame, lines=lines, line=line))
    P = np.concatenate(pieces)
    ist = np.concatenate(p_station)
    wgt = np.concatenate(p_weight)
    vm = tet_volume_moments(P.reshape(-1, 3), np.arange(4 * len(P)).reshape(-1, 4))
    V = np.column_stack([vm.mass, vm.first, vm.second.reshape(-1, 9)]) * wgt[:, None]
    cutpart = np.column_stack([np.bincount(ist, weights=V[:, j], minlength=n) for j in range(13)])
    acc = whole + cutpart

    lumped_y = [(float(frame.to_hub(p.position_m)[1]), point_mass(p.mass_kg, frame.to_hub(p.position_m)))
                for p in blade.lumped]
    R, t = pitch_motion(frame, delta)
    rows = {k: np.full(n, np.nan) for k in (
        "area", "I1", "I2", "pa", "chord", "thick", "lba", "rho", "mass", "P", "b1", "b2", "ctm", "stress", "ms")}
    centroid = np.full((n, 3), np.nan)
    Fvec = np.zeros((n, 3))
    outboard = []
    for i, (r, sec) in enumerate(zip(radii, sections)):
        m = Moments(float(acc[i, 0]), acc[i, 1:4].copy(), acc[i, 4:].reshape(3, 3).copy())
        for y, pm in lumped_y:
            if y > r:
                m = m + pm
        m = moments_at_angle(m, frame, delta)
        outboard.append(m)
        F = centrifugal_force(m, frame.k, omega)
        Fvec[i] = F
        rows["mass"][i] = m.mass
        rows["P"][i] = F @ frame.e
        rows["ctm"][i] = centrifugal_twisting_moment(m, frame, omega)
        rows["area"][i] = sec.area_m2
        rows["I1"][i], rows["I2"][i] = sec.I1_m4, sec.I2_m4
        rows["chord"][i], rows["thick"][i] = sec.chord_m, sec.thickness_m
        rows["rho"][i] = sec.density_kg_m3
        if sec.area_m2 > 0:
            c = R @ sec.centroid_m + t
            u1, u2 = R @ sec.u1, R @ sec.u2
            centroid[i] = c
            M = centrifugal_moment(m, c, frame.k, omega)
            rows["b1"][i] = M @ u2
            rows["b2"][i] = M @ u1
            rows["pa"][i] = np.nan if sec.is_round else _angle_deg(u1, frame)
            # a pitch change turns every line of the section by Δβ about a (docs/CONVENTIONS.md §2)
            rows["lba"][i] = sec.line_angle_deg + delta
            rows["stress"][i] = rows["P"][i] / sec.area_m2
            if allowable_Pa is not None and rows["stress"][i] > 0:
                rows["ms"][i] = allowable_Pa / rows["stress"][i] - 1.0
    theta = np.where(np.isnan(rows["pa"]), 0.0, rows["pa"])
    g = strip_ctm_per_length(np.nan_to_num(rows["rho"]), rows["I1"], rows["I2"], theta, omega)
    g = np.where(rows["area"] > 0, g, 0.0)
    strip = integrate_outboard(radii, g, blade.tip_radius_m)
    off = np.array([
        float(centrifugal_twisting_moment(point_mass(rows["rho"][i] * rows["area"][i], centroid[i]), frame, omega))
        if rows["area"][i] > 0 else 0.0 for i in range(n)])
    offset = integrate_outboard(radii, off, blade.tip_radius_m)

    if np.all(rho_body == rho_body[0]):
        note = "single density"
    else:
        note = ("bodies of different densities: the strip estimate uses the area-weighted density of "
                "each section; the solid result uses each element's own density")
    return SpanTable(
        name=name or blade.name,
        rpm=float(rpm),
        omega_rad_s=omega,
        blade_angle_deg=float(beta),
        modelled_deg=float(blade.modelled_deg),
        allowable_Pa=None if allowable_Pa is None else float(allowable_Pa),
        tip_radius_m=float(blade.tip_radius_m),
        density_note=note,
        radius_m=radii,
        area_m2=rows["area"],
        centroid_m=centroid,
        I1_m4=rows["I1"],
        I2_m4=rows["I2"],
        principal_angle_deg=rows["pa"],
        chord_m=rows["chord"],
        thickness_m=rows["thick"],
        local_blade_angle_deg=rows["lba"],
        density_kg_m3=rows["rho"],
        mass_outboard_kg=rows["mass"],
        cf_outboard_vector_N=Fvec,
        cf_outboard_N=rows["P"],
        bending_principal_1_Nm=rows["b1"],
        bending_principal_2_Nm=rows["b2"],
        ctm_outboard_Nm=rows["ctm"],
        stress_Pa=rows["stress"],
        margin_of_safety=rows["ms"],
        ctm_strip_per_length_N=g,
        ctm_strip_outboard_Nm=strip,
        ctm_offset_outboard_Nm=offset,
        outboard_moments=tuple(outboard),
    )


# --- rows, plot -------------------------------------------------------------------------------

#: The per-station scalar columns of :func:`spanwise_rows` (report key → SpanTable field).
_SCALARS = (
    "radius_m", "area_m2", "mass_outboard_kg", "cf_outboard_N", "ctm_outboard_Nm", "stress_Pa",
    "margin_of_safety", "ctm_strip_outboard_Nm", "ctm_strip_per_length_N", "ctm_offset_outboard_Nm", "I1_m4", "I2_m4",
    "principal_angle_deg", "chord_m", "thickness_m", "local_blade_angle_deg", "density_kg_m3",
    "bending_principal_1_Nm", "bending_principal_2_Nm",
)
_VECTORS = ("centroid_m", "cf_outboard_vector_N")


def _num(x):
    x = float(x)
    return x if math.isfinite(x) else None


def spanwise_rows(table: SpanTable, flat: bool = False) -> list[dict]:
    """The ``spanwise`` rows of the JSON report (docs/CONVENTIONS.md §6), one per station, inboard first.

    Keys: radius_m, area_m2, mass_outboard_kg, cf_outboard_N (tension F·e), ctm_outboard_Nm,
    stress_Pa, margin_of_safety (centrifugal part only; null without an allowable),
    ctm_strip_outboard_Nm, ctm_strip_per_length_N, ctm_offset_outboard_Nm, I1_m4, I2_m4, principal_angle_deg, chord_m,
    thickness_m, local_blade_angle_deg, density_kg_m3, bending_principal_1_Nm,
    bending_principal_2_Nm, centroid_m [x, y, z], cf_outboard_vector_N [x, y, z] (hub frame at the
    table's blade angle). Undefined values (no section) are None. ``flat`` splits the vectors
    into ``_x``/``_y``/``_z`` columns (for CSV).
    """
    rows = []
    for i in range(len(table)):
        row = {k: _num(getattr(table, k)[i]) for k in _SCALARS}
        for k in _VECTORS:
            v = [_num(x) for x in getattr(table, k)[i]]
            if flat:
                base = k.rsplit("_", 1)
                for ax, x in zip("xyz", v):
                    row[f"{base[0]}_{ax}_{base[1]}"] = x
            else:
                row[k] = v
        rows.append(row)
    return rows


def plot_span(table: SpanTable, path, force: bool = False) -> str:
    """PNG of stress, tension, CTM (solid cut vs strip estimate) and area against radius.

    Written atomically (rendered to memory first). Returns the path.
    """
    import io

    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from .report import atomic_write_bytes
    from .views import add_caution

    r = table.radius_m
    fig, ax = plt.subplots(2, 2, figsize=(10, 7.5), sharex=True)
    (a1, a2), (a3, a4) = ax
    a1.plot(r, table.stress_Pa / 1e6, "o-", ms=3, label="P/A")
    if table.allowable_Pa is not None:
        a1.axhline(table.allowable_Pa / 1e6, color="tab:red", ls="--", lw=1, label="allowable")
        a1.legend(fontsize=8)
    a1.set_ylabel("centrifugal stress P/A (MPa)")
    a2.plot(r, table.cf_outboard_N / 1e3, "o-", ms=3)
    a2.set_ylabel("tension F·e outboard (kN)")
    a3.plot(r, table.ctm_outboard_Nm, "o-", ms=3, label="solid, cut exactly")
    a3.plot(r, table.ctm_strip_outboard_Nm, "s--", ms=3, label="strip estimate")
    a3.plot(r, table.ctm_strip_outboard_Nm + table.ctm_offset_outboard_Nm, ":", lw=1.2,
            label="strip + section-centroid offset")
    a3.axhline(0.0, color="0.6", lw=0.8)
    a3.set_ylabel("CTM outboard (N·m, + toward coarse)")
    a3.legend(fontsize=8)
    a4.plot(r, table.area_m2 * 1e4, "o-", ms=3)
    a4.set_ylabel("section area (cm²)")
    for a in (a3, a4):
        a.set_xlabel("radius along the pitch axis (m)")
    for a in ax.ravel():
        a.grid(True, lw=0.4, alpha=0.6)
    fig.suptitle(f"{table.name} — {table.rpm:g} rpm, blade angle {table.blade_angle_deg:.2f} deg "
                 f"(centrifugal part only)", fontsize=11)
    add_caution(fig)  # the footer, legible, with the layout kept clear of it
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=120)
    plt.close(fig)
    return atomic_write_bytes(path, buf.getvalue(), force)
