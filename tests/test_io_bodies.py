"""From a raw surface to bodies (bladesolid.io.bodies through read_mesh): welding of CAD exports,
cavities and inserts, the self-intersection check before any integration, and the opt-in repair.

References outside the project: trimesh's mass properties and watertightness of the clean
solids; box and cylinder volumes in closed form; manifold3d's union of overlapping parts;
constructed geometry for where a surface crosses itself (tests/geohelp.py names each).
"""

from __future__ import annotations

import numpy as np
import pytest
import trimesh

from bladesolid.io import read_mesh

from .geohelp import (assemble, cad_export, coplanar_fan_box, fanned_tip_blade, folded_sphere, pierced_box,
                      write)
from .iohelp import box_arrays, refused


def volume_mm3(body):
    return abs(trimesh.Trimesh(body.vertices, body.faces, process=False).volume) * 1e9


# --------------------------------------------------------------------------- welding


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_a_noisy_cad_export_is_welded_to_the_clean_solid(tmp_path, dtype):
    clean = trimesh.creation.cylinder(radius=20.0, height=300.0, sections=64)  # centred: many zero coordinates
    v, f = cad_export(clean.vertices, clean.faces, np.random.default_rng(3), dtype)
    path = write(tmp_path / "export.stl", v, f)  # binary STL: float32 on disk either way
    loaded = read_mesh(path, "mm")
    (body,) = loaded.bodies
    g = loaded.geometry
    # every corner goes back to one vertex: the clean mesh's vertex count (constructed)
    assert len(body.vertices) == len(clean.vertices) and len(body.faces) == len(clean.faces)
    distinct = len(np.unique(v.astype(np.float32) + np.float32(0.0), axis=0))  # what the exact merge leaves
    assert g["welded_vertices"] == distinct - len(clean.vertices) > 0
    diag = np.linalg.norm(np.ptp(v, axis=0))
    assert g["weld_tolerance_m"] == pytest.approx(1e-6 * diag * 1e-3, rel=1e-6)
    assert g["weld"].startswith("the surface was open")
    assert any(w.startswith(f"welded {g['welded_vertices']} vertices") for w in loaded.warnings)
    # trimesh's volume of the clean solid, to float32 rounding (~6e-8 relative)
    assert volume_mm3(body) == pytest.approx(clean.volume, rel=1e-6)


def test_a_closed_surface_is_not_welded_by_default(tmp_path):
    # a 10 mm cube with one edge chamfered by a strip d = 2e-7 of the diagonal wide: the strip's
    # end edges are genuine (as on the fine demo blade's tip) and shorter than the default weld
    # distance (1e-6 of the diagonal)
    a = 10.0
    d = 2e-7 * a * np.sqrt(3.0)
    corners = [[x, y, z] for x in (0, a) for y in (0, a) for z in (0, a) if (x, y) != (a, a)]
    pts = np.array(corners + [[a - d, a, 0], [a, a - d, 0], [a - d, a, a], [a, a - d, a]])
    hull = trimesh.convex.convex_hull(pts)  # the chamfered cube (trimesh/qhull)
    path = tmp_path / "chamfered.ply"
    hull.export(path)  # float64 coordinates
    loaded = read_mesh(path, "mm")
    (body,) = loaded.bodies
    assert loaded.geometry["welded_vertices"] == 0 and loaded.geometry["weld"].startswith("not needed")
    assert len(body.faces) == len(hull.faces) and len(body.vertices) == 10
    assert volume_mm3(body) == pytest.approx(a**3 - a * d**2 / 2.0, rel=1e-12)  # cube minus the chamfer prism
    # a weld distance given is applied always: each pair of chamfer corners becomes one point
    welded = read_mesh(path, "mm", weld_tol=10 * d)
    assert welded.geometry["welded_vertices"] == 2 and welded.geometry["weld"] == "tolerance given"
    # the strip's two triangles collapse, and so does the triangle of each end face on its short edge
    assert welded.geometry["weld_dropped_faces"] == 4
    assert volume_mm3(welded.bodies[0]) == pytest.approx(a**3, rel=1e-6)


