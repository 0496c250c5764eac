"""What the command line prints: tables and lines on the terminal (rich), SI or US customary.

Every user-supplied string is printed through :func:`esc` (one line, control characters and
rich markup escaped); every table ends with the caution.
"""

from __future__ import annotations

import contextlib
import contextvars
import io
import math
from dataclasses import dataclass, field

import numpy as np

from .. import CAUTION

__all__ = ["STAGE_LABELS", "console", "conv", "esc", "fmt", "live_console", "print_batch", "print_cad", "print_compare",
           "print_loads", "print_mass", "print_match", "print_materials", "print_repairs", "print_span", "progress", "release",
           "stage_progress", "stderr_session", "verbose", "warn"]


# --- standard error during a command: one line on failure, the warnings only on success -----------
#
# docs/CONVENTIONS.md §7: a run that ends in exit status 2 prints exactly one line on stderr. So
# while a command runs (``stderr_session``, opened by ``main``), what the command prints on
# stderr through ``console(stderr=True)`` — its warnings — is held back and shown only on the
# way to success: when the command asks for its stdout console (all its work is done by then)
# or when it returns. Progress is shown live only where it leaves nothing behind (a transient
# line on a terminal), or with ``--verbose`` (then warnings are shown live too).


@dataclass
class _Session:
    verbose: bool
    buffer: io.StringIO = field(default_factory=io.StringIO)
    deferred: object = None  # a rich Console writing into buffer
    status: object = None  # a transient rich Live on a terminal, while a stage is shown
    notes: list = field(default_factory=list)  # lines added at release (converted warnings)


_SESSION: contextvars.ContextVar[_Session | None] = contextvars.ContextVar("bladesolid_stderr", default=None)


def _console(stderr: bool, **kw):
    from rich.console import Console

    con = Console(stderr=stderr, highlight=False, soft_wrap=False, **kw)
    if not con.is_terminal and "file" not in kw:
        con = Console(stderr=stderr, highlight=False, soft_wrap=False, width=130, **kw)
    return con


def live_console():
    """A rich console on the real standard error (progress displays, which must be live)."""
    return _console(True)


def console(stderr=False):
    """A rich console on stdout (or ``stderr``), 130 columns wide when it is not a terminal.

    Inside a :func:`stderr_session`, the stderr console holds its lines back until the command
    succeeds (live with ``--verbose``), and asking for the stdout console first releases them:
    the results are being printed, so the work is done.
    """
    st = _SESSION.get()
    if st is not None:
        if stderr:
            if st.verbose:
                return live_console()
            if st.deferred is None:
                real = live_console()
                st.deferred = _console(True, file=st.buffer, force_terminal=real.is_terminal,
                                       width=real.width, color_system=real.color_system)
            return st.deferred
        release()
    return _console(stderr)


def _stop_status(st) -> None:
    if st is not None and st.status is not None:
        with contextlib.suppress(Exception):
            st.status.stop()
        st.status = None


def release(note: str | None = None) -> None:
    """Show the held-back stderr lines now (and ``note``, one more warning line); the command
    is on its way to success. Outside a session, only ``note`` is printed."""
    import sys

    st = _SESSION.get()
    if st is None:
        if note:
            live_console().print(f"[yellow]warning:[/yellow] {esc(note)}", soft_wrap=True)
        return
    _stop_status(st)
    if note:
        st.notes.append(note)
    text = st.buffer.getvalue()
    st.buffer.seek(0)
    st.buffer.truncate()
    if text:
        sys.stderr.write(text)
    if st.notes:
        live = live_console()
        for n in st.notes:
            live.print(f"[yellow]warning:[/yellow] {esc(n)}", soft_wrap=True)
        st.notes.clear()
    sys.stderr.flush()


@contextlib.contextmanager
def stderr_session(verbose: bool = False):
    """Hold back the command's stderr lines until it succeeds (see :func:`console`). On leaving,
    held-back lines are dropped unless :func:`release` was called (the caller does that on
    success); a transient progress line is cleared in every case."""
    st = _Session(verbose=bool(verbose))
    token = _SESSION.set(st)
    try:
        yield st
    finally:
        _stop_status(st)
        _SESSION.reset(token)


