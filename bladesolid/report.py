"""Report writers: the JSON report of docs/CONVENTIONS.md §6, CSV tables and the HTML page.

Files are written through :mod:`bladesolid.safefile` (temporary file, then a rename; nothing
existing replaced without ``force``); its writers are re-exported here for convenience.
"""

from __future__ import annotations

import csv
import dataclasses
import io
import json
import math

import numpy as np

from . import CAUTION, __version__
from .safefile import atomic_write_bytes, atomic_write_text, check_new_output, staged_folder  # noqa: F401

__all__ = ["CSV_COMMENT", "LOAD_FIGURES", "SCHEMA", "atomic_write_bytes", "atomic_write_text", "base_report", "blade_angle_section",
           "cad_sections",
           "check_new_output", "compare_report", "csv_rows", "csv_text", "dumps", "header", "jsonable", "load_figures",
           "mass_report", "mass_section", "match_report", "operating_point_row", "review_html", "span_report",
           "staged_folder", "surface_sections", "sweep_rows"]

SCHEMA = "bladesolid.report/1"


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
    """``mass_properties`` of docs/CONVENTIONS.md §6 from :class:`bladesolid.api.MassProperties`."""
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
        "surface_check_ok": props.surface_check_ok,
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


def header(schema: str = SCHEMA, **sections) -> dict:
    """The head every report and summary starts with: ``schema``, ``tool``, ``caution``, then
    ``sections`` in the order given (docs/CONVENTIONS.md §6).

    >>> list(header(input={}, warnings=[]))
    ['schema', 'tool', 'caution', 'input', 'warnings']
    """
    return {"schema": schema, "tool": {"name": "bladesolid", "version": __version__}, "caution": CAUTION, **sections}


def base_report(blade) -> dict:
    """Header of every report of one blade: schema, tool, caution, inputs, warnings; for a blade
    read from a CAD file also ``cad`` and ``cad_kernel`` (:func:`cad_sections`)."""
    data = header(
        input={
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
            "field_resolution": blade.field_resolution,
        },
        warnings=list(blade.warnings),
        **surface_sections(blade),
    )
    data.update(cad_sections(blade))
    return data


def cad_sections(blade) -> dict:
    """``cad`` and ``cad_kernel`` of docs/CONVENTIONS.md §6 and §9 for a blade read from a CAD
    file (``{}`` otherwise): how it was read, and per body the kernel's own volume, CG and
    inertia about the CG (hub frame, density applied) with bladesolid's beside them and their
    relative differences."""
    c = getattr(blade, "cad", None)
    if c is None:
        return {}
    return {"cad": {k: v for k, v in c.items() if k != "kernel"}, "cad_kernel": list(c["kernel"])}


def surface_sections(blade, prefix: str = "") -> dict:
    """``geometry`` (what the loader did: welding, bodies, cavities, inserts) and, when a
    repair was asked, ``repairs`` (one entry per change) of a blade (docs/CONVENTIONS.md §6);
    ``prefix`` names them for a second blade (``reference_geometry``)."""
    out = {}
    geometry = getattr(blade, "geometry", None)
    if geometry is not None:
        out[f"{prefix}geometry"] = dict(geometry)
    repairs = getattr(blade, "repairs", None)
    if repairs is not None:
        out[f"{prefix}repairs"] = [dict(r) for r in repairs]
    return out


def blade_angle_section(blade) -> dict:
    """``blade_angle`` of docs/CONVENTIONS.md §6: ``modelled_deg`` on the chosen ``reference_line``
    (``"chord"`` or ``"face"``), both angles and their difference whatever the choice, the chord
    line's ends, the face line's ends (trailing-edge end first), the thickness normal to the
    reference line and how the leading edge was told (docs/CONVENTIONS.md §2)."""
    a = blade.modelled_angle

    def get(fn):
        return None if a is None else fn(a)

    return {
        "reference_radius_m": blade.reference_radius_m,
        "modelled_deg": get(lambda a: a.angle_deg),
        "reference_line": get(lambda a: a.reference_line),
        "chord_deg": get(lambda a: a.chord_deg),
        "face_deg": get(lambda a: a.face_deg),
        "face_minus_chord_deg": get(lambda a: a.face_minus_chord_deg),
        "tip_radius_m": blade.tip_radius_m,
        "chord_m": get(lambda a: a.chord_m),
        "thickness_m": get(lambda a: a.thickness_m),
        "leading_edge_m": get(lambda a: a.leading_edge),
        "trailing_edge_m": get(lambda a: a.trailing_edge),
        "face_line_m": get(lambda a: [a.face_trailing, a.face_leading]),
        "leading_edge_from": get(lambda a: a.lead_from),
    }


