"""Hostile outputs and a noisy stderr: output names are checked before any work, every exit 2
prints exactly one line, nothing raw (tracebacks, numpy warnings) reaches the user, the view
refuses a display that does not answer, and a batch reports a dead worker as the blade's own
problem (docs/CONVENTIONS.md §7).
"""

from __future__ import annotations

import json
import os
import socket
import warnings
from pathlib import Path

import numpy as np
import pytest
import trimesh

from bladesolid import batch
from bladesolid.cli import EXIT_INTERNAL

from .hostilehelp import BAR, DEMO, bar_stl, job_file, leftovers, no_work, one_line, run


@pytest.fixture
def bar(tmp_path):
    return bar_stl(tmp_path)


@pytest.fixture
def unwritable(tmp_path):
    """A folder no file can be created in: read-only permissions, or (for root, whom those do not
    stop) a kernel filesystem that refuses new files."""
    if os.geteuid() != 0:
        d = tmp_path / "locked"
        d.mkdir()
        d.chmod(0o555)
        yield d
        d.chmod(0o755)
        return
    from bladesolid.safefile import probe_writable

    if probe_writable("/sys") is None:
        pytest.skip("no folder here refuses new files to root")
    yield Path("/sys")


# --------------------------------------------------------------------------- names before work


LOADS = ["loads", DEMO, "--units", "mm", "--density", "2810", "--rpm", "2500", "--rpm-sweep", "0:3000:500"]
SPAN = ["span", DEMO, "--units", "mm", "--density", "2810", "--rpm", "2500"]
MASS = ["mass", DEMO, "--units", "mm", "--density", "2810"]
COMPARE = ["compare", DEMO, "--reference", DEMO, "--units", "mm", "--density", "2810", "--rpm", "2500"]


@pytest.mark.parametrize("argv, flag, name, ext", [
    (LOADS, "--csv", "c.png", ".csv"),
    (LOADS, "--plot", "p.csv", ".png"),
    (LOADS, "--rpm-csv", "r.json", ".csv"),
    (LOADS, "--rpm-plot", "r.xyz", ".png"),
    (LOADS, "--json", "l.txt", ".json"),
    (SPAN, "--plot", "p.txt", ".png"),
    (SPAN, "--csv", "s.tsv", ".csv"),
    (MASS, "--json", "m.csv", ".json"),
    (COMPARE, "--deviation-png", "d.jpg", ".png"),
])
def test_an_output_name_with_the_wrong_extension_is_refused_before_any_work(argv, flag, name, ext, tmp_path, capsys,
                                                                             monkeypatch):
    no_work(monkeypatch)
    code, _, err = run([*argv, flag, tmp_path / name], capsys)
    one_line(code, err, flag, f"must end in {ext}")
    assert list(tmp_path.iterdir()) == []


def test_csv_and_plot_swapped_write_nothing_and_print_no_traceback(tmp_path, capsys):
    # the plot name was taken by matplotlib as a format: a 24-line traceback, exit 1, and the
    # CSV written under the PNG's name
    code, _, err = run([*LOADS, "--csv", tmp_path / "c.png", "--plot", tmp_path / "p.csv"], capsys)
    one_line(code, err, "--csv", "must end in .csv")
    assert list(tmp_path.iterdir()) == []


def test_match_plot_name_is_checked_before_the_reports_are_read(tmp_path, capsys, monkeypatch):
    from bladesolid import compare

    monkeypatch.setattr(compare, "read_set_report", lambda *a: pytest.fail("reports read before the check"))
    code, _, err = run(["match", tmp_path / "a.json", tmp_path / "b.json", "--plot", tmp_path / "m.svg"], capsys)
    one_line(code, err, "--plot", "must end in .png")


def test_an_unwritable_output_folder_is_refused_before_any_work(unwritable, tmp_path, capsys, monkeypatch):
    no_work(monkeypatch)
    code, _, err = run([*MASS, "--json", unwritable / "m.json"], capsys)
    one_line(code, err, "--json", "not writable")