def test_parts_of_a_file_are_welded_each_on_its_own(tmp_path):
    # a core and a sheath sharing a face, exported facet by facet as two ASCII STL solids
    core = trimesh.creation.box([20.0, 300.0, 10.0])
    sheath = trimesh.creation.box([4.0, 300.0, 10.0])
    sheath.apply_translation([12.0, 0.0, 0.0])  # touches the core along x = 10
    rng = np.random.default_rng(5)
    vc, fc = cad_export(core.vertices, core.faces, rng)
    vs, fs = cad_export(sheath.vertices, sheath.faces, rng)
    v, f = np.vstack([vc, vs]), np.vstack([fc, fs + len(vc)])
    part = np.r_[np.zeros(len(vc), int), np.ones(len(vs), int)]
    loaded = read_mesh(write(tmp_path / "parts.stl", v, f, part), "mm")
    assert [len(b.vertices) for b in loaded.bodies] == [8, 8]  # never welded across the parts
    assert [volume_mm3(b) for b in loaded.bodies] == pytest.approx([core.volume, sheath.volume], rel=1e-12)


# --------------------------------------------------------------------------- cavities and inserts


def boxes(inner_reversed: bool, outer_reversed: bool = False):
    outer = trimesh.creation.box([40.0, 40.0, 40.0])
    inner = trimesh.creation.box([10.0, 20.0, 10.0])
    inner.apply_translation([5.0, -4.0, 3.0])
    return outer, inner, assemble((outer, outer_reversed), (inner, inner_reversed))


def test_a_shell_wound_into_the_void_is_a_cavity(tmp_path):
    outer, inner, (v, f) = boxes(inner_reversed=True)
    loaded = read_mesh(write(tmp_path / "hollow.stl", v, f), "mm")
    (body,) = loaded.bodies
    assert body.cavities == 1 and body.host == "" and len(body.faces) == 24
    assert volume_mm3(body) == pytest.approx(40.0**3 - 10 * 20 * 10, rel=1e-12)  # a³ − b·c·d
    g = loaded.geometry
    assert g["cavities"] == 1 and g["inserts"] == 0 and g["bodies"][0]["kind"] == "body"
    assert any("body 1 is hollow: 1 cavity" in w for w in loaded.warnings)


def test_a_file_wound_inside_out_throughout_keeps_its_cavity(tmp_path):
    _, _, (v, f) = boxes(inner_reversed=False, outer_reversed=True)
    loaded = read_mesh(write(tmp_path / "inverted.stl", v, f), "mm")
    (body,) = loaded.bodies
    assert body.cavities == 1 and volume_mm3(body) == pytest.approx(40.0**3 - 2000.0, rel=1e-12)
    assert any("flipped to point outward, and so were those of the 1 shell nested in it" in w for w in loaded.warnings)


def test_a_shell_wound_outward_inside_another_is_an_insert(tmp_path):
    _, _, (v, f) = boxes(inner_reversed=False)
    loaded = read_mesh(write(tmp_path / "insert.stl", v, f), "mm")
    host, insert = loaded.bodies
    assert (host.name, insert.name, insert.host, host.host) == ("body 1", "body 2", "body 1", "")
    # the host's boundary holds the insert's seat: its material is the box minus the insert
    assert len(host.faces) == 24 and volume_mm3(host) == pytest.approx(40.0**3 - 2000.0, rel=1e-12)
    assert volume_mm3(insert) == pytest.approx(2000.0, rel=1e-12)
    assert [b["kind"] for b in loaded.geometry["bodies"]] == ["body", "insert"]
    assert any("body 2 is an insert nested in body 1" in w for w in loaded.warnings)


def test_a_cavity_inside_a_cavity_is_refused_and_a_body_in_a_cavity_is_its_own(tmp_path):
    outer = trimesh.creation.box([40.0, 40.0, 40.0])
    mid = trimesh.creation.box([20.0, 20.0, 20.0])
    core = trimesh.creation.box([5.0, 5.0, 5.0])
    v, f = assemble((outer, False), (mid, True), (core, True))
    refused(write(tmp_path / "cc.stl", v, f), "lies inside another cavity")
    v, f = assemble((outer, False), (mid, True), (core, False))
    loaded = read_mesh(write(tmp_path / "loose.stl", v, f), "mm")
    assert [(b.cavities, b.host) for b in loaded.bodies] == [(1, ""), (0, "")]
    assert any("lies inside a cavity, in no material" in w for w in loaded.warnings)


def test_an_inner_shell_touching_the_outer_one_is_refused(tmp_path):
    outer = trimesh.creation.box([40.0, 40.0, 40.0])
    inner = trimesh.creation.box([10.0, 10.0, 10.0])
    inner.apply_translation([15.0, 0.0, 0.0])  # its face x = 20 lies on the outer face x = 20
    v, f = assemble((outer, False), (inner, True))
    text = refused(write(tmp_path / "touch.stl", v, f))
    assert "touches" in text or "crosses or touches" in text


