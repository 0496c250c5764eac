"""The ``bladesolid`` command line: argument handling and printing only (docs/CONVENTIONS.md §7).

Every command is a thin layer over :mod:`bladesolid.api`. Exit status: 0 done, 1 done but
a limit is exceeded, 2 bad input or usage (one line on stderr naming the file and the
problem; no traceback; no partial output).
"""

from __future__ import annotations

import argparse
import math
import os
import sys

import numpy as np

from . import CAUTION, __version__
from .errors import InputError
from .job import require_operating_points


class UsageError(Exception):
    """Bad command-line usage (exit 2)."""


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit 2, no usage dump
        raise UsageError(f"{self.prog}: {message}")


# --- shared flags --------------------------------------------------------------------------


class _Tagged(argparse.Action):
    """Append ("density"|"material", value) to one list so their order is kept."""

    def __call__(self, parser, namespace, values, option_string=None):
        items = getattr(namespace, "densities", None) or []
        kind = "material" if option_string == "--material" else "density"
        items.append((kind, values))
        namespace.densities = items


def _add_blade_flags(p, job_allowed: bool = True, positional: bool = True, json_flag: bool = True):
    if positional:
        p.add_argument("input", metavar="JOB.toml|MESH" if job_allowed else "MESH",
                       help="a job file (.toml) or a blade mesh (STL/OBJ/PLY/OFF, .msh/.vtu/.inp)")
    p.add_argument("--units", help="length unit of the mesh: mm, cm, m, in or ft (required for a mesh)")
    p.add_argument("--density", action=_Tagged, dest="densities", metavar="QUANTITY",
                   help='density with its unit, e.g. "2810 kg/m^3" (bare number: kg/m^3); once, or once per body')
    p.add_argument("--material", action=_Tagged, dest="densities", metavar="NAME",
                   help="a material of the built-in table (see `bladesolid materials`)")
    p.add_argument("--lumped-mass", action="append", metavar="MASS@X,Y,Z",
                   help='a point mass fixed to the blade, e.g. "0.05 kg@-10,160,30" (model frame and unit)')
    p.add_argument("--hub-centre", metavar="X,Y,Z")
    p.add_argument("--thrust-axis", metavar="X,Y,Z")
    p.add_argument("--pitch-axis", metavar="X,Y,Z")
    p.add_argument("--pitch-point", metavar="X,Y,Z")
    p.add_argument("--precone", type=float, metavar="DEG")
    p.add_argument("--rotation", choices=["right", "left"])
    p.add_argument("--blades", type=int, metavar="N", help="number of blades on the hub")
    p.add_argument("--reference-radius", type=float, metavar="R", help="reference station radius (model unit)")
    p.add_argument("--reference-fraction", type=float, metavar="F", help="reference station as a fraction of the tip radius (default 0.75)")
    p.add_argument("--name", help="blade name shown in the reports")
    if json_flag:
        p.add_argument("--json", metavar="FILE", help="write the JSON report here")
    p.add_argument("--force", action="store_true", help="overwrite existing output files")
    p.add_argument("--us", action="store_true", help="print US customary units (the JSON stays SI)")


def _add_load_flags(p):
    p.add_argument("--rpm", metavar="N[,N...]", help="speed(s), rpm")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--blade-angle", type=float, metavar="DEG", help="absolute blade angle, degrees")
    g.add_argument("--pitch-change", type=float, metavar="DEG", help="change from the modelled blade angle, degrees")
    p.add_argument("--sweep", metavar="FROM:TO:STEP", help="blade-angle sweep, degrees")


def _add_element_flags(p):
    p.add_argument("--elements", type=int, metavar="N", help="target number of tetrahedral mass elements (finer fields)")
    p.add_argument("--element-size", type=float, metavar="L", help="largest element edge, model unit (finer fields)")
    p.add_argument("--field-faces", type=int, metavar="N",
                   help="simplify surfaces above N faces for the element fields (mass and loads stay exact)")


def _flags(args) -> dict:
    """Command-line flags as job keys (docs/CONVENTIONS.md §7: a flag overrides the key)."""
    out = {}
    for key in ("units", "name", "hub_centre", "thrust_axis", "pitch_axis", "pitch_point", "precone",
                "rotation", "blades", "reference_radius", "reference_fraction", "rpm", "blade_angle",
                "pitch_change", "sweep", "stations", "allowable", "elements", "element_size", "field_faces",
                "reference", "limits", "rpm_sweep", "proof_factor"):
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


def _job(args):
    """A validated job from a job file plus flags, or from a mesh plus flags."""
    from .job import build_job, load_job

    flags = _flags(args)
    if str(args.input).lower().endswith(".toml"):
        return load_job(args.input, flags)
    flags["mesh"] = args.input
    if "units" not in flags:
        raise InputError(args.input, "no length unit given: add --units mm (or cm, m, in, ft); a mesh file carries no unit")
    return build_job({}, "command line", ".", flags)


def _console(stderr=False):
    from rich.console import Console

    con = Console(stderr=stderr, highlight=False, soft_wrap=False)
    if not con.is_terminal:
        con = Console(stderr=stderr, highlight=False, soft_wrap=False, width=130)
    return con


#: What each stage of loading a blade (api.load_blade) and of a review (review.STAGES) does.
_STAGE_LABELS = {
    "load": "reading and checking the mesh", "integrate surface": "integrating the closed surface",
    "mesh": "filling the solid with tetrahedral mass elements", "integrate elements": "integrating the elements",
    "integrate": "integrating element moments", "loads": "centrifugal loads and sweeps",
    "spanwise": "spanwise station cuts", "fields": "per-element fields and hot spots",
    "compare": "comparing with the reference / matching the set", "views": "plots, renders and element file",
    "report": "JSON, CSV and HTML report",
}


def _progress(console):
    """A callable(stage) that shows the current stage on stderr."""

    def show(stage):
        if console.is_terminal:
            console.print(f"[dim]… {_STAGE_LABELS.get(stage, stage)}[/dim]")
    return show


def _check_outputs(force: bool, *paths) -> None:
    """Refuse, before any work, outputs that exist (without --force) or that name the same file twice."""
    from .report import check_new_output

    given = [p for p in paths if p]
    seen = {}
    for p in given:
        key = os.path.realpath(p)
        if key in seen:
            raise InputError(p, f"is given for two outputs ({seen[key]} and this one); give each output its own file")
        seen[key] = p
        check_new_output(p, force)


