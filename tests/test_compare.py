"""Repaired blades against their reference, limits files, and blade-set matching.

External references used below:
* meshes/demo_variants.json — the demo generator's known rigid transform of the scanned
  variant and the variants' volumes (computed there independently of bladesolid's code);
* trimesh (reference library): closest points, signed distance, mass properties;
* manifold3d (reference library): boolean differences;
* brute force over every assignment for the set matching;
* elementary mathematics (the N-th roots of unity sum to zero).
"""

from __future__ import annotations

import itertools
import json
import math
import os

import numpy as np
import pytest
import trimesh

from bladesolid import api, compare
from bladesolid.errors import InputError
from bladesolid.frame import rotation_about
from bladesolid.io import read_mesh
from bladesolid.loads import centrifugal_twisting_moment, radial_pull
from bladesolid.moments import Moments

from .conftest import MESHES

RHO = 2810.0  # kg/m^3, the demo density (demo_variants.json "density_kg_m3")
RPM = 2500.0
OMEGA = RPM * 2 * math.pi / 60


def _variants():
    with open(MESHES / "demo_variants.json", encoding="utf-8") as fh:
        data = json.load(fh)
    return {v["file"]: v for v in data["variants"]}


def _surfaces(name):
    return [(b.vertices, b.faces) for b in read_mesh(MESHES / name, "mm").bodies]


@pytest.fixture(scope="module")
def reference():
    return api.load_blade(MESHES / "demo_blade.stl", "mm", [f"{RHO} kg/m^3"], elements=False)


@pytest.fixture(scope="module")
def scanned(reference):
    """The scanned leading-edge blend (scanner frame), registered automatically."""
    return compare.compare_blade(reference, _surfaces("demo_blade_le_blend_scanned.stl"), RPM,
                                 repaired_source="demo_blade_le_blend_scanned.stl")


@pytest.fixture(scope="module")
def blend_direct(reference):
    """The same blend, un-moved, already in the reference frame (identity transform)."""
    return compare.compare_blade(reference, _surfaces("demo_blade_le_blend.stl"), RPM, transform=np.eye(4))


@pytest.fixture(scope="module")
def dressed(reference):
    return compare.compare_blade(reference, _surfaces("demo_blade_tip_dressed.stl"), RPM, transform=np.eye(4))


# --- closest points and signed distance ---------------------------------------------------


def test_surface_query_is_exact_against_brute_force_and_trimesh(demo_mesh):
    q = compare.SurfaceQuery(demo_mesh.vertices, demo_mesh.faces)
    rng = np.random.default_rng(7)
    P, _ = compare.sample_surface(demo_mesh.vertices, demo_mesh.faces, 400, seed=3)
    P = P + rng.normal(scale=2e-3, size=P.shape)       # points within a few mm of the surface
    c, d, face = q.closest(P)
    # brute force: every face of the mesh for a subset (trimesh's point-triangle kernel)
    tri = demo_mesh.triangles
    for p, dd in zip(P[:25], d[:25]):
        cp = trimesh.triangles.closest_point(tri, np.repeat(p[None], len(tri), axis=0))
        assert dd == pytest.approx(np.linalg.norm(cp - p, axis=1).min(), abs=1e-12)
    # trimesh.proximity (reference library): ours is never farther
    _, d_tm, _ = trimesh.proximity.closest_point(demo_mesh, P)
    assert np.all(d <= d_tm + 1e-12)
    # sign: trimesh.proximity.signed_distance is positive inside; ours is positive outside
    s, _, _ = q.signed_distance(P)
    s_tm = trimesh.proximity.signed_distance(demo_mesh, P)
    clear = np.abs(s_tm) > 1e-5
    assert np.all(np.sign(s[clear]) == -np.sign(s_tm[clear]))
    assert np.allclose(np.abs(s), d)


# --- registration -------------------------------------------------------------------------


def test_scanned_transform_is_recovered(scanned):
    # demo_variants.json: the scan is x' = R x + t (mm) from the hub frame; ours maps back
    known = np.array(_variants()["demo_blade_le_blend_scanned.stl"]["transform_from_hub_frame"])
    known[:3, 3] *= 1e-3
    expected = compare.invert_rigid(known)
    T = scanned.transform_model
    assert compare.rotation_angle_deg(T[:3, :3] @ expected[:3, :3].T) < 0.05          # registration accuracy target of this project: < 0.05 deg
    assert np.linalg.norm(T[:3, 3] - expected[:3, 3]) < 0.05e-3                       # registration accuracy target of this project: < 0.05 mm
    r = scanned.registration
    assert r.method == "principal axes + trimmed ICP"
    assert r.rms_m < 1e-6 and r.max_m < 1e-5        # float32 STL round-off only on the untouched 90 %
    assert r.max_all_m > 1e-3                        # the blend itself (up to 4 mm deep) is among all points