# --------------------------------------------------------------------------- self-intersection


def families():
    v, f, apex = pierced_box()
    ring = apex + (v[4:8] - apex) / 3.0  # constructed: where the spike crosses the bottom z = 0
    lo, hi = ring.min(axis=0), ring.max(axis=0)
    return {
        "pierced": (v, f, (lo, hi), False),
        "folded": (*folded_sphere(), None, False),
        "fanned cap": (*fanned_tip_blade(), None, True),
        "coplanar overlap": (*coplanar_fan_box(), None, True),
    }


@pytest.mark.parametrize("name", ["pierced", "folded", "fanned cap", "coplanar overlap"])
def test_each_family_of_self_intersection_is_refused_in_one_line(tmp_path, name):
    v, f, box, mendable = families()[name]
    assert trimesh.Trimesh(v, f, process=False).is_watertight  # closed: only the crossing is wrong
    path = write(tmp_path / "bad.stl", v, f)
    text = refused(path, "self-intersecting face pair")
    assert " mm, within box (" in text and "the surface crosses itself" in text
    assert text.endswith("mend it with repair=True (or in a CAD or scan tool)")
    if box is not None:  # the box of the crossing, in the file's unit (float32 on disk)
        got = np.array([float(x) for x in text.split("within box (")[1].split(")")[0].split(",")])
        assert np.allclose(got, box[0], atol=1e-3)
    if mendable:
        loaded = read_mesh(path, "mm", repair=True)
        (rec,) = loaded.repairs
        assert rec["what"].startswith("re-triangulated a flat region") and loaded.mended is not None
        # a flat fold holds the outline's signed area: the enclosed volume is unchanged (Green's
        # theorem — from memory); trimesh's volume of the damaged surface is the reference
        assert volume_mm3(loaded.bodies[0]) == pytest.approx(trimesh.Trimesh(v, f, process=False).volume, rel=1e-6)
        assert loaded.geometry["self_intersecting_pairs"] == 0
    else:
        text = refused(path, "self-intersecting face pair", repair=True)
        assert text.endswith("repair=True could not mend it; mend it in a CAD or scan tool")


def test_overlapping_parts_of_one_material_are_refused_then_united(tmp_path):
    import manifold3d as mf

    a = trimesh.creation.box([60.0, 300.0, 12.0])
    b = trimesh.creation.box([40.0, 200.0, 20.0])
    b.apply_translation([10.0, 120.0, 3.0])
    v, f = assemble((a, False), (b, False))
    path = write(tmp_path / "two.stl", v, f)
    refused(path, "body 1 and body 2 overlap")
    assert "repair=True unites them" in refused(path)
    loaded = read_mesh(path, "mm", repair=True)
    (body,) = loaded.bodies

    def solid(m):
        return mf.Manifold(mf.Mesh64(vert_properties=np.asarray(m.vertices, float),
                                     tri_verts=np.asarray(m.faces, np.uint64)))

    assert volume_mm3(body) == pytest.approx((solid(a) + solid(b)).volume(), rel=1e-9)  # manifold3d's union
    assert [r["what"].split(" (")[0] for r in loaded.repairs] == ["united 2 overlapping parts"]


def test_a_repair_beyond_the_bound_is_refused_naming_the_parameter(tmp_path):
    # a hole across the corner of a sphere: its outline is far from flat, so the patch decides
    # about 4 % of the volume (test_repair.py); 1 % is the default bound
    s = trimesh.creation.icosphere(subdivisions=3, radius=50.0)
    c = s.triangles_center
    keep = ~((c[:, 0] > 15) & (c[:, 2] > 15))
    path = write(tmp_path / "scan.stl", s.vertices, s.faces[keep])
    refused(path, "open surface")
    text = refused(path, "(repair_limit_pct)", repair=True)
    assert "the repair would change the volume by" in text
    loaded = read_mesh(path, "mm", repair=True, repair_limit_pct=10.0)
    assert loaded.repairs[0]["what"].startswith("filled a")
    with pytest.raises(Exception, match="repair_limit_pct"):
        read_mesh(path, "mm", repair=True, repair_limit_pct=0.0)


def test_an_open_root_is_refused_naming_the_repair(tmp_path):
    v, f = box_arrays()
    text = refused(write(tmp_path / "open.stl", v, f[:-1]), "open surface")
    assert text.endswith("mend it with repair=True (or in a CAD or scan tool)")
