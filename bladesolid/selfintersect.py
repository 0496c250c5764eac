"""Self-intersection of a triangle surface: which faces cross, touch or overlap each other.

A closed surface that crosses itself does not bound a solid: its divergence-theorem integral
counts some regions twice or with a negative sign (impossible masses and tensors), and a
tetrahedraliser that preserves the facets refuses it. :func:`self_intersections` finds every
pair of faces whose intersection is more than the surface's own connectivity implies:

* faces sharing no vertex: any common point (crossing, touching, coplanar overlap);
* faces sharing one vertex: any common point besides that vertex (a fan that folds over);
* faces sharing an edge: lying in one plane on the same side of the edge (folded flat onto
  each other — their overlap has area);
* faces sharing all three vertices (a repeated face).

Vertices are identified by index, so weld the surface first (:func:`bladesolid.weld.weld`);
two unwelded copies of one point are two vertices that touch. Run it on one closed shell at a
time: shells of a multi-body file may touch each other legitimately.

Robustness: "touching" and "in one plane" are decided with a distance tolerance ``tol`` in
the mesh's unit, by default :data:`DEFAULT_REL_TOL` of the bounding-box diagonal — a point
within ``tol`` of a plane is taken to lie in it, a point within ``tol`` of a triangle is taken
to touch it. Faces of zero area (below 1e-12 of the squared diagonal; the loader refuses them)
are not tested and are counted in ``SelfIntersections.degenerate``.

Method: every common point of two closed triangles lies on an edge of one of them that meets
the other (the end points of their common segment, or the corners of their common polygon
when coplanar, are such points). So a pair is decided by clipping edges against the other
triangle — a segment against a plane, then against the three in-plane edge half-planes
(Liang–Barsky), coplanar segments included — after the plane-side rejection of Möller (1997,
"A fast triangle-triangle intersection test", J. Graphics Tools 2(2)). Candidate pairs come
from a uniform grid of the padded face bounding boxes (cell edge: the median face size; a
crowded cell gets a finer grid of its own); each pair is tested once, in the cell holding the
low corner of the two boxes' overlap. numba kernels (``cache=True``, in
``bladesolid/_selfintersect_kernels.py``); the pair tests run on numba's number of threads
(the kernel releases the GIL), over interleaved groups of cells.
Measured in ``scripts/bench.py`` (section 6) against the closed-surface integral.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import InputError

#: default distance tolerance, relative to the bounding-box diagonal of the surface
DEFAULT_REL_TOL = 1e-9
#: default number of intersecting pairs returned (all are counted)
DEFAULT_LIMIT = 100
#: faces with twice their area below this times the squared diagonal are not tested
DEGENERATE_REL = 2e-12


@dataclass(frozen=True)
class SelfIntersections:
    """Where a triangle surface meets itself (mesh unit throughout).

    count      : number of intersecting face pairs (all of them)
    pairs      : (k, 2) int64, k = min(count, limit); face indices i < j, rows sorted
    point      : (3,) float, a point of the intersection near the middle of the region
                 (NaN when count is 0)
    box_min, box_max : (3,) float, bounding box of the intersection (NaN when count is 0)
    tol        : distance tolerance used
    degenerate : number of zero-area faces that were not tested
    """

    count: int
    pairs: np.ndarray
    point: np.ndarray
    box_min: np.ndarray
    box_max: np.ndarray
    tol: float
    degenerate: int = 0

    def describe(self, unit: str = "") -> str:
        """One line for a message, e.g. ``'3 self-intersecting face pairs near (1, 2, 3) mm,
        within box (0, 1, 2) to (2, 3, 4) mm'``; ``'no self-intersecting face pairs'``."""
        if not self.count:
            return "no self-intersecting face pairs"
        u = f" {unit}" if unit else ""
        what = "face pair" if self.count == 1 else "face pairs"
        return (f"{self.count} self-intersecting {what} near {_fmt3(self.point)}{u}, "
                f"within box {_fmt3(self.box_min)} to {_fmt3(self.box_max)}{u}")


def _fmt3(p) -> str:
    return "(" + ", ".join(f"{x:.4g}" for x in np.asarray(p, dtype=float)) + ")"


