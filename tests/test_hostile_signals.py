"""Nothing left behind: SIGTERM ends a run like Ctrl-C (its temporary files, staged folders and
the mesher's child and folder removed; exit status 143, Ctrl-C's 130); a run killed outright
(SIGKILL) leaves its temporary folder, which the next run sweeps once it is stale and its
owner gone; TetGen's own files never reach the working folder; every temporary name carries
the one prefix with its owner (docs/CONVENTIONS.md §7).

Exit statuses 128 + signal number (SIGINT 2, SIGTERM 15) are the shells' convention (POSIX,
from memory).
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest
import trimesh

from bladesolid import safefile
from bladesolid.cli import EXIT_INTERRUPTED, EXIT_TERMINATED

from .hostilehelp import BAR, bar_stl, cli_subprocess, leftovers, one_line, run


def processes_in(folder: Path) -> list[int]:
    """PIDs of the processes whose working folder lies in ``folder`` (Linux /proc)."""
    found = []
    for d in Path("/proc").iterdir():
        if d.name.isdigit():
            try:
                if os.readlink(d / "cwd").startswith(str(folder)):
                    found.append(int(d.name))
            except OSError:
                continue
    return found


@pytest.fixture
def isolated(tmp_path):
    """A working folder, a private TMPDIR and a small blade in the working folder."""
    cwd, tmp = tmp_path / "cwd", tmp_path / "tmp"
    cwd.mkdir()
    tmp.mkdir()
    return cwd, tmp, bar_stl(cwd)


def start_meshing(cwd, tmp, mesh, out):
    """``span`` on the bar with many elements (TetGen runs for seconds); returns the process once
    it has entered the meshing stage (--verbose prints the stages)."""
    p = cli_subprocess(["span", mesh, *BAR, "--rpm", "2500", "--elements", "300000", "--json", out, "--verbose"],
                       cwd, env={"TMPDIR": str(tmp)})
    for line in p.stderr:
        if "filling the solid" in line:
            break
    else:
        pytest.fail(f"the run ended before meshing: {p.wait()}")
    deadline = time.monotonic() + 10
    while not os.listdir(tmp) and time.monotonic() < deadline:  # the mesher's folder is there
        time.sleep(0.02)
    time.sleep(0.2)  # TetGen is at work in its child
    return p


@pytest.mark.parametrize("sig, status, word", [(signal.SIGTERM, EXIT_TERMINATED, "terminated"),
                                                (signal.SIGINT, EXIT_INTERRUPTED, "interrupted")])
def test_sigterm_is_handled_like_ctrl_c_and_leaves_nothing(sig, status, word, isolated):
    cwd, tmp, mesh = isolated
    out = cwd / "span.json"
    p = start_meshing(cwd, tmp, mesh, out)
    assert [n for n in os.listdir(tmp) if n.startswith(f"bladesolid-{p.pid}-")], os.listdir(tmp)
    p.send_signal(sig)
    err = p.stderr.read()
    assert p.wait(timeout=30) == status == 128 + sig
    assert err.strip().splitlines() == [f"bladesolid: {word}" + (" (SIGTERM)" if sig == signal.SIGTERM else "")
                                        + "; no partial output was left"]
    assert not out.exists()
    assert sorted(os.listdir(cwd)) == ["bar.stl"] and os.listdir(tmp) == []
    assert processes_in(tmp) == []  # the tetrahedraliser's child ended with it


def test_sigkill_leaves_a_folder_that_the_next_run_sweeps_once_stale(isolated):
    cwd, tmp, mesh = isolated
    p = start_meshing(cwd, tmp, mesh, cwd / "span.json")
    p.kill()
    p.wait(timeout=30)
    left = [n for n in os.listdir(tmp) if n.startswith(f"bladesolid-{p.pid}-")]
    assert left, "a killed run cannot clean up: its folder stays"
    deadline = time.monotonic() + 10
    while processes_in(tmp) and time.monotonic() < deadline:  # the child dies with its parent
        time.sleep(0.05)
    assert processes_in(tmp) == []
    # a fresh run leaves a young folder alone (its owner might be busy elsewhere) ...
    env = {"TMPDIR": str(tmp)}
    assert cli_subprocess(["materials"], cwd, env).wait(timeout=60) == 0
    assert os.listdir(tmp) == left
    # ... and sweeps it once it is older than the staleness age, its owner gone
    old = time.time() - safefile.STALE_AFTER_S - 60
    os.utime(tmp / left[0], (old, old))
    assert cli_subprocess(["materials"], cwd, env).wait(timeout=60) == 0
    assert os.listdir(tmp) == []


def test_sigterm_in_this_process_ends_main_cleanly_and_restores_the_handler(tmp_path, capsys, monkeypatch):
    from bladesolid import api

    def terminated_while_loading(*a, **k):
        os.kill(os.getpid(), signal.SIGTERM)
        time.sleep(5)  # the handler raises before this ends
        pytest.fail("SIGTERM did not stop the run")

    monkeypatch.setattr(api, "blade_from_job", terminated_while_loading)
    before = signal.getsignal(signal.SIGTERM)
    mesh = bar_stl(tmp_path)
    code, _, err = run(["mass", mesh, *BAR, "--json", tmp_path / "m.json"], capsys)
    assert code == EXIT_TERMINATED and err.count("\n") == 1 and "terminated" in err
    assert signal.getsignal(signal.SIGTERM) is before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bar.stl"]


def test_sigterm_while_writing_leaves_no_half_file(tmp_path, capsys, monkeypatch):
    from bladesolid.cli import Terminated

    def terminated(src, dst):
        raise Terminated()

    mesh = bar_stl(tmp_path)
    monkeypatch.setattr(os, "replace", terminated)
    code, _, err = run(["mass", mesh, *BAR, "--json", tmp_path / "m.json"], capsys)
    assert code == EXIT_TERMINATED and "Traceback" not in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bar.stl"]


# --------------------------------------------------------------------------- sweeping


def dead_pid() -> int:
    p = subprocess.Popen([sys.executable, "-c", "pass"])
    p.wait()
    return p.pid


def test_only_stale_entries_of_gone_processes_on_this_host_are_swept(tmp_path):
    host = safefile.temp_prefix().split("-", 2)[2].rstrip("-")
    gone, live = dead_pid(), os.getppid()
    names = {
        f"bladesolid-{gone}-{host}-aaaa1111": True,            # stale folder of a dead run: swept
        f".bladesolid-{gone}-{host}-bbbb2222.part": True,      # a staged output folder: swept
        f".bladesolid-{gone}-{host}-cccc3333.png": False,      # a file, but young: kept
        f"bladesolid-{live}-{host}-dddd4444": False,           # its owner lives: kept
        f"bladesolid-{gone}-otherhost-eeee5555": False,        # another machine's (shared disk): kept
        "bladesolid-demo": False,                              # not a temporary name: kept
        "tmpzzzz9999": False,                                  # not ours: kept
    }
    old = time.time() - safefile.STALE_AFTER_S - 60
    for name, _ in names.items():
        p = tmp_path / name
        if name.endswith(".png"):
            p.write_bytes(b"x")
            continue
        p.mkdir()
        (p / "inside.npy").write_bytes(b"x")
        os.utime(p, (old, old))
    removed = safefile.sweep_stale(tmp_path)
    assert sorted(removed) == sorted(n for n, swept in names.items() if swept)
    assert sorted(os.listdir(tmp_path)) == sorted(n for n, swept in names.items() if not swept)


def test_writing_an_output_sweeps_its_folder_of_stale_staged_folders(tmp_path, capsys):
    host = safefile.temp_prefix().split("-", 2)[2].rstrip("-")
    stale = tmp_path / f".bladesolid-{dead_pid()}-{host}-ffff6666.part"
    stale.mkdir()
    old = time.time() - safefile.STALE_AFTER_S - 60
    os.utime(stale, (old, old))
    mesh = bar_stl(tmp_path)
    code, _, err = run(["mass", mesh, *BAR, "--json", tmp_path / "m.json"], capsys)
    assert code == 0, err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bar.stl", "m.json"]


# --------------------------------------------------------------------------- the mesher's files


def test_tetgens_files_never_reach_the_working_folder(tmp_path, capsys, monkeypatch):
    # a closed, consistently wound surface whose tip cap folds over itself: TetGen fails on it
    # and would write tetgen-tmpfile_skipped.* into the working folder
    from .test_mesh import fanned_tip_blade

    cwd, tmp = tmp_path / "cwd", tmp_path / "tmp"
    cwd.mkdir()
    tmp.mkdir()
    v, f = fanned_tip_blade()
    trimesh.Trimesh(v, f, process=False).export(cwd / "tip.stl")
    monkeypatch.chdir(cwd)
    monkeypatch.setattr(tempfile, "tempdir", str(tmp))
    code, _, err = run(["mass", "tip.stl", "--units", "mm", "--density", "2810", "--check-elements",
                        "--json", "m.json"], capsys)
    one_line(code, err, "tip.stl", "self-intersecting")
    assert os.listdir(cwd) == ["tip.stl"] and os.listdir(tmp) == []


def test_every_temporary_name_carries_the_prefix_and_its_owner(tmp_path, capsys, monkeypatch):
    made = []
    real_mkstemp, real_mkdtemp = tempfile.mkstemp, tempfile.mkdtemp

    def mkstemp(*a, **k):
        fd, path = real_mkstemp(*a, **k)
        made.append(path)
        return fd, path

    def mkdtemp(*a, **k):
        path = real_mkdtemp(*a, **k)
        made.append(path)
        return path

    monkeypatch.setattr(tempfile, "mkstemp", mkstemp)
    monkeypatch.setattr(tempfile, "mkdtemp", mkdtemp)
    mesh = bar_stl(tmp_path)
    code, _, err = run(["span", mesh, *BAR, "--rpm", "2500", "--stations", "4", "--json", tmp_path / "s.json",
                        "--csv", tmp_path / "s.csv", "--plot", tmp_path / "s.png"], capsys)
    assert code == 0, err
    assert len(made) >= 4  # the mesher's folder, three staged outputs (and the writability probes)
    for path in made:
        assert safefile.owner_of(os.path.basename(path)) == (os.getpid(), safefile.temp_prefix().split("-", 2)[2][:-1])
    assert leftovers(tmp_path) == []
