"""The one conversion layer: declared length units in, SI inside, SI or US customary out.

Everything inside bladesolid is SI (m, kg, s, N, rad). Quantities typed by a user
(densities, masses, allowable stresses) are parsed with pint; the registry is built
lazily on first use so that commands which do not need it stay fast.
"""

from __future__ import annotations

import functools
import math

from .errors import InputError

__all__ = ["CUSTOMARY", "INCH", "LB", "LBF", "LENGTH_UNITS", "length_scale", "parse_density", "parse_mass",
           "parse_moment", "parse_quantity", "parse_stress", "rpm_to_rad_s", "to_customary", "unit_label"]

#: Metres per declared model length unit (exact definitions: 1 in = 25.4 mm, 1 ft = 12 in).
LENGTH_UNITS: dict[str, float] = {
    "mm": 1e-3,
    "cm": 1e-2,
    "m": 1.0,
    "in": 0.0254,
    "ft": 0.3048,
}

#: SI unit of each kind of output figure, and its US customary counterpart with the factor
#: (customary = SI * factor). 1 lb = 0.45359237 kg and 1 lbf = 4.4482216152605 N (exact).
LB = 0.45359237
LBF = 4.4482216152605
INCH = 0.0254
CUSTOMARY: dict[str, tuple[str, str, float]] = {
    "length": ("m", "in", 1.0 / INCH),
    "mass": ("kg", "lb", 1.0 / LB),
    "volume": ("m^3", "in^3", 1.0 / INCH**3),
    "force": ("N", "lbf", 1.0 / LBF),
    "moment": ("N·m", "in·lbf", 1.0 / (LBF * INCH)),
    "static_moment": ("kg·m", "lb·in", 1.0 / (LB * INCH)),
    "inertia": ("kg·m^2", "lb·in^2", 1.0 / (LB * INCH**2)),
    "stress": ("Pa", "psi", 1.0 / (LBF / INCH**2)),
    "density": ("kg/m^3", "lb/in^3", INCH**3 / LB),
    "stiffness": ("N·m/rad", "in·lbf/rad", 1.0 / (LBF * INCH)),
}


def length_scale(unit: str, source: str = "unit") -> float:
    """Metres per model unit for a declared length unit.

    >>> length_scale("mm")
    0.001
    """
    try:
        return LENGTH_UNITS[unit]
    except KeyError:
        raise InputError(
            source, f"unknown length unit {unit!r}; use one of {', '.join(LENGTH_UNITS)}"
        ) from None


def to_customary(value, kind: str):
    """Convert an SI value (scalar or array) of the given kind to US customary.

    >>> round(to_customary(1000.0, "force"), 3)
    224.809
    """
    return value * CUSTOMARY[kind][2]


def unit_label(kind: str, system: str = "si") -> str:
    """Unit string of a kind of figure in ``"si"`` or ``"us"`` units."""
    si, us, _ = CUSTOMARY[kind]
    return si if system == "si" else us


#: Exact factors to SI of the few density units almost every job uses, so that the common
#: case does not pay for building pint's registry (~0.4 s); pint parses everything else
#: (and the tests check these factors against it).
_FAST_UNITS: dict[str, tuple[str, float]] = {
    "kg/m^3": ("kg/m^3", 1.0), "kg/m3": ("kg/m^3", 1.0), "kg/m**3": ("kg/m^3", 1.0),
    "g/cm^3": ("kg/m^3", 1000.0), "g/cm3": ("kg/m^3", 1000.0), "g/cm**3": ("kg/m^3", 1000.0),
    "lb/in^3": ("kg/m^3", LB / INCH**3), "lb/in3": ("kg/m^3", LB / INCH**3), "lb/in**3": ("kg/m^3", LB / INCH**3),
    "kg": ("kg", 1.0), "g": ("kg", 1e-3), "lb": ("kg", LB),
}


def _fast_quantity(s: str, si_unit: str):
    """``"2810 kg/m^3"`` → 2810.0 without pint for the units of :data:`_FAST_UNITS`, else None."""
    parts = s.split()
    if len(parts) != 2:
        return None
    unit = _FAST_UNITS.get(parts[1])
    if unit is None or unit[0] != si_unit:
        return None
    try:
        return float(parts[0]) * unit[1]
    except ValueError:
        return None


@functools.lru_cache(maxsize=1)
def _registry():
    import pint

    return pint.UnitRegistry()


def parse_quantity(text, si_unit: str, source: str, what: str, signed: bool = False) -> float:
    """Parse ``"2810 kg/m^3"``-style text (or a bare number, taken in ``si_unit``) to SI.

    Raises :class:`InputError` naming ``source`` when the text is not a finite, positive
    quantity of the right dimension.

    >>> parse_quantity("0.1015 lb/in^3", "kg/m^3", "job.toml", "density")  # doctest: +ELLIPSIS
    2809.5...
    >>> parse_quantity(2810, "kg/m^3", "job.toml", "density")
    2810.0
    """
    if isinstance(text, bool):
        raise InputError(source, f"{what} must be a number or a quantity with a unit, not {text!r}")
    if isinstance(text, (int, float)):
        value = float(text)
    else:
        s = str(text).strip()
        try:
            value = float(s)
        except ValueError:
            value = _fast_quantity(s, si_unit)
        if value is None:
            import pint

            ureg = _registry()
            try:
                q = ureg.Quantity(s.replace("·", "*"))
                value = float(q.to(si_unit).magnitude)
            except (pint.errors.PintError, ValueError, TypeError, AttributeError, SyntaxError) as exc:
                msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
                raise InputError(
                    source, f"{what} {s!r} is not a quantity in units of {si_unit} ({msg})"
                ) from None
    if not math.isfinite(value) or (value <= 0.0 and not signed):
        raise InputError(source, f"{what} must be finite and positive, got {text!r}")
    return value


def parse_density(text, source: str = "density") -> float:
    """Density in kg/m³ from a quantity with its unit or a bare number in kg/m³, within the
    bounds of :data:`bladesolid.bounds.DENSITY_LIMITS_KG_M3`."""
    from .bounds import check_density

    return check_density(parse_quantity(text, "kg/m^3", source, "density"), source)


def parse_mass(text, source: str) -> float:
    """Mass in kg from a quantity with its unit or a bare number in kg."""
    return parse_quantity(text, "kg", source, "mass")


def parse_moment(text, source: str) -> float:
    """A moment in N·m (may be negative) from a quantity with its unit or a bare number."""
    return parse_quantity(text, "N*m", source, "moment", signed=True)


def parse_stress(text, source: str) -> float:
    """Stress in Pa from a quantity with its unit or a bare number in Pa."""
    return parse_quantity(text, "Pa", source, "stress")


def rpm_to_rad_s(rpm):
    """Angular speed Ω in rad/s from rev/min (scalar → float, array → array).

    >>> round(rpm_to_rad_s(60.0), 12) == round(2 * math.pi, 12)
    True
    """
    if hasattr(rpm, "__len__"):
        import numpy as np

        return np.asarray(rpm, dtype=float) * (2.0 * math.pi / 60.0)
    return float(rpm) * (2.0 * math.pi / 60.0)
