"""Rigid registration of a repaired blade (often a 3D scan in the scanner's own frame) onto its reference.

A start from the principal axes and centres of gravity of the two solids, trying the four
proper sign combinations of the axes, then a trimmed ICP (iterative closest point) that keeps
the best ``keep_fraction`` of the correspondences in every iteration, so that material removed
by the repair does not pull the fit. Point-to-point steps (Kabsch) first, point-to-plane steps
to exact closest points on the reference surface last. Seeded, hence deterministic. Metres.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..frame import rotation_about
from ..moments import surface_volume_moments
from .query import SurfaceQuery, sample_surface
from .transforms import apply_transform, rigid_matrix, rotation_angle_deg

__all__ = ["AXIS_FLIPS", "Registration", "given_registration", "initial_transforms", "kabsch", "point_to_plane_step",
           "principal_frame", "register"]


@dataclass(frozen=True)
class Registration:
    """A rigid registration of a moving surface onto a fixed one (metres).

    transform : (4, 4) moving frame → fixed frame
    rms_m, max_m : RMS and largest distance to the fixed surface of the kept points (the best
      ``kept_fraction`` of the samples, the rest being taken as repaired or damaged areas)
    rms_all_m, max_all_m : the same over all sample points
    points : number of sample points; iterations : ICP iterations of the chosen start
    method : ``"principal axes + trimmed ICP"`` or ``"given"``; start : the chosen start
    """

    transform: np.ndarray
    rms_m: float
    max_m: float
    rms_all_m: float
    max_all_m: float
    kept_fraction: float
    points: int
    iterations: int
    method: str
    start: str
    seed: int


def principal_frame(vertices, faces) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(centroid (3,), principal axes (3, 3) columns right-handed, moments (3,) ascending) of
    the solid bounded by the surface (unit density; mass-property principal axes)."""
    m = surface_volume_moments(vertices, faces)
    w, v = np.linalg.eigh(m.inertia_cg())
    if np.linalg.det(v) < 0:
        v[:, 2] = -v[:, 2]
    return m.cg, v, w


#: The four proper sign combinations of principal axes (the symmetric ambiguities).
AXIS_FLIPS = (np.diag([1.0, 1.0, 1.0]), np.diag([1.0, -1.0, -1.0]), np.diag([-1.0, 1.0, -1.0]),
              np.diag([-1.0, -1.0, 1.0]))


def initial_transforms(moving, fixed) -> list[tuple[str, np.ndarray]]:
    """Starts for ICP: the identity (meshes perhaps already close) and the principal-axes
    alignments, CG onto CG, in the four proper sign combinations of the axes."""
    cm, Am, _ = principal_frame(*moving)
    cf, Af, _ = principal_frame(*fixed)
    out = [("identity", np.eye(4))]
    for D in AXIS_FLIPS:
        R = Af @ D @ Am.T
        label = "principal axes, signs " + " ".join("+" if x > 0 else "-" for x in np.diag(D))
        out.append((label, rigid_matrix(R, cf - R @ cm)))
    return out


