"""Parametric demo blade: the invented Brightwater Propellers BW-3 (3 blades, 2.0 m, aluminium).

The blade is lofted from planar sections normal to the pitch axis and modelled directly in the
hub frame of docs/CONVENTIONS.md §1 with the identity job: hub centre at the origin, ``z`` the rotation
axis pointing forward (thrust), ``y`` the pitch axis pointing outboard, ``x = y × z``, right-hand
rotation, so the leading edge faces ``t = k × e = -x``. All lengths here are millimetres.

A section at blade angle ``β`` has its chord direction (trailing edge to leading edge)
``d = cos β (-x) + sin β (+z)`` and its camber (suction side) towards ``n = sin β x + cos β z``,
which faces forward as it should for a propeller that pushes air aft.

Stations, inboard to outboard:

* ``root_radius_mm`` .. ``shank_end_mm`` — circular shank, coaxial with the pitch axis;
* ``shank_end_mm`` .. ``transition_end_mm`` — smooth (C1) blend from the circle to the airfoil;
* ``transition_end_mm`` .. tip — cambered NACA 4-digit-like sections with a finite, rounded
  trailing edge, tapered chord, thinning thickness ratio, constant geometric pitch (washout)
  and a little skew-back;
* the last ``tip_cap_mm`` — sections shrink elliptically about the pitch axis point into a
  closed, rounded tip at ``tip_radius_mm - tip_trim_mm``.

Everything is plain numpy (trimesh is imported only to write STL files), and the same
parameters always give byte-identical arrays.
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import asdict, dataclass, replace
from pathlib import Path

import numpy as np

from .compare.transforms import apply_transform, rigid_matrix
from .frame import rotation_about
from .geometry import enclosed_volume

__all__ = ["DEMO_DENSITY_KG_M3", "REPAIR_JOB", "REPAIR_LIMITS", "SCAN_ANGLE_DEG", "SCAN_AXIS", "SCAN_TRANSLATION_MM",
           "step_job_text",
           "blade_surface", "BladeParams", "chord_mm", "demo_variants", "designed_blade_angle_deg",
           "geometric_pitch_mm", "large_blade_surface", "le_blend_depth_at", "rigid_transform", "scanned_variant",
           "section_rings", "station_radii", "sweep_mm", "thickness_ratio", "write_demo", "write_demo_meshes"]

#: Density of the demo blade material (a wrought high-strength aluminium alloy), kg/m³ — from memory.
DEMO_DENSITY_KG_M3 = 2810.0

#: Rigid motion of the "scanned" variant: rotation about an oblique axis through the origin,
#: then a translation (mm).
SCAN_ANGLE_DEG = 20.0
SCAN_AXIS = (0.3, -0.5, 0.8)
SCAN_TRANSLATION_MM = (80.0, -45.0, 40.0)


@dataclass(frozen=True)
class BladeParams:
    """Design parameters of the demo blade (lengths in mm, angles in degrees).

    Distributions are functions of the radius ``r`` (the ``y`` coordinate) and do not depend
    on ``tip_trim_mm``, so a dressed tip is the same blade ending further inboard.

    >>> p = BladeParams()
    >>> p.tip_radius_mm, p.n_blades, p.blade_angle_ref_deg
    (1000.0, 3, 25.0)
    >>> round(p.end_radius_mm, 1)
    1000.0
    """

    name: str = "Brightwater Propellers BW-3"
    n_blades: int = 3
    tip_radius_mm: float = 1000.0
    # shank and transition
    root_radius_mm: float = 110.0       # butt face of the shank (closed planar cap)
    shank_end_mm: float = 230.0         # end of the circular cylinder
    transition_end_mm: float = 300.0    # circle-to-airfoil blend complete
    shank_radius_mm: float = 38.0
    # planform: chord c(r), piecewise parabolic with zero slope at the maximum
    chord_root_mm: float = 140.0        # at transition_end_mm
    chord_max_mm: float = 170.0
    chord_max_radius_mm: float = 500.0
    chord_tip_mm: float = 70.0          # at tip_radius_mm (before the tip rounding)
    # thickness ratio t/c: tip + (root - tip) * ((R - r)/(R - r_t))**exponent
    thickness_root: float = 0.30
    thickness_tip: float = 0.06
    thickness_exponent: float = 2.0
    te_thickness_mm: float = 0.8        # finite trailing edge, closed by a half circle
    # camber (NACA 4-digit mean line), towards +n (suction side, forward)
    camber: float = 0.02
    camber_position: float = 0.4
    # twist: constant geometric pitch through this blade angle at the reference radius
    blade_angle_ref_deg: float = 25.0
    reference_radius_fraction: float = 0.75
    pitch_axis_chord_fraction: float = 0.32   # pitch axis through the mean line at this chord
    # skew: offset of the section reference point towards +x (trailing side) at the tip,
    # growing with ((r - r_t)/(R - r_t))**2
    sweep_tip_mm: float = 6.0
    # tip
    tip_cap_mm: float = 30.0            # spanwise length of the elliptical tip rounding
    tip_trim_mm: float = 0.0            # tip dressed back: blade ends at R - tip_trim_mm
    # optional leading-edge blend (a smooth local scallop), off when depth is 0
    le_blend_depth_mm: float = 0.0
    le_blend_radius_mm: float = 820.0   # centre of the spanwise band
    le_blend_width_mm: float = 100.0    # spanwise width of the band
    le_blend_chord_mm: float = 25.0     # chordwise extent measured from the leading edge
    # resolution
    n_chord: int = 120                  # points around each section (even)
    n_span: int = 72                    # stations from the root face to the start of the tip cap
    n_tip: int = 10                     # rings of the tip cap (including its first station)

    def __post_init__(self) -> None:
        problems = []
        if self.n_chord < 16 or self.n_chord % 2:
            problems.append(f"n_chord must be an even integer >= 16, got {self.n_chord}")
        if self.n_span < 4:
            problems.append(f"n_span must be >= 4, got {self.n_span}")
        if self.n_tip < 3:
            problems.append(f"n_tip must be >= 3, got {self.n_tip}")
        if not (0.0 < self.root_radius_mm < self.shank_end_mm < self.transition_end_mm):
            problems.append("need 0 < root_radius_mm < shank_end_mm < transition_end_mm")
        if not (self.transition_end_mm < self.end_radius_mm - self.tip_cap_mm):
            problems.append("the tip cap must start outboard of transition_end_mm")
        if not (0.15 <= self.pitch_axis_chord_fraction <= 0.5):
            problems.append("pitch_axis_chord_fraction must lie in [0.15, 0.5]")
        if not (0.0 <= self.camber < 0.08 and 0.2 <= self.camber_position <= 0.6):
            problems.append("camber must lie in [0, 0.08) and camber_position in [0.2, 0.6]")
        if self.tip_trim_mm < 0.0 or self.le_blend_depth_mm < 0.0:
            problems.append("tip_trim_mm and le_blend_depth_mm must be >= 0")
        if self.le_blend_depth_mm > 0.0 and self.le_blend_chord_mm <= self.le_blend_depth_mm:
            problems.append("le_blend_chord_mm must exceed le_blend_depth_mm")
        if problems:
            raise ValueError("BladeParams: " + "; ".join(problems))

    @property
    def end_radius_mm(self) -> float:
        """Radius of the outermost point of the blade (the tip), mm."""
        return self.tip_radius_mm - self.tip_trim_mm

    @property
    def reference_radius_mm(self) -> float:
        """Radius of the blade-angle reference station, mm."""
        return self.reference_radius_fraction * self.tip_radius_mm


# --------------------------------------------------------------------------- distributions


def geometric_pitch_mm(params: BladeParams) -> float:
    """Constant geometric pitch ``P = 2π r_ref tan β_ref`` of the blade, mm."""
    return 2.0 * math.pi * params.reference_radius_mm * math.tan(
        math.radians(params.blade_angle_ref_deg))


def designed_blade_angle_deg(params: BladeParams, r_mm) -> np.ndarray:
    """Designed blade angle ``β(r) = atan(P / (2π r))`` in degrees (clamped inboard of the
    transition end, where the shank begins).

    >>> round(float(designed_blade_angle_deg(BladeParams(), 750.0)), 6)
    25.0
    """
    r = np.maximum(np.asarray(r_mm, dtype=float), params.transition_end_mm)
    return np.degrees(np.arctan(geometric_pitch_mm(params) / (2.0 * math.pi * r)))


def chord_mm(params: BladeParams, r_mm) -> np.ndarray:
    """Chord length ``c(r)`` in mm (before the tip rounding), clamped inboard of the
    transition end.

    >>> p = BladeParams()
    >>> [round(float(chord_mm(p, r)), 1) for r in (300.0, 500.0, 1000.0)]
    [140.0, 170.0, 70.0]
    """
    p = params
    r = np.maximum(np.asarray(r_mm, dtype=float), p.transition_end_mm)
    inner = (p.chord_max_radius_mm - r) / (p.chord_max_radius_mm - p.transition_end_mm)
    outer = (r - p.chord_max_radius_mm) / (p.tip_radius_mm - p.chord_max_radius_mm)
    return np.where(r <= p.chord_max_radius_mm,
                    p.chord_max_mm - (p.chord_max_mm - p.chord_root_mm) * inner**2,
                    p.chord_max_mm - (p.chord_max_mm - p.chord_tip_mm) * outer**2)


def thickness_ratio(params: BladeParams, r_mm) -> np.ndarray:
    """Thickness-to-chord ratio ``t/c`` at radius ``r`` (clamped inboard of the transition)."""
    p = params
    r = np.clip(np.asarray(r_mm, dtype=float), p.transition_end_mm, p.tip_radius_mm)
    u = (p.tip_radius_mm - r) / (p.tip_radius_mm - p.transition_end_mm)
    return p.thickness_tip + (p.thickness_root - p.thickness_tip) * u**p.thickness_exponent


def sweep_mm(params: BladeParams, r_mm) -> np.ndarray:
    """Offset of the section reference point along ``+x`` (towards the trailing side), mm."""
    p = params
    r = np.maximum(np.asarray(r_mm, dtype=float), p.transition_end_mm)
    u = (r - p.transition_end_mm) / (p.tip_radius_mm - p.transition_end_mm)
    return p.sweep_tip_mm * u**2


def _smoothstep(u):
    u = np.clip(u, 0.0, 1.0)
    return u * u * (3.0 - 2.0 * u)


def le_blend_depth_at(params: BladeParams, r_mm) -> np.ndarray:
    """Depth (mm) by which the leading edge is cut back at radius ``r``: a cos² bump of full
    width ``le_blend_width_mm`` centred at ``le_blend_radius_mm`` (C1 smooth, zero outside)."""
    p = params
    u = (np.asarray(r_mm, dtype=float) - p.le_blend_radius_mm) / p.le_blend_width_mm
    bump = np.where(np.abs(u) < 0.5, np.cos(np.pi * u) ** 2, 0.0)
    return p.le_blend_depth_mm * bump


def station_radii(params: BladeParams) -> tuple[np.ndarray, np.ndarray]:
    """Radii (mm) of the section rings and their tip-cap scale factors.

    Returns ``(r, s)``: ``n_span`` uniform stations from the root face to the start of the tip
    cap of the untrimmed blade, then ``n_tip - 1`` cap rings at ``r = r_cap + L sin θ`` with
    scale ``cos θ`` (an elliptical tip). A dressed tip keeps the same inboard stations (so the
    two surfaces coincide there), drops those within half a spacing of its own cap start and
    adds that cap start. The tip point itself, at ``end_radius_mm``, is not a ring.

    >>> r, s = station_radii(BladeParams())
    >>> len(r), float(r[0]), round(float(r[71]), 6), float(s[71])
    (81, 110.0, 970.0, 1.0)
    """
    p = params
    full = np.linspace(p.root_radius_mm, p.tip_radius_mm - p.tip_cap_mm, p.n_span)
    r_cap = p.end_radius_mm - p.tip_cap_mm
    spacing = full[1] - full[0]
    r_main = np.append(full[full < r_cap - 0.5 * spacing], r_cap)
    theta = 0.5 * np.pi * np.arange(1, p.n_tip) / p.n_tip
    r_tip = r_cap + p.tip_cap_mm * np.sin(theta)
    scale = np.concatenate([np.ones(len(r_main)), np.cos(theta)])
    return np.concatenate([r_main, r_tip]), scale


# --------------------------------------------------------------------------- sections


def _airfoil(params: BladeParams, chord: float, tau: float):
    """One section in chord units ``(ξ, η)``: ξ from the leading edge (0) to the trailing
    edge (1), η towards the suction side. Returns ``(points (n_chord, 2), xi_param (n_chord,),
    le_index, lower_te_index)``; the ring runs upper TE → LE → lower TE → TE arc."""
    p = params
    n_arc = 3
    n_side = (p.n_chord - 1 - n_arc) // 2           # n_chord = 2 n_side + 1 + n_arc
    x = 0.5 * (1.0 - np.cos(np.linspace(0.0, np.pi, n_side + 1)))

    # NACA 4-digit half-thickness and mean line (from memory), with a linear term added so
    # that the trailing edge keeps the finite thickness te_thickness_mm
    def naca_half(xx):
        return 5.0 * tau * (0.2969 * np.sqrt(xx) - 0.1260 * xx - 0.3516 * xx**2
                            + 0.2843 * xx**3 - 0.1015 * xx**4)

    half = naca_half(x) + x * (0.5 * p.te_thickness_mm / chord - naca_half(1.0))
    m, pc = p.camber, p.camber_position
    yc = np.where(x < pc, m / pc**2 * (2 * pc * x - x**2),
                  m / (1 - pc) ** 2 * ((1 - 2 * pc) + 2 * pc * x - x**2))
    dyc = np.where(x < pc, 2 * m / pc**2 * (pc - x), 2 * m / (1 - pc) ** 2 * (pc - x))
    th = np.arctan(dyc)
    upper = np.column_stack([x - half * np.sin(th), yc + half * np.cos(th)])
    lower = np.column_stack([x + half * np.sin(th), yc - half * np.cos(th)])
    # half-circle trailing edge from the lower TE point round the back to the upper TE point
    nrm = np.array([-np.sin(th[-1]), np.cos(th[-1])])
    tan = np.array([np.cos(th[-1]), np.sin(th[-1])])
    phi = np.pi * (1.0 - np.arange(1, n_arc + 1) / (n_arc + 1))
    arc = (np.array([x[-1], yc[-1]])
           + half[-1] * (np.cos(phi)[:, None] * nrm + np.sin(phi)[:, None] * tan))
    pts = np.vstack([upper[::-1], lower[1:], arc])
    xi = np.concatenate([x[::-1], x[1:], np.ones(n_arc)])
    return pts, xi, n_side, 2 * n_side


def _circle_angles(local: np.ndarray, le_index: int, lower_te_index: int) -> np.ndarray:
    """Angles (rad, in the local (p, q) plane) at which the circle points corresponding to the
    airfoil ring ``local`` sit: piecewise proportional to arc length, LE at 0, the TE arc
    centred on π, monotonically decreasing around the ring."""
    n = len(local)
    seg = np.linalg.norm(np.roll(local, -1, axis=0) - local, axis=1)
    s = np.concatenate([[0.0], np.cumsum(seg)])      # s[n] = perimeter (closing edge)
    alpha = np.pi * (s[n] - s[lower_te_index]) / s[n]
    knots_s = np.array([s[0], s[le_index], s[lower_te_index], s[n]])
    knots_phi = np.array([np.pi - alpha, 0.0, -np.pi + alpha, -np.pi - alpha])
    return np.interp(s[:n], knots_s, knots_phi)


def section_rings(params: BladeParams):
    """All section rings in the hub frame.

    Returns
    -------
    rings : (n_rings, n_chord, 3) float64
        Ring points, mm, hub frame; ring ``k`` lies in the plane ``y = r[k]``.
    centres : (n_rings, 3) float64
        Section reference points (pitch-axis chord fraction on the mean line, swept), mm.
    tip : (3,) float64
        The closing tip point at ``y = end_radius_mm``.
    root_centre : (3,) float64
        Centre of the root face at ``y = root_radius_mm``.
    """
    p = params
    r, scale = station_radii(p)
    xi_p = p.pitch_axis_chord_fraction
    m, pc = p.camber, p.camber_position
    yc_p = (m / pc**2 * (2 * pc * xi_p - xi_p**2) if xi_p < pc
            else m / (1 - pc) ** 2 * ((1 - 2 * pc) + 2 * pc * xi_p - xi_p**2))
    chords = chord_mm(p, r)
    taus = thickness_ratio(p, r)
    betas = np.radians(designed_blade_angle_deg(p, r))
    sweeps = sweep_mm(p, r)
    weights = _smoothstep((r - p.shank_end_mm) / (p.transition_end_mm - p.shank_end_mm))
    depths = le_blend_depth_at(p, r)

    rings = np.empty((len(r), p.n_chord, 3))
    centres = np.empty((len(r), 3))
    for k in range(len(r)):
        c = float(chords[k])
        pts, xi, i_le, i_lte = _airfoil(p, c, float(taus[k]))
        # local (p, q): p towards the leading edge, q towards the suction side, origin on the
        # pitch axis point of the mean line
        local = np.column_stack([(xi_p - pts[:, 0]) * c, (pts[:, 1] - yc_p) * c])
        w = float(weights[k])
        if w < 1.0:
            ang = _circle_angles(local, i_le, i_lte)
            circle = p.shank_radius_mm * np.column_stack([np.cos(ang), np.sin(ang)])
            local = (1.0 - w) * circle + w * local
        if depths[k] > 0.0:
            # move leading-edge points straight towards the reference point: the section stays
            # star-shaped about it and lies inside the original one
            fade = np.clip(1.0 - xi * c / p.le_blend_chord_mm, 0.0, None) ** 2
            dist = np.linalg.norm(local, axis=1)
            local = local * (1.0 - depths[k] * fade / dist)[:, None]
        local = local * scale[k]
        d = np.array([-np.cos(betas[k]), 0.0, np.sin(betas[k])])
        nrm = np.array([np.sin(betas[k]), 0.0, np.cos(betas[k])])
        centre = np.array([sweeps[k], r[k], 0.0])
        rings[k] = centre + local[:, :1] * d + local[:, 1:] * nrm
        centres[k] = centre
    tip = np.array([float(sweep_mm(p, p.end_radius_mm)), p.end_radius_mm, 0.0])
    root_centre = np.array([0.0, p.root_radius_mm, 0.0])
    return rings, centres, tip, root_centre


# --------------------------------------------------------------------------- surface


def blade_surface(params: BladeParams | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Closed triangle surface of the blade in the hub frame.

    Returns
    -------
    vertices : (n, 3) float64
        mm, hub frame (docs/CONVENTIONS.md §1, identity job).
    faces : (m, 3) int64
        Outward-wound triangles; the surface is watertight and 2-manifold: lofted bands
        between consecutive rings (each quad split along its shorter diagonal), a planar fan
        on the root face and a fan into the tip point.

    >>> v, f = blade_surface(BladeParams(n_chord=16, n_span=6, n_tip=3))
    >>> v.shape, f.shape, f.dtype.name
    ((130, 3), (256, 3), 'int64')
    """
    p = params if params is not None else BladeParams()
    rings, _, tip, root_centre = section_rings(p)
    n_rings, n = rings.shape[:2]
    vertices = np.vstack([rings.reshape(-1, 3), root_centre, tip])
    i_root, i_tip = n_rings * n, n_rings * n + 1

    i = np.arange(n)
    j = (i + 1) % n
    bands = []
    for k in range(n_rings - 1):
        a, b = k * n + i, k * n + j             # ring k
        c, d = (k + 1) * n + j, (k + 1) * n + i  # ring k + 1
        diag_ac = np.linalg.norm(vertices[a] - vertices[c], axis=1)
        diag_bd = np.linalg.norm(vertices[b] - vertices[d], axis=1)
        use_ac = diag_ac <= diag_bd
        t1 = np.where(use_ac[:, None], np.column_stack([a, b, c]), np.column_stack([a, b, d]))
        t2 = np.where(use_ac[:, None], np.column_stack([a, c, d]), np.column_stack([b, c, d]))
        bands.append(np.column_stack([t1, t2]).reshape(-1, 3))
    root = np.column_stack([np.full(n, i_root), j, i])
    last = (n_rings - 1) * n
    cap = np.column_stack([np.full(n, i_tip), last + i, last + j])
    faces = np.vstack(bands + [root, cap]).astype(np.int64)
    if enclosed_volume(vertices, faces) < 0.0:
        faces = faces[:, ::-1].copy()
    return vertices, faces


