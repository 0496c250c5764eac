"""One function per sub-command: read the arguments, call the library, write the outputs, print.

Nothing is computed or assembled here: the figures come from :mod:`bladesolid.api`,
:mod:`bladesolid.review` and :mod:`bladesolid.compare`, the JSON reports from
:mod:`bladesolid.report`, the terminal tables from :mod:`bladesolid.cli.printing`. Outputs
are checked before any work (:func:`~bladesolid.cli.options.check_outputs`).
"""

from __future__ import annotations

import argparse
import math
import os
import sys

import numpy as np

from .. import CAUTION
from ..errors import InputError
from ..safefile import write_caution_file
from ..job import require_operating_points
from . import printing
from .options import UsageError, check_output_folder, check_outputs, job_of, job_keys

__all__ = ["cmd_batch", "cmd_check", "cmd_compare", "cmd_demo", "cmd_loads", "cmd_mass", "cmd_match",
           "cmd_materials", "cmd_span", "cmd_view"]


def _blade(args, *, elements: bool, speed: bool = True, beside=None):
    """(job, blade, stderr console, mended path): the validated job of the arguments (with an
    operating point when ``speed``) and its blade, loaded with the stages shown and its warnings
    printed. With a repair asked, the mended surface goes beside the output file ``beside``
    (checked here, before any work; None: no output file, nothing written)."""
    from .. import api

    job = job_of(args)
    if speed:
        require_operating_points(job)
    mended = _mended_path(job, job.mesh, beside, args.force)
    err = printing.console(stderr=True)
    blade = api.blade_from_job(job, elements=elements, progress=printing.progress(err))
    printing.warn(err, blade)
    return job, blade, err, mended


def _mended_path(job, mesh, beside, force, suffix: str = "_repaired") -> str | None:
    """Where the mended surface of ``mesh`` goes when the job asks for a repair:
    ``<mesh stem><suffix>.stl`` in the folder of the output file ``beside`` (docs/CONVENTIONS.md
    §8); refused before any work when it exists (without ``--force``). None: no repair asked,
    or no output file to put it beside."""
    if not job.repair or not beside or not mesh:
        return None
    from ..report import check_new_output

    stem = os.path.splitext(os.path.basename(str(mesh)))[0]
    path = os.path.join(os.path.dirname(str(beside)), f"{stem}{suffix}.stl")
    if os.path.realpath(path) == os.path.realpath(str(beside)):
        raise InputError(str(beside), f"is where the mended surface of {mesh} goes; give the report another name")
    check_new_output(path, force)
    return path


def _write_mended(err, source, repairs, mended, path, force, data=None, key: str = "geometry") -> None:
    """Say on ``err`` what the repair of ``source`` changed, write the mended surface
    (``(vertices, faces, part)`` in the file's unit, or None when nothing changed) to ``path``
    and record the path in ``data[key]["repaired_surface"]``. Nothing when no repair was asked
    (``repairs`` None)."""
    if repairs is None:
        return
    from ..io import stl_bytes
    from ..report import atomic_write_bytes

    written, note = None, ""
    if mended is not None:
        if path:
            written = atomic_write_bytes(path, stl_bytes(*mended), force)
        else:
            stem = os.path.splitext(os.path.basename(str(source)))[0]
            note = (f"the mended surface was not written: give --json FILE to keep it beside the report "
                    f"({stem}_repaired.stl)")
    printing.print_repairs(err, source, repairs, written, note)
    if data is not None and isinstance(data.get(key), dict):
        data[key]["repaired_surface"] = written


def cmd_mass(args) -> int:
    """Mass, CG, inertia tensors and static moment."""
    from .. import report

    check_outputs(args.force, ("--json", args.json))
    _, blade, err, mended = _blade(args, elements=args.check_elements, speed=False, beside=args.json)
    props = blade.mass_properties()
    if not props.surface_check_ok:
        err.print(f"[yellow]warning:[/yellow] the two independent routes to the moments disagree by "
                  f"{props.surface_check_rel_error:.1e} ({props.surface_check_method}); the surface may be "
                  "self-intersecting or overlapping — check the mesh")
    data = report.mass_report(blade, props)
    _write_mended(err, blade.source, blade.repairs, blade.mended_surface, mended, args.force, data)
    if args.json:
        report.atomic_write_text(args.json, report.dumps(data), args.force)
    printing.print_cad(printing.console(), blade, args.us)
    printing.print_mass(printing.console(), blade, props, args.us)
    return 0


