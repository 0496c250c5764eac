"""Signed deviation and removed/added volumes (bladesolid.compare.deviation).

References: meshes/demo_variants.json (the variants' volumes, computed by the generator) and the
blend's known depth and band.
"""

from __future__ import annotations

import numpy as np
import pytest

from .comparehelp import RHO, variants


def test_blend_volumes_and_deviation(blend_direct):
    v = variants()
    removed_known = (v["demo_blade.stl"]["volume_mm3"] - v["demo_blade_le_blend.stl"]["volume_mm3"]) * 1e-9
    assert blend_direct.removed_volume_m3 == pytest.approx(removed_known, rel=1e-3)   # demo_variants.json
    assert blend_direct.added_volume_m3 < 1e-3 * removed_known                       # a blend only removes
    assert blend_direct.delta.mass_kg == pytest.approx(-RHO * removed_known, rel=1e-3)
    d = blend_direct.deviation
    depth = v["demo_blade_le_blend.stl"]["params"]["le_blend_depth_mm"] * 1e-3
    assert -depth < d.min_m < -0.25 * depth       # inward (material missing), not deeper than the blend
    assert d.max_outward_m < 1e-6                  # nothing outside the reference
    # vertices outside the blend band are on the reference surface
    y = d.vertices[:, 1] * 1e3
    p = v["demo_blade_le_blend.stl"]["params"]
    far = np.abs(y - p["le_blend_radius_mm"]) > 0.5 * p["le_blend_width_mm"] + 1.0
    assert np.abs(d.values[far]).max() < 1e-6
