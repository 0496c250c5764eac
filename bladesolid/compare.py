"""Repaired and re-profiled blades against their reference, and matched blade sets.

Four stages, each a few small functions over numpy arrays (SI inside, metres):

* **Registration** (:func:`register`) — a rigid motion that puts a repaired blade (often a 3D
  scan in the scanner's own frame) onto its reference: a start from the principal axes and
  centres of gravity of the two solids, trying the four proper sign combinations of the
  axes, then a trimmed ICP (iterative closest point) that keeps the best ``keep_fraction``
  of the correspondences in every iteration, so that material removed by the repair does
  not pull the fit. Point-to-point steps (Kabsch) first, point-to-plane steps to exact
  closest points on the reference surface last. Seeded, hence deterministic.
* **Comparison** (:func:`compare_blade`) — signed deviation of every repaired vertex from the
  reference surface (negative: the repaired surface lies inside the reference, material is
  missing), the removed and added volumes (boolean differences, manifold3d), and the
  deltas, repaired minus reference, of the mass figures and of the centrifugal loads at one
  operating point, both blades analysed in the reference's hub frame.
* **Limits** (:func:`read_limits`, :func:`check_limits`) — the user's allowed deltas, from
  their approved repair data, in a small TOML file (see :data:`EXAMPLE_LIMITS`). The tool
  has no limits of its own: without a limits file nothing is checked; the verdict then keeps
  the two values of the report contract ("within limits") and ``limits_checked`` is false.
* **Set matching** (:func:`match_blades`) — which blade goes to which hub position so that the
  resultant static imbalance is smallest, with the blades' CTMs kept balanced second.

Frames: the reference blade arrives as a :class:`bladesolid.api.Blade` (hub frame); the
transform reported maps the repaired mesh's own coordinates (m) to the reference's model
coordinates (m), and ``transform_to_hub`` to the reference's hub frame.
"""

from __future__ import annotations

import itertools
import json
import math
import os
from dataclasses import dataclass, field

import numpy as np

from .errors import InputError
from .frame import HubFrame, measure_blade_angle, rotation_about
from .loads import OperatingLoads, operating_loads, static_moment
from .moments import Moments, surface_volume_moments, zero_moments
from .units import rpm_to_rad_s

# --------------------------------------------------------------------------------------
# rigid transforms (4x4, metres)
# --------------------------------------------------------------------------------------


def rigid_matrix(R, t) -> np.ndarray:
    """(4, 4) homogeneous matrix of the rigid motion r' = R r + t.

    >>> rigid_matrix(np.eye(3), [1.0, 2.0, 3.0])[:3, 3].tolist()
    [1.0, 2.0, 3.0]
    """
    T = np.eye(4)
    T[:3, :3] = np.asarray(R, dtype=float)
    T[:3, 3] = np.asarray(t, dtype=float)
    return T


def apply_transform(T: np.ndarray, points) -> np.ndarray:
    """Points (..., 3) moved by the (4, 4) rigid matrix ``T``."""
    p = np.asarray(points, dtype=float)
    return p @ T[:3, :3].T + T[:3, 3]


def invert_rigid(T: np.ndarray) -> np.ndarray:
    """Inverse of a (4, 4) rigid matrix: R → Rᵀ, t → −Rᵀ t.

    >>> T = rigid_matrix(rotation_about([0, 0, 1], 0.3), [1.0, 0.0, 0.0])
    >>> bool(np.allclose(invert_rigid(T) @ T, np.eye(4)))
    True
    """
    R = T[:3, :3]
    return rigid_matrix(R.T, -R.T @ T[:3, 3])


def rotation_angle_deg(R: np.ndarray) -> float:
    """Angle (deg) of the rotation ``R`` about its axis, from its trace (robust near 0 via
    the skew part).

    >>> round(rotation_angle_deg(rotation_about([1, 2, 3], math.radians(0.01))), 9)
    0.01
    """
    R = np.asarray(R, dtype=float)
    s = 0.5 * np.linalg.norm([R[2, 1] - R[1, 2], R[0, 2] - R[2, 0], R[1, 0] - R[0, 1]])
    c = 0.5 * (np.trace(R) - 1.0)
    return math.degrees(math.atan2(s, c))


def check_rigid(T, source: str) -> np.ndarray:
    """A (4, 4) float matrix checked to be a proper rigid motion (orthonormal rotation with
    determinant +1, last row 0 0 0 1); :class:`InputError` naming ``source`` otherwise."""
    try:
        M = np.asarray(T, dtype=float)
    except (TypeError, ValueError):
        raise InputError(source, "the transform must be a 4x4 matrix of numbers (4 rows of 4)") from None
    if M.shape != (4, 4):
        raise InputError(source, f"the transform must be a 4x4 matrix (4 rows of 4 numbers), got shape {M.shape}")
    if not np.all(np.isfinite(M)):
        raise InputError(source, "the transform contains a non-finite number")
    if not np.allclose(M[3], [0.0, 0.0, 0.0, 1.0], atol=1e-9):
        raise InputError(source, f"the last row of the transform must be 0 0 0 1, got {M[3].tolist()}")
    R = M[:3, :3]
    err = float(np.abs(R.T @ R - np.eye(3)).max())
    if err > 1e-6:
        raise InputError(source, f"the rotation part of the transform is not orthonormal (RᵀR differs from 1 by {err:.3g}); "
                                 "scaling and shear are not rigid motions")
    if np.linalg.det(R) < 0:
        raise InputError(source, "the transform is a reflection (determinant −1), not a rigid motion")
    return M


def _transform_table(data: dict, path: str, default_units: str, expected: str):
    """(matrix, units) of a transform given as a table {transform, units?, note?}."""
    if set(data) - {"transform", "units", "note"} or "transform" not in data:
        raise InputError(path, f"expected {expected} and optionally 'units' and 'note'; got keys {sorted(data)}")
    return data["transform"], data.get("units", default_units)


def read_transform(path, *, default_units: str = "m") -> np.ndarray:
    """A rigid transform (repaired → reference model frame) from a file, in metres.

    ``path`` is ``"identity"`` (both meshes already in the same frame) or a file:

    * ``.json`` — a 4x4 list of rows, or ``{"transform": [[...], ...], "units": "mm"}``, or a
      bladesolid comparison report (``comparison.registration.transform``, metres);
    * ``.toml`` — ``transform = [[...], ...]`` and optionally ``units = "mm"``;
    * anything else — text, 4 rows of 4 numbers (spaces or commas), ``#`` comments; a comment
      line ``# units: mm`` states the unit of the translation.

    The translation is in ``units`` (default metres); the rotation must be proper.

    >>> read_transform("identity").tolist() == np.eye(4).tolist()
    True
    """
    from .units import length_scale

    p = os.fspath(path)
    if str(p).strip().lower() == "identity":
        return np.eye(4)
    if not os.path.isfile(p):
        raise InputError(p, "transform file not found (give a file with a 4x4 matrix, or 'identity')")
    if os.path.getsize(p) > 1_000_000:
        raise InputError(p, "a transform file is a few hundred bytes; this one is larger than 1 MB")
    ext = os.path.splitext(p)[1].lower()
    units = default_units
    try:
        if ext == ".json":
            with open(p, encoding="utf-8") as fh:
                data = json.load(fh)
            if isinstance(data, dict) and isinstance(data.get("comparison"), dict):
                reg = data["comparison"].get("registration")
                if not isinstance(reg, dict) or "transform" not in reg:
                    raise InputError(p, "a comparison report without comparison.registration.transform")
                M, units = reg["transform"], "m"
            elif isinstance(data, dict):
                M, units = _transform_table(data, p, default_units, "a 4x4 list, or an object with keys 'transform' (4x4)")
            else:
                M = data
        elif ext == ".toml":
            from .io import read_toml

            data = read_toml(p, "transform file", 1_000_000)
            M, units = _transform_table(data, p, default_units, "the key 'transform' (4 rows of 4 numbers)")
        else:
            rows = []
            with open(p, encoding="utf-8") as fh:
                for line in fh:
                    s = line.strip()
                    if s.startswith("#"):
                        body = s.lstrip("#").strip()
                        if body.lower().startswith("units"):
                            units = body.split(":", 1)[-1].split("=", 1)[-1].strip().strip("\"'")
                        continue
                    if s:
                        rows.append([float(x) for x in s.replace(",", " ").split()])
            M = rows
    except InputError:
        raise
    except (ValueError, OSError, UnicodeDecodeError) as exc:
        raise InputError(p, f"cannot read a 4x4 transform ({str(exc).splitlines()[0] if str(exc) else type(exc).__name__})") from None
    except Exception as exc:  # tomllib.TOMLDecodeError and friends
        raise InputError(p, f"cannot read a 4x4 transform ({str(exc).splitlines()[0]})") from None
    if not isinstance(units, str):
        raise InputError(p, f"'units' must be a string such as \"mm\", got {units!r}")
    scale = length_scale(units, f"{p}: units")
    M = check_rigid(M, p).copy()
    M[:3, 3] *= scale
    return M


