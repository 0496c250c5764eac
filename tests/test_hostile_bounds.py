"""Hostile sizes: every size-like input is bounded and refused in one line naming its key or
flag, before the work it would cause; values that are possible but unlikely are warnings.

External facts used (each beside its check): the volume of a regular tetrahedron L³/(6√2)
(elementary geometry), the speed of sound at sea level ~340 m/s (from memory), v = Ω r, the
density range of solids (osmium 22 590 kg/m³ the densest element, aerogels ~1 kg/m³ — from
memory), the binary STL layout (80-byte header, uint32 count, 50 bytes per triangle; 3D
Systems' StereoLithography Interface Specification, 1988 — from memory).
"""

from __future__ import annotations

import math
import struct
import warnings

import numpy as np
import pytest

from bladesolid import api, bounds
from bladesolid.errors import InputError
from bladesolid.job import build_job

from .hostilehelp import BAR, BAR_TIP_M, DEMO, bar_stl, job_file, leftovers, no_meshing, no_work, one_line, run


@pytest.fixture
def bar(tmp_path):
    return bar_stl(tmp_path)


BAR_VOLUME_M3 = 0.040 * 0.600 * 0.010  # the box's volume, a·b·c


# --------------------------------------------------------------------------- mass elements


def test_an_element_size_far_too_small_is_refused_before_meshing(bar, tmp_path, capsys, monkeypatch):
    no_meshing(monkeypatch)
    out = tmp_path / "s.json"
    code, _, err = run(["span", bar, *BAR, "--rpm", "2500", "--element-size", "0.001", "--json", out], capsys)
    line = one_line(code, err, "--element-size", "mass elements")
    # about V / (L³/(6√2)) elements (regular tetrahedron volume, elementary geometry)
    least = BAR_VOLUME_M3 / ((0.001e-3) ** 3 / (6 * math.sqrt(2)))
    assert f"{least:.3g}" in line
    # the smallest size that fits the cap, in the model unit: (6√2 V / N)^(1/3)
    fits = (6 * math.sqrt(2) * BAR_VOLUME_M3 / bounds.allowed_elements()) ** (1 / 3) * 1e3
    assert f"give at least {fits:.4g} mm" in line
    assert not out.exists() and leftovers(tmp_path) == []


def test_a_metres_for_millimetres_slip_in_a_job_file_is_refused(bar, tmp_path, capsys, monkeypatch):
    no_meshing(monkeypatch)
    # meant 2 mm, written as 0.002 (metres) in a millimetre job: 2.5e14 elements
    job = job_file(tmp_path, bar, element_size="0.002", stations="4")
    code, _, err = run(["span", job], capsys)
    one_line(code, err, f"{job}: key 'element_size'", "more than the 50,000,000 accepted")


def test_an_element_count_beyond_this_machines_memory_is_refused(bar, tmp_path, capsys, monkeypatch):
    no_meshing(monkeypatch)
    monkeypatch.setattr(bounds, "memory_bytes", lambda: 1_000_000_000)  # a 1 GB machine
    code, _, err = run(["span", bar, *BAR, "--rpm", "2500", "--elements", "2000000"], capsys)
    line = one_line(code, err, "--elements", "memory")
    assert f"give at most {1_000_000_000 // bounds.ELEMENT_BYTES:,}" in line


def test_the_element_count_cap_is_refused_in_the_job(tmp_path):
    with pytest.raises(InputError, match="elements.*between 1 and 50,000,000"):
        build_job({"mesh": "b.stl", "units": "mm", "density": 2810, "elements": 60_000_000}, "job.toml")


def test_the_api_refuses_an_element_request_naming_its_parameter(bar, monkeypatch):
    no_meshing(monkeypatch)
    with pytest.raises(InputError) as info:
        api.load_blade(bar, "mm", ["2810"], max_element_volume_m3=1e-24)
    assert str(info.value).startswith("max_element_volume_m3: ")
    with pytest.raises(InputError) as info:
        api.load_blade(bar, "mm", ["2810"], target_elements=10**9)
    assert str(info.value).startswith("target_elements: ")


def test_a_sensible_element_size_still_meshes(bar):
    # control: 20 mm elements on the bar are far inside the budget (V / (20³/(6√2)) ≈ 254)
    blade = api.load_blade(bar, "mm", ["2810"], max_element_volume_m3=bounds.regular_tet_volume(0.02))
    assert float(blade.elements.mass.sum()) == pytest.approx(2810 * BAR_VOLUME_M3, rel=1e-9)


# --------------------------------------------------------------------------- counts and sweeps