def large_blade_surface(target_faces: int = 240_000,
                        params: BladeParams | None = None) -> tuple[np.ndarray, np.ndarray]:
    """The same blade at a resolution of about ``target_faces`` triangles (for benchmarks).

    Returns ``(vertices (n, 3) float64 mm, faces (m, 3) int64)`` as :func:`blade_surface`.
    """
    base = params if params is not None else BladeParams()
    f0 = 2 * base.n_chord * (base.n_span + base.n_tip - 2) + 2 * base.n_chord
    factor = math.sqrt(max(target_faces, 1000) / f0)
    n_chord = max(16, 2 * int(round(base.n_chord * factor / 2)))
    n_tip = max(3, int(round(base.n_tip * factor)))
    n_span = max(4, int(round(target_faces / (2 * n_chord))) - n_tip + 1)
    return blade_surface(replace(base, n_chord=n_chord, n_span=n_span, n_tip=n_tip))


# --------------------------------------------------------------------------- rigid motions


def rigid_transform(angle_deg: float, axis, translation) -> np.ndarray:
    """4x4 homogeneous matrix ``x' = R x + t``: right-handed rotation by ``angle_deg`` about
    ``axis`` (through the origin, any length), then translation ``t`` (same unit as ``x``).

    >>> T = rigid_transform(90.0, (0, 0, 1), (1.0, 2.0, 3.0))
    >>> np.round(T @ [1.0, 0.0, 0.0, 1.0], 12).tolist()
    [1.0, 3.0, 3.0, 1.0]
    """
    a = np.asarray(axis, dtype=float)
    if a.shape != (3,) or np.linalg.norm(a) == 0.0:
        raise ValueError(f"rigid_transform: axis must be a non-zero 3-vector, got {axis!r}")
    return rigid_matrix(rotation_about(a, math.radians(angle_deg)), translation)


