"""Field resolution: element fields on a simplified copy while mass, tensor and loads stay exact."""

import json

import numpy as np
import pytest

from bladesolid import api, fields
from bladesolid.cli import main
from bladesolid.moments import relative_difference


@pytest.fixture(scope="module")
def coarse(demo_path):
    return api.load_blade(demo_path, "mm", ["2810"], field_faces=5000)


@pytest.fixture(scope="module")
def full(demo_path):
    return api.load_blade(demo_path, "mm", ["2810"])


def test_simplified_fields_keep_the_exact_totals(coarse, full):
    assert full.elements_exact and not coarse.elements_exact
    info = coarse.field_resolution
    # (the simplifier may keep up to twice the target to avoid folding a thin edge)
    assert info["faces_full"] == 19440 and info["faces_field"] <= 10000
    assert abs(info["volume_change"]) < 0.02
    # mass properties and loads come from the full closed surface in both cases
    assert relative_difference(coarse.moments, full.moments) < 1e-12
    a = api.loads_at(coarse, 2500, 22.0)
    b = api.loads_at(full, 2500, 22.0)
    assert a.ctm_Nm == pytest.approx(b.ctm_Nm, rel=1e-12)
    assert api.mass_properties(coarse).surface_check_method == "closed surface vs trimesh mass properties"
    # the fields live on fewer elements and add up to the copy's totals, close to the exact ones
    f = fields.element_fields(coarse, 2500, 22.0)
    assert len(f.ctm_Nm) < len(full.elements)
    assert f.ctm_Nm.sum() == pytest.approx(f.totals.ctm_Nm, rel=1e-12)
    assert f.totals.ctm_Nm == pytest.approx(b.ctm_Nm, rel=0.05)
    assert info["moments_rel_difference"] < 0.05
    assert any("simplified copy" in w for w in coarse.warnings)


def test_report_says_so(demo_path, tmp_path, capsys):
    job = tmp_path / "job.toml"
    job.write_text(f'mesh = {json.dumps(str(demo_path))}\nunits = "mm"\nmaterial = "al-2025-t6"\n'
                   'stations = 4\nfield_faces = 5000\n[[operating_point]]\nrpm = 2500\n')
    assert main(["check", str(job), "--out", str(tmp_path / "out")]) == 0
    r = json.loads((tmp_path / "out" / "report.json").read_text())
    assert r["input"]["field_resolution"]["faces_field"] <= 10000
    assert "simplified copy" in r["spanwise_note"]
    assert any("simplified copy" in w for w in r["warnings"])
    np.testing.assert_allclose(r["mass_properties"]["mass_kg"], 6.898443, rtol=1e-6)
