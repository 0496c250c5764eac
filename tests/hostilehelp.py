"""Small blades and the command-line contract shared by the tests/test_hostile_*.py files.

The contract (docs/CONVENTIONS.md §7): on exit status 2 exactly one line on stderr naming the
key, flag or file and the problem; no traceback; no output and no temporary name left behind.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import trimesh

from .test_cli import run  # noqa: F401 - (exit status, stdout, stderr) of bladesolid argv, in this process

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "meshes" / "demo_blade.stl"

#: A blade-like bar: 40 x 600 x 10 mm, from r = 100 mm to 700 mm along the pitch axis (y).
BAR_EXTENTS = (40.0, 600.0, 10.0)
BAR_CENTRE = (0.0, 400.0, 0.0)
BAR_TIP_M = 0.7
BAR = ["--units", "mm", "--density", "2810"]


def bar_stl(folder: Path, name: str = "bar.stl") -> Path:
    b = trimesh.creation.box(BAR_EXTENTS)
    b.apply_translation(BAR_CENTRE)
    p = Path(folder) / name
    b.export(p)
    return p


def job_file(folder: Path, mesh: Path, name: str = "job.toml", **keys) -> Path:
    """A TOML job on ``mesh`` (mm, 2810 kg/m^3, 2500 rpm) with keys added (TOML text values)
    or removed (None)."""
    base = {"mesh": json.dumps(str(mesh)), "units": '"mm"', "density": '"2810 kg/m^3"', "rpm": "2500"}
    tables = keys.pop("tables", "")
    for k, v in keys.items():
        if v is None:
            base.pop(k, None)
        else:
            base[k] = v
    p = Path(folder) / name
    p.write_text("".join(f"{k} = {v}\n" for k, v in base.items()) + tables)
    return p


def leftovers(folder) -> list[str]:
    """Temporary names (and TetGen's files) left in ``folder``."""
    return sorted(p.name for p in Path(folder).iterdir()
                  if p.name.endswith((".part", ".old")) or p.name.startswith((".bladesolid-", "bladesolid-",
                                                                                "tetgen-tmpfile", "tmp")))


def one_line(code, err, named, fragment=None) -> str:
    """Exit 2, one line on stderr naming ``named`` (and containing ``fragment``), no traceback."""
    assert code == 2, (code, err)
    assert "Traceback" not in err and "RuntimeWarning" not in err, err
    lines = err.rstrip("\n").split("\n")
    assert len(lines) == 1 and lines[0].startswith("bladesolid: "), f"expected one line on stderr, got {err!r}"
    assert str(named) in lines[0], f"the message should name {named}: {lines[0]}"
    if fragment is not None:
        assert fragment.lower() in lines[0].lower(), lines[0]
    return lines[0]


def no_work(monkeypatch):
    """Loading or meshing a blade fails the test: a refusal must come before any of it."""
    from bladesolid import api, mesh

    def refuse(*a, **k):
        raise AssertionError("work was done although the input would be refused")

    monkeypatch.setattr(api, "blade_from_job", refuse)
    monkeypatch.setattr(api, "load_blade", refuse)
    monkeypatch.setattr(mesh, "mass_elements", refuse)


def no_meshing(monkeypatch):
    """Meshing fails the test (loading the surface is allowed): refused before the costly part."""
    from bladesolid import mesh

    def refuse(*a, **k):
        raise AssertionError("the solid was meshed although the request would be refused")

    monkeypatch.setattr(mesh, "mass_elements", refuse)


def cli_subprocess(argv, cwd, env=None, **kw):
    """``python -m bladesolid argv`` as a process (its own signals, working folder, TMPDIR)."""
    full = dict(os.environ, **(env or {}))
    full["PYTHONPATH"] = str(REPO) + (os.pathsep + full["PYTHONPATH"] if full.get("PYTHONPATH") else "")
    return subprocess.Popen([sys.executable, "-m", "bladesolid", *map(str, argv)], cwd=cwd, env=full,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, **kw)