def verbose() -> bool:
    """True inside a ``--verbose`` session."""
    st = _SESSION.get()
    return bool(st is not None and st.verbose)


#: What each stage of loading a blade (api.load_blade) and of a review (review.STAGES) does.
STAGE_LABELS = {
    "load": "reading and checking the mesh", "integrate surface": "integrating the closed surface",
    "mesh": "filling the solid with tetrahedral mass elements", "integrate elements": "integrating the elements",
    "integrate": "integrating element moments", "loads": "centrifugal loads and sweeps",
    "spanwise": "spanwise station cuts", "fields": "per-element fields and hot spots",
    "compare": "comparing with the reference / matching the set", "views": "plots, renders and element file",
    "report": "JSON, CSV and HTML report",
}


def progress(con):
    """A callable(stage) that shows the current stage: one transient line on a terminal (it is
    gone when the command ends, however it ends), a line per stage with ``--verbose``, else
    nothing (``con`` is kept for the signature; the display goes to the real stderr)."""
    from rich.text import Text

    live = live_console()
    st = _SESSION.get()

    def show(stage):
        label = f"… {STAGE_LABELS.get(stage, stage)}"
        if st is not None and st.verbose:
            live.print(f"[dim]{esc(label)}[/dim]")
        elif live.is_terminal and st is not None:
            from rich.live import Live

            if st.status is None:
                # no refresh thread: a second thread would disable the parser's memory guard
                st.status = Live(Text(label, style="dim"), console=live, transient=True, auto_refresh=False)
                st.status.start()
            st.status.update(Text(label, style="dim"), refresh=True)
        elif live.is_terminal:
            live.print(f"[dim]{esc(label)}[/dim]")
    return show


def esc(text) -> str:
    """User text made safe to print: one line, control characters escaped, rich markup escaped."""
    from rich.markup import escape

    from ..errors import one_line

    return escape(one_line(text, 300))


def warn(con, blade):
    """The blade's warnings, one line each."""
    for w in blade.warnings:
        con.print(f"[yellow]warning:[/yellow] {esc(w)}", soft_wrap=True)  # one line each, whatever the width


def print_repairs(con, source, repairs, written=None, note=""):
    """The changes a repair made to the surface of ``source`` (one line each, in the mesh unit),
    then where the mended surface went (``written``) or ``note`` (why it was not written).
    Nothing is printed when no repair was asked (``repairs`` None)."""
    if repairs is None:
        return
    if not repairs:
        con.print(f"[green]repair:[/green] {esc(source)}: nothing needed mending")
        return
    for r in repairs:
        u = r.get("unit", "")
        where = ", ".join(f"{x:.4g}" for x in r["where"])
        vol = ""
        if r["volume_added"] or r["volume_removed"]:
            vol = f", volume +{r['volume_added']:.4g} / −{r['volume_removed']:.4g} {u}^3"
        part = f" (part {r['part']})" if r.get("part") else ""
        con.print(f"[yellow]repaired:[/yellow] {esc(source)}{part}: {esc(r['what'])} at ({where}) {u}; faces "
                  f"+{r['faces_added']} / −{r['faces_removed']}{vol}")
    if written:
        con.print(f"[yellow]repaired:[/yellow] the mended surface was written to {esc(written)}")
    elif note:
        con.print(f"[yellow]repaired:[/yellow] {esc(note)}")


def fmt(x, digits=6):
    """A number to ``digits`` significant digits; "—" for None and for what is not finite."""
    if x is None:
        return "—"
    if isinstance(x, float) and not math.isfinite(x):
        return "—"
    return f"{x:.{digits}g}"


def conv(us):
    """(convert(value, kind), label(kind)) for the chosen display units."""
    from ..units import to_customary, unit_label

    if us:
        return (lambda v, k: to_customary(v, k)), (lambda k: unit_label(k, "us"))
    return (lambda v, k: v), (lambda k: unit_label(k, "si"))


