"""Job files (TOML) and their command-line flags: one set of keys, one validation.

Every top-level key has the flag of the same name (``pitch_axis`` ↔ ``--pitch-axis``); a
flag given beside a job file overrides the key. Points and lengths are in the declared
model unit, angles in degrees, speeds in rpm; quantities with units are strings
(``"2810 kg/m^3"``). Unknown keys, wrong types, bad axes and the like raise
:class:`~bladesolid.errors.InputError` naming the file and the key.

A commented example is :data:`EXAMPLE_JOB` (also in the README).
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass

import numpy as np

from . import bounds
from .errors import InputError

__all__ = ["EXAMPLE_JOB", "KEYS", "build_job", "check_against_blade", "check_pitch_point", "CounterweightRequest",
           "hub_frame_of", "Job", "load_job", "OperatingPoint", "range_points", "require_operating_points"]

EXAMPLE_JOB = '''\
# bladesolid job file: every key has the command-line flag of the same name
# (pitch_axis <-> --pitch-axis); a flag given beside the job file overrides it.
# This is the demo job: the invented Brightwater Propellers BW-3 blade (3 blades, 2.0 m
# diameter, aluminium, modelled at 25 deg at 0.75 R). Every number here is invented.
name = "BW-3 demo blade, serial BW3-0001 (invented)"   # free text, shown in the reports
mesh = "demo_blade.stl"                # path relative to this file
units = "mm"                           # length unit of the mesh and of every point below
material = "al-2025-t6"                # or: density = "2810 kg/m^3"; a list gives one per body
blades = 3                             # number of blades on the hub

# hub frame, in the model frame (defaults: the mesh is modelled in the hub frame)
hub_centre = [0.0, 0.0, 0.0]           # O, where the pitch axis meets the rotation axis
thrust_axis = [0.0, 0.0, 1.0]          # k, rotation axis pointing forward
pitch_axis = [0.0, 1.0, 0.0]           # e, outboard (unit vector)
# pitch_point = [0.0, 0.0, 0.0]        # a point of the pitch axis when it is offset from O
precone = 0.0                          # degrees: the blade is coned tip forward about the hub's x axis
rotation = "right"                     # right-handed about the thrust axis, or "left"

reference_fraction = 0.75              # reference station for the blade angle (x tip radius)
angle_line = "chord"                   # blade angle on the nose-to-tail "chord" or on the "face"
# reference_radius = 750.0             # or an explicit radius along the pitch axis
sweep = "-10:90:1"                     # blade-angle range of the CTM sweep, degrees FROM:TO:STEP
rpm_sweep = "0:3000:100"               # speed range of the speed sweep, rpm FROM:TO:STEP
stations = 16                          # spanwise stations: a count, or a list of radii
allowable = "200 MPa"                  # allowable for the centrifugal margin of safety (invented)
proof_factor = 2.0                     # centrifugal proof load = factor x radial pull at rated_rpm
rated_rpm = 2500                       # maximum rated speed (default: the highest operating point)

[[operating_point]]                    # the first one is used for sweeps and spanwise tables
name = "take-off"
rpm = 2500
blade_angle = 25.0                     # degrees; omit to use the modelled blade angle

[[operating_point]]
name = "maximum continuous"
rpm = 2400
blade_angle = 28.0

[[operating_point]]
name = "overspeed"
rpm = 2875
blade_angle = 25.0

[[lumped_mass]]                        # point masses fixed to the blade; they turn with it
name = "balance weight"
mass = "0.045 kg"
position = [-10.0, 160.0, 30.0]        # model frame, model units

[counterweight]                        # size a counterweight for a net CTM at take-off
radius = 160.0                         # along the pitch axis, model units
arm = 90.0                             # from the pitch axis, model units
clocking = 90.0                        # degrees from the chord line (90: on the chord normal)
target_ctm = "0 N*m"                   # the net CTM wanted
'''

#: Every top-level key and the command-line argument that gives it (MESH: the positional
#: argument; "": a table, given in a job file only).
KEYS: dict[str, str] = {
    "name": "--name",
    "mesh": "MESH",
    "units": "--units",
    "density": "--density",
    "material": "--material",
    "blades": "--blades",
    "hub_centre": "--hub-centre",
    "thrust_axis": "--thrust-axis",
    "pitch_axis": "--pitch-axis",
    "pitch_point": "--pitch-point",
    "precone": "--precone",
    "rotation": "--rotation",
    "reference_fraction": "--reference-fraction",
    "reference_radius": "--reference-radius",
    "rpm": "--rpm",
    "blade_angle": "--blade-angle",
    "pitch_change": "--pitch-change",
    "sweep": "--sweep",
    "rpm_sweep": "--rpm-sweep",
    "stations": "--stations",
    "allowable": "--allowable",
    "proof_factor": "--proof-factor",
    "rated_rpm": "--rated-rpm",
    "angle_line": "--angle-line",
    "elements": "--elements",
    "element_size": "--element-size",
    "field_faces": "--field-faces",
    "cad_tolerance": "--cad-tolerance",
    "reference": "--reference",
    "limits": "--limits",
    "weld": "--weld",
    "repair": "--repair",
    "repair_limit": "--repair-limit",
    "operating_point": "",
    "lumped_mass": "",
    "counterweight": "",
    "set": "",
}

_OPERATING_KEYS = {"name", "rpm", "blade_angle", "pitch_change"}
_LUMPED_KEYS = {"name", "mass", "position"}
_COUNTERWEIGHT_KEYS = {"radius", "arm", "clocking", "blade_angle", "rpm", "target_ctm"}


@dataclass(frozen=True)
class OperatingPoint:
    """A named speed (rpm) with a blade angle (absolute, or a change from modelled; deg)."""

    name: str
    rpm: float
    blade_angle_deg: float | None = None
    pitch_change_deg: float | None = None


@dataclass(frozen=True)
class CounterweightRequest:
    """Counterweight sizing request (lengths m, angles deg, CTM target N·m)."""

    radius_m: float
    arm_m: float
    clocking_deg: float
    blade_angle_deg: float | None
    rpm: float | None
    target_ctm_Nm: float


@dataclass(frozen=True)
class Job:
    """A validated job: everything in SI (lengths m, model frame), angles deg, speeds rpm."""

    source: str
    mesh: str
    units: str
    name: str
    densities: tuple = ()
    blades: int = 1
    hub_centre_m: tuple = (0.0, 0.0, 0.0)
    thrust_axis: tuple = (0.0, 0.0, 1.0)
    pitch_axis: tuple = (0.0, 1.0, 0.0)
    pitch_point_m: tuple | None = None
    precone_deg: float | None = None
    rotation: str = "right"
    reference_fraction: float = 0.75
    reference_radius_m: float | None = None
    operating_points: tuple[OperatingPoint, ...] = ()
    sweep_deg: tuple[float, float, float] = (-10.0, 90.0, 1.0)
    rpm_sweep: tuple[float, float, float] | None = None
    stations: object = 16  # int count, or tuple of radii in m
    allowable_Pa: float | None = None
    proof_factor: float = 2.0
    rated_rpm: float | None = None
    angle_line: str = "chord"
    elements: int | None = None
    element_size_m: float | None = None
    field_faces: int | None = None
    cad_tolerance: float | None = None
    lumped: tuple = ()
    counterweight: CounterweightRequest | None = None
    reference: str | None = None
    limits: str | None = None
    set_reports: tuple = ()
    weld_m: float | None = None  # weld distance (key ``weld``, given in the mesh unit), m
    repair: bool = False
    repair_limit_pct: float = 1.0

    #: (key, where) of every key given: where it came from as messages name it (the flag, or
    #: the file and key); "operating_point#i" names where the i-th operating point came from
    origins: tuple = ()

    def where(self, key: str) -> str:
        """Where ``key`` was given, as messages name it: ``--flag``, or ``file: key 'name'``."""
        found = dict(self.origins).get(key)
        if found:
            return found
        if self.source == "command line" and KEYS.get(key):
            return KEYS[key]
        return f"{self.source}: key '{key}'"


def _parse_range(text, source: str, key: str) -> tuple[float, float, float]:
    """``"FROM:TO:STEP"`` (or a list of three numbers) → floats, checked.

    >>> _parse_range("-10:90:0.5", "job.toml", "sweep")
    (-10.0, 90.0, 0.5)
    """
    if isinstance(text, (list, tuple)):
        parts = list(text)
    else:
        parts = str(text).split(":")
    try:
        lo, hi, step = (float(p) for p in parts)
    except (TypeError, ValueError):
        raise InputError(source, f"{key} must be FROM:TO:STEP (three numbers), got {text!r}") from None
    if not all(math.isfinite(x) for x in (lo, hi, step)) or step <= 0 or hi < lo:
        raise InputError(source, f"{key} must have TO >= FROM and STEP > 0, got {text!r}")
    if (hi - lo) / step >= bounds.MAX_SWEEP_POINTS:
        raise InputError(source, f"{key} asks for more than {bounds.MAX_SWEEP_POINTS:,} points, got {text!r}; "
                                 "give a larger STEP")
    return lo, hi, step


def range_points(lo: float, hi: float, step: float, source: str = "range") -> np.ndarray:
    """The points lo, lo + step, … up to hi (included when on the grid) of a FROM:TO:STEP range.

    >>> range_points(0.0, 1.0, 0.25).tolist()
    [0.0, 0.25, 0.5, 0.75, 1.0]
    """
    if not (step > 0 and hi >= lo):
        raise InputError(source, f"expected FROM:TO:STEP with TO >= FROM and STEP > 0, got {lo}:{hi}:{step}")
    n = int(math.floor((hi - lo) / step + 1e-9)) + 1
    return lo + step * np.arange(n)


def _parse_vec3(text, source: str, key: str) -> tuple[float, float, float]:
    """``"X,Y,Z"`` or a list of three numbers → floats.

    >>> _parse_vec3("0,1,0", "--pitch-axis", "pitch axis")
    (0.0, 1.0, 0.0)
    """
    parts = text if isinstance(text, (list, tuple)) else str(text).split(",")
    if len(parts) != 3 or any(isinstance(p, bool) for p in parts):
        raise InputError(source, f"{key} must be three numbers X,Y,Z, got {text!r}")
    try:
        v = tuple(float(p) for p in parts)
    except (TypeError, ValueError):
        raise InputError(source, f"{key} must be three numbers X,Y,Z, got {text!r}") from None
    if not all(math.isfinite(x) for x in v):
        raise InputError(source, f"{key} must be finite, got {text!r}")
    return v


def _where(src: str, key: str, from_flag: bool) -> str:
    flag = KEYS.get(key, "")
    return flag if from_flag and flag else f"{src}: key '{key}'"


def _num(v, where: str, what: str, integer: bool = False) -> float:
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        if isinstance(v, str):
            try:
                v = float(v)
            except ValueError:
                raise InputError(where, f"{what} must be a number, got {v!r}") from None
        else:
            raise InputError(where, f"{what} must be a number, got {v!r}")
    if not math.isfinite(float(v)):
        raise InputError(where, f"{what} must be finite, got {v!r}")
    if integer:
        if float(v) != int(v):
            raise InputError(where, f"{what} must be a whole number, got {v!r}")
        return int(v)
    return float(v)


def _checked_tables(value, source: str, key: str, allowed: set, required: tuple):
    """[(where, table), ...] of an array of tables ``[[key]]``, each checked for unknown and
    missing keys (``where`` names the file, the table and its number for messages)."""
    if not isinstance(value, list) or not all(isinstance(t, dict) for t in value):
        raise InputError(source, f"'{key}' must be an array of tables ([[{key}]])")
    out = []
    for i, t in enumerate(value, 1):
        where = f"{source}: {key} {i}"
        for k in t:
            if k not in allowed:
                raise InputError(where, f"unknown key {k!r}; expected {', '.join(sorted(allowed))}")
        for k in required:
            if k not in t:
                raise InputError(where, f"missing required key {k!r}")
        out.append((where, t))
    return out


def build_job(data: dict, source: str, base_dir: str = ".", flags: dict | None = None) -> Job:
    """Validate job keys (from a file) and flags (overriding them) into a :class:`Job`.

    data : the parsed TOML;  flags : keys given on the command line (same names and kinds).
    Relative paths are taken from ``base_dir`` (the job file's folder) for file keys and
    from the working directory for flags.
    """
    from .units import length_scale, parse_density, parse_mass, parse_stress

    flags = {k: v for k, v in (flags or {}).items() if v is not None}
    merged = dict(data)
    merged.update(flags)
    from_flag = set(flags)
    for key in merged:
        if key not in KEYS:
            close = [k for k in KEYS if k.startswith(key[:4])]
            hint = f"; did you mean {close[0]!r}?" if close else ""
            raise InputError(source, f"unknown key {key!r}{hint}")

    def w(key):
        return _where(source, key, key in from_flag)

    def path_of(key):
        v = merged[key]
        if not isinstance(v, str) or not v:
            raise InputError(w(key), f"must be a file path, got {v!r}")
        if key in from_flag or os.path.isabs(v):
            return v
        return os.path.join(base_dir, v)

    if "mesh" not in merged:
        raise InputError(source, "missing required key 'mesh' (the blade mesh file)")
    if "units" not in merged:
        merged["units"] = _declared_units(path_of("mesh"), source)
    units = merged["units"]
    if not isinstance(units, str):
        raise InputError(w("units"), f"must be a string such as \"mm\", got {units!r}")
    scale = length_scale(units, w("units"))

    densities = []
    for key, kind in (("density", "density"), ("material", "material")):
        if key in merged:
            v = merged[key]
            items = v if isinstance(v, list) else [v]
            for item in items:
                if kind == "material" and not isinstance(item, str):
                    raise InputError(w(key), f"must be a material name, got {item!r}")
                if kind == "density":
                    parse_density(item, w(key))
                densities.append((kind, item))
    if "density" in merged and "material" in merged:
        if "density" in from_flag and "material" not in from_flag:
            densities = [d for d in densities if d[0] == "density"]
        elif "material" in from_flag and "density" not in from_flag:
            densities = [d for d in densities if d[0] == "material"]
        elif not (isinstance(merged["density"], list) or isinstance(merged["material"], list)):
            raise InputError(source, "give either 'density' or 'material', not both")
    if not densities:
        raise InputError(source, "missing key 'density' or 'material': the tool does not guess a density")

    def vec(key, length=False):
        if key not in merged:
            return None
        v = _parse_vec3(merged[key], w(key), key)
        return tuple(x * scale for x in v) if length else v

    def opt_num(key, integer=False):
        return _num(merged[key], w(key), key, integer) if key in merged else None

    name = merged.get("name", os.path.basename(str(merged["mesh"])))
    if not isinstance(name, str):
        raise InputError(w("name"), f"must be a string, got {name!r}")
    blades = opt_num("blades", integer=True)
    if blades is not None and not (1 <= blades <= 64):
        raise InputError(w("blades"), f"must be between 1 and 64, got {blades}")
    rotation = merged.get("rotation", "right")
    if rotation not in ("right", "left"):
        raise InputError(w("rotation"), f"must be \"right\" or \"left\", got {rotation!r}")
    ref_fraction = opt_num("reference_fraction")
    if ref_fraction is not None and not (0.0 < ref_fraction <= 1.0):
        raise InputError(w("reference_fraction"), f"must be in (0, 1], got {ref_fraction}")
    ref_radius = opt_num("reference_radius")
    if ref_radius is not None and ref_radius <= 0:
        raise InputError(w("reference_radius"), f"must be positive, got {ref_radius}")

    # operating points
    ops = []
    op_where: list[str] = []
    if "operating_point" in merged and "rpm" in from_flag:
        merged.pop("operating_point")  # --rpm replaces the job's operating points
    if "operating_point" in merged:
        tables = _checked_tables(merged["operating_point"], source, "operating_point", _OPERATING_KEYS, ("rpm",))
        for i, (where, t) in enumerate(tables, 1):
            rpm = _num(t["rpm"], where, "rpm")
            if rpm < 0:
                raise InputError(where, f"rpm must not be negative, got {rpm}")
            bounds.check_rpm(rpm, where)
            op_where.append(where)
            nm = t.get("name", f"point {i}")
            if not isinstance(nm, str):
                raise InputError(where, f"name must be a string, got {nm!r}")
            ba = _num(t["blade_angle"], where, "blade_angle") if "blade_angle" in t else None
            pc = _num(t["pitch_change"], where, "pitch_change") if "pitch_change" in t else None
            for v, what in ((ba, "blade_angle"), (pc, "pitch_change")):
                if v is not None:
                    bounds.check_angle(v, where, what)
            if ba is not None and pc is not None:
                raise InputError(where, "give either blade_angle or pitch_change, not both")
            ops.append(OperatingPoint(nm, rpm, ba, pc))
    if "rpm" in merged:
        v = merged["rpm"]
        items = v if isinstance(v, list) else (str(v).split(",") if isinstance(v, str) else [v])
        for r in items:
            rpm = _num(r, w("rpm"), "rpm")
            if rpm < 0:
                raise InputError(w("rpm"), f"must not be negative, got {rpm}")
            bounds.check_rpm(rpm, w("rpm"))
            ops.append(OperatingPoint(f"{rpm:g} rpm", rpm))
            op_where.append(w("rpm"))
    if len(ops) > bounds.MAX_OPERATING_POINTS:
        raise InputError(source, f"{len(ops)} operating points, more than the {bounds.MAX_OPERATING_POINTS} accepted")
    ba_all = opt_num("blade_angle")
    pc_all = opt_num("pitch_change")
    if ba_all is not None:
        bounds.check_angle(ba_all, w("blade_angle"))
    if pc_all is not None:
        bounds.check_angle(pc_all, w("pitch_change"), "pitch change")
    if ba_all is not None and pc_all is not None:
        raise InputError(source, "give either blade_angle (--blade-angle) or pitch_change (--pitch-change), not both")
    if ba_all is not None or pc_all is not None:
        # a job-wide (or flag) angle applies to the points that do not set their own; a flag
        # overrides every point's own angle
        flagged = ("blade_angle" in from_flag) or ("pitch_change" in from_flag)
        ops = [
            OperatingPoint(o.name, o.rpm, ba_all, pc_all)
            if flagged or (o.blade_angle_deg is None and o.pitch_change_deg is None) else o
            for o in ops
        ]

    sweep = _parse_range(merged["sweep"], w("sweep"), "sweep") if "sweep" in merged else (-10.0, 90.0, 1.0)
    for v in sweep[:2]:
        bounds.check_angle(v, w("sweep"), "the sweep's FROM and TO")
    rpm_sweep = _parse_range(merged["rpm_sweep"], w("rpm_sweep"), "rpm_sweep") if "rpm_sweep" in merged else None
    for v in rpm_sweep[:2] if rpm_sweep else ():
        bounds.check_rpm(v, w("rpm_sweep"), "the speed sweep's FROM and TO")

    stations = merged.get("stations", 16)
    if isinstance(stations, str):
        parts = [p for p in stations.split(",") if p.strip()]
        stations = parts[0] if len(parts) == 1 else parts
    if isinstance(stations, list):
        if len(stations) > bounds.MAX_STATIONS:
            raise InputError(w("stations"), f"{len(stations)} station radii, more than the {bounds.MAX_STATIONS} accepted")
        radii = tuple(_num(s, w("stations"), "station radius") * scale for s in stations)
        if not radii or any(r <= 0 for r in radii):
            raise InputError(w("stations"), "station radii must be positive")
        stations = tuple(sorted(radii))
    else:
        stations = _num(stations, w("stations"), "stations", integer=True)
        if not (1 <= stations <= 2000):
            raise InputError(w("stations"), f"station count must be between 1 and 2000, got {stations}")

    allowable = parse_stress(merged["allowable"], w("allowable")) if "allowable" in merged else None
    if allowable is not None and allowable > bounds.MAX_ALLOWABLE_PA:
        raise InputError(w("allowable"), f"{allowable:g} Pa is above {bounds.MAX_ALLOWABLE_PA:g} Pa, stronger than "
                                         "any solid; check the number and its unit")
    proof = opt_num("proof_factor")
    if proof is not None and proof <= 0:
        raise InputError(w("proof_factor"), f"must be positive, got {proof}")
    if proof is not None and proof > bounds.MAX_PROOF_FACTOR:
        raise InputError(w("proof_factor"), f"must be at most {bounds.MAX_PROOF_FACTOR:g} (the usual factor is 2), "
                                            f"got {proof:g}")
    rated_rpm = opt_num("rated_rpm")
    if rated_rpm is not None and rated_rpm <= 0:
        raise InputError(w("rated_rpm"), f"must be a positive speed in rpm, got {rated_rpm}")
    if rated_rpm is not None:
        bounds.check_rpm(rated_rpm, w("rated_rpm"))
    angle_line = merged.get("angle_line", "chord")
    if angle_line not in ("chord", "face"):
        raise InputError(w("angle_line"), f"must be \"chord\" or \"face\", got {angle_line!r}")
    elements = opt_num("elements", integer=True)
    if elements is not None and not (1 <= elements <= bounds.MAX_ELEMENTS):
        raise InputError(w("elements"), f"must be between 1 and {bounds.MAX_ELEMENTS:,}, got {elements}")
    element_size = opt_num("element_size")
    if element_size is not None and element_size <= 0:
        raise InputError(w("element_size"), f"must be positive, got {element_size}")
    field_faces = opt_num("field_faces", integer=True)
    if field_faces is not None and field_faces < 100:
        raise InputError(w("field_faces"), f"must be at least 100, got {field_faces}")
    cad_tolerance = None
    if "cad_tolerance" in merged:
        from .cad import check_tolerance

        cad_tolerance = check_tolerance(_num(merged["cad_tolerance"], w("cad_tolerance"), "cad_tolerance"),
                                        w("cad_tolerance"))

    lumped = []
    if "lumped_mass" in merged:
        tables = _checked_tables(merged["lumped_mass"], source, "lumped_mass", _LUMPED_KEYS, ("mass", "position"))
        if len(tables) > bounds.MAX_LUMPED_MASSES:
            raise InputError(source, f"{len(tables)} lumped masses, more than the {bounds.MAX_LUMPED_MASSES} accepted")
        for i, (where, t) in enumerate(tables, 1):
            nm = t.get("name", f"lumped mass {i}")
            if not isinstance(nm, str):
                raise InputError(where, f"name must be a string, got {nm!r}")
            mass = parse_mass(t["mass"], where)
            pos = tuple(x * scale for x in _parse_vec3(t["position"], where, "position"))
            lumped.append((nm, mass, pos))

    cw = None
    if "counterweight" in merged:
        t = merged["counterweight"]
        where = f"{source}: counterweight"
        if not isinstance(t, dict):
            raise InputError(where, "must be a table ([counterweight])")
        for k in t:
            if k not in _COUNTERWEIGHT_KEYS:
                raise InputError(where, f"unknown key {k!r}; expected {', '.join(sorted(_COUNTERWEIGHT_KEYS))}")
        for k in ("radius", "arm", "clocking"):
            if k not in t:
                raise InputError(where, f"missing required key {k!r}")
        from .units import parse_moment

        target = parse_moment(t["target_ctm"], where) if "target_ctm" in t else 0.0
        arm = _num(t["arm"], where, "arm") * scale
        if arm <= 0:
            raise InputError(where, "arm must be positive")
        cw = CounterweightRequest(
            radius_m=_num(t["radius"], where, "radius") * scale,
            arm_m=arm,
            clocking_deg=bounds.check_angle(_num(t["clocking"], where, "clocking"), where, "clocking"),
            blade_angle_deg=bounds.check_angle(_num(t["blade_angle"], where, "blade_angle"), where)
            if "blade_angle" in t else None,
            rpm=bounds.check_rpm(_num(t["rpm"], where, "rpm"), where) if "rpm" in t else None,
            target_ctm_Nm=target,
        )

    set_reports = ()
    if "set" in merged:
        t = merged["set"]
        if not isinstance(t, dict) or set(t) - {"reports"} or not isinstance(t.get("reports", []), list):
            raise InputError(f"{source}: set", "expected a table with one key 'reports' (a list of report files)")
        set_reports = tuple(
            r if os.path.isabs(r) else os.path.join(base_dir, r) for r in t.get("reports", []) if isinstance(r, str)
        )

    weld, repair, repair_limit = _surface_keys(merged, w, scale)

    return Job(
        source=source,
        mesh=path_of("mesh"),
        units=units,
        name=name,
        densities=tuple(densities),
        blades=blades or 1,
        hub_centre_m=vec("hub_centre", True) or (0.0, 0.0, 0.0),
        thrust_axis=vec("thrust_axis") or (0.0, 0.0, 1.0),
        pitch_axis=vec("pitch_axis") or (0.0, 1.0, 0.0),
        pitch_point_m=vec("pitch_point", True),
        precone_deg=opt_num("precone"),
        rotation=rotation,
        reference_fraction=ref_fraction if ref_fraction is not None else 0.75,
        reference_radius_m=ref_radius * scale if ref_radius is not None else None,
        operating_points=tuple(ops),
        sweep_deg=sweep,
        rpm_sweep=rpm_sweep,
        stations=stations,
        allowable_Pa=allowable,
        proof_factor=proof if proof is not None else 2.0,
        rated_rpm=rated_rpm,
        angle_line=angle_line,
        elements=elements,
        element_size_m=element_size * scale if element_size is not None else None,
        field_faces=field_faces,
        cad_tolerance=cad_tolerance,
        lumped=tuple(lumped),
        counterweight=cw,
        reference=path_of("reference") if "reference" in merged else None,
        limits=path_of("limits") if "limits" in merged else None,
        set_reports=set_reports,
        origins=tuple((k, w(k)) for k in merged if KEYS.get(k) != "")
        + tuple((f"operating_point#{i}", wh) for i, wh in enumerate(op_where)),
        weld_m=weld,
        repair=repair,
        repair_limit_pct=repair_limit,
    )


def _declared_units(mesh: str, source: str) -> str:
    """The ``units`` of a job without the key: the length unit a STEP or IGES file declares
    (docs/CONVENTIONS.md §9); every other file needs the key."""
    from .cad import declares_unit, file_unit_of, is_cad
    from .units import LENGTH_UNITS

    if not declares_unit(mesh):
        what = "a BREP file" if is_cad(mesh) else "a mesh file"
        raise InputError(source, f"missing required key 'units' (mm, cm, m, in or ft): {what} carries no unit")
    unit = file_unit_of(mesh)
    if unit.name is None:
        raise InputError(mesh, f"declares the length unit {unit.label}, none of {', '.join(LENGTH_UNITS)}; the job's "
                               "points and lengths need one of them: re-export the file in one")
    return unit.name


def _surface_keys(merged: dict, w, scale: float):
    """``weld`` (a distance >= 0 in the mesh unit, returned in m), ``repair`` (true/false) and
    ``repair_limit`` (percent, above 0 and at most 100) of a job (docs/CONVENTIONS.md §8)."""
    weld = None
    if "weld" in merged:
        weld = _num(merged["weld"], w("weld"), "weld")
        if weld < 0:
            raise InputError(w("weld"), f"must be a distance >= 0 in the mesh unit, got {weld}")
        weld *= scale
    repair = merged.get("repair", False)
    if not isinstance(repair, bool):
        raise InputError(w("repair"), f"must be true or false, got {repair!r}")
    limit = 1.0
    if "repair_limit" in merged:
        limit = _num(merged["repair_limit"], w("repair_limit"), "repair_limit")
        if not 0 < limit <= 100:
            raise InputError(w("repair_limit"), f"must be a percentage above 0 and at most 100, got {limit}")
    return weld, repair, limit


def load_job(path, flags: dict | None = None) -> Job:
    """Read and validate a job file, with command-line flags overriding its keys."""
    from .io import read_toml

    return build_job(read_toml(path, "job file"), str(path), os.path.dirname(os.path.abspath(str(path))), flags)


def require_operating_points(job: Job) -> tuple[OperatingPoint, ...]:
    """The job's operating points; an :class:`InputError` naming the job when it has none."""
    if not job.operating_points:
        raise InputError(job.source, "no speed given: add --rpm N (or [[operating_point]] in the job file)")
    return job.operating_points


def hub_frame_of(job: Job):
    """The :class:`~bladesolid.frame.HubFrame` a job describes (validated, keys named)."""
    from .frame import hub_frame

    f = hub_frame(
        origin=job.hub_centre_m,
        thrust_axis=job.thrust_axis,
        pitch_axis=job.pitch_axis,
        pitch_point=job.pitch_point_m,
        rotation=job.rotation,
        precone_deg=job.precone_deg,
        source=job.source,
    )
    return f


def check_pitch_point(frame, cg_hub: np.ndarray, tip_radius_m: float, source: str) -> None:
    """Refuse a pitch point that puts the pitch axis far off the blade: farther from the
    blade's centre of gravity than half the tip radius (common practice, no source)."""
    P = frame.P
    d = cg_hub - P
    off = float(np.linalg.norm(d - (d @ frame.e) * frame.e))
    if off > 0.5 * max(tip_radius_m, 1e-9):
        raise InputError(
            source,
            f"pitch_point puts the pitch axis {off:.4g} m from the blade's centre of gravity "
            f"(more than half the tip radius {tip_radius_m:.4g} m); check the point and its unit",
        )


def check_against_blade(job: Job, blade) -> list[str]:
    """Refuse the job's values that do not fit its blade, before any costly work; return the
    plausibility warnings (docs/CONVENTIONS.md §7). ``blade``: the surface-route
    :class:`~bladesolid.api.Blade` (hub frame), before its mass elements are built.

    Refused, each naming its key (or flag): a hub frame that puts the blade far off the pitch
    axis or on no radius of its own (``hub_centre``, ``pitch_axis``); a reference radius or a
    station off the blade (``reference_radius``, ``stations``); a lumped mass or counterweight
    more than :data:`~bladesolid.bounds.REACH_TIP_RADII` tip radii from the hub centre; a speed
    whose tip Mach number passes :data:`~bladesolid.bounds.TIP_MACH_MAX` (a warning above
    :data:`~bladesolid.bounds.TIP_MACH_WARN`); an element size or count beyond
    :func:`~bladesolid.bounds.element_budget`.
    """
    from .units import length_scale

    scale = length_scale(job.units, job.where("units"))
    u = job.units

    def model(x_m: float) -> str:
        return f"{x_m / scale:.4g} {u}"

    tip = float(blade.tip_radius_m)
    root = float(min(v[:, 1].min() for v, _ in blade.surfaces))
    frame_key = "hub_centre" if any(k == "hub_centre" for k, _ in job.origins) or not any(
        k == "pitch_axis" for k, _ in job.origins) else "pitch_axis"
    if tip <= 0.0:
        raise InputError(job.where(frame_key), f"the whole blade lies inboard of the hub centre (its outermost "
                                               f"point is at r = {model(tip)} along the pitch axis); check "
                                               "hub_centre, pitch_axis and their unit")
    if job.pitch_point_m is None:
        frame = blade.frame
        d = blade.surface_moments.cg - frame.P
        off = float(np.linalg.norm(d - (d @ frame.e) * frame.e))
        if off > 0.5 * tip:
            raise InputError(job.where(frame_key), f"the blade's centre of gravity lies {model(off)} from the pitch "
                                                   f"axis, more than half its tip radius ({model(tip)}): the blade "
                                                   "is not on the pitch axis; check hub_centre, pitch_axis and their "
                                                   "unit (common practice, no source)")
    if root > 0.0 and tip - root < 0.05 * tip:
        raise InputError(job.where(frame_key), f"the blade spans only r = {model(root)} to {model(tip)} from the hub "
                                               "centre, less than 5 % of its radius: the hub centre lies far inboard "
                                               "of the blade; check hub_centre and its unit (common practice, no "
                                               "source)")
    if job.reference_radius_m is not None and not (root <= job.reference_radius_m <= tip):
        raise InputError(job.where("reference_radius"), f"r = {model(job.reference_radius_m)} is off the blade, which "
                                                        f"spans r = {model(root)} to {model(tip)}")
    if isinstance(job.stations, tuple):
        off_blade = [r for r in job.stations if not (root <= r <= tip)]
        if off_blade:
            raise InputError(job.where("stations"), f"station r = {model(off_blade[0])} is off the blade, which "
                                                    f"spans r = {model(root)} to {model(tip)}")
    reach = bounds.REACH_TIP_RADII * tip
    for i, (name, _, pos) in enumerate(job.lumped, 1):
        r = float(np.linalg.norm(blade.frame.to_hub(np.asarray(pos, dtype=float))))
        if r > reach:
            raise InputError(f"{job.source}: lumped_mass {i}", f"{name!r} is {model(r)} from the hub centre, more "
                                                               f"than {bounds.REACH_TIP_RADII:g} tip radii "
                                                               f"({model(reach)}); check its position and unit")
    cw = job.counterweight
    if cw is not None and (abs(cw.radius_m) > reach or cw.arm_m > reach):
        raise InputError(f"{job.source}: counterweight", f"radius {model(cw.radius_m)} or arm {model(cw.arm_m)} is "
                                                         f"more than {bounds.REACH_TIP_RADII:g} tip radii "
                                                         f"({model(reach)}); check them and their unit")
    warnings = []
    fastest = None
    for i, op in enumerate(job.operating_points):
        w = bounds.tip_speed_check(op.rpm, tip, job.where(f"operating_point#{i}"),
                                   "rpm" if op.name.endswith(" rpm") else f"rpm of {op.name!r}")
        if w and (fastest is None or op.rpm > fastest[0]):
            fastest = (op.rpm, w)
    if fastest:
        warnings.append(fastest[1])
    if job.rated_rpm is not None:
        w = bounds.tip_speed_check(job.rated_rpm, tip, job.where("rated_rpm"), "rated_rpm")
        if w and (fastest is None or job.rated_rpm > fastest[0]):
            warnings.append(w)
    if job.rpm_sweep is not None:
        bounds.tip_speed_check(job.rpm_sweep[1], tip, job.where("rpm_sweep"), "the speed sweep's TO")
    if cw is not None and cw.rpm is not None:
        bounds.tip_speed_check(cw.rpm, tip, f"{job.source}: counterweight", "rpm")
    volume = blade.volume_m3
    if job.element_size_m is not None:
        count, problem = bounds.element_budget(volume, max_volume_m3=bounds.regular_tet_volume(job.element_size_m))
        if problem:
            least = bounds.smallest_element_size(volume, bounds.allowed_elements())
            raise InputError(job.where("element_size"), f"{model(job.element_size_m)} would give about {count:.3g} "
                                                        f"mass elements for this solid ({volume:.3g} m^3), {problem}; "
                                                        f"give at least {model(least)}")
    if job.elements is not None:
        _, problem = bounds.element_budget(volume, target=job.elements)
        if problem:
            raise InputError(job.where("elements"), f"{job.elements:,} mass elements, {problem}; give at most "
                                                    f"{bounds.allowed_elements():,}")
    return warnings
