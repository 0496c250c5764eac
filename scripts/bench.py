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
6. refusals of hostile input (the tests check that they are refused; here, how fast): a binary
   STL whose header claims 4e9 triangles (in process, and through ``python -m bladesolid`` under
   a 2 GB address-space cap), a Gmsh file whose counts run past its end, and the slowest of a
   few bad meshes through the command line.
7. the field copy of the 240 000-face blade: simplifying it to 20 000 faces and filling the copy
   with TetGen (facets preserved).
8. batch: the same jobs on a local dask cluster of two worker processes, and an unreachable
   scheduler given up on.
9. the cost of running TetGen isolated in a child process (``mesh.run_tetgen``) on the demo
   blade, rounds interleaved: unprotected in this process, a forked child (the default on
   Linux), a fresh ``python -m bladesolid.mesh`` interpreter with ``.npy`` files (the fallback),
   each after numba's thread pool is up in the parent. Target: fork within 15 % of unprotected.
10. geometry checks on the same 240 000-face blade: the self-intersection check
   (``selfintersect.self_intersections``) beside the closed-surface integral it protects and
   the R-tree + edge-crossing check it replaced (run once). Target: <= 1.5 s. And welding a
   facet-by-facet float32 export of the blade (``weld.weld``) beside the bit-exact merge.
11. the elastic blade (``bladesolid.elastic``) on the demo blade: quality mesh, assembly of the
   quadratic stiffness by our numba kernels against scikit-fem's on the same mesh, the stress
   solve with centrifugal stiffening (time, passes, memory; target < 1 min at ~50 000
   elements), the direct solver against pyamg-preconditioned CG on one linear solve (a
   smaller mesh), eight modes at five speeds (target a few minutes), and the convergence of
   the untwist and peak stress under mesh refinement.

12. the whole review against the loads alone, whole process, on the demo job (``bladesolid demo``):
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
    curve = blade.ctm_curve
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
import json, sys, time
t_start = time.perf_counter()
from bladesolid import review
from bladesolid.job import load_job
job = load_job(sys.argv[1])
how = "api.load_blade(field_faces=...)"
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


# --------------------------------------------------------------------------- 6. refusals


def _timed(fn):
    t0 = time.perf_counter()
    out = fn()
    return time.perf_counter() - t0, out


def _refusal(path):
    from bladesolid.errors import InputError
    from bladesolid.io import read_mesh

    try:
        read_mesh(path, "mm")
    except InputError as exc:
        return str(exc)
    return "LOADED"


def bench_refusals(folder):
    import struct

    import meshio
    import tetgen
    import trimesh

    print("[6] refusals of hostile input", flush=True)
    d = Path(folder)
    liar = d / "liar.stl"
    liar.write_bytes(b"\0" * 80 + struct.pack("<I", 0xFFFFFFFF) + b"\1" * (12 * 50))
    t, text = _timed(lambda: _refusal(liar))
    row("6 refusals", "binary STL claiming 4 294 967 295 triangles (12 in the file), read_mesh",
        f"{t * 1e3:.1f} ms", "refused" if text != "LOADED" else "LOADED", "", "< 0.5 s", t < 0.5 and text != "LOADED")
    code = ("import resource, runpy, sys\n"
            "resource.setrlimit(resource.RLIMIT_AS, (2 * 1024**3, 2 * 1024**3))\n"
            f"sys.argv = ['bladesolid', 'mass', {str(liar)!r}, '--units', 'mm', '--density', '2810']\n"
            "runpy.run_module('bladesolid', run_name='__main__')\n")
    t, r = _timed(lambda: subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=folder,
                                         timeout=120))
    row("6 refusals", "the same through python -m bladesolid mass, 2 GB address-space cap, whole process",
        f"{t:.2f} s", f"exit {r.returncode}", "", "< 10 s", t < 10 and r.returncode == 2)
    s = trimesh.creation.icosphere(subdivisions=1, radius=10.0)
    nodes, elems = tetgen.TetGen(s.vertices, s.faces).tetrahedralize()[:2]
    spin = d / "spin.msh"
    meshio.write(str(spin), meshio.Mesh(np.asarray(nodes), [("tetra", np.asarray(elems))]), file_format="gmsh22",
                 binary=False)
    with open(spin, "a") as fh:
        fh.write("$NodeData\n0\n1000000000000\n")
    t, text = _timed(lambda: _refusal(spin))
    row("6 refusals", "Gmsh file whose $NodeData count (1e12) runs past its end, read_mesh", f"{t:.2f} s",
        "refused" if text != "LOADED" else "LOADED", "", "< 5 s", t < 5 and text != "LOADED")
    # a few bad meshes through the whole command (in process)
    from bladesolid.cli import main
    from bladesolid.io import write_surface

    box = trimesh.creation.box(extents=(100.0, 200.0, 300.0))
    cases = {"garbage.stl": b"solid x\n this is not an STL\n", "truncated.stl": None, "open.stl": None}
    (d / "garbage.stl").write_bytes(cases["garbage.stl"])
    write_surface(d / "full.stl", box.vertices, box.faces)
    (d / "truncated.stl").write_bytes((d / "full.stl").read_bytes()[:-30])
    write_surface(d / "open.stl", box.vertices, box.faces[1:])
    import contextlib
    import io as _io

    worst = 0.0
    for name in cases:
        with contextlib.redirect_stderr(_io.StringIO()), contextlib.redirect_stdout(_io.StringIO()):
            t, rc = _timed(lambda: main(["loads", str(d / name), "--units", "mm", "--density", "2810", "--rpm",
                                         "2500", "--json", str(d / "out.json")]))
        worst = max(worst, t)
    row("6 refusals", f"slowest refusal of {len(cases)} bad meshes through bladesolid loads (in process)",
        f"{worst:.2f} s", "", "", "< 20 s", worst < 20)


