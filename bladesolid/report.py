"""Report writers: the JSON report of CONVENTIONS §6, CSV tables, and safe (atomic) files.

Every file is written to a temporary file in the same folder and renamed into place, so an
interrupted run never leaves a half-written file; an existing output is only replaced when
the caller says so (``force``).
"""

from __future__ import annotations

import contextlib
import csv
import dataclasses
import io
import json
import math
import os
import shutil
import tempfile

import numpy as np

from . import CAUTION, __version__
from .errors import InputError, OutputExistsError

SCHEMA = "bladesolid.report/1"


# --- safe files ---------------------------------------------------------------------------


def check_new_output(path, force: bool = False) -> None:
    """Refuse (before any work) an output that exists, unless ``force``; check its folder."""
    p = os.fspath(path)
    if os.path.exists(p) and not force:
        raise OutputExistsError(p)
    parent = os.path.dirname(os.path.abspath(p))
    if not os.path.isdir(parent):
        raise InputError(p, f"the folder {parent} does not exist")


def atomic_write_bytes(path, data: bytes, force: bool = False) -> str:
    """Write ``data`` to ``path`` through a temporary file and a rename."""
    p = os.fspath(path)
    check_new_output(p, force)
    parent = os.path.dirname(os.path.abspath(p))
    fd, tmp = tempfile.mkstemp(prefix=".bladesolid-", suffix=".part", dir=parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, p)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
    return p


def atomic_write_text(path, text: str, force: bool = False) -> str:
    """Write text (UTF-8) atomically."""
    return atomic_write_bytes(path, text.encode("utf-8"), force)


@contextlib.contextmanager
def staged_folder(path, force: bool = False):
    """Build an output folder in a temporary sibling and move it into place at the end.

    Yields the temporary folder's path. On any error (or Ctrl-C) the temporary folder is
    removed and nothing appears at ``path``. An existing non-empty ``path`` needs ``force``.
    """
    p = os.path.abspath(os.fspath(path))
    if os.path.exists(p) and not os.path.isdir(p):
        raise InputError(p, "exists and is not a folder")
    if os.path.isdir(p) and os.listdir(p) and not force:
        raise OutputExistsError(p)
    parent = os.path.dirname(p)
    if not os.path.isdir(parent):
        raise InputError(p, f"the folder {parent} does not exist")
    tmp = tempfile.mkdtemp(prefix=f".{os.path.basename(p)}-", suffix=".part", dir=parent)
    try:
        yield tmp
        if os.path.isdir(p):
            old = tempfile.mkdtemp(prefix=f".{os.path.basename(p)}-", suffix=".old", dir=parent)
            os.rmdir(old)
            os.replace(p, old)
            os.replace(tmp, p)
            shutil.rmtree(old, ignore_errors=True)
        else:
            os.replace(tmp, p)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise


# --- JSON ---------------------------------------------------------------------------------