def test_registration_from_a_large_rotation_uses_the_axis_signs(reference):
    # a pose far from the identity: turned 170 deg about an oblique axis and moved 0.3 m
    R = rotation_about([0.2, 0.9, -0.4], math.radians(170.0))
    T0 = compare.rigid_matrix(R, [0.3, -0.1, 0.2])
    moved = [(compare.apply_transform(T0, v), f) for v, f in _surfaces("demo_blade_le_blend.stl")]
    fixed = compare.merge_surfaces(reference.surfaces)
    reg = compare.register(compare.merge_surfaces(moved), fixed, samples=2500)
    back = reg.transform @ T0                                  # should be the identity
    assert compare.rotation_angle_deg(back[:3, :3]) < 0.05
    assert np.linalg.norm(back[:3, 3]) < 0.05e-3
    assert reg.start.startswith("principal axes")


def test_registration_is_deterministic(reference):
    moving = compare.merge_surfaces(_surfaces("demo_blade_tip_dressed.stl"))
    fixed = compare.merge_surfaces(reference.surfaces)
    a = compare.register(moving, fixed, samples=600, coarse_points=300, coarse_iterations=5, seed=4)
    b = compare.register(moving, fixed, samples=600, coarse_points=300, coarse_iterations=5, seed=4)
    assert np.array_equal(a.transform, b.transform) and a.rms_m == b.rms_m


# --- comparison: leading-edge blend -------------------------------------------------------


def test_scanned_blend_agrees_with_the_unmoved_blend(scanned, blend_direct):
    # the registered scan against the same repair analysed directly in the reference frame
    assert scanned.removed_volume_m3 == pytest.approx(blend_direct.removed_volume_m3, rel=0.03)
    a, b = scanned.delta, blend_direct.delta
    assert a.mass_kg == pytest.approx(b.mass_kg, abs=1e-5)                  # 0.01 g
    assert a.ctm_Nm == pytest.approx(b.ctm_Nm, abs=2e-3)
    assert a.radial_pull_N == pytest.approx(b.radial_pull_N, abs=0.5)
    assert a.static_moment_kgm == pytest.approx(b.static_moment_kgm, abs=1e-5)
    assert np.allclose(a.cg_m, b.cg_m, atol=1e-6)
    assert abs(a.blade_angle_deg) < 1e-3     # the blend band 770-870 mm misses the 750 mm station


def test_blend_volumes_and_deviation(blend_direct):
    v = _variants()
    removed_known = (v["demo_blade.stl"]["volume_mm3"] - v["demo_blade_le_blend.stl"]["volume_mm3"]) * 1e-9
    assert blend_direct.removed_volume_m3 == pytest.approx(removed_known, rel=1e-3)   # demo_variants.json
    assert blend_direct.added_volume_m3 < 1e-3 * removed_known                       # a blend only removes
    assert blend_direct.delta.mass_kg == pytest.approx(-RHO * removed_known, rel=1e-3)
    d = blend_direct.deviation
    depth = v["demo_blade_le_blend.stl"]["params"]["le_blend_depth_mm"] * 1e-3
    assert -depth < d.min_m < -0.25 * depth       # inward (material missing), not deeper than the blend
    assert d.max_outward_m < 1e-6                  # nothing outside the reference
    # vertices outside the blend band are on the reference surface
    y = d.vertices[:, 1] * 1e3
    p = v["demo_blade_le_blend.stl"]["params"]
    far = np.abs(y - p["le_blend_radius_mm"]) > 0.5 * p["le_blend_width_mm"] + 1.0
    assert np.abs(d.values[far]).max() < 1e-6