def test_check_into_an_unwritable_folder_names_out_not_a_temporary(unwritable, tmp_path, capsys, monkeypatch):
    from bladesolid import review

    monkeypatch.setattr(review, "run_review", lambda *a, **k: pytest.fail("the review ran before --out was checked"))
    job = job_file(tmp_path, DEMO, stations="4")
    code, _, err = run(["check", job, "--out", unwritable / "review"], capsys)
    line = one_line(code, err, "--out", "not writable")
    assert ".part" not in line and "review" in line


def test_a_staged_folder_that_cannot_be_made_names_the_output(unwritable):
    from bladesolid.errors import InputError
    from bladesolid.safefile import staged_folder

    with pytest.raises(InputError) as info:
        with staged_folder(unwritable / "review"):
            pytest.fail("yielded a folder that cannot exist")
    assert str(info.value).startswith(str(unwritable / "review") + ": ") and ".part" not in str(info.value)


# --------------------------------------------------------------------------- one line, nothing raw


def short_box(folder: Path) -> Path:
    """A 100 mm long box at r = 500-600 mm: its 0.75 R station (450 mm) misses it, so its blade
    angle is not measured (a warning), though it is plainly on the pitch axis."""
    b = trimesh.creation.box([40.0, 100.0, 10.0])
    b.apply_translation([0.0, 550.0, 0.0])
    p = folder / "short.stl"
    b.export(p)
    return p


def test_warnings_before_a_refusal_are_not_printed(tmp_path, capsys):
    # the blade loads with a warning, then the counterweight cannot be sized without the blade
    # angle: one line (the refusal), not the warning and the refusal
    job = job_file(tmp_path, short_box(tmp_path), tables="[counterweight]\nradius = 520.0\narm = 50.0\nclocking = 90.0\n")
    for command in (["loads", job], ["check", job, "--out", tmp_path / "review"]):
        code, _, err = run(command, capsys)
        one_line(code, err, str(job), "counterweight sizing needs the modelled blade angle")
    assert not (tmp_path / "review").exists() and leftovers(tmp_path) == []
    # the same blade without the counterweight succeeds, and then the warning is shown
    job = job_file(tmp_path, short_box(tmp_path), name="plain.toml")
    code, out, err = run(["loads", job], capsys)
    assert code == 0 and "blade angle not measured" in err and "Centrifugal loads" in out


def test_progress_lines_only_with_verbose(bar, tmp_path, capsys):
    code, _, err = run(["loads", bar, *BAR, "--rpm", "2500"], capsys)
    assert code == 0 and err == ""
    code, _, err = run(["loads", bar, *BAR, "--rpm", "2500", "--verbose"], capsys)
    assert code == 0 and "reading and checking the mesh" in err


def test_a_numpy_warning_becomes_one_warning_line(bar, capsys, monkeypatch):
    from bladesolid import api

    real = api.loads_for_job

    def overflowing(*a, **k):
        np.float64(1e308) * np.float64(10.0)  # numpy's "overflow encountered" RuntimeWarning
        return real(*a, **k)

    monkeypatch.setattr(api, "loads_for_job", overflowing)
    with warnings.catch_warnings():
        warnings.simplefilter("default")
        code, _, err = run(["loads", bar, *BAR, "--rpm", "2500"], capsys)
    assert code == 0
    assert "RuntimeWarning" not in err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("warning: a numerical overflow") and "overflow" in lines[0]


def test_an_internal_error_is_one_line_and_its_own_status(bar, capsys, monkeypatch):
    from bladesolid.cli import printing

    monkeypatch.setattr(printing, "print_mass", lambda *a, **k: [][1])  # a bug: IndexError
    code, _, err = run(["mass", bar, *BAR], capsys)
    assert code == EXIT_INTERNAL == 3
    assert err.count("\n") == 1 and "internal error: IndexError" in err and "Traceback" not in err
    code, _, err = run(["mass", bar, *BAR, "--verbose"], capsys)
    assert code == 3 and "Traceback" in err  # asked for


