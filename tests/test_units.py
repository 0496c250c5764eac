"""The conversion layer: the fast path for common units agrees with pint (the reference library)."""

import pytest

from bladesolid import units
from bladesolid.errors import InputError


@pytest.mark.parametrize("unit", sorted(units._FAST_UNITS))
def test_fast_units_agree_with_pint(unit):
    si = units._FAST_UNITS[unit][0]
    spelled = unit if ("^" in unit or "**" in unit or not unit.endswith("3")) else unit[:-1] + "^3"
    q = units._registry().Quantity(f"2.5 {spelled}")
    assert units._fast_quantity(f"2.5 {unit}", si) == pytest.approx(float(q.to(si).magnitude), rel=1e-14)


def test_other_units_go_through_pint():
    # 1 lb/ft^3 = 16.018463 kg/m^3 (NIST SP 811 — from memory)
    assert units.parse_density("1 lb/ft^3") == pytest.approx(16.018463, rel=1e-7)
    assert units.parse_stress("240 MPa", "x") == pytest.approx(240e6)
    with pytest.raises(InputError, match="not a quantity in units of kg/m"):
        units.parse_density("2810 kg")  # a mass, not a density
    with pytest.raises(InputError, match="positive"):
        units.parse_density("-1 kg/m^3")


def test_density_fast_path_does_not_accept_wrong_dimension():
    assert units._fast_quantity("3 kg", "kg/m^3") is None
    assert units._fast_quantity("3 kg/m^3 extra", "kg/m^3") is None