def sweep_rows(betas, ctm, stiffness) -> list[dict]:
    """``pitch_sweep`` rows (CTM in N·m, stiffness in N·m/rad)."""
    return [
        {"blade_angle_deg": float(b), "ctm_Nm": float(c), "pitch_stiffness_Nm_per_rad": float(k)}
        for b, c, k in zip(betas, ctm, stiffness)
    ]


#: The figures of an operating point as the tables show them (terminal and HTML), in order:
#: (label, key of the ``operating_points`` row, component or None, unit kind of
#: :data:`bladesolid.units.CUSTOMARY` or a fixed unit, significant digits).
LOAD_FIGURES = (
    ("speed", "rpm", None, "rpm", 6),
    ("blade angle", "blade_angle_deg", None, "deg", 5),
    ("radial pull F·e", "radial_pull_N", None, "force", 6),
    ("centrifugal force x (hub frame)", "cf_N", 0, "force", 6),
    ("centrifugal force y", "cf_N", 1, "force", 6),
    ("centrifugal force z", "cf_N", 2, "force", 6),
    ("CTM (+ toward coarse)", "ctm_Nm", None, "moment", 6),
    ("out-of-plane bending at hub (+ tip forward)", "bending_out_of_plane_Nm", None, "moment", 6),
    ("in-plane bending at hub (+ tip with rotation)", "bending_in_plane_Nm", None, "moment", 6),
    ("centrifugal pitch stiffness −dCTM/dβ", "pitch_stiffness_Nm_per_rad", None, "stiffness", 6),
    ("feathering moment of inertia", "feathering_inertia_kgm2", None, "inertia", 6),
    ("free-pitch frequency ratio ν/Ω", "free_pitch_frequency_ratio", None, "—", 4),
    ("polar moment of inertia, per blade", "polar_inertia_kgm2", None, "inertia", 6),
)


def load_figures(rows, us: bool = False) -> list[tuple[str, str, list, int]]:
    """The table of :data:`LOAD_FIGURES` for ``operating_points`` rows: ``(label, unit,
    [value per point], digits)`` per figure, in SI or (``us``) US customary units; a value
    is None where the row has none.

    >>> load_figures([{"rpm": 2500.0, "radial_pull_N": 1000.0}])[2][:3]
    ('radial pull F·e', 'N', [1000.0])
    """
    from .units import CUSTOMARY, to_customary, unit_label

    out = []
    for label, key, part, kind, digits in LOAD_FIGURES:
        values = []
        for r in rows:
            v = r.get(key)
            if v is not None and part is not None:
                v = v[part]
            if v is not None and us and kind in CUSTOMARY:
                v = to_customary(v, kind)
            values.append(None if v is None else float(v))
        unit = unit_label(kind, "us" if us else "si") if kind in CUSTOMARY else kind
        out.append((label, unit, values, digits))
    return out


def mass_report(blade, props) -> dict:
    """The report of the ``mass`` command: header, ``mass_properties``, ``blade_angle``."""
    data = base_report(blade)
    data["mass_properties"] = mass_section(props)
    data["blade_angle"] = blade_angle_section(blade)
    return data


def span_report(blade, op, table, rows, note: str) -> dict:
    """The report of the ``span`` command: header, ``blade_angle``, the operating point and the
    ``spanwise`` rows (one per station, inboard first) with their ``note``."""
    data = base_report(blade)
    data["blade_angle"] = blade_angle_section(blade)
    data["spanwise_operating_point"] = {"name": op.name, "rpm": table.rpm, "blade_angle_deg": table.blade_angle_deg,
                                        "allowable_Pa": table.allowable_Pa, "density_note": table.density_note}
    data["spanwise"] = rows
    data["spanwise_note"] = note
    return data


