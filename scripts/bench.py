#!/usr/bin/env python3
"""bladesolid benchmarks: each figure measured in this run beside its baseline and target.

    python scripts/bench.py                 # the whole table (a few minutes on 2 cores)
    python scripts/bench.py --quick         # smaller sizes, for a smoke test
    python scripts/bench.py --markdown bench.md

Rows:

1. element-moment kernel (``moments.tet_volume_moments``) in ms per million tetrahedra, against
   the machine's limit for the same work: a numba loop (same threads) that reads the same
   node/tet arrays by the same gather and writes the same 13 numbers per element with no
   arithmetic to speak of; random connectivity (worst case for the gathers) and a
   locality-ordered one (a structured grid, as a real mesh after node renumbering).
   Target: within 2x of the memory pass.
2. exact closed-surface integration (``moments.surface_volume_moments``) against trimesh's
   ``mass_properties`` on the same 240 000-face blade. Target: >= 5x faster.
3. a 3601-angle CTM sweep from the five coefficients (``loads.CtmCurve.ctm``) against moving
   and re-integrating the elements at every angle (a few angles timed, extrapolated, stated).
   Target: under 1 ms.
4. ``check`` of a 240 000-face blade by stage (``review.run_review`` / ``write_review`` timings),
   and the cost growth of element kernel + spanwise cuts + element fields from 1e4 to 1e6
   elements.
5. the ``mass`` command on a 240 000-face STL, whole process (median of several runs), against
   a bare trimesh script that loads the file and prints its mass. Target: <= 2x.
6. the whole review against the loads alone, whole process, on the demo job (``bladesolid demo``):
   ``bladesolid check`` (mesh, element fields, spanwise cuts, every plot and render, VTU, HTML)
   against ``bladesolid loads`` of the same job, alternated, median of several runs after a
   warm-up (numba cache warm). Target: check <= 2.5x loads.

Sections are entries of ``SECTIONS`` (name: function of the run's ``Bench`` context); a new
measurement is one function and one entry there, and ``--only``/``--skip`` take its name.

numba kernels are compiled (or loaded from the on-disk cache) before any timing. Times are
medians of repeats; wall clock (``time.perf_counter``).
"""

from __future__ import annotations

import argparse
import dataclasses
import json
import math
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "meshes" / "demo_blade.stl"
ROWS: list[tuple] = []  # (section, figure, measured, baseline, ratio, target, verdict)


def median_time(fn, repeats=5, warmup=1):
    for _ in range(warmup):
        fn()
    ts = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        ts.append(time.perf_counter() - t0)
    return statistics.median(ts)


def row(section, figure, measured, baseline="", ratio="", target="", ok=None):
    verdict = "" if ok is None else ("met" if ok else "NOT met")
    ROWS.append((section, figure, measured, baseline, ratio, target, verdict))
    print(f"  {figure}: {measured} | {baseline} | {ratio} | {target} {verdict}", flush=True)


# --------------------------------------------------------------------------- 1. kernel


def memory_pass_kernel():
    """The machine's limit for the element kernel's memory traffic (numba, same threads)."""
    import numba

    @numba.njit(parallel=True, cache=False, fastmath=False)
    def touch(nodes, tets, vol, first, second):
        for i in numba.prange(tets.shape[0]):
            i0, i1, i2, i3 = tets[i, 0], tets[i, 1], tets[i, 2], tets[i, 3]
            sx = nodes[i0, 0] + nodes[i1, 0] + nodes[i2, 0] + nodes[i3, 0]
            sy = nodes[i0, 1] + nodes[i1, 1] + nodes[i2, 1] + nodes[i3, 1]
            sz = nodes[i0, 2] + nodes[i1, 2] + nodes[i2, 2] + nodes[i3, 2]
            vol[i] = sx
            first[i, 0] = sx
            first[i, 1] = sy
            first[i, 2] = sz
            for a in range(3):
                second[i, a, 0] = sx
                second[i, a, 1] = sy
                second[i, a, 2] = sz

    def run(nodes, tets):
        k = tets.shape[0]
        vol, first, second = np.empty(k), np.empty((k, 3)), np.empty((k, 3, 3))  # same allocation as the kernel
        touch(nodes, tets, vol, first, second)
        return vol

    return run


