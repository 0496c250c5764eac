"""Field resolution: a coarser copy of a blade surface for the per-element fields.

Mass, tensors and loads always come from the full surface (exact surface integrals); the
element *fields* (where the CTM and the pull come from, hot spots, renders) only need a
faithful picture, and filling a 240 000-face scan with tetrahedra while preserving every
facet is slow (TetGen ``pYQ``: ~115 s measured on the 240 k-face demo blade, 2 cores). So
the fields are computed on a simplified copy of the surface, meshed separately.

:func:`field_surface` returns that copy: closed, 2-manifold, consistently and outward wound,
one piece per piece of the input, not self-intersecting, within a set volume change. What makes TetGen fast on the
copy is the *shape* of its triangles, not only their number: quadric edge collapse (the usual
simplifier) keeps the surface very close (moments within ~1e-4) but leaves long span-wise
needles on a blade, and TetGen's boundary recovery and mesh improvement then take 10–30 s for
20 000 faces. VTK's progressive decimation (``vtkDecimatePro``, topology preserved, no
splitting) keeps the triangles rounder; its copies fill in well under a second (measured,
``scripts/bench.py``). Every copy is checked here; one that fails a check is replaced by the
next method (quadric, then the input unchanged), so the result is always a valid surface.
"""

from __future__ import annotations

import numpy as np

from .geometry import enclosed_volume as signed_volume  # the one signed-volume formula

#: largest relative volume change accepted for a field copy (common practice, no source)
MAX_VOLUME_CHANGE = 0.02


def surface_problems(vertices: np.ndarray, faces: np.ndarray) -> list[str]:
    """What keeps a triangle surface from being a closed, consistently wound 2-manifold.

    vertices : (n, 3) float;  faces : (m, 3) int.  Returns an empty list when every
    undirected edge has exactly two faces using it in opposite directions, no face is
    degenerate or repeated, and the enclosed volume is positive (outward normals).

    >>> import trimesh
    >>> b = trimesh.creation.box()
    >>> surface_problems(b.vertices, b.faces)
    []
    >>> surface_problems(b.vertices, b.faces[1:])
    ['3 boundary or non-manifold edges']
    """
    v = np.asarray(vertices, dtype=float)
    f = np.asarray(faces, dtype=np.int64)
    out = []
    if f.ndim != 2 or f.shape[1] != 3 or len(f) < 4:
        return ["fewer than four triangles"]
    if f.min() < 0 or f.max() >= len(v) or not np.isfinite(v).all():
        return ["face indices out of range or non-finite vertices"]
    if ((f[:, 0] == f[:, 1]) | (f[:, 1] == f[:, 2]) | (f[:, 0] == f[:, 2])).any():
        out.append("faces with a repeated vertex")
    tri = v[f]
    area2 = np.linalg.norm(np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0]), axis=1)
    if (area2 <= 1e-14 * max(float(np.ptp(v, axis=0).max()), 1e-300) ** 2).any():
        out.append("zero-area faces")
    if len(np.unique(np.sort(f, axis=1), axis=0)) != len(f):
        out.append("repeated faces")
    directed = np.concatenate([f[:, [0, 1]], f[:, [1, 2]], f[:, [2, 0]]])
    und = np.sort(directed, axis=1)
    _, count = np.unique(und, axis=0, return_counts=True)
    bad = int((count != 2).sum())
    if bad:
        out.append(f"{bad} boundary or non-manifold edges")
    elif len(np.unique(directed, axis=0)) != len(directed):
        out.append("inconsistent winding (an edge used twice in the same direction)")
    if not out and signed_volume(v, f) <= 0:
        out.append("inward (negative volume) winding")
    return out


def self_intersections(vertices: np.ndarray, faces: np.ndarray, limit: int = 10) -> np.ndarray:
    """Pairs of faces (up to ``limit``) that meet beyond their shared vertices; (k, 2) int,
    empty when none.

    The project's one self-intersection check, :func:`bladesolid.selfintersect.self_intersections`
    (crossing, touching, coplanar overlap, faces folded flat onto each other across an edge);
    a fold that is sharp but not flat is :func:`folded_edges`'s business.

    >>> import trimesh
    >>> a, b = trimesh.creation.box(), trimesh.creation.box()
    >>> _ = b.apply_translation([0.3, 0.2, 0.1])
    >>> m = trimesh.util.concatenate([a, b])
    >>> len(self_intersections(a.vertices, a.faces)), len(self_intersections(m.vertices, m.faces)) > 0
    (0, True)
    """
    from .selfintersect import self_intersections as check

    return check(vertices, faces, limit=limit).pairs


def folded_edges(vertices: np.ndarray, faces: np.ndarray, cos_limit: float = -0.999) -> int:
    """Number of edges whose two faces fold back onto each other (normals nearly opposite)."""
    v = np.asarray(vertices, dtype=float)
    f = np.asarray(faces, dtype=np.int64)
    n = np.cross(v[f[:, 1]] - v[f[:, 0]], v[f[:, 2]] - v[f[:, 0]])
    n /= np.maximum(np.linalg.norm(n, axis=1, keepdims=True), 1e-300)
    e = np.sort(np.concatenate([f[:, [0, 1]], f[:, [1, 2]], f[:, [2, 0]]]), axis=1)
    owner = np.tile(np.arange(len(f)), 3)
    order = np.lexsort((e[:, 1], e[:, 0]))
    e, owner = e[order], owner[order]
    same = (e[1:] == e[:-1]).all(axis=1)
    a, b = owner[:-1][same], owner[1:][same]
    return int((np.einsum("ij,ij->i", n[a], n[b]) < cos_limit).sum())