# --------------------------------------------------------------------------- view


def test_view_refuses_a_display_that_does_not_answer_before_any_work(capsys, monkeypatch):
    no_work(monkeypatch)
    monkeypatch.setenv("DISPLAY", ":987")  # no X server has that socket
    monkeypatch.delenv("WAYLAND_DISPLAY", raising=False)
    code, _, err = run(["view", DEMO, "--units", "mm", "--density", "2810", "--rpm", "2500"], capsys)
    one_line(code, err, "view", "the display :987 does not answer")


def test_a_display_that_accepts_but_never_replies_is_refused_within_the_timeout():
    import ctypes.util

    from bladesolid.display import display_problem

    if not ctypes.util.find_library("X11"):
        pytest.skip("without Xlib the probe stops at the connection")
    # a TCP listener that accepts (the kernel completes the handshake) and never answers the
    # X connection setup: X display N listens on TCP port 6000 + N (X protocol, from memory)
    listener = socket.socket()
    for port in range(6090, 6200):
        try:
            listener.bind(("127.0.0.1", port))
            break
        except OSError:
            continue
    else:
        pytest.skip("no free port for a fake display")
    listener.listen(1)
    try:
        problem = display_problem(0.3, {"DISPLAY": f"127.0.0.1:{port - 6000}"})
    finally:
        listener.close()
    assert problem is not None and "does not answer" in problem


# --------------------------------------------------------------------------- batch


def test_batch_prints_one_line_however_many_jobs_fail(bar, tmp_path, capsys):
    jobs = tmp_path / "jobs"
    jobs.mkdir()
    job_file(jobs, bar, name="good.toml")
    job_file(jobs, bar, name="bad1.toml", density='"2810 mm"')
    job_file(jobs, bar, name="bad2.toml", rpm="1e12")
    code, out, err = run(["batch", jobs, "--out", tmp_path / "out", "--workers", "0"], capsys)
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("bladesolid: error: 2 of 3 jobs failed"), err
    assert "bad1.toml" in out and "bad2.toml" in out  # every reason in the table


def test_a_dead_worker_is_the_blades_own_one_line_problem():
    from distributed.scheduler import KilledWorker

    exc = KilledWorker("bladesolid-3-b7", "tcp://127.0.0.1:40000", "Attempted to run task bladesolid-3-b7 on 4 "
                       "different workers, but all those workers died while running it.")
    reason = batch.lost_worker_reason("/shop/jobs/b7.toml", exc)
    assert reason.startswith("/shop/jobs/b7.toml: worker process died (out of memory?) while processing")
    assert "\n" not in reason and "Attempted" not in reason


@pytest.mark.slow
def test_a_worker_process_that_dies_fails_only_its_own_blade(bar, tmp_path, monkeypatch):
    import logging

    import dask
    from distributed import Client, LocalCluster

    jobs = tmp_path / "jobs"
    jobs.mkdir()
    job_file(jobs, bar, name="killer.toml")

    def dies(job_path, options):  # the worker process ends as the out-of-memory killer would end it
        os._exit(137)

    monkeypatch.setattr(batch, "run_job", dies)  # pickled by value: a nested function
    with dask.config.set({"distributed.scheduler.allowed-failures": 0}):
        with LocalCluster(n_workers=1, threads_per_worker=1, processes=True, dashboard_address=None,
                          silence_logs=logging.CRITICAL) as cluster, Client(cluster) as client:
            res = batch.run_batch([jobs], tmp_path / "out", client=client)
    (row,) = res.rows
    assert row["status"] == batch.FAILED and res.exit_status == 2
    assert row["reason"] == (f"{jobs / 'killer.toml'}: worker process died (out of memory?) while processing this "
                             "blade; try a coarser mesh or workers with more memory")
    assert json.loads((tmp_path / "out" / "summary.json").read_text())["failed"] == 1
