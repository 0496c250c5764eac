"""Welding: merge the vertices of a triangle surface that lie within a distance of each other.

CAD programs export STL facet by facet, computing every facet's corners on their own, so one
corner of the solid arrives as several copies that differ by float noise: ``0.0`` on one facet
and ``-5e-17`` or ``2e-33`` on the next, or copies a few units in the last place apart. A
bit-exact merge leaves those copies apart and the surface open along every edge. :func:`weld`
merges copies by *distance*, with a tolerance relative to the size of the model (by default
:data:`DEFAULT_REL_TOL` of the bounding-box diagonal) — a count of float steps would not do,
since near zero a step is tiny (``2e-33`` and ``0.0`` are ~10^300 steps apart).

How points are grouped (deterministic, no chain merging): points are visited in order of first
occurrence; each point not yet taken becomes a representative and takes every point not yet
taken within ``tol`` of it (scipy's ``cKDTree.query_pairs``). Every vertex therefore moves by at
most ``tol``, onto a point of the input. A chain of points each within ``tol`` of the next but
longer than ``tol`` overall is *not* collapsed into one point: it is cut into several vertices
(which can leave edges between ``tol`` and ``2 tol`` long; float noise is many orders of
magnitude below ``tol``, so CAD copies always form tight groups). Points of different ``part``
labels (bodies of different materials) are never merged. Faces left with fewer than three
distinct vertices are dropped and reported.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import InputError

#: default weld distance, relative to the bounding-box diagonal of the vertices
DEFAULT_REL_TOL = 1e-6


@dataclass(frozen=True)
class WeldResult:
    """A welded triangle surface (the mesh's unit throughout).

    vertices : (p, 3) float64, one per group of merged points (the group's representative,
               a point of the input), in order of first occurrence
    faces    : (q, 3) int64 into ``vertices``; the input faces minus the dropped ones, in order
    merged   : number of input vertices merged into another one (n - p)
    tol      : the weld distance used
    dropped  : (k,) int64, indices of the input faces dropped because they collapsed to
               fewer than three distinct vertices
    index    : (n,) int64, the output vertex of every input vertex
    part     : (p,) int64 part label of every output vertex, or None when none was given
    """

    vertices: np.ndarray
    faces: np.ndarray
    merged: int
    tol: float
    dropped: np.ndarray
    index: np.ndarray
    part: np.ndarray | None = None


def weld(vertices: np.ndarray, faces: np.ndarray, tol: float | None = None,
         part: np.ndarray | None = None) -> WeldResult:
    """Merge the vertices of a triangle surface closer than ``tol`` to each other.

    vertices : (n, 3) float, finite, any length unit;  faces : (m, 3) int into ``vertices``;
    tol : weld distance in the mesh's unit, default :data:`DEFAULT_REL_TOL` times the
    bounding-box diagonal (``0`` merges exact copies only, ``-0.0`` and ``0.0`` alike);
    part : (n,) int, optional — vertices with different labels are never merged.

    >>> v = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0],      # facet 1
    ...               [-5e-17, 2e-33, 0], [0, 1, 0], [1, 1e-16, 0]])  # facet 2, noisy copies
    >>> w = weld(v, np.array([[0, 1, 2], [3, 5, 4]]))
    >>> w.faces.tolist(), w.merged
    ([[0, 1, 2], [0, 1, 2]], 3)
    """
    v = np.asarray(vertices, dtype=np.float64)
    f = np.asarray(faces, dtype=np.int64)
    if v.ndim != 2 or v.shape[1] != 3:
        raise InputError("vertices", f"expected an (n, 3) array of coordinates, got shape {v.shape}")
    if f.ndim != 2 or f.shape[1] != 3:
        raise InputError("faces", f"expected an (m, 3) array of vertex indices, got shape {f.shape}")
    if len(f) and (f.min() < 0 or f.max() >= len(v)):
        raise InputError("faces", f"vertex indices must lie in 0..{len(v) - 1}")
    if not np.isfinite(v).all():
        raise InputError("vertices", "coordinates must be finite numbers")
    labels = None
    if part is not None:
        labels = np.asarray(part).reshape(-1)
        if len(labels) != len(v):
            raise InputError("part", f"expected one label per vertex ({len(v)}), got {len(labels)}")
        labels = labels.astype(np.int64)
    if tol is None:
        diag = float(np.linalg.norm(np.ptp(v, axis=0))) if len(v) else 0.0
        tol = DEFAULT_REL_TOL * diag
    tol = float(tol)
    if not np.isfinite(tol) or tol < 0:
        raise InputError("tol", f"expected a finite distance >= 0, got {tol!r}")
    n = len(v)
    if n == 0:
        z = np.zeros(0, np.int64)
        return WeldResult(v.reshape(0, 3), f.reshape(0, 3), 0, tol, z, z, None if labels is None else z)

    # 1. exact copies (after -0.0 -> 0.0), grouped by a sort: cheap, and it keeps the
    #    distance search below free of piles of identical points
    vz = v + 0.0
    keys = [vz[:, 2], vz[:, 1], vz[:, 0]] + ([labels] if labels is not None else [])
    order = np.lexsort(keys)
    sv = vz[order]
    new = np.ones(n, bool)
    new[1:] = (sv[1:] != sv[:-1]).any(axis=1)
    if labels is not None:
        new[1:] |= labels[order][1:] != labels[order][:-1]
    group = np.cumsum(new) - 1
    first = order[new]  # first occurrence of each distinct point (lexsort is stable)
    rank = np.empty(len(first), np.int64)  # distinct points numbered in order of first occurrence
    rank[np.argsort(first, kind="stable")] = np.arange(len(first))
    distinct = np.empty(n, np.int64)
    distinct[order] = rank[group]
    uniq = np.sort(first)  # input index of each distinct point, in order of first occurrence

    # 2. distinct points within tol: greedy representatives in order of first occurrence
    rep = np.arange(len(uniq), dtype=np.int64)
    if tol > 0 and len(uniq) > 1:
        from scipy.spatial import cKDTree

        pts = vz[uniq]
        tree = cKDTree(pts, balanced_tree=False, compact_nodes=False)  # quicker to build, same answers
        pairs = tree.query_pairs(tol, output_type="ndarray").astype(np.int64)
        if labels is not None and len(pairs):
            lab = labels[uniq]
            pairs = pairs[lab[pairs[:, 0]] == lab[pairs[:, 1]]]
        if len(pairs):
            pairs = pairs[np.lexsort((pairs[:, 1], pairs[:, 0]))]  # query_pairs gives i < j
            rep = _greedy(pairs, len(uniq))
    reps = np.flatnonzero(rep == np.arange(len(rep)))
    out_of_rep = np.full(len(rep), -1, np.int64)
    out_of_rep[reps] = np.arange(len(reps))
    index = out_of_rep[rep][distinct]

    # 3. faces through the new indices; drop those left with a repeated vertex
    nf = index[f] if len(f) else f.reshape(0, 3)
    collapsed = (nf[:, 0] == nf[:, 1]) | (nf[:, 1] == nf[:, 2]) | (nf[:, 0] == nf[:, 2])
    keep_src = uniq[reps]
    return WeldResult(v[keep_src], nf[~collapsed], n - len(reps), tol, np.flatnonzero(collapsed).astype(np.int64),
                      index, None if labels is None else labels[keep_src])


def _greedy(pairs: np.ndarray, n: int) -> np.ndarray:
    """Representative of each of n points: visited in index order, a point not yet taken is
    its own representative and takes every point not yet taken among its partners.
    ``pairs`` (k, 2) int64, i < j in every row, rows sorted by (i, j)."""
    return _kernel()(pairs, n)


_KERNELS: dict = {}


def _kernel():
    """The greedy grouping loop (numba; compiled once per process, cached on disk)."""
    if "greedy" not in _KERNELS:
        import numba

        @numba.njit(cache=True)
        def greedy(pairs, n):
            rep = np.full(n, -1, np.int64)
            k = 0
            for i in range(n):
                if rep[i] == -1:
                    rep[i] = i
                while k < pairs.shape[0] and pairs[k, 0] == i:
                    j = pairs[k, 1]
                    if rep[i] == i and rep[j] == -1:
                        rep[j] = i
                    k += 1
            return rep

        _KERNELS["greedy"] = greedy
    return _KERNELS["greedy"]