def _esc(text) -> str:
    """User text made safe to print: one line, control characters escaped, rich markup escaped."""
    from rich.markup import escape

    from .errors import one_line

    return escape(one_line(text, 300))


def _warn(console, blade):
    for w in blade.warnings:
        console.print(f"[yellow]warning:[/yellow] {_esc(w)}")


def _fmt(x, digits=6):
    if x is None:
        return "—"
    if isinstance(x, float) and not math.isfinite(x):
        return "—"
    return f"{x:.{digits}g}"


def _vec(v, digits=6):
    return "[" + ", ".join(_fmt(float(x), digits) for x in v) + "]"


def _conv(us):
    """(convert(value, kind), label(kind)) for the chosen display units."""
    from .units import to_customary, unit_label

    if us:
        return (lambda v, k: to_customary(v, k)), (lambda k: unit_label(k, "us"))
    return (lambda v, k: v), (lambda k: unit_label(k, "si"))


# --- commands -------------------------------------------------------------------------------


def cmd_mass(args) -> int:
    from . import api, report

    if args.json:
        report.check_new_output(args.json, args.force)
    job = _job(args)
    err = _console(stderr=True)
    blade = api.blade_from_job(job, elements=args.check_elements, progress=_progress(err))
    _warn(err, blade)
    props = api.mass_properties(blade)
    if not props.surface_check_ok:
        err.print(f"[yellow]warning:[/yellow] the two independent routes to the moments disagree by "
                  f"{props.surface_check_rel_error:.1e} ({props.surface_check_method}); the surface may be "
                  "self-intersecting or overlapping — check the mesh")
    data = report.base_report(blade)
    data["mass_properties"] = report.mass_section(props)
    data["blade_angle"] = report.blade_angle_section(blade)
    if args.json:
        report.atomic_write_text(args.json, report.dumps(data), args.force)
    _print_mass(_console(), blade, props, args.us)
    return 0


def _print_mass(con, blade, props, us):
    from rich.table import Table

    cv, lab = _conv(us)
    t = Table(title=f"Mass properties — {_esc(blade.name)}", title_justify="left")
    for name, just in (("quantity", "left"), ("value  |  x", "right"), ("y", "right"), ("z", "right"), ("unit", "left")):
        t.add_column(name, justify=just)

    def row(label, value, unit, digits=6):
        if np.ndim(value) == 0:
            t.add_row(label, _fmt(float(value), digits), "", "", unit)
        else:
            t.add_row(label, *[_fmt(float(x), digits) for x in value], unit)

    row("mass", cv(props.mass_kg, "mass"), lab("mass"))
    row("volume", cv(props.volume_m3, "volume"), lab("volume"))
    row("centre of gravity (hub frame)", cv(props.cg_m, "length"), lab("length"))
    row("static moment m·|c⊥|", cv(props.static_moment_kgm, "static_moment"), lab("static_moment"))
    for name, I in (("inertia about hub centre", props.inertia_hub_kgm2), ("inertia about CG", props.inertia_cg_kgm2)):
        I = cv(I, "inertia")
        for i, axis in enumerate("xyz"):
            row(f"{name}, row {axis}" if i == 0 else f"  row {axis}", I[i], lab("inertia"))
    row("principal moments about CG", cv(props.principal_moments_kgm2, "inertia"), lab("inertia"))
    for i, col in enumerate(props.principal_axes.T):
        row(f"principal axis {i + 1}", col, "unit vector", 5)
    a = blade.modelled_angle
    if a is not None:
        row(f"modelled blade angle at r = {_fmt(cv(a.radius_m, 'length'), 5)} {lab('length')}", a.angle_deg, "deg", 5)
    t.add_row("surface check (relative)", f"{props.surface_check_rel_error:.1e}", "", "", props.surface_check_method)
    con.print(t)
    con.print(f"[dim]{CAUTION}[/dim]")


def cmd_loads(args) -> int:
    from . import api, report

    _check_outputs(args.force, args.json, args.csv, args.plot, args.rpm_csv, args.rpm_plot)
    job = _job(args)
    require_operating_points(job)
    err = _console(stderr=True)
    blade = api.blade_from_job(job, elements=False, progress=_progress(err))
    _warn(err, blade)
    ops = api.loads_for_job(blade, job)
    from .review import loads_report

    data = loads_report(blade, job, ops)
    if (args.rpm_csv or args.rpm_plot) and "rpm_sweep" not in data:
        raise InputError("--rpm-sweep", "give the speed range (--rpm-sweep FROM:TO:STEP) for --rpm-csv / --rpm-plot")
    if args.csv:
        report.atomic_write_text(args.csv, report.csv_text(data["pitch_sweep"]), args.force)
    if args.rpm_csv:
        report.atomic_write_text(args.rpm_csv, report.csv_text(data["rpm_sweep"]), args.force)
    if args.plot or args.rpm_plot:
        from . import views

        if args.plot:
            lo, hi, step = job.sweep_deg
            betas, ctm, k = api.pitch_sweep(blade, ops[0].rpm, lo, hi, step)
            views.plot_ctm_sweep(betas, ctm, k, ops[0].blade_angle_deg, args.plot,
                                 title=f"{blade.name} — CTM at {ops[0].rpm:g} rpm", force=args.force)
        if args.rpm_plot:
            rows = data["rpm_sweep"]
            views.plot_rpm_sweep(np.array([r["rpm"] for r in rows]), np.array([r["ctm_Nm"] for r in rows]),
                                 np.array([r["radial_pull_N"] for r in rows]), args.rpm_plot,
                                 title=f"{blade.name} — at {ops[0].blade_angle_deg:.4g} deg",
                                 operating_rpm=ops[0].rpm, force=args.force)
    if args.json:
        report.atomic_write_text(args.json, report.dumps(data), args.force)
    _print_loads(_console(), blade, data, ops, args.us)
    return 0


