"""Batches: many job files, one summary; one bad blade never stops the rest.

Three good jobs on the shipped demo blade (different densities and lumped masses) and one bad
job. The numbers are checked against trimesh's own mass properties of the same STL (an
independent integration) and the textbook radial pull m·Ω²·r; the same batch on a dask
LocalCluster must give bit-identical rows.
"""

from __future__ import annotations

import csv
import json
import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from bladesolid import batch

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "meshes" / "demo_blade.stl"
RPM = 2500.0

GOOD = {
    # name: (density kg/m^3, [(lumped mass kg, position mm)])
    "bw3-0101": (2810.0, []),
    "bw3-0102": (2700.0, [(0.05, (-10.0, 160.0, 30.0))]),
    "bw3-0103": (4430.0, [(0.02, (0.0, 300.0, 0.0)), (0.03, (5.0, 200.0, -4.0))]),
}


def write_jobs(folder: Path) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    for stem, (rho, lumped) in GOOD.items():
        text = (f'name = "BW-3 blade {stem}"\nmesh = {json.dumps(str(DEMO))}\nunits = "mm"\n'
                f'density = "{rho} kg/m^3"\n\n[[operating_point]]\nname = "take-off"\nrpm = {RPM}\nblade_angle = 25.0\n')
        for m, p in lumped:
            text += f'\n[[lumped_mass]]\nmass = "{m} kg"\nposition = {list(p)}\n'
        (folder / f"{stem}.toml").write_text(text)
    # bad: a density with a unit of length
    (folder / "bw3-0104.toml").write_text(
        f'name = "BW-3 blade bw3-0104"\nmesh = {json.dumps(str(DEMO))}\nunits = "mm"\ndensity = "2810 mm"\n'
        f'[[operating_point]]\nrpm = {RPM}\n')
    return folder


@pytest.fixture(scope="module")
def reference():
    """Per good job: mass, CG y, radial pull from trimesh's mass properties (independent)."""
    import trimesh

    mesh = trimesh.load(DEMO, force="mesh")
    mesh.apply_scale(1e-3)
    vol = float(mesh.volume)
    cy = float(mesh.center_mass[1])
    omega = RPM * 2 * math.pi / 60
    out = {}
    for stem, (rho, lumped) in GOOD.items():
        m = rho * vol + sum(lm for lm, _ in lumped)
        my = rho * vol * cy + sum(lm * p[1] * 1e-3 for lm, p in lumped)
        # pitch axis = y through the hub centre, no precone: turning the blade about y keeps
        # every y, so F·e = Ω² Σ m y (m·Ω²·r, e.g. Meriam & Kraige, Dynamics — from memory)
        out[stem] = {"mass_kg": m, "cg_radius_m": my / m, "radial_pull_N": omega**2 * my}
    return out


def check_rows(rows, reference):
    by = {Path(r["job"]).stem: r for r in rows}
    assert sorted(by) == ["bw3-0101", "bw3-0102", "bw3-0103", "bw3-0104"]
    for stem, ref in reference.items():
        r = by[stem]
        assert r["status"] == "ok", r
        assert r["name"] == f"BW-3 blade {stem}"
        for key, value in ref.items():
            assert r[key] == pytest.approx(value, rel=1e-9), (stem, key)
        assert r["rpm"] == RPM and r["blade_angle_deg"] == 25.0 and r["operating_point"] == "take-off"
        assert math.isfinite(r["ctm_Nm"])
        assert r["output"] == stem
    bad = by["bw3-0104"]
    assert bad["status"] == "bad input" and bad["mass_kg"] is None and bad["output"] is None
    assert "bw3-0104.toml" in bad["reason"] and "density" in bad["reason"] and "\n" not in bad["reason"]
    return by


