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