def test_comparison_section_has_the_contract_keys(scanned):
    s = compare.comparison_section(scanned)
    # docs/CONVENTIONS.md §7 keys
    assert set(s["registration"]) >= {"rms_m", "max_m", "transform"}
    assert np.asarray(s["registration"]["transform"]).shape == (4, 4)
    assert {"removed_volume_m3", "added_volume_m3", "delta", "verdict", "reasons"} <= set(s)
    assert set(s["delta"]) >= {"mass_kg", "cg_m", "static_moment_kgm", "radial_pull_N", "ctm_Nm"}
    assert len(s["delta"]["cg_m"]) == 3
    # no limits file: nothing checked, the verdict keeps the contract's two values
    assert s["verdict"] == "within limits" and s["reasons"] == [] and s["limits_checked"] is False
    assert "user's own" in s["limits_note"]


# --- comparison: tip dressing -------------------------------------------------------------


def test_tip_dressing_removed_volume_and_loads(reference, dressed):
    v = _variants()
    removed_known = (v["demo_blade.stl"]["volume_mm3"] - v["demo_blade_tip_dressed.stl"]["volume_mm3"]) * 1e-9
    assert dressed.removed_volume_m3 == pytest.approx(removed_known, rel=1e-3)        # demo_variants.json
    assert dressed.added_volume_m3 < 1e-3 * removed_known
    assert dressed.delta.radial_pull_N < 0                                            # lighter tip, less pull
    # the removed tip piece on its own: manifold3d boolean + trimesh mass properties (reference
    # libraries), then the docs/CONVENTIONS.md §4 formulas on those moments
    a = compare.solid(reference.surfaces, "ref")
    b = compare.solid(_surfaces("demo_blade_tip_dressed.stl"), "dressed")
    g = (a - b).to_mesh64()
    piece = trimesh.Trimesh(np.asarray(g.vert_properties)[:, :3], np.asarray(g.tri_verts), process=False)
    mp = piece.mass_properties
    vol, c = float(mp["volume"]), np.asarray(mp["center_mass"])
    I_c = np.asarray(mp["inertia"]) / mp["density"]
    S = 0.5 * np.trace(I_c) * np.eye(3) - I_c + vol * np.outer(c, c)
    m = Moments(vol, vol * c, S).scaled(RHO)
    assert dressed.delta.mass_kg == pytest.approx(-m.mass, rel=1e-3)
    assert dressed.delta.radial_pull_N == pytest.approx(-float(radial_pull(m, reference.frame, OMEGA)), rel=2e-3)
    # the blade angle is unchanged at 750 mm, so both sit at the same pitch: ΔCTM is the piece's
    assert abs(dressed.delta.blade_angle_deg) < 1e-6
    ctm_piece = float(centrifugal_twisting_moment(m, reference.frame, OMEGA))
    assert dressed.delta.ctm_Nm == pytest.approx(-ctm_piece, rel=5e-3, abs=1e-4)


def test_verdict_flips_when_a_limit_is_tightened(dressed, tmp_path):
    removed_mm3 = dressed.removed_volume_m3 * 1e9
    loose = tmp_path / "loose.toml"
    loose.write_text(f'source = "test"\nremoved_volume = "{removed_mm3 * 1.5:.1f} mm^3"\nmass = "-50 g:+5 g"\n')
    tight = tmp_path / "tight.toml"
    tight.write_text(f'removed_volume = "{removed_mm3 * 0.5:.1f} mm^3"\nmass = "-5 g:+5 g"\n')
    ok = compare.check_limits(compare.read_limits(loose), dressed.figures())
    assert all(c.within for c in ok)
    bad = compare.check_limits(compare.read_limits(tight), dressed.figures())
    reasons = [c.reason for c in bad if not c.within]
    assert len(reasons) == 2
    assert reasons[0].startswith("removed volume ") and "exceeds the allowed" in reasons[0]
    assert reasons[1].startswith("mass change −9.") and "is below the allowed −5 g" in reasons[1]


def test_blade_angle_change_is_measured(reference):
    # a re-pitched blade: the reference turned 0.5 deg toward coarse about the pitch axis
    from bladesolid.frame import pitch_motion

    R, t = pitch_motion(reference.frame, 0.5)
    turned = [(v @ R.T + t, f) for v, f in reference.surfaces]
    c = compare.compare_blade(reference, turned, RPM, transform=np.eye(4), volumes=False)
    assert c.delta.blade_angle_deg == pytest.approx(0.5, abs=2e-3)
    # both are set to the same measured blade angle: the same solid gives the same loads
    assert c.delta.ctm_Nm == pytest.approx(0.0, abs=1e-3 * abs(c.reference.loads.ctm_Nm))
    assert c.delta.mass_kg == pytest.approx(0.0, abs=1e-9)