def grid_tets(n_target):
    """A structured grid of cubes cut into 6 tetrahedra each (Kuhn), in natural order."""
    n = max(2, int(round((n_target / 6) ** (1 / 3))))
    g = np.arange(n + 1)
    X, Y, Z = np.meshgrid(g, g, g, indexing="ij")
    nodes = np.column_stack([X.ravel(), Y.ravel(), Z.ravel()]).astype(float) / n
    idx = lambda i, j, k: (i * (n + 1) + j) * (n + 1) + k  # noqa: E731
    i, j, k = (a.ravel() for a in np.meshgrid(np.arange(n), np.arange(n), np.arange(n), indexing="ij"))
    c = [idx(i + (b >> 2 & 1), j + (b >> 1 & 1), k + (b & 1)) for b in range(8)]
    paths = [(1, 3, 7), (1, 5, 7), (2, 3, 7), (2, 6, 7), (4, 5, 7), (4, 6, 7)]
    tets = np.stack([np.column_stack([c[0], c[a], c[b], c[d]]) for a, b, d in paths], axis=1).reshape(-1, 4)
    return nodes, tets.astype(np.int64)


def bench_kernel(n_tets):
    from bladesolid.moments import tet_volume_moments

    print(f"[1] element-moment kernel, {n_tets:,} tetrahedra", flush=True)
    rng = np.random.default_rng(1)
    touch = memory_pass_kernel()
    nodes_g, tets_g = grid_tets(n_tets)
    n_nodes = len(nodes_g)
    cases = {
        "random connectivity": (rng.random((n_nodes, 3)), rng.integers(0, n_nodes, size=(len(tets_g), 4))),
        "locality-ordered (grid)": (nodes_g, tets_g),
    }
    tet_volume_moments(nodes_g[:100], tets_g[:10])  # compile / load the cached kernel
    touch(nodes_g, tets_g[:10])
    out = {}
    for label, (nodes, tets) in cases.items():
        nodes = np.ascontiguousarray(nodes)
        tets = np.ascontiguousarray(tets)
        m = len(tets) / 1e6
        t_kernel = median_time(lambda: tet_volume_moments(nodes, tets), repeats=5)
        t_touch = median_time(lambda: touch(nodes, tets), repeats=5)
        nbytes = tets.nbytes + len(tets) * 13 * 8
        t_copy = median_time(lambda: (np.copy(tets), np.empty(len(tets) * 13).fill(0.0)), repeats=5)
        ratio = t_kernel / t_touch
        row("1 kernel", f"tet_volume_moments, {label} ({len(tets):,} tets, {n_nodes:,} nodes)",
            f"{t_kernel / m * 1e3:.1f} ms/M tets", f"memory pass {t_touch / m * 1e3:.1f} ms/M "
            f"(numpy stream of the same {nbytes / 1e6:.0f} MB: {t_copy / m * 1e3:.1f} ms/M)",
            f"{ratio:.2f}x", "<= 2x of the memory pass", ratio <= 2.0)
        out[label] = (t_kernel, t_touch)
    return out


# --------------------------------------------------------------------------- 2. surface


def bench_surface(v, f):
    import trimesh

    from bladesolid.moments import surface_volume_moments

    print(f"[2] closed-surface integration, {len(f):,} faces", flush=True)
    surface_volume_moments(v[:3], f[:1] % 3)
    t_ours = median_time(lambda: surface_volume_moments(v, f), repeats=9)
    t_tm = median_time(lambda: trimesh.Trimesh(v, f, process=False).mass_properties, repeats=9)
    a = surface_volume_moments(v, f)
    b = trimesh.Trimesh(v, f, process=False).mass_properties
    agree = abs(a.mass / b["volume"] - 1)
    row("2 surface", f"surface_volume_moments, {len(f):,}-face blade (volume agrees with trimesh to {agree:.1e})",
        f"{t_ours * 1e3:.2f} ms", f"trimesh mass_properties {t_tm * 1e3:.1f} ms", f"{t_tm / t_ours:.1f}x faster",
        ">= 5x faster", t_tm / t_ours >= 5)


# --------------------------------------------------------------------------- 3. sweep


