"""The bounds of every size-like input, in one place: what is refused, and what is only odd.

Two kinds of limit (docs/CONVENTIONS.md §7):

* a **bound** refuses a value no blade can have, or one whose work or memory would have no
  end (an element size a thousand times too small, a speed of a billion rpm, a density that
  overflows the moments): an :class:`~bladesolid.errors.InputError` naming the key, flag or
  parameter, before the work starts;
* a **plausibility warning** flags a value that is possible but unlikely (a tip faster than
  Mach 1.5, a density outside the range of solid engineering materials): the run goes on and
  the warning travels with the result.

Each limit says where it comes from ("from memory" where recalled, "common practice, no
source" for a rule of thumb). The functions are small and pure; the callers name the source.
"""

from __future__ import annotations

import math
import os

from .errors import InputError

__all__ = ["DENSITY_LIMITS_KG_M3", "DENSITY_USUAL_KG_M3", "ELEMENT_BYTES", "MAX_ALLOWABLE_PA", "MAX_ANGLE_DEG",
           "MAX_ELEMENTS", "MAX_LUMPED_MASSES", "MAX_OPERATING_POINTS", "MAX_PROOF_FACTOR", "MAX_RPM",
           "MAX_STATIONS", "MAX_SWEEP_POINTS", "REACH_TIP_RADII", "SPEED_OF_SOUND_M_S", "TIP_MACH_MAX",
           "TIP_MACH_WARN", "check_angle", "check_density", "check_rpm", "density_warning", "element_budget",
           "allowed_elements", "memory_bytes", "regular_tet_volume", "smallest_element_size", "tip_speed_check"]

#: Most tetrahedral mass elements asked for (``elements``) or implied by an element size.
MAX_ELEMENTS = 50_000_000
#: Memory per mass element over a whole run, bytes: TetGen's output ~190 B/element (measured on
#: a 2-million-element sphere, ru_maxrss) plus the per-element arrays of the analysis (nodes,
#: tetrahedra, ten moments, the fields: ~0.8 kB) — rounded up.
ELEMENT_BYTES = 1024
#: Largest blade angle or pitch change, degrees: a full turn either way.
MAX_ANGLE_DEG = 360.0
#: Largest speed, rpm, before anything is loaded (the fastest rotating machines — dental
#: turbines, small turbomolecular pumps — stay well below; from memory). The blade's own tip
#: speed is bounded separately once its size is known (:func:`tip_speed_check`).
MAX_RPM = 1_000_000.0
#: Speed of sound in air at sea level (ISA, 15 °C), m/s (from memory).
SPEED_OF_SOUND_M_S = 340.0
#: Tip Mach number above which a speed is flagged as unlikely (common practice, no source:
#: propeller tips stay below ~Mach 1, fan tips below ~1.5).
TIP_MACH_WARN = 1.5
#: Tip Mach number above which a speed is refused: the root of a uniform bar spinning with its
#: tip at V is stressed ρV²/2 (Den Hartog, Strength of Materials, the rotating bar — from
#: memory); at Mach 10 that is 5.8e6 J/kg × ρ, above the specific strength of any engineering
#: material, carbon fibre's ~2.5e6 J/kg included (from memory).
TIP_MACH_MAX = 10.0
#: Densities refused outside this range, kg/m³: below a tenth of the lightest aerogels
#: (~1 kg/m³), above four times osmium, the densest element (22 590 kg/m³) — from memory.
DENSITY_LIMITS_KG_M3 = (0.1, 100_000.0)
#: Densities outside this range get a warning, kg/m³: from rigid foams (~30) to tungsten
#: alloys (~19 000) with margin (common practice, no source).
DENSITY_USUAL_KG_M3 = (10.0, 25_000.0)
#: Most points of one sweep (blade angle or speed); 100 000 rows is ~35 MB of JSON.
MAX_SWEEP_POINTS = 100_000
#: Most spanwise stations (a count or a list of radii).
MAX_STATIONS = 2000
#: Most operating points and lumped masses in one job.
MAX_OPERATING_POINTS = 1000
MAX_LUMPED_MASSES = 1000
#: Largest allowable stress, Pa (1 TPa: above the ideal strength of any solid, from memory).
MAX_ALLOWABLE_PA = 1.0e12
#: Largest proof-load factor (the usual one is 2; common practice, no source).
MAX_PROOF_FACTOR = 10.0
#: Lumped masses and counterweights farther than this many tip radii from the hub centre are
#: refused (they cannot be fixed to the blade; common practice, no source).
REACH_TIP_RADII = 2.0


