"""Job files and their flags: one set of keys, strict validation, flags override keys."""

import math
import tomllib
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from bladesolid.errors import InputError
from bladesolid.job import EXAMPLE_JOB, build_job, hub_frame_of, load_job


def minimal(**kw):
    d = {"mesh": "blade.stl", "units": "mm", "material": "al-2025-t6"}
    d.update(kw)
    return d


def test_example_job_parses_and_means_what_it_says(tmp_path):
    data = tomllib.loads(EXAMPLE_JOB)
    job = build_job(data, "job.toml", str(tmp_path))
    assert job.units == "mm" and job.blades == 3
    assert [o.name for o in job.operating_points] == ["take-off", "maximum continuous", "overspeed"]
    assert job.operating_points[2].rpm == 2875
    assert job.lumped[0][1] == pytest.approx(0.045)
    assert job.lumped[0][2] == pytest.approx((-0.010, 0.160, 0.030))  # mm -> m
    assert job.sweep_deg == (-10.0, 90.0, 1.0)
    assert job.mesh.endswith("demo_blade.stl") and job.mesh.startswith(str(tmp_path))
    assert job.angle_line == "chord" and job.rated_rpm == 2500


def test_readme_shows_the_one_example_job():
    # the README's job file is EXAMPLE_JOB, the same text `bladesolid demo` writes
    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    assert f"```toml\n{EXAMPLE_JOB}```" in readme


def test_example_job_sets_the_demo_blade_at_its_modelled_angle():
    # the demo blade is modelled at 25 deg at 0.75 R (bladesolid.demo.BladeParams); take-off and
    # overspeed run there, and the counterweight is sized at take-off
    from bladesolid.demo import BladeParams

    job = build_job(tomllib.loads(EXAMPLE_JOB), "job.toml", ".")
    p = BladeParams()
    assert job.reference_fraction == p.reference_radius_fraction
    assert [o.blade_angle_deg for o in job.operating_points] == [p.blade_angle_ref_deg, 28.0, p.blade_angle_ref_deg]
    assert job.counterweight is not None and job.counterweight.blade_angle_deg is None


def test_flag_overrides_key():
    job = build_job(minimal(rpm=2000, pitch_axis=[0, 1, 0]), "job.toml", ".", {"rpm": "2400", "pitch_axis": "1,0,0"})
    assert [o.rpm for o in job.operating_points] == [2400.0]
    assert job.pitch_axis == (1.0, 0.0, 0.0)


def test_flag_blade_angle_overrides_every_point():
    data = minimal(operating_point=[{"name": "a", "rpm": 2000, "blade_angle": 20}, {"name": "b", "rpm": 2500}])
    job = build_job(data, "job.toml", ".", {"blade_angle": 31.0})
    assert [o.blade_angle_deg for o in job.operating_points] == [31.0, 31.0]
    job = build_job(dict(data, blade_angle=12.0), "job.toml", ".")
    assert [o.blade_angle_deg for o in job.operating_points] == [20.0, 12.0]


def test_us_units_and_density():
    # a density in lb/in^3 and points in inches convert to SI (1 in = 25.4 mm exactly; NIST SP 811)
    job = build_job({"mesh": "b.stl", "units": "in", "density": "0.1015 lb/in^3", "pitch_point": [1, 0, 0]}, "j", ".")
    assert job.pitch_point_m == pytest.approx((0.0254, 0.0, 0.0))