def _print_loads(con, blade, data, ops, us):
    from rich.table import Table

    cv, lab = _conv(us)
    a = blade.modelled_angle
    con.print(f"[bold]Centrifugal loads — {_esc(blade.name)}[/bold]")
    mp = data["mass_properties"]
    con.print(
        f"mass {_fmt(cv(mp['mass_kg'], 'mass'))} {lab('mass')}, CG radius "
        f"{_fmt(cv(float(mp['cg_m'][1]), 'length'))} {lab('length')}, modelled blade angle "
        f"{_fmt(a.angle_deg if a else None, 5)} deg at r = {_fmt(cv(blade.reference_radius_m, 'length'), 5)} {lab('length')}"
    )
    t = Table(show_header=True)
    t.add_column("figure")
    t.add_column("unit")
    for o in ops:
        t.add_column(_esc(o.name), justify="right")
    rows = [
        ("speed", "rpm", lambda o: _fmt(o.rpm)),
        ("blade angle", "deg", lambda o: _fmt(o.blade_angle_deg, 5)),
        ("radial pull F·e", lab("force"), lambda o: _fmt(cv(o.radial_pull_N, "force"))),
        ("centrifugal force x (hub frame)", lab("force"), lambda o: _fmt(cv(float(o.cf_N[0]), "force"))),
        ("centrifugal force y", lab("force"), lambda o: _fmt(cv(float(o.cf_N[1]), "force"))),
        ("centrifugal force z", lab("force"), lambda o: _fmt(cv(float(o.cf_N[2]), "force"))),
        ("CTM (+ toward coarse)", lab("moment"), lambda o: _fmt(cv(o.ctm_Nm, "moment"))),
        ("out-of-plane bending at hub (+ tip forward)", lab("moment"), lambda o: _fmt(cv(o.bending_out_of_plane_Nm, "moment"))),
        ("in-plane bending at hub (+ tip with rotation)", lab("moment"), lambda o: _fmt(cv(o.bending_in_plane_Nm, "moment"))),
        ("centrifugal pitch stiffness −dCTM/dβ", lab("stiffness"), lambda o: _fmt(cv(o.pitch_stiffness_Nm_per_rad, "stiffness"))),
        ("feathering moment of inertia", lab("inertia"), lambda o: _fmt(cv(o.feathering_inertia_kgm2, "inertia"))),
        ("free-pitch frequency ratio ν/Ω", "—", lambda o: _fmt(o.free_pitch_frequency_ratio, 4)),
        ("polar moment of inertia, per blade", lab("inertia"), lambda o: _fmt(cv(o.polar_inertia_kgm2, "inertia"))),
    ]
    for label, unit, fn in rows:
        t.add_row(label, unit, *[fn(o) for o in ops])
    con.print(t)
    c = data["ctm_curve"]
    zs = ", ".join(_fmt(z, 5) for z in c["zero_ctm_in_sweep_deg"]) or "none in the sweep range"
    con.print(f"CTM is zero at blade angles (deg): {zs}")
    pl = data["proof_load"]
    con.print(
        f"centrifugal proof load: {_fmt(cv(pl['proof_load_N'], 'force'))} {lab('force')} "
        f"= {pl['factor']:g} × {_fmt(cv(pl['largest_radial_pull_N'], 'force'))} {lab('force')} at {_esc(pl['at_operating_point'])} "
        f"[dim]({pl['source']})[/dim]"
    )
    r = data["rotor"]
    con.print(f"polar moment of inertia of the rotor ({r['blades']} blade{'s' if r['blades'] != 1 else ''}, blades only): "
              f"{_fmt(cv(r['polar_inertia_rotor_kgm2'], 'inertia'))} {lab('inertia')}")
    if "counterweight_sizing" in data:
        s = data["counterweight_sizing"]
        con.print(
            f"counterweight for {_fmt(cv(s['target_ctm_Nm'], 'moment'))} {lab('moment')} net CTM at "
            f"{_fmt(s['blade_angle_deg'], 4)} deg, {_fmt(s['rpm'])} rpm: {_fmt(cv(s['mass_kg'], 'mass'))} {lab('mass')}, "
            f"adding {_fmt(cv(s['added_radial_pull_N'], 'force'))} {lab('force')} radial pull"
        )
    con.print(f"[dim]{CAUTION}[/dim]")


def _stage_progress(console):
    """A rich progress display of the review stages on stderr (a plain line per stage when
    stderr is not a terminal, so logs show where the time went)."""
    import time

    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

    from .review import STAGES

    labels = _STAGE_LABELS
    if not console.is_terminal:
        t0 = time.perf_counter()

        def plain(stage, i, n):
            console.print(f"[{time.perf_counter() - t0:6.1f} s] {labels.get(stage, stage)}")
        return plain, None
    prog = Progress(TextColumn("{task.description}"), BarColumn(), TextColumn("{task.completed}/{task.total}"),
                    TimeElapsedColumn(), console=console, transient=True)
    task = prog.add_task("review", total=len(STAGES))

    def show(stage, i, n):
        prog.update(task, completed=i, description=labels.get(stage, stage))
    return show, prog


def cmd_check(args) -> int:
    """The whole review: JSON, CSV, plots, renders, VTU and HTML in one folder."""
    from . import review
    from .job import load_job

    if not str(args.job).lower().endswith(".toml"):
        raise InputError(args.job, "check takes a job file (.toml); see `bladesolid demo` for an example")
    job = load_job(args.job, _flags(args))
    err = _console(stderr=True)
    show, prog = _stage_progress(err)
    if prog is not None:
        prog.start()
    try:
        rv = review.check(job, args.out, args.force, show)
    finally:
        if prog is not None:
            prog.stop()
    for w in rv.blade.warnings:
        err.print(f"[yellow]warning:[/yellow] {_esc(w)}")
    names = rv.files
    _print_loads(_console(), rv.blade, rv.report, rv.ops, args.us)
    con = _console()
    con.print(f"review written to [bold]{_esc(args.out)}[/bold]: " + ", ".join(names))
    con.print(f"open {_esc(os.path.join(args.out, 'report.html'))} in a browser for the whole review")
    cmp_ = rv.report.get("comparison")
    if cmp_ is not None and cmp_.get("verdict") == "outside limits":
        con.print("[bold red]comparison: outside limits[/bold red] — " + "; ".join(cmp_.get("reasons", [])))
        return 1
    return 0


