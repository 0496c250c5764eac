"""The geometry blade engineers bring, end to end through the command line: CAD exports with
float noise, self-intersecting surfaces, hollow blades, inserts, open scans mended on request,
overlapping parts, a scan that crosses itself in a comparison (docs/CONVENTIONS.md §8).

References outside the project: trimesh's mass properties and plane sections of the clean
solids (the reference integration), manifold3d's union, closed-form box volumes, and the fact
that a flat fold keeps a closed surface's signed volume (Green's theorem — from memory).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import trimesh

from .geohelp import (DEMO, assemble, cad_export, coplanar_fan_box, demo_arrays, fanned_tip_blade, folded_sphere,
                      inertia_hub, moments_mm, on_disk, open_root, pierced_box, shank_cylinder, write)
from .test_cli import assert_refused, leftovers, run

RHO = 2810.0  # kg/m^3 (any value: both sides use the same)
STEEL = 7850.0  # kg/m^3


def demo_mesh():
    v, f = demo_arrays()
    return trimesh.Trimesh(v, f, process=False)


def trimesh_mass(v_mm, f, rho=RHO):
    """trimesh's mass of a closed surface in mm (the reference integration)."""
    m = trimesh.Trimesh(np.asarray(v_mm) * 1e-3, f, process=False)
    m.density = rho
    return float(m.mass)


def report(path):
    return json.loads(Path(path).read_text())


# --------------------------------------------------------------------------- CAD exports


def test_a_facet_by_facet_cad_export_gives_the_clean_blades_mass(tmp_path, capsys):
    v, f = demo_arrays()
    corners, soup = cad_export(v, f, np.random.default_rng(11), np.float32)
    path = write(tmp_path / "cad_export.stl", corners, soup)
    out = tmp_path / "m.json"
    code, _, err = run(["mass", path, "--units", "mm", "--density", str(RHO), "--json", out], capsys)
    assert code == 0, err
    g = report(out)["geometry"]
    assert g["welded_vertices"] > 0 and g["weld"].startswith("the surface was open")
    assert f"warning: welded {g['welded_vertices']} vertices lying within" in " ".join(err.split())
    # trimesh's mass of the clean blade, to the float32 rounding of the export (~6e-8 relative)
    assert report(out)["mass_properties"]["mass_kg"] == pytest.approx(trimesh_mass(v, f), rel=1e-6)


# --------------------------------------------------------------------------- self-intersection


def family(name):
    if name == "pierced":
        return pierced_box()[:2]
    return {"folded": folded_sphere, "fanned cap": fanned_tip_blade, "coplanar overlap": coplanar_fan_box}[name]()


@pytest.mark.parametrize("command", ["mass", "loads", "span"])
@pytest.mark.parametrize("name", ["pierced", "folded", "fanned cap", "coplanar overlap"])
def test_each_self_intersecting_family_is_refused_before_any_figure(tmp_path, capsys, name, command):
    path = write(tmp_path / "blade.stl", *family(name))
    out = tmp_path / "out.json"
    argv = [command, path, "--units", "mm", "--density", str(RHO), "--json", out]
    if command != "mass":
        argv += ["--rpm", "2500", "--pitch-change", "0"]
    code, text, err = run(argv, capsys)
    line = assert_refused(code, err, path.name, out, "self-intersecting face pair")
    assert " mm, within box (" in line and line.endswith("mend it with --repair (or in a CAD or scan tool)")
    assert "kg" not in text  # nothing was printed