# --- transforms ---------------------------------------------------------------------------


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


# --- limits files -------------------------------------------------------------------------


def test_example_limits_parse(tmp_path):
    p = tmp_path / "limits.toml"
    p.write_text(compare.EXAMPLE_LIMITS)
    L = compare.read_limits(p)
    by = {x.key: x for x in L.limits}
    assert by["mass"].low == pytest.approx(-0.05) and by["mass"].high == pytest.approx(0.005)
    assert by["max_abs_static_moment"].high == pytest.approx(0.02)        # 20 kg·mm = 0.02 kg·m
    assert by["radial_pull"].low == pytest.approx(-2000.0)
    assert by["removed_volume"].high == pytest.approx(5e-6)               # 5000 mm³
    assert by["blade_angle"].high == pytest.approx(0.2)
    assert L.source.startswith("Larkspur")


@pytest.mark.parametrize("text, key, words", [
    ('mas = "5 g"', "mas", "did you mean 'mass'"),
    ('mass = "5 g"', "mass", "LOW:HIGH"),
    ('mass = "5 mm:6 mm"', "mass", "not a quantity in units of kg"),
    ('mass = "5 g:-5 g"', "mass", "low bound is above"),
    ('mass = ":"', "mass", "at least one bound"),
    ('mass = ["1 g"]', "mass", "two entries"),
    ("cg_shift = true", "cg_shift", "must be a quantity"),
    ('cg_shift = "-2 mm"', "cg_shift", "must not be negative"),
    ('max_abs_ctm = "5 N"', "max_abs_ctm", "not a quantity in units of N*m"),
    ("source = 3", "source", "must be a string"),
    ("[delta]\nmass = \"1 g\"", "delta", "unknown key"),
])
def test_limits_validation(tmp_path, text, key, words):
    p = tmp_path / "limits.toml"
    p.write_text(text + "\n")
    with pytest.raises(InputError) as exc:
        compare.read_limits(p)
    msg = str(exc.value)
    assert msg.startswith(f"{p}: key '{key}'") and words in msg and "\n" not in msg


def test_limits_file_problems(tmp_path):
    p = tmp_path / "limits.toml"
    p.write_text('source = "only text"\n')
    with pytest.raises(InputError, match="sets no limit"):
        compare.read_limits(p)
    p.write_text("mass = \n")
    with pytest.raises(InputError, match="not valid TOML"):
        compare.read_limits(p)
    with pytest.raises(InputError, match="not found"):
        compare.read_limits(tmp_path / "none.toml")


def test_limit_reasons_one_sided_and_symmetric():
    L = compare.parse_limits({"mass": ":+5 g", "max_abs_ctm": "5 N*m", "cg_shift": "2 mm"}, "l.toml")
    checks = compare.check_limits(L, {"mass": 0.0071, "ctm": -6.0, "cg_shift": 0.001})
    assert [c.within for c in checks] == [False, False, True]
    assert checks[0].reason.startswith("mass change +7.1 g is above the allowed +5 g")
    assert checks[1].reason.startswith("CTM change −6 N·m exceeds the allowed ±5 N·m")
    # a figure that could not be determined does not pass silently
    L2 = compare.parse_limits({"blade_angle": "-0.1:0.1"}, "l.toml")
    assert not compare.check_limits(L2, {"blade_angle": None})[0].within


# --- blade-set matching -------------------------------------------------------------------


def _brute(vectors, ctms=None):
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


def _synthetic(n, seed):
    rng = np.random.default_rng(seed)
    # static moment vectors in the plane of rotation: mostly outboard (y), a little chordwise (x)
    V = np.column_stack([rng.normal(0, 0.004, n), 2.84 + rng.normal(0, 0.01, n), np.zeros(n)])
    return V, -245.0 + rng.normal(0, 0.5, n)


@pytest.mark.parametrize("n", [3, 4, 5])
def test_matching_equals_brute_force(n):
    for seed in range(3):
        V, ctm = _synthetic(n, seed)
        brute = _brute(V)
        res = compare.match_blades(V, ctm)
        assert res.best.imbalance_kgm == pytest.approx(brute.min(), rel=1e-9, abs=1e-15)
        assert res.worst.imbalance_kgm == pytest.approx(brute.max(), rel=1e-9)
        assert res.best.order[0] == 0
        # the local search (forced) finds the same optimum for these small sets
        ls = compare.match_blades(V, ctm, exhaustive_up_to=0)
        assert ls.best.imbalance_kgm == pytest.approx(brute.min(), rel=1e-9, abs=1e-15)
        assert ls.worst.imbalance_kgm == pytest.approx(brute.max(), rel=1e-9)


