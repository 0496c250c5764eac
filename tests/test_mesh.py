"""The tetrahedraliser: isolated from the process, hollow bodies and inserts.

References: the ``tetgen`` package itself (the same switches called directly), trimesh's mass
properties of each closed shell (an independent surface integration), and the handbook formulas
of a rectangular prism and a thick-walled tube (Marks' Standard Handbook for Mechanical
Engineers, Sec. 3, table of mass moments of inertia — from memory).
"""

from __future__ import annotations

import os
import tempfile
import types
from dataclasses import replace

import numpy as np
import pytest
import trimesh

from bladesolid import mesh
from bladesolid.demo import BladeParams, section_rings
from bladesolid.errors import InputError
from bladesolid.moments import Moments, tet_volume_moments

ISOLATIONS = ["fork", "spawn"]


def fanned_tip_blade(n_chord=16, n_span=5, camber=0.04, thickness_tip=0.03):
    """The demo blade loft cut before its rounded tip and closed the quick way: the last
    (thin, cambered) section fanned from the mean of its points. The section is not star-shaped
    about that point, so the fan folds over itself (watertight, consistently wound, but
    self-intersecting). mm, hub frame."""
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


def body(v, f):
    return types.SimpleNamespace(vertices=np.asarray(v, float), faces=np.asarray(f, np.int64), tets=None)


def trimesh_moments(m: trimesh.Trimesh) -> Moments:
    """Volume moments about the origin from trimesh's mass properties (unit density)."""
    mp = m.mass_properties
    v, c = float(mp["volume"]), np.asarray(mp["center_mass"])
    # trimesh's inertia is about the centre of mass: I_o = I_c + V(|c|²1 − c cᵀ) (parallel axes);
    # second moments S = tr(I)/2·1 − I
    inertia = np.asarray(mp["inertia"]) + v * (c @ c * np.eye(3) - np.outer(c, c))
    second = 0.5 * np.trace(inertia) * np.eye(3) - inertia
    return Moments(v, v * c, second)


def assert_moments(a: Moments, b: Moments, rel=1e-10):
    assert a.mass == pytest.approx(b.mass, rel=rel)
    scale = abs(b.mass) * (np.sqrt(np.trace(b.second) / b.mass) + np.linalg.norm(b.cg))
    np.testing.assert_allclose(a.first, b.first, rtol=0, atol=rel * scale)
    np.testing.assert_allclose(a.second, b.second, rtol=0, atol=rel * np.linalg.norm(b.second))


# --- isolation -------------------------------------------------------------------------------------


@pytest.fixture
def private_tmp(tmp_path, monkeypatch):
    """Run in an empty working folder, with the temporary folder redirected to another
    empty folder, so that anything left behind is seen."""
    cwd, tmp = tmp_path / "cwd", tmp_path / "tmp"
    cwd.mkdir()
    tmp.mkdir()
    monkeypatch.chdir(cwd)
    monkeypatch.setattr(tempfile, "tempdir", str(tmp))
    return cwd, tmp


@pytest.mark.parametrize("isolation", ISOLATIONS)
def test_a_crash_in_the_child_is_one_input_error_and_the_caller_goes_on(private_tmp, isolation):
    box = trimesh.creation.box()
    grid = trimesh.creation.box().subdivide().subdivide()
    tet_volume_moments(*mesh.tetrahedralise_surface(grid.vertices, grid.faces))  # numba's threads up here first
    with pytest.raises(InputError) as info:
        mesh.run_tetgen(box.vertices, box.faces, "pYQO0", source="blade.stl", isolation=isolation, _fault="abort")
    msg = str(info.value)
    assert msg.startswith("blade.stl: the tetrahedraliser crashed on this surface (signal 6)")
    assert "--repair" in msg and "\n" not in msg
    # this process lives on and meshes the next surface
    out = mesh.run_tetgen(box.vertices, box.faces, "pYQO0", isolation=isolation)
    assert abs(mesh.tet_signed_volumes(out.nodes, out.tets)).sum() == pytest.approx(1.0, rel=1e-12)
    cwd, tmp = private_tmp
    assert os.listdir(cwd) == [] and os.listdir(tmp) == []