def test_batch_in_this_process(tmp_path, reference):
    jobs = write_jobs(tmp_path / "jobs")
    out = tmp_path / "results"
    seen = []
    res = batch.run_batch([jobs], out, workers=0, on_done=lambda row, done, total: seen.append((done, total)))
    assert seen == [(1, 4), (2, 4), (3, 4), (4, 4)]
    assert res.exit_status == 2 and [f["job"] for f in res.failures] == [str(jobs / "bw3-0104.toml")]
    by = check_rows(res.rows, reference)
    # each good job wrote its own report, identical in content to the `loads` command's
    for stem in GOOD:
        rep = json.loads((out / stem / "report.json").read_text())
        assert rep["schema"] == "bladesolid.report/1"
        assert rep["operating_points"][0]["ctm_Nm"] == by[stem]["ctm_Nm"]
        assert rep["mass_properties"]["mass_kg"] == by[stem]["mass_kg"]
    assert not (out / "bw3-0104").exists()  # the bad job left nothing
    # the summaries: one row per blade, same numbers as the rows
    with open(out / "summary.csv", newline="") as fh:
        assert fh.readline().startswith("# Results are engineering estimates")  # the caution line
        table = list(csv.DictReader(fh))
    assert [Path(r["job"]).stem for r in table] == ["bw3-0101", "bw3-0102", "bw3-0103", "bw3-0104"]
    assert float(table[1]["mass_kg"]) == by["bw3-0102"]["mass_kg"]  # repr round-trip is exact
    assert table[3]["status"] == "bad input" and table[3]["mass_kg"] == ""
    summary = json.loads((out / "summary.json").read_text())
    assert (summary["jobs"], summary["ok"], summary["failed"]) == (4, 3, 1)
    assert summary["rows"][2]["ctm_Nm"] == by["bw3-0103"]["ctm_Nm"]
    assert sorted(p.name for p in out.iterdir()) == ["CAUTION.txt", "bw3-0101", "bw3-0102", "bw3-0103", "summary.csv",
                                                      "summary.json"]


def test_the_loads_command_gives_the_same_report(tmp_path, capsys):
    from bladesolid.cli import main

    jobs = write_jobs(tmp_path / "jobs")
    out = tmp_path / "results"
    res = batch.run_batch([jobs / "bw3-0102.toml"], out, workers=0)
    assert res.exit_status == 0
    single = tmp_path / "single.json"
    assert main(["loads", str(jobs / "bw3-0102.toml"), "--json", str(single)]) == 0
    a = json.loads(single.read_text())
    b = json.loads((out / "bw3-0102" / "report.json").read_text())
    for key in ("mass_properties", "operating_points", "pitch_sweep", "ctm_curve", "blade_angle"):
        assert a[key] == b[key], key


@pytest.mark.slow
def test_batch_on_a_dask_local_cluster_gives_identical_numbers(tmp_path, reference):
    import logging

    from distributed import Client, LocalCluster

    jobs = write_jobs(tmp_path / "jobs")
    serial = batch.run_batch([jobs], tmp_path / "serial", workers=0)
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                      silence_logs=logging.ERROR) as cluster, Client(cluster) as client:
        res = batch.run_batch([jobs], tmp_path / "cluster", client=client)
        pids = {r["pid"] for r in res.rows}
    assert res.exit_status == 2
    check_rows(res.rows, reference)
    assert os.getpid() not in pids  # the work really ran in the worker processes
    keys = [c for c in batch.COLUMNS if c not in ("seconds", "job")]
    assert [{k: r[k] for k in keys} for r in res.rows] == [{k: r[k] for k in keys} for r in serial.rows]
    for stem in GOOD:
        a = json.loads((tmp_path / "serial" / stem / "report.json").read_text())
        b = json.loads((tmp_path / "cluster" / stem / "report.json").read_text())
        assert a["operating_points"] == b["operating_points"] and a["mass_properties"] == b["mass_properties"]