@pytest.mark.parametrize(
    "data, fragment",
    [
        (minimal(pitch_axs=[0, 1, 0]), "unknown key 'pitch_axs'"),
        ({"units": "mm", "material": "al-2025-t6"}, "missing required key 'mesh'"),
        ({"mesh": "b.stl", "material": "al-2025-t6"}, "missing required key 'units'"),
        ({"mesh": "b.stl", "units": "mm"}, "does not guess a density"),
        (minimal(units="furlong"), "unknown length unit"),
        (minimal(units=3), "must be a string"),
        (minimal(rpm="fast"), "must be a number"),
        (minimal(rpm=-5), "must not be negative"),
        (minimal(blades=2.5), "whole number"),
        (minimal(pitch_axis=[0, 1]), "three numbers"),
        (minimal(pitch_axis="a,b,c"), "three numbers"),
        (minimal(thrust_axis=[0, 0, float("nan")]), "thrust_axis must be finite"),
        (minimal(sweep="0:90"), "FROM:TO:STEP"),
        (minimal(sweep="90:0:1"), "TO >= FROM"),
        (minimal(density="heavy", material=None) | {"material": "x"}, "density"),
        (minimal(rotation="clockwise"), "right"),
        (minimal(operating_point=[{"rpm": 2000, "speed": 3}]), "unknown key 'speed'"),
        (minimal(operating_point=[{"name": "x"}]), "missing required key 'rpm'"),
        (minimal(operating_point={"rpm": 1}), "array of tables"),
        (minimal(lumped_mass=[{"mass": "1 kg"}]), "missing required key 'position'"),
        (minimal(lumped_mass=[{"mass": "1 m", "position": [0, 0, 0]}]), "mass"),
        (minimal(stations=0), "between 1 and 2000"),
        (minimal(allowable="12 kg"), "stress"),
        (minimal(counterweight={"radius": 100, "arm": 50}), "missing required key 'clocking'"),
        (minimal(angle_line="protractor"), "key 'angle_line'"),
        (minimal(rated_rpm=0), "key 'rated_rpm'"),
    ],
)
def test_bad_jobs_are_refused_with_the_key_named(data, fragment):
    with pytest.raises(InputError) as ei:
        build_job({k: v for k, v in data.items() if v is not None}, "job.toml", ".")
    msg = str(ei.value)
    assert msg.startswith("job.toml")
    assert fragment in msg
    assert "\n" not in msg


@pytest.mark.parametrize(
    "kw, fragment",
    [
        (dict(pitch_axis=[0, 1.2, 0]), "unit vector"),
        (dict(pitch_axis=[0, 0, 0]), "zero vector"),
        (dict(pitch_axis=[0, 0, 1]), "parallel"),
        (dict(precone=45), "±30"),
    ],
)
def test_bad_axes_named(kw, fragment):
    job = build_job(minimal(**kw), "job.toml", ".")
    with pytest.raises(InputError) as ei:
        hub_frame_of(job)
    assert fragment in str(ei.value)
    assert str(ei.value).startswith("job.toml")


def test_precone_tilts_pitch_axis_forward():
    job = build_job(minimal(precone=3.0), "job.toml", ".")
    f = hub_frame_of(job)
    assert f.precone_deg == pytest.approx(3.0)
    assert f.k == pytest.approx([0.0, math.sin(math.radians(3)), math.cos(math.radians(3))])


def test_job_file_errors(tmp_path):
    with pytest.raises(InputError, match="job file not found"):
        load_job(tmp_path / "nope.toml")
    bad = tmp_path / "bad.toml"
    bad.write_text("mesh = [unclosed")
    with pytest.raises(InputError, match="not valid TOML"):
        load_job(bad)
    binary = tmp_path / "bin.toml"
    binary.write_bytes(b"\xff\xfe\x00garbage")
    with pytest.raises(InputError):
        load_job(binary)


# property-based: any TOML-like dict either validates or raises InputError, never anything else
_values = st.recursive(
    st.none() | st.booleans() | st.integers(-10**6, 10**6) | st.floats(allow_nan=True) | st.text(max_size=12),
    lambda children: st.lists(children, max_size=4) | st.dictionaries(st.text(max_size=8), children, max_size=3),
    max_leaves=8,
)
_keys = st.sampled_from(["mesh", "units", "density", "material", "rpm", "pitch_axis", "sweep", "stations",
                         "operating_point", "lumped_mass", "blades", "precone", "counterweight", "allowable",
                         "reference_fraction", "name", "bogus"])


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.dictionaries(_keys, _values, max_size=8))
def test_fuzz_job_parser_only_raises_input_error(data):
    data = {k: v for k, v in data.items() if v is not None}
    try:
        job = build_job(data, "fuzz.toml", ".")
    except InputError as exc:
        assert "\n" not in str(exc)
        return
    try:
        hub_frame_of(job)
    except InputError:
        pass


# --------------------------------------------------------------------------- CAD input (docs/CONVENTIONS.md §9)


def _step_file(path, unit_record="SI_UNIT(.MILLI.,.METRE.)"):
    """A STEP text with one declared length unit (no geometry: the job reads only the unit)."""
    path.write_text("ISO-10303-21;\nHEADER;\nENDSEC;\nDATA;\n#1=(GEOMETRIC_REPRESENTATION_CONTEXT(3) "
                    "GLOBAL_UNIT_ASSIGNED_CONTEXT((#2)) REPRESENTATION_CONTEXT('',''));\n"
                    f"#2=(LENGTH_UNIT() NAMED_UNIT(*) {unit_record});\nENDSEC;\nEND-ISO-10303-21;\n")
    return path