# --------------------------------------------------------------------------------------
# surfaces: merging, seeded sampling, exact closest points
# --------------------------------------------------------------------------------------


def merge_surfaces(surfaces) -> tuple[np.ndarray, np.ndarray]:
    """One (vertices (n, 3), faces (m, 3)) from several ``(vertices, faces)`` bodies."""
    vs, fs, off = [], [], 0
    for v, f in surfaces:
        v = np.asarray(v, dtype=float)
        vs.append(v)
        fs.append(np.asarray(f, dtype=np.int64) + off)
        off += len(v)
    return np.concatenate(vs), np.concatenate(fs)


def sample_surface(vertices, faces, count: int, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """``count`` points spread uniformly by area over a triangle surface, and their faces.

    Deterministic for a given ``seed`` (numpy PCG64). Returns ((count, 3) points, (count,) face
    index).

    >>> v = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0]]); f = np.array([[0, 1, 2]])
    >>> p, i = sample_surface(v, f, 5, seed=1)
    >>> bool(np.all(p[:, 0] + p[:, 1] <= 1.0)), p.shape
    (True, (5, 3))
    """
    v = np.asarray(vertices, dtype=float)
    tri = v[np.asarray(faces)]
    area = 0.5 * np.linalg.norm(np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0]), axis=1)
    rng = np.random.default_rng(seed)
    cdf = np.cumsum(area)
    idx = np.searchsorted(cdf, rng.random(count) * cdf[-1], side="right").clip(0, len(area) - 1)
    u, w = rng.random(count), rng.random(count)
    flip = u + w > 1.0
    u[flip], w[flip] = 1.0 - u[flip], 1.0 - w[flip]
    t = tri[idx]
    pts = t[:, 0] + u[:, None] * (t[:, 1] - t[:, 0]) + w[:, None] * (t[:, 2] - t[:, 0])
    return pts, idx