def test_job_list_file_duplicates_and_missing_jobs(tmp_path):
    jobs = write_jobs(tmp_path / "jobs")
    other = tmp_path / "other"
    other.mkdir()
    (other / "bw3-0101.toml").write_text((jobs / "bw3-0101.toml").read_text())  # same stem, other folder
    listing = tmp_path / "jobs.txt"
    listing.write_text("# blades in for overhaul\n\njobs/bw3-0101.toml\n jobs/bw3-0101.toml \n"
                       "other/bw3-0101.toml\njobs/missing.toml\n")
    found = batch.collect_jobs([listing])
    assert [Path(p).relative_to(tmp_path).as_posix() for p in found] == [
        "jobs/bw3-0101.toml", "other/bw3-0101.toml", "jobs/missing.toml"]
    res = batch.run_batch([listing], tmp_path / "out", workers=0, command="mass")
    assert [r["output"] for r in res.rows] == ["bw3-0101", "bw3-0101-2", None]
    assert res.rows[0]["mass_kg"] == res.rows[1]["mass_kg"]
    assert res.rows[0]["radial_pull_N"] is not None  # mass jobs still report their first operating point
    assert res.rows[2]["status"] == "bad input" and "missing.toml: job file not found" in res.rows[2]["reason"]
    rep = json.loads((tmp_path / "out" / "bw3-0101" / "report.json").read_text())
    assert "mass_properties" in rep and "operating_points" not in rep


def test_existing_results_are_not_overwritten_without_force(tmp_path):
    from bladesolid.errors import InputError

    jobs = write_jobs(tmp_path / "jobs")
    out = tmp_path / "out"
    batch.run_batch([jobs / "bw3-0101.toml"], out, workers=0)
    with pytest.raises(InputError, match="summary.csv: exists already"):
        batch.run_batch([jobs], out, workers=0)
    (out / "summary.csv").unlink()
    (out / "summary.json").unlink()
    before = (out / "bw3-0101" / "report.json").read_bytes()
    res = batch.run_batch([jobs / "bw3-0101.toml", jobs / "bw3-0102.toml"], out, workers=0)
    assert [r["status"] for r in res.rows] == ["bad input", "ok"]  # the other job still ran
    assert "exists already" in res.rows[0]["reason"]
    assert (out / "bw3-0101" / "report.json").read_bytes() == before
    res = batch.run_batch([jobs / "bw3-0101.toml"], out, workers=0, force=True)
    assert res.exit_status == 0


def test_an_unexpected_failure_in_one_job_does_not_stop_the_others(tmp_path, monkeypatch):
    from bladesolid import api

    real = api.blade_from_job

    def flaky(job, **kw):
        if "0102" in job.source:
            raise RuntimeError("simulated crash\nsecond line")
        return real(job, **kw)

    monkeypatch.setattr(api, "blade_from_job", flaky)
    jobs = write_jobs(tmp_path / "jobs")
    res = batch.run_batch([jobs], tmp_path / "out", workers=0)
    st = {Path(r["job"]).stem: r["status"] for r in res.rows}
    assert st == {"bw3-0101": "ok", "bw3-0102": "failed", "bw3-0103": "ok", "bw3-0104": "bad input"}
    assert res.rows[1]["reason"] == f"{jobs / 'bw3-0102.toml'}: RuntimeError: simulated crash second line"
    assert res.exit_status == 2


def test_bad_batch_inputs(tmp_path):
    from bladesolid.errors import InputError

    empty = tmp_path / "empty"
    empty.mkdir()
    with pytest.raises(InputError, match="no job files"):
        batch.collect_jobs([empty])
    with pytest.raises(InputError, match="not found"):
        batch.collect_jobs([tmp_path / "nothing-here"])
    with pytest.raises(InputError, match="^command: "):
        batch.run_batch([empty], tmp_path / "o", command="span")
    with pytest.raises(InputError, match="does not exist"):
        batch.run_batch([write_jobs(tmp_path / "j")], tmp_path / "no" / "such" / "out", workers=0)


def test_batch_command_line(tmp_path, capsys):
    from bladesolid.cli import main

    jobs = write_jobs(tmp_path / "jobs")
    out = tmp_path / "results"
    code = main(["batch", str(jobs), "--out", str(out), "--workers", "0"])
    o, e = capsys.readouterr()
    assert code == 2
    for stem in GOOD:
        assert f"BW-3 blade {stem}" in o
    assert "bw3-0104.toml" in o  # the failure is listed under the table
    err_lines = e.strip().splitlines()
    assert len(err_lines) == 1 and err_lines[0].startswith("bladesolid: error: ") and "bw3-0104.toml" in err_lines[0]
    assert (out / "summary.csv").exists() and (out / "summary.json").exists()
    # usage errors
    assert main(["batch", str(jobs)]) == 2  # --out missing
    assert main(["batch", str(jobs), "--out", str(tmp_path / "x"), "--command", "span"]) == 2
    assert main(["batch", str(jobs), "--out", str(tmp_path / "x"), "--workers", "-1"]) == 2


