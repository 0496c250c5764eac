"""The command line end to end: mass and loads on the demo blade, JSON contract, exit codes."""

import json
import math
import subprocess
import sys

import numpy as np
import pytest
import trimesh

from bladesolid import CAUTION
from bladesolid.cli import main

MASS_KEYS = {"mass_kg", "volume_m3", "cg_m", "inertia_hub_kgm2", "inertia_cg_kgm2", "principal_moments_kgm2",
             "principal_axes", "static_moment_kgm", "surface_check_rel_error"}
OP_KEYS = {"rpm", "blade_angle_deg", "cf_N", "radial_pull_N", "moment_hub_Nm", "ctm_Nm",
           "feathering_inertia_kgm2", "pitch_stiffness_Nm_per_rad"}


def run(args, capsys):
    code = main([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


def test_mass_json_contract(demo_path, tmp_path, capsys):
    out = tmp_path / "m.json"
    code, text, err = run(["mass", demo_path, "--units", "mm", "--density", "2810 kg/m^3", "--json", out], capsys)
    assert code == 0, err
    assert "mass" in text and "kg" in text and "manufacturer's data" in " ".join(text.split())
    r = json.loads(out.read_text())
    assert r["schema"] == "bladesolid.report/1"
    assert MASS_KEYS <= set(r["mass_properties"])
    assert {"reference_radius_m", "modelled_deg"} <= set(r["blade_angle"])
    assert "airworthiness" in r["caution"]
    mp = r["mass_properties"]
    assert np.shape(mp["inertia_hub_kgm2"]) == (3, 3) and np.shape(mp["principal_axes"]) == (3, 3)
    assert mp["surface_check_rel_error"] < 1e-9
    # static moment = m |c⊥| with the default hub frame (k = z)
    c = np.array(mp["cg_m"])
    assert mp["static_moment_kgm"] == pytest.approx(mp["mass_kg"] * math.hypot(c[0], c[1]), rel=1e-12)


def test_mass_with_elements_check(demo_path, tmp_path, capsys):
    out = tmp_path / "m.json"
    code, _, err = run(["mass", demo_path, "--units", "mm", "--material", "al-2025-t6", "--check-elements",
                        "--json", out], capsys)
    assert code == 0, err
    mp = json.loads(out.read_text())["mass_properties"]
    assert mp["surface_check_method"] == "elements vs closed surface"
    assert mp["surface_check_rel_error"] < 1e-9


def test_inches_and_pounds_give_the_same_kilograms(demo_mesh, tmp_path, capsys):
    # the same blade written in inches, with the density in lb/in^3 (1 in = 25.4 mm,
    # 1 lb = 0.45359237 kg exactly — NIST SP 811)
    inch = demo_mesh.copy()
    inch.apply_scale(1 / 0.0254)
    p = tmp_path / "blade_in.stl"
    inch.export(p)
    rho_lb_in3 = 2810.0 / 0.45359237 * 0.0254**3
    a, b = tmp_path / "a.json", tmp_path / "b.json"
    assert run(["mass", p, "--units", "in", "--density", f"{rho_lb_in3!r} lb/in^3", "--json", a], capsys)[0] == 0
    mm = demo_mesh.copy()
    mm.apply_scale(1000.0)
    q = tmp_path / "blade_mm.stl"
    mm.export(q)
    assert run(["mass", q, "--units", "mm", "--density", "2810", "--json", b], capsys)[0] == 0
    ma, mb = (json.loads(x.read_text())["mass_properties"] for x in (a, b))
    # float32 STL coordinates differ between the two files: agree to single-precision round-off
    assert ma["mass_kg"] == pytest.approx(mb["mass_kg"], rel=1e-6)
    np.testing.assert_allclose(ma["inertia_hub_kgm2"], mb["inertia_hub_kgm2"], rtol=1e-5, atol=1e-9)


def test_loads_json_contract(demo_path, tmp_path, capsys):
    out = tmp_path / "l.json"
    code, text, err = run(["loads", demo_path, "--units", "mm", "--material", "al-2025-t6", "--rpm", "2500,2875",
                           "--blade-angle", "30", "--sweep", "0:60:5", "--json", out], capsys)
    assert code == 0, err
    r = json.loads(out.read_text())
    assert len(r["operating_points"]) == 2
    for op in r["operating_points"]:
        assert OP_KEYS <= set(op)
        assert op["blade_angle_deg"] == 30.0
    assert [p["blade_angle_deg"] for p in r["pitch_sweep"]] == list(np.arange(0, 61, 5.0))
    a, b = r["operating_points"]
    assert b["radial_pull_N"] / a["radial_pull_N"] == pytest.approx((2875 / 2500) ** 2, rel=1e-12)
    # the sweep at the operating angle equals the operating point's CTM
    row = next(p for p in r["pitch_sweep"] if p["blade_angle_deg"] == 30.0)
    assert row["ctm_Nm"] == pytest.approx(a["ctm_Nm"], rel=1e-12)
    assert r["proof_load"]["proof_load_N"] == pytest.approx(2 * b["radial_pull_N"])
    assert "35.35" in r["proof_load"]["source"]
    assert "CTM" in text and "N·m" in text


def test_pitch_change_equals_absolute_angle(demo_path, tmp_path, capsys):
    a, b = tmp_path / "a.json", tmp_path / "b.json"
    run(["loads", demo_path, "--units", "mm", "--material", "al-2025-t6", "--rpm", "2500", "--pitch-change", "5",
         "--json", a], capsys)
    ra = json.loads(a.read_text())
    beta = ra["blade_angle"]["modelled_deg"] + 5
    run(["loads", demo_path, "--units", "mm", "--material", "al-2025-t6", "--rpm", "2500", "--blade-angle",
         repr(beta), "--json", b], capsys)
    rb = json.loads(b.read_text())
    assert ra["operating_points"][0]["ctm_Nm"] == pytest.approx(rb["operating_points"][0]["ctm_Nm"], rel=1e-12)


def test_existing_output_is_not_overwritten(demo_path, tmp_path, capsys):
    out = tmp_path / "m.json"
    out.write_text("keep me")
    code, _, err = run(["mass", demo_path, "--units", "mm", "--density", "2810", "--json", out], capsys)
    assert code == 2 and "exists already" in err and "--force" in err
    assert out.read_text() == "keep me"
    code, _, _ = run(["mass", demo_path, "--units", "mm", "--density", "2810", "--json", out, "--force"], capsys)
    assert code == 0 and json.loads(out.read_text())["schema"] == "bladesolid.report/1"


@pytest.mark.parametrize(
    "args, fragment",
    [
        (["mass", "{demo}", "--density", "2810"], "no length unit"),
        (["mass", "{demo}", "--units", "mm"], "density"),
        (["mass", "{demo}", "--units", "yd", "--density", "2810"], "unknown length unit"),
        (["mass", "{demo}", "--units", "mm", "--density", "-3"], "positive"),
        (["mass", "{demo}", "--units", "mm", "--material", "unobtainium"], "unknown material"),
        (["loads", "{demo}", "--units", "mm", "--density", "2810"], "no speed"),
        (["loads", "{demo}", "--units", "mm", "--density", "2810", "--rpm", "2500", "--pitch-axis", "0,0,1"], "parallel"),
        (["loads", "{demo}", "--units", "mm", "--density", "2810", "--rpm", "2500", "--sweep", "a:b"], "FROM:TO:STEP"),
        (["mass", "missing.stl", "--units", "mm", "--density", "2810"], "missing.stl"),
        (["frobnicate"], "invalid choice"),
    ],
)
def test_bad_usage_one_line_exit_2(demo_path, tmp_path, capsys, args, fragment):
    args = [a.replace("{demo}", str(demo_path)) for a in args]
    code, out, err = run(args, capsys)
    assert code == 2
    assert fragment in err
    assert len(err.strip().splitlines()) == 1
    assert "Traceback" not in err


def test_console_script_runs(demo_path):
    p = subprocess.run([sys.executable, "-m", "bladesolid", "mass", str(demo_path), "--units", "mm",
                        "--density", "2810"], capture_output=True, text=True, timeout=120)
    assert p.returncode == 0, p.stderr
    assert "6.89" in p.stdout  # the demo blade's mass, kg


def test_loads_sweeps_csv_and_plots(demo_path, tmp_path, capsys):
    files = {k: tmp_path / n for k, n in (("csv", "s.csv"), ("plot", "s.png"), ("rpm_csv", "r.csv"), ("rpm_plot", "r.png"),
                                          ("json", "l.json"))}
    code, _, err = run(["loads", demo_path, "--units", "mm", "--material", "al-2025-t6", "--rpm", "2500",
                        "--blade-angle", "22", "--sweep", "-10:90:0.5", "--rpm-sweep", "0:3000:250",
                        "--csv", files["csv"], "--plot", files["plot"], "--rpm-csv", files["rpm_csv"],
                        "--rpm-plot", files["rpm_plot"], "--json", files["json"]], capsys)
    assert code == 0, err
    lines = files["csv"].read_text().splitlines()
    assert lines[0] == "# " + CAUTION  # the caution as a comment line, then the table
    assert lines[1] == "blade_angle_deg,ctm_Nm,pitch_stiffness_Nm_per_rad" and len(lines) == 203
    rows = json.loads(files["json"].read_text())["rpm_sweep"]
    assert [r["rpm"] for r in rows] == list(range(0, 3001, 250))
    # Ω² scaling of the speed sweep (CTM ∝ Ω² at a fixed blade angle)
    r2500 = next(r for r in rows if r["rpm"] == 2500)
    r1250 = next(r for r in rows if r["rpm"] == 1250)
    assert r1250["ctm_Nm"] == pytest.approx(r2500["ctm_Nm"] / 4, rel=1e-12)
    for png in (files["plot"], files["rpm_plot"]):
        assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_view_without_display_is_one_line(demo_path, capsys, monkeypatch):
    monkeypatch.delenv("DISPLAY", raising=False)
    monkeypatch.delenv("WAYLAND_DISPLAY", raising=False)
    code, _, err = run(["view", demo_path, "--units", "mm", "--density", "2810", "--rpm", "2500"], capsys)
    assert code == 2 and "no display" in err and len(err.strip().splitlines()) == 1


def test_two_bodies_each_with_its_own_density(tmp_path, capsys):
    # a blade-like bar and a separate sheath-like strip in one file: one density each, in order
    # (bodies are numbered by descending volume); mass = Σ ρ V (box volumes: a·b·c exactly)
    bar = trimesh.creation.box([40.0, 600.0, 12.0])
    bar.apply_translation([0, 400, 0])
    strip = trimesh.creation.box([4.0, 200.0, 4.0])
    strip.apply_translation([-30.0, 500.0, 0.0])
    both = trimesh.util.concatenate([bar, strip])
    p = tmp_path / "two.stl"
    both.export(p)
    out = tmp_path / "m.json"
    code, _, err = run(["mass", p, "--units", "mm", "--density", "2810", "--density", "8890 kg/m^3", "--json", out],
                       capsys)
    assert code == 0, err
    r = json.loads(out.read_text())
    expected = 2810 * 40 * 600 * 12 * 1e-9 + 8890 * 4 * 200 * 4 * 1e-9
    assert r["mass_properties"]["mass_kg"] == pytest.approx(expected, rel=1e-9)
    assert [b["density_kg_m3"] for b in r["input"]["bodies"]] == [2810.0, 8890.0]
    code, _, err = run(["mass", p, "--units", "mm", "--density", "2810", "--density", "8890", "--density", "1",
                        "--json", tmp_path / "x.json"], capsys)
    assert code == 2 and "3 densities given for 2 bodies" in err


def test_surface_check_flags_a_disagreement(tmp_path, capsys):
    # valid surfaces agree to round-off (every test above); the flag itself is checked here
    from bladesolid import api
    from bladesolid.api import MassProperties

    good = MassProperties(1.0, 1.0, np.zeros(3), np.eye(3), np.eye(3), np.ones(3), np.eye(3), 0.0, 1e-15, "x")
    bad = MassProperties(1.0, 1.0, np.zeros(3), np.eye(3), np.eye(3), np.ones(3), np.eye(3), 0.0, 1e-6, "x")
    assert good.surface_check_ok and not bad.surface_check_ok
    assert api.SURFACE_CHECK_TOLERANCE == 1e-9
