"""The whole review of one blade (``bladesolid check``): every stage, one output folder.

``run_review(job)`` computes everything in memory (mass, loads, sweeps, spanwise, element
fields, hot spots, comparison, set matching) and ``write_review(review, folder)`` writes the
JSON report, CSV tables, PNG plots and renders, the VTU element file and a self-contained
HTML page — into a staged temporary folder that is moved into place only when complete.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field

import numpy as np

from .errors import InputError
from .job import require_operating_points
from .units import rpm_to_rad_s

STAGES = ("load", "mesh", "integrate", "loads", "spanwise", "fields", "compare", "views", "report")


@dataclass
class Review:
    """Everything a review produced (in memory). ``report`` is the JSON report dict."""

    job: object
    blade: object
    report: dict
    ops: list
    sweep: tuple
    rpm_sweep: tuple | None = None
    span: object | None = None
    fields: object | None = None
    hot_spots: object | None = None
    comparison: object | None = None
    reference: object | None = None
    files: list = field(default_factory=list)
    timings_s: dict = field(default_factory=dict)


class _Clock:
    def __init__(self, progress):
        import time

        self._time = time.perf_counter
        self.progress = progress or (lambda stage, i, n: None)
        self.timings = {}
        self._stage = None
        self._t0 = None

    def start(self, stage):
        now = self._time()
        if self._stage is not None:
            self.timings[self._stage] = self.timings.get(self._stage, 0.0) + now - self._t0
        self._stage, self._t0 = stage, now
        if stage is not None:
            self.progress(stage, STAGES.index(stage) if stage in STAGES else 0, len(STAGES))

    def stop(self):
        self.start(None)
        return self.timings


def rpm_sweep_rows(blade, ops, rpm_range) -> list[dict]:
    """CTM, radial pull and pitch stiffness over speed at the first operating point's blade
    angle: each is Ω² times its value at Ω = 1 rad/s (docs/CONVENTIONS.md §4)."""
    from . import api
    from .job import range_points

    rpms = range_points(*rpm_range, "rpm_sweep")
    beta = ops[0].blade_angle_deg
    unit = api.loads_at(blade, 60.0 / (2.0 * math.pi), beta)  # the figures per (rad/s)²
    return [
        {"rpm": float(r), "blade_angle_deg": beta, "ctm_Nm": float(unit.ctm_Nm * w2),
         "radial_pull_N": float(unit.radial_pull_N * w2),
         "pitch_stiffness_Nm_per_rad": float(unit.pitch_stiffness_Nm_per_rad * w2)}
        for r, w2 in zip(rpms, rpm_to_rad_s(rpms) ** 2)
    ]


def compare_job(job, transform=None, reference_units=None, progress=None):
    """Compare the job's blade (``mesh``) with its ``reference`` at the first operating point.

    transform : None (register automatically), "identity", or a transform file path.
    Returns ``(Comparison, reference Blade, repaired LoadedMesh)``.
    """
    from . import api, compare
    from .io import read_mesh
    from .job import check_against_blade, hub_frame_of

    if job.reference is None:
        raise InputError(job.source, "no reference blade: give --reference MESH (or the job key 'reference')")
    require_operating_points(job)
    limits = compare.read_limits(job.limits) if job.limits else None
    T = compare.read_transform(transform) if transform else None
    lumped = tuple(api.LumpedMass(n, m, np.asarray(p, float)) for n, m, p in job.lumped)
    from .cad import declares_unit

    # a STEP or IGES reference carries its own unit, a mesh takes the job's
    ref_units = reference_units or (None if declares_unit(job.reference) else job.units)
    options = api.surface_options(job)
    if ref_units and ref_units != job.units and options["weld_tol"] is not None:  # weld is in the mesh's unit
        from .units import length_scale

        options["weld_tol"] = job.weld_m / length_scale(ref_units, "--reference-units")
    reference = api.load_blade(job.reference, ref_units, list(job.densities), lumped=lumped,
                               frame=hub_frame_of(job), reference_radius_m=job.reference_radius_m,
                               reference_fraction=job.reference_fraction, elements=False, progress=progress,
                               check=lambda b: check_against_blade(job, b),
                               cad_tolerance=job.cad_tolerance, **options)
    repaired = read_mesh(job.mesh, job.units, cad_tolerance=job.cad_tolerance, **api.surface_options(job))
    op = job.operating_points[0]
    result = compare.compare_blade(reference, [(b.vertices, b.faces) for b in repaired.bodies], op.rpm,
                                   blade_angle_deg=op.blade_angle_deg, pitch_change_deg=op.pitch_change_deg,
                                   transform=T, limits=limits, repaired_name=job.name, repaired_source=job.mesh)
    return result, reference, repaired


def run_review(job, progress=None, *, with_views: bool = True) -> Review:
    """Run every stage of the review for a validated job (nothing is written)."""
    from . import api

    clock = _Clock(progress)
    require_operating_points(job)
    comparison = reference = None
    transform = None
    if job.reference:
        # a repaired or scanned blade: register it to its reference first, then analyse it
        # in the reference's model (and so hub) frame
        clock.start("compare")
        comparison, reference, _ = compare_job(job)
        transform = comparison.transform_model
    clock.start("load")
    stage_cb = {"load": "load", "integrate surface": "load", "mesh": "mesh", "integrate elements": "integrate"}
    blade = api.blade_from_job(job, elements=True, model_transform=transform,
                               progress=lambda s: clock.start(stage_cb.get(s, "load")))
    clock.start("loads")
    ops = api.loads_for_job(blade, job)
    data = loads_report(blade, job, ops)
    lo, hi, step = job.sweep_deg
    sweep = api.pitch_sweep(blade, ops[0].rpm, lo, hi, step)
    rpm_rows = data.get("rpm_sweep")
    data["timings_s"] = {}
    rv = Review(job=job, blade=blade, report=data, ops=ops, sweep=sweep, rpm_sweep=rpm_rows)

    clock.start("spanwise")
    from . import span as span_mod

    rv.span = span_mod.span_table(blade, ops[0].rpm, ops[0].blade_angle_deg, stations=job.stations,
                                  allowable_Pa=job.allowable_Pa)
    data["spanwise"] = span_mod.spanwise_rows(rv.span)
    data["spanwise_note"] = span_mod.SPAN_NOTE
    if blade.field_resolution is not None:
        data["spanwise_note"] += (" The station cuts were made on the simplified copy of the surface used for the "
                                  "element fields (input.field_resolution), so they are close to, not exactly, "
                                  "those of the full surface.")
    if blade.cad is not None:
        data["spanwise_note"] += (" The station cuts were made on the straight triangulation of the CAD solid that "
                                  "the mass elements fill (cad.elements_volume_rel_difference), so they are close to, "
                                  "not exactly, those of the solid.")

    clock.start("fields")
    from . import fields as fields_mod

    rv.fields = fields_mod.element_fields(blade, ops[0].rpm, ops[0].blade_angle_deg)
    rv.hot_spots = fields_mod.hot_spots(blade, rv.fields)
    summary = fields_mod.summary(rv.fields, rv.hot_spots)
    data["hot_spots"] = summary.pop("hot_spots")
    data["element_fields"] = summary

    if comparison is not None:
        from . import compare as compare_mod
        from .report import surface_sections

        rv.comparison, rv.reference = comparison, reference
        data["comparison"] = compare_mod.comparison_section(comparison)
        data.update(surface_sections(reference, "reference_"))
        data["input"]["reference_mesh"] = job.reference
        data["input"]["registered_to_reference"] = True
    if job.set_reports:
        clock.start("compare")
        from . import compare as compare_mod

        blades = [compare_mod.read_set_report(p) for p in job.set_reports]
        if job.blades > 1 and len(blades) != job.blades:
            raise InputError(f"{job.source}: set", f"{len(blades)} reports given for a hub of {job.blades} blades")
        result, rpm, warns = compare_mod.match_set(blades, rpm=ops[0].rpm)
        data["match"] = compare_mod.match_section(result, blades, rpm, warns)
    rv.timings_s = clock.stop()
    data["timings_s"] = dict(rv.timings_s)
    return rv


def loads_report(blade, job, ops):
    """The report dict of the ``loads`` command (and the core of ``check``)."""
    from . import api, report

    props = api.mass_properties(blade)
    data = report.base_report(blade)
    data["mass_properties"] = report.mass_section(props)
    if not props.surface_check_ok:
        data["warnings"].append(
            f"the two independent routes to the moments disagree by {props.surface_check_rel_error:.1e} "
            f"({props.surface_check_method}); the surface may be self-intersecting or overlapping")
    data["blade_angle"] = report.blade_angle_section(blade)
    data["operating_points"] = [report.operating_point_row(o) for o in ops]
    lo, hi, step = job.sweep_deg
    betas, ctm, k = api.pitch_sweep(blade, ops[0].rpm, lo, hi, step)
    data["pitch_sweep"] = report.sweep_rows(betas, ctm, k)
    curve = blade.ctm_curve
    data["ctm_curve"] = {
        "form": "CTM = (2*pi*rpm/60)^2 * (a0 + a1 cos b + b1 sin b + a2 cos 2b + b2 sin 2b), b = blade angle",
        "coefficients_kgm2": dict(zip(["a0", "a1", "b1", "a2", "b2"], curve.coefficients.tolist())),
        "zero_ctm_blade_angles_deg": curve.zeros(-180.0, 180.0),
        "zero_ctm_in_sweep_deg": curve.zeros(lo, hi),
    }
    data["rotor"] = {
        "blades": job.blades,
        "polar_inertia_per_blade_kgm2": ops[0].polar_inertia_kgm2,
        "polar_inertia_rotor_kgm2": ops[0].polar_inertia_kgm2 * job.blades,
        "note": "blades only, at the first operating point's blade angle; hub and spinner not included",
    }
    if job.counterweight is not None:
        data["counterweight_sizing"] = counterweight_section(blade, job, ops[0])
    data["proof_load"] = proof_load_section(blade, job, ops, data.get("counterweight_sizing"))
    if job.rpm_sweep is not None:
        data["rpm_sweep"] = rpm_sweep_rows(blade, ops, job.rpm_sweep)
    return data


def proof_load_section(blade, job, ops, counterweight: dict | None = None) -> dict:
    """``proof_load`` of the report (docs/CONVENTIONS.md §4): ``proof_factor`` × the radial pull at
    the maximum rated speed (``rated_rpm``; without it the highest operating-point speed, and the
    report says so) of everything that turns with the blade — the solid, the lumped masses and
    the counterweight sized by the same job (``counterweight``: its ``counterweight_sizing``
    section, or None) — at the first operating point's blade angle.

    Keys: factor, source, basis (in words), basis_rpm, blade_angle_deg, includes_counterweight,
    radial_pull_N and its parts radial_pull_solid_N / _lumped_N / _counterweight_N,
    proof_load_N; largest_radial_pull_N, at_operating_point and at_rpm name the same pull and
    speed as before (the pull the proof load is based on).
    """
    from .loads import PROOF_SOURCE, proof_load_at
    from .moments import point_mass

    op0 = ops[0]
    if job.rated_rpm is not None:
        rpm, at = float(job.rated_rpm), "rated speed"
        basis = f"maximum rated speed (rated_rpm), {rpm:g} rpm"
    else:
        top = max(ops, key=lambda o: o.rpm)
        rpm, at = float(top.rpm), top.name
        basis = (f"highest operating-point speed, {rpm:g} rpm ({top.name}), as no maximum rated speed "
                 "(rated_rpm) is given")
    basis += (f"; at the first operating point's blade angle, {op0.blade_angle_deg:g} deg (the radial pull "
              "depends on the blade angle only through the precone)")
    cw = None
    if counterweight is not None:
        cw = point_mass(counterweight["mass_kg"], np.asarray(counterweight["position_hub_m"], dtype=float))
        basis += "; the sized counterweight included"
    p = proof_load_at(blade.solid_moments, blade.lumped_moments, blade.frame, blade.modelled_deg,
                      op0.blade_angle_deg, rpm, job.proof_factor, counterweight=cw)
    return {
        "factor": job.proof_factor,
        "source": PROOF_SOURCE,
        "basis": basis,
        "basis_rpm": rpm,
        "blade_angle_deg": op0.blade_angle_deg,
        "includes_counterweight": cw is not None,
        "radial_pull_N": p.radial_pull_N,
        "radial_pull_solid_N": p.radial_pull_solid_N,
        "radial_pull_lumped_N": p.radial_pull_lumped_N,
        "radial_pull_counterweight_N": p.radial_pull_counterweight_N,
        "largest_radial_pull_N": p.radial_pull_N,
        "at_operating_point": at,
        "at_rpm": rpm,
        "proof_load_N": p.proof_load_N,
    }


def counterweight_section(blade, job, op0):
    from .loads import counterweight_position, size_counterweight

    cw = job.counterweight
    a = blade.modelled_angle
    if a is None:
        raise InputError(job.source, "counterweight sizing needs the modelled blade angle (chord direction)")
    chord = a.leading_edge - a.trailing_edge
    pos = counterweight_position(blade.frame, chord, cw.radius_m, cw.arm_m, cw.clocking_deg)
    beta = cw.blade_angle_deg if cw.blade_angle_deg is not None else op0.blade_angle_deg
    rpm = cw.rpm if cw.rpm is not None else op0.rpm
    try:
        s = size_counterweight(blade.moments, blade.frame, blade.modelled_deg, pos, beta, rpm, cw.target_ctm_Nm)
    except ValueError as exc:
        raise InputError(f"{job.source}: counterweight", str(exc)) from None
    return {
        "mass_kg": s.mass_kg,
        "position_hub_m": s.position_m,
        "blade_angle_deg": beta,
        "rpm": rpm,
        "target_ctm_Nm": cw.target_ctm_Nm,
        "ctm_per_kg_Nm": s.ctm_per_kg_Nm,
        "added_radial_pull_N": s.added_radial_pull_N,
        "net_ctm_Nm": s.net_ctm_Nm,
    }


def _png(fn, *args, **kw) -> bytes:
    """Call a picture function of :mod:`bladesolid.views` with a memory file in place of its
    path; return the PNG bytes."""
    import io

    buf = io.BytesIO()
    fn(*args, buf, **kw)
    return buf.getvalue()


def _png_via_file(fn, *args, **kw) -> bytes:
    """Call a plotting function that only writes to a path; return the bytes (temp file)."""
    from .safefile import temp_folder

    with temp_folder() as d:
        p = os.path.join(d, "x.png")
        fn(*args, p, **kw)
        with open(p, "rb") as fh:
            return fh.read()


def write_review(rv: Review, folder, force: bool = False, progress=None, with_views: bool = True) -> list[str]:
    """Write the review folder (staged: all or nothing). Returns the file names written.

    Every CSV table starts with a ``# `` caution line, every picture carries the caution
    footer, the VTU holds it in its field data, the HTML page shows it at the top and the
    bottom, and the folder gets a ``CAUTION.txt`` (:func:`bladesolid.safefile.staged_folder`).
    The renders share one off-screen plotter (:class:`bladesolid.views.RenderSession`) and
    each is drawn once.
    """
    from . import report
    from .safefile import CAUTION_FILE

    clock = _Clock(progress)
    data = rv.report
    files: dict[str, bytes] = {}
    images: dict[str, bytes] = {}

    def add_text(name, text):
        files[name] = text.encode("utf-8")

    clock.start("views")
    add_text("operating_points.csv", report.csv_text([
        {k: v for k, v in report.operating_point_row(o).items() if not isinstance(v, np.ndarray)} for o in rv.ops
    ]))
    add_text("pitch_sweep.csv", report.csv_text(data["pitch_sweep"]))
    if rv.rpm_sweep:
        add_text("rpm_sweep.csv", report.csv_text(rv.rpm_sweep))
    if data.get("spanwise"):
        flat = [{k: v for k, v in r.items() if not isinstance(v, (list, tuple))} for r in data["spanwise"]]
        add_text("spanwise.csv", report.csv_text(flat))
    if data.get("hot_spots"):
        add_text("hot_spots.csv", report.csv_text(data["hot_spots"]["regions"]))

    if with_views:
        from . import views

        _write_pictures(rv, data, files, images, views)

    for blade, key in ((rv.blade, "geometry"), (rv.reference, "reference_geometry")):
        name = mended_name(blade, files)
        if name:
            from .io import stl_bytes

            files[name] = stl_bytes(*blade.mended_surface)
            if isinstance(data.get(key), dict):
                data[key]["repaired_surface"] = name

    clock.start("report")
    data["timings_s"] = {**rv.timings_s, **{f"write_{k}": v for k, v in clock.timings.items()}}
    names = sorted(list(files) + ["report.json", "report.html", CAUTION_FILE])
    add_text("report.json", report.dumps(data))
    add_text("report.html", report.review_html(data, images, names))
    with report.staged_folder(folder, force) as tmp:
        for name, blob in files.items():
            with open(os.path.join(tmp, name), "wb") as fh:
                fh.write(blob)
    clock.stop()
    return names


def mended_name(blade, taken=()) -> str | None:
    """The file name of a blade's mended surface in an output folder, ``<mesh stem>_repaired.stl``
    (``-2``, ``-3``... when taken); None when the repair changed nothing or was not asked."""
    if blade is None or getattr(blade, "mended_surface", None) is None:
        return None
    stem = os.path.splitext(os.path.basename(str(blade.source)))[0] or "mesh"
    name, k = f"{stem}_repaired.stl", 1
    while name in taken:
        k += 1
        name = f"{stem}_repaired-{k}.stl"
    return name


def _write_pictures(rv: Review, data: dict, files: dict, images: dict, views) -> None:
    """The plots, renders and element file of a review into ``files`` (name: bytes) and the
    pictures shown in the HTML page into ``images`` (caption: the same bytes), in page order.

    The matplotlib plots are drawn in a second thread while this one renders the 3-D views:
    VTK lets go of the interpreter while it draws, so the two overlap on a machine with two
    cores (the OpenGL context stays in this thread).
    """
    from concurrent.futures import ThreadPoolExecutor

    with ThreadPoolExecutor(max_workers=1, thread_name_prefix="bladesolid-plots") as pool:
        plots = pool.submit(_plots, rv, data, views)
        renders = _renders(rv, data, views)
        drawn = plots.result()
    deviation = [r for r in renders if r[0] == "deviation.png"]
    renders = [r for r in renders if r[0] != "deviation.png"]
    for name, caption, blob in drawn[:-1] + renders + drawn[-1:] + deviation:
        if blob is None:
            continue
        files[name] = blob
        if caption:
            images[caption] = blob


def _plots(rv: Review, data: dict, views) -> list[tuple]:
    """(file name, caption, PNG bytes) of the matplotlib plots; the blade-set picture last."""
    from . import report
    from . import span as span_mod

    out = []
    betas, ctm, k = rv.sweep
    op0 = rv.ops[0]
    title = f"{rv.blade.name} — CTM at {op0.rpm:g} rpm"
    out.append(("ctm_sweep.png", f"CTM and centrifugal pitch stiffness over blade angle at {op0.rpm:g} rpm",
                _png(views.plot_ctm_sweep, betas, ctm, k, op0.blade_angle_deg, title=title)))
    if rv.rpm_sweep:
        r = np.array([x["rpm"] for x in rv.rpm_sweep])
        out.append(("rpm_sweep.png", "CTM and radial pull over speed",
                    _png(views.plot_rpm_sweep, r, np.array([x["ctm_Nm"] for x in rv.rpm_sweep]),
                         np.array([x["radial_pull_N"] for x in rv.rpm_sweep]))))
    if rv.span is not None:
        out.append(("spanwise.png", "Spanwise centrifugal tension, stress, CTM and area",
                    _png_via_file(span_mod.plot_span, rv.span)))
    if rv.hot_spots is not None:
        out.append(("hot_spots.png", "Hot spots: share of CTM, radial pull and mass by region",
                    _png(views.plot_hot_spots, rv.hot_spots, title=f"Hot spots — {rv.blade.name}")))
    match = None
    if data.get("match"):
        match = _png(views.plot_match, report.jsonable(data["match"]), title=f"Blade set — {rv.blade.name}")
    out.append(("blade_set.png", "the blade set on the hub: best and worst assignment", match))
    return out


def _renders(rv: Review, data: dict, views) -> list[tuple]:
    """(file name, caption or None, bytes) of the 3-D renders and the element file, drawn in
    one :class:`bladesolid.views.RenderSession`."""
    out = []
    with views.render_session() as session:
        if rv.fields is not None:
            grid = views.element_grid(rv.blade, rv.fields, rv.hot_spots)
            common = dict(grid=grid, hotspots=rv.hot_spots, session=session)
            for fname, label in (("ctm_Nm", "CTM contribution"), ("radial_pull_N", "radial pull contribution"),
                                 ("mass_kg", "mass")):
                for view in ("planform", "tip"):
                    out.append((f"render_{fname.split('_')[0]}_{view}.png", f"{label} per element, view from the {view}",
                                _png(views.render_field, rv.blade, rv.fields, fname, view=view, **common)))
            out.append(("render_ctm_share.png", "smallest element sets carrying 50 / 80 / 95 % of the CTM",
                        _png(views.render_field, rv.blade, rv.fields, "ctm_share_band", view="planform", **common)))
            out.append(("render_regions.png", "hot-spot regions (leading edge, trailing edge, tip, shank, mid-chord)",
                        _png(views.render_field, rv.blade, rv.fields, "region", view="iso", **common)))
            tip = rv.blade.tip_radius_m
            stations = sorted({round(f * tip, 6) for f in (0.4, 0.6)} | {round(rv.blade.reference_radius_m, 6)}
                              | {round(0.9 * tip, 6)})
            out.append(("render_clipped.png",
                        "CTM contribution inside the blade, cut at stations (reference station included)",
                        _png(views.render_clipped, rv.blade, rv.fields, "ctm_Nm", stations, **common)))
            out.append(("elements.vtu", None, views.vtu_bytes(grid)))
        if rv.comparison is not None:
            d = rv.comparison.deviation
            out.append(("deviation.png", "surface deviation of this blade from the reference (after registration)",
                        _png(views.render_deviation, d.vertices, d.faces, d.values, frame=rv.reference.frame,
                             title=f"Deviation — {rv.blade.name}", session=session)))
            data["comparison"]["deviation_png"] = "deviation.png"
    return out


def check(job, folder, force: bool = False, progress=None) -> Review:
    """Run the whole review of ``job`` and write it to ``folder`` (the `check` command)."""
    from .safefile import check_new_folder

    check_new_folder(folder, force)  # before any work
    rv = run_review(job, progress)
    rv.files = write_review(rv, folder, force, progress)
    return rv