def jsonable(obj):
    """Plain JSON types from numpy arrays, dataclasses, tuples; NaN/inf become null."""
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return {f.name: jsonable(getattr(obj, f.name)) for f in dataclasses.fields(obj)}
    if isinstance(obj, dict):
        return {str(k): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return jsonable(obj.tolist())
    if isinstance(obj, (np.floating, float)):
        x = float(obj)
        return x if math.isfinite(x) else None
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    return obj


def dumps(report: dict) -> str:
    """The report as indented JSON text."""
    return json.dumps(jsonable(report), indent=2, ensure_ascii=False) + "\n"


def mass_section(props) -> dict:
    """``mass_properties`` of CONVENTIONS §6 from :class:`bladesolid.api.MassProperties`."""
    return {
        "mass_kg": props.mass_kg,
        "volume_m3": props.volume_m3,
        "cg_m": props.cg_m,
        "inertia_hub_kgm2": props.inertia_hub_kgm2,
        "inertia_cg_kgm2": props.inertia_cg_kgm2,
        "principal_moments_kgm2": props.principal_moments_kgm2,
        "principal_axes": props.principal_axes,
        "static_moment_kgm": props.static_moment_kgm,
        "surface_check_rel_error": props.surface_check_rel_error,
        "surface_check_method": props.surface_check_method,
    }


def operating_point_row(op) -> dict:
    """One ``operating_points`` entry from :class:`bladesolid.loads.OperatingLoads`."""
    return {
        "name": op.name,
        "rpm": op.rpm,
        "blade_angle_deg": op.blade_angle_deg,
        "cf_N": op.cf_N,
        "radial_pull_N": op.radial_pull_N,
        "moment_hub_Nm": op.moment_hub_Nm,
        "bending_out_of_plane_Nm": op.bending_out_of_plane_Nm,
        "bending_in_plane_Nm": op.bending_in_plane_Nm,
        "twisting_about_pitch_axis_at_hub_Nm": op.twisting_about_pitch_axis_at_hub_Nm,
        "ctm_Nm": op.ctm_Nm,
        "feathering_inertia_kgm2": op.feathering_inertia_kgm2,
        "pitch_stiffness_Nm_per_rad": op.pitch_stiffness_Nm_per_rad,
        "free_pitch_frequency_ratio": op.free_pitch_frequency_ratio,
        "polar_inertia_kgm2": op.polar_inertia_kgm2,
        "static_moment_kgm": op.static_moment_kgm,
    }


def base_report(blade) -> dict:
    """Header of every report: schema, tool, caution, inputs, warnings."""
    return {
        "schema": SCHEMA,
        "tool": {"name": "bladesolid", "version": __version__},
        "caution": CAUTION,
        "input": {
            "name": blade.name,
            "mesh": blade.source,
            "units": blade.units,
            "bodies": [
                {"body": i + 1, "density_kg_m3": m.density_kg_m3, "material": m.label, "density_source": m.source}
                for i, m in enumerate(blade.materials)
            ],
            "lumped_masses": [
                {"name": p.name, "mass_kg": p.mass_kg, "position_model_m": p.position_m} for p in blade.lumped
            ],
            "hub_frame": {
                "hub_centre_model_m": blade.frame.origin,
                "thrust_axis_model": blade.frame.thrust_axis,
                "pitch_axis_model": blade.frame.pitch_axis,
                "pitch_point_model_m": blade.frame.pitch_point,
                "rotation": "right" if blade.frame.rotation > 0 else "left",
                "precone_deg": blade.frame.precone_deg,
            },
            "elements": None if blade.elements is None else len(blade.elements),
        },
        "warnings": list(blade.warnings),
    }


def blade_angle_section(blade) -> dict:
    """``blade_angle`` of CONVENTIONS §6."""
    a = blade.modelled_angle
    return {
        "reference_radius_m": blade.reference_radius_m,
        "modelled_deg": None if a is None else a.angle_deg,
        "tip_radius_m": blade.tip_radius_m,
        "chord_m": None if a is None else a.chord_m,
        "leading_edge_m": None if a is None else a.leading_edge,
        "trailing_edge_m": None if a is None else a.trailing_edge,
    }


def sweep_rows(betas, ctm, stiffness) -> list[dict]:
    """``pitch_sweep`` rows (CTM in N·m, stiffness in N·m/rad)."""
    return [
        {"blade_angle_deg": float(b), "ctm_Nm": float(c), "pitch_stiffness_Nm_per_rad": float(k)}
        for b, c, k in zip(betas, ctm, stiffness)
    ]


def csv_text(rows: list[dict], columns: list[str] | None = None) -> str:
    """CSV text of a list of flat dicts (the column names carry the units)."""
    buf = io.StringIO()
    if not rows:
        return ""
    cols = columns or list(rows[0].keys())
    w = csv.DictWriter(buf, fieldnames=cols, extrasaction="ignore", lineterminator="\n")
    w.writeheader()
    for r in rows:
        w.writerow({k: ("" if r.get(k) is None else r.get(k)) for k in cols})
    return buf.getvalue()