DEMO_JOB = """\
# bladesolid demo job: the invented Brightwater Propellers BW-3 blade (3 blades, 2.0 m
# diameter, aluminium). Every number here is invented for the demo.
name = "BW-3 demo blade, serial BW3-0001 (invented)"
mesh = "demo_blade.stl"
units = "mm"
material = "al-2025-t6"
blades = 3

hub_centre = [0.0, 0.0, 0.0]
thrust_axis = [0.0, 0.0, 1.0]
pitch_axis = [0.0, 1.0, 0.0]
rotation = "right"
reference_fraction = 0.75

sweep = "-10:90:1"
rpm_sweep = "0:3000:50"
stations = 16
allowable = "200 MPa"          # invented figure for the demo, not a material allowable
proof_factor = 2.0

[[operating_point]]
name = "take-off"
rpm = 2500
blade_angle = 22.0

[[operating_point]]
name = "maximum continuous"
rpm = 2400
blade_angle = 28.0

[[operating_point]]
name = "overspeed"
rpm = 2875
blade_angle = 22.0

[[lumped_mass]]
name = "balance weight"
mass = "0.045 kg"
position = [-10.0, 160.0, 30.0]

[counterweight]                # size a counterweight: zero net CTM at take-off
radius = 160.0
arm = 90.0
clocking = 90.0
target_ctm = "0 N*m"
"""

DEMO_REPAIR_JOB = """\
# bladesolid demo repair job: the BW-3 blade after a leading-edge blend at the invented
# Larkspur Blade Repair shop, scanned in the scanner's own frame, checked against nominal.
name = "BW-3 serial BW3-0001 after LE blend (invented)"
mesh = "demo_blade_le_blend_scanned.stl"
reference = "demo_blade.stl"
limits = "repair_limits.toml"
units = "mm"
material = "al-2025-t6"
blades = 3
stations = 16

[[operating_point]]
name = "take-off"
rpm = 2500
blade_angle = 22.0
"""

DEMO_LIMITS = """\
# Allowed changes, repaired minus nominal. These are the USER'S limits, to be taken from the
# approved repair data; the figures below are invented for the demo.
source = "Larkspur Blade Repair, demo repair scheme (invented)"
mass = "-30 g:+2 g"
max_abs_static_moment = "15 kg*mm"
max_abs_ctm = "3 N*m"
blade_angle = "-0.25:0.25"
cg_shift = "1.5 mm"
max_deviation = "5 mm"
removed_volume = "12000 mm^3"
"""


def cmd_demo(args) -> int:
    """Write the demo blade, its jobs and limits into DIR and run `check` on the main job."""
    from .demo import write_demo_meshes
    from .report import atomic_write_text

    from .safefile import check_new_folder

    check_new_folder(args.dir, args.force)
    folder = os.path.abspath(args.dir)
    os.makedirs(folder, exist_ok=True)
    write_demo_meshes(folder)
    job_path = os.path.join(args.dir, "demo_job.toml")
    atomic_write_text(job_path, DEMO_JOB, force=True)
    atomic_write_text(os.path.join(args.dir, "repair_job.toml"), DEMO_REPAIR_JOB, force=True)
    atomic_write_text(os.path.join(args.dir, "repair_limits.toml"), DEMO_LIMITS, force=True)
    ns = argparse.Namespace(job=job_path, out=os.path.join(args.dir, "review"), force=True, us=args.us)
    code = cmd_check(ns)
    con = _console()
    # the command as the user typed it (e.g. .venv/bin/bladesolid), so the hint can be pasted
    prog = sys.argv[0] if os.path.basename(sys.argv[0]) == "bladesolid" else "bladesolid"
    con.print(f"next: the repair scenario — {_esc(prog)} check {_esc(os.path.join(args.dir, 'repair_job.toml'))} "
              f"--out {_esc(os.path.join(args.dir, 'repair-review'))}")
    return code


def cmd_view(args) -> int:
    """Open an interactive 3-D window of one per-element field (needs a display)."""
    from . import api, fields, views

    if not views.has_display():
        raise InputError("view", "no display to open a window on (DISPLAY is not set); the PNG renders of "
                                 "`bladesolid check` show the same fields")
    job = _job(args)
    require_operating_points(job)
    blade = api.blade_from_job(job, elements=True, progress=_progress(_console(stderr=True)))
    op = job.operating_points[0]
    beta = api.resolve_blade_angle(blade, op.blade_angle_deg, op.pitch_change_deg)
    f = fields.element_fields(blade, op.rpm, beta)
    views.render_field(blade, f, args.field, None, view=args.view, hotspots=fields.hot_spots(blade, f))
    return 0


def cmd_materials(args) -> int:
    from rich.table import Table

    from .materials import MATERIALS

    t = Table(title="Built-in materials (nominal densities; use the drawing's value for decisions)")
    t.add_column("name")
    t.add_column("density kg/m^3", justify="right")
    t.add_column("description")
    t.add_column("source")
    for m in MATERIALS.values():
        t.add_row(m.name, f"{m.density_kg_m3:g}", m.description, m.source)
    _console().print(t)
    return 0


def cmd_span(args) -> int:
    """Spanwise table: exact station cuts, section properties, centrifugal tension and stress."""
    from . import api, report
    from .span import SPAN_NOTE, plot_span, span_table, spanwise_rows

    _check_outputs(args.force, args.json, args.csv, args.plot)
    job = _job(args)
    require_operating_points(job)
    err = _console(stderr=True)
    blade = api.blade_from_job(job, elements=True, progress=_progress(err))
    _warn(err, blade)
    op = job.operating_points[0]
    table = span_table(blade, op.rpm, op.blade_angle_deg, stations=job.stations, allowable_Pa=job.allowable_Pa,
                       pitch_change_deg=op.pitch_change_deg)
    rows = spanwise_rows(table)
    if args.json:
        data = report.base_report(blade)
        data["blade_angle"] = report.blade_angle_section(blade)
        data["spanwise_operating_point"] = {"name": op.name, "rpm": table.rpm, "blade_angle_deg": table.blade_angle_deg,
                                            "allowable_Pa": table.allowable_Pa, "density_note": table.density_note}
        data["spanwise"] = rows
        data["spanwise_note"] = SPAN_NOTE
        report.atomic_write_text(args.json, report.dumps(data), args.force)
    if args.csv:
        report.atomic_write_text(args.csv, report.csv_text(spanwise_rows(table, flat=True)), args.force)
    if args.plot:
        plot_span(table, args.plot, args.force)
    _print_span(_console(), blade, table, rows, op, args.us)
    return 0