def stage_progress(con):
    """A progress display of the review stages on the real stderr: a transient bar on a
    terminal; when it is not a terminal, a plain line per stage with ``--verbose`` (so logs show
    where the time went), else nothing. ``con`` is kept for the signature."""
    import time

    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

    from ..review import STAGES

    labels = STAGE_LABELS
    con = live_console()  # progress is live or nothing, never held back with the warnings
    if not con.is_terminal:
        t0 = time.perf_counter()
        shown = verbose() or _SESSION.get() is None

        def plain(stage, i, n):
            if shown:  # log lines of the stages only with --verbose (exit 2 prints one line)
                con.print(f"[{time.perf_counter() - t0:6.1f} s] {labels.get(stage, stage)}")
        return plain, None
    prog = Progress(TextColumn("{task.description}"), BarColumn(), TextColumn("{task.completed}/{task.total}"),
                    TimeElapsedColumn(), console=con, transient=True)
    task = prog.add_task("review", total=len(STAGES))

    def show(stage, i, n):
        prog.update(task, completed=i, description=labels.get(stage, stage))
    return show, prog


def print_mass(con, blade, props, us):
    """The mass properties table of a blade (hub frame), then the caution."""
    from rich.table import Table

    cv, lab = conv(us)
    t = Table(title=f"Mass properties — {esc(blade.name)}", title_justify="left")
    for name, just in (("quantity", "left"), ("value  |  x", "right"), ("y", "right"), ("z", "right"), ("unit", "left")):
        t.add_column(name, justify=just)

    def row(label, value, unit, digits=6):
        if np.ndim(value) == 0:
            t.add_row(label, fmt(float(value), digits), "", "", unit)
        else:
            t.add_row(label, *[fmt(float(x), digits) for x in value], unit)

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
        row(f"blade angle at r = {fmt(cv(a.radius_m, 'length'), 5)} {lab('length')} ({a.reference_line})",
            a.angle_deg, "deg", 5)
        row("  chord line / face line / face − chord", [a.chord_deg, a.face_deg, a.face_minus_chord_deg], "deg", 5)
    t.add_row("surface check (relative)", f"{props.surface_check_rel_error:.1e}", "", "", props.surface_check_method)
    con.print(t)
    con.print(f"[dim]{CAUTION}[/dim]")


def print_cad(con, blade, us):
    """For a blade read from a CAD file: how it was read, and per body the CAD kernel's own
    figures beside bladesolid's with their relative differences (hub frame). Nothing otherwise."""
    from rich.table import Table

    c = blade.cad
    if c is None:
        return
    cv, lab = conv(us)
    unit = f"unit {esc(c['unit'])}" + (f" (declared: {esc(c['file_unit'])})" if c.get("file_unit") else " (given)")
    con.print(f"[bold]CAD input[/bold] — {esc(c['format'])}, {unit}, cad_tolerance {c['cad_tolerance']:g} "
              f"(chord {fmt(cv(c['chord_m'], 'length'), 3)} {lab('length')}), {sum(c['triangles']):,} triangles; "
              "mass moments from curved six-node triangles on the CAD geometry")
    t = Table(show_header=True)
    for name, just in (("body", "left"), ("figure", "left"), ("bladesolid", "right"), ("CAD kernel", "right"),
                       ("rel. difference", "right"), ("likely inexact", "left")):
        t.add_column(name, justify=just)
    for b in c["kernel"]:
        ours, diff = b["ours"], b["relative_difference"]
        side = {None: "— (agree)", "kernel": "CAD kernel", "either": "either"}.get(b["likely_inexact"], "")
        rows = (("volume", lab("volume"), cv(ours["volume_m3"], "volume"), cv(b["volume_m3"], "volume"), "volume"),
                ("CG", lab("length"), cv(np.asarray(ours["cg_m"]), "length"), cv(np.asarray(b["cg_m"]), "length"), "cg"),
                ("I about CG, diagonal", lab("inertia"), cv(np.diagonal(ours["inertia_cg_kgm2"]), "inertia"),
                 cv(np.diagonal(b["inertia_cg_kgm2"]), "inertia"), "inertia_cg"))
        for i, (label, unit_label, mine, theirs, key) in enumerate(rows):
            show = (lambda v: fmt(float(v), 7)) if np.ndim(mine) == 0 else (
                lambda v: ", ".join(fmt(float(x), 6) for x in v))
            t.add_row(f"body {b['body']}" if i == 0 else "", f"{label} ({unit_label})", show(mine), show(theirs),
                      f"{diff[key]:.1e}", side if i == 0 else "")
    con.print(t)
    from ..cad import CURVED_ERROR_SHARE

    est = max(b["error_estimate"] for b in c["kernel"])
    con.print(f"[dim]bladesolid's own error estimate {est:.1e} ({CURVED_ERROR_SHARE:g} of the curved triangles' "
              "difference from straight ones); the kernel integrates B-spline faces inexactly, so a difference well "
              "above the estimate is likely the kernel's[/dim]")
    if "elements_volume_rel_difference" in c:
        con.print(f"[dim]the mass elements fill the straight triangles (element fields, spanwise cuts, views): volume "
                  f"{100 * c['elements_volume_rel_difference']:+.3g} % from the solid's[/dim]")