def test_local_search_beyond_exhaustive_is_a_local_optimum():
    V, ctm = _synthetic(10, 5)
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


def _report(path, mass, cg, ctm, pull=190000.0, rpm=2500.0, name=None):
    cg = np.asarray(cg, float)
    data = {"schema": "bladesolid.report/1", "input": {"name": name or os.path.basename(path)},
            "mass_properties": {"mass_kg": mass, "cg_m": cg.tolist(),
                                "static_moment_kgm": float(mass * np.linalg.norm(cg[:2]))},
            "operating_points": [{"rpm": rpm, "ctm_Nm": ctm, "radial_pull_N": pull}]}
    path.write_text(json.dumps(data))
    return path


def test_set_reports_validation(tmp_path):
    good = _report(tmp_path / "b1.json", 6.9, [0.0095, 0.412, -0.007], -244.7)
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


# --- command line -------------------------------------------------------------------------


def test_cli_compare_outside_limits_exit_1(tmp_path, capsys):
    from bladesolid.cli import main

    lim = tmp_path / "limits.toml"
    lim.write_text('source = "test data"\nmass = "-5 g:+5 g"\n')
    out = tmp_path / "cmp.json"
    args = [str(MESHES / "demo_blade_tip_dressed.stl"), "--reference", str(MESHES / "demo_blade.stl"),
            "--units", "mm", "--density", "2810 kg/m^3", "--rpm", "2500", "--transform", "identity",
            "--limits", str(lim), "--json", str(out)]
    assert main(["compare", *args]) == 1
    text = capsys.readouterr().out
    assert "outside limits" in text and "mass change" in text and "user's own" in text
    c = json.loads(out.read_text())["comparison"]
    assert c["verdict"] == "outside limits" and c["reasons"][0].startswith("mass change −9.")
    assert c["removed_volume_m3"] > 0 and len(c["registration"]["transform"]) == 4
    # the output exists now: refused without --force, before any work
    assert main(["compare", *args]) == 2
    assert "exists already" in capsys.readouterr().err


def test_cli_compare_bad_limits_leaves_no_output(tmp_path, capsys):
    from bladesolid.cli import main

    lim = tmp_path / "limits.toml"
    lim.write_text('mass = "5 g"\n')
    out = tmp_path / "cmp.json"
    rc = main(["compare", str(MESHES / "demo_blade_tip_dressed.stl"), "--reference", str(MESHES / "demo_blade.stl"),
               "--units", "mm", "--density", "2810", "--rpm", "2500", "--limits", str(lim), "--json", str(out)])
    err = capsys.readouterr().err
    assert rc == 2 and f"{lim}: key 'mass'" in err and len(err.strip().splitlines()) == 1
    assert not out.exists()


def test_cli_match(tmp_path, capsys):
    from bladesolid.cli import main

    V, ctm = _synthetic(4, 11)
    paths = [str(_report(tmp_path / f"blade{i + 1}.json", 6.9, V[i] / 6.9, float(ctm[i]))) for i in range(4)]
    out = tmp_path / "match.json"
    assert main(["match", *paths, "--json", str(out)]) == 0
    m = json.loads(out.read_text())["match"]
    brute = _brute(V)
    assert m["best"]["imbalance_kgm"] == pytest.approx(brute.min(), rel=1e-9)
    assert m["worst"]["imbalance_kgm"] == pytest.approx(brute.max(), rel=1e-9)
    assert m["best"]["imbalance_force_N"] == pytest.approx(brute.min() * OMEGA**2, rel=1e-9)   # F = U Ω²
    assert m["ctm_spread_Nm"] == pytest.approx(ctm.max() - ctm.min())
    assert [p["clocking_deg"] for p in m["best"]["positions"]] == [0.0, 90.0, 180.0, 270.0]
    assert "residual static imbalance" in capsys.readouterr().out
    assert main(["match", paths[0], "--json", str(tmp_path / "one.json")]) == 2
    assert "at least two blades" in capsys.readouterr().err
