"""Geometry primitives written once: signed volumes of tetrahedra and their orientation.

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

import numpy as np

__all__ = ["enclosed_volume", "orient_positive", "origin_tet_volumes", "signed_tet_volumes", "tet_signed_volumes"]


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