def test_a_folded_tip_cap_is_mended_on_request(tmp_path, capsys):
    v, f = fanned_tip_blade()
    v = on_disk(v)
    path = write(tmp_path / "tip.stl", v, f)
    out = tmp_path / "m.json"
    code, _, err = run(["mass", path, "--units", "mm", "--density", str(RHO), "--repair", "--json", out], capsys)
    assert code == 0, err
    r = report(out)
    (rec,) = r["repairs"]
    assert rec["what"].startswith("re-triangulated a flat region of 40 faces") and rec["faces_removed"] == 40
    assert f"repaired: {path}: re-triangulated" in " ".join(err.split())
    mended = tmp_path / "tip_repaired.stl"
    assert r["geometry"]["repaired_surface"] == str(mended) and mended.exists()
    assert trimesh.load(mended).is_watertight
    # the fold is flat: the damaged surface's signed volume, by trimesh (Green's theorem)
    assert r["mass_properties"]["mass_kg"] == pytest.approx(trimesh_mass(v, f), rel=1e-9)
    # the mended file is there now: refused before any work without --force
    code, _, err = run(["mass", path, "--units", "mm", "--density", str(RHO), "--repair", "--json",
                        tmp_path / "again.json"], capsys)
    assert code == 2 and "tip_repaired.stl" in err and not (tmp_path / "again.json").exists()


@pytest.mark.parametrize("name", ["pierced", "folded"])
def test_a_surface_the_repair_cannot_mend_is_still_refused(tmp_path, capsys, name):
    path = write(tmp_path / "blade.stl", *family(name))
    out = tmp_path / "out.json"
    code, _, err = run(["loads", path, "--units", "mm", "--density", str(RHO), "--rpm", "2500", "--repair",
                        "--json", out], capsys)
    line = assert_refused(code, err, path.name, out, "self-intersecting face pair")
    assert line.endswith("--repair could not mend it; mend it in a CAD or scan tool")
    assert not (tmp_path / "blade_repaired.stl").exists()


# --------------------------------------------------------------------------- open scans, overlaps


def test_an_open_root_is_mended_to_the_closed_blades_mass(tmp_path, capsys):
    v, f = open_root()
    path = write(tmp_path / "scan.stl", v, f)
    out = tmp_path / "m.json"
    code, _, err = run(["mass", path, "--units", "mm", "--density", str(RHO), "--json", out], capsys)
    assert_refused(code, err, path.name, out, "open surface")
    assert "--repair" in err
    code, _, err = run(["mass", path, "--units", "mm", "--density", str(RHO), "--repair", "--json", out], capsys)
    assert code == 0, err
    r = report(out)
    # trimesh's mass of the closed original: the root is planar, so its own plane closes it
    cv, cf = demo_arrays()
    assert r["mass_properties"]["mass_kg"] == pytest.approx(trimesh_mass(cv, cf), rel=1e-12)
    (rec,) = r["repairs"]
    assert rec["what"].startswith("filled a planar hole of 120 edges") and rec["faces_added"] == 118
    assert rec["volume_added"] == 0.0 and rec["unit"] == "mm" and rec["where"][1] == pytest.approx(110.0)
    assert rec["where_m"][1] == pytest.approx(0.110) and rec["volume_added_m3"] == 0.0
    mended = Path(r["geometry"]["repaired_surface"])
    assert mended == tmp_path / "scan_repaired.stl"
    m = trimesh.load(mended)
    assert m.is_watertight and trimesh_mass(m.vertices, m.faces) == pytest.approx(trimesh_mass(cv, cf), rel=1e-9)
    assert leftovers(tmp_path) == []


def test_without_an_output_file_the_mended_surface_is_not_written(tmp_path, capsys):
    path = write(tmp_path / "scan.stl", *open_root())
    code, _, err = run(["mass", path, "--units", "mm", "--density", str(RHO), "--repair"], capsys)
    assert code == 0, err
    assert "not written: give --json FILE" in " ".join(err.split())
    assert sorted(p.name for p in tmp_path.iterdir()) == ["scan.stl"]


def test_the_repair_bound_is_refused_and_can_be_raised(tmp_path, capsys):
    s = trimesh.creation.icosphere(subdivisions=3, radius=50.0)
    c = s.triangles_center
    path = write(tmp_path / "scan.stl", s.vertices, s.faces[~((c[:, 0] > 15) & (c[:, 2] > 15))])
    out = tmp_path / "m.json"
    code, _, err = run(["mass", path, "--units", "mm", "--density", str(RHO), "--repair", "--json", out], capsys)
    line = assert_refused(code, err, path.name, out, "the repair would change the volume by")
    assert "(--repair-limit)" in line and "more than the 1 % allowed" in line
    code, _, err = run(["mass", path, "--units", "mm", "--density", str(RHO), "--repair", "--repair-limit", "10",
                        "--json", out], capsys)
    assert code == 0, err
    assert report(out)["repairs"][0]["what"].startswith("filled a")