def print_loads(con, blade, data, us):
    """The loads at every operating point of a ``loads`` report ``data`` (as written to JSON)."""
    from rich.table import Table

    from ..report import load_figures

    cv, lab = conv(us)
    a = blade.modelled_angle
    con.print(f"[bold]Centrifugal loads — {esc(blade.name)}[/bold]")
    mp = data["mass_properties"]
    con.print(
        f"mass {fmt(cv(mp['mass_kg'], 'mass'))} {lab('mass')}, CG radius "
        f"{fmt(cv(float(mp['cg_m'][1]), 'length'))} {lab('length')}, modelled blade angle "
        f"{fmt(a.angle_deg if a else None, 5)} deg at r = {fmt(cv(blade.reference_radius_m, 'length'), 5)} {lab('length')}"
        + ("" if a is None else f" on the {a.reference_line} line (chord {fmt(a.chord_deg, 5)} deg, face "
                                f"{fmt(a.face_deg, 5)} deg, face − chord {fmt(a.face_minus_chord_deg, 3)} deg)")
    )
    t = Table(show_header=True)
    t.add_column("figure")
    t.add_column("unit")
    for o in data["operating_points"]:
        t.add_column(esc(o["name"]), justify="right")
    for label, unit, values, digits in load_figures(data["operating_points"], us):
        t.add_row(label, unit, *[fmt(v, digits) for v in values])
    con.print(t)
    c = data["ctm_curve"]
    zs = ", ".join(fmt(z, 5) for z in c["zero_ctm_in_sweep_deg"]) or "none in the sweep range"
    con.print(f"CTM is zero at blade angles (deg): {zs}")
    pl = data["proof_load"]
    con.print(
        f"centrifugal proof load: {fmt(cv(pl['proof_load_N'], 'force'))} {lab('force')} "
        f"= {pl['factor']:g} × {fmt(cv(pl['radial_pull_N'], 'force'))} {lab('force')}, {esc(pl['basis'])} "
        f"[dim]({pl['source']})[/dim]"
    )
    r = data["rotor"]
    con.print(f"polar moment of inertia of the rotor ({r['blades']} blade{'s' if r['blades'] != 1 else ''}, blades only): "
              f"{fmt(cv(r['polar_inertia_rotor_kgm2'], 'inertia'))} {lab('inertia')}")
    if "counterweight_sizing" in data:
        s = data["counterweight_sizing"]
        con.print(
            f"counterweight for {fmt(cv(s['target_ctm_Nm'], 'moment'))} {lab('moment')} net CTM at "
            f"{fmt(s['blade_angle_deg'], 4)} deg, {fmt(s['rpm'])} rpm: {fmt(cv(s['mass_kg'], 'mass'))} {lab('mass')}, "
            f"adding {fmt(cv(s['added_radial_pull_N'], 'force'))} {lab('force')} radial pull"
        )
    con.print(f"[dim]{CAUTION}[/dim]")