def _print_span(con, blade, table, rows, op, us):
    from rich.table import Table

    from .span import SPAN_NOTE

    cv, lab = _conv(us)
    if us:
        lu, ls = "in", cv(1.0, "length")
    elif blade.units == "mm":
        lu, ls = "mm", 1e3
    else:
        lu, ls = "m", 1.0
    su, ss = ("psi", cv(1.0, "stress")) if us else ("MPa", 1e-6)
    con.print(f"[bold]Spanwise table — {_esc(blade.name)}[/bold]: {_fmt(table.rpm)} rpm, blade angle "
              f"{_fmt(table.blade_angle_deg, 5)} deg ({op.name or 'first operating point'})")
    t = Table(show_header=True)
    cols = [("r", lu), ("area", f"{lu}^2"), ("chord", lu), ("β local", "deg"), ("mass outboard", lab("mass")),
            ("tension F·e", lab("force")), ("stress P/A", su)]
    if table.allowable_Pa is not None:
        cols.append(("MS (centrifugal)", "—"))
    cols += [("CTM outboard", lab("moment")), ("CTM strip", lab("moment"))]
    for name, unit in cols:
        t.add_column(f"{name}\n{unit}", justify="right")

    def f(x, scale=1.0, digits=5):
        return _fmt(None if x is None else x * scale, digits)

    for r in rows:
        cells = [f(r["radius_m"], ls), f(r["area_m2"], ls**2), f(r["chord_m"], ls), f(r["local_blade_angle_deg"], 1, 4),
                 f(r["mass_outboard_kg"], cv(1.0, "mass")), f(r["cf_outboard_N"], cv(1.0, "force")),
                 f(r["stress_Pa"], ss, 4)]
        if table.allowable_Pa is not None:
            cells.append(f(r["margin_of_safety"], 1, 3))
        cells += [f(r["ctm_outboard_Nm"], cv(1.0, "moment")), f(r["ctm_strip_outboard_Nm"], cv(1.0, "moment"))]
        t.add_row(*cells)
    con.print(t)
    if table.allowable_Pa is not None:
        con.print(f"allowable {_fmt(table.allowable_Pa * ss, 5)} {su}; MS = allowable/(P/A) − 1")
    if len(table):
        mc = cv(1.0, "moment")
        con.print(f"CTM outboard of r = {_fmt(table.radius_m[0] * ls, 5)} {lu}: solid {_fmt(table.ctm_outboard_Nm[0] * mc, 5)}, "
                  f"strip {_fmt(table.ctm_strip_outboard_Nm[0] * mc, 5)}, strip + section-centroid offset "
                  f"{_fmt((table.ctm_strip_outboard_Nm[0] + table.ctm_offset_outboard_Nm[0]) * mc, 5)} {lab('moment')}")
    if table.density_note != "single density":
        con.print(f"[yellow]note:[/yellow] {_esc(table.density_note)}")
    con.print(f"[dim]{SPAN_NOTE}[/dim]")
    con.print(f"[dim]{CAUTION}[/dim]")


def cmd_compare(args) -> int:
    """A repaired / re-profiled blade against its reference: registration, deviation, volumes,
    deltas and the verdict against the user's limits (exit 1 when outside them)."""
    from . import compare, report

    _check_outputs(args.force, args.json, args.deviation_png)
    job = _job(args)
    if job.reference is None:
        raise InputError("--reference", "compare needs the reference (nominal) blade: --reference MESH")
    require_operating_points(job)
    err = _console(stderr=True)
    from .review import compare_job

    result, reference, repaired = compare_job(job, transform=args.transform, reference_units=args.reference_units,
                                              progress=_progress(err))
    _warn(err, reference)
    for w in repaired.warnings:
        err.print(f"[yellow]warning:[/yellow] {_esc(job.mesh)}: {_esc(w)}")
    for w in result.warnings:
        err.print(f"[yellow]warning:[/yellow] {_esc(w)}")
    picture = None
    if args.deviation_png:
        try:
            from .views import render_deviation
        except ImportError:
            picture = "skipped: bladesolid.views.render_deviation is not available in this installation"
            err.print(f"[yellow]note:[/yellow] deviation picture {picture}")
        else:
            d = result.deviation
            render_deviation(d.vertices, d.faces, d.values, args.deviation_png, frame=reference.frame,
                             title=f"Deviation — {result.repaired_name}",
                             force=args.force)
            picture = args.deviation_png
    data = {
        "schema": report.SCHEMA,
        "tool": {"name": "bladesolid", "version": __version__},
        "caution": CAUTION,
        "input": {"repaired_mesh": job.mesh, "reference_mesh": job.reference, "units": job.units,
                  "reference_units": args.reference_units or job.units, "limits": job.limits,
                  "transform": args.transform, "operating_point": job.operating_points[0].name},
        "warnings": list(reference.warnings) + list(repaired.warnings) + list(result.warnings),
        "comparison": compare.comparison_section(result),
    }
    data["comparison"]["deviation_png"] = picture
    if args.json:
        report.atomic_write_text(args.json, report.dumps(data), args.force)
    _print_compare(_console(), result, args.us)
    return 1 if result.verdict == "outside limits" else 0


