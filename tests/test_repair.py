"""Opt-in repair of damaged surfaces: each damage case against a reference outside the project.

References: trimesh's mass properties of the original closed demo blade, manifold3d's union of
the original overlapping parts, trimesh's watertight/winding checks, and the shoelace fact that
a fan from any point in the plane of a closed outline has the outline's signed area (Green's
theorem — from memory), so a flat fold does not change the signed volume.
"""

from __future__ import annotations

import json
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
import trimesh

from bladesolid.demo import BladeParams, section_rings
from bladesolid.errors import InputError
from bladesolid.repair import repair_surface

DEMO = Path(__file__).resolve().parents[1] / "meshes" / "demo_blade.stl"
RHO = 2810.0  # kg/m^3, the demo's density (any value would do: both sides use the same)


@pytest.fixture(scope="module")
def demo_mm():
    m = trimesh.load(DEMO, force="mesh")  # merged vertices, mm
    assert m.is_watertight
    return np.asarray(m.vertices), np.asarray(m.faces, dtype=np.int64)


def mass_kg(v_mm, f):
    """trimesh's mass of a closed surface in mm at RHO (reference integration)."""
    m = trimesh.Trimesh(np.asarray(v_mm) * 1e-3, f, process=False)
    m.density = RHO
    return float(m.mass)


def fanned_tip_blade(n_chord=40, n_span=12, camber=0.04, thickness_tip=0.03):
    """The demo loft cut before its rounded tip and closed by a fan from the mean of the last
    (thin, cambered) section's points: the fan folds over itself. mm."""
    p = replace(BladeParams(), camber=camber, thickness_tip=thickness_tip, n_chord=n_chord, n_span=n_span)
    rings, _, _, root_centre = section_rings(p)
    rings = rings[:n_span]
    k, n = rings.shape[:2]
    v = np.vstack([rings.reshape(-1, 3), root_centre, rings[-1].mean(axis=0)])
    i = np.arange(n)
    j = (i + 1) % n
    bands = [np.column_stack([r * n + i, r * n + j, (r + 1) * n + j, r * n + i, (r + 1) * n + j, (r + 1) * n + i])
             .reshape(-1, 3) for r in range(k - 1)]
    f = np.vstack(bands + [np.column_stack([np.full(n, k * n), j, i]),
                           np.column_stack([np.full(n, k * n + 1), (k - 1) * n + i, (k - 1) * n + j])])
    if trimesh.Trimesh(v, f, process=False).volume < 0:
        f = f[:, ::-1]
    return v, np.ascontiguousarray(f)


def assert_sound(v, f):
    m = trimesh.Trimesh(v, f, process=False)
    assert m.is_watertight and m.is_winding_consistent and m.volume > 0


def test_a_clean_surface_comes_back_unchanged(demo_mm):
    v, f = demo_mm
    r = repair_surface(v, f)
    assert r.repairs == () and r.records() == [] and not r.changed
    assert np.array_equal(r.vertices, v) and np.array_equal(r.faces, f)


def test_an_open_root_is_closed_to_the_closed_blade_mass(demo_mm, tmp_path):
    v, f = demo_mm
    root = np.isclose(v[:, 1], v[:, 1].min())  # the planar butt face of the shank
    cap = root[f].all(axis=1)
    assert cap.sum() >= 100
    r = repair_surface(v, f[~cap], unit="mm")
    assert_sound(r.vertices, r.faces)
    # planar outline closed in its own plane: the mass of the original closed blade to round-off
    assert mass_kg(r.vertices, r.faces) == pytest.approx(mass_kg(v, f), rel=1e-12)
    (rec,) = r.records()
    assert rec["what"].startswith("filled a planar hole of") and "mm²" in rec["what"]
    n_loop = int(rec["what"].split("of ")[1].split()[0])
    assert rec["faces_added"] == n_loop - 2 and rec["faces_removed"] == 0  # no new vertex
    assert rec["volume_added"] == 0.0 and rec["volume_removed"] == 0.0
    assert rec["where"][1] == pytest.approx(v[:, 1].min())
    json.dumps(r.records())
    # the loader accepts the mended surface and TetGen fills it
    from bladesolid import io
    from bladesolid.mesh import mass_elements, tet_signed_volumes

    path = tmp_path / "mended.stl"
    io.write_surface(path, r.vertices, r.faces)
    (body,) = io.read_mesh(path, "mm").bodies
    tm = mass_elements([body])
    assert tet_signed_volumes(tm.nodes, tm.tets).sum() * RHO == pytest.approx(mass_kg(v, f), rel=1e-9)