def print_span(con, blade, table, rows, op, us):
    """The spanwise table at one operating point, the strip-estimate comparison and the notes."""
    from rich.table import Table

    from ..span import SPAN_NOTE

    cv, lab = conv(us)
    if us:
        lu, ls = "in", cv(1.0, "length")
    elif blade.units == "mm":
        lu, ls = "mm", 1e3
    else:
        lu, ls = "m", 1.0
    su, ss = ("psi", cv(1.0, "stress")) if us else ("MPa", 1e-6)
    con.print(f"[bold]Spanwise table — {esc(blade.name)}[/bold]: {fmt(table.rpm)} rpm, blade angle "
              f"{fmt(table.blade_angle_deg, 5)} deg ({op.name or 'first operating point'})")
    t = Table(show_header=True)
    cols = [("r", lu), ("area", f"{lu}^2"), ("chord", lu), ("β local", "deg"), ("mass outboard", lab("mass")),
            ("tension F·e", lab("force")), ("stress P/A", su)]
    if table.allowable_Pa is not None:
        cols.append(("MS (centrifugal)", "—"))
    cols += [("CTM outboard", lab("moment")), ("CTM strip", lab("moment"))]
    for name, unit in cols:
        t.add_column(f"{name}\n{unit}", justify="right")

    def f(x, scale=1.0, digits=5):
        return fmt(None if x is None else x * scale, digits)

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
        con.print(f"allowable {fmt(table.allowable_Pa * ss, 5)} {su}; MS = allowable/(P/A) − 1")
    if len(table):
        mc = cv(1.0, "moment")
        con.print(f"CTM outboard of r = {fmt(table.radius_m[0] * ls, 5)} {lu}: solid {fmt(table.ctm_outboard_Nm[0] * mc, 5)}, "
                  f"strip {fmt(table.ctm_strip_outboard_Nm[0] * mc, 5)}, strip + section-centroid offset "
                  f"{fmt((table.ctm_strip_outboard_Nm[0] + table.ctm_offset_outboard_Nm[0]) * mc, 5)} {lab('moment')}")
    if table.density_note != "single density":
        con.print(f"[yellow]note:[/yellow] {esc(table.density_note)}")
    con.print(f"[dim]{SPAN_NOTE}[/dim]")
    con.print(f"[dim]{CAUTION}[/dim]")


