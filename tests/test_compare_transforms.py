"""Rigid transforms and transform files (bladesolid.compare.transforms).

Reference: the same 4x4 matrix written by the test in every accepted file form.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from bladesolid import compare
from bladesolid.errors import InputError
from bladesolid.frame import rotation_about


def test_transform_files(tmp_path):
    T = compare.rigid_matrix(rotation_about([1, 2, 2], 0.3), [10.0, -20.0, 30.0])  # mm
    expect = T.copy()
    expect[:3, 3] *= 1e-3
    (tmp_path / "a.json").write_text(json.dumps({"transform": T.tolist(), "units": "mm"}))
    (tmp_path / "b.toml").write_text("units = \"mm\"\ntransform = " + json.dumps(T.tolist()) + "\n")
    (tmp_path / "c.txt").write_text("# units: mm\n" + "\n".join(" ".join(repr(float(x)) for x in r) for r in T))
    (tmp_path / "d.json").write_text(json.dumps({"comparison": {"registration": {"transform": expect.tolist()}}}))
    for name in ("a.json", "b.toml", "c.txt", "d.json"):
        assert np.allclose(compare.read_transform(tmp_path / name), expect, atol=1e-15), name
    assert np.array_equal(compare.read_transform("identity"), np.eye(4))
    bad = {"scaled.json": json.dumps((2 * np.eye(4)).tolist()).replace("2.0]]", "1.0]]"),
           "mirror.json": json.dumps(np.diag([1.0, 1.0, -1.0, 1.0]).tolist()),
           "short.txt": "1 0 0\n0 1 0\n0 0 1\n",
           "keys.toml": "matrix = [[1.0]]\n"}
    for name, text in bad.items():
        (tmp_path / name).write_text(text)
        with pytest.raises(InputError) as exc:
            compare.read_transform(tmp_path / name)
        assert name in str(exc.value) and "\n" not in str(exc.value)
    with pytest.raises(InputError, match="not found"):
        compare.read_transform(tmp_path / "missing.json")
