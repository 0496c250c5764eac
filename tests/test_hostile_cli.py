"""Hostile input through the command line: refused in one line, exit 2, nothing left behind.

The corpus is generated here, in tmp_path. Each bad input goes through the real entry point
(``bladesolid.cli.main``; a few through ``python -m bladesolid`` in a subprocess) with
``--json out.json``. The contract (docs/CONVENTIONS.md §7): exit status 2, ONE line on stderr naming
the file and the problem, no traceback, no output file and no ``*.part`` temporary file left
in the folder, in bounded time and memory.

(``tests/test_hostile_inputs.py`` checks the mesh reader itself on a larger corpus; this file
checks that the whole command turns every refusal into the command-line contract.)
"""

from __future__ import annotations

import json
import os
import struct
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from bladesolid.cli import main

trimesh = pytest.importorskip("trimesh")

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "meshes" / "demo_blade.stl"
SECONDS = 20.0  # bound on any single refusal (common practice, no source)
MASS = ["--units", "mm", "--density", "2810"]


# --------------------------------------------------------------------------- helpers


def run(argv, capsys):
    """(exit status, stdout, stderr, seconds) of ``bladesolid argv`` in this process."""
    capsys.readouterr()
    t0 = time.perf_counter()
    try:
        code = main([str(a) for a in argv])
    except BaseException as exc:  # anything escaping main() would be a traceback for the user
        pytest.fail(f"main({argv!r}) raised {type(exc).__name__}: {exc}")
    dt = time.perf_counter() - t0
    out, err = capsys.readouterr()
    return code, out, err, dt


def leftovers(folder) -> list[str]:
    """Temporary files the atomic writers might leave behind."""
    return sorted(p.name for p in Path(folder).iterdir() if p.name.endswith(".part") or p.name.startswith(".bladesolid-"))


def assert_refused(code, err, dt, named, out_json, fragment=None):
    """The command-line contract for a bad input."""
    assert code == 2, (code, err)
    assert "Traceback" not in err, err
    lines = err.rstrip("\n").split("\n")
    assert len(lines) == 1 and lines[0], f"expected one line on stderr, got {err!r}"
    line = lines[0]
    assert line.startswith("bladesolid: "), line
    assert str(named) in line, f"the message should name {named}: {line}"
    if fragment is not None:
        assert fragment.lower() in line.lower(), line
    assert not Path(out_json).exists(), "an output file was left behind"
    assert leftovers(Path(out_json).parent) == []
    assert dt < SECONDS, dt
    return line


def box(extents=(10.0, 10.0, 10.0), centre=(0.0, 0.0, 0.0)):
    b = trimesh.creation.box(extents=extents)
    b.apply_translation(centre)
    return np.asarray(b.vertices, float), np.asarray(b.faces, np.int64)


def binary_stl(vertices, faces) -> bytes:
    """Binary STL bytes: 80-byte header, uint32 count, 50 bytes per triangle
    (StereoLithography Interface Specification, 3D Systems, 1988 — from memory)."""
    tri = np.asarray(vertices, np.float32)[np.asarray(faces)]
    out = [b"hostile test".ljust(80, b" "), struct.pack("<I", len(tri))]
    for t in tri:
        out.append(struct.pack("<3f", 0.0, 0.0, 0.0) + t.astype("<f4").tobytes() + b"\0\0")
    return b"".join(out)


def ascii_stl(vertices, faces) -> str:
    rows = ["solid hostile"]
    for f in faces:
        rows.append("facet normal 0 0 0\nouter loop")
        rows.extend("vertex " + " ".join(repr(float(x)) for x in vertices[i]) for i in f)
        rows.append("endloop\nendfacet")
    rows.append("endsolid hostile")
    return "\n".join(rows) + "\n"


def mesh_corpus(folder: Path) -> dict[str, tuple[Path, str | None]]:
    """Bad mesh files: name -> (path, a word the message must contain, or None)."""
    v, f = box()
    good = binary_stl(v, f)
    c = {}

    def put(name, data, fragment=None):
        p = folder / name
        p.write_bytes(data if isinstance(data, bytes) else data.encode())
        c[name] = (p, fragment)

    put("empty.stl", b"", "empty")
    put("garbage.stl", "this is not a mesh, only words and numbers 1 2 3\n" * 40)
    put("truncated.stl", good[:-30], "truncated")
    put("liar.stl", good[:80] + struct.pack("<I", 4_000_000_000) + good[84:], "4000000000")
    vn = v.copy()
    vn[0] = np.nan
    put("nan.stl", ascii_stl(vn, f))
    vi = v.copy()
    vi[3, 1] = np.inf
    put("inf.stl", binary_stl(vi, f))
    put("open.stl", binary_stl(v, f[:-1]))  # a box with one face missing
    # two boxes sharing one edge: four faces meet at that edge (non-manifold)
    v2, f2 = box(centre=(10.0, 10.0, 0.0))
    put("nonmanifold.stl", binary_stl(np.vstack([v, v2]), np.vstack([f, f2 + len(v)])))
    v3, f3 = box(centre=(5.0, 0.0, 0.0))  # overlaps the first box by half
    put("overlap.stl", binary_stl(np.vstack([v, v3]), np.vstack([f, f3 + len(v)])))
    rng = np.random.default_rng(20240)
    for ext in (".stl", ".obj", ".ply", ".off", ".msh", ".vtu", ".inp"):
        put(f"random{ext}", rng.integers(0, 256, size=4096, dtype=np.uint8).tobytes())
    return c