def print_compare(con, c, us):
    """A comparison: registration, deviation, volumes, the figures of both blades, limits, verdict."""
    from rich.table import Table

    from ..compare import LIMITS_NOTE, limit_value_text, rotation_angle_deg

    if us:
        from ..units import CUSTOMARY

        u = {key: (CUSTOMARY[kind][1], CUSTOMARY[kind][2]) for key, kind in (
            ("mass", "mass"), ("length", "length"), ("sm", "static_moment"), ("force", "force"), ("moment", "moment"),
            ("volume", "volume"))}
    else:
        u = {"mass": ("g", 1e3), "length": ("mm", 1e3), "sm": ("kg·mm", 1e3), "force": ("N", 1.0),
             "moment": ("N·m", 1.0), "volume": ("mm³", 1e9)}

    def q(x, kind, digits=5):
        return "—" if x is None else f"{fmt(x * u[kind][1], digits)} {u[kind][0]}"

    r = c.registration
    con.print(f"[bold]Comparison — {esc(c.repaired_name)} against the reference {esc(c.reference_name)}[/bold]")
    how = "transform given" if r.method == "given" else f"{r.method} ({r.start}, {r.iterations} iterations, seed {r.seed})"
    con.print(f"registration: {how}; residuals of the best {r.kept_fraction:.0%} of {r.points} samples: RMS "
              f"{q(r.rms_m, 'length', 3)}, max {q(r.max_m, 'length', 3)}; all samples: RMS {q(r.rms_all_m, 'length', 3)}, "
              f"max {q(r.max_all_m, 'length', 3)}")
    T = c.transform_model
    con.print(f"transform repaired → reference frame: rotation {fmt(rotation_angle_deg(T[:3, :3]), 6)} deg, translation "
              f"[{', '.join(fmt(x * u['length'][1], 6) for x in T[:3, 3])}] {u['length'][0]}")
    d = c.deviation
    con.print(f"surface deviation per vertex (− inside the reference = material missing): min {q(d.min_m, 'length', 4)}, "
              f"max {q(d.max_m, 'length', 4)}, RMS {q(d.rms_m, 'length', 4)}")
    con.print(f"removed volume {q(c.removed_volume_m3, 'volume', 5)}, added volume {q(c.added_volume_m3, 'volume', 5)}")
    con.print(f"operating point: {fmt(c.rpm)} rpm, both blades set to {fmt(c.blade_angle_deg, 5)} deg at "
              f"r = {q(c.reference_radius_m, 'length', 5)}")
    t = Table(show_header=True)
    for col, just in (("figure", "left"), ("reference", "right"), ("repaired", "right"), ("change", "right")):
        t.add_column(col, justify=just)
    a, b, dl = c.reference, c.repaired, c.delta

    def row(label, kind, x, y, dx, digits=6):
        t.add_row(f"{label} ({u[kind][0]})", fmt(None if x is None else x * u[kind][1], digits),
                  fmt(None if y is None else y * u[kind][1], digits),
                  "—" if dx is None else f"{dx * u[kind][1]:+.{4}g}")

    row("mass", "mass", a.mass_kg, b.mass_kg, dl.mass_kg)
    for i, ax in enumerate("xyz"):
        row(f"CG {ax}, hub frame", "length", a.cg_m[i], b.cg_m[i], dl.cg_m[i])
    t.add_row(f"CG shift |Δc| ({u['length'][0]})", "", "", f"{dl.cg_shift_m * u['length'][1]:.4g}")
    row("static moment m·|c⊥|", "sm", a.static_moment_kgm, b.static_moment_kgm, dl.static_moment_kgm)
    t.add_row("blade angle at reference station (deg)", fmt(a.modelled_deg, 6), fmt(b.modelled_deg, 6),
              "—" if dl.blade_angle_deg is None else f"{dl.blade_angle_deg:+.4g}")
    row("radial pull F·e", "force", a.loads.radial_pull_N, b.loads.radial_pull_N, dl.radial_pull_N)
    row("CTM (+ toward coarse)", "moment", a.loads.ctm_Nm, b.loads.ctm_Nm, dl.ctm_Nm)
    con.print(t)
    if c.limits is None:
        con.print("verdict: [bold]no limits given — nothing was checked[/bold] (the report says \"within limits\" with "
                  "limits_checked = false); give --limits FILE with the allowed changes from the approved repair data")
    else:
        lt = Table(title=f"limits from {esc(c.limits.path)}" + (f" — {esc(c.limits.source)}" if c.limits.source else ""),
                   title_justify="left", show_header=True)
        for col in ("limit", "as written", "value", "result"):
            lt.add_column(col)
        for x in c.checks:
            lt.add_row(x.limit.key, x.limit.text, limit_value_text(x), "within" if x.within else "[red]exceeded[/red]")
        con.print(lt)
        colour = "green" if c.verdict == "within limits" else "red"
        con.print(f"verdict: [bold {colour}]{c.verdict}[/bold {colour}]")
        for reason in c.reasons:
            con.print(f"  • {esc(reason)}")
    con.print(f"[dim]{LIMITS_NOTE}[/dim]")
    con.print(f"[dim]{CAUTION}[/dim]")