@pytest.mark.parametrize("isolation", ISOLATIONS)
def test_a_self_intersecting_fanned_tip_cap_is_refused_cleanly(private_tmp, isolation):
    v, f = fanned_tip_blade()
    m = trimesh.Trimesh(v, f, process=False)
    assert m.is_watertight and m.is_winding_consistent  # passes the loader's edge checks
    with pytest.raises(InputError) as info:
        mesh.mass_elements([body(v * 1e-3, f)], source="tip.stl", isolation=isolation)
    # TetGen 1.6 aborts in its allocator on this surface; should a later version refuse it
    # with an error instead, the message is the refusal one: either way one line, this file.
    assert str(info.value).startswith("tip.stl: the ")
    assert "self-intersecting" in str(info.value)
    cwd, tmp = private_tmp
    assert not [n for n in os.listdir(cwd) if n.startswith("tetgen-tmpfile")]
    assert os.listdir(cwd) == [] and os.listdir(tmp) == []


def test_the_fanned_cap_really_crashes_tetgen_1_6(private_tmp):
    """The case the isolation is for: the C library dies by SIGABRT (not a Python error)."""
    v, f = fanned_tip_blade()
    with pytest.raises(InputError, match=r"crashed on this surface \(signal 6\)"):
        mesh.run_tetgen(v * 1e-3, f, "pYQO0")


def test_elements_are_those_of_tetgen_called_directly(demo_mesh, private_tmp):
    """The isolated run changes nothing: the same switches through the tetgen package in this
    process give bit-identical nodes and elements; the input surface is kept bit for bit."""
    import tetgen

    v, f = demo_mesh.vertices, demo_mesh.faces
    nodes, tets = mesh.tetrahedralise_surface(v, f)
    centre = 0.5 * (v.min(axis=0) + v.max(axis=0))
    scale = float(np.max(v.max(axis=0) - v.min(axis=0)))
    ref_nodes, ref_tets = tetgen.TetGen((v - centre) / scale, f.astype(np.int32)).tetrahedralize(switches="pYQO0")[:2]
    assert np.array_equal(nodes[: len(v)], v)
    np.testing.assert_array_equal(nodes[len(v):], ref_nodes[len(v):] * scale + centre)
    assert np.array_equal(np.sort(tets, axis=1), np.sort(ref_tets.astype(np.int64), axis=1))
    assert (mesh.tet_signed_volumes(nodes, tets) > 0).all()
    # the fresh-interpreter route gives the very same elements
    n2, t2 = mesh.tetrahedralise_surface(v, f, isolation="spawn")
    assert np.array_equal(n2, nodes) and np.array_equal(t2, tets)
    assert os.listdir(private_tmp[1]) == []


def test_a_refusal_is_reported_not_crashed():
    """TetGen's own error (here: a surface that encloses nothing) comes back as TetGenRefused."""
    v = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0], [1, 1, 0]])
    with pytest.raises((mesh.TetGenRefused, InputError)):
        mesh.run_tetgen(v, np.array([[0, 1, 2], [1, 3, 2]]), "pYQ")


def test_quality_mesh_with_steiner_points_through_the_same_runner():
    """A radius–edge bound and a volume bound (switches q, a) without Y: TetGen splits the
    boundary too. The elements still fill the box exactly (volume from trimesh)."""
    box = trimesh.creation.box([1.0, 2.0, 3.0])
    out = mesh.run_tetgen(box.vertices, box.faces, "pq1.4a0.01Q")
    vol = mesh.tet_signed_volumes(out.nodes, out.tets)
    assert np.abs(vol).sum() == pytest.approx(box.volume, rel=1e-12)
    assert np.median(np.abs(vol)) <= 0.01  # the volume bound (TetGen lets a few exceed it)
    on_surface = np.isclose(np.abs(out.nodes), [0.5, 1.0, 1.5]).any(axis=1)
    assert on_surface.sum() > len(box.vertices)  # Steiner points on the boundary
    assert out.attributes is None  # no region attributes without A


def test_regions_and_holes_through_the_same_runner():
    """A sphere inside a cube: with a region point in each the elements carry the regions'
    attributes; with a hole point in the sphere the sphere stays empty (trimesh volumes)."""
    cube = trimesh.creation.box([2.0, 2.0, 2.0])
    ball = trimesh.creation.icosphere(subdivisions=2, radius=0.5)
    v = np.vstack([cube.vertices, ball.vertices])
    f = np.vstack([cube.faces, ball.faces + len(cube.vertices)])
    out = mesh.run_tetgen(v, f, "pYQA", regions=[(7, (0, 0, 0), 0), (9, (0.9, 0.9, 0.9), 0)])
    vol = np.abs(mesh.tet_signed_volumes(out.nodes, out.tets))
    assert set(np.unique(out.attributes)) == {7.0, 9.0}
    assert vol[out.attributes == 7].sum() == pytest.approx(ball.volume, rel=1e-12)
    assert vol[out.attributes == 9].sum() == pytest.approx(cube.volume - ball.volume, rel=1e-12)
    out = mesh.run_tetgen(v, f, "pYQ", holes=[(0.0, 0.0, 0.0)])
    vol = np.abs(mesh.tet_signed_volumes(out.nodes, out.tets))
    assert vol.sum() == pytest.approx(cube.volume - ball.volume, rel=1e-12)