def kabsch(P: np.ndarray, Q: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Rotation R and translation t minimising Σ |R p + t − q|² (SVD; no reflection).

    >>> R0 = rotation_about([0, 1, 1], 0.4); P = np.eye(3) * 2.0 + 1.0
    >>> R, t = kabsch(P, P @ R0.T + [1.0, 2.0, 3.0])
    >>> bool(np.allclose(R, R0)), np.round(t, 9).tolist()
    (True, [1.0, 2.0, 3.0])
    """
    p0, q0 = P.mean(axis=0), Q.mean(axis=0)
    H = (P - p0).T @ (Q - q0)
    U, _, Vt = np.linalg.svd(H)
    d = np.sign(np.linalg.det(Vt.T @ U.T)) or 1.0
    R = Vt.T @ np.diag([1.0, 1.0, d]) @ U.T
    return R, q0 - R @ p0


def point_to_plane_step(P: np.ndarray, Q: np.ndarray, N: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Small rigid motion (R, t) minimising Σ ((R p + t − q)·n)², linearised in the rotation
    vector about the centroid of P, then made an exact rotation (Rodrigues)."""
    p0 = P.mean(axis=0)
    X = P - p0
    A = np.hstack([np.cross(X, N), N])
    b = -np.einsum("ij,ij->i", P - Q, N)
    sol, *_ = np.linalg.lstsq(A, b, rcond=None)
    w, tau = sol[:3], sol[3:]
    ang = float(np.linalg.norm(w))
    R = rotation_about(w / ang, ang) if ang > 0 else np.eye(3)
    return R, p0 + tau - R @ p0


def _kept(d: np.ndarray, keep_fraction: float) -> np.ndarray:
    """Indices of the ``keep_fraction`` smallest distances."""
    n = max(3, int(math.ceil(keep_fraction * len(d))))
    return np.argsort(d, kind="stable")[:n]


def _residual_stats(d: np.ndarray, keep_fraction: float):
    kept = d[_kept(d, keep_fraction)]
    return (float(np.sqrt(np.mean(kept**2))), float(kept.max()), float(np.sqrt(np.mean(d**2))), float(d.max()))


def register(moving, fixed, *, keep_fraction: float = 0.9, samples: int = 4000, seed: int = 0,
             coarse_points: int = 1000, coarse_iterations: int = 25, max_iterations: int = 60,
             fixed_query: SurfaceQuery | None = None) -> Registration:
    """Rigidly register the ``moving`` surface onto the ``fixed`` one (both metres).

    moving, fixed : ``(vertices (n, 3), faces (m, 3))`` (merge several bodies first).
    keep_fraction : share of correspondences kept in every iteration (the best ones).
    samples : seeded surface samples of the moving surface used for the fit and the residuals.

    Every start of :func:`initial_transforms` gets ``coarse_iterations`` trimmed point-to-point
    steps on ``coarse_points`` samples; the start with the smallest trimmed RMS is refined by
    trimmed point-to-plane steps to exact closest points until the step is below 1e-10 rad
    and 1e-10 m.
    """
    if not 0.5 <= keep_fraction <= 1.0:
        raise ValueError(f"keep_fraction must be in [0.5, 1], got {keep_fraction}")
    query = fixed_query or SurfaceQuery(*fixed)
    P, _ = sample_surface(*moving, samples, seed)
    Pc = P[np.random.default_rng(seed + 1).permutation(len(P))[:coarse_points]]
    best = None
    for label, T in initial_transforms(moving, fixed):
        for _ in range(coarse_iterations):
            X = apply_transform(T, Pc)
            c, d, _ = query.closest(X, exact=False)
            k = _kept(d, keep_fraction)
            R, t = kabsch(X[k], c[k])
            T = rigid_matrix(R, t) @ T
        X = apply_transform(T, Pc)
        _, d, _ = query.closest(X, exact=False)
        score = float(np.sqrt(np.mean(d[_kept(d, keep_fraction)] ** 2)))
        if best is None or score < best[0] - 1e-12:
            best = (score, label, T)
    _, label, T = best
    iterations = 0
    for iterations in range(1, max_iterations + 1):
        X = apply_transform(T, P)
        c, d, f = query.closest(X)
        k = _kept(d, keep_fraction)
        R, t = point_to_plane_step(X[k], c[k], query.face_normals[f[k]])
        T = rigid_matrix(R, t) @ T
        if rotation_angle_deg(R) < math.degrees(1e-10) and np.linalg.norm(t) < 1e-10:
            break
    _, d, _ = query.closest(apply_transform(T, P))
    rms, mx, rms_all, mx_all = _residual_stats(d, keep_fraction)
    return Registration(T, rms, mx, rms_all, mx_all, keep_fraction, len(P), iterations,
                        "principal axes + trimmed ICP", label, seed)


def given_registration(T: np.ndarray, moving, fixed, *, keep_fraction: float = 0.9, samples: int = 4000,
                       seed: int = 0, fixed_query: SurfaceQuery | None = None) -> Registration:
    """The residuals of a transform given by the user (same statistics as :func:`register`)."""
    query = fixed_query or SurfaceQuery(*fixed)
    P, _ = sample_surface(*moving, samples, seed)
    _, d, _ = query.closest(apply_transform(T, P))
    rms, mx, rms_all, mx_all = _residual_stats(d, keep_fraction)
    return Registration(np.asarray(T, float), rms, mx, rms_all, mx_all, keep_fraction, len(P), 0, "given", "given", seed)