def bench_sweep():
    from bladesolid import api
    from bladesolid.frame import pitch_motion
    from bladesolid.loads import centrifugal_twisting_moment
    from bladesolid.moments import tet_volume_moments
    from bladesolid.units import rpm_to_rad_s

    print("[3] CTM sweep, 3601 blade angles", flush=True)
    blade = api.load_blade(DEMO, "mm", ["2810 kg/m^3"])
    curve = api.blade_curve(blade)
    omega = rpm_to_rad_s(2500.0)
    betas = np.linspace(-180.0, 180.0, 3601)
    t_closed = median_time(lambda: curve.ctm(betas, omega), repeats=50, warmup=3)
    rho = float(blade.materials[0].density_kg_m3)
    nodes, tets = blade.element_nodes, blade.element_tets

    def brute(beta):
        R, t = pitch_motion(blade.frame, beta - blade.modelled_deg)
        moved = tet_volume_moments(nodes @ R.T + t, tets).total().scaled(rho)
        return float(centrifugal_twisting_moment(moved, blade.frame, omega))

    sample = [-60.0, 0.0, 25.0, 45.0, 90.0]
    brute(0.0)
    t0 = time.perf_counter()
    values = [brute(b) for b in sample]
    t_brute = (time.perf_counter() - t0) / len(sample) * len(betas)
    closed = curve.ctm(np.array(sample), omega)
    agree = max(abs(x - y) for x, y in zip(values, closed)) / max(abs(c) for c in closed)
    row("3 sweep", f"CTM at 3601 blade angles from 5 coefficients (demo blade, {len(tets):,} elements; "
        f"brute force agrees to {agree:.1e})", f"{t_closed * 1e3:.3f} ms",
        f"move + re-integrate the elements every angle: {t_brute:.1f} s (5 angles timed, x3601/5)",
        f"{t_brute / t_closed:,.0f}x faster", "< 1 ms", t_closed < 1e-3)


# --------------------------------------------------------------------------- 4. check + growth


def write_large_stl(folder) -> Path:
    from bladesolid.demo import large_blade_surface
    from bladesolid.io import write_surface

    p = Path(folder) / "large_blade.stl"
    if not p.exists():
        v, f = large_blade_surface(240_000)
        write_surface(p, v, f)  # mm, hub frame
    return p


CHECK_CHILD = r"""
import inspect, json, sys, time, os, dataclasses
import numpy as np
t_start = time.perf_counter()
from bladesolid import api, review
from bladesolid.job import load_job
job = load_job(sys.argv[1])
wired = "field_faces" in inspect.signature(api.load_blade).parameters
how = "api.load_blade(field_faces=...)" if wired else "bench-composed field copy"
if not wired:
    # The field-resolution wiring is not in api yet: compose what it will do. Mass, tensor
    # and loads from the full surface; the element fields from a fieldres copy meshed alone.
    from bladesolid import fieldres, mesh as mesh_mod
    from bladesolid.moments import ElementMoments, tet_volume_moments
    real = api.blade_from_job
    def with_field_copy(job, *, elements=True, progress=None, **kw):
        say = progress or (lambda s: None)
        blade = real(job, elements=False, progress=progress)
        if not elements:
            return blade
        say("mesh")
        nodes_all, tets_all, body_all, off = [], [], [], 0
        for i, (v, f) in enumerate(blade.surfaces):
            vc, fc = fieldres.field_surface(v, f, job.field_faces or 20000)
            n, t = mesh_mod.tetrahedralise_surface(vc, fc)
            nodes_all.append(n); tets_all.append(t + off); body_all.append(np.full(len(t), i, np.int32)); off += len(n)
        nodes, tets, body = np.concatenate(nodes_all), np.concatenate(tets_all), np.concatenate(body_all)
        say("integrate elements")
        vol = tet_volume_moments(nodes, tets)
        rho = np.array([m.density_kg_m3 for m in blade.materials])[body]
        el = ElementMoments(vol.mass * rho, vol.first * rho[:, None], vol.second * rho[:, None, None])
        return dataclasses.replace(blade, elements=el, element_nodes=nodes, element_tets=tets, element_body=body)
    api.blade_from_job = with_field_copy
t0 = time.perf_counter()
rv = review.run_review(job)
t1 = time.perf_counter()
review.write_review(rv, sys.argv[2], force=True)
t2 = time.perf_counter()
print(json.dumps({"how": how, "import_s": t0 - t_start, "run_s": t1 - t0, "write_s": t2 - t1,
                  "timings": rv.report.get("timings_s", {}), "elements": len(rv.blade.elements)}))
"""