def test_cad_tolerance_key_and_flag(tmp_path):
    job = build_job(minimal(cad_tolerance=1e-3), "job.toml", str(tmp_path))
    assert job.cad_tolerance == 1e-3
    assert build_job(minimal(), "job.toml", str(tmp_path)).cad_tolerance is None
    job = build_job(minimal(cad_tolerance=1e-3), "job.toml", str(tmp_path), {"cad_tolerance": 5e-4})
    assert job.cad_tolerance == 5e-4
    for bad in (0.5, 0.0, "fine", True):
        with pytest.raises(InputError, match=r"^job.toml: key 'cad_tolerance': "):
            build_job(minimal(cad_tolerance=bad), "job.toml", str(tmp_path))
    with pytest.raises(InputError, match=r"^--cad-tolerance: must lie between"):
        build_job(minimal(), "job.toml", str(tmp_path), {"cad_tolerance": 1.0})


def test_step_and_iges_jobs_take_the_unit_the_file_declares(tmp_path):
    # the inch as a conversion-based unit of 25.4 mm (ISO 10303-41; exact inch definition)
    _step_file(tmp_path / "blade_mm.step")
    _step_file(tmp_path / "blade_in.stp", "CONVERSION_BASED_UNIT('INCH',#3) LENGTH_UNIT() NAMED_UNIT(*)")
    (tmp_path / "blade_in.stp").write_text((tmp_path / "blade_in.stp").read_text().replace(
        "ENDSEC;\nEND", "#3=LENGTH_MEASURE_WITH_UNIT(LENGTH_MEASURE(25.4),#4);\n"
        "#4=(LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT(.MILLI.,.METRE.));\nENDSEC;\nEND"))
    data = {"mesh": "blade_mm.step", "material": "al-2025-t6", "hub_centre": [0, 10, 0]}
    job = build_job(data, "job.toml", str(tmp_path))
    assert job.units == "mm" and job.hub_centre_m == pytest.approx((0.0, 0.01, 0.0))
    job = build_job({**data, "mesh": "blade_in.stp"}, "job.toml", str(tmp_path))
    assert job.units == "in" and job.hub_centre_m == pytest.approx((0.0, 0.254, 0.0))
    # a units key is kept (the reader checks that it agrees with the file)
    assert build_job({**data, "units": "mm"}, "job.toml", str(tmp_path)).units == "mm"


def test_jobs_without_units_for_files_that_carry_none(tmp_path):
    for mesh, what in (("blade.stl", "a mesh file"), ("blade.brep", "a BREP file")):
        with pytest.raises(InputError, match=f"missing required key 'units'.*{what} carries no unit"):
            build_job({"mesh": mesh, "material": "al-2025-t6"}, "job.toml", str(tmp_path))
    # a STEP file that is missing, or declares a unit bladesolid has no name for
    with pytest.raises(InputError, match="gone.step: file not found"):
        build_job({"mesh": "gone.step", "material": "al-2025-t6"}, "job.toml", str(tmp_path))
    _step_file(tmp_path / "micro.step", "SI_UNIT(.MICRO.,.METRE.)")
    with pytest.raises(InputError, match=r"micro.step: declares the length unit SI_UNIT\(.MICRO.,.METRE.\)"):
        build_job({"mesh": "micro.step", "material": "al-2025-t6"}, "job.toml", str(tmp_path))
def test_weld_repair_and_repair_limit_keys():
    # docs/CONVENTIONS.md §8: weld in the mesh unit (kept in m), repair true/false, the bound in percent
    job = build_job(minimal(weld=0.002, repair=True, repair_limit=2.5), "job.toml")
    assert job.weld_m == pytest.approx(2e-6) and job.repair is True and job.repair_limit_pct == 2.5
    plain = build_job(minimal(), "job.toml")
    assert plain.weld_m is None and plain.repair is False and plain.repair_limit_pct == 1.0
    # a flag overrides the key, and errors name the flag
    assert build_job(minimal(repair=False), "job.toml", flags={"repair": True}).repair is True
    for key, value, fragment in (("weld", -1.0, "distance >= 0"), ("repair", "yes", "true or false"),
                                 ("repair_limit", 0.0, "percentage"), ("repair_limit", 101, "percentage")):
        with pytest.raises(InputError, match=fragment) as info:
            build_job(minimal(**{key: value}), "job.toml")
        assert info.value.source == f"job.toml: key '{key}'"
    with pytest.raises(InputError) as info:
        build_job(minimal(), "command line", flags={"weld": -0.1})
    assert info.value.source == "--weld"
