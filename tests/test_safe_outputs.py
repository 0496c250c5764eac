"""Safe outputs: every file is written atomically, nothing existing is overwritten without
--force, and an interrupted write leaves neither a half file nor a temporary file.

docs/CONVENTIONS.md §7: "no partial output file left behind". The writers are
``report.atomic_write_bytes`` / ``atomic_write_text`` (temporary file in the same folder, then
``os.replace``, which is atomic on POSIX — rename(2), from memory) and ``report.staged_folder``
(a temporary sibling folder moved into place at the end).
"""

from __future__ import annotations

import errno
import json
import os
import stat
from pathlib import Path

import pytest

from bladesolid import CAUTION, report
from bladesolid.cli import main
from bladesolid.errors import InputError, OutputExistsError

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "meshes" / "demo_blade.stl"
MASS = ["mass", str(DEMO), "--units", "mm", "--density", "2810"]
LOADS = ["loads", str(DEMO), "--units", "mm", "--density", "2810", "--rpm", "2500"]
SPAN = ["span", str(DEMO), "--units", "mm", "--density", "2810", "--rpm", "2500", "--stations", "4"]


def temporaries(folder) -> list[str]:
    """Anything the writers' temporary names could have left."""
    return sorted(p.name for p in Path(folder).iterdir()
                  if p.name.startswith(".") or p.name.endswith((".part", ".old")))


@pytest.fixture
def umask022():
    old = os.umask(0o022)
    yield 0o022
    os.umask(old)


def run(argv, capsys):
    capsys.readouterr()
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


# --------------------------------------------------------------------------- atomic files


def test_atomic_write_goes_through_a_temporary_file_in_the_same_folder(tmp_path, monkeypatch):
    seen = []
    real = os.replace

    def spy(src, dst):
        # at the moment of the rename: the data is complete in the temporary file and the
        # target does not exist yet (readers never see a half file)
        seen.append((Path(src), Path(dst), Path(src).read_bytes(), Path(dst).exists()))
        return real(src, dst)

    monkeypatch.setattr(os, "replace", spy)
    data = b"x" * 1_000_003
    target = tmp_path / "out.json"
    report.atomic_write_bytes(target, data)
    (src, dst, content, existed), = seen
    assert dst == target and src.parent == tmp_path and src.name.endswith(".part")
    assert content == data and not existed
    assert target.read_bytes() == data
    assert temporaries(tmp_path) == []


def test_atomic_file_gets_ordinary_permissions(tmp_path, umask022):
    # a new file is 0o666 & ~umask (POSIX open(2) with O_CREAT, from memory), not the
    # owner-only 0o600 that mkstemp gives the temporary file
    p = report.atomic_write_text(tmp_path / "r.json", "{}\n")
    assert stat.S_IMODE(os.stat(p).st_mode) == 0o644


def test_staged_file_gets_ordinary_permissions(tmp_path, umask022):
    # views write their PNG/VTU into a temporary name they reopen; the result must still be an
    # ordinary 0o644 file, like any other output
    from bladesolid.safefile import staged_file

    target = tmp_path / "render.png"
    with staged_file(target) as tmp:
        with open(tmp, "wb") as fh:
            fh.write(b"\x89PNG")
    assert stat.S_IMODE(os.stat(target).st_mode) == 0o644
    assert temporaries(tmp_path) == []


def test_existing_file_is_kept_without_force_and_replaced_with_it(tmp_path):
    target = tmp_path / "r.json"
    target.write_bytes(b"precious")
    with pytest.raises(OutputExistsError) as err:
        report.atomic_write_text(target, "new")
    assert "--force" in str(err.value) and str(target) in str(err.value)
    assert target.read_bytes() == b"precious"
    report.atomic_write_text(target, "new", force=True)
    assert target.read_text() == "new"
    assert temporaries(tmp_path) == []


def test_missing_folder_is_named(tmp_path):
    with pytest.raises(InputError, match="does not exist"):
        report.atomic_write_text(tmp_path / "nope" / "r.json", "x")


@pytest.mark.parametrize("failure", [KeyboardInterrupt, OSError(errno.ENOSPC, "No space left on device")])
@pytest.mark.parametrize("where", ["fsync", "replace"])
def test_interrupted_write_leaves_nothing(tmp_path, monkeypatch, failure, where):
    def boom(*a, **k):
        raise failure

    monkeypatch.setattr(os, where, boom)
    target = tmp_path / "r.json"
    # an OS failure becomes a one-line InputError naming the file; Ctrl-C stays Ctrl-C
    expected = InputError if isinstance(failure, OSError) else failure
    with pytest.raises(expected):
        report.atomic_write_bytes(target, b"y" * 100_000)
    assert not target.exists()
    assert temporaries(tmp_path) == []