def test_overlapping_parts_of_one_material_are_united(tmp_path, capsys):
    import manifold3d as mf

    a = trimesh.creation.box([60.0, 300.0, 12.0])
    a.apply_translation([0.0, 400.0, 0.0])
    b = trimesh.creation.box([40.0, 200.0, 20.0])
    b.apply_translation([10.0, 520.0, 3.0])
    path = write(tmp_path / "parts.stl", *assemble((a, False), (b, False)))
    out = tmp_path / "m.json"
    code, _, err = run(["mass", path, "--units", "mm", "--density", str(RHO), "--json", out], capsys)
    assert_refused(code, err, path.name, out, "overlap")
    code, _, err = run(["mass", path, "--units", "mm", "--density", str(RHO), "--repair", "--json", out], capsys)
    assert code == 0, err

    def solid(m):
        return mf.Manifold(mf.Mesh64(vert_properties=np.asarray(m.vertices, float) * 1e-3,
                                     tri_verts=np.asarray(m.faces, np.uint64)))

    union = (solid(a) + solid(b)).volume()  # manifold3d's union of the two parts
    assert report(out)["mass_properties"]["mass_kg"] == pytest.approx(RHO * union, rel=1e-9)
    assert report(out)["repairs"][0]["what"].startswith("united 2 overlapping parts")


# --------------------------------------------------------------------------- hollow blades and inserts


BORE = (20.0, 125.0, 215.0)  # a lightening bore in the demo blade's circular shank (r = 38 mm, 110..230)
SLUG = (8.0, 150.0, 185.0)   # a steel balance slug in the shank


def test_a_hollow_blade_weighs_the_outer_solid_minus_its_cavity(tmp_path, capsys):
    blade, bore = demo_mesh(), shank_cylinder(*BORE)
    path = write(tmp_path / "hollow.stl", *assemble((blade, False), (bore, True)))
    out = tmp_path / "m.json"
    code, _, err = run(["mass", path, "--units", "mm", "--density", str(RHO), "--json", out], capsys)
    assert code == 0, err
    r = report(out)
    assert r["geometry"]["cavities"] == 1 and "body 1 is hollow: 1 cavity" in " ".join(err.split())
    # trimesh's moments of the outer solid minus those of the bore
    (vo, fo, so), (vc, fc, sc) = moments_mm(blade), moments_mm(bore)
    mass, cg, inertia = inertia_hub(vo - vc, fo - fc, so - sc, RHO)
    mp = r["mass_properties"]
    assert mp["mass_kg"] == pytest.approx(mass, rel=1e-12)
    assert np.allclose(mp["cg_m"], cg, rtol=0, atol=1e-12)
    assert np.allclose(mp["inertia_hub_kgm2"], inertia, rtol=0, atol=1e-12 * np.trace(inertia))
    # the blade angle is read on the outer contour at 0.75 R, untouched by the shank bore
    assert r["blade_angle"]["modelled_deg"] == pytest.approx(25.0, abs=0.05)


def test_span_cuts_the_hollow_blade_through_its_cavity(tmp_path, capsys):
    blade, bore = demo_mesh(), shank_cylinder(*BORE)
    path = write(tmp_path / "hollow.stl", *assemble((blade, False), (bore, True)))
    out = tmp_path / "s.json"
    code, _, err = run(["span", path, "--units", "mm", "--density", str(RHO), "--rpm", "2500", "--stations",
                        "170,600", "--json", out], capsys)
    assert code == 0, err
    rows = report(out)["spanwise"]

    def area(mesh, y):  # trimesh's plane section, mm² -> m²
        return mesh.section([0, 1.0, 0], [0, y, 0]).to_2D()[0].area * 1e-6

    assert rows[0]["area_m2"] == pytest.approx(area(blade, 170.0) - area(bore, 170.0), rel=1e-9)  # an annulus
    assert rows[1]["area_m2"] == pytest.approx(area(blade, 600.0), rel=1e-9)
    # everything outboard of 170 mm: trimesh's moments of the outboard halves, blade minus bore
    part = trimesh.intersections.slice_mesh_plane(blade, [0, 1.0, 0], [0, 170.0, 0], cap=True)
    hole = trimesh.intersections.slice_mesh_plane(bore, [0, 1.0, 0], [0, 170.0, 0], cap=True)
    assert rows[0]["mass_outboard_kg"] == pytest.approx(RHO * (part.volume - hole.volume) * 1e-9, rel=1e-9)