def check_angle(value: float, source: str, what: str = "blade angle") -> float:
    """A finite angle within ±:data:`MAX_ANGLE_DEG` degrees, else an InputError naming ``source``.

    >>> check_angle(25.0, "--blade-angle")
    25.0
    >>> check_angle(1e300, "--blade-angle")
    Traceback (most recent call last):
    ...
    bladesolid.errors.InputError: --blade-angle: blade angle must be within ±360 degrees, got 1e+300
    """
    v = float(value)
    if not math.isfinite(v) or abs(v) > MAX_ANGLE_DEG:
        raise InputError(source, f"{what} must be within ±{MAX_ANGLE_DEG:g} degrees, got {value!r}")
    return v


def check_rpm(value: float, source: str, what: str = "rpm") -> float:
    """A finite, non-negative speed up to :data:`MAX_RPM`, else an InputError naming ``source``."""
    v = float(value)
    if not math.isfinite(v) or v < 0:
        raise InputError(source, f"{what} must be a finite speed of 0 rpm or more, got {value!r}")
    if v > MAX_RPM:
        raise InputError(source, f"{what} {v:g} is above {MAX_RPM:,.0f} rpm, faster than any rotating machine; "
                                 "check the number")
    return v


def check_density(value: float, source: str) -> float:
    """A density (kg/m³) within :data:`DENSITY_LIMITS_KG_M3`, else an InputError naming ``source``.

    >>> check_density(2810.0, "density")
    2810.0
    """
    lo, hi = DENSITY_LIMITS_KG_M3
    v = float(value)
    if not (lo <= v <= hi):
        raise InputError(source, f"density {v:g} kg/m^3 is outside {lo:g} to {hi:,.0f} kg/m^3, the range of any "
                                 "solid; check the number and its unit")
    return v


def density_warning(value: float, label: str) -> str | None:
    """A warning for a density (kg/m³) outside :data:`DENSITY_USUAL_KG_M3`, else None.

    >>> density_warning(2810.0, "al") is None
    True
    >>> density_warning(2.81, "2.81")  # doctest: +ELLIPSIS
    'density 2.81 kg/m^3 (2.81) is outside the 10 to 25,000 kg/m^3 of solid engineering materials; ...'
    """
    lo, hi = DENSITY_USUAL_KG_M3
    if lo <= value <= hi:
        return None
    return (f"density {value:g} kg/m^3 ({label}) is outside the {lo:g} to {hi:,.0f} kg/m^3 of solid engineering "
            "materials; check the number and its unit (g/cm^3 is 1000 kg/m^3)")


def tip_speed_check(rpm: float, tip_radius_m: float, source: str, what: str = "rpm") -> str | None:
    """Refuse a speed whose tip Mach number passes :data:`TIP_MACH_MAX`; a warning (str) above
    :data:`TIP_MACH_WARN`; None otherwise. Mach numbers at sea level (:data:`SPEED_OF_SOUND_M_S`).

    >>> tip_speed_check(2500, 1.0, "rpm") is None              # 262 m/s, Mach 0.77
    True
    >>> tip_speed_check(6000, 1.0, "rpm")  # doctest: +ELLIPSIS
    'rpm 6000 puts the blade tip (r = 1 m) at 628 m/s, Mach 1.85 at sea level; ...'
    """
    v = float(rpm) * 2.0 * math.pi / 60.0 * max(float(tip_radius_m), 0.0)
    mach = v / SPEED_OF_SOUND_M_S
    text = (f"{what} {float(rpm):g} puts the blade tip (r = {tip_radius_m:.4g} m) at {v:.0f} m/s, "
            f"Mach {mach:.3g} at sea level")
    if mach > TIP_MACH_MAX:
        raise InputError(source, f"{text}: above Mach {TIP_MACH_MAX:g} no material holds together; "
                                 "check the speed and the length unit")
    if mach > TIP_MACH_WARN:
        return f"{text}; check the speed and the length unit"
    return None


