"""The demo (bladesolid.demo): geometry of the parametric blade, the committed meshes, the demo folder."""

from __future__ import annotations

import json
import math
from dataclasses import replace
from functools import lru_cache
from pathlib import Path

import numpy as np
import pytest
import trimesh

from bladesolid import demo

MESHES = Path(__file__).resolve().parents[1] / "meshes"


@lru_cache(maxsize=None)
def _surface(**changes):
    v, f = demo.blade_surface(replace(demo.BladeParams(), **changes))
    v.setflags(write=False)
    f.setflags(write=False)
    return v, f


def _mesh(**changes) -> trimesh.Trimesh:
    v, f = _surface(**changes)
    return trimesh.Trimesh(vertices=v.copy(), faces=f.copy(), process=False)


def _section_points(mesh: trimesh.Trimesh, y: float) -> np.ndarray:
    """Vertices of the cut of the mesh with the plane y = const (normal to the pitch axis)."""
    path = mesh.section(plane_origin=[0.0, y, 0.0], plane_normal=[0.0, 1.0, 0.0])
    assert path is not None, f"no section at y = {y}"
    return np.asarray(path.vertices)


def _chord(points: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(leading edge, trailing edge): the two section points farthest apart, the leading edge
    being the one facing t = k x e = -x (docs/CONVENTIONS.md §2)."""
    diff = points[:, None, :] - points[None, :, :]
    i, j = np.unravel_index(np.argmax(np.einsum("ijk,ijk->ij", diff, diff)), diff.shape[:2])
    a, b = points[i], points[j]
    return (a, b) if a[0] < b[0] else (b, a)


def _blade_angle_deg(mesh: trimesh.Trimesh, y: float) -> float:
    le, te = _chord(_section_points(mesh, y))
    chord = le - te
    t = np.array([-1.0, 0.0, 0.0])           # k x e for the identity job, right-hand rotation
    f = np.array([0.0, 0.0, 1.0])
    return math.degrees(math.atan2(chord @ f, chord @ t))


# ----------------------------------------------------------------------------- topology


@pytest.mark.parametrize("variant", [{}, {"tip_trim_mm": 12.0}, {"le_blend_depth_mm": 4.0}])
def test_surface_is_closed_oriented_volume(variant):
    m = _mesh(**variant)
    # trimesh's own checks (reference library): watertight, consistent winding, a volume
    assert m.is_watertight
    assert m.is_winding_consistent
    assert m.is_volume
    assert m.volume > 0.0                      # outward winding gives a positive volume
    v, f = _surface(**variant)
    assert v.dtype == np.float64 and v.shape[1] == 3
    assert f.dtype == np.int64 and f.shape[1] == 3
    assert len(np.unique(f)) == len(v)         # every vertex is used


def test_no_degenerate_faces():
    m = _mesh()
    assert m.nondegenerate_faces().all()       # trimesh: no face with a vanishing height
    assert m.area_faces.min() > 1e-4           # mm²; smallest triangles sit at the leading edge
    f = m.faces
    assert (f[:, 0] != f[:, 1]).all() and (f[:, 1] != f[:, 2]).all() and (f[:, 0] != f[:, 2]).all()
    # no two vertices at the same place
    assert len(np.unique(np.round(m.vertices, 9), axis=0)) == len(m.vertices)


def test_deterministic():
    p = demo.BladeParams(le_blend_depth_mm=4.0)
    v1, f1 = demo.blade_surface(p)
    v2, f2 = demo.blade_surface(p)
    assert v1.tobytes() == v2.tobytes() and f1.tobytes() == f2.tobytes()


@pytest.mark.parametrize("variant", [{}, {"tip_trim_mm": 12.0}, {"le_blend_depth_mm": 4.0}])
def test_no_self_intersection(variant):
    import manifold3d
    import tetgen

    v, f = _surface(**variant)
    # tetgen's -p refuses a surface with self-intersecting facets ("Y": keep the boundary)
    result = tetgen.TetGen(v.copy(), f.astype(np.int32)).tetrahedralize(switches="pYQ")
    assert len(result[1]) > 0                  # (nodes, elements, ...)
    mesh = manifold3d.Mesh(vert_properties=v.astype(np.float32), tri_verts=f.astype(np.uint32))
    solid = manifold3d.Manifold(mesh)
    assert solid.status() == manifold3d.Error.NoError
    assert solid.volume() == pytest.approx(_mesh(**variant).volume, rel=1e-6)


def test_invalid_params_are_refused():
    with pytest.raises(ValueError, match="n_chord"):
        demo.BladeParams(n_chord=121)
    with pytest.raises(ValueError, match="tip cap"):
        demo.BladeParams(tip_trim_mm=800.0)


# ----------------------------------------------------------------------------- design intent


def test_frame_and_extent():
    p = demo.BladeParams()
    m = _mesh()
    lo, hi = m.bounds
    assert lo[1] == pytest.approx(p.root_radius_mm, abs=1e-9)    # root face
    assert hi[1] == pytest.approx(p.tip_radius_mm, abs=1e-9)     # tip, 2.0 m diameter
    root = m.vertices[np.isclose(m.vertices[:, 1], p.root_radius_mm)]
    assert np.hypot(root[:, 0], root[:, 2]).max() == pytest.approx(p.shank_radius_mm, rel=1e-12)


def test_shank_section_area_is_circle_area():
    # circle area pi R² (handbook formula); the 120-gon inscribed in it is within 0.1 %
    m = _mesh()
    path = m.section(plane_origin=[0.0, 170.0, 0.0], plane_normal=[0.0, 1.0, 0.0])
    planar, _ = path.to_2D()
    assert planar.area == pytest.approx(math.pi * 38.0**2, rel=1e-3)


def test_blade_angle_at_reference_radius():
    p = demo.BladeParams()
    assert float(demo.designed_blade_angle_deg(p, p.reference_radius_mm)) == pytest.approx(25.0)
    measured = _blade_angle_deg(_mesh(), p.reference_radius_mm)       # y = 750 mm
    assert measured == pytest.approx(p.blade_angle_ref_deg, abs=0.5)


def test_washout_and_chord_taper():
    p = demo.BladeParams()
    m = _mesh()
    radii = (400.0, 500.0, 600.0, 750.0, 900.0)
    angles = [_blade_angle_deg(m, y) for y in radii]
    assert all(a > b for a, b in zip(angles, angles[1:]))           # less angle outboard
    # the measured (farthest-points) chord follows the designed mean-line chord where the
    # sections are thin; inboard (t/c > 0.2 at 400 mm) the two chords part by more
    for y, angle in zip(radii[1:], angles[1:]):
        assert angle == pytest.approx(float(demo.designed_blade_angle_deg(p, y)), abs=0.5)
    chords = {}
    for y in (400.0, 500.0, 750.0, 950.0):
        le, te = _chord(_section_points(m, y))
        chords[y] = float(np.linalg.norm(le - te))
        assert chords[y] == pytest.approx(float(demo.chord_mm(p, y)), rel=0.02)
    assert chords[500.0] > chords[750.0] > chords[950.0]


@pytest.mark.parametrize("y", [400.0, 600.0, 750.0, 900.0])
def test_pitch_axis_near_quarter_to_third_chord(y):
    m = _mesh()
    le, te = _chord(_section_points(m, y))
    axis_point = np.array([0.0, y, 0.0])                   # the pitch axis is the y axis
    chord = le - te
    fraction = (le - axis_point) @ chord / (chord @ chord)
    assert 0.25 <= fraction <= 0.35
    # the section centroid is near, but not on, the pitch axis
    path = m.section(plane_origin=[0.0, y, 0.0], plane_normal=[0.0, 1.0, 0.0])
    planar, to_3d = path.to_2D()
    centroid = trimesh.transform_points([[*planar.centroid, 0.0]], to_3d)[0]
    offset = np.hypot(centroid[0], centroid[2])
    assert 0.02 * np.linalg.norm(chord) < offset < 0.25 * np.linalg.norm(chord)


def test_suction_side_faces_forward():
    # camber towards +z: at 0.75R the mean of the section lies forward of (above) its chord line
    m = _mesh()
    pts = _section_points(m, 750.0)
    le, te = _chord(pts)
    chord = (le - te) / np.linalg.norm(le - te)
    normal = np.cross([0.0, 1.0, 0.0], chord)               # in the section plane, +z side
    assert normal[2] > 0.0
    path = m.section(plane_origin=[0.0, 750.0, 0.0], plane_normal=[0.0, 1.0, 0.0])
    planar, to_3d = path.to_2D()
    centroid = trimesh.transform_points([[*planar.centroid, 0.0]], to_3d)[0]
    assert (centroid - te) @ normal > 0.0


def test_mass_plausible_in_aluminium():
    m = _mesh()
    m.density = demo.DEMO_DENSITY_KG_M3 * 1e-9      # kg/mm³
    # a 1 m aluminium propeller blade weighs roughly 4-9 kg (common practice, no source)
    assert 4.0 < m.mass < 9.0


def test_tip_dressed_is_shorter_and_lighter():
    base, dressed = _mesh(), _mesh(tip_trim_mm=12.0)
    assert base.bounds[1][1] - dressed.bounds[1][1] == pytest.approx(12.0, abs=1e-9)
    assert dressed.volume < base.volume
    import manifold3d

    def solid(mesh):
        return manifold3d.Manifold(manifold3d.Mesh(
            vert_properties=mesh.vertices.astype(np.float32),
            tri_verts=mesh.faces.astype(np.uint32)))

    # dressing only removes material: the dressed blade lies within the original one
    added = (solid(dressed) - solid(base)).volume()
    assert added < 1e-3 * (base.volume - dressed.volume)


def test_le_blend_removes_small_volume_from_leading_edge():
    import manifold3d

    p = demo.BladeParams(le_blend_depth_mm=4.0)
    base, blend = _mesh(), _mesh(le_blend_depth_mm=4.0)
    removed = base.volume - blend.volume
    assert 0.0 < removed < 0.02 * base.volume

    def solid(mesh):
        return manifold3d.Manifold(manifold3d.Mesh(
            vert_properties=mesh.vertices.astype(np.float32),
            tri_verts=mesh.faces.astype(np.uint32)))

    added = (solid(blend) - solid(base)).volume()
    assert added < 1e-3 * removed                          # a blend only removes material
    assert (solid(base) - solid(blend)).volume() == pytest.approx(removed, rel=1e-3)
    # the change is confined to the band and to the forward part of the sections
    assert base.vertices.shape == blend.vertices.shape    # same rings, moved points
    moved = np.linalg.norm(base.vertices - blend.vertices, axis=1) > 0.0
    assert moved.any()
    y = base.vertices[moved, 1]
    assert (np.abs(y - p.le_blend_radius_mm) < 0.5 * p.le_blend_width_mm).all()
    depth = np.linalg.norm(base.vertices - blend.vertices, axis=1).max()
    assert depth == pytest.approx(p.le_blend_depth_mm, rel=0.05)


def test_scanned_variant_is_the_transformed_blend():
    p = demo.BladeParams(le_blend_depth_mm=4.0)
    vs, fs, transform = demo.scanned_variant(p)
    v, f = _surface(le_blend_depth_mm=4.0)
    rot, shift = transform[:3, :3], transform[:3, 3]
    assert np.allclose(rot @ rot.T, np.eye(3), atol=1e-12)
    assert np.linalg.det(rot) == pytest.approx(1.0)
    angle = math.degrees(math.acos((np.trace(rot) - 1.0) / 2.0))
    assert angle == pytest.approx(demo.SCAN_ANGLE_DEG)
    assert 90.0 < np.linalg.norm(shift) < 110.0
    assert np.array_equal(fs, f)
    assert np.allclose(vs, v @ rot.T + shift, atol=1e-9)
    # rigid motion: same volume (trimesh)
    scanned = trimesh.Trimesh(vs, fs, process=False)
    assert scanned.volume == pytest.approx(_mesh(le_blend_depth_mm=4.0).volume, rel=1e-9)


def test_rigid_transform_rotation_sense():
    # right-handed rotation about z takes x to y
    t = demo.rigid_transform(90.0, (0.0, 0.0, 2.0), (0.0, 0.0, 0.0))
    assert np.allclose(t[:3, :3] @ [1.0, 0.0, 0.0], [0.0, 1.0, 0.0], atol=1e-12)
    with pytest.raises(ValueError, match="axis"):
        demo.rigid_transform(10.0, (0.0, 0.0, 0.0), (0.0, 0.0, 0.0))


def test_large_surface_for_benchmarks():
    v, f = demo.large_blade_surface(240_000)
    assert abs(len(f) - 240_000) < 0.05 * 240_000
    m = trimesh.Trimesh(v, f, process=False)
    assert m.is_watertight and m.is_winding_consistent
    assert m.volume == pytest.approx(_mesh().volume, rel=2e-3)   # same blade, finer


# ----------------------------------------------------------------------------- committed files


def test_committed_meshes_match_the_generator():
    meta = json.loads((MESHES / "demo_variants.json").read_text(encoding="utf-8"))
    records = {r["file"]: r for r in meta["variants"]}
    assert set(records) == {
        "demo_blade.stl", "demo_blade_tip_dressed.stl", "demo_blade_le_blend.stl",
        "demo_blade_le_blend_scanned.stl"}
    for stem, params in demo.demo_variants().items():
        rec = records[f"{stem}.stl"]
        assert demo.BladeParams(**rec["params"]) == params
        path = MESHES / rec["file"]
        assert path.stat().st_size < 2_000_000
        assert 15_000 <= rec["faces"] <= 30_000
        if stem.endswith("_scanned"):
            v, f, transform = demo.scanned_variant(params)
        else:
            (v, f), transform = demo.blade_surface(params), np.eye(4)
        assert np.allclose(rec["transform_from_hub_frame"], transform, atol=1e-15)
        stored = trimesh.load(path, file_type="stl", process=False)
        # binary STL holds float32 coordinates
        assert np.allclose(stored.triangles, v[f], atol=1e-4)
        merged = trimesh.load(path, file_type="stl")
        assert merged.is_watertight and merged.is_winding_consistent
    # the recorded transform registers the blend file onto the scanned file
    blend = trimesh.load(MESHES / "demo_blade_le_blend.stl", file_type="stl", process=False)
    scan = trimesh.load(MESHES / "demo_blade_le_blend_scanned.stl", file_type="stl",
                        process=False)
    t = np.asarray(records["demo_blade_le_blend_scanned.stl"]["transform_from_hub_frame"])
    assert np.allclose(trimesh.transform_points(blend.vertices, t), scan.vertices, atol=1e-3)


def test_write_demo_meshes_is_reproducible(tmp_path):
    first = demo.write_demo_meshes(tmp_path / "a")
    second = demo.write_demo_meshes(tmp_path / "b")
    assert [p.name for p in first] == [
        "demo_blade.stl", "demo_blade_tip_dressed.stl", "demo_blade_le_blend.stl",
        "demo_blade_le_blend_scanned.stl", "demo_variants.json"]
    for a, b in zip(first, second):
        assert a.read_bytes() == b.read_bytes(), a.name
    # the committed metadata is what the generator writes now
    fresh = json.loads(first[-1].read_text(encoding="utf-8"))
    committed = json.loads((MESHES / "demo_variants.json").read_text(encoding="utf-8"))
    for rec_new, rec_old in zip(fresh["variants"], committed["variants"], strict=True):
        assert rec_new["params"] == rec_old["params"]
        assert rec_new["faces"] == rec_old["faces"]
        assert rec_new["volume_mm3"] == pytest.approx(rec_old["volume_mm3"], rel=1e-9)


def test_write_demo_writes_the_one_example_job_and_a_consistent_repair_scenario(tmp_path):
    import tomllib

    from bladesolid.compare import read_limits
    from bladesolid.job import EXAMPLE_JOB, load_job

    paths = demo.write_demo(tmp_path / "demo")
    assert open(paths["job"], encoding="utf-8").read() == EXAMPLE_JOB
    for key in ("job", "repair_job"):
        job = load_job(paths[key])
        assert Path(job.mesh).exists(), job.mesh
        # every operating point of the demo sits at an angle the blade can be set to; take-off
        # at the angle the blade is modelled at (25 deg at 0.75 R, BladeParams)
        assert job.operating_points[0].blade_angle_deg == demo.BladeParams().blade_angle_ref_deg
    repair = load_job(paths["repair_job"])
    assert Path(repair.reference).exists() and Path(repair.limits) == Path(paths["repair_limits"])
    assert read_limits(paths["repair_limits"]).source.startswith("Larkspur")
    assert tomllib.loads(demo.REPAIR_LIMITS)["source"].endswith("(invented)")


def test_the_step_demo_job_is_the_example_job_on_the_step_blade(tmp_path):
    # the same job as the example (every key but the mesh, its unit and the chord tolerance),
    # reading the STEP blade, whose declared millimetre is the unit of the job's points
    import tomllib

    from bladesolid.cad import DEFAULT_CAD_TOLERANCE
    from bladesolid.job import EXAMPLE_JOB, build_job

    step, example = tomllib.loads(demo.step_job_text()), tomllib.loads(EXAMPLE_JOB)
    assert step.pop("mesh") == "demo_blade.step" and example.pop("mesh") == "demo_blade.stl"
    assert "units" not in step and example.pop("units") == "mm"
    assert step.pop("cad_tolerance") == DEFAULT_CAD_TOLERANCE
    assert step.pop("name").endswith("from STEP (invented)") and example.pop("name")
    assert step == example
    pytest.importorskip("gmsh")
    (tmp_path / "demo_blade.step").write_bytes((MESHES / "demo_blade.step").read_bytes())
    job = build_job(tomllib.loads(demo.step_job_text()), "job.toml", str(tmp_path))
    assert job.units == "mm" and job.lumped[0][2] == pytest.approx((-0.010, 0.160, 0.030))