def self_intersections(vertices: np.ndarray, faces: np.ndarray, *, tol: float | None = None,
                       rel_tol: float = DEFAULT_REL_TOL, limit: int = DEFAULT_LIMIT) -> SelfIntersections:
    """Face pairs of a triangle surface that intersect each other beyond their shared vertices.

    vertices : (n, 3) float, any length unit (the results are in the same unit);
    faces : (m, 3) int, indices into ``vertices`` (winding does not matter; the surface need
    not be closed). ``tol`` : distance tolerance in the mesh's unit, default ``rel_tol`` times
    the bounding-box diagonal of the vertices that faces use. ``limit`` : how many pairs to
    return (all are counted; which ones are kept when there are more is deterministic).

    >>> import trimesh
    >>> box = trimesh.creation.box()
    >>> self_intersections(box.vertices, box.faces).count
    0
    >>> other = box.copy()
    >>> _ = other.apply_translation([0.5, 0.25, 0.125])
    >>> both = trimesh.util.concatenate([box, other])
    >>> r = self_intersections(both.vertices, both.faces)
    >>> r.count > 0, r.box_min.round(3).tolist(), r.box_max.round(3).tolist()
    (True, [0.0, -0.25, -0.375], [0.5, 0.5, 0.5])
    """
    v = np.asarray(vertices, dtype=np.float64)
    f = np.ascontiguousarray(faces, dtype=np.int64)
    if v.ndim != 2 or v.shape[1] != 3:
        raise InputError("vertices", f"expected an (n, 3) array of coordinates, got shape {v.shape}")
    if f.ndim != 2 or f.shape[1] != 3:
        raise InputError("faces", f"expected an (m, 3) array of vertex indices, got shape {f.shape}")
    if len(f) and (f.min() < 0 or f.max() >= len(v)):
        raise InputError("faces", f"vertex indices must lie in 0..{len(v) - 1}")
    limit = max(int(limit), 0)
    empty = SelfIntersections(0, np.zeros((0, 2), np.int64), np.full(3, np.nan), np.full(3, np.nan),
                              np.full(3, np.nan), 0.0 if tol is None else float(tol), 0)
    if len(f) < 2:
        return empty
    mask = np.zeros(len(v), np.bool_)
    mask[f.ravel()] = True
    used = v[mask]
    if not np.isfinite(used).all():
        raise InputError("vertices", "coordinates must be finite numbers")
    lo_all, hi_all = used.min(axis=0), used.max(axis=0)
    diag = float(np.linalg.norm(hi_all - lo_all))
    eps = float(rel_tol) * diag if tol is None else float(tol)
    if not np.isfinite(eps) or eps < 0:
        raise InputError("tol" if tol is not None else "rel_tol", f"expected a finite distance >= 0, got {eps!r}")
    centre = 0.5 * (lo_all + hi_all)
    vc = np.ascontiguousarray(v - centre)  # coordinates about the centre: smaller round-off

    k = _kernels()
    geo = np.empty((len(f), 12))
    lo = np.empty((len(f), 3))
    hi = np.empty((len(f), 3))
    degenerate = np.empty(len(f), np.bool_)
    k["prepare"](vc, f, eps, DEGENERATE_REL * diag * diag, geo, lo, hi, degenerate)

    origin, cell, dims, starts, ends, cell_keys, members = _grid(lo, hi, degenerate, k)

    nchunk = 64
    cap = max(limit, 1)
    counts = np.zeros(nchunk, np.int64)
    pairs = np.zeros((nchunk, cap, 2), np.int64)
    centres = np.zeros((nchunk, cap, 3))
    boxes = np.empty((nchunk, 6))
    boxes[:, :3] = np.inf
    boxes[:, 3:] = -np.inf
    sums = np.zeros((nchunk, 3))
    def run(rows):
        for c in rows:
            k["pairs"](c, vc, f, geo, lo, hi, origin, cell, dims, starts, ends, cell_keys, members, eps, counts,
                       pairs, centres, boxes, sums)

    threads = min(_threads(), nchunk)
    if threads > 1 and len(starts) > 1000:
        from concurrent.futures import ThreadPoolExecutor

        with ThreadPoolExecutor(max_workers=threads) as pool:
            list(pool.map(run, [range(t, nchunk, threads) for t in range(threads)]))
    else:
        run(range(nchunk))
    count = int(counts.sum())
    n_deg = int(degenerate.sum())
    if not count:
        return SelfIntersections(0, empty.pairs, empty.point, empty.box_min, empty.box_max, eps, n_deg)
    kept = np.minimum(counts, cap)
    got = np.concatenate([pairs[c, :kept[c]] for c in range(nchunk)])
    got_c = np.concatenate([centres[c, :kept[c]] for c in range(nchunk)])
    mean = sums.sum(axis=0) / count
    point = got_c[int(np.argmin(np.linalg.norm(got_c - mean, axis=1)))] + centre
    order = np.lexsort((got[:, 1], got[:, 0]))[:limit]
    return SelfIntersections(count, got[order], point, boxes[:, :3].min(axis=0) + centre,
                             boxes[:, 3:].max(axis=0) + centre, eps, n_deg)