def insert_file(tmp_path):
    blade, slug = demo_mesh(), shank_cylinder(*SLUG)
    return blade, slug, write(tmp_path / "slug.stl", *assemble((blade, False), (slug, False)))


def test_an_insert_weighs_as_the_sum_of_its_bodies(tmp_path, capsys):
    blade, slug, path = insert_file(tmp_path)
    out = tmp_path / "m.json"
    code, _, err = run(["mass", path, "--units", "mm", "--material", "al-2025-t6", "--density", "x", "--json", out],
                       capsys)
    assert code == 2  # --density and --material together: usage
    code, _, err = run(["mass", path, "--units", "mm", "--density", str(RHO), "--density", str(STEEL),
                        "--json", out], capsys)
    assert code == 0, err
    r = report(out)
    assert [(b["kind"], b["host"]) for b in r["geometry"]["bodies"]] == [("body", None), ("insert", "body 1")]
    # the host minus the slug's volume at the host's density, plus the slug at its own (trimesh)
    (vb, fb, sb), (vs, fs, ss) = moments_mm(blade), moments_mm(slug)
    first = RHO * (fb - fs) + STEEL * fs
    second = RHO * (sb - ss) + STEEL * ss
    mass = RHO * (vb - vs) + STEEL * vs
    mp = r["mass_properties"]
    assert mp["mass_kg"] == pytest.approx(mass, rel=1e-12)
    assert np.allclose(mp["cg_m"], first / mass, rtol=0, atol=1e-12)
    inertia = np.trace(second) * np.eye(3) - second
    assert np.allclose(mp["inertia_hub_kgm2"], inertia, rtol=0, atol=1e-12 * np.trace(inertia))


def test_an_insert_without_its_own_density_is_refused_naming_it(tmp_path, capsys):
    _, _, path = insert_file(tmp_path)
    out = tmp_path / "m.json"
    code, _, err = run(["mass", path, "--units", "mm", "--density", str(RHO), "--json", out], capsys)
    line = assert_refused(code, err, "--density", out, "body 2 is an insert nested in body 1")
    assert "one density per body" in line


def test_span_cuts_an_insert_with_each_bodys_density(tmp_path, capsys):
    blade, slug, path = insert_file(tmp_path)
    out = tmp_path / "s.json"
    code, _, err = run(["span", path, "--units", "mm", "--density", str(RHO), "--density", str(STEEL), "--rpm",
                        "2500", "--stations", "170,600", "--json", out], capsys)
    assert code == 0, err
    row = report(out)["spanwise"][0]
    part = trimesh.intersections.slice_mesh_plane(blade, [0, 1.0, 0], [0, 170.0, 0], cap=True)
    core = trimesh.intersections.slice_mesh_plane(slug, [0, 1.0, 0], [0, 170.0, 0], cap=True)
    want = (RHO * (part.volume - core.volume) + STEEL * core.volume) * 1e-9  # trimesh's outboard volumes
    assert row["mass_outboard_kg"] == pytest.approx(want, rel=1e-9)
    # the section is the whole shank disc: the host's annulus and the slug's disc
    assert row["area_m2"] == pytest.approx(blade.section([0, 1.0, 0], [0, 170.0, 0]).to_2D()[0].area * 1e-6, rel=1e-9)