def test_several_small_holes_are_filled(demo_mm):
    v, f = demo_mm
    m = trimesh.Trimesh(v, f, process=False)
    rng = np.random.default_rng(7)
    drop = set()
    for k in rng.choice(np.arange(1000, len(f) - 1000, 37), 6, replace=False):
        drop.add(int(k))
        drop.add(int(m.face_adjacency[m.face_adjacency[:, 0] == k][0, 1]))
    keep = np.ones(len(f), dtype=bool)
    keep[list(drop)] = False
    r = repair_surface(v, f[keep], unit="mm")
    assert_sound(r.vertices, r.faces)
    assert len(r.repairs) == 6 and all(x.what.startswith("filled a") for x in r.repairs)
    assert sum(x.faces_added for x in r.repairs) == len(drop)
    # each hole is a quad of two lofted triangles, nearly flat: the mass within 1e-6 (common
    # practice, no source; the two diagonals of such a quad differ by ~1e-8 of the blade)
    assert mass_kg(r.vertices, r.faces) == pytest.approx(mass_kg(v, f), rel=1e-6)
    assert 0 < r.volume_change < 1e-6


def test_a_fanned_cambered_tip_cap_that_folds_is_retriangulated(tmp_path, monkeypatch):
    from bladesolid.mesh import mass_elements, tet_signed_volumes

    v, f = fanned_tip_blade()
    monkeypatch.chdir(tmp_path)
    with pytest.raises(InputError, match="crashed"):  # what the user met before --repair
        mass_elements([type("B", (), {"vertices": v * 1e-3, "faces": f, "tets": None})()])
    r = repair_surface(v, f, unit="mm")
    assert_sound(r.vertices, r.faces)
    (rec,) = r.records()
    assert rec["what"].startswith("re-triangulated a flat region of 40 faces")
    assert rec["faces_removed"] == 40 and rec["faces_added"] == 38  # outline of 40, no new vertex
    assert len(r.vertices) == len(v) - 1  # the fan's apex is gone
    # a flat fold has the outline's signed area (Green's theorem): same signed volume
    assert trimesh.Trimesh(r.vertices, r.faces, process=False).volume == pytest.approx(
        trimesh.Trimesh(v, f, process=False).volume, rel=1e-12)
    tm = mass_elements([type("B", (), {"vertices": r.vertices * 1e-3, "faces": r.faces, "tets": None})()])
    assert tet_signed_volumes(tm.nodes, tm.tets).sum() == pytest.approx(r.volume * 1e-9, rel=1e-9)
    assert list(tmp_path.iterdir()) == []


def test_overlapping_parts_of_one_material_are_united():
    import manifold3d as mf

    a = trimesh.creation.box([60.0, 300.0, 12.0])
    b = trimesh.creation.box([40.0, 200.0, 20.0])
    b.apply_translation([10.0, 120.0, 3.0])
    v = np.vstack([a.vertices, b.vertices])
    f = np.vstack([a.faces, b.faces + len(a.vertices)])
    r = repair_surface(v, f, unit="mm")
    assert_sound(r.vertices, r.faces)

    def solid(m):
        return mf.Manifold(mf.Mesh64(vert_properties=np.asarray(m.vertices, float),
                                     tri_verts=np.asarray(m.faces, np.uint64)))

    union = (solid(a) + solid(b)).volume()  # manifold3d's own union of the originals
    assert r.volume == pytest.approx(union, rel=1e-12)
    (rec,) = r.records()
    assert rec["what"].startswith("united 2 overlapping parts")
    assert rec["volume_removed"] == pytest.approx(a.volume + b.volume - union, rel=1e-9)
    # a union changes no occupied point: not counted against the bound
    assert r.volume_change == 0.0
    # the common part is the box [-10, 30] x [20, 150] x [-6, 6]: its centre
    np.testing.assert_allclose(rec["where"], [10.0, 85.0, 0.0], atol=1e-9)


def test_duplicated_faces_are_dropped(demo_mm):
    v, f = demo_mm
    dup = np.vstack([f, f[::500]])
    r = repair_surface(v, dup)
    assert np.array_equal(r.faces, f) and np.array_equal(r.vertices, v)
    (rec,) = r.records()
    assert rec["faces_removed"] == len(f[::500]) and rec["what"] == f"removed {len(f[::500])} duplicate faces"


def test_unwelded_faces_and_an_internal_double_wall():
    """Two boxes exported face by face (no shared vertices) that touch along one face: welded,
    the shared face's two opposite copies dropped, one closed solid of the summed volume."""
    a = trimesh.creation.box([1.0, 1.0, 1.0])
    mirrored = a.triangles[:, ::-1] * [-1.0, 1.0, 1.0] + [1.0, 0.0, 0.0]  # a mirrored in x = 0.5
    tri = np.vstack([a.triangles, mirrored])
    v = tri.reshape(-1, 3)
    f = np.arange(len(v)).reshape(-1, 3)
    r = repair_surface(v, f)
    assert_sound(r.vertices, r.faces)
    assert r.volume == pytest.approx(2.0, rel=1e-12)
    whats = [x.what for x in r.repairs]
    assert whats[0].startswith("welded") and any("double walls" in w for w in whats)
    assert len(r.faces) == 20 and len(r.vertices) == 12


