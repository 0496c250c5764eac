"""Figures and files shared by the tests of bladesolid.compare and of set matching.

External references used by those tests:
* meshes/demo_variants.json — the demo generator's known rigid transform of the scanned
  variant and the variants' volumes (computed there independently of bladesolid's code);
* brute force over every assignment for the set matching.
"""

from __future__ import annotations

import itertools
import json
import math
import os

import numpy as np

from bladesolid.frame import rotation_about

from .conftest import DEMO_RHO, DEMO_RPM, MESHES

RHO = DEMO_RHO  # kg/m^3, the demo density (demo_variants.json "density_kg_m3")
RPM = DEMO_RPM
OMEGA = RPM * 2 * math.pi / 60


def variants():
    with open(MESHES / "demo_variants.json", encoding="utf-8") as fh:
        data = json.load(fh)
    return {v["file"]: v for v in data["variants"]}


def all_imbalances(vectors, ctms=None):
    """Imbalance of every one of the N! assignments (no symmetry used)."""
    V = np.asarray(vectors)
    n = len(V)
    out = []
    for perm in itertools.permutations(range(n)):
        s = np.zeros(3)
        for i, j in enumerate(perm):
            R = rotation_about([0, 0, 1], 2 * math.pi * i / n)
            s += R @ V[j]
        out.append(np.linalg.norm(s))
    return np.array(out)


def synthetic(n, seed):
    rng = np.random.default_rng(seed)
    # static moment vectors in the plane of rotation: mostly outboard (y), a little chordwise (x)
    V = np.column_stack([rng.normal(0, 0.004, n), 2.84 + rng.normal(0, 0.01, n), np.zeros(n)])
    return V, -245.0 + rng.normal(0, 0.5, n)


def report_file(path, mass, cg, ctm, pull=190000.0, rpm=2500.0, name=None):
    cg = np.asarray(cg, float)
    data = {"schema": "bladesolid.report/1", "input": {"name": name or os.path.basename(path)},
            "mass_properties": {"mass_kg": mass, "cg_m": cg.tolist(),
                                "static_moment_kgm": float(mass * np.linalg.norm(cg[:2]))},
            "operating_points": [{"rpm": rpm, "ctm_Nm": ctm, "radial_pull_N": pull}]}
    path.write_text(json.dumps(data))
    return path