def bench_check(folder, timeout=420):
    print("[4] check of a 240 000-face blade, by stage", flush=True)
    stl = write_large_stl(folder)
    job = Path(folder) / "large_job.toml"
    job.write_text(f'name = "BW-3 large (240 k faces)"\nmesh = {json.dumps(str(stl))}\nunits = "mm"\n'
                   'material = "al-2025-t6"\nfield_faces = 20000\nstations = 16\n'
                   '[[operating_point]]\nname = "take-off"\nrpm = 2500\nblade_angle = 25.0\n')
    t0 = time.perf_counter()
    try:
        r = subprocess.run([sys.executable, "-c", CHECK_CHILD, str(job), str(Path(folder) / "review")],
                           capture_output=True, text=True, timeout=timeout, cwd=folder)
    except subprocess.TimeoutExpired:
        row("4 check", "check of the 240 k-face blade", f"> {timeout} s (stopped)", "", "", "< 15 s", False)
        return
    wall = time.perf_counter() - t0
    if r.returncode != 0:
        row("4 check", "check of the 240 k-face blade", "failed: " + (r.stderr.strip().splitlines() or ["?"])[-1][:120],
            "", "", "< 15 s", False)
        return
    d = json.loads(r.stdout.strip().splitlines()[-1])
    t = d["timings"]
    stages = {"load": t.get("load", 0.0), "mesh (field copy)": t.get("mesh", 0.0), "integrate": t.get("integrate", 0.0),
              "loads + spanwise + fields": t.get("loads", 0) + t.get("spanwise", 0) + t.get("fields", 0) + t.get("compare", 0),
              "views": t.get("write_views", 0.0),
              # the report's own timings cannot include writing the report: the rest of write_review
              "report": max(d["write_s"] - t.get("write_views", 0.0), 0.0)}
    text = ", ".join(f"{k} {v:.2f} s" for k, v in stages.items())
    rest = wall - sum(stages.values())
    row("4 check", f"check, 240 k faces, field copy 20 k faces ({d['elements']:,} elements; {d['how']})",
        f"{wall:.1f} s whole process", text, f"python start-up and imports {rest:.1f} s", "< 15 s", wall < 15)


def bench_growth(folder, sizes):
    from bladesolid import api, fieldres
    from bladesolid.fields import element_fields, hot_spots
    from bladesolid.io import write_surface
    from bladesolid.moments import tet_volume_moments
    from bladesolid.span import span_table

    print(f"[4b] cost growth over {sizes} elements", flush=True)
    import trimesh

    m = trimesh.load(DEMO, force="mesh")
    v, f = fieldres.field_surface(np.asarray(m.vertices), np.asarray(m.faces), 5000)
    coarse = Path(folder) / "demo_5k.stl"
    write_surface(coarse, v, f)
    prev = None
    for n in sizes:
        blade = api.load_blade(coarse, "mm", ["2810 kg/m^3"], target_elements=n)
        k = len(blade.elements)
        t_kernel = median_time(lambda: tet_volume_moments(blade.element_nodes, blade.element_tets), repeats=3)
        t_span = median_time(lambda: span_table(blade, 2500.0, 25.0, stations=16), repeats=1, warmup=1)
        t_fields = median_time(lambda: hot_spots(blade, element_fields(blade, 2500.0, 25.0)), repeats=1, warmup=1)
        total = t_kernel + t_span + t_fields
        growth = "" if prev is None else f"x{total / prev[1]:.1f} for x{k / prev[0]:.1f} elements"
        row("4 growth", f"{k:,} elements: kernel + 16 spanwise cuts + fields/hot spots",
            f"{total:.2f} s", f"kernel {t_kernel * 1e3:.1f} ms, span {t_span:.2f} s, fields {t_fields:.2f} s", growth,
            "about linear")
        prev = (k, total)


# --------------------------------------------------------------------------- 5. mass command


TRIMESH_SCRIPT = "import sys, trimesh; m = trimesh.load(sys.argv[1]); print(m.volume * 1e-9 * 2810.0, 'kg')"


def bench_mass_command(folder, repeats):
    print("[5] mass command, whole process", flush=True)
    stl = write_large_stl(folder)

    def run(cmd):
        t0 = time.perf_counter()
        r = subprocess.run(cmd, capture_output=True, text=True, cwd=folder)
        assert r.returncode == 0, r.stderr
        return time.perf_counter() - t0

    ours = [sys.executable, "-m", "bladesolid", "mass", str(stl), "--units", "mm", "--density", "2810"]
    bare = [sys.executable, "-c", TRIMESH_SCRIPT, str(stl)]
    run(ours), run(bare)  # warm the file cache and the numba cache
    t_ours = statistics.median(run(ours) for _ in range(repeats))
    t_bare = statistics.median(run(bare) for _ in range(repeats))
    row("5 mass", f"bladesolid mass, 240 k-face STL ({stl.stat().st_size / 1e6:.0f} MB), median of {repeats}",
        f"{t_ours:.2f} s", f"bare trimesh load + mass {t_bare:.2f} s", f"{t_ours / t_bare:.2f}x", "<= 2x",
        t_ours / t_bare <= 2.0)


# --------------------------------------------------------------------------- 6. review vs loads