# --------------------------------------------------------------------------------------
# broad phase: a uniform grid, sorted by cell
# --------------------------------------------------------------------------------------

#: at most this many (cell, face) entries per face on average before the cells are enlarged
_ENTRIES_PER_FACE = 16


def _grid(lo, hi, degenerate, k):
    """Cells of the face boxes, as runs of face indices grouped by cell.

    Returns ``(origin (3,), cell size, dims (3,) int64, starts, ends, cell keys, members)``:
    ``members[starts[g]:ends[g]]`` are the faces whose box reaches cell ``cell_keys[g]``
    (``x + dims[0] (y + dims[1] z)``), for the cells reached by two faces or more.
    The cell edge starts at the median largest box extent of the faces (a typical face spans
    one or two cells); it doubles while the faces would fill more than ``_ENTRIES_PER_FACE``
    cells each on average (a few very large faces among many small ones).
    """
    ok = np.flatnonzero(~degenerate)
    if not len(ok):
        z = np.zeros(0, np.int64)
        return np.zeros(3), 1.0, np.ones(3, np.int64), z, z, z, z
    origin = lo[ok].min(axis=0)
    top = hi[ok].max(axis=0)
    span = float(np.max(top - origin))
    sample = ok[:: max(1, len(ok) // 4096)]  # a fixed sample is enough for a typical size
    cell = max(float(np.median((hi[sample] - lo[sample]).max(axis=1))), span * 2.0**-20, 1e-300)
    c0 = np.empty(lo.shape, np.int64)
    c1 = np.empty(lo.shape, np.int64)
    per = np.empty(len(lo), np.int64)
    while True:
        dims = np.floor((top - origin) / cell).astype(np.int64) + 1
        k["ranges"](lo, hi, degenerate, origin, cell, dims, c0, c1, per)
        total = int(per.sum())
        if total <= _ENTRIES_PER_FACE * len(lo) + 1_000_000 or cell >= span:
            break
        cell *= 2.0
    offsets = np.zeros(len(lo) + 1, np.int64)
    np.cumsum(per, out=offsets[1:])
    keys = np.empty(total, np.int64)
    members = np.empty(total, np.int64)
    k["fill"](c0, c1, dims, offsets, keys, members)
    n_cells = int(np.prod(dims.astype(float)))
    if n_cells <= 4 * total + 1_000_000:  # counting sort over every cell of the grid
        first = np.zeros(n_cells + 1, np.int64)
        members = k["bucket"](keys, members, first)
        size = first[1:] - first[:-1]
        busy = np.flatnonzero(size >= 2)  # only cells holding two faces can hold a pair
        return origin, cell, dims, first[busy], first[busy + 1], busy.astype(np.int64), members
    order = np.argsort(keys, kind="stable")
    keys, members = keys[order], members[order]
    starts = np.flatnonzero(np.r_[True, keys[1:] != keys[:-1]])
    ends = np.r_[starts[1:], len(keys)]
    busy = (ends - starts) >= 2
    return origin, cell, dims, starts[busy], ends[busy], keys[starts[busy]], members


# --------------------------------------------------------------------------------------
# numba kernels (in their own module, imported on first use)
# --------------------------------------------------------------------------------------


def _kernels() -> dict:
    """The numba kernels (compiled on first use, cached on disk across processes)."""
    from . import _selfintersect_kernels as k

    return {"prepare": k.prepare, "ranges": k.ranges, "fill": k.fill, "bucket": k.bucket, "pairs": k.chunk_pairs}


def _threads() -> int:
    """Threads for the pair tests: numba's setting (``NUMBA_NUM_THREADS``, ``set_num_threads``)."""
    import numba

    return max(1, int(numba.get_num_threads()))
