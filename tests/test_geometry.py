"""Signed tetrahedron volumes, enclosed volumes and orientation (bladesolid.geometry).

References: the volume of a tetrahedron is |det[b−a, c−a, d−a]|/6 (elementary geometry);
trimesh's volume of a closed surface and TetGen's tetrahedra of it (reference libraries).
"""

from __future__ import annotations

import numpy as np
import pytest
import trimesh

from bladesolid.geometry import enclosed_volume, orient_positive, origin_tet_volumes, tet_signed_volumes


def test_signed_volume_is_the_determinant_over_six():
    rng = np.random.default_rng(3)
    nodes = rng.normal(size=(40, 3))
    tets = rng.integers(0, 40, size=(200, 4))
    v = tet_signed_volumes(nodes, tets)
    det = np.linalg.det(np.stack([nodes[tets[:, k]] - nodes[tets[:, 0]] for k in (1, 2, 3)], axis=1))
    assert np.allclose(v, det / 6.0, rtol=1e-12, atol=1e-15)
    # swapping two nodes turns the orientation
    assert np.allclose(tet_signed_volumes(nodes, tets[:, [0, 2, 1, 3]]), -v)


@pytest.mark.parametrize("solid", [trimesh.creation.box(extents=(1.0, 2.0, 3.0)),
                                   trimesh.creation.icosphere(subdivisions=3, radius=0.7)])
def test_enclosed_volume_equals_trimesh(solid):
    solid.apply_translation([5.0, -3.0, 2.0])  # far from the origin: the reference point matters for round-off
    assert enclosed_volume(solid.vertices, solid.faces) == pytest.approx(solid.volume, rel=1e-12)
    assert enclosed_volume(solid.vertices, solid.faces[:, ::-1]) == pytest.approx(-solid.volume, rel=1e-12)
    # any reference point gives the same sum (divergence theorem)
    for ref in ([0.0, 0.0, 0.0], [100.0, 50.0, -20.0]):
        assert origin_tet_volumes(solid.vertices, solid.faces, ref).sum() == pytest.approx(solid.volume, rel=1e-9)


def test_orient_positive_keeps_the_volume_and_makes_every_tetrahedron_positive():
    import tetgen

    s = trimesh.creation.icosphere(subdivisions=2, radius=1.0)
    nodes, tets = (np.asarray(a) for a in tetgen.TetGen(s.vertices, s.faces).tetrahedralize()[:2])
    rng = np.random.default_rng(0)
    flipped = tets.copy()
    flip = rng.random(len(tets)) < 0.5
    flipped[flip] = flipped[flip][:, [1, 0, 2, 3]]
    fixed = orient_positive(nodes, flipped)
    vol = tet_signed_volumes(nodes, fixed)
    assert (vol > 0).all()
    assert vol.sum() == pytest.approx(s.volume, rel=1e-9)                 # TetGen fills the sphere's surface
    assert np.array_equal(np.sort(fixed, axis=1), np.sort(tets, axis=1))  # the same nodes, reordered
    assert np.array_equal(orient_positive(nodes, fixed), fixed)          # nothing to do the second time
