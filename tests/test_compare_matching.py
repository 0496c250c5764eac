"""Blade-set matching (bladesolid.compare.matching).

References: brute force over every assignment; elementary mathematics (the N-th roots of unity
sum to zero; two opposite blades leave |v1 − v2|).
"""

from __future__ import annotations

import itertools
import json

import numpy as np
import pytest

from bladesolid import compare
from bladesolid.errors import InputError

from .comparehelp import all_imbalances, report_file, synthetic


@pytest.mark.parametrize("n", [3, 4, 5])
def test_matching_equals_brute_force(n):
    for seed in range(3):
        V, ctm = synthetic(n, seed)
        brute = all_imbalances(V)
        res = compare.match_blades(V, ctm)
        assert res.best.imbalance_kgm == pytest.approx(brute.min(), rel=1e-9, abs=1e-15)
        assert res.worst.imbalance_kgm == pytest.approx(brute.max(), rel=1e-9)
        assert res.best.order[0] == 0
        # the local search (forced) finds the same optimum for these small sets
        ls = compare.match_blades(V, ctm, exhaustive_up_to=0)
        assert ls.best.imbalance_kgm == pytest.approx(brute.min(), rel=1e-9, abs=1e-15)
        assert ls.worst.imbalance_kgm == pytest.approx(brute.max(), rel=1e-9)


def test_local_search_beyond_exhaustive_is_a_local_optimum():
    V, ctm = synthetic(10, 5)
    res = compare.match_blades(V, ctm)
    assert res.method.startswith("pairwise-swap")
    order = list(res.best.order)
    best = res.best.imbalance_kgm
    rng = np.random.default_rng(0)
    z = V[:, 0] + 1j * V[:, 1]
    e = np.exp(2j * np.pi * np.arange(10) / 10)
    for a, b in itertools.combinations(range(10), 2):
        o = order.copy()
        o[a], o[b] = o[b], o[a]
        assert abs((z[o] * e).sum()) >= best - 1e-12
    random_best = min(abs((z[rng.permutation(10)] * e).sum()) for _ in range(2000))
    assert best <= random_best + 1e-15


def test_matching_physics():
    # identical blades: the N-th roots of unity sum to zero, so any assignment balances
    V = np.tile([[0.003, 2.8, 0.0]], (4, 1))
    assert compare.match_blades(V, np.zeros(4)).worst.imbalance_kgm < 1e-12
    # two blades are opposite: the imbalance is |v1 - v2|
    V2 = np.array([[0.001, 2.80, 0.0], [-0.002, 2.83, 0.0]])
    assert compare.match_blades(V2, [0.0, 0.0]).best.imbalance_kgm == pytest.approx(np.linalg.norm(V2[0] - V2[1]))
    # equal static moments: the CTMs decide; opposite pairs of (nearly) equal CTM
    V4 = np.tile([[0.0, 2.8, 0.0]], (4, 1))
    res = compare.match_blades(V4, [-240.0, -250.0, -240.1, -249.9])
    o = res.best.order
    assert {o[0], o[2]} in ({0, 2}, {1, 3}) and res.best.ctm_resultant_Nm < 0.2


def test_set_reports_validation(tmp_path):
    good = report_file(tmp_path / "b1.json", 6.9, [0.0095, 0.412, -0.007], -244.7)
    assert compare.read_set_report(good).mass_kg == 6.9
    cases = {
        "schema.json": {"schema": "something/1"},
        "nomass.json": {"schema": "bladesolid.report/1", "mass_properties": {"cg_m": [0, 1, 0]}},
        "badcg.json": {"schema": "bladesolid.report/1",
                       "mass_properties": {"mass_kg": 1.0, "cg_m": [0, 1], "static_moment_kgm": 1.0}},
        "noops.json": {"schema": "bladesolid.report/1",
                       "mass_properties": {"mass_kg": 1.0, "cg_m": [0, 1, 0], "static_moment_kgm": 1.0}},
    }
    for name, data in cases.items():
        (tmp_path / name).write_text(json.dumps(data))
        with pytest.raises(InputError) as exc:
            compare.read_set_report(tmp_path / name)
        assert str(tmp_path / name) in str(exc.value) and "\n" not in str(exc.value)
    (tmp_path / "broken.json").write_text("{not json")
    with pytest.raises(InputError, match="not valid JSON"):
        compare.read_set_report(tmp_path / "broken.json")