def scanned_variant(params: BladeParams | None = None, angle_deg: float = SCAN_ANGLE_DEG,
                    axis=SCAN_AXIS, translation=SCAN_TRANSLATION_MM):
    """The blade surface as if scanned in another frame.

    Returns ``(vertices (n, 3) mm, faces (m, 3) int64, transform (4, 4))`` where
    ``vertices = R v_hub + t`` with ``transform = rigid_transform(angle_deg, axis,
    translation)``; the hub-frame surface is ``blade_surface(params)``.
    """
    v, f = blade_surface(params)
    transform = rigid_transform(angle_deg, axis, translation)
    return apply_transform(transform, v), f, transform


# --------------------------------------------------------------------------- files


#: The repair scenario's job: the BW-3 blade after a leading-edge blend at the invented Larkspur
#: Blade Repair shop, scanned in the scanner's own frame, checked against its nominal.
REPAIR_JOB = """\
# bladesolid demo repair job: the BW-3 blade after a leading-edge blend at the invented
# Larkspur Blade Repair shop, scanned in the scanner's own frame, checked against nominal.
name = "BW-3 serial BW3-0001 after LE blend (invented)"
mesh = "demo_blade_le_blend_scanned.stl"
reference = "demo_blade.stl"
limits = "repair_limits.toml"
units = "mm"
material = "al-2025-t6"
blades = 3
stations = 16

[[operating_point]]
name = "take-off"
rpm = 2500
blade_angle = 25.0
"""

