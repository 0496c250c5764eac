"""Shared fixtures: the shipped demo blade (metres), its variants, and their comparisons.

The comparisons of the demo variants with the demo blade are computed once per session and
shared by the tests of the compare package (registration, deviation, limits, comparison).
"""

import os
from pathlib import Path

import numpy as np
import pytest

os.environ.setdefault("PYVISTA_OFF_SCREEN", "true")

REPO = Path(__file__).resolve().parents[1]
MESHES = REPO / "meshes"


@pytest.fixture(scope="session")
def demo_path():
    return MESHES / "demo_blade.stl"


@pytest.fixture(scope="session")
def demo_mesh(demo_path):
    """The demo blade as a trimesh in metres (modelled in the hub frame)."""
    import trimesh

    m = trimesh.load(demo_path, force="mesh")
    m.apply_scale(1e-3)
    assert m.is_watertight
    return m


DEMO_RHO = 2810.0  # kg/m^3, the demo density (demo_variants.json "density_kg_m3")
DEMO_RPM = 2500.0


def demo_surfaces(name):
    """The bodies of a shipped demo mesh as [(vertices m, faces)], in the file's own frame."""
    from bladesolid.io import read_mesh

    return [(b.vertices, b.faces) for b in read_mesh(MESHES / name, "mm").bodies]


@pytest.fixture(scope="session")
def reference():
    """The demo blade, surface route (no elements), as the nominal of the comparisons."""
    from bladesolid import api

    return api.load_blade(MESHES / "demo_blade.stl", "mm", [f"{DEMO_RHO} kg/m^3"], elements=False)


@pytest.fixture(scope="session")
def scanned(reference):
    """The scanned leading-edge blend (scanner frame), registered automatically."""
    from bladesolid import compare

    return compare.compare_blade(reference, demo_surfaces("demo_blade_le_blend_scanned.stl"), DEMO_RPM,
                                 repaired_source="demo_blade_le_blend_scanned.stl")


@pytest.fixture(scope="session")
def blend_direct(reference):
    """The same blend, un-moved, already in the reference frame (identity transform)."""
    from bladesolid import compare

    return compare.compare_blade(reference, demo_surfaces("demo_blade_le_blend.stl"), DEMO_RPM, transform=np.eye(4))


@pytest.fixture(scope="session")
def dressed(reference):
    """The blade with its tip dressed back 12 mm, in the reference frame."""
    from bladesolid import compare

    return compare.compare_blade(reference, demo_surfaces("demo_blade_tip_dressed.stl"), DEMO_RPM, transform=np.eye(4))
# --- pictures --------------------------------------------------------------------------------


@pytest.fixture(scope="session")
def footer_line():
    """Measures the caution footer of a saved picture (see :func:`_footer_line`)."""
    return _footer_line


def _footer_line(path):
    """(ink height of the picture's bottom line of text in px, the PNG's dpi, the number of
    separate marks along it: letters and words, not a bar)."""
    from PIL import Image

    with Image.open(path) as im:
        dpi = float(im.info["dpi"][1])
        img = np.asarray(im.convert("RGB")).astype(int)
    ink = np.abs(img - img[-1, -1]).sum(axis=-1) > 120
    rows = np.nonzero(ink.any(axis=1))[0]
    last = first = rows[-1]
    while first > 0 and ink[first - 1].any():
        first -= 1
    marks = np.diff(ink[first:last + 1].any(axis=0).astype(int)) == 1
    return last - first + 1, dpi, int(marks.sum())