@pytest.mark.slow
def test_batch_in_this_process_reports_the_crashing_blade_and_goes_on(tmp_path, monkeypatch):
    """A blade whose mesher dies is one failed row; the batch goes on. The fanned tip cap that
    used to crash TetGen is now refused earlier, by the self-intersection check, and mended
    with ``repair = true``; a crash of the mesher itself is made with the runner's fault hook."""
    import functools

    from bladesolid import batch

    monkeypatch.chdir(tmp_path)
    v, f = fanned_tip_blade()
    trimesh.Trimesh(v, f, process=False).export(tmp_path / "tip.stl")
    trimesh.creation.box([60.0, 400.0, 12.0]).apply_translation([0, 300, 0]).export(tmp_path / "bar.stl")
    jobs = tmp_path / "jobs"
    jobs.mkdir()
    for stem, mesh_name, extra in (("bar", "bar", ""), ("tip", "tip", ""), ("tip-mended", "tip", "repair = true\n")):
        (jobs / f"{stem}.toml").write_text(
            f'name = "{stem}"\nmesh = "{tmp_path / (mesh_name + ".stl")}"\nunits = "mm"\ndensity = "2810 kg/m^3"\n'
            f'{extra}[[operating_point]]\nrpm = 2000\nblade_angle = 20.0\n')
    result = batch.run_batch([jobs], tmp_path / "out", command="check", workers=0)
    rows = {r["name"] or os.path.basename(r["job"]): r for r in result.rows}
    assert rows["bar"]["status"] == "ok" and rows["tip-mended"]["status"] == "ok"
    bad = rows["tip.toml"]
    assert bad["status"] == "bad input" and "tip.stl" in bad["reason"]
    assert "self-intersecting face pairs near" in bad["reason"] and "repair=True" in bad["reason"]
    assert (tmp_path / "out" / "tip-mended" / "tip_repaired.stl").exists()  # the mended surface, for the record
    assert not [n for n in os.listdir(tmp_path) if n.startswith("tetgen-tmpfile")]
    # the mesher dies on a sound blade: reported, the next one goes on
    monkeypatch.setattr(mesh, "run_tetgen", functools.partial(mesh.run_tetgen, _fault="abort"))
    result = batch.run_batch([jobs / "bar.toml"], tmp_path / "out2", command="check", workers=0)
    (row,) = result.rows
    assert row["status"] == "bad input" and "tetrahedraliser crashed on this surface (signal 6)" in row["reason"]


def test_a_long_bore_in_the_shank_is_filled_exactly():
    """A bore of 32 needle facets inside the demo blade's shank: TetGen's boundary recovery
    fails without its quality refinement; the elements still fill exactly the blade minus the
    bore (trimesh's volumes of each)."""
    from .geohelp import assemble, demo_arrays, shank_cylinder

    blade = trimesh.Trimesh(*demo_arrays(), process=False)
    bore = shank_cylinder(20.0, 125.0, 215.0, sections=32)
    v, f = assemble((blade, False), (bore, True))
    nodes, tets = mesh.tetrahedralise_surface(v, f)
    assert np.array_equal(nodes[: len(v)], v)  # the surface kept
    assert mesh.tet_signed_volumes(nodes, tets).sum() == pytest.approx(blade.volume - bore.volume, rel=1e-12)


# --- hollow bodies and inserts ---------------------------------------------------------------------


def box_at(extents, centre):
    b = trimesh.creation.box(extents)
    b.apply_translation(centre)
    return b


def prism_moments(a, b, c, centre) -> Moments:
    """Rectangular prism a×b×c (unit density) about the origin: I_cg = V/12 diag(b²+c², a²+c²,
    a²+b²) (Marks' Standard Handbook, Sec. 3 — from memory), moved by parallel axes."""
    vol = a * b * c
    c0 = np.asarray(centre, float)
    second = vol / 12.0 * np.diag([a * a, b * b, c * c]) + vol * np.outer(c0, c0)
    return Moments(vol, vol * c0, second)