@pytest.fixture(scope="module")
def corpus(tmp_path_factory):
    return mesh_corpus(tmp_path_factory.mktemp("corpus"))


MESH_CASES = ["empty.stl", "garbage.stl", "truncated.stl", "liar.stl", "nan.stl", "inf.stl", "open.stl",
              "nonmanifold.stl", "overlap.stl", "random.stl", "random.obj", "random.ply", "random.off",
              "random.msh", "random.vtu", "random.inp"]


# --------------------------------------------------------------------------- bad meshes


@pytest.mark.parametrize("name", MESH_CASES)
@pytest.mark.parametrize("command", ["mass", "loads"])
def test_bad_mesh_is_refused_in_one_line(corpus, name, command, tmp_path, capsys):
    path, fragment = corpus[name]
    out = tmp_path / "out.json"
    argv = [command, path, *MASS, "--json", out] + (["--rpm", "2500"] if command == "loads" else [])
    code, _, err, dt = run(argv, capsys)
    assert_refused(code, err, dt, path.name, out, fragment)


def test_bad_mesh_refused_by_mass_with_elements(corpus, tmp_path, capsys):
    # the element route (tetgen) must not be reached by any of these either
    for name in ("open.stl", "nonmanifold.stl", "overlap.stl", "nan.stl"):
        path, fragment = corpus[name]
        out = tmp_path / "out.json"
        code, _, err, dt = run(["mass", path, *MASS, "--check-elements", "--json", out], capsys)
        assert_refused(code, err, dt, path.name, out, fragment)


def _limited_cli(argv, cwd, limit_bytes=2 << 30, timeout=60):
    """``python -m bladesolid argv`` in a subprocess under an address-space cap (RLIMIT_AS)."""
    code = textwrap.dedent(f"""
        import resource, runpy, sys
        resource.setrlimit(resource.RLIMIT_AS, ({limit_bytes}, {limit_bytes}))
        sys.argv = ["bladesolid"] + {list(map(str, argv))!r}
        runpy.run_module("bladesolid", run_name="__main__")
    """)
    t0 = time.perf_counter()
    r = subprocess.run([sys.executable, "-c", code], cwd=cwd, capture_output=True, text=True, timeout=timeout)
    return r.returncode, r.stdout, r.stderr, time.perf_counter() - t0


def test_four_billion_triangle_claim_in_a_2gb_process(corpus, tmp_path):
    # 4e9 triangles would be 200 GB of binary STL; a reader that believes the header dies
    # under a 2 GB address-space cap (MemoryError / killed) instead of exiting 2 quickly.
    path, fragment = corpus["liar.stl"]
    out = tmp_path / "out.json"
    code, _, err, dt = _limited_cli(["mass", path, *MASS, "--json", out], tmp_path)
    assert_refused(code, err, dt, path.name, out, fragment)
    assert dt < 10.0, dt


def test_garbage_through_python_dash_m(corpus, tmp_path):
    path, _ = corpus["garbage.stl"]
    out = tmp_path / "out.json"
    t0 = time.perf_counter()
    r = subprocess.run([sys.executable, "-m", "bladesolid", "loads", str(path), *MASS, "--rpm", "2500",
                        "--json", str(out)], cwd=tmp_path, capture_output=True, text=True, timeout=60)
    assert_refused(r.returncode, r.stderr, time.perf_counter() - t0, path.name, out)


def test_a_valid_mesh_still_passes_the_same_route(tmp_path, capsys):
    # control: the harness above is not refusing everything
    v, f = box()
    p = tmp_path / "box.stl"
    p.write_bytes(binary_stl(v, f))
    out = tmp_path / "out.json"
    code, _, err, _ = run(["mass", p, *MASS, "--json", out], capsys)
    assert code == 0, err
    # 10 mm cube of 2810 kg/m^3: 1e-6 m^3 * 2810 = 2.81 g (arithmetic)
    assert json.loads(out.read_text())["mass_properties"]["mass_kg"] == pytest.approx(2.81e-3, rel=1e-6)
    assert leftovers(tmp_path) == []


# --------------------------------------------------------------------------- bad jobs