# --------------------------------------------------------------------------- 7. field copy


def bench_field_copy():
    from bladesolid import fieldres
    from bladesolid.demo import large_blade_surface
    from bladesolid.mesh import tetrahedralise_surface

    print("[7] field copy of the 240 000-face blade", flush=True)
    v, f = large_blade_surface(240_000)
    v = v * 1e-3
    t_simplify, (vc, fc) = _timed(lambda: fieldres.field_surface(v, f, 20_000))
    t_mesh, (nodes, tets) = _timed(lambda: tetrahedralise_surface(vc, fc))
    row("7 field copy", f"simplify {len(f):,} -> {len(fc):,} faces (checked copy)", f"{t_simplify:.2f} s", "", "",
        "< 15 s", t_simplify < 15)
    row("7 field copy", f"TetGen fill of the copy, facets preserved ({len(tets):,} tetrahedra)", f"{t_mesh:.2f} s",
        "the full 240 k surface: 60-115 s (README)", "", "< 10 s", t_mesh < 10)


# --------------------------------------------------------------------------- 8. batch


def bench_batch(folder):
    import logging

    from distributed import Client, LocalCluster

    from bladesolid import batch
    from bladesolid.errors import InputError

    print("[8] batch on a local dask cluster", flush=True)
    jobs = Path(folder) / "batch_jobs"
    jobs.mkdir(exist_ok=True)
    for i in range(3):
        (jobs / f"blade{i}.toml").write_text(f'name = "blade {i}"\nmesh = {json.dumps(str(DEMO))}\nunits = "mm"\n'
                                             'material = "al-2025-t6"\n[[operating_point]]\nrpm = 2500\n')
    t_serial, _ = _timed(lambda: batch.run_batch([jobs], Path(folder) / "serial", workers=0, force=True))

    def on_cluster():
        with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                          silence_logs=logging.ERROR) as cluster, Client(cluster) as client:
            return batch.run_batch([jobs], Path(folder) / "cluster", client=client, force=True)

    t_cluster, _ = _timed(on_cluster)
    row("8 batch", "3 loads jobs on a local cluster of 2 worker processes (start-up included)", f"{t_cluster:.1f} s",
        f"the same one after another in this process {t_serial:.1f} s", f"{t_cluster / t_serial:.1f}x", "< 60 s",
        t_cluster < 60)

    def unreachable():
        try:
            batch.run_batch([jobs], Path(folder) / "none", scheduler="tcp://127.0.0.1:9", connect_timeout_s=2)
        except InputError:
            return True
        return False

    t, refused = _timed(unreachable)
    row("8 batch", "unreachable scheduler (connect timeout 2 s) refused", f"{t:.1f} s", "", "", "< 20 s",
        refused and t < 20)