def compare_report(job, section: dict, warnings, *, transform=None, reference_units=None) -> dict:
    """The report of the ``compare`` command: header, the inputs of the comparison, warnings and
    ``comparison`` (``section``, from :func:`bladesolid.compare.comparison_section`)."""
    return header(
        input={"repaired_mesh": job.mesh, "reference_mesh": job.reference, "units": job.units,
               "reference_units": reference_units or job.units, "limits": job.limits,
               "transform": transform, "operating_point": job.operating_points[0].name},
        warnings=list(warnings),
        comparison=section,
    )


def match_report(reports, section: dict, warnings) -> dict:
    """The report of the ``match`` command: header, the reports read, warnings and ``match``."""
    return header(input={"reports": list(reports)}, warnings=list(warnings), match=section)


#: How every CSV table starts: the caution as one comment line, then the header row.
CSV_COMMENT = "# "


def csv_text(rows: list[dict], columns: list[str] | None = None, *, caution: bool = True) -> str:
    """CSV text of a list of flat dicts (the column names carry the units).

    The first line is the caution as a comment, ``# `` and the text (no quoting), then the
    header row and the data. Readers skip it with ``pandas.read_csv(path, comment="#")``
    (or ``skiprows=1``), ``numpy.genfromtxt(path, delimiter=",", names=True, skip_header=1)``,
    or in Python ``csv.DictReader(line for line in fh if not line.startswith("#"))``
    (:func:`csv_rows`). ``caution=False`` leaves the line out.

    >>> print(csv_text([{"rpm": 2500, "ctm_Nm": -236.3}], caution=False), end="")
    rpm,ctm_Nm
    2500,-236.3
    >>> csv_text([{"rpm": 2500}]).splitlines()[0].startswith("# Results are engineering estimates")
    True
    """
    head = f"{CSV_COMMENT}{CAUTION}\n" if caution else ""
    buf = io.StringIO()
    buf.write(head)
    if not rows:
        return buf.getvalue()
    cols = columns or list(rows[0].keys())
    w = csv.DictWriter(buf, fieldnames=cols, extrasaction="ignore", lineterminator="\n")
    w.writeheader()
    for r in rows:
        w.writerow({k: ("" if r.get(k) is None else r.get(k)) for k in cols})
    return buf.getvalue()


def csv_rows(text: str) -> list[dict]:
    """The rows (dicts of strings) of a CSV table written by :func:`csv_text`; comment lines
    (starting with ``#``) are skipped.

    >>> csv_rows(csv_text([{"rpm": 2500, "ctm_Nm": -236.3}]))
    [{'rpm': '2500', 'ctm_Nm': '-236.3'}]
    """
    lines = [ln for ln in text.splitlines(keepends=True) if not ln.startswith("#")]
    return list(csv.DictReader(lines))


# --- HTML ---------------------------------------------------------------------------------

_CSS = """
body{font-family:system-ui,sans-serif;margin:0;color:#1d2329;background:#f6f7f4}
header{background:#21413c;color:#f4f1e8;padding:18px 32px}
header h1{margin:0;font-size:22px;font-weight:600}
header p{margin:4px 0 0;font-size:13px;opacity:.85}
main{max-width:1180px;margin:0 auto;padding:18px 32px 48px}
section{background:#fff;border:1px solid #dcdfd8;border-radius:6px;padding:14px 20px;margin:16px 0}
h2{font-size:17px;margin:4px 0 10px;color:#21413c}
table{border-collapse:collapse;font-size:13px;margin:6px 0}
th,td{padding:3px 10px;border-bottom:1px solid #e6e8e3;text-align:right;white-space:nowrap}
th:first-child,td:first-child{text-align:left}
th{background:#eef0ea;font-weight:600}
.caution{background:#fff6dc;border:1px solid #e2c46b;padding:10px 14px;border-radius:6px;font-size:13px}
footer.caution{max-width:1116px;margin:0 auto 32px}
.warn{color:#8a4b00}
.verdict-ok{color:#176b3a;font-weight:600}.verdict-bad{color:#a3221b;font-weight:600}
figure{margin:8px 0;display:inline-block;vertical-align:top}
figure img{max-width:100%;border:1px solid #dcdfd8;border-radius:4px}
figcaption{font-size:12px;color:#555}
.grid img{max-width:560px}
code{font-size:12px}
"""


def _e(x) -> str:
    import html

    return html.escape(str(x), quote=True)