@pytest.mark.slow
def test_batch_through_python_dash_m_on_local_worker_processes(tmp_path):
    jobs = write_jobs(tmp_path / "jobs")
    out = tmp_path / "results"
    r = subprocess.run([sys.executable, "-m", "bladesolid", "batch", str(jobs), "--out", str(out), "--workers", "2"],
                       cwd=tmp_path, capture_output=True, text=True, timeout=180)
    assert r.returncode == 2, r.stderr
    assert "Traceback" not in r.stderr
    summary = json.loads((out / "summary.json").read_text())
    assert summary["where"].startswith("local cluster") and (summary["ok"], summary["failed"]) == (3, 1)
    assert len({row["job"] for row in summary["rows"]}) == 4
    assert np.isfinite([row["ctm_Nm"] for row in summary["rows"][:3]]).all()


@pytest.mark.slow
def test_batch_through_a_scheduler_address(tmp_path, reference):
    # the --scheduler route: a scheduler and workers started elsewhere (here: a LocalCluster
    # of this test), reached only by its address, as a remote cluster would be
    import logging

    from distributed import LocalCluster

    jobs = write_jobs(tmp_path / "jobs")
    with LocalCluster(n_workers=1, threads_per_worker=1, processes=True, dashboard_address=None,
                      silence_logs=logging.ERROR) as cluster:
        res = batch.run_batch([jobs], tmp_path / "out", scheduler=cluster.scheduler_address)
    assert res.where == cluster.scheduler_address and res.exit_status == 2
    check_rows(res.rows, reference)


@pytest.mark.slow
def test_unreachable_scheduler_is_one_input_error_and_no_folder(tmp_path):
    from bladesolid.errors import InputError

    jobs = write_jobs(tmp_path / "jobs")
    with pytest.raises(InputError, match="cannot reach the dask scheduler"):
        batch.run_batch([jobs], tmp_path / "out", scheduler="tcp://127.0.0.1:9", connect_timeout_s=2)
    assert not (tmp_path / "out").exists()


def test_a_job_with_repair_is_mended_and_a_damaged_one_reported(tmp_path):
    # the demo blade's root face taken away: refused as open, mended by `repair = true` to the
    # closed blade's mass (trimesh's mass properties of the shipped, closed blade)
    import trimesh

    from .geohelp import open_root, write

    write(tmp_path / "scan.stl", *open_root())
    jobs = tmp_path / "jobs"
    jobs.mkdir()
    for stem, extra in (("as-is", ""), ("mended", "repair = true\n")):
        (jobs / f"{stem}.toml").write_text(f'mesh = "{tmp_path / "scan.stl"}"\nunits = "mm"\ndensity = "2810 kg/m^3"\n'
                                           f'{extra}[[operating_point]]\nrpm = {RPM}\n')
    result = batch.run_batch([jobs], tmp_path / "out", command="loads", workers=0)
    rows = {Path(r["job"]).stem: r for r in result.rows}
    assert rows["as-is"]["status"] == "bad input" and "open surface" in rows["as-is"]["reason"]
    assert "repair=True" in rows["as-is"]["reason"]
    assert rows["mended"]["status"] == "ok"
    closed = trimesh.load(DEMO, force="mesh")
    assert rows["mended"]["mass_kg"] == pytest.approx(2810.0 * closed.volume * 1e-9, rel=1e-12)
    data = json.loads((tmp_path / "out" / "mended" / "report.json").read_text())
    assert data["geometry"]["repaired_surface"] == "scan_repaired.stl"
    assert data["repairs"][0]["what"].startswith("filled a planar hole")
    assert trimesh.load(tmp_path / "out" / "mended" / "scan_repaired.stl").is_watertight
    assert result.exit_status == 2
