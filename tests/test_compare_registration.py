"""Registration of a repaired blade onto its reference (bladesolid.compare.registration).

References: meshes/demo_variants.json — the demo generator's known rigid transform of the
scanned variant; a known pose applied here.
"""

from __future__ import annotations

import math

import numpy as np

from bladesolid import compare
from bladesolid.frame import rotation_about

from .comparehelp import variants
from .conftest import demo_surfaces


def test_scanned_transform_is_recovered(scanned):
    # demo_variants.json: the scan is x' = R x + t (mm) from the hub frame; ours maps back
    known = np.array(variants()["demo_blade_le_blend_scanned.stl"]["transform_from_hub_frame"])
    known[:3, 3] *= 1e-3
    expected = compare.invert_rigid(known)
    T = scanned.transform_model
    assert compare.rotation_angle_deg(T[:3, :3] @ expected[:3, :3].T) < 0.05          # registration accuracy target of this project: < 0.05 deg
    assert np.linalg.norm(T[:3, 3] - expected[:3, 3]) < 0.05e-3                       # registration accuracy target of this project: < 0.05 mm
    r = scanned.registration
    assert r.method == "principal axes + trimmed ICP"
    assert r.rms_m < 1e-6 and r.max_m < 1e-5        # float32 STL round-off only on the untouched 90 %
    assert r.max_all_m > 1e-3                        # the blend itself (up to 4 mm deep) is among all points


def test_registration_from_a_large_rotation_uses_the_axis_signs(reference):
    # a pose far from the identity: turned 170 deg about an oblique axis and moved 0.3 m
    R = rotation_about([0.2, 0.9, -0.4], math.radians(170.0))
    T0 = compare.rigid_matrix(R, [0.3, -0.1, 0.2])
    moved = [(compare.apply_transform(T0, v), f) for v, f in demo_surfaces("demo_blade_le_blend.stl")]
    fixed = compare.merge_surfaces(reference.surfaces)
    reg = compare.register(compare.merge_surfaces(moved), fixed, samples=2500)
    back = reg.transform @ T0                                  # should be the identity
    assert compare.rotation_angle_deg(back[:3, :3]) < 0.05
    assert np.linalg.norm(back[:3, 3]) < 0.05e-3
    assert reg.start.startswith("principal axes")


def test_registration_is_deterministic(reference):
    moving = compare.merge_surfaces(demo_surfaces("demo_blade_tip_dressed.stl"))
    fixed = compare.merge_surfaces(reference.surfaces)
    a = compare.register(moving, fixed, samples=600, coarse_points=300, coarse_iterations=5, seed=4)
    b = compare.register(moving, fixed, samples=600, coarse_points=300, coarse_iterations=5, seed=4)
    assert np.array_equal(a.transform, b.transform) and a.rms_m == b.rms_m