def _print_compare(con, c, us):
    from rich.table import Table

    from .compare import LIMITS_NOTE, limit_value_text, rotation_angle_deg

    if us:
        from .units import CUSTOMARY

        u = {key: (CUSTOMARY[kind][1], CUSTOMARY[kind][2]) for key, kind in (
            ("mass", "mass"), ("length", "length"), ("sm", "static_moment"), ("force", "force"), ("moment", "moment"),
            ("volume", "volume"))}
    else:
        u = {"mass": ("g", 1e3), "length": ("mm", 1e3), "sm": ("kg·mm", 1e3), "force": ("N", 1.0),
             "moment": ("N·m", 1.0), "volume": ("mm³", 1e9)}

    def q(x, kind, digits=5):
        return "—" if x is None else f"{_fmt(x * u[kind][1], digits)} {u[kind][0]}"

    r = c.registration
    con.print(f"[bold]Comparison — {_esc(c.repaired_name)} against the reference {_esc(c.reference_name)}[/bold]")
    how = "transform given" if r.method == "given" else f"{r.method} ({r.start}, {r.iterations} iterations, seed {r.seed})"
    con.print(f"registration: {how}; residuals of the best {r.kept_fraction:.0%} of {r.points} samples: RMS "
              f"{q(r.rms_m, 'length', 3)}, max {q(r.max_m, 'length', 3)}; all samples: RMS {q(r.rms_all_m, 'length', 3)}, "
              f"max {q(r.max_all_m, 'length', 3)}")
    T = c.transform_model
    con.print(f"transform repaired → reference frame: rotation {_fmt(rotation_angle_deg(T[:3, :3]), 6)} deg, translation "
              f"[{', '.join(_fmt(x * u['length'][1], 6) for x in T[:3, 3])}] {u['length'][0]}")
    d = c.deviation
    con.print(f"surface deviation per vertex (− inside the reference = material missing): min {q(d.min_m, 'length', 4)}, "
              f"max {q(d.max_m, 'length', 4)}, RMS {q(d.rms_m, 'length', 4)}")
    con.print(f"removed volume {q(c.removed_volume_m3, 'volume', 5)}, added volume {q(c.added_volume_m3, 'volume', 5)}")
    con.print(f"operating point: {_fmt(c.rpm)} rpm, both blades set to {_fmt(c.blade_angle_deg, 5)} deg at "
              f"r = {q(c.reference_radius_m, 'length', 5)}")
    t = Table(show_header=True)
    for col, just in (("figure", "left"), ("reference", "right"), ("repaired", "right"), ("change", "right")):
        t.add_column(col, justify=just)
    a, b, dl = c.reference, c.repaired, c.delta

    def row(label, kind, x, y, dx, digits=6):
        t.add_row(f"{label} ({u[kind][0]})", _fmt(None if x is None else x * u[kind][1], digits),
                  _fmt(None if y is None else y * u[kind][1], digits),
                  "—" if dx is None else f"{dx * u[kind][1]:+.{4}g}")

    row("mass", "mass", a.mass_kg, b.mass_kg, dl.mass_kg)
    for i, ax in enumerate("xyz"):
        row(f"CG {ax}, hub frame", "length", a.cg_m[i], b.cg_m[i], dl.cg_m[i])
    t.add_row(f"CG shift |Δc| ({u['length'][0]})", "", "", f"{dl.cg_shift_m * u['length'][1]:.4g}")
    row("static moment m·|c⊥|", "sm", a.static_moment_kgm, b.static_moment_kgm, dl.static_moment_kgm)
    t.add_row("blade angle at reference station (deg)", _fmt(a.modelled_deg, 6), _fmt(b.modelled_deg, 6),
              "—" if dl.blade_angle_deg is None else f"{dl.blade_angle_deg:+.4g}")
    row("radial pull F·e", "force", a.loads.radial_pull_N, b.loads.radial_pull_N, dl.radial_pull_N)
    row("CTM (+ toward coarse)", "moment", a.loads.ctm_Nm, b.loads.ctm_Nm, dl.ctm_Nm)
    con.print(t)
    if c.limits is None:
        con.print("verdict: [bold]no limits given — nothing was checked[/bold] (the report says \"within limits\" with "
                  "limits_checked = false); give --limits FILE with the allowed changes from the approved repair data")
    else:
        lt = Table(title=f"limits from {_esc(c.limits.path)}" + (f" — {_esc(c.limits.source)}" if c.limits.source else ""),
                   title_justify="left", show_header=True)
        for col in ("limit", "as written", "value", "result"):
            lt.add_column(col)
        for x in c.checks:
            lt.add_row(x.limit.key, x.limit.text, limit_value_text(x), "within" if x.within else "[red]exceeded[/red]")
        con.print(lt)
        colour = "green" if c.verdict == "within limits" else "red"
        con.print(f"verdict: [bold {colour}]{c.verdict}[/bold {colour}]")
        for reason in c.reasons:
            con.print(f"  • {_esc(reason)}")
    con.print(f"[dim]{LIMITS_NOTE}[/dim]")
    con.print(f"[dim]{CAUTION}[/dim]")


def cmd_match(args) -> int:
    """Assign the blades of a set to hub positions for the smallest static imbalance."""
    from . import compare, report

    _check_outputs(args.force, args.json, args.plot)
    if args.rpm is not None and not (math.isfinite(args.rpm) and args.rpm >= 0):
        raise InputError("--rpm", f"must be a non-negative number, got {args.rpm}")
    blades = [compare.read_set_report(p) for p in args.reports]
    result, rpm, warnings = compare.match_set(blades, rpm=args.rpm)
    section = compare.match_section(result, blades, rpm, warnings)
    err = _console(stderr=True)
    for w in warnings:
        err.print(f"[yellow]warning:[/yellow] {_esc(w)}")
    if args.json:
        data = {"schema": report.SCHEMA, "tool": {"name": "bladesolid", "version": __version__}, "caution": CAUTION,
                "input": {"reports": list(args.reports)}, "warnings": list(warnings), "match": section}
        report.atomic_write_text(args.json, report.dumps(data), args.force)
    if args.plot:
        from .views import plot_match

        plot_match(report.jsonable(section), args.plot, force=args.force)
    _print_match(_console(), section, args.us)
    return 0


def _print_match(con, s, us):
    from rich.table import Table

    from .units import CUSTOMARY

    sm_u, sm_k = CUSTOMARY["static_moment"][1:] if us else ("kg·mm", 1e3)
    f_u, f_k = CUSTOMARY["force"][1:] if us else ("N", 1.0)
    m_u, m_k = CUSTOMARY["moment"][1:] if us else ("N·m", 1.0)
    con.print(f"[bold]Blade set matching — {s['positions']} blades, {s['positions']} positions[/bold] ({s['method']})")
    bt = Table(show_header=True)
    for col in ("blade", "name", f"static moment ({sm_u})", f"CTM ({m_u})", f"radial pull ({f_u})", "report"):
        bt.add_column(col)
    for b in s["blades"]:
        bt.add_row(str(b["blade"]), _esc(b["name"]), _fmt(b["static_moment_kgm"] * sm_k), _fmt(b["ctm_Nm"] * m_k),
                   _fmt(b["radial_pull_N"] * f_k), _esc(b["report"]))
    con.print(bt)
    for label in ("best", "worst"):
        a = s[label]
        at = Table(title=f"{label} assignment", title_justify="left", show_header=True)
        for col in ("position", "clocking (deg)", "blade", "name"):
            at.add_column(col)
        for p in a["positions"]:
            at.add_row(str(p["position"]), _fmt(p["clocking_deg"], 5), str(p["blade"]), _esc(p["name"]))
        con.print(at)
        con.print(f"  residual static imbalance {_fmt(a['imbalance_kgm'] * sm_k, 5)} {sm_u} = "
                  f"{_fmt(a['imbalance_force_N'] * f_k, 5)} {f_u} at {_fmt(s['rpm'])} rpm; CTM resultant "
                  f"{_fmt(a['ctm_resultant_Nm'] * m_k, 4)} {m_u}")
    con.print(f"CTM spread (max − min) {_fmt(s['ctm_spread_Nm'] * m_k, 5)} {m_u}; static moment spread "
              f"{_fmt(s['static_moment_spread_kgm'] * sm_k, 5)} {sm_u}")
    con.print(f"[dim]{CAUTION}[/dim]")