#: The repair scenario's limits file (the user's allowed changes; invented for the demo).
REPAIR_LIMITS = """\
# Allowed changes, repaired minus nominal. These are the USER'S limits, to be taken from the
# approved repair data; the figures below are invented for the demo.
source = "Larkspur Blade Repair, demo repair scheme (invented)"
mass = "-30 g:+2 g"
max_abs_static_moment = "15 kg*mm"
max_abs_ctm = "3 N*m"
blade_angle = "-0.25:0.25"
cg_shift = "1.5 mm"
max_deviation = "5 mm"
removed_volume = "12000 mm^3"
"""


def write_demo(folder) -> dict[str, str]:
    """Write the demo into ``folder`` (created): the blade meshes (:func:`write_demo_meshes`),
    the demo job (:data:`bladesolid.job.EXAMPLE_JOB`, the one example job), the repair job and
    its limits file; and, when the optional CAD kernel (gmsh) is installed, the same blade as a
    STEP solid (:func:`write_demo_step`, ~0.9 MB) with its job (:func:`step_job_text`).
    Returns the paths of ``"job"``, ``"repair_job"``, ``"repair_limits"`` and, with the
    kernel, ``"step"`` and ``"step_job"``."""
    import importlib.util

    from .job import EXAMPLE_JOB
    from .safefile import atomic_write_text

    os.makedirs(folder, exist_ok=True)
    write_demo_meshes(folder)
    paths = {"job": os.path.join(folder, "demo_job.toml"), "repair_job": os.path.join(folder, "repair_job.toml"),
             "repair_limits": os.path.join(folder, "repair_limits.toml")}
    texts = {"job": EXAMPLE_JOB, "repair_job": REPAIR_JOB, "repair_limits": REPAIR_LIMITS}
    if importlib.util.find_spec("gmsh") is not None:
        paths["step"] = str(write_demo_step(os.path.join(folder, "demo_blade.step")))
        paths["step_job"] = os.path.join(folder, "demo_step_job.toml")
        texts["step_job"] = step_job_text()
    for key, text in texts.items():
        atomic_write_text(paths[key], text, force=True)
    return paths