def _closest_on_triangles(tri: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Closest points (k, 3) on triangles (k, 3, 3) to points (k, 3) (trimesh's kernel)."""
    from trimesh.triangles import closest_point

    if len(tri) == 0:
        return np.empty((0, 3))
    return closest_point(tri, points)


class SurfaceQuery:
    """Exact closest points and signed distances to a closed, outward-wound triangle surface.

    A KD-tree of the face centroids gives candidates: a first pass over the nearest few faces
    bounds the distance ``d``; every face that can hold a point closer than ``d`` has its
    centroid within ``d`` plus its circumradius-like size, so a second pass over those is exact.
    The sign uses the angle-weighted pseudo-normal at the closest feature (face, edge or
    vertex; Bærentzen & Aanæs 2005), which is exact for a closed, consistently wound surface.

    vertices (n, 3) m, faces (m, 3) int.
    """

    def __init__(self, vertices, faces):
        from scipy.spatial import cKDTree

        self.vertices = np.ascontiguousarray(vertices, dtype=float)
        self.faces = np.ascontiguousarray(faces, dtype=np.int64)
        tri = self.vertices[self.faces]
        self.triangles = tri
        self.centroids = tri.mean(axis=1)
        self.size = np.linalg.norm(tri - self.centroids[:, None], axis=2).max(axis=1)
        self.size_max = float(self.size.max())
        self.tree = cKDTree(self.centroids)
        # faces binned by size (doubling from twice the median), one tree per bin, so that a
        # few large faces do not widen the exact search around every point
        edges = [0.0]
        s = 2.0 * float(np.median(self.size))
        while s < self.size_max:
            edges.append(s)
            s *= 2.0
        edges.append(self.size_max * (1 + 1e-12) + 1e-300)
        self.bins = []
        for lo, hi in zip(edges[:-1], edges[1:]):
            ix = np.flatnonzero((self.size > lo) & (self.size <= hi)) if lo > 0 else np.flatnonzero(self.size <= hi)
            if len(ix):
                self.bins.append((ix, cKDTree(self.centroids[ix]), float(self.size[ix].max())))
        n = np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0])
        self.face_normals = n / np.maximum(np.linalg.norm(n, axis=1), 1e-300)[:, None]
        self._pseudo = None

    # -- closest points ------------------------------------------------------------------
    def closest(self, points, exact: bool = True, first_k: int = 8, chunk: int = 2000):
        """Closest points on the surface: ((p, 3) points, (p,) distances m, (p,) face index).

        ``exact=False`` stops after the first pass over the ``first_k`` nearest faces (good
        for coarse registration steps far from convergence).
        """
        q = np.asarray(points, dtype=float).reshape(-1, 3)
        out_c = np.empty_like(q)
        out_d = np.empty(len(q))
        out_f = np.empty(len(q), dtype=np.int64)
        for s in range(0, len(q), chunk):
            c, d, f = self._closest_chunk(q[s:s + chunk], exact, first_k)
            out_c[s:s + chunk], out_d[s:s + chunk], out_f[s:s + chunk] = c, d, f
        return out_c, out_d, out_f

    def _best(self, q, rows, cand):
        """Best candidate per query row: rows (k,) query index, cand (k,) face index."""
        c = _closest_on_triangles(self.triangles[cand], q[rows])
        d = np.linalg.norm(c - q[rows], axis=1)
        order = np.lexsort((d, rows))
        first = np.ones(len(order), dtype=bool)
        first[1:] = rows[order][1:] != rows[order][:-1]
        pick = order[first]
        return rows[pick], c[pick], d[pick], cand[pick]

    def _closest_chunk(self, q, exact, first_k):
        k = min(first_k, len(self.faces))
        _, idx = self.tree.query(q, k=k)
        idx = np.asarray(idx).reshape(len(q), k)
        rows = np.repeat(np.arange(len(q)), k)
        r, c, d, f = self._best(q, rows, idx.ravel())
        cp, dist, face = np.empty_like(q), np.empty(len(q)), np.empty(len(q), dtype=np.int64)
        cp[r], dist[r], face[r] = c, d, f
        if not exact:
            return cp, dist, face
        all_rows, all_cand = [], []
        for ix, tree, smax in self.bins:
            lists = tree.query_ball_point(q, dist + smax + 1e-12, return_sorted=False)
            lens = np.fromiter((len(x) for x in lists), dtype=np.int64, count=len(q))
            cand = ix[np.fromiter(itertools.chain.from_iterable(lists), dtype=np.int64, count=int(lens.sum()))]
            rows = np.repeat(np.arange(len(q)), lens)
            near = np.linalg.norm(self.centroids[cand] - q[rows], axis=1) <= dist[rows] + self.size[cand] + 1e-12
            all_rows.append(rows[near])
            all_cand.append(cand[near])
        rows, cand = np.concatenate(all_rows), np.concatenate(all_cand)
        if len(rows):
            r, c, d, f = self._best(q, rows, cand)
            better = d < dist[r]
            r, c, d, f = r[better], c[better], d[better], f[better]
            cp[r], dist[r], face[r] = c, d, f
        return cp, dist, face

    # -- signed distance -----------------------------------------------------------------
    def _pseudo_normals(self):
        """Angle-weighted vertex normals and edge normals (sum of the two face normals)."""
        if self._pseudo is None:
            from trimesh.triangles import angles

            f, n = self.faces, self.face_normals
            ang = angles(self.triangles)
            vn = np.zeros_like(self.vertices)
            for j in range(3):
                np.add.at(vn, f[:, j], n * ang[:, j, None])
            edges = np.sort(f[:, [[1, 2], [2, 0], [0, 1]]].reshape(-1, 2), axis=1)  # edge opposite corner j
            uniq, inv = np.unique(edges, axis=0, return_inverse=True)
            en = np.zeros((len(uniq), 3))
            np.add.at(en, inv.ravel(), np.repeat(n, 3, axis=0))
            self._pseudo = (vn, en, inv.reshape(-1, 3))
        return self._pseudo

    def signed_distance(self, points) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Signed distances (p,) m, positive outside the closed surface; also the closest
        points (p, 3) and faces (p,)."""
        from trimesh.triangles import points_to_barycentric

        q = np.asarray(points, dtype=float).reshape(-1, 3)
        c, d, face = self.closest(q)
        vn, en, edge_of = self._pseudo_normals()
        bary = points_to_barycentric(self.triangles[face], c)
        small = bary < 1e-7
        normal = self.face_normals[face].copy()
        nsmall = small.sum(axis=1)
        on_edge = nsmall == 1
        if np.any(on_edge):
            j = np.argmax(small[on_edge], axis=1)  # the corner opposite the edge
            normal[on_edge] = en[edge_of[face[on_edge], j]]
        on_vertex = nsmall >= 2
        if np.any(on_vertex):
            j = np.argmax(bary[on_vertex], axis=1)
            normal[on_vertex] = vn[self.faces[face[on_vertex], j]]
        s = np.einsum("ij,ij->i", q - c, normal)
        return np.where(s < 0.0, -d, d), c, face


# --------------------------------------------------------------------------------------
# registration
# --------------------------------------------------------------------------------------


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


# --------------------------------------------------------------------------------------
# deviation and volumes
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Deviation:
    """Signed deviation of the repaired surface from the reference, per repaired vertex.

    values : (n,) m, + outside the reference (material added), − inside (material missing)
    vertices (n, 3), faces (m, 3) : the repaired surface, registered, reference hub frame, m
    """

    values: np.ndarray
    vertices: np.ndarray
    faces: np.ndarray

    @property
    def min_m(self) -> float:
        return float(self.values.min())

    @property
    def max_m(self) -> float:
        return float(self.values.max())

    @property
    def rms_m(self) -> float:
        return float(np.sqrt(np.mean(self.values**2)))

    @property
    def mean_m(self) -> float:
        return float(self.values.mean())

    @property
    def max_inward_m(self) -> float:
        """Deepest point of the repaired surface inside the reference (≥ 0), m."""
        return max(0.0, -self.min_m)

    @property
    def max_outward_m(self) -> float:
        """Farthest point of the repaired surface outside the reference (≥ 0), m."""
        return max(0.0, self.max_m)


def signed_deviation(points, reference: SurfaceQuery) -> np.ndarray:
    """Signed distance (m) of points from the reference surface: negative inside it (material
    missing there when the points are on the repaired surface), positive outside."""
    return reference.signed_distance(points)[0]


def _manifold(surfaces, source: str):
    import manifold3d

    total = None
    for v, f in surfaces:
        mesh = manifold3d.Mesh64(vert_properties=np.ascontiguousarray(v, dtype=np.float64),
                                 tri_verts=np.ascontiguousarray(f, dtype=np.uint32))
        solid = manifold3d.Manifold(mesh)
        if solid.status() != manifold3d.Error.NoError:
            raise InputError(source, f"the surface is not a closed 2-manifold for the boolean volumes ({solid.status()})")
        total = solid if total is None else total + solid
    return total


def boolean_volumes(reference_surfaces, repaired_surfaces, reference_source: str = "reference",
                    repaired_source: str = "repaired") -> tuple[float, float]:
    """(removed, added) volume, m³: reference − repaired and repaired − reference (manifold3d
    boolean differences of the solids, in the same frame)."""
    a = _manifold(reference_surfaces, reference_source)
    b = _manifold(repaired_surfaces, repaired_source)
    return float((a - b).volume()), float((b - a).volume())


# --------------------------------------------------------------------------------------
# blade figures from arrays (surface moments only)
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class BladeFigures:
    """Mass figures (modelled / registered position) and loads at one operating point of a
    blade given by its closed surfaces in a hub frame (SI).

    modelled_deg : blade angle measured at the reference station (None: not measured)
    loads : the operating point (blade set to ``loads.blade_angle_deg`` at that station)
    """

    name: str
    moments: Moments
    volume_m3: float
    mass_kg: float
    cg_m: np.ndarray
    static_moment_kgm: float
    modelled_deg: float | None
    loads: OperatingLoads


def blade_figures(surfaces, densities, frame: HubFrame, reference_radius_m: float, rpm: float, *,
                  blade_angle_deg: float | None = None, modelled_fallback_deg: float = 0.0,
                  lumped: Moments | None = None, name: str = "", source: str = "mesh") -> BladeFigures:
    """Figures of a blade from its surfaces (hub frame, m) and one density per body (kg/m³).

    Moments from the closed surfaces (divergence theorem) times density, plus ``lumped``; the
    blade angle measured at ``reference_radius_m``; loads with the blade set to
    ``blade_angle_deg`` measured there (default: as modelled). When the station cannot be
    measured the modelled angle is taken as ``modelled_fallback_deg``.
    """
    m = zero_moments()
    vol = 0.0
    for (v, f), rho in zip(surfaces, densities):
        u = surface_volume_moments(v, f)
        vol += abs(u.mass)
        m = m + u.scaled(rho)
    if lumped is not None:
        m = m + lumped
    try:
        modelled = measure_blade_angle(surfaces, frame, reference_radius_m, source=source).angle_deg
    except InputError:
        modelled = None
    base = modelled if modelled is not None else modelled_fallback_deg
    beta = base if blade_angle_deg is None else float(blade_angle_deg)
    ops = operating_loads(m, frame, base, beta, rpm, name=name)
    return BladeFigures(name, m, vol, float(m.mass), m.cg, float(static_moment(m, frame.k)), modelled, ops)


# --------------------------------------------------------------------------------------
# limits (the user's, from the approved repair data)
# --------------------------------------------------------------------------------------

EXAMPLE_LIMITS = '''\
# bladesolid limits file: the allowed change of a repaired blade against its reference,
# repaired minus reference. These limits are YOURS, taken from the approved repair data
# for the blade; bladesolid has none of its own and only checks the figures against them.
source = "Larkspur Blade Repair, approved repair data BW-3, rev. B, table 4"  # free text

# signed changes: a range "LOW:HIGH" (one side may be left empty: ":+5 g"), or a list
# ["-50 g", "5 g"]; and/or a symmetric bound max_abs_NAME = "Q" (|change| <= Q)
mass = "-50 g:+5 g"
max_abs_static_moment = "20 kg*mm"      # m*|c_perp| about the rotation axis
radial_pull = "-2 kN:0.5 kN"            # at the operating point
max_abs_ctm = "5 N*m"                   # at the operating point
blade_angle = "-0.2:0.2"                # degrees, at the reference station

# magnitudes: the largest allowed value
cg_shift = "2 mm"                       # |change of the centre of gravity|
max_deviation = "3 mm"                  # deepest point of the repaired surface inside the reference
max_added_deviation = "0.5 mm"          # farthest point outside the reference
removed_volume = "5000 mm^3"
# added_volume = "100 mm^3"
# registration_rms = "0.1 mm"           # refuse a poor fit of the scan to the reference
'''

#: Signed changes: key -> (SI unit for pint, display unit, display factor, what it is).
SIGNED_LIMITS = {
    "mass": ("kg", "g", 1e3, "mass change"),
    "static_moment": ("kg*m", "kg·mm", 1e3, "static moment change"),
    "radial_pull": ("N", "N", 1.0, "radial pull change"),
    "ctm": ("N*m", "N·m", 1.0, "CTM change"),
    "blade_angle": ("degree", "deg", 1.0, "blade angle change"),
}
#: Magnitudes (largest allowed value): key -> (SI unit, display unit, display factor, what it is).
MAGNITUDE_LIMITS = {
    "cg_shift": ("m", "mm", 1e3, "CG shift"),
    "max_deviation": ("m", "mm", 1e3, "largest inward deviation (material missing)"),
    "max_added_deviation": ("m", "mm", 1e3, "largest outward deviation (material added)"),
    "removed_volume": ("m^3", "mm³", 1e9, "removed volume"),
    "added_volume": ("m^3", "mm³", 1e9, "added volume"),
    "registration_rms": ("m", "mm", 1e3, "registration RMS residual"),
}
TEXT_LIMIT_KEYS = ("source", "note")
LIMIT_KEYS = (tuple(SIGNED_LIMITS) + tuple(f"max_abs_{k}" for k in SIGNED_LIMITS) + tuple(MAGNITUDE_LIMITS)
              + TEXT_LIMIT_KEYS)

LIMITS_NOTE = ("The limits are the user's own, taken from the approved repair data (limits file); "
               "bladesolid has no limits of its own and only compares the computed figures with them.")


@dataclass(frozen=True)
class Limit:
    """One allowed bound, SI. ``kind``: ``"range"`` (low ≤ change ≤ high, either may be None),
    ``"abs"`` (|change| ≤ high) or ``"max"`` (magnitude ≤ high)."""

    key: str
    figure: str
    kind: str
    low: float | None
    high: float | None
    text: str


@dataclass(frozen=True)
class Limits:
    """A validated limits file."""

    path: str
    source: str
    note: str
    limits: tuple[Limit, ...]


def _fmt_signed(x: float, digits: int = 4) -> str:
    """``+5``, ``−62.1`` (typographic minus).

    >>> _fmt_signed(-62.08), _fmt_signed(5.0)
    ('−62.08', '+5')
    """
    return f"{x:+.{digits}g}".replace("-", "−")


def _fmt(x: float, digits: int = 4) -> str:
    return f"{x:.{digits}g}".replace("-", "−")


def _quantity(value, si_unit: str, where: str, what: str) -> float:
    from .units import parse_quantity

    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise InputError(where, f"{what} must be a quantity with its unit (a string such as \"5 g\") or a number "
                                f"in {si_unit}, got {value!r}")
    if isinstance(value, str):
        value = value.strip().replace("−", "-").replace("·", "*")
        if not value:
            raise InputError(where, f"{what} is empty")
    return parse_quantity(value, si_unit, where, what, signed=True)


def parse_limits(data: dict, path: str) -> Limits:
    """Validate the parsed TOML of a limits file (see :data:`EXAMPLE_LIMITS`).

    >>> L = parse_limits({"mass": "-50 g:+5 g", "cg_shift": "2 mm"}, "limits.toml")
    >>> [(x.key, x.low, x.high) for x in L.limits]
    [('mass', -0.05, 0.005), ('cg_shift', None, 0.002)]
    >>> parse_limits({"mas": "5 g"}, "limits.toml")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    bladesolid.errors.InputError: limits.toml: key 'mas': unknown key; did you mean 'mass'? (expected one of: mass, ...
    """
    import difflib

    if not isinstance(data, dict):
        raise InputError(path, "a limits file is a TOML table of keys")
    out = []
    text = {"source": "", "note": ""}
    for key, value in data.items():
        where = f"{path}: key '{key}'"
        if key not in LIMIT_KEYS:
            close = difflib.get_close_matches(key, LIMIT_KEYS, n=1)
            hint = f"did you mean {close[0]!r}? " if close else ""
            raise InputError(where, f"unknown key; {hint}(expected one of: {', '.join(LIMIT_KEYS)})")
        if key in TEXT_LIMIT_KEYS:
            if not isinstance(value, str):
                raise InputError(where, f"must be a string (free text), got {value!r}")
            text[key] = value
            continue
        if key in SIGNED_LIMITS:
            si, _, _, what = SIGNED_LIMITS[key]
            if isinstance(value, list):
                if len(value) != 2:
                    raise InputError(where, f"a range list must have two entries [LOW, HIGH], got {len(value)}")
                parts = value
            elif isinstance(value, str) and ":" in value:
                parts = value.split(":")
                if len(parts) != 2:
                    raise InputError(where, f"expected a range \"LOW:HIGH\", got {value!r}")
            else:
                raise InputError(where, f"expected a range \"LOW:HIGH\" (e.g. \"-50 g:+5 g\") or a list [LOW, HIGH]; "
                                        f"for a symmetric bound use max_abs_{key}; got {value!r}")
            bounds = []
            for part in parts:
                if isinstance(part, str) and not part.strip():
                    bounds.append(None)
                else:
                    bounds.append(_quantity(part, si, where, f"{what} bound"))
            lo, hi = bounds
            if lo is None and hi is None:
                raise InputError(where, "a range needs at least one bound")
            if lo is not None and hi is not None and lo > hi:
                raise InputError(where, f"the low bound is above the high bound in {value!r}")
            shown = value if isinstance(value, str) else ":".join(str(p) for p in value)
            out.append(Limit(key, key, "range", lo, hi, shown))
            continue
        if key.startswith("max_abs_"):
            fig = key[len("max_abs_"):]
            si, _, _, what = SIGNED_LIMITS[fig]
            q = _quantity(value, si, where, f"largest |{what}|")
            if q < 0:
                raise InputError(where, f"must not be negative, got {value!r}")
            out.append(Limit(key, fig, "abs", None, q, str(value)))
            continue
        si, _, _, what = MAGNITUDE_LIMITS[key]
        q = _quantity(value, si, where, what)
        if q < 0:
            raise InputError(where, f"must not be negative, got {value!r}")
        out.append(Limit(key, key, "max", None, q, str(value)))
    if not out:
        raise InputError(path, "the limits file sets no limit; expected at least one of: "
                               + ", ".join(k for k in LIMIT_KEYS if k not in TEXT_LIMIT_KEYS))
    return Limits(path, text["source"], text["note"], tuple(out))


def read_limits(path) -> Limits:
    """Read and validate a limits file (TOML); one-line :class:`InputError` naming the file
    and the key on any problem."""
    from .io import read_toml

    p = os.fspath(path)
    return parse_limits(read_toml(p, "limits file", 1_000_000), p)


@dataclass(frozen=True)
class LimitCheck:
    """One limit checked: the value (SI), whether it is within, and the reason when not."""

    limit: Limit
    value: float | None
    within: bool
    reason: str


def limit_value_text(check: LimitCheck) -> str:
    """The checked value in the display unit of its limit (``"−9.034 g"``, ``"3.2 mm"``)."""
    fig = check.limit.figure
    table = SIGNED_LIMITS if fig in SIGNED_LIMITS else MAGNITUDE_LIMITS
    _, unit, k, _ = table[fig]
    if check.value is None:
        return "—"
    return f"{(_fmt_signed if fig in SIGNED_LIMITS else _fmt)(check.value * k)} {unit}"


def check_limits(limits: Limits, figures: dict) -> tuple[LimitCheck, ...]:
    """Check every limit against ``figures`` (SI; keys of :data:`SIGNED_LIMITS` and
    :data:`MAGNITUDE_LIMITS`; a value None cannot be checked and counts as exceeded).

    >>> L = parse_limits({"mass": "-50 g:+5 g"}, "limits.toml")
    >>> check_limits(L, {"mass": -0.0621})[0].reason
    'mass change −62.1 g is below the allowed −50 g (limits.toml: mass = "-50 g:+5 g")'
    """
    out = []
    for lim in limits.limits:
        table = SIGNED_LIMITS if lim.figure in SIGNED_LIMITS else MAGNITUDE_LIMITS
        _, unit, k, what = table[lim.figure]
        value = figures.get(lim.figure)
        src = f'({os.path.basename(limits.path)}: {lim.key} = "{lim.text}")'
        if value is None:
            out.append(LimitCheck(lim, None, False, f"{what} could not be determined, so {src} cannot be met"))
            continue
        v = float(value)
        reason = ""
        if lim.kind == "range":
            if lim.low is not None and v < lim.low:
                reason = f"{what} {_fmt_signed(v * k)} {unit} is below the allowed {_fmt_signed(lim.low * k)} {unit} {src}"
            elif lim.high is not None and v > lim.high:
                reason = f"{what} {_fmt_signed(v * k)} {unit} is above the allowed {_fmt_signed(lim.high * k)} {unit} {src}"
        elif lim.kind == "abs":
            if abs(v) > lim.high:
                reason = f"{what} {_fmt_signed(v * k)} {unit} exceeds the allowed ±{_fmt(lim.high * k)} {unit} {src}"
        elif v > lim.high:
            reason = f"{what} {_fmt(v * k)} {unit} exceeds the allowed {_fmt(lim.high * k)} {unit} {src}"
        out.append(LimitCheck(lim, v, not reason, reason))
    return tuple(out)


# --------------------------------------------------------------------------------------
# the comparison
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Delta:
    """This blade minus the reference (SI, reference hub frame)."""

    mass_kg: float
    volume_m3: float
    cg_m: np.ndarray
    cg_shift_m: float
    static_moment_kgm: float
    radial_pull_N: float
    ctm_Nm: float
    blade_angle_deg: float | None


@dataclass(frozen=True)
class Comparison:
    """A repaired blade against its reference (see :func:`compare_blade`)."""

    reference_name: str
    reference_source: str
    repaired_name: str
    repaired_source: str
    registration: Registration
    transform_model: np.ndarray  # repaired model frame (m) -> reference model frame (m)
    deviation: Deviation
    removed_volume_m3: float
    added_volume_m3: float
    reference: BladeFigures
    repaired: BladeFigures
    rpm: float
    blade_angle_deg: float
    reference_radius_m: float
    delta: Delta
    limits: Limits | None
    checks: tuple[LimitCheck, ...]
    warnings: tuple[str, ...] = field(default_factory=tuple)

    @property
    def verdict(self) -> str:
        """``"within limits"`` / ``"outside limits"`` (docs/CONVENTIONS.md: exactly these two values).

        Without a limits file nothing is checked: "within limits" with ``limits_checked`` false.
        """
        if self.limits is None:
            return "within limits"
        return "within limits" if all(c.within for c in self.checks) else "outside limits"

    @property
    def limits_checked(self) -> bool:
        """True when a limits file was given and its limits were checked."""
        return self.limits is not None

    @property
    def reasons(self) -> list[str]:
        return [c.reason for c in self.checks if not c.within]

    def figures(self) -> dict:
        """The figures a limits file can name (SI)."""
        d = self.delta
        return {
            "mass": d.mass_kg, "static_moment": d.static_moment_kgm, "radial_pull": d.radial_pull_N,
            "ctm": d.ctm_Nm, "blade_angle": d.blade_angle_deg, "cg_shift": d.cg_shift_m,
            "max_deviation": self.deviation.max_inward_m, "max_added_deviation": self.deviation.max_outward_m,
            "removed_volume": self.removed_volume_m3, "added_volume": self.added_volume_m3,
            "registration_rms": self.registration.rms_m,
        }


def _repaired_densities(reference, n_bodies: int, source: str) -> list[float]:
    rho = [m.density_kg_m3 for m in reference.materials]
    if n_bodies == len(rho):
        return rho
    if len(set(rho)) == 1:
        return rho[:1] * n_bodies
    raise InputError(source, f"the repaired mesh has {n_bodies} bodies and the reference {len(rho)} bodies of "
                             "different densities; bodies cannot be paired for their densities")


def compare_blade(reference, repaired_surfaces, rpm: float, *, blade_angle_deg: float | None = None,
                  pitch_change_deg: float | None = None, transform: np.ndarray | None = None,
                  limits: Limits | None = None, repaired_name: str = "repaired", repaired_source: str = "mesh",
                  keep_fraction: float = 0.9, samples: int = 4000, seed: int = 0,
                  volumes: bool = True) -> Comparison:
    """Compare a repaired blade with its reference.

    reference : a :class:`bladesolid.api.Blade` (hub frame; its materials, lumped masses and
      reference station are used for both blades)
    repaired_surfaces : ``[(vertices (n, 3) m, faces (m, 3)), ...]`` in the repaired mesh's own
      frame (a scan's frame, or the reference's model frame)
    rpm, blade_angle_deg | pitch_change_deg : the operating point. Both blades are set to the
      same blade angle, each measured at the reference's station (as a blade is set in the hub):
      ``blade_angle_deg``, or the reference's modelled angle plus ``pitch_change_deg``
      (default: the reference's modelled angle)
    transform : (4, 4) repaired → reference *model* frame (m), or None to register
    limits : the user's limits, or None (nothing checked; ``limits_checked`` false)

    Deltas are repaired minus reference, in the reference's hub frame.
    """
    frame = reference.frame
    warnings = []
    if blade_angle_deg is not None and pitch_change_deg is not None:
        raise InputError("--blade-angle", "give either --blade-angle or --pitch-change, not both")
    ref_surfaces = [(np.asarray(v, float), np.asarray(f, np.int64)) for v, f in reference.surfaces]
    rep = [(np.asarray(v, float), np.asarray(f, np.int64)) for v, f in repaired_surfaces]
    fixed = merge_surfaces(ref_surfaces)
    moving = merge_surfaces(rep)
    query = SurfaceQuery(*fixed)
    Rh, th = frame.model_to_hub()
    H = rigid_matrix(Rh, th)  # reference model frame -> hub frame
    if transform is None:
        reg = register(moving, fixed, keep_fraction=keep_fraction, samples=samples, seed=seed, fixed_query=query)
        T_hub = reg.transform
    else:
        T_hub = H @ np.asarray(transform, dtype=float)
        reg = given_registration(T_hub, moving, fixed, keep_fraction=keep_fraction, samples=samples, seed=seed,
                                 fixed_query=query)
    T_model = invert_rigid(H) @ T_hub
    if reg.rms_m > 1e-3 * max(reference.tip_radius_m, 1e-9):
        warnings.append(f"registration RMS {reg.rms_m * 1e3:.3g} mm is more than 0.1 % of the tip radius; check that "
                        "the two meshes are the same blade (and the transform, if given)")  # common practice, no source
    reg_surfaces = [(apply_transform(T_hub, v), f) for v, f in rep]
    rv, rf = merge_surfaces(reg_surfaces)
    deviation = Deviation(signed_deviation(rv, query), rv, rf)
    if volumes:
        removed, added = boolean_volumes(ref_surfaces, reg_surfaces, reference.source, repaired_source)
    else:
        removed = added = float("nan")

    modelled_ref = reference.modelled_angle.angle_deg if reference.modelled_angle is not None else None
    if modelled_ref is None and blade_angle_deg is not None:
        raise InputError(reference.source, "the reference's blade angle could not be measured at its reference "
                                           "station; use --pitch-change")
    base = modelled_ref if modelled_ref is not None else 0.0
    beta = float(blade_angle_deg) if blade_angle_deg is not None else base + float(pitch_change_deg or 0.0)
    rho_ref = [m.density_kg_m3 for m in reference.materials]
    fig_ref = blade_figures(ref_surfaces, rho_ref, frame, reference.reference_radius_m, rpm, blade_angle_deg=beta,
                            modelled_fallback_deg=base, lumped=reference.lumped_moments, name=reference.name,
                            source=reference.source)
    rho_rep = _repaired_densities(reference, len(rep), repaired_source)
    fig_rep = blade_figures(reg_surfaces, rho_rep, frame, reference.reference_radius_m, rpm, blade_angle_deg=beta,
                            modelled_fallback_deg=base, lumped=reference.lumped_moments, name=repaired_name,
                            source=repaired_source)
    if fig_rep.modelled_deg is None:
        warnings.append(f"the repaired blade's angle could not be measured at r = {reference.reference_radius_m:.4g} m; "
                        "it is taken as registered (same rigid pitch setting as the reference)")
    dcg = fig_rep.cg_m - fig_ref.cg_m
    delta = Delta(
        mass_kg=fig_rep.mass_kg - fig_ref.mass_kg,
        volume_m3=fig_rep.volume_m3 - fig_ref.volume_m3,
        cg_m=dcg,
        cg_shift_m=float(np.linalg.norm(dcg)),
        static_moment_kgm=fig_rep.static_moment_kgm - fig_ref.static_moment_kgm,
        radial_pull_N=fig_rep.loads.radial_pull_N - fig_ref.loads.radial_pull_N,
        ctm_Nm=fig_rep.loads.ctm_Nm - fig_ref.loads.ctm_Nm,
        blade_angle_deg=(None if fig_rep.modelled_deg is None or fig_ref.modelled_deg is None
                         else fig_rep.modelled_deg - fig_ref.modelled_deg),
    )
    cmp = Comparison(reference.name, reference.source, repaired_name, repaired_source, reg, T_model, deviation,
                     removed, added, fig_ref, fig_rep, float(rpm), beta, reference.reference_radius_m, delta,
                     limits, (), tuple(warnings))
    if limits is not None:
        from dataclasses import replace

        cmp = replace(cmp, checks=check_limits(limits, cmp.figures()))
    return cmp


def _figures_section(b: BladeFigures) -> dict:
    o = b.loads
    return {
        "name": b.name,
        "mass_kg": b.mass_kg,
        "volume_m3": b.volume_m3,
        "cg_m": b.cg_m,
        "static_moment_kgm": b.static_moment_kgm,
        "modelled_blade_angle_deg": b.modelled_deg,
        "blade_angle_deg": o.blade_angle_deg,
        "radial_pull_N": o.radial_pull_N,
        "ctm_Nm": o.ctm_Nm,
        "cf_N": o.cf_N,
        "moment_hub_Nm": o.moment_hub_Nm,
        "feathering_inertia_kgm2": o.feathering_inertia_kgm2,
        "pitch_stiffness_Nm_per_rad": o.pitch_stiffness_Nm_per_rad,
    }


def comparison_section(c: Comparison) -> dict:
    """The ``comparison`` key of the report (docs/CONVENTIONS.md §7), plus documented extra keys."""
    r = c.registration
    d = c.delta
    dev = c.deviation
    out = {
        "reference": {"name": c.reference_name, "mesh": c.reference_source},
        "repaired": {"name": c.repaired_name, "mesh": c.repaired_source},
        "registration": {
            "rms_m": r.rms_m,
            "max_m": r.max_m,
            "transform": c.transform_model,
            "transform_frames": "repaired mesh coordinates (m) -> reference model frame (m); r' = R r + t",
            "transform_to_hub": r.transform,
            "rotation_deg": rotation_angle_deg(c.transform_model[:3, :3]),
            "translation_m": c.transform_model[:3, 3],
            "rms_all_m": r.rms_all_m,
            "max_all_m": r.max_all_m,
            "kept_fraction": r.kept_fraction,
            "points": r.points,
            "iterations": r.iterations,
            "method": r.method,
            "start": r.start,
            "seed": r.seed,
            "residuals": "distance of seeded surface samples of the repaired blade to the reference surface; "
                         "rms_m/max_m over the kept fraction, *_all_m over all samples",
        },
        "removed_volume_m3": c.removed_volume_m3,
        "added_volume_m3": c.added_volume_m3,
        "volume_method": "manifold3d boolean differences reference - repaired (removed) and repaired - reference (added)",
        "delta": {
            "mass_kg": d.mass_kg,
            "cg_m": d.cg_m,
            "static_moment_kgm": d.static_moment_kgm,
            "radial_pull_N": d.radial_pull_N,
            "ctm_Nm": d.ctm_Nm,
            "blade_angle_deg": d.blade_angle_deg,
            "cg_shift_m": d.cg_shift_m,
            "volume_m3": d.volume_m3,
        },
        "delta_definition": "repaired minus reference, reference hub frame; mass figures at the modelled (registered) "
                            "position, loads at the operating point",
        "deviation": {
            "min_m": dev.min_m,
            "max_m": dev.max_m,
            "rms_m": dev.rms_m,
            "mean_m": dev.mean_m,
            "max_inward_m": dev.max_inward_m,
            "max_outward_m": dev.max_outward_m,
            "vertices": int(len(dev.values)),
            "sign": "signed distance of each repaired vertex from the reference surface: negative inside "
                    "(material missing), positive outside (material added)",
        },
        "operating_point": {
            "rpm": c.rpm,
            "blade_angle_deg": c.blade_angle_deg,
            "reference_radius_m": c.reference_radius_m,
            "setting": "each blade set to this blade angle measured at the reference station of the reference blade",
        },
        "reference_blade": _figures_section(c.reference),
        "repaired_blade": _figures_section(c.repaired),
        "verdict": c.verdict,
        "limits_checked": c.limits_checked,
        "reasons": c.reasons,
        "limits_note": LIMITS_NOTE,
        "limits": None if c.limits is None else {
            "file": c.limits.path,
            "source": c.limits.source,
            "note": c.limits.note,
            "checked": [
                {"key": x.limit.key, "figure": x.limit.figure, "kind": x.limit.kind, "low_si": x.limit.low,
                 "high_si": x.limit.high, "as_written": x.limit.text, "value_si": x.value, "within": x.within}
                for x in c.checks
            ],
        },
        "warnings": list(c.warnings),
    }
    return out


# --------------------------------------------------------------------------------------
# blade-set matching
# --------------------------------------------------------------------------------------


#: The schema of the reports read for set matching (docs/CONVENTIONS.md §6; the same string as
#: ``bladesolid.report.SCHEMA``, not imported from there: report is downstream of compare).
REPORT_SCHEMA = "bladesolid.report/1"


@dataclass(frozen=True)
class SetBlade:
    """One blade of a set, from its bladesolid report (SI, the blade's hub frame).

    moment_vector : (3,) m·c⊥, the static moment vector in the plane of rotation, kg·m
    """

    source: str
    name: str
    mass_kg: float
    cg_m: np.ndarray
    static_moment_kgm: float
    moment_vector: np.ndarray
    ctm_Nm: float
    radial_pull_N: float
    rpm: float
    precone_deg: float


def _plane_basis(precone_deg: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(k, u1, u2): rotation axis in the hub frame and a right-handed basis of the plane of
    rotation (u1 = x, u2 = k × u1)."""
    phi = math.radians(precone_deg)
    k = np.array([0.0, math.sin(phi), math.cos(phi)])
    u1 = np.array([1.0, 0.0, 0.0])
    return k, u1, np.cross(k, u1)


def _get(d, key, where, kind="number"):
    if not isinstance(d, dict) or key not in d:
        raise InputError(where, f"missing key '{key}'; is this a bladesolid report (schema bladesolid.report/1)?")
    v = d[key]
    if kind == "number":
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(float(v)):
            raise InputError(where, f"'{key}' must be a finite number, got {v!r}")
        return float(v)
    if kind == "vec3":
        if (not isinstance(v, list) or len(v) != 3
                or not all(isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x) for x in v)):
            raise InputError(where, f"'{key}' must be a list of three finite numbers, got {v!r}")
        return np.array(v, dtype=float)
    return v


def set_blade_from_report(data, source: str) -> SetBlade:
    """Read the figures matching needs from one parsed report; :class:`InputError` naming
    the file on any missing key or wrong type."""
    if not isinstance(data, dict):
        raise InputError(source, "not a bladesolid report (expected a JSON object)")
    if data.get("schema") != REPORT_SCHEMA:
        raise InputError(source, f"schema is {data.get('schema')!r}, expected {REPORT_SCHEMA!r} (a report of "
                                 "`bladesolid loads` or `check`)")
    mp = data.get("mass_properties")
    if not isinstance(mp, dict):
        raise InputError(source, "missing 'mass_properties'")
    where = f"{source}: mass_properties"
    mass = _get(mp, "mass_kg", where)
    cg = _get(mp, "cg_m", where, "vec3")
    sm = _get(mp, "static_moment_kgm", where)
    if mass <= 0:
        raise InputError(where, f"'mass_kg' must be positive, got {mass}")
    ops = data.get("operating_points")
    if not isinstance(ops, list) or not ops or not isinstance(ops[0], dict):
        raise InputError(source, "missing 'operating_points' (at least one, with rpm, ctm_Nm and radial_pull_N); "
                                 "write the report with `bladesolid loads ... --rpm N --json FILE`")
    w0 = f"{source}: operating_points[0]"
    ctm = _get(ops[0], "ctm_Nm", w0)
    pull = _get(ops[0], "radial_pull_N", w0)
    rpm = _get(ops[0], "rpm", w0)
    precone = 0.0
    hf = (data.get("input") or {}).get("hub_frame") if isinstance(data.get("input"), dict) else None
    if isinstance(hf, dict) and hf.get("precone_deg") is not None:
        precone = _get(hf, "precone_deg", f"{source}: input.hub_frame")
    k, _, _ = _plane_basis(precone)
    vec = mass * (cg - (cg @ k) * k)
    name = (data.get("input") or {}).get("name") if isinstance(data.get("input"), dict) else None
    if not isinstance(name, str) or not name:
        name = os.path.basename(source)
    return SetBlade(source, name, mass, cg, sm, vec, ctm, pull, rpm, precone)


def read_set_report(path) -> SetBlade:
    """:func:`set_blade_from_report` of a JSON report file."""
    p = os.fspath(path)
    if not os.path.isfile(p):
        raise InputError(p, "report file not found")
    if os.path.getsize(p) > 200_000_000:
        raise InputError(p, "larger than 200 MB; is it really a bladesolid report?")
    try:
        with open(p, encoding="utf-8") as fh:
            data = json.load(fh)
    except json.JSONDecodeError as exc:
        raise InputError(p, f"not valid JSON ({exc.msg} at line {exc.lineno})") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(p, f"cannot be read ({exc})") from None
    return set_blade_from_report(data, p)


@dataclass(frozen=True)
class Assignment:
    """Blades on hub positions. ``order[i]`` is the blade (0-based) at position i, clocked
    360°/N·i about the rotation axis.

    imbalance_kgm : |Σ_i R(θ_i) (m c⊥)_order[i]|, the resultant static imbalance, kg·m
    imbalance_direction_deg : its clocking from position 1's x axis, about k
    ctm_resultant_Nm : |Σ_i CTM_order[i] a_i| in the plane of rotation, N·m (zero when
      the CTMs balance; for even N, built of the differences between opposite blades)
    """

    order: tuple[int, ...]
    imbalance_kgm: float
    imbalance_direction_deg: float
    ctm_resultant_Nm: float


@dataclass(frozen=True)
class MatchResult:
    best: Assignment
    worst: Assignment
    method: str
    evaluated: int


def _phasors(n: int) -> np.ndarray:
    return np.exp(2j * np.pi * np.arange(n) / n)


def _objective(z: np.ndarray, c: np.ndarray, orders: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(imbalance (p,), ctm resultant (p,), resultant phasor (p,)) of orders (p, n)."""
    e = _phasors(orders.shape[1])
    U = (z[orders] * e).sum(axis=1)
    C = (c[orders] * e).sum(axis=1)
    return np.abs(U), np.abs(C), U


def _assignment(z, c, order, cos_phi) -> Assignment:
    o = np.asarray(order)[None, :]
    imb, ctm, U = _objective(z, c, o)
    return Assignment(tuple(int(i) for i in order), float(imb[0]), math.degrees(math.atan2(U[0].imag, U[0].real)),
                      float(ctm[0]) * cos_phi)


def _pick(imb: np.ndarray, ctm: np.ndarray, worst: bool, tol_kgm: float) -> int:
    """Index of the best (smallest imbalance; among those within ``tol_kgm`` plus round-off
    of it, the smallest CTM resultant) or of the worst (largest imbalance, largest CTM
    resultant among ties)."""
    scale = max(float(np.abs(imb).max()), 1e-300)
    tie = tol_kgm + 1e-9 * scale
    if worst:
        cand = np.flatnonzero(imb >= imb.max() - tie)
        return int(cand[np.argmax(ctm[cand])])
    cand = np.flatnonzero(imb <= imb.min() + tie)
    return int(cand[np.argmin(ctm[cand])])


def _normalise(order) -> tuple[int, ...]:
    """The same assignment turned about the hub so that blade 0 sits at position 0 (a
    rotation of the whole rotor does not change any resultant's magnitude)."""
    order = list(order)
    i = order.index(0)
    return tuple(order[i:] + order[:i])


def _local_search(z, c, start, worst: bool, tol_kgm: float) -> tuple[tuple[int, ...], int]:
    """Steepest pairwise-swap descent (ascent for the worst) from ``start``: each step takes
    the best of the current order and all its single swaps (:func:`_pick`), until the
    current order is the best of its neighbourhood."""
    order = np.array(start)
    n = len(order)
    pairs = np.array([(a, b) for a in range(n) for b in range(a + 1, n)])
    rows = np.arange(1, len(pairs) + 1)
    evaluated = 0
    for _ in range(50 * n * n):  # a safeguard; descent ends long before
        cand = np.repeat(order[None, :], len(pairs) + 1, axis=0)
        cand[rows, pairs[:, 0]], cand[rows, pairs[:, 1]] = order[pairs[:, 1]], order[pairs[:, 0]]
        imb, ctm, _ = _objective(z, c, cand)
        evaluated += len(cand)
        k = _pick(imb, ctm, worst, tol_kgm)
        if k == 0:
            break
        order = cand[k]
    return tuple(int(i) for i in order), evaluated


def match_blades(vectors, ctms, *, precone_deg: float = 0.0, exhaustive_up_to: int = 8, starts: int = 12,
                 seed: int = 0, imbalance_tolerance_kgm: float = 0.0) -> MatchResult:
    """Assign N blades to N equally spaced hub positions (clocking 360°/N·i about k).

    vectors : (N, 3) static moment vectors m·c⊥ of the blades in their hub frames, kg·m
    ctms : (N,) CTM of each blade at the operating point, N·m
    Primary objective: the smallest resultant static imbalance |Σ R(θ_i) v_σ(i)|; secondary
    (among assignments within ``imbalance_tolerance_kgm`` of it): the smallest in-plane
    resultant of the CTMs. N ≤ ``exhaustive_up_to``: all (N−1)! assignments with blade 1 at
    position 1; beyond: steepest pairwise-swap search from ``starts`` seeded starts.
    Also returns the worst assignment (largest imbalance), found the same way.
    """
    V = np.asarray(vectors, dtype=float).reshape(-1, 3)
    n = len(V)
    if n < 2:
        raise ValueError("matching needs at least two blades")
    _, u1, u2 = _plane_basis(precone_deg)
    z = V @ u1 + 1j * (V @ u2)
    c = np.asarray(ctms, dtype=float).reshape(n).astype(complex)
    cos_phi = math.cos(math.radians(precone_deg))
    tol = float(imbalance_tolerance_kgm)
    if n <= exhaustive_up_to:
        rest = np.array(list(itertools.permutations(range(1, n))), dtype=np.int64).reshape(-1, n - 1)
        orders = np.hstack([np.zeros((len(rest), 1), dtype=np.int64), rest])
        imb, ctm, _ = _objective(z, c, orders)
        b, w = _pick(imb, ctm, False, tol), _pick(imb, ctm, True, tol)
        return MatchResult(_assignment(z, c, orders[b], cos_phi), _assignment(z, c, orders[w], cos_phi),
                           f"exhaustive: all {len(orders)} assignments with blade 1 at position 1", len(orders))
    rng = np.random.default_rng(seed)
    start_list = [tuple(range(n))] + [tuple(int(i) for i in rng.permutation(n)) for _ in range(max(starts - 1, 0))]
    evaluated = 0
    found = {False: [], True: []}
    for worst in (False, True):
        for s in start_list:
            order, ev = _local_search(z, c, s, worst, tol)
            evaluated += ev
            found[worst].append(_normalise(order))
    res = {}
    for worst in (False, True):
        orders = np.array(sorted(set(found[worst])), dtype=np.int64)
        imb, ctm, _ = _objective(z, c, orders)
        res[worst] = _assignment(z, c, orders[_pick(imb, ctm, worst, tol)], cos_phi)
    return MatchResult(res[False], res[True], f"pairwise-swap local search from {len(start_list)} seeded starts "
                                              f"(seed {seed}); not proven optimal", evaluated)


def match_set(blades: list[SetBlade], *, rpm: float | None = None, imbalance_tolerance_kgm: float = 0.0,
              exhaustive_up_to: int = 8, seed: int = 0) -> tuple[MatchResult, float, list[str]]:
    """Match a set of blades read from their reports; returns (result, rpm used, warnings)."""
    if len(blades) < 2:
        raise InputError(blades[0].source if blades else "match", "matching needs the reports of at least two blades")
    warnings = []
    pre = blades[0].precone_deg
    for b in blades[1:]:
        if abs(b.precone_deg - pre) > 1e-9:
            raise InputError(b.source, f"precone {b.precone_deg:g}° differs from {pre:g}° of {blades[0].source}; "
                                       "the blades of one hub share the hub frame")
    for b in blades:
        if abs(np.linalg.norm(b.moment_vector) - b.static_moment_kgm) > 1e-6 * max(b.static_moment_kgm, 1e-9):
            warnings.append(f"{b.source}: static_moment_kgm {b.static_moment_kgm:.6g} disagrees with mass_kg·|cg⊥| "
                            f"{np.linalg.norm(b.moment_vector):.6g}; the vector from mass and CG is used")
    rpms = {b.rpm for b in blades}
    if rpm is None:
        rpm = blades[0].rpm
        if len(rpms) > 1:
            warnings.append(f"the reports' first operating points are at different speeds ({', '.join(f'{r:g}' for r in sorted(rpms))} rpm); "
                            f"the CTMs are compared as reported and the imbalance force is given at {rpm:g} rpm")
    elif any(abs(r - rpm) > 1e-9 for r in rpms):
        warnings.append(f"CTMs and radial pulls are the reports' own (at {', '.join(f'{r:g}' for r in sorted(rpms))} rpm); "
                        f"only the imbalance force is at {rpm:g} rpm")
    result = match_blades([b.moment_vector for b in blades], [b.ctm_Nm for b in blades], precone_deg=pre,
                          exhaustive_up_to=exhaustive_up_to, seed=seed, imbalance_tolerance_kgm=imbalance_tolerance_kgm)
    return result, float(rpm), warnings


def _assignment_section(a: Assignment, blades: list[SetBlade], omega: float) -> dict:
    n = len(a.order)
    out = {
        "positions": [
            {"position": i + 1, "clocking_deg": 360.0 * i / n, "blade": j + 1, "name": blades[j].name,
             "report": blades[j].source, "ctm_Nm": blades[j].ctm_Nm}
            for i, j in enumerate(a.order)
        ],
        "imbalance_kgm": a.imbalance_kgm,
        "imbalance_force_N": a.imbalance_kgm * omega**2,
        "imbalance_direction_deg": a.imbalance_direction_deg,
        "ctm_resultant_Nm": a.ctm_resultant_Nm,
    }
    if n % 2 == 0:
        out["opposite_ctm_differences_Nm"] = [
            blades[a.order[i]].ctm_Nm - blades[a.order[i + n // 2]].ctm_Nm for i in range(n // 2)
        ]
    return out


def match_section(result: MatchResult, blades: list[SetBlade], rpm: float, warnings=()) -> dict:
    """The ``match`` key of the report."""
    omega = rpm_to_rad_s(rpm)
    ctm = [b.ctm_Nm for b in blades]
    n = len(blades)
    return {
        "blades": [
            {"blade": i + 1, "name": b.name, "report": b.source, "mass_kg": b.mass_kg, "cg_m": b.cg_m,
             "static_moment_kgm": b.static_moment_kgm, "static_moment_vector_kgm": b.moment_vector,
             "ctm_Nm": b.ctm_Nm, "radial_pull_N": b.radial_pull_N, "rpm": b.rpm}
            for i, b in enumerate(blades)
        ],
        "positions": n,
        "clocking_deg": [360.0 * i / n for i in range(n)],
        "rpm": rpm,
        "objective": "smallest resultant static imbalance |sum_i R(clocking_i) m c_perp| (kg·m); then the smallest "
                     "in-plane resultant of the CTMs about the pitch axes (N·m)",
        "method": result.method,
        "assignments_evaluated": result.evaluated,
        "best": _assignment_section(result.best, blades, omega),
        "worst": _assignment_section(result.worst, blades, omega),
        "ctm_spread_Nm": max(ctm) - min(ctm),
        "radial_pull_spread_N": max(b.radial_pull_N for b in blades) - min(b.radial_pull_N for b in blades),
        "mass_spread_kg": max(b.mass_kg for b in blades) - min(b.mass_kg for b in blades),
        "static_moment_spread_kgm": max(b.static_moment_kgm for b in blades) - min(b.static_moment_kgm for b in blades),
        "imbalance_force_note": "equivalent rotating force at rpm: imbalance × (2π·rpm/60)²",
        "warnings": list(warnings),
    }
