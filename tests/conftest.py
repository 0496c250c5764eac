"""Shared fixtures: the shipped demo blade (metres) and small analytic solids."""

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