@pytest.mark.slow
@pytest.mark.parametrize("kind", ["hollow", "insert"])
def test_the_whole_review_runs_on_a_hollow_blade_and_an_insert(tmp_path, capsys, kind):
    blade = demo_mesh()
    if kind == "hollow":
        v, f = assemble((blade, False), (shank_cylinder(*BORE), True))
        density = f'density = "{RHO} kg/m^3"'
    else:
        v, f = assemble((blade, False), (shank_cylinder(*SLUG), False))
        density = f'density = ["{RHO} kg/m^3", "{STEEL} kg/m^3"]'
    write(tmp_path / "blade.stl", v, f)
    job = tmp_path / "job.toml"
    job.write_text(f'mesh = "blade.stl"\nunits = "mm"\n{density}\nstations = 8\n'
                   '[[operating_point]]\nrpm = 2500\nblade_angle = 25.0\n')
    code, _, err = run(["check", job, "--out", tmp_path / "review"], capsys)
    assert code == 0, err
    r = report(tmp_path / "review" / "report.json")
    mp, ef = r["mass_properties"], r["element_fields"]
    assert mp["surface_check_ok"]  # the elements fill exactly each body's material
    assert r["geometry"]["cavities" if kind == "hollow" else "inserts"] == 1
    names = {p.name for p in (tmp_path / "review").iterdir()}
    assert {"render_ctm_planform.png", "render_clipped.png", "elements.vtu", "spanwise.csv"} <= names
    import pyvista as pv

    grid = pv.read(tmp_path / "review" / "elements.vtu")
    bodies = np.unique(np.asarray(grid.cell_data["body"]))
    assert bodies.tolist() == ([0] if kind == "hollow" else [0, 1])
    assert float(np.sum(grid.cell_data["mass_kg"])) == pytest.approx(mp["mass_kg"], rel=1e-9)
    assert ef is not None


def test_the_blade_angle_of_a_hollow_plate_is_read_on_its_outer_contour(tmp_path, capsys):
    # a flat plate set at 30 deg with a slot inside: a square-edged plate reads its plate angle
    # (docs/CONVENTIONS.md §2), the slot's contour is not used
    plate = trimesh.creation.box([100.0, 600.0, 12.0])
    slot = trimesh.creation.box([60.0, 400.0, 6.0])
    slot.apply_translation([10.0, 0.0, 1.0])
    turn = trimesh.transformations.rotation_matrix(np.radians(30.0), [0, 1.0, 0])
    for m in (plate, slot):
        m.apply_transform(turn)
        m.apply_translation([0.0, 500.0, 0.0])
    v, f = assemble((plate, False), (slot, True))
    v = on_disk(v)
    path = write(tmp_path / "plate.stl", v, f)
    out = tmp_path / "m.json"
    code, _, err = run(["mass", path, "--units", "mm", "--density", str(RHO), "--json", out], capsys)
    assert code == 0, err
    r = report(out)
    assert abs(r["blade_angle"]["modelled_deg"]) == pytest.approx(30.0, abs=1e-5)  # float32 corners on disk
    assert r["mass_properties"]["volume_m3"] == pytest.approx((100 * 600 * 12 - 60 * 400 * 6) * 1e-9, rel=1e-6)
    assert r["mass_properties"]["volume_m3"] == pytest.approx(trimesh.Trimesh(v, f).volume * 1e-9, rel=1e-12)


# --------------------------------------------------------------------------- compare


def test_compare_refuses_a_scan_that_crosses_itself(tmp_path, capsys):
    v, f = demo_arrays()
    scan = v.copy()
    k = int(np.flatnonzero(np.isclose(v[:, 1], 600.0, atol=20))[0])  # a vertex at mid-span
    centre = v[np.isclose(v[:, 1], v[k, 1], atol=5)].mean(axis=0)
    scan[k] = centre + 3.0 * (centre - v[k])  # pushed through the far side of the section
    path = write(tmp_path / "scan.stl", scan, f)
    lim = tmp_path / "limits.toml"
    lim.write_text('source = "test data"\nremoved_volume = "12000 mm^3"\n')
    out = tmp_path / "cmp.json"
    code, _, err = run(["compare", path, "--reference", DEMO, "--units", "mm", "--density", str(RHO), "--rpm",
                        "2500", "--transform", "identity", "--limits", lim, "--json", out], capsys)
    line = assert_refused(code, err, path.name, out, "self-intersecting face pair")
    assert "--repair" in line
