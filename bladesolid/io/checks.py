"""Checks of a blade solid: arrays, faces, edges, shells, tetrahedra, bodies, size.

Every refusal is one :class:`~bladesolid.errors.InputError` naming the file and where the
problem lies (in the declared unit); things that were fixed or look odd but may be right are
appended to the caller's ``warnings``. See :mod:`bladesolid.io` for the order of the checks.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from ..geometry import orient_positive, tet_signed_volumes
from ..units import LENGTH_UNITS

__all__ = ["DEGENERATE_AREA_REL", "MAX_BODIES", "MAX_COORDINATE_M", "OVERLAP_REL", "PLAUSIBLE_LENGTH_M",
           "ZERO_TET_REL", "ZERO_VOLUME_REL", "check_arrays", "check_body_count", "check_degenerate", "check_edges",
           "check_overlaps", "components", "edge_table", "manifold_solid", "mend_hint", "merge_coincident", "merge_exact",
           "orient_tets", "plausibility_warning", "reindex", "tet_faces", "where"]

#: Most closed shells accepted in one file (a blade, a sheath, a few inserts).
MAX_BODIES = 100
#: Plausible overall length of a blade solid, metres (common practice, no source).
PLAUSIBLE_LENGTH_M = (0.02, 20.0)
#: Coordinates farther than this from the origin (metres) cannot be a blade.
MAX_COORDINATE_M = 1.0e6
#: A face is degenerate when its area is below this times the squared bounding-box diagonal.
DEGENERATE_AREA_REL = 1e-12
#: A shell has zero volume when |V| is below this times the cube of its bounding-box diagonal.
ZERO_VOLUME_REL = 1e-9
#: A tetrahedron has zero volume when |V| is below this times the cube of the mesh diagonal.
ZERO_TET_REL = 1e-16
#: Two bodies overlap when their common volume exceeds this fraction of the smaller one.
OVERLAP_REL = 1e-6


def check_body_count(source, labels: np.ndarray, what: str) -> int:
    """The number of bodies of per-element body ``labels`` (0..), refused above :data:`MAX_BODIES`."""
    count = int(labels.max()) + 1
    if count > MAX_BODIES:
        raise InputError(
            source,
            f"has {count} {what}, more than the {MAX_BODIES} accepted; "
            "a blade file holds the blade and a few parts (sheath, inserts)",
        )
    return count


def check_arrays(source, vertices, faces, unit):
    """No triangles, index range, finite coordinates, coordinate range."""
    vertices = np.asarray(vertices, dtype=np.float64)
    faces = np.asarray(faces, dtype=np.int64)
    if faces.ndim != 2 or faces.shape[1] != 3 or len(faces) == 0:
        raise InputError(source, "contains no triangles")
    n = len(vertices)
    if faces.min() < 0 or faces.max() >= n:
        bad = (faces < 0) | (faces >= n)
        raise InputError(
            source,
            f"{int(bad.any(axis=1).sum())} faces refer to vertices that do not exist "
            f"(indices must lie in 0..{n - 1})",
        )
    if not np.isfinite(vertices).all():
        nan = np.isnan(vertices).any(axis=1)
        inf = np.isinf(vertices).any(axis=1) & ~nan
        raise InputError(
            source,
            f"{int(nan.sum() + inf.sum())} vertices have non-finite coordinates "
            f"({int(nan.sum())} NaN, {int(inf.sum())} infinite); expected finite numbers",
        )
    reach = float(np.abs(vertices).max()) if n else 0.0
    if reach * LENGTH_UNITS[unit] > MAX_COORDINATE_M:
        raise InputError(
            source,
            f"coordinates reach {reach:.3g} {unit}, more than {MAX_COORDINATE_M / 1000:.0f} km "
            "from the origin; this cannot be a blade (a corrupt file, or the wrong length unit declared?)",
        )
    return vertices, faces


def merge_coincident(vertices: np.ndarray, faces: np.ndarray, part: np.ndarray | None = None):
    """Merge vertices with bit-identical coordinates (after ``-0.0 → 0.0``).

    vertices : (n, 3) float64, finite; faces : (m, 3) int64; part : (n,) int, optional —
    vertices of different parts are never merged.
    Returns (unique vertices in order of first occurrence, faces re-indexed).

    >>> v = np.array([[0., 0, 0], [1, 0, 0], [0, 1, 0], [1, 0, 0], [-0., 0, 0]])
    >>> merge_coincident(v, np.array([[0, 1, 2], [4, 3, 2]]))[1].tolist()
    [[0, 1, 2], [0, 1, 2]]
    """
    return merge_exact(vertices, faces, part)[:2]


def merge_exact(vertices: np.ndarray, faces: np.ndarray, part: np.ndarray | None = None):
    """:func:`merge_coincident`, also returning ``kept`` (p,) int64: the input index of each
    vertex kept (the first copy), so that per-vertex data follow (``part[kept]``)."""
    v = np.ascontiguousarray(vertices, dtype=np.float64) + 0.0  # + 0.0 turns -0.0 into 0.0
    if not len(v):
        return v.reshape(0, 3), faces, np.zeros(0, dtype=np.int64)
    bits = v.view(np.uint64)
    cols = [np.ascontiguousarray(bits[:, k]) for k in range(3)]
    if part is not None:
        cols.append(np.asarray(part, dtype=np.int64).view(np.uint64))
    h = np.zeros(len(v), dtype=np.uint64)
    for c in cols:  # splitmix64 finaliser over the three coordinates' bits
        h ^= c
        h ^= h >> np.uint64(30)
        h *= np.uint64(0xBF58476D1CE4E5B9)
        h ^= h >> np.uint64(27)
        h *= np.uint64(0x94D049BB133111EB)
        h ^= h >> np.uint64(31)
    order = np.argsort(h)

    def same_as_previous(order):
        s = [c[order] for c in cols]
        same = s[0][1:] == s[0][:-1]
        for sk in s[1:]:
            same &= sk[1:] == sk[:-1]
        return same

    same = same_as_previous(order)
    sh = h[order]
    if np.any((sh[1:] == sh[:-1]) & ~same):  # distinct points with one hash: sort exactly
        order = np.lexsort(cols[::-1])
        same = same_as_previous(order)
    new = np.empty(len(v), dtype=bool)
    new[0] = True
    new[1:] = ~same
    starts = np.flatnonzero(new)
    first = np.minimum.reduceat(order, starts)  # first occurrence of each point in the file
    rank = np.empty(len(first), dtype=np.int64)
    rank[np.argsort(first)] = np.arange(len(first))
    rep = np.empty(len(v), dtype=np.int64)
    rep[order] = rank[np.cumsum(new) - 1]
    kept = np.sort(first)
    return v[kept], rep[faces], kept


def check_degenerate(source, vertices, faces, unit):
    """Refuse faces with a repeated vertex or (relatively) zero area."""
    repeated = (
        (faces[:, 0] == faces[:, 1]) | (faces[:, 1] == faces[:, 2]) | (faces[:, 0] == faces[:, 2])
    )
    a, b, c = vertices[faces[:, 0]], vertices[faces[:, 1]], vertices[faces[:, 2]]
    area = 0.5 * np.linalg.norm(np.cross(b - a, c - a), axis=1)
    diag = float(np.linalg.norm(vertices.max(axis=0) - vertices.min(axis=0)))
    flat = (area <= DEGENERATE_AREA_REL * diag**2) & ~repeated
    bad = repeated | flat
    if bad.any():
        pts = vertices[faces[bad].ravel()]
        raise InputError(
            source,
            f"{int(bad.sum())} degenerate faces (zero area: {int(repeated.sum())} with a "
            f"repeated vertex, {int(flat.sum())} with collinear corners) {where(pts, unit)}; "
            "remove or repair them",
        )


def edge_table(faces: np.ndarray, n_vertices: int):
    """Group the 3m directed edges by their undirected edge.

    Returns (order, starts, counts, forward): ``order`` sorts the edge slots (slot ``3i+j``
    is edge j of face i: ``faces[i, j] → faces[i, (j+1)%3]``) so that slots of one edge are
    adjacent; ``starts``/``counts`` delimit each undirected edge; ``forward`` tells per slot
    whether the edge runs from the lower to the higher vertex index.
    """
    a = faces.ravel()
    b = faces[:, [1, 2, 0]].ravel()
    lo = np.minimum(a, b)
    hi = np.maximum(a, b)
    order, starts, counts = _runs(lo * np.int64(n_vertices) + hi)
    return order, starts, counts, a < b


def _runs(keys: np.ndarray):
    """Group equal rows of ``keys`` ((k,) or (k, c) int): ``(order, starts, counts)`` where
    ``order`` sorts the rows so that equal ones are adjacent and ``starts``/``counts`` delimit
    each run of equal rows along ``order``.

    >>> [a.tolist() for a in _runs(np.array([5, 3, 5, 1]))]
    [[3, 1, 0, 2], [0, 1, 2], [1, 1, 2]]
    """
    if keys.ndim == 1:
        order = np.argsort(keys)
        sk = keys[order]
        differs = sk[1:] != sk[:-1]
    else:
        order = np.lexsort(keys.T[::-1])
        sk = keys[order]
        differs = (sk[1:] != sk[:-1]).any(axis=1)
    starts = np.flatnonzero(np.concatenate([[True], differs])) if len(keys) else np.zeros(0, dtype=np.int64)
    return order, starts, np.diff(np.append(starts, len(order)))


def mend_hint(repaired: bool) -> str:
    """The end of a refusal of a damaged surface: how to mend it (naming the parameter
    ``repair=True``), or that the repair asked for could not."""
    if repaired:
        return "repair=True could not mend it; mend it in a CAD or scan tool"
    return "mend it with repair=True (or in a CAD or scan tool)"


def check_edges(source, vertices, faces, unit, what="surface", *, table=None, hint=""):
    """Refuse non-manifold, open and inconsistently wound surfaces.

    table : the :func:`edge_table` of ``faces`` when already made;  hint : appended to each
    refusal after a semicolon (e.g. :func:`mend_hint`).
    Returns the face pairs ``(u, v)`` across every edge, for the components.
    """
    order, starts, counts, forward = edge_table(faces, len(vertices)) if table is None else table
    tail = f"; {hint}" if hint else ""

    def edge_points(mask):
        slots = order[starts[mask]]
        f, j = slots // 3, slots % 3
        return np.concatenate([vertices[faces[f, j]], vertices[faces[f, (j + 1) % 3]]])

    many = counts > 2
    if many.any():
        raise InputError(
            source,
            f"non-manifold {what}: {int(many.sum())} edges are shared by more than two faces "
            f"{where(edge_points(many), unit)}; each edge of a closed solid joins exactly two{tail}",
        )
    single = counts == 1
    if single.any():
        raise InputError(
            source,
            f"open {what}: {int(single.sum())} boundary edges (holes) "
            f"{where(edge_points(single), unit)}; the solid must be closed (watertight){tail}",
        )
    s0, s1 = order[starts], order[starts + 1]
    same = forward[s0] == forward[s1]
    if same.any():
        raise InputError(
            source,
            f"inconsistent winding: {int(same.sum())} edges are traversed the same way by both "
            f"of their faces {where(edge_points(same), unit)}; some faces are flipped{tail}",
        )
    return s0 // 3, s1 // 3


def components(n: int, u: np.ndarray, v: np.ndarray) -> np.ndarray:
    """Connected components of n nodes joined by edges (u, v); labels 0.. by lowest node.

    Vectorised union-find: hook each root to the smallest neighbouring root, then jump
    pointers to full compression; repeat until every edge joins one root.

    >>> components(5, np.array([3, 1]), np.array([4, 0])).tolist()
    [0, 0, 1, 2, 2]
    """
    parent = np.arange(n)
    u = np.asarray(u, dtype=np.int64)
    v = np.asarray(v, dtype=np.int64)
    while len(u):
        pu, pv = parent[u], parent[v]
        live = pu != pv
        if not live.any():
            break
        u, v, pu, pv = u[live], v[live], pu[live], pv[live]
        np.minimum.at(parent, np.maximum(pu, pv), np.minimum(pu, pv))
        while True:
            grand = parent[parent]
            if np.array_equal(grand, parent):
                break
            parent = grand
    _, labels = np.unique(parent, return_inverse=True)
    return labels.reshape(-1)


def reindex(cells: np.ndarray, n: int | None = None):
    """(used vertex indices ascending, cells re-indexed into them); cells int, values < n.

    >>> [a.tolist() for a in reindex(np.array([[5, 2, 9]]))]
    [[2, 5, 9], [[1, 0, 2]]]
    """
    n = int(cells.max()) + 1 if n is None else n
    mask = np.zeros(n, dtype=bool)
    mask[cells] = True
    remap = np.cumsum(mask) - 1
    return np.flatnonzero(mask), remap[cells].astype(np.int64)


def _fmt3(p) -> str:
    return "(" + ", ".join(f"{x:.4g}" for x in p) + ")"


def where(points: np.ndarray, unit: str) -> str:
    """Where a set of points lies, in the declared unit: centroid and bounding box."""
    points = np.asarray(points, dtype=np.float64).reshape(-1, 3)
    lo, hi = points.min(axis=0), points.max(axis=0)
    if np.allclose(lo, hi):
        return f"at {_fmt3(lo)} {unit}"
    return f"around {_fmt3(points.mean(axis=0))} {unit} (box {_fmt3(lo)} to {_fmt3(hi)})"


def orient_tets(source, points, tets, unit, warnings):
    """Refuse zero-volume tetrahedra; reorder negative ones to positive orientation.

    Returns (tets (k, 4) positively oriented, their volumes (k,)).
    """
    diag = float(np.linalg.norm(points.max(axis=0) - points.min(axis=0)))
    s = np.sort(tets, axis=1)
    repeated = (s[:, 1:] == s[:, :-1]).any(axis=1)
    vol = tet_signed_volumes(points, tets)
    flat = (np.abs(vol) <= ZERO_TET_REL * diag**3) | repeated
    if flat.any():
        raise InputError(
            source,
            f"{int(flat.sum())} of {len(tets)} tetrahedra have zero volume (repeated or "
            f"coplanar nodes) {where(points[tets[flat].ravel()], unit)}; repair the mesh",
        )
    neg = vol < 0
    if neg.any():
        tets = orient_positive(points, tets, vol)
        if neg.all():
            warnings.append(
                f"all {len(tets)} tetrahedra had negative orientation (the opposite node-order "
                "convention); they were reordered"
            )
        else:
            warnings.append(
                f"{int(neg.sum())} of {len(tets)} tetrahedra had negative orientation and were "
                "reordered"
            )
    return tets, np.abs(vol)


_TET_FACES = np.array([[0, 2, 1], [0, 1, 3], [1, 2, 3], [0, 3, 2]])


def tet_faces(source, points, tets, unit):
    """Outward boundary triangles of positively oriented tetrahedra.

    Returns (boundary faces (b, 3), tet index of each boundary face (b,), tet pairs across
    interior faces (u, v)). Refuses faces shared by more than two tetrahedra and interior
    faces with both tetrahedra on the same side.
    """
    f = tets[:, _TET_FACES].reshape(-1, 3)
    s = np.sort(f, axis=1)
    n = np.int64(len(points))
    # one int64 key per face while it cannot overflow (n³ < 2⁶³), else the three indices
    order, starts, counts = _runs((s[:, 0] * n + s[:, 1]) * n + s[:, 2] if len(points) <= 2_000_000 else s)
    many = counts > 2
    if many.any():
        pts = points[f[order[starts[many]]].ravel()]
        raise InputError(
            source,
            f"{int(many.sum())} faces are shared by more than two tetrahedra (overlapping "
            f"elements) {where(pts, unit)}; repair the mesh",
        )
    # parity of each face's node order relative to its sorted order (even = 0)
    inv = (f[:, 0] > f[:, 1]).astype(int) + (f[:, 0] > f[:, 2]) + (f[:, 1] > f[:, 2])
    parity = inv % 2
    two = counts == 2
    a, b = order[starts[two]], order[starts[two] + 1]
    same = parity[a] == parity[b]
    if same.any():
        raise InputError(
            source,
            f"{int(same.sum())} interior faces have both of their tetrahedra on the same side "
            f"(folded or overlapping elements) {where(points[f[a[same]].ravel()], unit)}; "
            "repair the mesh",
        )
    one = order[starts[counts == 1]]
    one.sort()
    return f[one], one // 4, (a // 4, b // 4)


def manifold_solid(vertices: np.ndarray, faces: np.ndarray):
    """A closed triangle surface (vertices (n, 3), faces (m, 3)) as a ``manifold3d.Manifold``
    for exact booleans and volumes; check its ``status()`` before use."""
    import manifold3d

    mesh = manifold3d.Mesh64(vert_properties=np.ascontiguousarray(vertices, dtype=np.float64),
                             tri_verts=np.ascontiguousarray(faces, dtype=np.uint64))
    return manifold3d.Manifold(mesh)


def check_overlaps(source, bodies, unit, scale, warnings, *, hint=""):
    """Refuse bodies whose volumes intersect (beyond OVERLAP_REL of the smaller one).

    Only pairs whose bounding boxes overlap are intersected (manifold3d boolean); an insert and
    its host are not (the host's boundary holds the insert's seat, and the self-intersection
    check of that boundary has seen them apart). A pair manifold3d cannot take (e.g. a shell
    pinched at a vertex) is reported in ``warnings``. ``hint`` ends an overlap's refusal.
    """
    lo = np.array([b.vertices.min(axis=0) for b in bodies])
    hi = np.array([b.vertices.max(axis=0) for b in bodies])
    span = float(np.max(hi.max(axis=0) - lo.min(axis=0)))
    gap = np.minimum(hi[:, None, :], hi[None, :, :]) - np.maximum(lo[:, None, :], lo[None, :, :])
    boxes = (gap > 1e-9 * span).all(axis=2)
    for i, b in enumerate(bodies):  # an insert sits in its host's seat: checked with the host
        for j, h in enumerate(bodies):
            if getattr(b, "host", "") and b.host == h.name:
                boxes[i, j] = boxes[j, i] = False
    i_idx, j_idx = np.nonzero(np.triu(boxes, k=1))
    if not len(i_idx):
        return
    import manifold3d

    cache = {}

    def solid(k):
        if k not in cache:
            cache[k] = manifold_solid(bodies[k].vertices, bodies[k].faces)
        return cache[k]

    for i, j in zip(i_idx.tolist(), j_idx.tolist()):
        a, b = solid(i), solid(j)
        if a.status() != manifold3d.Error.NoError or b.status() != manifold3d.Error.NoError:
            warnings.append(
                f"{bodies[i].name} and {bodies[j].name} could not be checked for overlap "
                f"(manifold3d refused the surfaces: {a.status()}, {b.status()})"
            )
            continue
        common = float((a ^ b).volume())
        small = min(float(a.volume()), float(b.volume()))
        if common > OVERLAP_REL * small:
            inner = bodies[j].name if b.volume() <= a.volume() else bodies[i].name
            outer = bodies[i].name if inner == bodies[j].name else bodies[j].name
            frac = common / small
            tail = f"; {hint}" if hint else ""
            if frac > 0.999:
                raise InputError(
                    source,
                    f"{inner} lies inside {outer} and touches it (common volume {common / scale**3:.4g} "
                    f"{unit}^3); a cavity or insert must lie wholly inside the shell around it, touching it "
                    f"nowhere{tail}",
                )
            raise InputError(
                source,
                f"{bodies[i].name} and {bodies[j].name} overlap: they share "
                f"{common / scale**3:.4g} {unit}^3 ({100 * frac:.3g} % of the smaller); "
                f"bodies in one file may touch but not interpenetrate{tail}",
            )


def plausibility_warning(bodies, unit, scale) -> str | None:
    """A warning when the solid is implausibly long or short for a blade, with a better unit."""
    lo = np.min([b.vertices.min(axis=0) for b in bodies], axis=0)
    hi = np.max([b.vertices.max(axis=0) for b in bodies], axis=0)
    length = float(np.max(hi - lo))
    low, high = PLAUSIBLE_LENGTH_M
    if low <= length <= high:
        return None
    raw = length / scale
    # prefer a unit giving a typical blade (0.1 m to 6 m), metric first; else any plausible
    order = ["mm", "m", "in", "cm", "ft"]
    typical = [u for u in order if u != unit and 0.1 <= raw * LENGTH_UNITS[u] <= 6.0]
    plausible = [u for u in order if u != unit and low <= raw * LENGTH_UNITS[u] <= high]
    pick = (typical or plausible or [None])[0]
    state = "long" if length > high else "short"
    metres = "" if unit == "m" else f" ({length:.4g} m)"
    msg = (
        f"bounding box is {raw:.4g} {unit} long{metres}, implausibly {state} for a "
        f"blade (expected {low * 1000:.0f} mm to {high:.0f} m)"
    )
    if pick:
        msg += f"; did you mean --units {pick} ({raw * LENGTH_UNITS[pick]:.4g} m)?"
    else:
        msg += "; check --units"
    return msg
