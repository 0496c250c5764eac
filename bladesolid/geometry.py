"""Geometry primitives written once: signed volumes of tetrahedra and their orientation, closed
shells, winding numbers, and the boundaries of hollow bodies and inserts.

Every module that needs the volume of a tetrahedron, the volume a closed surface encloses or
positively oriented tetrahedra takes it from here (the numba kernels of
:mod:`bladesolid.moments` repeat the same triple product inside their loops, by necessity).
Plain numpy; lengths in whatever unit the coordinates are given.

The signed volume of the tetrahedron (a, b, c, d) is ((b − a) × (c − a))·(d − a) / 6: positive
when (b − a, c − a, d − a) is right-handed.

>>> unit = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]])
>>> float(tet_signed_volumes(unit, np.array([[0, 1, 2, 3]]))[0]) * 6
1.0
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Shell", "body_boundaries", "enclosed_volume", "orient_positive", "origin_tet_volumes", "shell_labels",
           "signed_tet_volumes", "tet_signed_volumes", "winding_numbers"]


def signed_tet_volumes(a: np.ndarray, b: np.ndarray, c: np.ndarray, d: np.ndarray) -> np.ndarray:
    """(k,) signed volumes ((b − a) × (c − a))·(d − a) / 6 of tetrahedra given by their
    corners a, b, c, d, each (k, 3) (or (3,), broadcast)."""
    return np.einsum("...j,...j->...", np.cross(b - a, c - a), d - a) / 6.0


def tet_signed_volumes(nodes: np.ndarray, tets: np.ndarray) -> np.ndarray:
    """(k,) signed volumes of the tetrahedra ``tets`` (k, 4) int into ``nodes`` (n, 3)."""
    v = np.asarray(nodes, dtype=float)[np.asarray(tets)]
    return signed_tet_volumes(v[:, 0], v[:, 1], v[:, 2], v[:, 3])


def origin_tet_volumes(vertices: np.ndarray, faces: np.ndarray, reference=None) -> np.ndarray:
    """(m,) signed volumes of the tetrahedra (reference point, face) of a triangle surface.

    For a closed surface they add up to the enclosed volume, positive when the faces are wound
    outward (divergence theorem); any reference point gives the same sum (default: the origin;
    a point near the surface keeps round-off small).
    """
    v = np.asarray(vertices, dtype=float)
    f = np.asarray(faces)
    r = np.zeros(3) if reference is None else np.asarray(reference, dtype=float)
    return signed_tet_volumes(r, v[f[:, 0]], v[f[:, 1]], v[f[:, 2]])


def enclosed_volume(vertices: np.ndarray, faces: np.ndarray) -> float:
    """Volume enclosed by a closed triangle surface, positive when wound outward.

    >>> cube = np.array([[x, y, z] for x in (0, 1) for y in (0, 2) for z in (0, 3)], float)
    >>> f = np.array([[0, 1, 3], [0, 3, 2], [4, 6, 7], [4, 7, 5], [0, 4, 5], [0, 5, 1],
    ...               [2, 3, 7], [2, 7, 6], [0, 2, 6], [0, 6, 4], [1, 5, 7], [1, 7, 3]])
    >>> round(enclosed_volume(cube, f), 12)
    6.0
    """
    v = np.asarray(vertices, dtype=float)
    centre = 0.5 * (v.min(axis=0) + v.max(axis=0))
    return float(origin_tet_volumes(v, faces, centre).sum())


def orient_positive(nodes: np.ndarray, tets: np.ndarray, volumes: np.ndarray | None = None) -> np.ndarray:
    """The tetrahedra (k, 4), a copy, with the last two nodes swapped where the signed volume
    is negative, so that every one is positively oriented. ``volumes``: their signed volumes
    when already known (else computed).

    >>> nodes = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]])
    >>> orient_positive(nodes, [[0, 2, 1, 3]]).tolist()
    [[0, 2, 3, 1]]
    """
    tets = np.array(tets, dtype=np.int64, copy=True)
    neg = (tet_signed_volumes(nodes, tets) if volumes is None else np.asarray(volumes)) < 0
    tets[neg, 2], tets[neg, 3] = tets[neg, 3].copy(), tets[neg, 2].copy()
    return tets


# --- closed shells, hollow bodies and inserts -------------------------------------------------------


@dataclass(frozen=True)
class Shell:
    """One closed surface of the input, as the loader hands it to :func:`body_boundaries`.

    vertices : (n, 3) float64;  faces : (m, 3) int64, closed and consistently wound
    body : index of the body whose material this shell bounds (an insert has its own index)
    cavity : True for an inner boundary of ``body`` wound into the void (normals away from the
      material, i.e. the shell alone has negative volume); False for an outer shell (outward)
    """

    vertices: np.ndarray
    faces: np.ndarray
    body: int
    cavity: bool = False


def winding_numbers(vertices: np.ndarray, faces: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Generalised winding number of a closed, consistently wound surface at each point, (q,).

    The sum of the solid angles of the faces seen from the point, over 4π (solid angle of a
    triangle: A. van Oosterom and J. Strackee, IEEE Trans. Biomed. Eng. 30(2), 1983): 1 inside
    an outward-wound shell, 0 outside, −1 inside a shell wound inward; for a body given by all
    its shells, 1 in its material and 0 in its cavities. Exact up to round-off away from the
    surface. Cost O(q·m): meant for a few points.

    >>> import trimesh
    >>> b = trimesh.creation.box()
    >>> np.round(winding_numbers(b.vertices, b.faces, [[0, 0, 0], [2, 0, 0]]), 12).tolist()
    [1.0, 0.0]
    """
    tri = np.asarray(vertices, dtype=np.float64)[np.asarray(faces)]
    out = []
    for p in np.atleast_2d(np.asarray(points, dtype=np.float64)):
        a, b, c = tri[:, 0] - p, tri[:, 1] - p, tri[:, 2] - p
        la, lb, lc = (np.linalg.norm(x, axis=1) for x in (a, b, c))
        num = np.einsum("ij,ij->i", a, np.cross(b, c))
        den = la * lb * lc + np.einsum("ij,ij->i", a, b) * lc + np.einsum("ij,ij->i", a, c) * lb \
            + np.einsum("ij,ij->i", b, c) * la
        out.append(2.0 * np.arctan2(num, den).sum() / (4.0 * np.pi))
    return np.array(out)