def job_text(**keys) -> str:
    """A TOML job pointing at the shipped demo blade, with keys added/replaced/removed (None)."""
    base = {"mesh": json.dumps(str(DEMO)), "units": '"mm"', "density": '"2810 kg/m^3"', "rpm": "2500"}
    for k, v in keys.items():
        if v is None:
            base.pop(k, None)
        else:
            base[k] = v
    return "".join(f"{k} = {v}\n" for k, v in base.items())


BAD_JOBS = {
    # wrong types
    "rpm_string": (job_text(rpm='"fast"'), "rpm"),
    "units_number": (job_text(units="3"), "units"),
    "mesh_list": (job_text(mesh=json.dumps([str(DEMO)])), "mesh"),
    "blades_string": (job_text(blades='"three"'), "blades"),
    "density_bool": (job_text(density="true"), "density"),
    "density_unit": (job_text(density='"2810 furlongs"'), "density"),
    "pitch_axis_short": (job_text(pitch_axis="[0, 1]"), "pitch_axis"),
    "pitch_axis_zero": (job_text(pitch_axis="[0, 0, 0]"), None),
    "sweep_backwards": (job_text(sweep='"90:-10:1"'), "sweep"),
    "sweep_huge": (job_text(sweep='"0:90:1e-9"'), "sweep"),
    "operating_point_table_rpm": (job_text(rpm=None) + "[[operating_point]]\nrpm = {a = 1}\n", "rpm"),
    "negative_rpm": (job_text(rpm="-100"), "rpm"),
    "stations_zero": (job_text(stations="0"), "stations"),
    # unknown keys
    "unknown_key": (job_text(colour='"red"'), "colour"),
    "unknown_op_key": (job_text(rpm=None) + "[[operating_point]]\nrpm = 2500\nspeed = 3\n", "speed"),
    # missing required keys
    "missing_mesh": (job_text(mesh=None), "mesh"),
    "missing_units": (job_text(units=None), "units"),
    "missing_density": (job_text(density=None), "density"),
    "missing_op_rpm": (job_text(rpm=None) + "[[operating_point]]\nname = \"x\"\n", "rpm"),
    # not TOML at all
    "not_toml": ("mesh = \n", "TOML"),
    "binary": ("\x00\x01\x02\xff garbage", None),
    # hostile strings where a file is expected
    "traversal_not_a_mesh": (job_text(mesh='"../../../../../../../../etc/passwd"'), None, "etc/passwd"),
    "traversal_missing": (job_text(mesh='"../../../../../../../../etc/no-such-blade.stl"'), "not found",
                          "no-such-blade.stl"),
    "long_mesh_path": (job_text(mesh=json.dumps("a" * 100_000 + ".stl")), None, "aaaaaaaa"),
    "long_unknown_key": (job_text(**{"k" * 100_000: "1"}), "unknown key"),
    "nul_in_mesh": (job_text(mesh='"demo\\u0000.stl"'), None, "demo"),
}


@pytest.mark.parametrize("case", sorted(BAD_JOBS))
def test_bad_job_is_refused_in_one_line(case, tmp_path, capsys):
    text, fragment, *named = BAD_JOBS[case]
    job = tmp_path / f"{case}.toml"
    job.write_bytes(text.encode("utf-8", "surrogatepass"))
    out = tmp_path / "out.json"
    code, _, err, dt = run(["loads", job, "--json", out], capsys)
    # the message names the job file, or the mesh file the job points at
    assert_refused(code, err, dt, named[0] if named else job.name, out, fragment)


def test_bad_job_through_python_dash_m(tmp_path):
    job = tmp_path / "bad.toml"
    job.write_text(job_text(colour='"red"'))
    out = tmp_path / "out.json"
    t0 = time.perf_counter()
    r = subprocess.run([sys.executable, "-m", "bladesolid", "loads", str(job), "--json", str(out)],
                       cwd=tmp_path, capture_output=True, text=True, timeout=60)
    assert_refused(r.returncode, r.stderr, time.perf_counter() - t0, job.name, out, "colour")


def test_long_free_text_name_is_carried_exactly(tmp_path, capsys):
    # a name is free text: a long one is not an error, it reaches the JSON unchanged
    name = "BW-3 " + "x" * 20_000
    job = tmp_path / "long.toml"
    job.write_text(job_text(name=json.dumps(name)))
    out = tmp_path / "out.json"
    code, _, err, dt = run(["loads", job, "--json", out], capsys)
    assert code == 0, err
    assert json.loads(out.read_text())["input"]["name"] == name
    assert dt < SECONDS