# --------------------------------------------------------------------------- 9. isolation


def bench_isolation(rounds):
    print(f"[9] TetGen isolation, demo blade, {rounds} interleaved rounds", flush=True)
    import trimesh

    from bladesolid import mesh
    from bladesolid.moments import tet_volume_moments

    m = trimesh.load(DEMO, force="mesh")
    v, f = np.asarray(m.vertices) * 1e-3, np.asarray(m.faces)
    tet_volume_moments(*mesh.tetrahedralise_surface(v, f))  # numba's threads up in the parent
    times = {k: [] for k in mesh.ISOLATIONS}
    for _ in range(rounds):
        for k in ("inline", "fork", "spawn"):
            t0 = time.perf_counter()
            mesh.tetrahedralise_surface(v, f, isolation=k)
            times[k].append(time.perf_counter() - t0)
    base = statistics.median(times["inline"])
    for k in ("fork", "spawn"):
        t = statistics.median(times[k])
        row("9 isolation", f"TetGen on the demo blade ({len(f):,} faces), {k}ed child", f"{t:.3f} s",
            f"in this process {base:.3f} s", f"{t / base:.2f}x", "<= 1.15x" if k == "fork" else "",
            (t / base <= 1.15) if k == "fork" else None)
# --------------------------------------------------------------------------- 10. geometry checks


def rtree_edge_check(vertices, faces, limit=10):
    """The self-intersection check field copies used before ``selfintersect`` (baseline only):
    an R-tree of the face boxes, then Moller-Trumbore of every edge against every candidate
    face (strict crossings; faces sharing an edge skipped)."""
    from rtree import index

    v = np.asarray(vertices, dtype=float)
    f = np.asarray(faces, dtype=np.int64)
    tri = v[f]
    lo, hi = tri.min(axis=1), tri.max(axis=1)
    pad = 1e-9 * float(np.ptp(v, axis=0).max())
    prop = index.Property()
    prop.dimension = 3
    tree = index.Index(((i, (*lo[i], *hi[i]), None) for i in range(len(f))), properties=prop)

    def crosses(p, q, a, b, c, eps=1e-9):
        e1, e2, d = b - a, c - a, q - p
        h = np.cross(d, e2)
        det = np.einsum("ij,ij->i", e1, h)
        ok = np.abs(det) > eps * np.linalg.norm(e1, axis=1) * np.linalg.norm(e2, axis=1) * np.linalg.norm(d, axis=1)
        inv = np.divide(1.0, det, out=np.zeros_like(det), where=ok)
        s = p - a
        u = np.einsum("ij,ij->i", s, h) * inv
        qv = np.cross(s, e1)
        w = np.einsum("ij,ij->i", d, qv) * inv
        t = np.einsum("ij,ij->i", e2, qv) * inv
        return ok & (u > eps) & (w > eps) & (u + w < 1 - eps) & (t > eps) & (t < 1 - eps)

    found = 0
    for start in range(0, len(f), 20_000):
        stop = min(start + 20_000, len(f))
        ids, counts = tree.intersection_v(lo[start:stop] - pad, hi[start:stop] + pad)
        i = np.repeat(np.arange(start, stop), np.asarray(counts, dtype=np.int64))
        j = np.asarray(ids, dtype=np.int64)
        keep = j > i
        i, j = i[keep], j[keep]
        keep = (f[i][:, :, None] == f[j][:, None, :]).sum(axis=(1, 2)) < 2
        i, j = i[keep], j[keep]
        hit = np.zeros(len(i), bool)
        for X, Y, fx, fy in ((tri[i], tri[j], f[i], f[j]), (tri[j], tri[i], f[j], f[i])):
            for k0, k1 in ((0, 1), (1, 2), (2, 0)):
                free = ~((fx[:, k0, None] == fy) | (fx[:, k1, None] == fy)).any(axis=1)
                if free.any():
                    hit[free] |= crosses(X[free, k0], X[free, k1], Y[free, 0], Y[free, 1], Y[free, 2])
        found += int(hit.sum())
        if found >= limit:
            break
    return found


