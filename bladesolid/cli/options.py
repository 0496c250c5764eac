"""From the command line to the library: flags to job keys, output checks, parameter names to flags."""

from __future__ import annotations

import os
import re

from ..errors import InputError

__all__ = ["PARAMETER_FLAGS", "UsageError", "check_outputs", "command_line_message", "job_keys", "job_of"]


class UsageError(Exception):
    """Bad command-line usage (exit 2)."""


#: The library names parameters in its errors; on the command line the flag that gives the
#: parameter is named instead.
PARAMETER_FLAGS = {
    "blade_angle_deg": "--blade-angle",
    "pitch_change_deg": "--pitch-change",
    "densities": "--density",
    "density": "--density",
    "unit": "--units",
    "lo_deg:hi_deg:step_deg": "--sweep",
    "command": "--command",
    "weld_tol": "--weld",
    "repair=True": "--repair",
    "repair_limit_pct": "--repair-limit",
}
_NAMED_IN_TEXT = re.compile(r"\b(" + "|".join(re.escape(k) for k in PARAMETER_FLAGS if "_" in k or "=" in k) + r")\b")


def command_line_message(exc: InputError) -> str:
    """The one-line message of an :class:`InputError` as the command line shows it: an error
    whose source is a parameter of the library names the flag that gives it, and so does its
    text.

    >>> command_line_message(InputError("blade_angle_deg", "give either blade_angle_deg or pitch_change_deg"))
    '--blade-angle: give either --blade-angle or --pitch-change'
    >>> command_line_message(InputError("blade.stl", "open surface; mend it with repair=True"))
    'blade.stl: open surface; mend it with --repair'
    """
    source = PARAMETER_FLAGS.get(exc.source, exc.source)
    problem = _NAMED_IN_TEXT.sub(lambda m: PARAMETER_FLAGS[m.group(1)], exc.problem)
    return f"{source}: {problem}"


def job_keys(args) -> dict:
    """Command-line flags as job keys (docs/CONVENTIONS.md §7: a flag overrides the key)."""
    out = {}
    for key in ("units", "name", "hub_centre", "thrust_axis", "pitch_axis", "pitch_point", "precone",
                "rotation", "blades", "reference_radius", "reference_fraction", "rpm", "blade_angle",
                "pitch_change", "sweep", "stations", "allowable", "elements", "element_size", "field_faces",
                "reference", "limits", "rpm_sweep", "proof_factor", "rated_rpm", "angle_line", "weld", "repair",
                "repair_limit"):
        v = getattr(args, key, None)
        if v is not None:
            out[key] = v
    dens = getattr(args, "densities", None)
    if dens:
        d = [v for k, v in dens if k == "density"]
        m = [v for k, v in dens if k == "material"]
        if d and m:
            raise UsageError("bladesolid: give either --density or --material (repeat it for several bodies), not both")
        if d:
            out["density"] = d if len(d) > 1 else d[0]
        if m:
            out["material"] = m if len(m) > 1 else m[0]
    lm = getattr(args, "lumped_mass", None)
    if lm:
        tables = []
        for i, text in enumerate(lm, 1):
            if "@" not in text:
                raise InputError("--lumped-mass", f"expected MASS@X,Y,Z, got {text!r}")
            mass, pos = text.split("@", 1)
            tables.append({"name": f"lumped mass {i}", "mass": mass.strip(), "position": pos.split(",")})
        out["lumped_mass"] = tables
    return out


def job_of(args):
    """A validated job from a job file plus flags, or from a mesh plus flags."""
    from ..job import build_job, load_job

    flags = job_keys(args)
    if str(args.input).lower().endswith(".toml"):
        return load_job(args.input, flags)
    flags["mesh"] = args.input
    if "units" not in flags:
        raise InputError(args.input, "no length unit given: add --units mm (or cm, m, in, ft); a mesh file carries no unit")
    return build_job({}, "command line", ".", flags)


def check_outputs(force: bool, *paths) -> None:
    """Refuse, before any work, outputs that exist (without --force) or that name the same file twice."""
    from ..report import check_new_output

    given = [p for p in paths if p]
    seen = {}
    for p in given:
        key = os.path.realpath(p)
        if key in seen:
            raise InputError(p, f"is given for two outputs ({seen[key]} and this one); give each output its own file")
        seen[key] = p
        check_new_output(p, force)
