"""Exact closest points and signed distances (bladesolid.compare.query).

References: trimesh (reference library) — its point-triangle kernel over every face (brute
force), trimesh.proximity's closest points and signed distance.
"""

from __future__ import annotations

import numpy as np
import pytest
import trimesh

from bladesolid import compare


def test_surface_query_is_exact_against_brute_force_and_trimesh(demo_mesh):
    q = compare.SurfaceQuery(demo_mesh.vertices, demo_mesh.faces)
    rng = np.random.default_rng(7)
    P, _ = compare.sample_surface(demo_mesh.vertices, demo_mesh.faces, 400, seed=3)
    P = P + rng.normal(scale=2e-3, size=P.shape)       # points within a few mm of the surface
    c, d, face = q.closest(P)
    # brute force: every face of the mesh for a subset (trimesh's point-triangle kernel)
    tri = demo_mesh.triangles
    for p, dd in zip(P[:25], d[:25]):
        cp = trimesh.triangles.closest_point(tri, np.repeat(p[None], len(tri), axis=0))
        assert dd == pytest.approx(np.linalg.norm(cp - p, axis=1).min(), abs=1e-12)
    # trimesh.proximity (reference library): ours is never farther
    _, d_tm, _ = trimesh.proximity.closest_point(demo_mesh, P)
    assert np.all(d <= d_tm + 1e-12)
    # sign: trimesh.proximity.signed_distance is positive inside; ours is positive outside
    s, _, _ = q.signed_distance(P)
    s_tm = trimesh.proximity.signed_distance(demo_mesh, P)
    clear = np.abs(s_tm) > 1e-5
    assert np.all(np.sign(s[clear]) == -np.sign(s_tm[clear]))
    assert np.allclose(np.abs(s), d)