def step_job_text() -> str:
    """The demo job for the STEP blade: :data:`bladesolid.job.EXAMPLE_JOB` with the STEP file
    as its mesh, its unit taken from the file (millimetres, as every point of the job) and the
    chord tolerance of its triangulation given.

    >>> text = step_job_text()
    >>> 'mesh = "demo_blade.step"' in text and "units =" not in text
    True
    """
    from .cad import DEFAULT_CAD_TOLERANCE
    from .job import EXAMPLE_JOB

    lines = {
        'name = "BW-3 demo blade, serial BW3-0001 (invented)"': 'name = "BW-3 demo blade, serial BW3-0001, from STEP (invented)"',
        'mesh = "demo_blade.stl"                # path relative to this file':
            'mesh = "demo_blade.step"               # the same blade as a STEP solid, path relative to this file',
        'units = "mm"                           # length unit of the mesh and of every point below':
            '# units: the STEP file declares millimetres, the unit of every point below (a units key\n'
            '# given for a STEP or IGES file must agree with the file)\n'
            f'cad_tolerance = {DEFAULT_CAD_TOLERANCE:g}                 # chord tolerance of the triangulation, '
            'a fraction of the diagonal',
    }
    text = EXAMPLE_JOB
    for old, new in lines.items():
        head = old.split("#")[0].rstrip()
        start = text.index(head)  # the example job's line, whatever its comment
        end = text.index("\n", start)
        text = text[:start] + new + text[end:]
    return text.replace("# This is the demo job:", "# This is the demo job for the STEP blade:", 1)