def demo_job(folder) -> Path:
    """The demo job, written by ``bladesolid demo`` (which also runs one review: a warm-up)."""
    d = Path(folder) / "demo"
    job = d / "demo_job.toml"
    if not job.exists():
        r = subprocess.run([sys.executable, "-m", "bladesolid", "demo", str(d)], capture_output=True, text=True,
                           cwd=folder, env=headless_env())
        assert r.returncode == 0, r.stderr
    return job


def headless_env() -> dict:
    return {**os.environ, "PYVISTA_OFF_SCREEN": "true", "MPLBACKEND": "Agg"}


def bench_review_vs_loads(folder, repeats):
    print("[6] check against loads, demo job, whole process", flush=True)
    job = demo_job(folder)
    out = Path(folder) / "demo-review"
    check = [sys.executable, "-m", "bladesolid", "check", str(job), "--out", str(out), "--force"]
    loads = [sys.executable, "-m", "bladesolid", "loads", str(job)]

    def run(cmd):
        t0 = time.perf_counter()
        r = subprocess.run(cmd, capture_output=True, text=True, cwd=folder, env=headless_env())
        assert r.returncode == 0, r.stderr
        return time.perf_counter() - t0

    run(check), run(loads)  # warm: file cache, numba cache, shader cache
    t_check, t_loads = [], []
    for _ in range(repeats):  # alternated, so both see the same machine
        t_check.append(run(check))
        t_loads.append(run(loads))
    tc, tl = statistics.median(t_check), statistics.median(t_loads)
    t = json.loads((out / "report.json").read_text()).get("timings_s", {})
    compute = sum(t.get(k, 0.0) for k in ("load", "mesh", "integrate", "loads", "spanwise", "fields", "compare"))
    row("6 review", f"bladesolid check of the demo job, median of {repeats} (last run: computing {compute:.2f} s, "
        f"pictures and files {t.get('write_views', 0.0):.2f} s)", f"{tc:.2f} s",
        f"bladesolid loads of the same job {tl:.2f} s", f"{tc / tl:.2f}x", "<= 2.5x", tc / tl <= 2.5)


# --------------------------------------------------------------------------- main


@dataclasses.dataclass(frozen=True)
class Bench:
    """What every section gets: a scratch folder and the --quick flag."""

    folder: str
    quick: bool


def _surface(b: Bench):
    from bladesolid.demo import large_blade_surface

    v, f = large_blade_surface(24_000 if b.quick else 240_000)
    bench_surface(v * 1e-3, f)


#: name: function(Bench), run in this order.
SECTIONS = {
    "kernel": lambda b: bench_kernel(200_000 if b.quick else 2_000_000),
    "surface": _surface,
    "sweep": lambda b: bench_sweep(),
    "check": lambda b: None if b.quick else bench_check(b.folder),
    "growth": lambda b: bench_growth(b.folder, [10_000, 100_000] if b.quick else [10_000, 100_000, 1_000_000]),
    "mass": lambda b: bench_mass_command(b.folder, 2 if b.quick else 5),
    "review": lambda b: bench_review_vs_loads(b.folder, 2 if b.quick else 5),
}


def markdown() -> str:
    head = "| section | figure | measured | baseline | ratio | target | |\n|---|---|---|---|---|---|---|\n"
    return head + "".join("| " + " | ".join(str(c) for c in r) + " |\n" for r in ROWS)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="smaller sizes (smoke test, not the figures)")
    ap.add_argument("--markdown", metavar="FILE", help="also write the table here")
    ap.add_argument("--skip", default="", help=f"comma-separated sections to skip: {','.join(SECTIONS)}")
    ap.add_argument("--only", default="", help="comma-separated sections to run (default: all)")
    args = ap.parse_args(argv)
    skip = set(filter(None, args.skip.split(",")))
    only = set(filter(None, args.only.split(","))) or set(SECTIONS)
    unknown = (skip | only) - set(SECTIONS)
    if unknown:
        ap.error(f"unknown sections {', '.join(sorted(unknown))}; expected some of {', '.join(SECTIONS)}")
    t0 = time.perf_counter()
    import numba

    print(f"bladesolid bench: {os.cpu_count()} CPUs, numba {numba.__version__} ({numba.config.NUMBA_NUM_THREADS} threads), "
          f"python {sys.version.split()[0]}", flush=True)
    with tempfile.TemporaryDirectory(prefix="bladesolid-bench-") as folder:
        b = Bench(folder, args.quick)
        for name, run in SECTIONS.items():
            if name in only and name not in skip:
                run(b)
    text = markdown()
    print()
    print(text)
    print(f"total bench time {time.perf_counter() - t0:.0f} s")
    if args.markdown:
        Path(args.markdown).write_text(text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
