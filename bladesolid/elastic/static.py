"""The steady elastic state of a spinning blade, with centrifugal stiffening.

In the frame turning with the rotor (angular velocity Ω k) the steady load is the centrifugal
body force f = ρ Ω² r⊥, r⊥ = r − (r·k) k (docs/CONVENTIONS.md §10). For quadratic elements
r is itself a quadratic field, so f = Ω² (M ⊗ P) x exactly, with M the scalar consistent
mass, P = 1 − k kᵀ and x the nodal positions.

1. linear: K u0 = f, stress σ0;
2. stiffened: (K + Kσ(σ) − Ω² M⊥) u = f, with the geometric stiffness Kσ of the prestress σ
   and the spin softening −Ω² M⊥ (M⊥ = M ⊗ P), σ updated from u and the solve repeated until
   the untwist changes by less than the tolerance. Kσ and M⊥ together also carry the
   linearised change of the CTM with twist, so no separate CTM term is added.

Stresses are reported per element at its centroid; the stress of a quadratic element is linear,
so its centroid value is also its mean over the element.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..frame import blade_angle_from_chord
from ..units import rpm_to_rad_s
from . import assemble
from .model import ElasticModel, interpolate
from .solvers import Factor, factorize, matrix_bytes

#: Default tolerance on the change of untwist between passes, degrees.
UNTWIST_TOLERANCE_DEG = 1e-3

#: Besides the untwist, the largest displacement must change by less than this fraction
#: between passes (a blade without twist to speak of still converges on its deflection).
DISPLACEMENT_TOLERANCE = 1e-3

#: Default largest number of stiffened passes.
MAX_PASSES = 8

#: Stress components, in the order of every (…, 6) stress array (hub frame).
STRESS_COMPONENTS = ("xx", "yy", "zz", "yz", "xz", "xy")

STRESS_NOTE = ("stress per element at its centroid (the element's linear stress field there, equal to its "
               "mean over the element), hub frame, components xx, yy, zz, yz, xz, xy; centrifugal load only")


@dataclass(frozen=True)
class StaticPass:
    """One solve of the iteration: pass 0 is linear; untwist_deg; root_reaction_N; max_displacement_m."""

    index: int
    untwist_deg: float
    root_reaction_N: float
    max_displacement_m: float


@dataclass(frozen=True)
class StaticResult:
    """The steady elastic state at one speed and blade angle (hub frame at the blade angle, SI).

    displacement_m : (n, 3) at every node of the quadratic mesh
    stress_Pa : (k, 6) per element at its centroid (xx, yy, zz, yz, xz, xy); von_mises_Pa (k,)
    corner_stress_Pa : (k, 4, 6) at the element corners (the stress is linear in each element)
    untwist_deg : elastic change of the blade angle at the reference station, + toward coarse
      (the reference chord's end points displaced), NaN without a measured blade angle
    tip_deflection_m : (3,) displacement of the tip point (the outermost node, tip_point_m)
    max_von_mises_Pa, max_von_mises_at_m (3,), max_von_mises_element : the largest element value
    root_reaction_N : force of the blade on its clamp along e (+ outboard), = − the clamp's
      reaction; root_reaction_vector_N (3,); radial_pull_N : the radial pull of the bodies from
      their exact moments, for comparison (the linear pass matches it to round-off; the
      stiffened passes add the centrifugal force of the displacement, Ω² ∫ ρ u⊥·e dV)
    passes : every solve (pass 0 linear); converged; tolerance_deg
    elements, nodes, dofs (free), element_order (2), solver, memory_MB (matrices and factor),
    element_size_m (asked for), mesh_notes (how the quality mesh was made, when not as asked)
    """

    rpm: float
    omega_rad_s: float
    blade_angle_deg: float
    displacement_m: np.ndarray
    stress_Pa: np.ndarray
    von_mises_Pa: np.ndarray
    corner_stress_Pa: np.ndarray
    untwist_deg: float
    tip_point_m: np.ndarray
    tip_deflection_m: np.ndarray
    max_von_mises_Pa: float
    max_von_mises_at_m: np.ndarray
    max_von_mises_element: int
    root_reaction_N: float
    root_reaction_vector_N: np.ndarray
    radial_pull_N: float
    stiffening: bool
    passes: tuple[StaticPass, ...]
    converged: bool
    tolerance_deg: float
    elements: int
    nodes: int
    dofs: int
    element_order: int
    solver: str
    memory_MB: float
    element_size_m: float = float("nan")
    mesh_notes: tuple[str, ...] = ()
    timings_s: dict = field(default_factory=dict)

    @property
    def iterations(self) -> int:
        """Stiffened passes made (0 for a linear solve)."""
        return len(self.passes) - 1

    def summary(self) -> dict:
        """The ``elastic`` section of the JSON report (docs/CONVENTIONS.md §10): SI numbers."""
        return {
            "rpm": self.rpm,
            "blade_angle_deg": self.blade_angle_deg,
            "untwist_deg": _f(self.untwist_deg),
            "tip_deflection_m": [float(x) for x in self.tip_deflection_m],
            "max_von_mises_Pa": self.max_von_mises_Pa,
            "max_von_mises_at_m": [float(x) for x in self.max_von_mises_at_m],
            "root_reaction_N": self.root_reaction_N,
            "radial_pull_N": self.radial_pull_N,
            "elements": self.elements,
            "element_size_m": _f(self.element_size_m),
            "nodes": self.nodes,
            "dofs": self.dofs,
            "element_order": self.element_order,
            "solver": self.solver,
            "stiffening": self.stiffening,
            "iterations": self.iterations,
            "converged": self.converged,
            "untwist_tolerance_deg": self.tolerance_deg,
            "passes_untwist_deg": [_f(p.untwist_deg) for p in self.passes],
            "memory_MB": self.memory_MB,
            "stress_location": "element centroid",
            "mesh_notes": list(self.mesh_notes),
        }


def _f(x):
    x = float(x)
    return x if math.isfinite(x) else None


def centrifugal_matrices(model: ElasticModel):
    """(M⊥ (3n, 3n) CSR kg, f per Ω² (3n,) kg·m): M ⊗ (1 − k kᵀ) and M⊥ x."""
    k = model.frame.k
    P = np.eye(3) - np.outer(k, k)
    Mp = assemble.expand(model.mass_scalar, P)
    return Mp, Mp @ model.mesh.nodes.ravel()


def untwist(model: ElasticModel, displacement: np.ndarray, points: np.ndarray | None = None) -> float:
    """Change of the blade angle of the chord between two points (2, 3) (default: the
    reference chord's leading and trailing edge), from their displaced positions, degrees,
    + toward coarse."""
    pts = model.reference_points if points is None else np.asarray(points, float)
    if not np.all(np.isfinite(pts)):
        return float("nan")
    u = interpolate(model.mesh, displacement, pts)
    before = blade_angle_from_chord(pts[0] - pts[1], model.frame)
    after = blade_angle_from_chord(pts[0] + u[0] - pts[1] - u[1], model.frame)
    return float((after - before + 180.0) % 360.0 - 180.0)


def _state(model, K_with, f, free, solver, points):
    fac = factorize(K_with[free][:, free].tocsr(), solver, points, model.cache)
    u = np.zeros(3 * len(model.mesh.nodes))
    u[free] = fac.solve(f[free])
    return u, fac


def _pcg(A, b, factor, x0, rtol: float = 1e-12):
    """Solve A x = b by conjugate gradients preconditioned with the factor of a nearby
    operator (the first stiffened pass); returns (x, iterations)."""
    from scipy.sparse.linalg import LinearOperator, cg

    n = A.shape[0]
    M = LinearOperator((n, n), matvec=factor.solve, dtype=float)
    count = [0]

    def cb(_):
        count[0] += 1

    x, info = cg(A, b, x0=x0, rtol=rtol, atol=0.0, M=M, maxiter=500, callback=cb)
    if info != 0:
        x = factorize(A, "direct").solve(b)
    return x, count[0]


def _reaction(model, A, u, f):
    """Force of the blade on its clamp (3,), N: −Σ over clamped nodes of (A u − f)."""
    r = (A @ u - f).reshape(-1, 3)
    return -r[model.clamp].sum(axis=0)


def solve_static(model: ElasticModel, rpm: float, *, stiffening: bool = True,
                 tolerance_deg: float = UNTWIST_TOLERANCE_DEG, max_passes: int = MAX_PASSES,
                 solver: str = "direct", keep_factor: bool = False):
    """The steady elastic state at ``rpm`` (the blade angle is the model's).

    stiffening : iterate with the geometric stiffness and spin softening (False: linear only)
    tolerance_deg : stop when the untwist changes by less than this between passes (and the
      largest displacement by less than :data:`DISPLACEMENT_TOLERANCE` of itself)
    max_passes : largest number of stiffened passes (converged is False if it is reached)
    solver : ``direct`` or ``amg-cg`` (:mod:`.solvers`)
    keep_factor : also return ``(result, last)``, last a dict: ``A`` the operator of the last
      pass on the free DOFs, ``factor`` its factor (None when that pass was solved by CG),
      ``stress`` the prestress it was built with, ``first_A`` / ``first_factor`` the first
      stiffened pass's operator and factor (None for a linear solve). A factor is valid until
      the next solve with the same model, which may reuse its storage.
    """
    if not (math.isfinite(rpm) and rpm >= 0):
        raise InputError("rpm", f"must be a speed of zero or more rpm, got {rpm!r}")
    if not (tolerance_deg > 0):
        raise InputError("tolerance", f"must be a positive angle in degrees, got {tolerance_deg!r}")
    t_all = time.perf_counter()
    omega = rpm_to_rad_s(rpm)
    mesh = model.mesh
    free = model.free
    pts = mesh.nodes[~model.clamp]
    Mp, f1 = centrifugal_matrices(model)
    f = omega**2 * f1
    K = model.stiffness
    timings = {"solve": 0.0, "stress": 0.0, "geometric": 0.0}
    t0 = time.perf_counter()
    key = ("linear", solver)
    if key not in model.cache:  # the linear state is proportional to Ω²: solved once per model
        u1, fac = _state(model, K, f1, free, solver, pts)
        model.cache[key] = (u1, fac.name, fac.memory_bytes)
    u1, name, nbytes = model.cache[key]
    fac = Factor(None, name, nbytes)  # the factor itself may since hold another operator
    u = omega**2 * u1
    timings["solve"] += time.perf_counter() - t0
    A = K
    mem = fac.memory_bytes
    U = u.reshape(-1, 3)
    t0 = time.perf_counter()
    sig = assemble.corner_stresses(mesh.nodes, mesh.elements, U, model.modulus_Pa, model.poisson)
    timings["stress"] += time.perf_counter() - t0
    passes = [StaticPass(0, untwist(model, U), float(_reaction(model, A, u, f) @ model.frame.e),
                         float(np.abs(U).max()))]
    converged = not stiffening or omega == 0.0
    last = {"A": K[free][:, free], "factor": None, "stress": sig, "first_A": None, "first_factor": None}
    first, cg_total = fac, 0
    if not converged:
        for k in range(1, int(max_passes) + 1):
            t0 = time.perf_counter()
            G = assemble.geometric_scalar(mesh.nodes, mesh.elements, model.pattern, sig)
            A = (K + assemble.expand(G) - omega**2 * Mp).tocsr()
            timings["geometric"] += time.perf_counter() - t0
            t0 = time.perf_counter()
            A_ff = A[free][:, free].tocsr()
            if k == 1 or solver != "direct":
                u, fac = _state(model, A, f, free, solver, pts)
                first = fac
                last = {"A": A_ff, "factor": fac, "stress": sig, "first_A": A_ff, "first_factor": fac}
            else:  # the operator changes little from pass to pass: CG on the first pass's factor
                u_ff, cg_its = _pcg(A_ff, f[free], first, u[free])
                u = np.zeros_like(u)
                u[free] = u_ff
                cg_total += cg_its
                last = dict(last, A=A_ff, factor=None, stress=sig)
            timings["solve"] += time.perf_counter() - t0
            mem = max(mem, first.memory_bytes + matrix_bytes(A))
            U = u.reshape(-1, 3)
            t0 = time.perf_counter()
            sig = assemble.corner_stresses(mesh.nodes, mesh.elements, U, model.modulus_Pa, model.poisson)
            timings["stress"] += time.perf_counter() - t0
            passes.append(StaticPass(k, untwist(model, U), float(_reaction(model, A, u, f) @ model.frame.e),
                                     float(np.abs(U).max())))
            a, b = passes[-1].untwist_deg, passes[-2].untwist_deg
            twist_ok = not (math.isfinite(a) and math.isfinite(b)) or abs(a - b) < tolerance_deg
            grow = abs(passes[-1].max_displacement_m / max(passes[-2].max_displacement_m, 1e-300) - 1.0)
            if twist_ok and grow < DISPLACEMENT_TOLERANCE:
                converged = True
                break
    stress = sig.mean(axis=1)
    vm = assemble.von_mises(stress)
    i = int(np.argmax(vm))
    centroid = mesh.nodes[mesh.elements[i, :4]].mean(axis=0)
    tip = int(np.argmax(mesh.nodes[:, 1]))
    reaction = _reaction(model, A, u, f)
    mem += matrix_bytes(K) + matrix_bytes(Mp)
    timings["total"] = time.perf_counter() - t_all
    res = StaticResult(
        rpm=float(rpm), omega_rad_s=omega, blade_angle_deg=model.blade_angle_deg, displacement_m=U,
        stress_Pa=stress, von_mises_Pa=vm, corner_stress_Pa=sig, untwist_deg=passes[-1].untwist_deg,
        tip_point_m=mesh.nodes[tip].copy(), tip_deflection_m=U[tip].copy(), max_von_mises_Pa=float(vm[i]),
        max_von_mises_at_m=centroid, max_von_mises_element=i, root_reaction_N=float(reaction @ model.frame.e),
        root_reaction_vector_N=reaction, radial_pull_N=omega**2 * model.radial_pull_per_omega2,
        stiffening=bool(stiffening), passes=tuple(passes), converged=bool(converged),
        tolerance_deg=float(tolerance_deg), elements=len(mesh), nodes=len(mesh.nodes), dofs=model.n_dofs,
        element_order=2, solver=first.name + (f"; passes after the first by CG on its factor ({cg_total} iterations)"
                                              if cg_total else ""), memory_MB=mem / 1e6,
        element_size_m=model.quality.element_size_m, mesh_notes=model.quality.notes, timings_s=timings)
    return (res, last) if keep_factor else res