# Control characters and console markup in user strings. Their bytes must not reach the
# terminal raw (ESC sequences can clear or rewrite the screen; a NUL or CR can hide text).
HOSTILE_NAMES = {
    "escape": "BW-3 \x1b[2J\x1b[31mred\x1b[0m",
    "nul_bel_cr": "BW-3\x00\x07\rhidden",
    "markup_close": "BW-3 [/bold] [/]",
    "markup_open": "BW-3 [link=file:///etc/passwd]click[/link] [red]",
}
CONTROL = {chr(c) for c in range(32) if chr(c) != "\n"} | {"\x7f"}


@pytest.mark.parametrize("case", sorted(HOSTILE_NAMES))
def test_hostile_name_is_accepted_and_printed_safely(case, tmp_path, capsys):
    name = HOSTILE_NAMES[case]
    job = tmp_path / "hostile.toml"
    job.write_text(job_text(name=json.dumps(name)))
    out = tmp_path / "out.json"
    code, stdout, err, _ = run(["loads", job, "--json", out], capsys)
    assert code == 0, err
    assert json.loads(out.read_text())["input"]["name"] == name  # the JSON keeps it exactly (escaped)
    assert not (CONTROL & set(stdout + err)), repr([c for c in stdout + err if c in CONTROL][:5])
    if not (CONTROL & set(name)):
        assert name in stdout, "the name must be printed as written, not read as console markup"


def test_control_characters_in_a_path_stay_on_one_printable_line(tmp_path, capsys):
    job = tmp_path / "ctrl.toml"
    job.write_text(job_text(mesh='"demo\\u001b[31m\\u0007\\r\\nblade.stl"'))
    out = tmp_path / "out.json"
    code, _, err, dt = run(["loads", job, "--json", out], capsys)
    assert_refused(code, err, dt, "blade.stl", out, "not found")
    assert not (CONTROL & set(err)), repr(err)


@pytest.mark.parametrize("case", ["long_mesh_path", "long_unknown_key"])
def test_messages_about_long_strings_are_bounded(case, tmp_path, capsys):
    text = BAD_JOBS[case][0]
    job = tmp_path / f"{case}.toml"
    job.write_text(text)
    code, _, err, _ = run(["loads", job], capsys)
    assert code == 2
    assert len(err) < 5000, len(err)  # PATH_MAX is 4096 on Linux (from memory)


def _check_command_available() -> bool:
    from bladesolid.cli import build_parser

    try:
        from bladesolid import review  # noqa: F401
    except ImportError:
        return False
    sub = next(a for a in build_parser()._actions if a.dest == "command")
    return "check" in sub.choices and hasattr(review, "check")


@pytest.mark.slow
def test_hostile_name_is_escaped_in_the_html_report(tmp_path, capsys):
    if not _check_command_available():
        pytest.skip("the `check` command (bladesolid.review.check) is not wired into the CLI yet")
    name = "<script>alert(1)</script> & \"quoted\" 'single'"
    job = tmp_path / "xss.toml"
    job.write_text(job_text(name=json.dumps(name), stations="4"))
    out = tmp_path / "review"
    code, _, err, _ = run(["check", job, "--out", out], capsys)
    assert code == 0, err
    html = (out / "report.html").read_text(encoding="utf-8")
    assert "<script" not in html.lower()  # no script element at all (the page needs none)
    assert "&lt;script&gt;alert(1)&lt;/script&gt; &amp; &quot;quoted&quot; &#x27;single&#x27;" in html
    assert json.loads((out / "report.json").read_text())["input"]["name"] == name
    assert leftovers(tmp_path) == []


# --------------------------------------------------------------------------- fuzzing


def _seed_stl() -> dict[str, bytes]:
    s = trimesh.creation.icosphere(subdivisions=1, radius=10.0)
    return {"bin.stl": binary_stl(s.vertices, s.faces), "ascii.stl": ascii_stl(s.vertices, s.faces).encode()}


SEEDS = _seed_stl()


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    name=st.sampled_from(sorted(SEEDS)),
    edits=st.lists(st.tuples(st.floats(0, 1, exclude_max=True), st.integers(0, 255)), max_size=8),
    cut=st.one_of(st.none(), st.floats(0, 1)),
    command=st.sampled_from(["mass", "loads"]),
)
def test_fuzz_cli_on_mutated_valid_stl(name, edits, cut, command, capsys):
    data = bytearray(SEEDS[name])
    for where, byte in edits:
        data[int(where * len(data))] = byte
    if cut is not None:
        data = data[: int(cut * len(data))]
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / f"mutated_{name}"
        path.write_bytes(bytes(data))
        out = Path(d) / "out.json"
        argv = [command, path, *MASS, "--json", out] + (["--rpm", "2500"] if command == "loads" else [])
        code, _, err, dt = run(argv, capsys)
        assert code in (0, 2), (code, err)
        assert "Traceback" not in err
        if code == 2:
            assert_refused(code, err, dt, path.name, out)
        else:
            assert json.loads(out.read_text())["mass_properties"]["mass_kg"] > 0
        assert leftovers(d) == []