def pieces(faces: np.ndarray, n_vertices: int) -> int:
    """Number of edge-connected pieces of a triangle surface."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    f = np.asarray(faces, dtype=np.int64)
    rows = np.repeat(f[:, 0], 2)
    cols = f[:, 1:].ravel()
    g = coo_matrix((np.ones(len(rows)), (rows, cols)), shape=(n_vertices, n_vertices))
    used = np.zeros(n_vertices, bool)
    used[f.ravel()] = True
    n, labels = connected_components(g, directed=False)
    return int(len(np.unique(labels[used])))


def _decimate_pro(v, f, target):
    import pyvista as pv

    mesh = pv.PolyData(v, np.hstack([np.full((len(f), 1), 3), f]).ravel())
    out = mesh.decimate_pro(1.0 - target / len(f), feature_angle=45.0, preserve_topology=True, splitting=False,
                            boundary_vertex_deletion=False).triangulate()
    return np.asarray(out.points, dtype=float), np.asarray(out.faces.reshape(-1, 4)[:, 1:], dtype=np.int64)


def _quadric(v, f, target):
    import fast_simplification

    vv, ff = fast_simplification.simplify(v, f, target_reduction=1.0 - target / len(f), agg=1)
    return np.asarray(vv, dtype=float), np.asarray(ff, dtype=np.int64)


METHODS = {"decimate_pro": _decimate_pro, "quadric": _quadric}


def field_surface(vertices: np.ndarray, faces: np.ndarray, target_faces: int, *,
                  max_volume_change: float = MAX_VOLUME_CHANGE,
                  methods=(("decimate_pro", 1.0), ("decimate_pro", 1.5), ("decimate_pro", 2.0), ("quadric", 1.0)),
                  report: dict | None = None) -> tuple[np.ndarray, np.ndarray]:
    """A simplified copy of a closed surface with about ``target_faces`` triangles.

    vertices : (n, 3) float (any unit, returned in the same);  faces : (m, 3) int, closed,
    outward. Returns ``(v (p, 3), f (q, 3) int64)``: closed, 2-manifold, outward wound, the
    same number of pieces, no two faces crossing, volume within ``max_volume_change``
    (relative) of the input. ``methods`` are tried in turn as (name, factor on the target):
    progressive decimation at the target, then at 1.5 and 2 times it (a little less
    simplification often avoids a fold at a thin edge), then quadric edge collapse. The input
    itself is returned when it has at most ``target_faces`` triangles or when no method gives
    a copy that passes every check. ``report`` (a dict), when given, is filled
    with the method used, the face count, the relative volume change and the rejections.

    >>> import trimesh
    >>> s = trimesh.creation.icosphere(subdivisions=4)           # 5120 faces
    >>> v, f = field_surface(s.vertices, s.faces, 1000)
    >>> len(f) <= 1100, surface_problems(v, f), bool(abs(signed_volume(v, f) / s.volume - 1) < 0.02)
    (True, [], True)
    """
    v0 = np.ascontiguousarray(vertices, dtype=float)
    f0 = np.ascontiguousarray(faces, dtype=np.int64)
    info = report if report is not None else {}
    info.update(method="input", faces=len(f0), volume_change=0.0, rejected=[])
    if len(f0) <= target_faces:
        return v0, f0
    vol0 = signed_volume(v0, f0)
    n_pieces = pieces(f0, len(v0))
    for name, factor in methods:
        target = int(round(target_faces * factor))
        if target >= len(f0):
            continue
        label = f"{name} to {target} faces"
        try:
            v, f = METHODS[name](v0, f0, target)
        except Exception as exc:  # a simplifier that gives up is just not used
            info["rejected"].append(f"{label}: {type(exc).__name__}: {exc}")
            continue
        problems = surface_problems(v, f)
        if not problems and pieces(f, len(v)) != n_pieces:
            problems.append("the number of pieces changed")
        if not problems and folded_edges(v, f):
            problems.append(f"{folded_edges(v, f)} folded edges")
        if not problems and len(self_intersections(v, f, limit=1)):
            problems.append("self-intersecting")
        change = signed_volume(v, f) / vol0 - 1.0 if not problems else float("nan")
        if not problems and abs(change) > max_volume_change:
            problems.append(f"volume changed by {change:+.2%}")
        if problems:
            info["rejected"].append(f"{label}: {'; '.join(problems)}")
            continue
        # drop vertices no face uses (the simplifiers may leave some)
        used = np.unique(f)
        remap = np.full(len(v), -1, dtype=np.int64)
        remap[used] = np.arange(len(used))
        info.update(method=name, faces=len(f), volume_change=float(change))
        return v[used], remap[f]
    return v0, f0