@pytest.mark.parametrize("argv, named, fragment", [
    (["--stations", "2001"], "--stations", "between 1 and 2000"),
    (["--sweep", "0:90:0.0001"], "--sweep", "100,000 points"),
    (["--sweep", "-1e6:0:100"], "--sweep", "±360"),
    (["--rpm", "1e9"], "--rpm", "1,000,000 rpm"),
    (["--rpm", "inf"], "--rpm", "finite"),
    (["--blade-angle", "1e300"], "--blade-angle", "±360"),
    (["--blade-angle", "1e6"], "--blade-angle", "±360"),
    (["--pitch-change", "-1e6"], "--pitch-change", "±360"),
    (["--density", "1e300 kg/m^3"], "--density", "0.1 to 100,000"),
    (["--density", "2810 g/cm^3"], "--density", "0.1 to 100,000"),  # 2.81e6 kg/m^3
    (["--density", "1e-9"], "--density", "0.1 to 100,000"),
])
def test_an_impossible_value_is_refused_before_anything_is_loaded(argv, named, fragment, tmp_path, capsys,
                                                                     monkeypatch):
    no_work(monkeypatch)
    base = ["span", DEMO, "--units", "mm", "--rpm", "2500"]
    if "--density" not in argv:
        base += ["--density", "2810"]
    out = tmp_path / "out.json"
    code, _, err = run([*base, *argv, "--json", out], capsys)
    one_line(code, err, named, fragment)
    assert not out.exists() and leftovers(tmp_path) == []


@pytest.mark.parametrize("keys, named, fragment", [
    ({"rpm": None, "tables": "[[operating_point]]\nrpm = 2500\nblade_angle = 1e6\n"}, "operating_point 1", "±360"),
    ({"rpm": None, "tables": "[[operating_point]]\nrpm = 1e12\n"}, "operating_point 1", "1,000,000 rpm"),
    ({"rpm_sweep": '"0:2e6:100"'}, "key 'rpm_sweep'", "1,000,000 rpm"),
    ({"rated_rpm": "1e300"}, "key 'rated_rpm'", "1,000,000 rpm"),
    ({"stations": "[" + ",".join(["300.0"] * 2001) + "]"}, "key 'stations'", "2001 station radii"),
    ({"allowable": '"1e20 Pa"'}, "key 'allowable'", "stronger than any solid"),
    ({"proof_factor": "1000"}, "key 'proof_factor'", "at most 10"),
    ({"density": '"1e300 kg/m^3"'}, "key 'density'", "0.1 to 100,000"),
])
def test_an_impossible_job_key_is_named(keys, named, fragment, tmp_path, capsys, monkeypatch):
    no_work(monkeypatch)
    job = job_file(tmp_path, DEMO, **keys)
    code, _, err = run(["loads", job], capsys)
    one_line(code, err, named, fragment)


def test_an_absolute_blade_angle_out_of_range_is_refused_by_the_api(bar):
    blade = api.load_blade(bar, "mm", ["2810"], elements=False)
    for kw in ({"blade_angle_deg": 1e300}, {"pitch_change_deg": 1e6}):
        with pytest.raises(InputError) as info:
            api.loads_at(blade, 2500, **kw)
        assert str(info.value).startswith(next(iter(kw)))
    with pytest.raises(InputError, match="^rpm: "):
        api.loads_at(blade, 1e9)
    with pytest.raises(InputError, match="100,000 points"):
        api.pitch_sweep(blade, 2500, 0, 90, 1e-6)


# --------------------------------------------------------------------------- speed and density


def tip_mach(rpm, r=BAR_TIP_M):
    """Tip Mach number at sea level: v = Ω r, a = 340 m/s (from memory)."""
    return rpm * 2 * math.pi / 60 * r / 340.0


def test_a_tip_far_beyond_any_material_is_refused(bar, capsys):
    assert tip_mach(100_000) > 10
    code, _, err = run(["loads", bar, *BAR, "--rpm", "100000"], capsys)
    line = one_line(code, err, "--rpm", "Mach")
    assert f"Mach {tip_mach(100_000):.3g}" in line


def test_a_supersonic_tip_is_a_warning_not_a_refusal(bar, tmp_path, capsys):
    assert 1.5 < tip_mach(9000) < 10
    out = tmp_path / "l.json"
    code, _, err = run(["loads", bar, *BAR, "--rpm", "9000", "--json", out], capsys)
    assert code == 0, err
    assert f"Mach {tip_mach(9000):.3g}" in err and "warning" in err
    import json

    assert any("Mach" in w for w in json.loads(out.read_text())["warnings"])
    # a subsonic tip: no warning (the propeller's own 2500 rpm, Mach ~0.54)
    code, _, err = run(["loads", bar, *BAR, "--rpm", "2500"], capsys)
    assert code == 0 and "Mach" not in err