def demo_variants() -> dict[str, BladeParams]:
    """The blade variants written by :func:`write_demo_meshes`, keyed by file stem."""
    base = BladeParams()
    blend = replace(base, le_blend_depth_mm=4.0)
    return {
        "demo_blade": base,
        "demo_blade_tip_dressed": replace(base, tip_trim_mm=12.0),
        "demo_blade_le_blend": blend,
        "demo_blade_le_blend_scanned": blend,
    }


def write_demo_meshes(outdir) -> tuple[Path, ...]:
    """Write the demo STL files (binary, mm, hub frame except the scanned one) and
    ``demo_variants.json`` (each file's parameters and the 4x4 transform applied to the
    hub-frame surface) into ``outdir``; return the paths written."""
    import trimesh

    out = Path(outdir)
    out.mkdir(parents=True, exist_ok=True)
    records = []
    paths = []
    for stem, params in demo_variants().items():
        if stem.endswith("_scanned"):
            v, f, transform = scanned_variant(params)
        else:
            v, f = blade_surface(params)
            transform = np.eye(4)
        path = out / f"{stem}.stl"
        mesh = trimesh.Trimesh(vertices=v, faces=f, process=False)
        path.write_bytes(mesh.export(file_type="stl"))
        paths.append(path)
        records.append({
            "file": path.name,
            "units": "mm",
            "faces": int(len(f)),
            "volume_mm3": round(abs(enclosed_volume(v, f)), 3),
            "designed_blade_angle_deg": params.blade_angle_ref_deg,
            "reference_radius_mm": params.reference_radius_mm,
            "transform_from_hub_frame": transform.tolist(),
            "params": asdict(params),
        })
    meta = {
        "schema": "bladesolid.demo_variants/1",
        "blade": BladeParams().name,
        "frame": ("hub frame of docs/CONVENTIONS.md §1 (z thrust axis, y pitch axis outboard, "
                  "x = y × z, right-hand rotation, leading edge towards -x); the scanned file "
                  "is x' = R x + t with transform_from_hub_frame"),
        "density_kg_m3": DEMO_DENSITY_KG_M3,
        "scan": {"angle_deg": SCAN_ANGLE_DEG, "axis": list(SCAN_AXIS),
                 "translation_mm": list(SCAN_TRANSLATION_MM)},
        "variants": records,
    }
    meta_path = out / "demo_variants.json"
    meta_path.write_text(json.dumps(meta, indent=2) + "\n", encoding="utf-8")
    paths.append(meta_path)
    return tuple(paths)


