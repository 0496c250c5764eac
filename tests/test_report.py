"""The JSON report assembly of bladesolid.report: the one header, the table of load figures, JSON types.

References: the inch, the pound and the pound-force (exact definitions, NIST SP 811);
docs/CONVENTIONS.md §6 (the report's head keys).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from bladesolid import CAUTION, __version__, report


def test_every_report_starts_with_the_same_head():
    for data in (report.header(input={"name": "x"}, warnings=[]), report.header("bladesolid.batch/1", rows=[])):
        assert list(data)[:3] == ["schema", "tool", "caution"]
        assert data["tool"] == {"name": "bladesolid", "version": __version__} and data["caution"] == CAUTION
    assert report.header()["schema"] == report.SCHEMA == "bladesolid.report/1"
    assert list(report.header(input={}, warnings=[], match={}))[3:] == ["input", "warnings", "match"]


def test_load_figures_in_si_and_us_units():
    row = {"name": "take-off", "rpm": 2500.0, "blade_angle_deg": 25.0, "radial_pull_N": 4448.2216152605,
           "cf_N": np.array([1.0, 4448.2216152605, 0.0]), "ctm_Nm": -0.112984829027616,
           "feathering_inertia_kgm2": 0.45359237 * 0.0254**2, "free_pitch_frequency_ratio": None}
    si = {label: (unit, values) for label, unit, values, _ in report.load_figures([row])}
    us = {label: (unit, values) for label, unit, values, _ in report.load_figures([row], us=True)}
    assert si["radial pull F·e"] == ("N", [pytest.approx(4448.2216152605)])
    assert us["radial pull F·e"] == ("lbf", [pytest.approx(1000.0, rel=1e-12)])            # 1 lbf = 4.4482216152605 N
    assert us["centrifugal force y"] == ("lbf", [pytest.approx(1000.0, rel=1e-12)])
    assert us["CTM (+ toward coarse)"] == ("in·lbf", [pytest.approx(-1.0, rel=1e-12)])    # 1 in·lbf = 0.112984829… N·m
    assert us["feathering moment of inertia"] == ("lb·in^2", [pytest.approx(1.0, rel=1e-12)])
    assert us["blade angle"] == ("deg", [25.0]) and us["speed"] == ("rpm", [2500.0])
    assert si["free-pitch frequency ratio ν/Ω"][1] == [None]           # nothing to show, not an error
    assert [label for label, *_ in report.LOAD_FIGURES][:3] == ["speed", "blade angle", "radial pull F·e"]


def test_the_html_page_shows_the_same_table_of_load_figures():
    row = {"name": "take-off", "rpm": 2500.0, "blade_angle_deg": 25.0, "radial_pull_N": 195433.0,
           "cf_N": [4479.8, 195433.0, 0.0], "ctm_Nm": -245.632}
    html = report.review_html(report.header(input={"name": "b"}, warnings=[], operating_points=[row]))
    for label, *_ in report.LOAD_FIGURES:
        assert f"<td>{label}</td>" in html, label
    assert "<td>-245.632</td>" in html
    assert "font-family:system-ui,sans-serif" in html


def test_json_is_plain_and_not_finite_numbers_are_null():
    data = report.jsonable({"a": np.arange(3), "b": (np.float64(math.nan), np.int64(4), np.bool_(True))})
    assert data == {"a": [0, 1, 2], "b": [None, 4, True]}
    assert json.loads(report.dumps({"x": math.inf})) == {"x": None}