def noisy_export(v, f, seed=0):
    """Facet-by-facet float32 corners with exporter noise (as tests/test_weld.py makes them)."""
    rng = np.random.default_rng(seed)
    c = np.asarray(v, np.float32)[f].reshape(-1, 3).copy()
    zero = c == 0
    c[zero] = rng.choice(np.array([0.0, -0.0, 1e-17, -1e-17, -5e-17, 2e-33], np.float32), size=int(zero.sum()))
    up = (rng.random(c.shape) < 0.3) & ~zero
    c[up] = np.nextafter(c[up], np.float32(np.inf))
    return c.astype(np.float64), np.arange(len(c), dtype=np.int64).reshape(-1, 3)


def bench_geometry(v, f, baseline=True):
    from bladesolid.io import merge_coincident
    from bladesolid.moments import surface_volume_moments
    from bladesolid.selfintersect import self_intersections
    from bladesolid.weld import weld

    print(f"[10] geometry checks, {len(f):,} faces", flush=True)
    import trimesh

    box = trimesh.creation.box()
    self_intersections(box.vertices, box.faces)  # compile / load the cached kernels
    weld(box.vertices[box.faces].reshape(-1, 3), np.arange(36).reshape(-1, 3))
    surface_volume_moments(v[:3], f[:1] % 3)
    c0 = time.process_time()
    t_check = median_time(lambda: self_intersections(v, f), repeats=5)
    cpu = (time.process_time() - c0) / 6
    found = self_intersections(v, f).count
    t_int = median_time(lambda: surface_volume_moments(v, f), repeats=9)
    if baseline:
        t_old = median_time(lambda: rtree_edge_check(v, f), repeats=1, warmup=0)
        base = f"R-tree + edge crossing check it replaced {t_old:.1f} s (run once)"
        ratio = f"{t_old / t_check:.0f}x faster than the R-tree check; {t_check / t_int:.0f}x the integral"
    else:
        base, ratio = "", f"{t_check / t_int:.0f}x the integral"
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    row("10 geometry", f"self_intersections, {len(f):,}-face blade ({found} pairs found; CPU {cpu:.2f} s over "
        f"all threads per run; load average {load:.1f} on {os.cpu_count()} CPUs)", f"{t_check:.2f} s", f"closed-surface integral {t_int * 1e3:.1f} ms" + (f"; {base}" if base else ""), ratio,
        "<= 1.5 s", t_check <= 1.5)
    corners, soup = noisy_export(v, f)
    t_weld = median_time(lambda: weld(corners, soup), repeats=3)
    t_exact = median_time(lambda: merge_coincident(corners, soup), repeats=3)
    w = weld(corners, soup)
    left = len(merge_coincident(corners, soup)[0])
    row("10 geometry", f"weld of a facet-by-facet float32 export ({len(corners):,} corners -> {len(w.vertices):,} "
        f"vertices; bit-exact merge leaves {left:,})", f"{t_weld:.2f} s", f"bit-exact merge {t_exact:.2f} s",
        f"{t_weld / t_exact:.1f}x", "")
# --------------------------------------------------------------------------- 11. elastic