def print_match(con, s, us):
    """A blade-set match (the ``match`` section of the report): the blades, best and worst assignment."""
    from rich.table import Table

    from ..units import CUSTOMARY

    sm_u, sm_k = CUSTOMARY["static_moment"][1:] if us else ("kg·mm", 1e3)
    f_u, f_k = CUSTOMARY["force"][1:] if us else ("N", 1.0)
    m_u, m_k = CUSTOMARY["moment"][1:] if us else ("N·m", 1.0)
    con.print(f"[bold]Blade set matching — {s['positions']} blades, {s['positions']} positions[/bold] ({s['method']})")
    bt = Table(show_header=True)
    for col in ("blade", "name", f"static moment ({sm_u})", f"CTM ({m_u})", f"radial pull ({f_u})", "report"):
        bt.add_column(col)
    for b in s["blades"]:
        bt.add_row(str(b["blade"]), esc(b["name"]), fmt(b["static_moment_kgm"] * sm_k), fmt(b["ctm_Nm"] * m_k),
                   fmt(b["radial_pull_N"] * f_k), esc(b["report"]))
    con.print(bt)
    for label in ("best", "worst"):
        a = s[label]
        at = Table(title=f"{label} assignment", title_justify="left", show_header=True)
        for col in ("position", "clocking (deg)", "blade", "name"):
            at.add_column(col)
        for p in a["positions"]:
            at.add_row(str(p["position"]), fmt(p["clocking_deg"], 5), str(p["blade"]), esc(p["name"]))
        con.print(at)
        con.print(f"  residual static imbalance {fmt(a['imbalance_kgm'] * sm_k, 5)} {sm_u} = "
                  f"{fmt(a['imbalance_force_N'] * f_k, 5)} {f_u} at {fmt(s['rpm'])} rpm; CTM resultant "
                  f"{fmt(a['ctm_resultant_Nm'] * m_k, 4)} {m_u}")
    con.print(f"CTM spread (max − min) {fmt(s['ctm_spread_Nm'] * m_k, 5)} {m_u}; static moment spread "
              f"{fmt(s['static_moment_spread_kgm'] * sm_k, 5)} {sm_u}")
    con.print(f"[dim]{CAUTION}[/dim]")


def print_materials(con, materials):
    """The built-in material table, with sources."""
    from rich.table import Table

    t = Table(title="Built-in materials (nominal densities; use the drawing's value for decisions)")
    t.add_column("name")
    t.add_column("density kg/m^3", justify="right")
    t.add_column("description")
    t.add_column("source")
    for m in materials:
        t.add_row(m.name, f"{m.density_kg_m3:g}", m.description, m.source)
    con.print(t)


def print_batch(con, result, command: str, out: str):
    """The summary table of a batch run, one row per blade, then the failures and the files."""
    import os

    from rich.table import Table
    from rich.text import Text

    from .. import batch
    from ..errors import one_line

    t = Table(title=f"bladesolid batch — {command}, {len(result.rows)} blades, {result.where}, "
                    f"{result.seconds:.1f} s", title_justify="left")
    for col, just in (("blade", "left"), ("mass kg", "right"), ("CG radius m", "right"), ("radial pull N", "right"),
                      ("CTM N·m", "right"), ("at", "left"), ("status", "left")):
        t.add_column(col, justify=just)
    colours = {batch.OK: "green", batch.OUTSIDE: "yellow"}
    for r in result.rows:
        at = "" if r["rpm"] is None else f"{fmt(r['rpm'])} rpm, {fmt(r['blade_angle_deg'], 4)} deg"
        t.add_row(Text(one_line(r["name"] or os.path.basename(r["job"]), 60)), fmt(r["mass_kg"]),
                  fmt(r["cg_radius_m"]), fmt(r["radial_pull_N"]), fmt(r["ctm_Nm"]), Text(at),
                  Text(r["status"], style=colours.get(r["status"], "red")))
    con.print(t)
    for r in result.failures:
        con.print(Text(f"  {r['status']}: {r['reason']}"))
    for r in result.rows:
        if r["status"] == batch.OUTSIDE:
            con.print(Text(f"  outside limits: {r['job']}: {r['reason']}"))
    con.print(Text(f"per-blade results in {out}/<job>/; summary in {result.summary_csv} and {result.summary_json}"))
    con.print(f"[dim]{CAUTION}[/dim]")