def test_interrupted_overwrite_keeps_the_old_file(tmp_path, monkeypatch):
    target = tmp_path / "r.json"
    target.write_bytes(b"old report")
    monkeypatch.setattr(os, "fsync", lambda fd: (_ for _ in ()).throw(KeyboardInterrupt()))
    with pytest.raises(KeyboardInterrupt):
        report.atomic_write_bytes(target, b"new report", force=True)
    assert target.read_bytes() == b"old report"
    assert temporaries(tmp_path) == []


# --------------------------------------------------------------------------- staged folders


def test_staged_folder_appears_whole(tmp_path, umask022):
    out = tmp_path / "review"
    with report.staged_folder(out) as tmp:
        assert Path(tmp).parent == tmp_path and not out.exists()
        for i in range(5):
            (Path(tmp) / f"f{i}.csv").write_text(str(i))
        assert not out.exists()  # nothing at the final name until the block ends
    assert sorted(p.name for p in out.iterdir()) == ["CAUTION.txt"] + [f"f{i}.csv" for i in range(5)]
    assert CAUTION in (out / "CAUTION.txt").read_text()
    assert stat.S_IMODE(os.stat(out / "CAUTION.txt").st_mode) == 0o644
    assert stat.S_IMODE(os.stat(out).st_mode) == 0o755  # an ordinary folder, not mkdtemp's 0o700
    assert temporaries(tmp_path) == []


def _half_written(tmp, exc):
    for i in range(3):
        (Path(tmp) / f"f{i}.png").write_bytes(b"\x89PNG" * 100)
    (Path(tmp) / "report.json").write_text('{"schema": "bladesolid.rep')  # half a file
    raise exc


@pytest.mark.parametrize("exc", [KeyboardInterrupt(), RuntimeError("renderer crashed")])
def test_interrupted_staged_folder_leaves_nothing(tmp_path, exc):
    out = tmp_path / "review"
    with pytest.raises(type(exc)):
        with report.staged_folder(out) as tmp:
            _half_written(tmp, exc)
    assert not out.exists()
    assert temporaries(tmp_path) == []


def test_interrupted_staged_folder_keeps_the_old_review(tmp_path):
    out = tmp_path / "review"
    out.mkdir()
    (out / "report.json").write_text("old")
    with pytest.raises(KeyboardInterrupt):
        with report.staged_folder(out, force=True) as tmp:
            _half_written(tmp, KeyboardInterrupt())
    assert [p.name for p in out.iterdir()] == ["report.json"]
    assert (out / "report.json").read_text() == "old"
    assert temporaries(tmp_path) == []


def test_staged_folder_refuses_and_replaces(tmp_path):
    out = tmp_path / "review"
    out.mkdir()
    (out / "old.txt").write_text("old")
    with pytest.raises(OutputExistsError):
        with report.staged_folder(out):
            pytest.fail("must refuse before yielding")
    assert (out / "old.txt").read_text() == "old"
    with report.staged_folder(out, force=True) as tmp:
        (Path(tmp) / "new.txt").write_text("new")
    assert sorted(p.name for p in out.iterdir()) == ["CAUTION.txt", "new.txt"]  # replaced whole, not merged
    assert temporaries(tmp_path) == []
    empty = tmp_path / "empty"
    empty.mkdir()
    with report.staged_folder(empty) as tmp:  # an empty folder is not "existing output"
        (Path(tmp) / "a").write_text("a")
    assert (empty / "a").exists()
    afile = tmp_path / "afile"
    afile.write_text("x")
    with pytest.raises(InputError, match="not a folder"):
        with report.staged_folder(afile, force=True):
            pass


# --------------------------------------------------------------------------- the commands


def _no_work(monkeypatch):
    """Make loading a blade fail loudly: refusing an output must happen before any work."""
    from bladesolid import api

    def refuse(*a, **k):
        raise AssertionError("the blade was loaded although the output would be refused")

    monkeypatch.setattr(api, "blade_from_job", refuse)
    monkeypatch.setattr(api, "load_blade", refuse)


@pytest.mark.parametrize("argv,flag", [(MASS, "--json"), (LOADS, "--json"),
                                       (SPAN, "--json"), (SPAN, "--csv"), (SPAN, "--plot")])