# --------------------------------------------------------------------------- CAD (STEP)


def blade_bspline_poles(params: BladeParams | None = None):
    """Bicubic B-spline surface interpolating every section ring (for the STEP demo blade).

    Each ring is closed on itself (its first point repeated) and all rings share one
    chordwise parameter (the mean normalised chord length around the rings); spanwise the
    parameter is the chord length along the section reference points. Interpolation is
    not-a-knot cubic in both directions (``scipy.interpolate.make_interp_spline``), so the
    surface passes through every ring point; it is C2 except along the seam at the upper
    trailing-edge point, where the ring closes.

    Returns ``(poles (n_rings, n_chord + 1, 3) mm, knots_u, knots_v)``, the knot vectors in
    full (clamped: the end knots repeated four times).
    """
    from scipy.interpolate import make_interp_spline

    p = params if params is not None else BladeParams()
    rings, centres, _, _ = section_rings(p)
    closed = np.concatenate([rings, rings[:, :1]], axis=1)
    n_r, n_u = closed.shape[:2]
    seg = np.linalg.norm(np.diff(closed, axis=1), axis=2)
    u = np.concatenate([np.zeros((n_r, 1)), np.cumsum(seg, axis=1)], axis=1)
    u = (u / u[:, -1:]).mean(axis=0)
    spline_u = make_interp_spline(u, closed.transpose(1, 0, 2).reshape(n_u, -1), k=3)
    poles_u = spline_u.c.reshape(n_u, n_r, 3).transpose(1, 0, 2)
    v = np.concatenate([[0.0], np.cumsum(np.linalg.norm(np.diff(centres, axis=0), axis=1))])
    spline_v = make_interp_spline(v / v[-1], poles_u.reshape(n_r, -1), k=3)
    return spline_v.c.reshape(n_r, n_u, 3), spline_u.t, spline_v.t