def bench_elastic(folder, n_target, n_small, refine_sizes):
    import resource

    import trimesh

    from bladesolid import api, fieldres
    from bladesolid.elastic import assemble, campbell, elastic_model, solve_static
    from bladesolid.elastic.solvers import factorize, rigid_body_modes
    from bladesolid.io import write_surface

    print(f"[11] elastic blade: {n_target:,}-element target, solver comparison at {n_small:,}", flush=True)
    m = trimesh.load(DEMO, force="mesh")
    v, f = fieldres.field_surface(np.asarray(m.vertices), np.asarray(m.faces), 5000)
    stl = Path(folder) / "demo_5k_elastic.stl"
    write_surface(stl, v, f)
    blade = api.load_blade(stl, "mm", [("material", "al-2025-t6")], elements=False)
    t0 = time.perf_counter()
    model = elastic_model(blade, target_elements=n_target, blade_angle_deg=25.0)
    t_model = time.perf_counter() - t0
    how = "boundary Steiner points" if model.quality.boundary_steiner else "surface kept after the Steiner refinement failed"
    row("11 elastic", f"quality mesh + 10-node elements + assembly, demo blade (5 k-face surface; {len(model.mesh):,} "
        f"elements, {model.n_dofs:,} DOFs; {how})", f"{t_model:.1f} s", f"TetGen {model.timings_s['quality_mesh']:.1f} s, "
        f"assembly of K and M {model.timings_s['assemble']:.2f} s", "", "")
    t0 = time.perf_counter()
    st = solve_static(model, 2500.0)
    t_solve = time.perf_counter() - t0
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1e3
    row("11 elastic", f"stress solve, 2500 rpm, stiffened ({st.iterations} passes, untwist {st.untwist_deg:+.4f} deg, max von "
        f"Mises {st.max_von_mises_Pa / 1e6:.1f} MPa, reaction / exact pull {st.root_reaction_N / st.radial_pull_N:.5f})",
        f"{t_solve:.1f} s, {st.memory_MB:.0f} MB (peak RSS {peak:.0f} MB)", st.solver, "", "< 60 s", t_solve < 60)
    t0 = time.perf_counter()
    sweep = campbell(model, [0.0, 1000.0, 2000.0, 2500.0, 3000.0], n_modes=8)
    t_modes = time.perf_counter() - t0
    f0 = ", ".join(f"{x:.1f}" for x in sweep[0].frequencies_Hz[:4])
    row("11 elastic", f"8 modes at 5 speeds (at rest: {f0} Hz ...; {', '.join(sweep[0].labels[:4])})",
        f"{t_modes:.0f} s", "", "", "a few minutes", t_modes < 300)

    # a flat plate (chord 50 mm, 3 mm thick, 0.5 m span) for the solver comparison: the demo
    # blade's surface alone makes ~27 000 elements, too many for SuperLU's memory
    plate = trimesh.creation.box([0.05, 0.5, 0.003])
    plate.apply_translation([0.0, 0.35, 0.0])
    plate_stl = Path(folder) / "plate_elastic.stl"
    plate.export(plate_stl)
    plate_blade = api.load_blade(plate_stl, "m", [("material", "al-2025-t6")], elements=False)
    small = elastic_model(plate_blade, target_elements=n_small)
    k = len(small.mesh)
    from bladesolid.materials import MATERIALS

    E, nu = MATERIALS["al-2025-t6"].modulus_Pa, MATERIALS["al-2025-t6"].poisson
    t_ours = median_time(lambda: assemble.stiffness_matrix(
        small.mesh.nodes, small.mesh.elements, assemble.node_pattern(small.mesh.elements, len(small.mesh.nodes)),
        np.full(k, E), np.full(k, nu)), repeats=3)
    try:
        import skfem
        from skfem.models.elasticity import lame_parameters, linear_elasticity

        qm = small.quality
        basis = skfem.Basis(skfem.MeshTet(qm.nodes.T, qm.tets.T), skfem.ElementVector(skfem.ElementTetP2()), intorder=2)
        t_sk = median_time(lambda: skfem.asm(linear_elasticity(*lame_parameters(E, nu)), basis), repeats=1, warmup=0)
        row("11 elastic", f"quadratic stiffness assembly, {k:,} elements (node graph included)", f"{t_ours:.2f} s",
            f"scikit-fem ElementTetP2 {t_sk:.2f} s", f"{t_sk / t_ours:.1f}x faster", "faster than scikit-fem",
            t_ours < t_sk)
    except ImportError:
        pass
    A = small.stiffness[small.free][:, small.free].tocsr()
    b = np.random.default_rng(0).random(A.shape[0]) - 0.5
    pts = small.mesh.nodes[~small.clamp]
    res = {}
    try:
        import sksparse.cholmod  # noqa: F401

        t = median_time(lambda: factorize(A, "direct").solve(b), repeats=1, warmup=0)
        res["CHOLMOD"] = f"{t:.2f} s"
    except ImportError:
        res["CHOLMOD"] = "not installed"
    import builtins

    real_import = builtins.__import__

    def no_cholmod(name, *a, **kw):
        if name.startswith("sksparse"):
            raise ImportError(name)
        return real_import(name, *a, **kw)

    builtins.__import__ = no_cholmod
    try:
        t_lu = median_time(lambda: factorize(A, "direct").solve(b), repeats=1, warmup=0)
    finally:
        builtins.__import__ = real_import
    import pyamg
    from scipy.sparse.linalg import cg

    t0 = time.perf_counter()
    ml = pyamg.smoothed_aggregation_solver(A, B=rigid_body_modes(pts), symmetry="symmetric", max_coarse=500)
    its = [0]
    x, info = cg(A, b, rtol=1e-10, atol=0.0, M=ml.aspreconditioner(), maxiter=300,
                 callback=lambda _: its.__setitem__(0, its[0] + 1))
    t_amg = time.perf_counter() - t0
    rel = float(np.linalg.norm(A @ x - b) / np.linalg.norm(b))
    row("11 elastic", f"one linear solve, {k:,} elements ({A.shape[0]:,} DOFs)", f"SuperLU {t_lu:.2f} s",
        f"CHOLMOD {res['CHOLMOD']}; pyamg SA + CG {t_amg:.2f} s ({its[0]} iterations, residual {rel:.1e})", "",
        "direct is the default")
    bench_elastic_refinement(folder, refine_sizes)