def test_hollow_box_against_the_prism_formulas():
    outer, cavity = box_at([0.2, 0.6, 0.1], [0.0, 0.5, 0.0]), box_at([0.1, 0.3, 0.04], [0.02, 0.45, 0.01])
    v = np.vstack([outer.vertices, cavity.vertices])
    f = np.vstack([outer.faces, cavity.faces[:, ::-1] + len(outer.vertices)])  # cavity wound into the void
    tm = mesh.mass_elements([body(v, f)])
    got = tet_volume_moments(tm.nodes, tm.tets).total()
    o, i = prism_moments(0.2, 0.6, 0.1, [0.0, 0.5, 0.0]), prism_moments(0.1, 0.3, 0.04, [0.02, 0.45, 0.01])
    want = Moments(o.mass - i.mass, o.first - i.first, o.second - i.second)
    assert_moments(got, want, rel=1e-12)
    assert (tm.body == 0).all() and (mesh.tet_signed_volumes(tm.nodes, tm.tets) > 0).all()
    # no element lies in the cavity: every centroid is outside it
    cen = tm.nodes[tm.tets].mean(axis=1)
    assert not cavity.contains(cen).any()


def test_hollow_cylinder_against_trimesh_and_the_tube_formula():
    R, r, h = 0.05, 0.03, 0.4
    outer = trimesh.creation.cylinder(radius=R, height=h, sections=64)
    inner = trimesh.creation.cylinder(radius=r, height=0.8 * h, sections=48)
    for m in (outer, inner):
        m.apply_translation([0.0, 0.0, 0.3])
    v = np.vstack([outer.vertices, inner.vertices])
    f = np.vstack([outer.faces, inner.faces[:, ::-1] + len(outer.vertices)])
    tm = mesh.mass_elements([body(v, f)])
    got = tet_volume_moments(tm.nodes, tm.tets).total()
    a, b = trimesh_moments(outer), trimesh_moments(inner)
    assert_moments(got, Moments(a.mass - b.mass, a.first - b.first, a.second - b.second), rel=1e-11)
    # thick-walled tube about its axis, I = m(R² + r²)/2 (Marks', from memory), for a closed-end
    # cavity of the same radii: the polygons (64 and 48 sides) make the figure ~0.3 % low
    tube_axial = np.pi * R**2 * h * R**2 / 2 - np.pi * r**2 * 0.8 * h * r**2 / 2
    assert got.inertia()[2, 2] == pytest.approx(tube_axial, rel=6e-3)


def test_insert_elements_are_its_own_and_the_host_excludes_them():
    host = box_at([0.3, 0.8, 0.1], [0.0, 0.6, 0.0])
    insert = trimesh.creation.icosphere(subdivisions=2, radius=0.03)
    insert.apply_translation([0.05, 0.4, 0.005])
    cavity = box_at([0.05, 0.1, 0.03], [-0.05, 0.8, 0.0])
    shells = [mesh.Shell(host.vertices, host.faces, body=0),
              mesh.Shell(cavity.vertices, cavity.faces[:, ::-1], body=0, cavity=True),
              mesh.Shell(insert.vertices, insert.faces, body=1)]
    bounds = mesh.body_boundaries(shells)
    assert len(bounds) == 2 and len(bounds[0][1]) == len(host.faces) + len(cavity.faces) + len(insert.faces)
    tm = mesh.mass_elements([body(*b) for b in bounds])
    el = tet_volume_moments(tm.nodes, tm.tets)
    h, i, c = trimesh_moments(host), trimesh_moments(insert), trimesh_moments(cavity)
    assert_moments(el.select(tm.body == 1).total(), i, rel=1e-11)
    host_want = Moments(h.mass - i.mass - c.mass, h.first - i.first - c.first, h.second - i.second - c.second)
    assert_moments(el.select(tm.body == 0).total(), host_want, rel=1e-11)
    # the closed-surface integral of each boundary agrees (what the loader's bodies integrate to)
    from bladesolid.moments import surface_volume_moments

    assert_moments(surface_volume_moments(*bounds[0]), host_want, rel=1e-11)
    # elements of the two bodies meet on the insert's surface and do not overlap: total volume
    assert el.mass.sum() == pytest.approx(h.mass - c.mass, rel=1e-12)


def test_an_insert_inside_an_insert_sits_in_the_innermost_host():
    outer, mid, core = (box_at([e, e, e], [0, 0, 0]) for e in (1.0, 0.5, 0.2))
    bounds = mesh.body_boundaries([mesh.Shell(outer.vertices, outer.faces, 0),
                                   mesh.Shell(mid.vertices, mid.faces, 1),
                                   mesh.Shell(core.vertices, core.faces, 2)])
    tm = mesh.mass_elements([body(*b) for b in bounds])
    vol = np.abs(mesh.tet_signed_volumes(tm.nodes, tm.tets))
    sums = np.bincount(tm.body, weights=vol)
    np.testing.assert_allclose(sums, [1.0 - 0.125, 0.125 - 0.008, 0.008], rtol=1e-12)
