"""Limits files and the verdict (bladesolid.compare.limits).

References: the limits written by the test (the tool has none of its own); the example limits
file's own figures.
"""

from __future__ import annotations

import pytest

from bladesolid import compare
from bladesolid.errors import InputError


def test_example_limits_parse(tmp_path):
    p = tmp_path / "limits.toml"
    p.write_text(compare.EXAMPLE_LIMITS)
    L = compare.read_limits(p)
    by = {x.key: x for x in L.limits}
    assert by["mass"].low == pytest.approx(-0.05) and by["mass"].high == pytest.approx(0.005)
    assert by["max_abs_static_moment"].high == pytest.approx(0.02)        # 20 kg·mm = 0.02 kg·m
    assert by["radial_pull"].low == pytest.approx(-2000.0)
    assert by["removed_volume"].high == pytest.approx(5e-6)               # 5000 mm³
    assert by["blade_angle"].high == pytest.approx(0.2)
    assert L.source.startswith("Larkspur")


@pytest.mark.parametrize("text, key, words", [
    ('mas = "5 g"', "mas", "did you mean 'mass'"),
    ('mass = "5 g"', "mass", "LOW:HIGH"),
    ('mass = "5 mm:6 mm"', "mass", "not a quantity in units of kg"),
    ('mass = "5 g:-5 g"', "mass", "low bound is above"),
    ('mass = ":"', "mass", "at least one bound"),
    ('mass = ["1 g"]', "mass", "two entries"),
    ("cg_shift = true", "cg_shift", "must be a quantity"),
    ('cg_shift = "-2 mm"', "cg_shift", "must not be negative"),
    ('max_abs_ctm = "5 N"', "max_abs_ctm", "not a quantity in units of N*m"),
    ("source = 3", "source", "must be a string"),
    ("[delta]\nmass = \"1 g\"", "delta", "unknown key"),
])
def test_limits_validation(tmp_path, text, key, words):
    p = tmp_path / "limits.toml"
    p.write_text(text + "\n")
    with pytest.raises(InputError) as exc:
        compare.read_limits(p)
    msg = str(exc.value)
    assert msg.startswith(f"{p}: key '{key}'") and words in msg and "\n" not in msg


def test_limits_file_problems(tmp_path):
    p = tmp_path / "limits.toml"
    p.write_text('source = "only text"\n')
    with pytest.raises(InputError, match="sets no limit"):
        compare.read_limits(p)
    p.write_text("mass = \n")
    with pytest.raises(InputError, match="not valid TOML"):
        compare.read_limits(p)
    with pytest.raises(InputError, match="not found"):
        compare.read_limits(tmp_path / "none.toml")


def test_limit_reasons_one_sided_and_symmetric():
    L = compare.parse_limits({"mass": ":+5 g", "max_abs_ctm": "5 N*m", "cg_shift": "2 mm"}, "l.toml")
    checks = compare.check_limits(L, {"mass": 0.0071, "ctm": -6.0, "cg_shift": 0.001})
    assert [c.within for c in checks] == [False, False, True]
    assert checks[0].reason.startswith("mass change +7.1 g is above the allowed +5 g")
    assert checks[1].reason.startswith("CTM change −6 N·m exceeds the allowed ±5 N·m")
    # a figure that could not be determined does not pass silently
    L2 = compare.parse_limits({"blade_angle": "-0.1:0.1"}, "l.toml")
    assert not compare.check_limits(L2, {"blade_angle": None})[0].within


def test_verdict_flips_when_a_limit_is_tightened(dressed, tmp_path):
    removed_mm3 = dressed.removed_volume_m3 * 1e9
    loose = tmp_path / "loose.toml"
    loose.write_text(f'source = "test"\nremoved_volume = "{removed_mm3 * 1.5:.1f} mm^3"\nmass = "-50 g:+5 g"\n')
    tight = tmp_path / "tight.toml"
    tight.write_text(f'removed_volume = "{removed_mm3 * 0.5:.1f} mm^3"\nmass = "-5 g:+5 g"\n')
    ok = compare.check_limits(compare.read_limits(loose), dressed.figures())
    assert all(c.within for c in ok)
    bad = compare.check_limits(compare.read_limits(tight), dressed.figures())
    reasons = [c.reason for c in bad if not c.within]
    assert len(reasons) == 2
    assert reasons[0].startswith("removed volume ") and "exceeds the allowed" in reasons[0]
    assert reasons[1].startswith("mass change −9.") and "is below the allowed −5 g" in reasons[1]
