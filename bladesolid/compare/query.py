"""Exact closest points and signed distances to a closed triangle surface, and seeded samples.

Used by the registration (closest points) and the deviation (signed distance) alike.
Everything is in metres; surfaces are ``(vertices (n, 3), faces (m, 3))``.
"""

from __future__ import annotations

import itertools

import numpy as np

__all__ = ["SurfaceQuery", "merge_surfaces", "sample_surface"]


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