def bench_elastic_refinement(folder, sizes):
    """Untwist, peak stress and tip deflection of a flat plate at 30° (chord 50 mm, 3 mm
    thick, 0.3 m span, 6000 rpm) as the element size falls. (On the demo blade the mesh is
    set by its surface triangles, so the size asked for hardly changes it.)"""
    import trimesh

    from bladesolid import api
    from bladesolid.elastic import elastic_model, solve_static

    plate = trimesh.creation.box([0.05, 0.3, 0.003])
    plate.apply_translation([0.0, 0.25, 0.0])
    plate.apply_transform(trimesh.transformations.rotation_matrix(math.radians(30.0), [0, 1, 0]))
    stl = Path(folder) / "plate30_elastic.stl"
    plate.export(stl)
    blade = api.load_blade(stl, "m", [("material", "al-2025-t6")], elements=False)
    for h in sizes:
        mh = elastic_model(blade, element_size_m=h)
        sh = solve_static(mh, 6000.0)
        row("11 elastic", f"refinement, 30° plate: element size {h * 1e3:g} mm ({len(mh.mesh):,} elements, "
            f"{mh.n_dofs:,} DOFs)", f"untwist {sh.untwist_deg:+.5f} deg", f"max von Mises {sh.max_von_mises_Pa / 1e6:.2f} MPa",
            f"tip deflection {np.linalg.norm(sh.tip_deflection_m) * 1e3:.4f} mm", "converging")


# --------------------------------------------------------------------------- 12. review vs loads


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
    print("[12] check against loads, demo job, whole process", flush=True)
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
    row("12 review", f"bladesolid check of the demo job, median of {repeats} (last run: computing {compute:.2f} s, "
        f"pictures and files {t.get('write_views', 0.0):.2f} s)", f"{tc:.2f} s",
        f"bladesolid loads of the same job {tl:.2f} s", f"{tc / tl:.2f}x", "<= 2.5x", tc / tl <= 2.5)



# --------------------------------------------------------------------------- main


@dataclasses.dataclass(frozen=True)
class Bench:
    """What every section gets: a scratch folder and the --quick flag."""

    folder: str
    quick: bool


def _geometry(b: Bench):
    from bladesolid.demo import large_blade_surface

    v, f = large_blade_surface(24_000 if b.quick else 240_000)
    bench_geometry(v, f, baseline=not b.quick)


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
    "refusals": lambda b: bench_refusals(b.folder),
    "fieldcopy": lambda b: None if b.quick else bench_field_copy(),
    "batch": lambda b: bench_batch(b.folder),
    "isolation": lambda b: bench_isolation(3 if b.quick else 7),
    "geometry": _geometry,
    "elastic": lambda b: bench_elastic(b.folder, 4_000 if b.quick else 17_000, 3_000 if b.quick else 8_000,
                                       [0.006, 0.004] if b.quick else [0.006, 0.004, 0.003]),
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
