"""The elastic model of a blade: quality mesh, elastic constants, supports, matrices.

The blade is set at the blade angle asked for by the rigid motion of the loads
(:func:`bladesolid.frame.pitch_motion`, docs/CONVENTIONS.md §2): here the mesh nodes are
moved (the elastic solve needs them where the blade is), while the loads move the moments.
It is clamped at every node at or inboard of ``clamp_radius`` along the pitch axis ``e``
(docs/CONVENTIONS.md §10). Everything is SI, hub frame.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..frame import HubFrame, pitch_motion
from .qmesh import QualityMesh, QuadraticMesh

#: Nodes within this fraction of the blade's radial extent of ``clamp_radius`` count as at
#: it (the default clamp is the inboard end face: nodes within this of the least radius).
CLAMP_TOLERANCE = 1e-6


@dataclass(frozen=True)
class ElasticConstants:
    """Isotropic elastic constants of one body: modulus_Pa (Young's), poisson, density_kg_m3,
    and where the values come from (label)."""

    modulus_Pa: float
    poisson: float
    density_kg_m3: float
    label: str


def _values(v, n_bodies: int, name: str):
    if v is None:
        return [None] * n_bodies
    if isinstance(v, (list, tuple, np.ndarray)):
        v = list(v)
        if len(v) not in (1, n_bodies):
            raise InputError(name, f"{len(v)} values given for {n_bodies} bodies; give one, or one per body")
        return v * n_bodies if len(v) == 1 else v
    return [v] * n_bodies


def elastic_constants(blade, modulus=None, poisson=None) -> tuple[ElasticConstants, ...]:
    """Elastic constants of each body of ``blade``: from the material table when the body's
    material is named there, or as given (one value for all bodies or one per body).

    modulus : Young's modulus, Pa (a number, or a quantity with its unit, ``"71 GPa"``)
    poisson : Poisson's ratio (−1 < ν < 0.5)
    """
    from ..materials import MATERIALS
    from ..units import parse_stress

    n = len(blade.materials)
    mods, nus = _values(modulus, n, "modulus"), _values(poisson, n, "poisson")
    out = []
    for i, (mat, E, nu) in enumerate(zip(blade.materials, mods, nus)):
        table = MATERIALS.get(str(mat.label).strip().lower())
        label = table.name if table is not None else "given"
        if E is None:
            if table is None or table.modulus_Pa is None:
                raise InputError("modulus", f"body {i + 1} has no material of the built-in table "
                                 f"(density {mat.label}); give its Young's modulus")
            E = table.modulus_Pa
        elif isinstance(E, str):
            E = parse_stress(E, "modulus")
            label = "given"
        if nu is None:
            if table is None or table.poisson is None:
                raise InputError("poisson", f"body {i + 1} has no material of the built-in table "
                                 f"(density {mat.label}); give its Poisson's ratio")
            nu = table.poisson
        try:
            E, nu = float(E), float(nu)
        except (TypeError, ValueError):
            raise InputError("modulus", f"expected numbers, got modulus {E!r}, poisson {nu!r}") from None
        if not (math.isfinite(E) and E > 0):
            raise InputError("modulus", f"Young's modulus must be a positive number of Pa, got {E!r}")
        if not (math.isfinite(nu) and -1.0 < nu < 0.5):
            raise InputError("poisson", f"Poisson's ratio must lie between -1 and 0.5, got {nu!r}")
        out.append(ElasticConstants(E, nu, float(mat.density_kg_m3), label))
    return tuple(out)


def clamped_nodes(nodes: np.ndarray, clamp_radius_m: float | None = None) -> tuple[np.ndarray, float]:
    """(n,) bool: nodes at or inboard of ``clamp_radius_m`` along e (y, hub frame), within
    :data:`CLAMP_TOLERANCE` of the radial extent; default the inboard end (least y).
    Returns the mask and the clamp radius used. Refuses a clamp that holds nothing or only
    points on a line (the blade could still turn about it)."""
    y = nodes[:, 1]
    lo, hi = float(y.min()), float(y.max())
    tol = CLAMP_TOLERANCE * max(hi - lo, 1e-12)
    r = lo if clamp_radius_m is None else float(clamp_radius_m)
    if not math.isfinite(r):
        raise InputError("clamp_radius", f"must be a finite radius, got {clamp_radius_m!r}")
    mask = y <= r + tol
    if not mask.any():
        raise InputError("clamp_radius", f"nothing would be clamped: {r:.6g} m is inboard of the blade, "
                         f"whose innermost point is at {lo:.6g} m along the pitch axis")
    if mask.all():
        raise InputError("clamp_radius", f"everything would be clamped: {r:.6g} m is at or outboard of the "
                         f"tip ({hi:.6g} m)")
    p = nodes[mask]
    if len(p) < 3 or np.linalg.matrix_rank(p - p.mean(axis=0), tol=1e-9 * max(hi - lo, 1e-12)) < 2:
        raise InputError("clamp_radius", f"the clamp at {r:.6g} m holds fewer than three points off one line; "
                         "the blade could turn about it: give a larger clamp_radius")
    return mask, r


@dataclass(frozen=True, eq=False)
class ElasticModel:
    """A blade ready for elastic solves (hub frame with the blade at ``blade_angle_deg``, SI).

    mesh : the 10-node tetrahedra (nodes moved to the blade angle); quality : the linear
    quality mesh it came from (modelled position); constants : per body; modulus_Pa,
    poisson, density_kg_m3 : (k,) per element; clamp : (n,) bool clamped nodes;
    clamp_radius_m; reference_points : (2, 3) leading and trailing edge of the reference
    chord at the blade angle (NaN when the blade angle was not measured); reference_radius_m;
    surfaces : per body (vertices, faces) at the blade angle; stiffness : K (3n, 3n) CSR,
    N/m; mass_scalar : (n, n) CSR, kg; pattern : the node graph; radial_pull_per_omega2 :
    ρ ∫ r⊥·e dV of the bodies from their exact moments at the blade angle, kg·m (× Ω² = N).
    """

    name: str
    frame: HubFrame
    blade_angle_deg: float
    modelled_deg: float
    mesh: QuadraticMesh
    quality: QualityMesh
    constants: tuple[ElasticConstants, ...]
    modulus_Pa: np.ndarray
    poisson: np.ndarray
    density_kg_m3: np.ndarray
    clamp: np.ndarray
    clamp_radius_m: float
    reference_points: np.ndarray
    reference_radius_m: float
    surfaces: tuple
    stiffness: object
    mass_scalar: object
    pattern: object
    radial_pull_per_omega2: float
    timings_s: dict = field(default_factory=dict)
    cache: dict = field(default_factory=dict, repr=False)  # solver state reused between solves

    @property
    def n_dofs(self) -> int:
        """Free degrees of freedom (3 per unclamped node)."""
        return int(3 * (~self.clamp).sum())

    @property
    def free(self) -> np.ndarray:
        """(3n,) bool, the free degrees of freedom (node-major)."""
        return np.repeat(~self.clamp, 3)

    @property
    def mass_kg(self) -> float:
        return float(self.mass_scalar.sum())


def elastic_model(blade, *, blade_angle_deg: float | None = None, pitch_change_deg: float | None = None,
                  element_size_m: float | None = None, target_elements: int | None = None, modulus=None,
                  poisson=None, clamp_radius_m: float | None = None, radius_edge: float | None = None,
                  boundary_steiner: bool = True, isolate: bool = True, progress=None) -> ElasticModel:
    """Mesh, constrain and assemble the elastic model of a loaded blade.

    blade : :class:`bladesolid.api.Blade` (hub-frame surfaces, frame, densities, modelled angle)
    blade_angle_deg / pitch_change_deg : as :func:`bladesolid.api.resolve_blade_angle`
      (default: the modelled blade angle)
    element_size_m or target_elements : quality-mesh size (see :func:`.qmesh.quality_mesh`)
    modulus, poisson : see :func:`elastic_constants`
    clamp_radius_m : clamp every node at or inboard of this radius along e (default: the
      inboard end face)
    progress : optional callable(stage: str)
    """
    import time

    from ..api import resolve_blade_angle
    from ..loads import moments_at_angle, radial_pull
    from . import assemble
    from .qmesh import RADIUS_EDGE, quadratic, quality_mesh

    say = progress or (lambda stage: None)
    t = {}
    if len(blade.surfaces) != 1:
        raise InputError(blade.source, f"the elastic model takes a single body; this blade has {len(blade.surfaces)} "
                         "(bodies bonded to each other, such as a sheath, would need one conforming mesh)")
    beta = resolve_blade_angle(blade, blade_angle_deg, pitch_change_deg)
    delta = beta - blade.modelled_deg
    constants = elastic_constants(blade, modulus, poisson)  # refuse bad constants before meshing
    say("quality mesh")
    t0 = time.perf_counter()
    qm = quality_mesh(blade.surfaces, element_size_m=element_size_m, target_elements=target_elements,
                      radius_edge=RADIUS_EDGE if radius_edge is None else radius_edge,
                      boundary_steiner=boundary_steiner, isolate=isolate, source=blade.source)
    t["quality_mesh"] = time.perf_counter() - t0
    R, tr = pitch_motion(blade.frame, delta)
    q = quadratic(qm.nodes @ R.T + tr, qm.tets, qm.body)
    clamp, r_clamp = clamped_nodes(q.nodes, clamp_radius_m)
    E = np.array([c.modulus_Pa for c in constants])[q.body]
    nu = np.array([c.poisson for c in constants])[q.body]
    rho = np.array([c.density_kg_m3 for c in constants])[q.body]
    say("assemble")
    t0 = time.perf_counter()
    pattern = assemble.node_pattern(q.elements, len(q.nodes))
    K = assemble.stiffness_matrix(q.nodes, q.elements, pattern, E, nu)
    Ms = assemble.mass_scalar(q.nodes, q.elements, pattern, rho)
    t["assemble"] = time.perf_counter() - t0
    if blade.modelled_angle is not None:
        ref = np.array([blade.modelled_angle.leading_edge, blade.modelled_angle.trailing_edge]) @ R.T + tr
    else:
        ref = np.full((2, 3), np.nan)
    pull = float(radial_pull(moments_at_angle(blade.solid_moments, blade.frame, delta), blade.frame, 1.0))
    surfaces = tuple((v @ R.T + tr, f) for v, f in blade.surfaces)
    return ElasticModel(blade.name, blade.frame, float(beta), float(blade.modelled_deg), q, qm, constants, E, nu, rho,
                        clamp, r_clamp, ref, float(blade.reference_radius_m), surfaces, K, Ms, pattern, pull, t)


# --- points in the mesh ----------------------------------------------------------------------


def barycentric(X: np.ndarray, p: np.ndarray) -> np.ndarray:
    """(..., 4) barycentric coordinates of points p (..., 3) in tetrahedra X (..., 4, 3).

    >>> barycentric(np.eye(4)[:, :3], np.array([0.25, 0.25, 0.25])).round(6).tolist()
    [0.25, 0.25, 0.25, 0.25]
    """
    X = np.asarray(X, float)
    J = np.stack([X[..., 1, :] - X[..., 0, :], X[..., 2, :] - X[..., 0, :], X[..., 3, :] - X[..., 0, :]], axis=-1)
    l123 = np.linalg.solve(J, (np.asarray(p, float) - X[..., 0, :])[..., None])[..., 0]
    return np.concatenate([1.0 - l123.sum(axis=-1, keepdims=True), l123], axis=-1)


def locate(mesh: QuadraticMesh, points: np.ndarray, candidates: int = 24) -> tuple[np.ndarray, np.ndarray]:
    """Element and barycentric coordinates (clipped into the element) of each point (p, 3):
    the element among the ``candidates`` nearest by centroid that contains the point, or that
    it lies least outside of (points on the boundary, round-off)."""
    from scipy.spatial import cKDTree

    points = np.atleast_2d(np.asarray(points, float))
    corners = mesh.nodes[mesh.elements[:, :4]]
    tree = cKDTree(corners.mean(axis=1))
    k = min(candidates, len(corners))
    _, cand = tree.query(points, k=k)
    cand = np.asarray(cand).reshape(len(points), k)
    lam = barycentric(corners[cand], points[:, None, :])  # (p, k, 4)
    best = np.argmax(lam.min(axis=2), axis=1)
    el = cand[np.arange(len(points)), best]
    lb = np.clip(lam[np.arange(len(points)), best], 0.0, None)
    return el, lb / lb.sum(axis=1, keepdims=True)


def interpolate(mesh: QuadraticMesh, values: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Nodal values (n, ...) of the quadratic field interpolated at points (p, 3)."""
    from .assemble import p2_shape

    el, lam = locate(mesh, points)
    N = p2_shape(lam)  # (p, 10)
    return np.einsum("pa,pa...->p...", N, np.asarray(values)[mesh.elements[el]])