def cmd_loads(args) -> int:
    """Centrifugal loads at every operating point, the sweeps, the proof load, the counterweight."""
    from .. import api, report
    from ..review import loads_report

    check_outputs(args.force, ("--json", args.json), ("--csv", args.csv), ("--plot", args.plot),
                  ("--rpm-csv", args.rpm_csv), ("--rpm-plot", args.rpm_plot))
    if (args.rpm_csv or args.rpm_plot) and job_of(args).rpm_sweep is None:  # before any work
        raise InputError("--rpm-sweep", "give the speed range (--rpm-sweep FROM:TO:STEP) for --rpm-csv / --rpm-plot")
    job, blade, err, mended = _blade(args, elements=False, beside=args.json)
    ops = api.loads_for_job(blade, job)
    data = loads_report(blade, job, ops)
    if (args.rpm_csv or args.rpm_plot) and "rpm_sweep" not in data:
        raise InputError("--rpm-sweep", "give the speed range (--rpm-sweep FROM:TO:STEP) for --rpm-csv / --rpm-plot")
    if args.csv:
        report.atomic_write_text(args.csv, report.csv_text(data["pitch_sweep"]), args.force)
    if args.rpm_csv:
        report.atomic_write_text(args.rpm_csv, report.csv_text(data["rpm_sweep"]), args.force)
    if args.plot or args.rpm_plot:
        from .. import views

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
    _write_mended(err, blade.source, blade.repairs, blade.mended_surface, mended, args.force, data)
    if args.json:
        report.atomic_write_text(args.json, report.dumps(data), args.force)
    printing.print_cad(printing.console(), blade, args.us)
    printing.print_loads(printing.console(), blade, data, args.us)
    return 0


def cmd_check(args) -> int:
    """The whole review: JSON, CSV, plots, renders, VTU and HTML in one folder."""
    from .. import review
    from ..job import load_job

    if not str(args.job).lower().endswith(".toml"):
        raise InputError(args.job, "check takes a job file (.toml); see `bladesolid demo` for an example")
    check_output_folder("--out", args.out, args.force)
    job = load_job(args.job, job_keys(args))
    err = printing.console(stderr=True)
    show, prog = printing.stage_progress(err)
    if prog is not None:
        prog.start()
    try:
        rv = review.check(job, args.out, args.force, show)
    finally:
        if prog is not None:
            prog.stop()
    printing.warn(err, rv.blade)
    for b, key in ((rv.blade, "geometry"), (rv.reference, "reference_geometry")):
        if b is not None and b.repairs is not None:
            written = (rv.report.get(key) or {}).get("repaired_surface")
            printing.print_repairs(err, b.source, b.repairs, written and os.path.join(args.out, written))
    con = printing.console()
    printing.print_cad(con, rv.blade, args.us)
    printing.print_loads(con, rv.blade, rv.report, args.us)
    con.print(f"review written to [bold]{printing.esc(args.out)}[/bold]: " + ", ".join(rv.files))
    con.print(f"open {printing.esc(os.path.join(args.out, 'report.html'))} in a browser for the whole review")
    cmp_ = rv.report.get("comparison")
    if cmp_ is not None and cmp_.get("verdict") == "outside limits":
        con.print("[bold red]comparison: outside limits[/bold red] — " + "; ".join(cmp_.get("reasons", [])))
        return 1
    return 0


def cmd_demo(args) -> int:
    """Write the demo blade, its jobs and limits into DIR and run `check` on the demo job."""
    from ..demo import write_demo

    check_output_folder(args.dir, args.dir, args.force)
    paths = write_demo(args.dir)
    write_caution_file(args.dir)
    code = cmd_check(argparse.Namespace(job=paths["job"], out=os.path.join(args.dir, "review"), force=True,
                                        us=args.us))
    # the command as the user typed it (e.g. .venv/bin/bladesolid), so the hint can be pasted
    prog = sys.argv[0] if os.path.basename(sys.argv[0]) == "bladesolid" else "bladesolid"
    printing.console().print(
        f"next: the repair scenario — {printing.esc(prog)} check {printing.esc(paths['repair_job'])} "
        f"--out {printing.esc(os.path.join(args.dir, 'repair-review'))}")
    if "step_job" in paths:
        printing.console().print(
            f"the same blade as a STEP solid: {printing.esc(prog)} check {printing.esc(paths['step_job'])} "
            f"--out {printing.esc(os.path.join(args.dir, 'step-review'))}")
    return code