def test_a_large_change_is_refused_and_can_be_allowed():
    """A hole across the corner of a sphere: its outline is far from flat, so the patch decides
    a good deal of volume (about 4 % here) — refused at the default 1 %."""
    s = trimesh.creation.icosphere(subdivisions=3)
    c = s.triangles_center
    keep = ~((c[:, 0] > 0.3) & (c[:, 2] > 0.3))
    with pytest.raises(InputError) as info:
        repair_surface(s.vertices, s.faces[keep], source="scan.stl", unit="mm")
    msg = str(info.value)
    assert msg.startswith("scan.stl: the repair would change the volume by")
    assert "more than the 1 % allowed" in msg and "non-planar hole" in msg and "\n" not in msg
    r = repair_surface(s.vertices, s.faces[keep], max_volume_change=0.1)
    (rec,) = r.repairs
    assert r.volume_change == pytest.approx((rec.volume_added + rec.volume_removed) / r.volume)
    assert 0.01 < r.volume_change < 0.1
    assert_sound(r.vertices, r.faces)
    # the refusal is about the bound, not the surface: a tiny bound refuses small holes too
    t = trimesh.creation.icosphere(subdivisions=3)
    pair = [0, int(t.face_adjacency[t.face_adjacency[:, 0] == 0][0, 1])]  # a quad hole
    with pytest.raises(InputError, match="more than the"):
        repair_surface(t.vertices, np.delete(t.faces, pair, axis=0), max_volume_change=1e-9)


def test_flipped_faces_and_an_inside_out_shell_are_turned_round():
    """A box with two faces flipped, and a second box entirely inside out; a cavity wound
    inward inside a third box stays a cavity (volumes from trimesh's boxes)."""
    a = trimesh.creation.box([1.0, 1.0, 1.0])
    fa = a.faces.copy()
    fa[[0, 5]] = fa[[0, 5]][:, ::-1]
    b = trimesh.creation.box([1.0, 1.0, 1.0])
    b.apply_translation([3.0, 0.0, 0.0])
    host = trimesh.creation.box([2.0, 2.0, 2.0])
    host.apply_translation([0.0, 5.0, 0.0])
    hole = trimesh.creation.box([1.0, 1.0, 1.0])
    hole.apply_translation([0.0, 5.0, 0.0])
    parts = [(a.vertices, fa), (b.vertices, b.faces[:, ::-1]), (host.vertices, host.faces), (hole.vertices, hole.faces[:, ::-1])]
    v = np.vstack([p[0] for p in parts])
    offsets = np.cumsum([0] + [len(p[0]) for p in parts])
    f = np.vstack([p[1] + o for p, o in zip(parts, offsets)])
    r = repair_surface(v, f)
    assert_sound(r.vertices, r.faces)
    assert r.volume == pytest.approx(1.0 + 1.0 + 8.0 - 1.0, rel=1e-12)
    whats = [x.what for x in r.repairs]
    assert whats == ["turned 2 faces wound against their neighbours",
                     "turned a closed shell of 12 faces that was wound inside out"]


def test_a_folded_flat_face_with_a_hole_in_it_keeps_its_hole():
    """The flat top of a tube, where one quad was replaced by a fan from a point outside it
    (a fold): the whole top is re-triangulated as an annulus, the bore stays open, and the
    volume is the tube's (trimesh's annulus; Green's theorem for the flat fold — from memory)."""
    tube = trimesh.creation.annulus(r_min=0.3, r_max=0.5, height=0.2, sections=24)
    v, f = np.asarray(tube.vertices), np.asarray(tube.faces, dtype=np.int64)
    top = np.flatnonzero(np.isclose(v[f][:, :, 2], 0.1).all(axis=1))
    m = trimesh.Trimesh(v, f, process=False)
    t0 = top[0]
    t1 = next(int(a + b - t0) for a, b in m.face_adjacency.tolist() if t0 in (a, b) and a + b - t0 in top)
    quad = trimesh.Trimesh(v, f[[t0, t1]], process=False)
    outline = quad.outline().entities[0].points[:-1]  # the quad's boundary, in order
    if trimesh.Trimesh(v, f[[t0]], process=False).face_normals[0, 2] * np.cross(
            v[outline[1]] - v[outline[0]], v[outline[2]] - v[outline[1]])[2] < 0:
        outline = outline[::-1]
    centre = v[outline].mean(axis=0)
    p = centre + 3.0 * np.array([centre[0], centre[1], 0.0])  # in the plane, outside the quad
    k = len(v)
    fan = np.array([[k, outline[i], outline[(i + 1) % 4]] for i in range(4)])
    v2 = np.vstack([v, p])
    f2 = np.vstack([np.delete(f, [t0, t1], axis=0), fan])
    assert trimesh.Trimesh(v2, f2, process=False).is_winding_consistent
    r = repair_surface(v2, f2)
    assert_sound(r.vertices, r.faces)
    assert r.volume == pytest.approx(tube.volume, rel=1e-12)
    (rec,) = r.repairs
    assert rec.what.startswith("re-triangulated a flat region") and rec.faces_removed == len(top) + 2
    assert rec.faces_added == len(top)  # an annulus of 2×24 corners: 48 triangles, no new vertex
    # the bore is still there: a point on the axis is outside the solid
    assert not trimesh.Trimesh(r.vertices, r.faces, process=False).contains([[0.0, 0.0, 0.0]])[0]