def test_an_unlikely_density_is_a_warning_and_never_a_numpy_warning(bar, tmp_path, capsys):
    # 2.81 kg/m^3: the aluminium figure in g/cm^3 typed as kg/m^3
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # a RuntimeWarning here would fail the test
        code, _, err = run(["mass", bar, "--units", "mm", "--density", "2.81"], capsys)
    assert code == 0, err
    assert "density 2.81 kg/m^3" in err and "10 to 25,000" in err
    assert "RuntimeWarning" not in err
    # the built-in materials are all usual solids: no warning
    blade = api.load_blade(bar, "mm", [("material", "al-2025-t6")], elements=False)
    assert not any("density" in w for w in blade.warnings)


# --------------------------------------------------------------------------- lengths against the blade


@pytest.mark.parametrize("centre, fragment", [
    ("100000,0,0", "from the pitch axis"),        # 100 m to the side: the blade far off the axis
    ("0,0,100000", "from the pitch axis"),        # 100 m along the thrust axis
    ("0,-100000,0", "less than 5 %"),             # 100 m inboard: the blade at r = 100.1-100.7 m
    ("0,100000,0", "inboard of the hub centre"),  # 100 m outboard: the blade at negative radii
])
def test_a_hub_centre_far_off_the_blade_is_refused_naming_it(centre, fragment, bar, capsys, monkeypatch):
    no_meshing(monkeypatch)
    code, _, err = run(["loads", bar, *BAR, "--rpm", "2500", "--hub-centre", centre], capsys)
    one_line(code, err, "--hub-centre", fragment)


def test_a_hub_centre_far_off_in_a_job_file_names_the_key(bar, tmp_path, capsys):
    job = job_file(tmp_path, bar, hub_centre="[100000.0, 0.0, 0.0]")
    code, _, err = run(["loads", job], capsys)
    one_line(code, err, f"{job}: key 'hub_centre'", "pitch axis")


def test_a_pitch_axis_that_misses_the_blade_is_refused_naming_it(bar, capsys):
    # the bar lies along y; a pitch axis along x puts its centre of gravity 400 mm off the axis
    code, _, err = run(["loads", bar, *BAR, "--rpm", "2500", "--pitch-axis", "1,0,0"], capsys)
    one_line(code, err, "--pitch-axis", "from the pitch axis")


@pytest.mark.parametrize("argv, named", [
    (["--reference-radius", "5000"], "--reference-radius"),
    (["--stations", "300,5000"], "--stations"),
    (["--stations", "50"], None),  # a count, not a radius: fine
])
def test_radii_off_the_blade_are_refused(argv, named, bar, capsys):
    code, _, err = run(["span", bar, *BAR, "--rpm", "2500", *argv], capsys)
    if named is None:
        assert code == 0, err
    else:
        one_line(code, err, named, "off the blade, which spans r = 100 mm to 700 mm")


def test_a_lumped_mass_or_counterweight_far_from_the_blade_is_refused(bar, tmp_path, capsys):
    job = job_file(tmp_path, bar, tables='[[lumped_mass]]\nmass = "0.05 kg"\nposition = [0.0, 160000.0, 0.0]\n')
    code, _, err = run(["loads", job], capsys)
    one_line(code, err, f"{job}: lumped_mass 1", "2 tip radii")
    job = job_file(tmp_path, bar, name="cw.toml", tables="[counterweight]\nradius = 160.0\narm = 90000.0\nclocking = 90.0\n")
    code, _, err = run(["loads", job], capsys)
    one_line(code, err, f"{job}: counterweight", "2 tip radii")


# --------------------------------------------------------------------------- huge blank files


def stl_bytes(triangles: np.ndarray) -> bytes:
    """Binary STL: 80-byte header, uint32 count, 50 bytes per triangle (normal, 3 corners,
    attribute) — the StereoLithography Interface Specification (from memory)."""
    out = [b"hostile".ljust(80, b" "), struct.pack("<I", len(triangles))]
    for t in np.asarray(triangles, "<f4"):
        out.append(b"\0" * 12 + t.tobytes() + b"\0\0")
    return b"".join(out)


@pytest.mark.parametrize("good", [0, 3])
def test_a_zero_filled_stl_is_refused_before_it_is_read(good, tmp_path, capsys, monkeypatch):
    n = 200_000
    tri = np.zeros((n, 3, 3), dtype=np.float32)
    tri[:good] = [[0, 0, 0], [1, 0, 0], [0, 1, 0]]  # a few proper triangles do not make a solid
    p = tmp_path / "blank.stl"
    p.write_bytes(stl_bytes(tri[:good])[:80] + struct.pack("<I", n) + stl_bytes(tri[:good])[84:]
                  + b"\0" * (50 * (n - good)))
    assert p.stat().st_size == 84 + 50 * n
    from bladesolid.io import checks

    monkeypatch.setattr(checks, "merge_coincident",
                        lambda *a, **k: pytest.fail("the blank file went on to the surface checks"))
    code, _, err = run(["mass", p, *BAR], capsys)
    one_line(code, err, "blank.stl", f"only {good} of its {n:,} triangles have three distinct corners")