def cmd_view(args) -> int:
    """Open an interactive 3-D window of one per-element field (needs a display)."""
    from .. import fields, views
    from ..display import display_problem

    problem = display_problem()  # before any work: a display that does not answer opens no window
    if problem:
        raise InputError("view", f"{problem}; the PNG renders of `bladesolid check` show the same fields")
    job, blade, err, _ = _blade(args, elements=True)
    if blade.mended_surface is not None:
        printing.print_repairs(err, blade.source, blade.repairs, None,
                               "the mended surface was not written: view writes no files (mass, loads or span with "
                               "--json FILE keep it beside the report)")
    else:
        printing.print_repairs(err, blade.source, blade.repairs)
    op = job.operating_points[0]
    f = blade.fields(op.rpm, op.blade_angle_deg, op.pitch_change_deg)
    printing.console().print(f"[dim]{CAUTION}[/dim]")  # the window shows it too
    views.render_field(blade, f, args.field, None, view=args.view, hotspots=fields.hot_spots(blade, f))
    return 0


def cmd_materials(args) -> int:
    """The built-in material table, with sources."""
    from ..materials import MATERIALS

    printing.print_materials(printing.console(), MATERIALS.values())
    return 0


def cmd_span(args) -> int:
    """Spanwise table: exact station cuts, section properties, centrifugal tension and stress."""
    from .. import report
    from ..span import SPAN_NOTE, plot_span, spanwise_rows

    check_outputs(args.force, ("--json", args.json), ("--csv", args.csv), ("--plot", args.plot))
    job, blade, err, mended = _blade(args, elements=True, beside=args.json or args.csv)
    op = job.operating_points[0]
    table = blade.span(op.rpm, op.blade_angle_deg, op.pitch_change_deg, stations=job.stations,
                       allowable_Pa=job.allowable_Pa)
    rows = spanwise_rows(table)
    data = report.span_report(blade, op, table, rows, SPAN_NOTE)
    _write_mended(err, blade.source, blade.repairs, blade.mended_surface, mended, args.force, data)
    if args.json:
        report.atomic_write_text(args.json, report.dumps(data), args.force)
    if args.csv:
        report.atomic_write_text(args.csv, report.csv_text(spanwise_rows(table, flat=True)), args.force)
    if args.plot:
        plot_span(table, args.plot, args.force)
    printing.print_cad(printing.console(), blade, args.us)
    printing.print_span(printing.console(), blade, table, rows, op, args.us)
    return 0


def cmd_compare(args) -> int:
    """A repaired / re-profiled blade against its reference: registration, deviation, volumes,
    deltas and the verdict against the user's limits (exit 1 when outside them)."""
    from .. import compare, report
    from ..review import compare_job

    check_outputs(args.force, ("--json", args.json), ("--deviation-png", args.deviation_png))
    job = job_of(args)
    if job.reference is None:
        raise InputError("--reference", "compare needs the reference (nominal) blade: --reference MESH")
    require_operating_points(job)
    mended = _mended_path(job, job.mesh, args.json, args.force)
    mended_ref = _mended_path(job, job.reference, args.json, args.force,
                              "_reference_repaired" if _same_stem(job.mesh, job.reference) else "_repaired")
    err = printing.console(stderr=True)
    result, reference, repaired = compare_job(job, transform=args.transform, reference_units=args.reference_units,
                                              progress=printing.progress(err))
    printing.warn(err, reference)
    for w in repaired.warnings:
        err.print(f"[yellow]warning:[/yellow] {printing.esc(job.mesh)}: {printing.esc(w)}")
    for w in result.warnings:
        err.print(f"[yellow]warning:[/yellow] {printing.esc(w)}")
    if args.deviation_png:
        from ..views import render_deviation

        d = result.deviation
        render_deviation(d.vertices, d.faces, d.values, args.deviation_png, frame=reference.frame,
                         title=f"Deviation — {result.repaired_name}", force=args.force)
    section = compare.comparison_section(result)
    section["deviation_png"] = args.deviation_png
    data = report.compare_report(job, section, [*reference.warnings, *repaired.warnings, *result.warnings],
                                 transform=args.transform, reference_units=args.reference_units)
    data.update(report.surface_sections(repaired))
    data.update(report.surface_sections(reference, "reference_"))
    _write_mended(err, job.mesh, repaired.repairs, repaired.mended, mended, args.force, data)
    _write_mended(err, job.reference, reference.repairs, reference.mended_surface, mended_ref, args.force, data,
                  "reference_geometry")
    if args.json:
        report.atomic_write_text(args.json, report.dumps(data), args.force)
    printing.print_compare(printing.console(), result, args.us)
    return 1 if result.verdict == "outside limits" else 0