def write_demo_step(path, params: BladeParams | None = None) -> Path:
    """Write the demo blade as a STEP solid (millimetres, hub frame) through OpenCASCADE.

    The side of the blade is the B-spline surface of :func:`blade_bspline_poles` (through
    every ring of the STL blade), closed by planar faces on the root ring and on the last tip
    ring (the STL closes the tip with a fan into the tip point instead; the cone between is
    some 1e-6 of the volume). Needs the optional ``gmsh`` package. The header's time stamp is
    fixed so that the same parameters give the same file.
    """
    import os
    import re

    import gmsh

    poles, knots_u, knots_v = blade_bspline_poles(params)
    n_u = poles.shape[1]

    def knots(t):
        k, m = np.unique(np.round(t, 14), return_counts=True)
        return k.tolist(), m.tolist()

    (ku, mu), (kv, mv) = knots(knots_u), knots(knots_v)
    out = Path(path)
    saved = os.dup(1)
    gmsh.initialize(interruptible=False, readConfigFiles=False)
    try:
        gmsh.option.setNumber("General.Terminal", 0)
        occ = gmsh.model.occ
        tags = [occ.addPoint(*xyz) for xyz in poles.reshape(-1, 3)]
        side = occ.addBSplineSurface(tags, n_u, degreeU=3, degreeV=3, knotsU=ku, knotsV=kv,
                                     multiplicitiesU=mu, multiplicitiesV=mv)
        occ.remove([(0, t) for t in tags])
        occ.synchronize()
        caps = []
        for _, curve in gmsh.model.getBoundary([(2, side)], oriented=False):
            box = occ.getBoundingBox(1, abs(curve))
            if box[4] - box[1] < 1e-6:  # a ring: planar at y = const
                caps.append(occ.addPlaneSurface([occ.addCurveLoop([abs(curve)])]))
        occ.addVolume([occ.addSurfaceLoop([side] + caps, sewing=True)])
        occ.synchronize()
        tmp = out.with_name(out.name + ".tmp.step")
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, 1)  # the STEP writer reports on the C stdout
        try:
            gmsh.write(str(tmp))
        finally:
            os.dup2(saved, 1)
            os.close(devnull)
    finally:
        gmsh.finalize()
        os.close(saved)
    text = tmp.read_text(encoding="latin-1")
    text = re.sub(r"(FILE_NAME\('[^']*',)'[^']*'", r"\1'2000-01-01T00:00:00'", text, count=1)
    out.write_text(text, encoding="latin-1")
    tmp.unlink()
    return out