def cmd_batch(args) -> int:
    """Many job files in parallel (this machine, or a dask cluster), one summary table."""
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn, TimeRemainingColumn
    from rich.table import Table
    from rich.text import Text

    from . import batch
    from .errors import one_line

    if args.workers is not None and args.workers < 0:
        raise InputError("--workers", f"must be 0 (run in this process) or more, got {args.workers}")
    if args.workers is not None and args.scheduler:
        raise UsageError("bladesolid batch: give either --workers (this machine) or --scheduler (a cluster), not both")
    jobs = batch.collect_jobs(args.inputs)
    err = _console(stderr=True)
    progress = Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
                        TimeRemainingColumn(), console=err, disable=not err.is_terminal)
    task = progress.add_task(f"{args.command} of {len(jobs)} blades", total=len(jobs))

    def on_done(row, done, total):
        progress.update(task, completed=done)
        if row["status"] not in (batch.OK, batch.OUTSIDE) and err.is_terminal:
            progress.console.print(Text(f"failed: {row['reason']}", style="red"))

    with progress:
        result = batch.run_batch(jobs, args.out, command=args.command, force=args.force, scheduler=args.scheduler,
                                 workers=args.workers, on_done=on_done)
    con = _console()
    t = Table(title=f"bladesolid batch — {args.command}, {len(result.rows)} blades, {result.where}, "
                    f"{result.seconds:.1f} s", title_justify="left")
    for col, just in (("blade", "left"), ("mass kg", "right"), ("CG radius m", "right"), ("radial pull N", "right"),
                      ("CTM N·m", "right"), ("at", "left"), ("status", "left")):
        t.add_column(col, justify=just)
    colours = {batch.OK: "green", batch.OUTSIDE: "yellow"}
    for r in result.rows:
        at = "" if r["rpm"] is None else f"{_fmt(r['rpm'])} rpm, {_fmt(r['blade_angle_deg'], 4)} deg"
        t.add_row(Text(one_line(r["name"] or os.path.basename(r["job"]), 60)), _fmt(r["mass_kg"]),
                  _fmt(r["cg_radius_m"]), _fmt(r["radial_pull_N"]), _fmt(r["ctm_Nm"]), Text(at),
                  Text(r["status"], style=colours.get(r["status"], "red")))
    con.print(t)
    for r in result.failures:
        con.print(Text(f"  {r['status']}: {r['reason']}"))
        print(f"bladesolid: error: {r['reason']}", file=sys.stderr)
    for r in result.rows:
        if r["status"] == batch.OUTSIDE:
            con.print(Text(f"  outside limits: {r['job']}: {r['reason']}"))
    con.print(Text(f"per-blade results in {args.out}/<job>/; summary in {result.summary_csv} and {result.summary_json}"))
    con.print(f"[dim]{CAUTION}[/dim]")
    return result.exit_status