def regular_tet_volume(edge: float) -> float:
    """Volume of the regular tetrahedron of edge ``edge``: L³ / (6√2).

    >>> round(regular_tet_volume(1.0), 6)
    0.117851
    """
    return float(edge) ** 3 / (6.0 * math.sqrt(2.0))


def memory_bytes() -> int | None:
    """Memory this process may use, bytes: the physical memory, or a smaller cgroup limit
    (containers); None when unknown."""
    total = None
    try:
        total = int(os.sysconf("SC_PAGE_SIZE")) * int(os.sysconf("SC_PHYS_PAGES"))
    except (AttributeError, OSError, ValueError):
        pass
    for path in ("/sys/fs/cgroup/memory.max", "/sys/fs/cgroup/memory/memory.limit_in_bytes"):
        try:
            with open(path, encoding="ascii") as fh:
                text = fh.read().strip()
        except OSError:
            continue
        if text.isdigit() and int(text) > 0:
            total = min(total, int(text)) if total else int(text)
        break
    return total


def allowed_elements() -> int:
    """The most mass elements accepted here: :data:`MAX_ELEMENTS`, or fewer when the machine's
    memory (:func:`memory_bytes`) cannot hold that many (:data:`ELEMENT_BYTES` each)."""
    mem = memory_bytes()
    return int(min(MAX_ELEMENTS, mem // ELEMENT_BYTES)) if mem else MAX_ELEMENTS


def element_budget(volume_m3: float, max_volume_m3: float | None = None, target: int | None = None) -> tuple[float, str]:
    """About how many mass elements a request gives, and what is wrong with it ("" when nothing).

    volume_m3 : the solid's volume; max_volume_m3 : the largest element volume asked for;
    target : the element count asked for. TetGen fills the interior to the volume bound, so a
    bound gives about ``volume / max_volume`` elements (more where the surface forces smaller
    ones, fewer where elements stand on large surface triangles, which the surface-preserving
    switches never split: that only matters when the bound is coarse). It is refused above
    :data:`MAX_ELEMENTS` or when that many elements would need more memory
    (:data:`ELEMENT_BYTES` each) than the machine has.

    >>> element_budget(1e-3, max_volume_m3=1e-9)
    (1000000.0, '')
    >>> element_budget(1e-3, max_volume_m3=1e-18)[1]
    'more than the 50,000,000 accepted'
    """
    if target is not None:
        count = float(target)
    elif max_volume_m3 is not None and max_volume_m3 > 0:
        count = float(volume_m3) / float(max_volume_m3)
    else:
        return 0.0, ""
    if count > MAX_ELEMENTS:
        return count, f"more than the {MAX_ELEMENTS:,} accepted"
    mem = memory_bytes()
    if mem and count * ELEMENT_BYTES > mem:
        return count, f"needing about {count * ELEMENT_BYTES / 1e9:.3g} GB of memory, more than the {mem / 1e9:.3g} GB here"
    return count, ""


def smallest_element_size(volume_m3: float, count: float) -> float:
    """The element edge (m) at which a solid of ``volume_m3`` gives ``count`` regular elements."""
    return (6.0 * math.sqrt(2.0) * float(volume_m3) / max(float(count), 1.0)) ** (1.0 / 3.0)
