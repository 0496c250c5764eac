"""From the command line to the library: flags to job keys, output checks, parameter names to flags."""

from __future__ import annotations

import os
import re

from ..errors import InputError

__all__ = ["OUTPUT_EXTENSIONS", "PARAMETER_FLAGS", "UsageError", "check_output_folder", "check_outputs",
           "command_line_message", "job_keys", "job_of"]


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
    "rpm": "--rpm",
    "target_elements": "--elements",
    "max_element_volume_m3": "--element-size",
    "cad_tolerance": "--cad-tolerance",
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
                "reference", "limits", "rpm_sweep", "proof_factor", "rated_rpm", "angle_line", "cad_tolerance", "weld", "repair",
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
    if "units" not in flags and not _declares_unit(args.input):  # STEP/IGES: the file's own (§9)
        what = "a BREP file" if str(args.input).lower().endswith(".brep") else "a mesh file"
        raise InputError(args.input, f"no length unit given: add --units mm (or cm, m, in, ft); {what} carries no unit")
    return build_job({}, "command line", ".", flags)


#: The extension each output flag's file must have: what is written there (docs/CONVENTIONS.md §7).
OUTPUT_EXTENSIONS = {
    "--json": (".json", "a JSON report"),
    "--csv": (".csv", "a CSV table"),
    "--rpm-csv": (".csv", "a CSV table"),
    "--plot": (".png", "a PNG plot"),
    "--rpm-plot": (".png", "a PNG plot"),
    "--deviation-png": (".png", "a PNG render"),
    "--vtu": (".vtu", "a VTU element file"),
    "--html": (".html", "an HTML page"),
}


def _declares_unit(path) -> bool:
    from ..cad import declares_unit

    return declares_unit(path)




def check_outputs(force: bool, *outputs) -> None:
    """Refuse, before any work, outputs that exist (without --force), that name the same file
    twice, whose extension is not what their flag writes, or whose folder cannot be written.

    outputs : ``(flag, path)`` pairs (a bare path is checked without its extension); a None or
    empty path (the flag not given) is skipped.
    """
    from ..report import check_new_output
    from ..safefile import probe_writable

    pairs = [o if isinstance(o, tuple) else (None, o) for o in outputs]
    seen = {}
    for flag, p in pairs:
        if not p:
            continue
        p = os.fspath(p)
        if flag in OUTPUT_EXTENSIONS:
            ext, what = OUTPUT_EXTENSIONS[flag]
            if os.path.splitext(p)[1].lower() != ext:
                raise InputError(flag, f"{p} must end in {ext}: {flag} writes {what}")
        key = os.path.realpath(p)
        if key in seen:
            raise InputError(p, f"is given for two outputs ({seen[key]} and this one); give each output its own file")
        seen[key] = p
        check_new_output(p, force)
        if os.path.isdir(p):
            raise InputError(p, "is a folder; give a file name")
        problem = probe_writable(os.path.dirname(os.path.abspath(p)))
        if problem:
            raise InputError(flag or p, f"{p} cannot be written: its folder {os.path.dirname(os.path.abspath(p))} "
                                        f"is not writable ({problem})")


def check_output_folder(flag: str, path, force: bool) -> None:
    """Refuse, before any work, an output folder that exists and is not empty (without
    --force), that is a file, or whose parent folder does not exist or cannot be written."""
    from ..safefile import check_new_folder, probe_writable

    p = os.fspath(path)
    check_new_folder(p, force)
    parent = os.path.dirname(os.path.abspath(p))
    problem = probe_writable(parent)
    if problem:
        raise InputError(flag, f"{p} cannot be written: its folder {parent} is not writable ({problem})")
