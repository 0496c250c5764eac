"""Spanwise figures of the elastic state: untwist and mean axial stress against P/A.

At each station radius r the quality mesh is cut by the plane y = r (normal to e, exactly as
:mod:`bladesolid.span` cuts the mass elements; a pitch change maps these planes onto
themselves). The mean axial stress is the area mean of σ_ee over the cut (each element's
linear stress at the centroid of each cut triangle, exact for a linear field); P/A is the
centrifugal force along e of everything outboard, from the exact moments of the outboard
parts of the elements, over the section area. Away from the clamp and from abrupt changes of
section the two agree (equilibrium); the local untwist is that of the station's chord line
(the two section points farthest apart, docs/CONVENTIONS.md §2) from its displaced end points.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..frame import chord_line, section_points
from ..loads import centrifugal_force
from ..moments import Moments, tet_volume_moments
from ..span import cut_tetrahedra, triangle_area_moments
from .model import ElasticModel, barycentric
from .static import StaticResult, untwist


@dataclass(frozen=True)
class SpanElastic:
    """Per station (inboard first): radius_m; area_m2; untwist_deg (+ toward coarse, NaN where
    no chord); mean_axial_stress_Pa (area mean of σ_ee); p_over_a_Pa (radial pull outboard
    over area, bodies only); axial_force_N (∫ σ_ee dA)."""

    rpm: float
    blade_angle_deg: float
    radius_m: np.ndarray
    area_m2: np.ndarray
    untwist_deg: np.ndarray
    mean_axial_stress_Pa: np.ndarray
    p_over_a_Pa: np.ndarray
    axial_force_N: np.ndarray

    def rows(self) -> list[dict]:
        keys = ("radius_m", "area_m2", "untwist_deg", "mean_axial_stress_Pa", "p_over_a_Pa", "axial_force_N")
        return [{k: (float(getattr(self, k)[i]) if np.isfinite(getattr(self, k)[i]) else None) for k in keys}
                for i in range(len(self.radius_m))]


def default_stations(model: ElasticModel, n: int = 16) -> np.ndarray:
    """``n`` radii from just outboard of the clamp to just inboard of the tip."""
    y = model.mesh.nodes[:, 1]
    lo, hi = max(model.clamp_radius_m, float(y.min())), float(y.max())
    d = 1e-3 * (hi - lo)
    return np.linspace(lo + d, hi - d, int(n))


def spanwise_elastic(model: ElasticModel, state: StaticResult, stations=16) -> SpanElastic:
    """Untwist and mean axial stress against P/A at ``stations`` (a count or radii, m)."""
    radii = default_stations(model, stations) if np.isscalar(stations) else np.asarray(stations, float)
    mesh = model.mesh
    nodes, tets = mesh.nodes, mesh.elements[:, :4]
    e = model.frame.e
    n = len(radii)
    out = {k: np.full(n, np.nan) for k in ("area", "tw", "mean", "pa", "force")}
    for i, r in enumerate(radii):
        c = cut_tetrahedra(nodes, tets, r)
        if len(c.triangles) == 0:
            continue
        A_t = triangle_area_moments(c.triangles[:, :, [0, 2]] - c.triangles[0, 0, [0, 2]])[:, 0]
        centre = c.triangles.mean(axis=1)
        lam = barycentric(nodes[tets[c.triangle_element]], centre)
        s = np.einsum("qc,qcm->qm", lam, state.corner_stress_Pa[c.triangle_element])
        s_ee = s[:, 1] * e[1] ** 2  # e = y in the hub frame
        area = float(A_t.sum())
        force = float((A_t * s_ee).sum())
        rho = model.density_kg_m3
        vm_whole = tet_volume_moments(nodes, tets[c.whole])
        m = Moments(float((vm_whole.mass * rho[c.whole]).sum()), (vm_whole.first * rho[c.whole, None]).sum(axis=0),
                    (vm_whole.second * rho[c.whole, None, None]).sum(axis=0))
        if len(c.pieces):
            vp = tet_volume_moments(c.pieces.reshape(-1, 3), np.arange(4 * len(c.pieces)).reshape(-1, 4))
            w = c.piece_sign * rho[c.piece_element]
            m = m + Moments(float((vp.mass * w).sum()), (vp.first * w[:, None]).sum(axis=0),
                            (vp.second * w[:, None, None]).sum(axis=0))
        pull = float(centrifugal_force(m, model.frame.k, state.omega_rad_s) @ e)
        out["area"][i], out["force"][i] = area, force
        out["mean"][i], out["pa"][i] = force / area, pull / area
        pts = section_points(model.surfaces, r)
        if len(pts) >= 3:
            le, te = chord_line(pts, model.frame)
            out["tw"][i] = untwist(model, state.displacement_m, np.array([le, te]))
    return SpanElastic(state.rpm, state.blade_angle_deg, radii, out["area"], out["tw"], out["mean"], out["pa"],
                       out["force"])