def _num(x, digits=6) -> str:
    if x is None:
        return "—"
    if isinstance(x, (list, tuple)):
        return "[" + ", ".join(_num(v, digits) for v in x) + "]"
    if isinstance(x, bool):
        return str(x)
    if isinstance(x, (int, float)):
        if isinstance(x, float) and not math.isfinite(x):
            return "—"
        return f"{x:.{digits}g}"
    return _e(x)


def _table(rows, headers) -> str:
    head = "".join(f"<th>{_e(h)}</th>" for h in headers)
    body = "".join("<tr>" + "".join(f"<td>{c}</td>" for c in r) + "</tr>" for r in rows)
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _img(data: bytes, caption: str) -> str:
    import base64

    b64 = base64.b64encode(data).decode("ascii")
    return f'<figure><img alt="{_e(caption)}" src="data:image/png;base64,{b64}"><figcaption>{_e(caption)}</figcaption></figure>'


def review_html(data: dict, images: dict | None = None, files: list | None = None) -> str:
    """A single self-contained HTML page of a review report dict (numbers exactly as in the JSON).

    images : {caption: PNG bytes}, embedded as data URIs; every user-supplied string is escaped.
    """
    d = jsonable(data)
    images = images or {}
    inp = d.get("input", {})
    parts = []
    title = f"Blade review — {inp.get('name', '')}"
    parts.append(
        f"<header><h1>{_e(title)}</h1><p>{_e(d.get('tool', {}).get('name', 'bladesolid'))} "
        f"{_e(d.get('tool', {}).get('version', ''))} · mesh {_e(inp.get('mesh', ''))} "
        f"({_e(inp.get('units', ''))}) · report schema {_e(d.get('schema', ''))}</p></header><main>"
    )
    parts.append(f'<div class="caution"><b>Caution.</b> {_e(d.get("caution") or CAUTION)}</div>')
    if d.get("warnings"):
        parts.append("<section><h2>Warnings</h2><ul>" + "".join(f'<li class="warn">{_e(w)}</li>' for w in d["warnings"]) + "</ul></section>")
    if d.get("repairs"):
        rows = [[_e(r["what"]), _num(r["where"]), _e(f"+{r['faces_added']} / −{r['faces_removed']}"),
                 _e(f"+{r['volume_added']:.4g} / −{r['volume_removed']:.4g}"), _e(r.get("unit", ""))] for r in d["repairs"]]
        mended = (d.get("geometry") or {}).get("repaired_surface")
        parts.append("<section><h2>Repairs</h2>" + _table(rows, ["change", "where", "faces", "volume", "unit"])
                     + (f"<p>mended surface: {_e(mended)}</p>" if mended else "") + "</section>")

    # inputs
    rows = [[_e(f"body {b['body']}"), _e(b["material"]), _num(b["density_kg_m3"]), _e(b.get("density_source", ""))]
            for b in inp.get("bodies", [])]
    sec = "<section><h2>Inputs</h2>" + _table(rows, ["body", "material / density as given", "density kg/m³", "source"])
    lm = inp.get("lumped_masses", [])
    if lm:
        sec += _table([[_e(p["name"]), _num(p["mass_kg"]), _num(p["position_model_m"])] for p in lm],
                      ["lumped mass", "mass kg", "position (model frame) m"])
    hf = inp.get("hub_frame", {})
    sec += _table([[_e(k), _num(v) if not isinstance(v, str) else _e(v)] for k, v in hf.items()], ["hub frame", "value"])
    parts.append(sec + "</section>")

    mp = d.get("mass_properties")
    if mp:
        rows = [
            ["mass", _num(mp["mass_kg"]), "kg"],
            ["volume", _num(mp["volume_m3"]), "m³"],
            ["centre of gravity (hub frame)", _num(mp["cg_m"]), "m"],
            ["static moment", _num(mp["static_moment_kgm"]), "kg·m"],
            ["inertia about hub centre", "<br>".join(_num(r) for r in mp["inertia_hub_kgm2"]), "kg·m²"],
            ["inertia about CG", "<br>".join(_num(r) for r in mp["inertia_cg_kgm2"]), "kg·m²"],
            ["principal moments about CG", _num(mp["principal_moments_kgm2"]), "kg·m²"],
            ["surface check (relative)", _num(mp["surface_check_rel_error"], 2), _e(mp.get("surface_check_method", ""))],
        ]
        ba = d.get("blade_angle", {})
        if ba:
            rows.append([f"modelled blade angle at r = {_num(ba.get('reference_radius_m'), 5)} m",
                         _num(ba.get("modelled_deg"), 5), "deg"])
        parts.append("<section><h2>Mass properties</h2>" + _table(rows, ["quantity", "value", "unit"]) + "</section>")

    cad = d.get("cad")
    if cad:
        rows = [[_e(f"body {b['body']}"), _num(b["ours"]["volume_m3"]), _num(b["volume_m3"]),
                 _num(b["relative_difference"]["volume"], 2), _num(b["relative_difference"]["cg"], 2),
                 _num(b["relative_difference"]["inertia_cg"], 2), _e(b.get("likely_inexact") or "— (agree)")]
                for b in d.get("cad_kernel", [])]
        parts.append(
            f"<section><h2>CAD input</h2><p>{_e(cad.get('format'))}, unit {_e(cad.get('unit'))}, cad_tolerance "
            f"{_num(cad.get('cad_tolerance'), 3)} (chord {_num(cad.get('chord_m'), 3)} m); {_e(cad.get('integration'))}."
            "</p>" + _table(rows, ["body", "volume m³ (bladesolid)", "volume m³ (CAD kernel)", "rel. diff. volume",
                                   "CG", "inertia about CG", "likely inexact"]) + "</section>")

    ops = d.get("operating_points")
    if ops:
        rows = [[_e(label), _e(unit)] + [_num(v, digits) for v in values]
                for label, unit, values, digits in load_figures(ops)]
        sec = "<section><h2>Centrifugal loads</h2>" + _table(rows, ["figure", "unit"] + [o.get("name", "") for o in ops])
        pl = d.get("proof_load")
        if pl:
            sec += (f"<p>Centrifugal proof load <b>{_num(pl['proof_load_N'])} N</b> = {_num(pl['factor'])} × "
                    f"{_num(pl['largest_radial_pull_N'])} N ({_e(pl['at_operating_point'])}); {_e(pl['source'])}.</p>")
        cc = d.get("ctm_curve")
        if cc:
            z = ", ".join(_num(v, 5) for v in cc.get("zero_ctm_in_sweep_deg", [])) or "none in the sweep range"
            sec += f"<p>CTM zero at blade angles: {z} deg. {_e(cc.get('form', ''))}</p>"
        cw = d.get("counterweight_sizing")
        if cw:
            sec += (f"<p>Counterweight for a net CTM of {_num(cw['target_ctm_Nm'])} N·m at {_num(cw['blade_angle_deg'])} deg, "
                    f"{_num(cw['rpm'])} rpm: <b>{_num(cw['mass_kg'])} kg</b>, adding {_num(cw['added_radial_pull_N'])} N radial pull.</p>")
        parts.append(sec + "</section>")

    span = d.get("spanwise")
    if span:
        # (key, header, factor from SI): engineering units for reading; the JSON and CSV stay SI
        cols = [("radius_m", "radius mm", 1e3), ("area_m2", "area mm²", 1e6), ("chord_m", "chord mm", 1e3),
                ("thickness_m", "thickness mm", 1e3), ("mass_outboard_kg", "mass outboard kg", 1.0),
                ("cf_outboard_N", "tension kN", 1e-3), ("stress_Pa", "P/A MPa", 1e-6),
                ("ctm_outboard_Nm", "CTM outboard N·m", 1.0), ("ctm_strip_outboard_Nm", "strip CTM N·m", 1.0),
                ("margin_of_safety", "MS (centrifugal only)", 1.0)]
        cols = [c for c in cols if c[0] in span[0]]
        rows = [[_num(None if r.get(k) is None else r[k] * f, 5) for k, _, f in cols] for r in span]
        headers = [h for _, h, _ in cols]
        note = d.get("spanwise_note", "")
        parts.append(f"<section><h2>Spanwise</h2><p>{_e(note)}</p>" + _table(rows, headers) + "</section>")

    hs = d.get("hot_spots")
    if hs:
        rows = [[_e(r.get("region")), _num(r.get("ctm_Nm"), 5), _num(r.get("ctm_pct"), 4), _num(r.get("radial_pull_N"), 5),
                 _num(r.get("radial_pull_pct"), 4), _num(r.get("mass_pct"), 4), _num(r.get("volume_pct"), 4)]
                for r in hs.get("regions", [])]
        sec = "<section><h2>Where the loads come from</h2>" + _table(
            rows, ["region", "CTM N·m", "CTM share %", "radial pull N", "radial pull share %", "mass share %", "volume share %"])
        defs = hs.get("definitions")
        if isinstance(defs, dict):
            sec += "<ul>" + "".join(f"<li><b>{_e(k)}</b>: {_e(v)}</li>" for k, v in defs.items()) + "</ul>"
        elif isinstance(defs, (list, tuple)):
            sec += "<ul>" + "".join(f"<li>{_e(v)}</li>" for v in defs) + "</ul>"
        ef = d.get("element_fields", {})
        bands = [b for b in ef.get("share_bands", []) if b.get("quantity") == "ctm_Nm"]
        if bands:
            sec += "<p>Smallest sets of elements carrying a share of the CTM:</p>" + _table(
                [[_num(b["level_pct"]), _num(b["elements"]), _num(b["element_pct"], 3), _num(b["volume_pct"], 3),
                  _num(b["carried_pct"], 4)] for b in bands],
                ["share %", "elements", "% of elements", "% of volume", "carried %"])
            opp = ef.get("opposing_pct", {}).get("ctm_Nm")
            if opp is not None:
                sec += f"<p>Elements pulling against the total CTM add up to {_num(opp, 3)} % of it.</p>"
        parts.append(sec + "</section>")

    cmp_ = d.get("comparison")
    if cmp_:
        ok = cmp_.get("verdict") == "within limits"
        dl = cmp_.get("delta", {})
        rows = [[_e(k), _num(v)] for k, v in dl.items()]
        reasons = "".join(f"<li>{_e(r)}</li>" for r in cmp_.get("reasons", []))
        reg = cmp_.get("registration", {})
        parts.append(
            f"<section><h2>Comparison with the reference</h2><p class=\"{'verdict-ok' if ok else 'verdict-bad'}\">"
            f"{_e(cmp_.get('verdict', ''))}</p><ul>{reasons}</ul>"
            + _table(rows, ["delta (this blade − reference)", "value (SI)"])
            + f"<p>registration RMS {_num(reg.get('rms_m'))} m, max {_num(reg.get('max_m'))} m; removed volume "
            f"{_num(cmp_.get('removed_volume_m3'))} m³, added {_num(cmp_.get('added_volume_m3'))} m³.</p>"
            f"<p>{_e(cmp_.get('limits_note', ''))}</p></section>"
        )
    match = d.get("match")
    if match:
        sec = "<section><h2>Blade set</h2>"
        sec += _table([[_e(b.get("blade")), _e(b.get("name")), _num(b.get("static_moment_kgm")), _num(b.get("ctm_Nm")),
                        _num(b.get("radial_pull_N")), _e(b.get("report"))] for b in match.get("blades", [])],
                      ["blade", "name", "static moment kg·m", "CTM N·m", "radial pull N", "report"])
        for label in ("best", "worst"):
            a = match.get(label)
            if not a:
                continue
            sec += f"<p><b>{label} assignment</b>: residual static imbalance {_num(a.get('imbalance_kgm'))} kg·m " \
                   f"= {_num(a.get('imbalance_force_N'))} N at {_num(match.get('rpm'))} rpm</p>"
            sec += _table([[_e(p.get("position")), _num(p.get("clocking_deg"), 5), _e(p.get("blade")), _e(p.get("name"))]
                           for p in a.get("positions", [])], ["position", "clocking deg", "blade", "name"])
        sec += f"<p>CTM spread (max − min) {_num(match.get('ctm_spread_Nm'))} N·m.</p>"
        parts.append(sec + "</section>")

    if images:
        parts.append('<section><h2>Pictures</h2><div class="grid">' + "".join(_img(b, c) for c, b in images.items()) + "</div></section>")
    if files:
        parts.append("<section><h2>Files in this folder</h2><ul>" + "".join(f"<li><code>{_e(f)}</code></li>" for f in files) + "</ul></section>")
    parts.append("</main>")
    parts.append(f'<footer class="caution"><b>Caution.</b> {_e(d.get("caution") or CAUTION)}</footer>')
    return (
        "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\">"
        f"<title>{_e(title)}</title><style>{_CSS}</style></head><body>" + "".join(parts) + "</body></html>\n"
    )