# --- parser ---------------------------------------------------------------------------------


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="bladesolid", description="Mass properties and centrifugal loads of rotating blades.",
                epilog=CAUTION)
    p.add_argument("--version", action="version", version=f"bladesolid {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    m = sub.add_parser("mass", help="mass, CG, inertia tensors, static moment")
    _add_blade_flags(m)
    m.add_argument("--check-elements", action="store_true",
                   help="also build the tetrahedral mass elements and check them against the surface")
    m.set_defaults(func=cmd_mass)

    lo = sub.add_parser("loads", help="centrifugal loads and CTM at speed and blade angle")
    _add_blade_flags(lo)
    _add_load_flags(lo)
    lo.add_argument("--rpm-sweep", metavar="FROM:TO:STEP", help="speed sweep at the first operating point's blade angle, rpm")
    lo.add_argument("--csv", metavar="FILE", help="write the blade-angle sweep (CTM, pitch stiffness) as CSV")
    lo.add_argument("--plot", metavar="FILE.png", help="plot CTM and pitch stiffness over blade angle (operating angle marked)")
    lo.add_argument("--rpm-csv", metavar="FILE", help="write the speed sweep as CSV")
    lo.add_argument("--rpm-plot", metavar="FILE.png", help="plot CTM and radial pull over speed")
    lo.add_argument("--proof-factor", type=float, metavar="F", help="centrifugal proof load factor (default 2)")
    lo.set_defaults(func=cmd_loads)

    sp = sub.add_parser("span", help="spanwise cuts: section properties, centrifugal tension, stress and CTM")
    _add_blade_flags(sp)
    _add_load_flags(sp)
    sp.add_argument("--stations", metavar="N|R1,R2,...", help="station count, or radii along the pitch axis (model unit)")
    sp.add_argument("--allowable", metavar="QUANTITY", help='material allowable stress, e.g. "240 MPa" (centrifugal margin of safety)')
    sp.add_argument("--csv", metavar="FILE", help="write the spanwise table as CSV")
    sp.add_argument("--plot", metavar="FILE.png", help="plot stress, tension, CTM and area against radius")
    _add_element_flags(sp)
    sp.set_defaults(func=cmd_span)

    cp = sub.add_parser("compare", help="a repaired blade against its reference: registration, deviation, deltas, limits")
    _add_blade_flags(cp)
    _add_load_flags(cp)
    cp.add_argument("--reference", metavar="MESH", help="the reference (nominal) blade mesh; the hub-frame flags refer to it")
    cp.add_argument("--reference-units", metavar="U", help="length unit of the reference mesh (default: --units)")
    cp.add_argument("--limits", metavar="FILE", help="your allowed changes (TOML), from the approved repair data")
    cp.add_argument("--transform", metavar="FILE|identity",
                    help="rigid transform repaired -> reference frame (4x4 in JSON/TOML/text, translation in m unless "
                         "the file states units), or 'identity'; default: register automatically")
    cp.add_argument("--deviation-png", metavar="FILE.png", help="render the signed surface deviation")
    cp.set_defaults(func=cmd_compare)

    ma = sub.add_parser("match", help="assign the blades of a set to hub positions for the smallest static imbalance")
    ma.add_argument("reports", nargs="+", metavar="REPORT.json", help="bladesolid JSON reports (loads or check), one per blade")
    ma.add_argument("--rpm", type=float, metavar="N", help="speed for the imbalance force (default: the reports' rpm)")
    ma.add_argument("--json", metavar="FILE", help="write the JSON report here")
    ma.add_argument("--plot", metavar="FILE.png", help="draw the hub with the best and the worst assignment")
    ma.add_argument("--force", action="store_true", help="overwrite existing output files")
    ma.add_argument("--us", action="store_true", help="print US customary units (the JSON stays SI)")
    ma.set_defaults(func=cmd_match)

    ck = sub.add_parser("check", help="the whole review of a job: JSON, CSV, plots, renders, VTU and HTML in one folder")
    ck.add_argument("job", metavar="JOB.toml")
    ck.add_argument("--out", required=True, metavar="DIR", help="output folder (created; refused if not empty without --force)")
    _add_blade_flags(ck, positional=False, json_flag=False)
    _add_load_flags(ck)
    ck.add_argument("--rpm-sweep", metavar="FROM:TO:STEP", help="speed sweep, rpm")
    ck.add_argument("--stations", metavar="N|R1,R2,...", help="spanwise stations: a count or radii (model unit)")
    ck.add_argument("--allowable", metavar="QUANTITY", help='material allowable stress, e.g. "240 MPa"')
    ck.add_argument("--proof-factor", type=float, metavar="F", help="centrifugal proof load factor (default 2)")
    ck.add_argument("--reference", metavar="MESH", help="the nominal blade to compare this one with")
    ck.add_argument("--limits", metavar="FILE", help="limits file (TOML) for the comparison")
    _add_element_flags(ck)
    ck.set_defaults(func=cmd_check)

    dm = sub.add_parser("demo", help="write the demo blade and job into DIR and run check on it")
    dm.add_argument("dir", nargs="?", default="bladesolid-demo", metavar="DIR")
    dm.add_argument("--force", action="store_true", help="write into an existing, non-empty folder")
    dm.add_argument("--us", action="store_true", help="print US customary units (files stay SI)")
    dm.set_defaults(func=cmd_demo)

    bt = sub.add_parser("batch", help="many job files in parallel (this machine or a dask cluster), one summary")
    bt.add_argument("inputs", nargs="+", metavar="JOBS",
                    help="folders of job files (*.toml), job files, or text files listing job files (one per line)")
    bt.add_argument("--out", required=True, metavar="DIR",
                    help="results folder: DIR/<job>/report.json (or the check folder), DIR/summary.csv and .json")
    bt.add_argument("--command", choices=["mass", "loads", "check"], default="loads",
                    help="the analysis run for every job (default: loads)")
    bt.add_argument("--scheduler", metavar="ADDRESS",
                    help="a running dask scheduler, e.g. tcp://host:8786 (default: worker processes on this machine)")
    bt.add_argument("--workers", type=int, metavar="N",
                    help="worker processes on this machine (default: one per CPU; 0 = one job after another here)")
    bt.add_argument("--force", action="store_true", help="replace existing results and summaries")
    bt.set_defaults(func=cmd_batch)

    vw = sub.add_parser("view", help="an interactive 3-D window of a per-element field (needs a display)")
    _add_blade_flags(vw)
    _add_load_flags(vw)
    vw.add_argument("--field", default="ctm_Nm",
                    choices=["ctm_Nm", "radial_pull_N", "mass_kg", "ctm_share_band", "pull_share_band", "region"])
    vw.add_argument("--view", default="iso", choices=["planform", "tip", "iso", "aft"])
    _add_element_flags(vw)
    vw.set_defaults(func=cmd_view)

    mt = sub.add_parser("materials", help="list the built-in materials")
    mt.set_defaults(func=cmd_materials)
    return p


#: flags whose value may start with a minus sign ("--sweep -10:90:1", "--pitch-axis -1,0,0")
_SIGNED_FLAGS = {"--sweep", "--rpm-sweep", "--blade-angle", "--pitch-change", "--precone", "--hub-centre",
                 "--thrust-axis", "--pitch-axis", "--pitch-point"}


def _join_signed_values(argv: list[str]) -> list[str]:
    """Write ``--flag -value`` as ``--flag=-value`` so that a negative value is not taken for an option.

    >>> _join_signed_values(["loads", "--sweep", "-10:90:1", "--force"])
    ['loads', '--sweep=-10:90:1', '--force']
    """
    out, i = [], 0
    while i < len(argv):
        a = argv[i]
        if a in _SIGNED_FLAGS and i + 1 < len(argv) and len(argv[i + 1]) > 1 and argv[i + 1][0] == "-" \
                and (argv[i + 1][1].isdigit() or argv[i + 1][1] == "."):
            out.append(f"{a}={argv[i + 1]}")
            i += 2
            continue
        out.append(a)
        i += 1
    return out


def main(argv=None) -> int:
    """Entry point: returns the exit status."""
    parser = build_parser()
    try:
        argv = _join_signed_values([str(a) for a in (sys.argv[1:] if argv is None else argv)])
        args = parser.parse_args(argv)
        if not getattr(args, "command", None):
            parser.print_help()
            return 2
        return int(args.func(args) or 0)
    except UsageError as exc:
        print(str(exc).splitlines()[0], file=sys.stderr)
        return 2
    except InputError as exc:
        print(f"bladesolid: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("bladesolid: interrupted; no partial output was left", file=sys.stderr)
        return 130
    except MemoryError:
        print("bladesolid: error: out of memory; try a coarser mesh", file=sys.stderr)
        return 2
    except OSError as exc:  # disk full, unwritable folder, ... : one line, no traceback
        from .errors import one_line

        where = exc.filename if exc.filename else "output"
        print(f"bladesolid: error: {one_line(where, 300)}: {one_line(exc.strerror or exc, 300)}", file=sys.stderr)
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