def test_existing_output_is_not_overwritten(argv, flag, tmp_path, capsys, monkeypatch):
    target = tmp_path / ("out.png" if flag == "--plot" else "out.csv" if flag == "--csv" else "out.json")
    target.write_bytes(b"precious")
    before = target.stat().st_mtime_ns
    _no_work(monkeypatch)
    code, _, err = run([*argv, flag, target], capsys)
    assert code == 2
    assert err.count("\n") == 1 and str(target) in err and "--force" in err
    assert target.read_bytes() == b"precious" and target.stat().st_mtime_ns == before
    assert temporaries(tmp_path) == []


@pytest.mark.parametrize("argv,flag", [(MASS, "--json"), (LOADS, "--json"), (SPAN, "--csv")])
def test_force_overwrites(argv, flag, tmp_path, capsys, umask022):
    target = tmp_path / ("out.csv" if flag == "--csv" else "out.json")
    target.write_bytes(b"old")
    code, _, err = run([*argv, flag, target, "--force"], capsys)
    assert code == 0, err
    text = target.read_text()
    if flag == "--json":
        assert json.loads(text)["schema"] == "bladesolid.report/1"
    else:
        assert text.splitlines()[0] == "# " + CAUTION and text.splitlines()[1].startswith("radius")
    assert stat.S_IMODE(target.stat().st_mode) == 0o644
    assert temporaries(tmp_path) == []


def test_span_writes_all_three_outputs_atomically(tmp_path, capsys, monkeypatch):
    written = []
    real = os.replace
    monkeypatch.setattr(os, "replace", lambda s, d: (written.append((Path(s).name, Path(d).name)), real(s, d))[1])
    paths = [tmp_path / "s.json", tmp_path / "s.csv", tmp_path / "s.png"]
    code, _, err = run([*SPAN, "--json", paths[0], "--csv", paths[1], "--plot", paths[2]], capsys)
    assert code == 0, err
    assert sorted(d for _, d in written) == ["s.csv", "s.json", "s.png"]
    assert all(s.startswith(".bladesolid-") for s, _ in written)
    assert paths[2].read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec, from memory)
    assert temporaries(tmp_path) == []


@pytest.mark.parametrize("argv", [MASS, LOADS])
def test_ctrl_c_during_the_write_leaves_nothing(argv, tmp_path, capsys, monkeypatch):
    def interrupted(src, dst):
        raise KeyboardInterrupt

    monkeypatch.setattr(os, "replace", interrupted)
    target = tmp_path / "out.json"
    code, _, err = run([*argv, "--json", target], capsys)
    assert code == 130 and "interrupted" in err and "Traceback" not in err
    assert not target.exists()
    assert temporaries(tmp_path) == []


def test_disk_full_is_one_line_exit_2(tmp_path, capsys, monkeypatch):
    def full(fd):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(os, "fsync", full)
    target = tmp_path / "out.json"
    try:
        code, _, err = run([*MASS, "--json", target], capsys)
    except OSError as exc:
        pytest.fail(f"OSError escaped main(): {exc}")
    assert code == 2 and err.count("\n") == 1 and "out.json" in err
    assert not target.exists() and temporaries(tmp_path) == []


def test_same_path_for_two_outputs_is_refused_before_writing(tmp_path, capsys):
    target = tmp_path / "s.out"
    code, _, err = run([*SPAN, "--json", target, "--csv", target], capsys)
    assert code == 2 and err.count("\n") == 1
    assert not target.exists()


@pytest.mark.slow
def test_check_interrupted_while_writing_leaves_no_folder(tmp_path, capsys, monkeypatch):
    job = tmp_path / "job.toml"
    job.write_text(f'mesh = {json.dumps(str(DEMO))}\nunits = "mm"\ndensity = "2810 kg/m^3"\nrpm = 2500\n'
                   'stations = 4\n')
    real_open = open
    count = {"n": 0}

    def flaky_open(path, mode="r", *a, **k):
        # let a few files of the staged folder be written, then Ctrl-C in the middle
        if ".part" in os.fspath(path) and "w" in mode:
            count["n"] += 1
            if count["n"] == 3:
                raise KeyboardInterrupt
        return real_open(path, mode, *a, **k)

    import builtins

    monkeypatch.setattr(builtins, "open", flaky_open)
    out = tmp_path / "review"
    code, _, err = run(["check", job, "--out", out], capsys)
    monkeypatch.undo()
    assert code == 130, err
    assert count["n"] == 3, "the interruption did not happen inside the staged folder"
    assert not out.exists()
    assert temporaries(tmp_path) == []