def shell_labels(faces: np.ndarray) -> np.ndarray:
    """(m,) index of the edge-connected shell of each face (0, 1, ... in order of first face)."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    faces = np.asarray(faces, dtype=np.int64)
    m = len(faces)
    if m == 0:
        return np.zeros(0, dtype=np.int64)
    edges = np.sort(np.concatenate([faces[:, [0, 1]], faces[:, [1, 2]], faces[:, [2, 0]]]), axis=1)
    owner = np.tile(np.arange(m), 3)
    order = np.lexsort((edges[:, 1], edges[:, 0]))
    e, o = edges[order], owner[order]
    same = np.all(e[1:] == e[:-1], axis=1)
    u, v = o[:-1][same], o[1:][same]
    g = coo_matrix((np.ones(len(u)), (u, v)), shape=(m, m))
    _, lab = connected_components(g, directed=False)
    _, first = np.unique(lab, return_index=True)
    rank = np.empty(len(first), dtype=np.int64)
    rank[np.argsort(np.argsort(first))] = np.arange(len(first))
    return rank[lab]


def body_boundaries(shells, n_bodies: int | None = None, hosts: dict | None = None) -> list[tuple[np.ndarray, np.ndarray]]:
    """The complete boundary of every body's material, from its shells and its inserts.

    shells : sequence of :class:`Shell`. Each body has one outer shell (``cavity=False``,
      outward) and any cavity shells (``cavity=True``, wound into the void). A body whose outer
      shell lies inside another body's material is an insert of the innermost such body: its
      outer shell, reversed, is added to that host's boundary (the insert's seat).
    hosts : optional ``{insert body: host body}`` when the caller has already found the nesting
      (the loader does, from several probe points); else each body's host is found here from
      one point of its outer shell.
    Returns per body ``(vertices (n, 3), faces (m, 3) int64)``, the shells concatenated; such a
    boundary integrates (divergence theorem) to the body's own volume and is what
    :func:`bladesolid.mesh.mass_elements` expects as a body's surface.
    """
    shells = list(shells)
    n = n_bodies if n_bodies is not None else 1 + max(int(s.body) for s in shells)
    parts: list[list[tuple[np.ndarray, np.ndarray]]] = [[] for _ in range(n)]
    outer: dict[int, Shell] = {}
    for s in shells:
        parts[int(s.body)].append((np.asarray(s.vertices, float), np.asarray(s.faces, np.int64)))
        if not s.cavity:
            if int(s.body) in outer:
                from .errors import InputError

                raise InputError(f"body {s.body}", "has more than one outer shell")
            outer[int(s.body)] = s
    if hosts is None:
        hosts = _insert_hosts(outer, parts)
    for b, host in hosts.items():
        s = outer[int(b)]
        parts[int(host)].append((np.asarray(s.vertices, float), np.asarray(s.faces, np.int64)[:, ::-1]))
    return [_concat(p) for p in parts]


def _insert_hosts(outer: dict, parts) -> dict:
    """``{insert body: host body}``: the innermost body whose material (its own shells, before
    any seat) holds the first vertex of the insert's outer shell."""
    enclosed = {b: abs(enclosed_volume(s.vertices, s.faces)) for b, s in outer.items()}
    own = [_concat(p) for p in parts]  # before any seat is added: nesting by the shells as given
    hosts = {}
    for b, s in outer.items():
        probe = np.asarray(s.vertices, float)[:1]
        found = [h for h in outer if h != b and enclosed[h] > enclosed[b] and winding_numbers(*own[h], probe)[0] > 0.5]
        if found:
            hosts[b] = min(found, key=lambda h: enclosed[h])  # the innermost body around it
    return hosts


def _concat(parts):
    if not parts:
        return np.zeros((0, 3)), np.zeros((0, 3), dtype=np.int64)
    vs, fs, off = [], [], 0
    for v, f in parts:
        vs.append(v)
        fs.append(f + off)
        off += len(v)
    return np.concatenate(vs), np.concatenate(fs).astype(np.int64)
