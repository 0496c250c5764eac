"""Limits files: the user's allowed changes of a repaired blade, from their approved repair data.

A small TOML file (see :data:`EXAMPLE_LIMITS`). The tool has no limits of its own: without a
limits file nothing is checked; the verdict then keeps the two values of the report contract
("within limits") and ``limits_checked`` is false.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

from ..errors import InputError

__all__ = ["EXAMPLE_LIMITS", "LIMITS_NOTE", "LIMIT_KEYS", "MAGNITUDE_LIMITS", "SIGNED_LIMITS", "TEXT_LIMIT_KEYS",
           "Limit", "LimitCheck", "Limits", "check_limits", "limit_value_text", "parse_limits", "read_limits"]

EXAMPLE_LIMITS = '''\
# bladesolid limits file: the allowed change of a repaired blade against its reference,
# repaired minus reference. These limits are YOURS, taken from the approved repair data
# for the blade; bladesolid has none of its own and only checks the figures against them.
source = "Larkspur Blade Repair, approved repair data BW-3, rev. B, table 4"  # free text

# signed changes: a range "LOW:HIGH" (one side may be left empty: ":+5 g"), or a list
# ["-50 g", "5 g"]; and/or a symmetric bound max_abs_NAME = "Q" (|change| <= Q)
mass = "-50 g:+5 g"
max_abs_static_moment = "20 kg*mm"      # m*|c_perp| about the rotation axis
radial_pull = "-2 kN:0.5 kN"            # at the operating point
max_abs_ctm = "5 N*m"                   # at the operating point
blade_angle = "-0.2:0.2"                # degrees, at the reference station

# magnitudes: the largest allowed value
cg_shift = "2 mm"                       # |change of the centre of gravity|
max_deviation = "3 mm"                  # deepest point of the repaired surface inside the reference
max_added_deviation = "0.5 mm"          # farthest point outside the reference
removed_volume = "5000 mm^3"
# added_volume = "100 mm^3"
# registration_rms = "0.1 mm"           # refuse a poor fit of the scan to the reference
'''

#: Signed changes: key -> (SI unit for pint, display unit, display factor, what it is).
SIGNED_LIMITS = {
    "mass": ("kg", "g", 1e3, "mass change"),
    "static_moment": ("kg*m", "kg·mm", 1e3, "static moment change"),
    "radial_pull": ("N", "N", 1.0, "radial pull change"),
    "ctm": ("N*m", "N·m", 1.0, "CTM change"),
    "blade_angle": ("degree", "deg", 1.0, "blade angle change"),
}
#: Magnitudes (largest allowed value): key -> (SI unit, display unit, display factor, what it is).
MAGNITUDE_LIMITS = {
    "cg_shift": ("m", "mm", 1e3, "CG shift"),
    "max_deviation": ("m", "mm", 1e3, "largest inward deviation (material missing)"),
    "max_added_deviation": ("m", "mm", 1e3, "largest outward deviation (material added)"),
    "removed_volume": ("m^3", "mm³", 1e9, "removed volume"),
    "added_volume": ("m^3", "mm³", 1e9, "added volume"),
    "registration_rms": ("m", "mm", 1e3, "registration RMS residual"),
}
TEXT_LIMIT_KEYS = ("source", "note")
LIMIT_KEYS = (tuple(SIGNED_LIMITS) + tuple(f"max_abs_{k}" for k in SIGNED_LIMITS) + tuple(MAGNITUDE_LIMITS)
              + TEXT_LIMIT_KEYS)

LIMITS_NOTE = ("The limits are the user's own, taken from the approved repair data (limits file); "
               "bladesolid has no limits of its own and only compares the computed figures with them.")


@dataclass(frozen=True)
class Limit:
    """One allowed bound, SI. ``kind``: ``"range"`` (low ≤ change ≤ high, either may be None),
    ``"abs"`` (|change| ≤ high) or ``"max"`` (magnitude ≤ high)."""

    key: str
    figure: str
    kind: str
    low: float | None
    high: float | None
    text: str


@dataclass(frozen=True)
class Limits:
    """A validated limits file."""

    path: str
    source: str
    note: str
    limits: tuple[Limit, ...]


def _fmt_signed(x: float, digits: int = 4) -> str:
    """``+5``, ``−62.1`` (typographic minus).

    >>> _fmt_signed(-62.08), _fmt_signed(5.0)
    ('−62.08', '+5')
    """
    return f"{x:+.{digits}g}".replace("-", "−")


def _fmt(x: float, digits: int = 4) -> str:
    return f"{x:.{digits}g}".replace("-", "−")


def _quantity(value, si_unit: str, where: str, what: str) -> float:
    from ..units import parse_quantity

    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise InputError(where, f"{what} must be a quantity with its unit (a string such as \"5 g\") or a number "
                                f"in {si_unit}, got {value!r}")
    if isinstance(value, str):
        value = value.strip().replace("−", "-").replace("·", "*")
        if not value:
            raise InputError(where, f"{what} is empty")
    return parse_quantity(value, si_unit, where, what, signed=True)


def parse_limits(data: dict, path: str) -> Limits:
    """Validate the parsed TOML of a limits file (see :data:`EXAMPLE_LIMITS`).

    >>> L = parse_limits({"mass": "-50 g:+5 g", "cg_shift": "2 mm"}, "limits.toml")
    >>> [(x.key, x.low, x.high) for x in L.limits]
    [('mass', -0.05, 0.005), ('cg_shift', None, 0.002)]
    >>> parse_limits({"mas": "5 g"}, "limits.toml")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    bladesolid.errors.InputError: limits.toml: key 'mas': unknown key; did you mean 'mass'? (expected one of: mass, ...
    """
    import difflib

    if not isinstance(data, dict):
        raise InputError(path, "a limits file is a TOML table of keys")
    out = []
    text = {"source": "", "note": ""}
    for key, value in data.items():
        where = f"{path}: key '{key}'"
        if key not in LIMIT_KEYS:
            close = difflib.get_close_matches(key, LIMIT_KEYS, n=1)
            hint = f"did you mean {close[0]!r}? " if close else ""
            raise InputError(where, f"unknown key; {hint}(expected one of: {', '.join(LIMIT_KEYS)})")
        if key in TEXT_LIMIT_KEYS:
            if not isinstance(value, str):
                raise InputError(where, f"must be a string (free text), got {value!r}")
            text[key] = value
            continue
        if key in SIGNED_LIMITS:
            si, _, _, what = SIGNED_LIMITS[key]
            if isinstance(value, list):
                if len(value) != 2:
                    raise InputError(where, f"a range list must have two entries [LOW, HIGH], got {len(value)}")
                parts = value
            elif isinstance(value, str) and ":" in value:
                parts = value.split(":")
                if len(parts) != 2:
                    raise InputError(where, f"expected a range \"LOW:HIGH\", got {value!r}")
            else:
                raise InputError(where, f"expected a range \"LOW:HIGH\" (e.g. \"-50 g:+5 g\") or a list [LOW, HIGH]; "
                                        f"for a symmetric bound use max_abs_{key}; got {value!r}")
            bounds = []
            for part in parts:
                if isinstance(part, str) and not part.strip():
                    bounds.append(None)
                else:
                    bounds.append(_quantity(part, si, where, f"{what} bound"))
            lo, hi = bounds
            if lo is None and hi is None:
                raise InputError(where, "a range needs at least one bound")
            if lo is not None and hi is not None and lo > hi:
                raise InputError(where, f"the low bound is above the high bound in {value!r}")
            shown = value if isinstance(value, str) else ":".join(str(p) for p in value)
            out.append(Limit(key, key, "range", lo, hi, shown))
            continue
        if key.startswith("max_abs_"):
            fig = key[len("max_abs_"):]
            si, _, _, what = SIGNED_LIMITS[fig]
            q = _quantity(value, si, where, f"largest |{what}|")
            if q < 0:
                raise InputError(where, f"must not be negative, got {value!r}")
            out.append(Limit(key, fig, "abs", None, q, str(value)))
            continue
        si, _, _, what = MAGNITUDE_LIMITS[key]
        q = _quantity(value, si, where, what)
        if q < 0:
            raise InputError(where, f"must not be negative, got {value!r}")
        out.append(Limit(key, key, "max", None, q, str(value)))
    if not out:
        raise InputError(path, "the limits file sets no limit; expected at least one of: "
                               + ", ".join(k for k in LIMIT_KEYS if k not in TEXT_LIMIT_KEYS))
    return Limits(path, text["source"], text["note"], tuple(out))


def read_limits(path) -> Limits:
    """Read and validate a limits file (TOML); one-line :class:`InputError` naming the file
    and the key on any problem."""
    from ..io import read_toml

    p = os.fspath(path)
    return parse_limits(read_toml(p, "limits file", 1_000_000), p)


@dataclass(frozen=True)
class LimitCheck:
    """One limit checked: the value (SI), whether it is within, and the reason when not."""

    limit: Limit
    value: float | None
    within: bool
    reason: str


def limit_value_text(check: LimitCheck) -> str:
    """The checked value in the display unit of its limit (``"−9.034 g"``, ``"3.2 mm"``)."""
    fig = check.limit.figure
    table = SIGNED_LIMITS if fig in SIGNED_LIMITS else MAGNITUDE_LIMITS
    _, unit, k, _ = table[fig]
    if check.value is None:
        return "—"
    return f"{(_fmt_signed if fig in SIGNED_LIMITS else _fmt)(check.value * k)} {unit}"


def check_limits(limits: Limits, figures: dict) -> tuple[LimitCheck, ...]:
    """Check every limit against ``figures`` (SI; keys of :data:`SIGNED_LIMITS` and
    :data:`MAGNITUDE_LIMITS`; a value None cannot be checked and counts as exceeded).

    >>> L = parse_limits({"mass": "-50 g:+5 g"}, "limits.toml")
    >>> check_limits(L, {"mass": -0.0621})[0].reason
    'mass change −62.1 g is below the allowed −50 g (limits.toml: mass = "-50 g:+5 g")'
    """
    out = []
    for lim in limits.limits:
        table = SIGNED_LIMITS if lim.figure in SIGNED_LIMITS else MAGNITUDE_LIMITS
        _, unit, k, what = table[lim.figure]
        value = figures.get(lim.figure)
        src = f'({os.path.basename(limits.path)}: {lim.key} = "{lim.text}")'
        if value is None:
            out.append(LimitCheck(lim, None, False, f"{what} could not be determined, so {src} cannot be met"))
            continue
        v = float(value)
        reason = ""
        if lim.kind == "range":
            if lim.low is not None and v < lim.low:
                reason = f"{what} {_fmt_signed(v * k)} {unit} is below the allowed {_fmt_signed(lim.low * k)} {unit} {src}"
            elif lim.high is not None and v > lim.high:
                reason = f"{what} {_fmt_signed(v * k)} {unit} is above the allowed {_fmt_signed(lim.high * k)} {unit} {src}"
        elif lim.kind == "abs":
            if abs(v) > lim.high:
                reason = f"{what} {_fmt_signed(v * k)} {unit} exceeds the allowed ±{_fmt(lim.high * k)} {unit} {src}"
        elif v > lim.high:
            reason = f"{what} {_fmt(v * k)} {unit} exceeds the allowed {_fmt(lim.high * k)} {unit} {src}"
        out.append(LimitCheck(lim, v, not reason, reason))
    return tuple(out)