def _same_stem(a, b) -> bool:
    return bool(a and b) and os.path.splitext(os.path.basename(str(a)))[0] == os.path.splitext(os.path.basename(str(b)))[0]


def cmd_match(args) -> int:
    """Assign the blades of a set to hub positions for the smallest static imbalance."""
    from .. import compare, report

    check_outputs(args.force, ("--json", args.json), ("--plot", args.plot))
    if args.rpm is not None and not (math.isfinite(args.rpm) and args.rpm >= 0):
        raise InputError("--rpm", f"must be a non-negative number, got {args.rpm}")
    if args.rpm is not None:
        from ..bounds import check_rpm

        check_rpm(args.rpm, "--rpm")
    blades = [compare.read_set_report(p) for p in args.reports]
    result, rpm, warnings = compare.match_set(blades, rpm=args.rpm)
    section = compare.match_section(result, blades, rpm, warnings)
    err = printing.console(stderr=True)
    for w in warnings:
        err.print(f"[yellow]warning:[/yellow] {printing.esc(w)}")
    if args.json:
        report.atomic_write_text(args.json, report.dumps(report.match_report(args.reports, section, warnings)),
                                 args.force)
    if args.plot:
        from ..views import plot_match

        plot_match(report.jsonable(section), args.plot, force=args.force)
    printing.print_match(printing.console(), section, args.us)
    return 0


def cmd_batch(args) -> int:
    """Many job files in parallel (this machine, or a dask cluster), one summary table."""
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn, TimeRemainingColumn
    from rich.text import Text

    from .. import batch

    if args.workers is not None and args.workers < 0:
        raise InputError("--workers", f"must be 0 (run in this process) or more, got {args.workers}")
    if args.workers is not None and args.scheduler:
        raise UsageError("bladesolid batch: give either --workers (this machine) or --scheduler (a cluster), not both")
    from ..safefile import probe_writable

    out_folder = os.path.abspath(args.out)
    if os.path.exists(out_folder) and not os.path.isdir(out_folder):
        raise InputError("--out", f"{args.out} exists and is not a folder")
    target = out_folder if os.path.isdir(out_folder) else os.path.dirname(out_folder)
    if not os.path.isdir(target):
        raise InputError("--out", f"{args.out}: the folder {target} does not exist")
    problem = probe_writable(target)  # before any work (existing results are refused job by job, later)
    if problem:
        raise InputError("--out", f"{args.out} cannot be written: {target} is not writable ({problem})")
    jobs = batch.collect_jobs(args.inputs)
    err = printing.live_console()  # a live bar on a terminal (it leaves nothing behind), else nothing
    shown = Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
                     TimeRemainingColumn(), console=err, disable=not err.is_terminal, transient=True)
    task = shown.add_task(f"{args.command} of {len(jobs)} blades", total=len(jobs))

    def on_done(row, done, total):
        shown.update(task, completed=done)
        if row["status"] not in (batch.OK, batch.OUTSIDE) and err.is_terminal:
            shown.console.print(Text(f"failed: {row['reason']}", style="red"))

    with shown:
        result = batch.run_batch(jobs, args.out, command=args.command, force=args.force, scheduler=args.scheduler,
                                 workers=args.workers, on_done=on_done)
    printing.print_batch(printing.console(), result, args.command, args.out)
    failures = result.failures
    if len(failures) == 1:
        print(f"bladesolid: error: {failures[0]['reason']}", file=sys.stderr)
    elif failures:  # one line on stderr (docs/CONVENTIONS.md §7); every reason is in the table and summary
        print(f"bladesolid: error: {len(failures)} of {len(result.rows)} jobs failed (each reason is listed above "
              f"and in {result.summary_csv}); the first: {failures[0]['reason']}", file=sys.stderr)
    return result.exit_status
