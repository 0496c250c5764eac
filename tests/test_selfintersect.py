"""Self-intersection detection: clean closed surfaces give none; pierced, folded, badly capped
and coplanar-overlapping ones give the pairs and where they are.

Where the expected answer comes from is named beside each case: constructed geometry (a
convex polyhedron cannot meet itself; a figure whose crossing curve is worked out by hand),
VTK's collision filter (``vtkCollisionDetectionFilter`` through pyvista: an independent
triangle–triangle test over OBB trees), shapely/GEOS for areas of overlap in a plane, TetGen
(it fills a surface with every facet preserved only when no facets cross), manifold3d for the
common solid of two overlapping boxes.
"""

from __future__ import annotations

import numpy as np
import pytest

from bladesolid.demo import large_blade_surface
from bladesolid.errors import InputError
from bladesolid.selfintersect import DEFAULT_LIMIT, self_intersections

trimesh = pytest.importorskip("trimesh")


def as_arrays(mesh):
    return np.asarray(mesh.vertices, dtype=float), np.asarray(mesh.faces, dtype=np.int64)


def rotation(seed):
    q = np.random.default_rng(seed).normal(size=4)
    return trimesh.transformations.quaternion_matrix(q / np.linalg.norm(q))


def vtk_contacts(va, fa, vb, fb):
    """Number of (face of A, face of B) pairs in contact, by VTK's collision filter."""
    pv = pytest.importorskip("pyvista")

    def poly(v, f):
        return pv.PolyData(np.asarray(v, float), np.hstack([np.full((len(f), 1), 3), f]).ravel())

    _, n = poly(va, fa).collision(poly(vb, fb), contact_mode=0, box_tolerance=0.0, cell_tolerance=0.0,
                                  generate_scalars=False)
    return int(n)


# --------------------------------------------------------------------------- loft helpers


def cambered_section(n=24, camber=0.12, thickness=0.02):
    """A thin cambered section of chord 1 in the (x, z) plane: a closed ring leading edge ->
    upper side -> trailing edge -> lower side, (2n, 2). Camber line z = 4 c x (1 - x)."""
    def side(x, sign):
        return np.column_stack([x, 4 * camber * x * (1 - x) + sign * 2 * thickness * np.sqrt(x) * (1 - x)])

    x = 0.5 * (1 - np.cos(np.linspace(0.0, np.pi, n + 1)))
    # the lower side sampled at other chord stations (x^1.1): no upper and lower point lie on
    # one line with the centroid, so a fan touches itself nowhere by coincidence
    upper, lower = side(x, 1.0), side(x**1.1, -1.0)
    return np.vstack([upper[:-1], lower[::-1][:-1]])  # LE, upper..., TE, lower... (2n points)


def loft(section, stations=(0.0, 0.5, 1.0), tip_cap="strip"):
    """Closed loft of one section (x, z) at span stations y, twisted a little per station.

    Bands between consecutive rings; the root closed by a strip (zipper) of triangles pairing
    upper and lower points; the tip closed by the same strip, or by a fan from the centroid
    of the ring points (``tip_cap="fan"``), the usual way a loft is closed.
    Returns (vertices, faces, first tip-cap face index).
    """
    n2 = len(section)
    n = n2 // 2
    rings = []
    for k, y in enumerate(stations):
        a = np.radians(4.0 * k)
        x = section[:, 0] * np.cos(a) - section[:, 1] * np.sin(a)
        z = section[:, 0] * np.sin(a) + section[:, 1] * np.cos(a)
        rings.append(np.column_stack([x, np.full(n2, y), z]))
    v = np.vstack(rings)
    i = np.arange(n2)
    j = (i + 1) % n2
    faces = []
    for k in range(len(stations) - 1):
        a, b = k * n2 + i, k * n2 + j
        c, d = (k + 1) * n2 + j, (k + 1) * n2 + i
        faces += [np.column_stack([a, b, c]), np.column_stack([a, c, d])]

    def strip(base, flip):
        up = base + np.arange(0, n + 1)                         # LE .. TE along the upper side
        lo = base + np.r_[0, np.arange(n2 - 1, n - 1, -1)]      # LE, then the lower side to TE
        tris = [[up[0], up[1], lo[1]]]
        for m in range(1, n - 1):
            tris += [[up[m], up[m + 1], lo[m + 1]], [up[m], lo[m + 1], lo[m]]]
        tris += [[up[n - 1], up[n], lo[n - 1]]]
        t = np.array(tris)
        return t[:, ::-1] if flip else t

    faces.append(strip(0, flip=True))
    tip = (len(stations) - 1) * n2
    first_tip = sum(len(x) for x in faces)
    if tip_cap == "fan":
        v = np.vstack([v, v[tip:tip + n2].mean(axis=0)])
        faces.append(np.column_stack([np.full(n2, len(v) - 1), tip + i, tip + j]))
    else:
        faces.append(strip(tip, flip=False))
    f = np.vstack(faces).astype(np.int64)
    m = trimesh.Trimesh(v, f, process=False)
    if m.volume < 0:
        f = f[:, ::-1].copy()
    return v, f, first_tip


# --------------------------------------------------------------------------- clean surfaces


@pytest.mark.parametrize("name, mesh", [
    ("box", lambda: trimesh.creation.box([1.0, 2.0, 3.0])),
    ("icosphere", lambda: trimesh.creation.icosphere(subdivisions=4)),
    ("cylinder", lambda: trimesh.creation.cylinder(radius=1.0, height=5.0, sections=200)),
])
def test_convex_solids_do_not_meet_themselves(name, mesh):
    # a convex polyhedron's faces meet only along shared edges and corners (constructed)
    v, f = as_arrays(mesh())
    r = self_intersections(v, f)
    assert r.count == 0 and r.pairs.shape == (0, 2) and np.isnan(r.point).all()
    assert r.describe("mm") == "no self-intersecting face pairs"


def test_thin_cambered_loft_closed_by_strips_is_clean():
    v, f, _ = loft(cambered_section())
    m = trimesh.Trimesh(v, f, process=False)
    assert m.is_watertight and m.is_winding_consistent  # trimesh: the loft is a closed surface
    # shapely: the section is a simple polygon, so the strips and bands do not cross (constructed)
    shapely = pytest.importorskip("shapely")
    assert shapely.Polygon(cambered_section()).is_valid
    assert self_intersections(v, f).count == 0


def test_demo_blade_is_clean(demo_path):
    # TetGen fills this surface with every facet preserved (api.load_blade does it in
    # tests/test_fields.py), which it refuses for a surface whose facets cross
    m = trimesh.load(demo_path, force="mesh")
    v, f = as_arrays(m)
    assert self_intersections(v, f).count == 0
    # the same in metres: the tolerance follows the model size
    assert self_intersections(v * 1e-3, f).count == 0


def test_large_blade_is_clean():
    # the same lofted construction as the demo blade, ~240 000 faces (bladesolid.demo)
    v, f = large_blade_surface(240_000)
    r = self_intersections(v, f)
    assert len(f) > 200_000 and r.count == 0 and r.degenerate == 0


# --------------------------------------------------------------------------- pierced


def test_two_overlapping_boxes_cross_along_their_common_box():
    a = trimesh.creation.box()
    b = trimesh.creation.box()
    b.apply_translation([0.5, 0.25, 0.125])
    both = trimesh.util.concatenate([a, b])
    r = self_intersections(*as_arrays(both))
    assert r.count > 0
    # the two surfaces cross along the edges of the common solid that lie on both; for this
    # offset they reach every side of it, so the box of the crossing is the common solid's
    # box — from manifold3d's boolean intersection
    manifold3d = pytest.importorskip("manifold3d")

    def solid(m):
        return manifold3d.Manifold(manifold3d.Mesh64(vert_properties=np.asarray(m.vertices, float),
                                                     tri_verts=np.asarray(m.faces, np.uint64)))

    lo, hi = (solid(a) ^ solid(b)).bounding_box()[:3], (solid(a) ^ solid(b)).bounding_box()[3:]
    assert np.allclose(r.box_min, lo, atol=1e-9) and np.allclose(r.box_max, hi, atol=1e-9)
    # the point is on the crossing: on the boundary of both boxes (constructed)
    assert np.isclose(np.abs(r.point).max(), 0.5) and np.isclose(np.abs(r.point - [0.5, 0.25, 0.125]).max(), 0.5)
    # each pair holds one face of each box (a box alone is clean)
    assert ((r.pairs[:, 0] < 12) & (r.pairs[:, 1] >= 12)).all()


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_pierced_boxes_in_general_position_match_vtk(seed):
    a = trimesh.creation.box([1.0, 0.6, 0.4])
    b = trimesh.creation.box([0.9, 0.5, 0.7])
    b.apply_transform(rotation(seed))
    b.apply_translation([0.3, 0.1, -0.05])
    both = trimesh.util.concatenate([a, b])
    r = self_intersections(*as_arrays(both))
    # VTK's collision filter counts the (face of a, face of b) pairs in contact
    assert r.count == vtk_contacts(a.vertices, a.faces, b.vertices, b.faces) > 0


@pytest.mark.parametrize("seed", [5, 6])
def test_triangle_soup_matches_vtk(seed):
    # 300 loose triangles (no shared corners): every crossing between the two halves, by VTK
    rng = np.random.default_rng(seed)
    centres = rng.random((300, 1, 3))
    tri = centres + rng.normal(scale=0.12, size=(300, 3, 3))
    v = tri.reshape(-1, 3)
    f = np.arange(900).reshape(-1, 3)
    r = self_intersections(v, f, limit=10**6)
    across = ((r.pairs[:, 0] < 150) & (r.pairs[:, 1] >= 150)).sum()
    assert across == vtk_contacts(v[:450], f[:150], v[450:], f[150:] - 450) > 0
    # and the pairs within each half, the halves each against a copy of themselves moved away
    # by nothing: VTK counts every ordered pair and each face with itself
    within = r.count - across
    n_a = vtk_contacts(v[:450], f[:150], v[:450], f[:150])
    n_b = vtk_contacts(v[450:], f[150:] - 450, v[450:], f[150:] - 450)
    assert within == (n_a - 150) // 2 + (n_b - 150) // 2


def spiked_box(apex):
    """Box [-1, 1]^2 x [0, 1] with its top face fanned from a centre vertex moved to ``apex``."""
    v = np.array([[-1, -1, 0], [1, -1, 0], [1, 1, 0], [-1, 1, 0],
                  [-1, -1, 1], [1, -1, 1], [1, 1, 1], [-1, 1, 1], apex], dtype=float)
    f = np.array([[0, 2, 1], [0, 3, 2],                                   # bottom (faces 0, 1)
                  [0, 1, 5], [0, 5, 4], [1, 2, 6], [1, 6, 5], [2, 3, 7], [2, 7, 6], [3, 0, 4], [3, 4, 7],
                  [4, 5, 8], [5, 6, 8], [6, 7, 8], [7, 4, 8]])            # top fan (faces 10-13)
    return v, f


def test_a_spike_through_the_bottom_face():
    apex = np.array([0.1, 0.05, -0.5])
    v, f = spiked_box(apex)
    assert trimesh.Trimesh(v, f, process=False).is_watertight  # one closed shell
    r = self_intersections(v, f)
    # constructed: the fan faces run from the top edges (z = 1) to the apex below the bottom
    # (z = -0.5); they cross z = 0 at 1/3 of the way from the apex: a quadrilateral with
    # corners apex + (top corner - apex) / 3
    ring = apex + (v[4:8] - apex) / 3.0
    assert np.allclose(r.box_min, ring.min(axis=0), atol=1e-12)
    assert np.allclose(r.box_max, ring.max(axis=0), atol=1e-12)
    # which fan face crosses which bottom triangle: shapely (GEOS) in the plane z = 0
    shapely = pytest.importorskip("shapely")
    expected = set()
    for i in range(10, 14):
        k = [c for c in f[i] if c != 8]
        seg = shapely.LineString([ring[k[0] - 4, :2], ring[k[1] - 4, :2]])
        for j in (0, 1):
            if seg.intersects(shapely.Polygon(v[f[j], :2])):
                expected.add((j, i))
    assert set(map(tuple, r.pairs.tolist())) == expected
    # with the apex above the bottom (a dent, not a spike) nothing crosses
    assert self_intersections(*spiked_box([0.1, 0.05, 0.2])).count == 0


# --------------------------------------------------------------------------- folded


def test_a_vertex_pushed_through_the_opposite_side():
    s = trimesh.creation.icosphere(subdivisions=3)
    v, f = as_arrays(s)
    p = v[0].copy()
    v[0] = -1.5 * p  # through the sphere and out of the other side
    r = self_intersections(v, f)
    # constructed: the faces around the moved vertex run from near +p to -1.5 p and leave the
    # sphere through the far side, near -p; the sphere's own faces near +p are not crossed
    assert r.count > 0
    assert np.dot(r.point, p) < -0.9 and abs(np.linalg.norm(r.point) - 1.0) < 0.05
    fan = set(np.flatnonzero((f == 0).any(axis=1)).tolist())
    assert all((i in fan) != (j in fan) for i, j in r.pairs.tolist())  # fan face x sphere face


def test_two_faces_folded_flat_onto_each_other():
    a, b = [0.0, 0, 0], [1.0, 0, 0]
    c = [0.3, 1.0, 0]
    f = np.array([[0, 1, 2], [0, 1, 3]])
    # constructed: sharing edge ab, the fourth corner on the same side, in the same plane: the
    # two faces overlap in area
    v = np.array([a, b, c, [0.6, 0.5, 0.0]])
    r = self_intersections(v, f)
    assert r.count == 1 and r.pairs.tolist() == [[0, 1]]
    # on the other side of ab: a flat continuation, not a fold
    assert self_intersections(np.array([a, b, c, [0.6, -0.5, 0.0]]), f).count == 0
    # folded to 30 degrees: they meet along ab only
    d = [0.6, 0.5 * np.cos(np.radians(30)), 0.5 * np.sin(np.radians(30))]
    assert self_intersections(np.array([a, b, c, d]), f).count == 0


# --------------------------------------------------------------------------- loft caps


def fan_overlaps(v, f, first, shapely):
    """Pairs of tip-cap faces overlapping in area, by shapely in the cap's plane (x, z)."""
    polys = [shapely.Polygon(v[t][:, [0, 2]]) for t in f[first:]]
    out = set()
    for a in range(len(polys)):
        for b in range(a + 1, len(polys)):
            if polys[a].intersection(polys[b]).area > 1e-12:
                out.add((first + a, first + b))
    return out


def test_cambered_tip_fanned_from_its_centroid_crosses_itself():
    shapely = pytest.importorskip("shapely")
    section = cambered_section()
    # shapely: the centroid of the ring points lies outside the thin cambered section, so a
    # fan from it folds over itself (the usual way a loft's end gets closed)
    assert not shapely.Polygon(section).contains(shapely.Point(section.mean(axis=0)))
    v, f, first = loft(section, tip_cap="fan")
    assert trimesh.Trimesh(v, f, process=False).is_watertight  # still one closed shell
    r = self_intersections(v, f, limit=10**6)
    expected = fan_overlaps(v, f, first, shapely)
    assert expected
    cap = {tuple(p) for p in r.pairs.tolist() if p[0] >= first}
    assert cap == expected
    # the rest touch the cap: side faces of the last band whose ring edge the fan covers;
    # all of it lies in the cap's plane y = 1
    assert all(j >= first for _, j in r.pairs.tolist())
    assert r.box_min[1] == pytest.approx(1.0) and r.box_max[1] == pytest.approx(1.0)
    assert "self-intersecting face pairs near" in r.describe("mm")


def test_a_thick_symmetric_tip_fanned_from_its_centroid_is_clean():
    # a symmetric section is star-shaped about its centroid (shapely): the fan is clean
    shapely = pytest.importorskip("shapely")
    section = cambered_section(camber=0.0, thickness=0.12)
    v, f, first = loft(section, tip_cap="fan")
    assert not fan_overlaps(v, f, first, shapely)
    assert self_intersections(v, f).count == 0


# --------------------------------------------------------------------------- coplanar


def test_a_repeated_face_overlaps_its_twin():
    v, f = as_arrays(trimesh.creation.box())
    r = self_intersections(v, np.vstack([f, f[3]]))
    assert r.count == 1 and r.pairs.tolist() == [[3, 12]]  # the same three vertices (constructed)
    # the same facet written again with fresh vertices (an unwelded copy): a coplanar overlap
    v2 = np.vstack([v, v[f[3]]])
    r = self_intersections(v2, np.vstack([f, [8, 9, 10]]))
    pairs = set(map(tuple, r.pairs.tolist()))
    assert (3, 12) in pairs and r.count >= 1
    assert np.allclose(r.box_min, v[f[3]].min(axis=0)) and np.allclose(r.box_max, v[f[3]].max(axis=0))


def test_coplanar_triangles_overlapping_in_part():
    shapely = pytest.importorskip("shapely")
    t = np.array([[0.0, 0, 0], [2, 0, 0], [0, 2, 0]])
    f = np.array([[0, 1, 2], [3, 4, 5]])
    for shift, overlaps in (([0.5, 0.5, 0.0], True), ([1.5, 1.5, 0.0], False), ([0.5, 0.5, 1e-3], False)):
        v = np.vstack([t, t + shift])
        # shapely: overlap area of the two triangles in the plane (for the in-plane shifts)
        if shift[2] == 0:
            area = shapely.Polygon(t[:, :2]).intersection(shapely.Polygon((t + shift)[:, :2])).area
            assert (area > 0) == overlaps
        r = self_intersections(v, f)
        assert (r.count == 1) == overlaps, shift
        if overlaps:  # the common part: the triangle (0.5, 0.5), (1.5, 0.5), (0.5, 1.5)
            assert np.allclose(r.box_min, [0.5, 0.5, 0.0]) and np.allclose(r.box_max, [1.5, 1.5, 0.0])


def test_planar_fan_around_a_vertex_is_clean_until_it_folds():
    # a flat disc fanned from its centre: neighbours share the centre only or an edge
    k = 12
    ang = np.linspace(0, 2 * np.pi, k, endpoint=False)
    rim = np.column_stack([np.cos(ang), np.sin(ang), np.zeros(k)])
    v = np.vstack([rim, [0.0, 0, 0]])
    f = np.column_stack([np.full(k, k), np.arange(k), (np.arange(k) + 1) % k])
    assert self_intersections(v, f).count == 0
    # one rim point dragged across its neighbour's sector: the fan folds over (constructed)
    v2 = v.copy()
    v2[3] = 1.2 * rim[5]
    assert self_intersections(v2, f).count > 0


# --------------------------------------------------------------------------- tolerance, API


def test_touching_counts_and_a_gap_of_ten_tolerances_does_not():
    # a triangle whose corner rests on another triangle's interior touches it
    base = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0]])
    f = np.array([[0, 1, 2], [3, 4, 5]])
    top = np.array([[0.25, 0.25, 0.0], [0.3, 0.2, 1.0], [0.2, 0.3, 1.0]])
    assert self_intersections(np.vstack([base, top]), f).count == 1
    r = self_intersections(np.vstack([base, top + [0, 0, 1e-8]]), f)  # tol 1.7e-9 here
    assert r.count == 0 and r.tol == pytest.approx(1e-9 * np.sqrt(1 + 1 + 1.0**2), rel=1e-6)
    assert self_intersections(np.vstack([base, top + [0, 0, 1e-8]]), f, tol=1e-7).count == 1


def test_pairs_are_capped_but_all_counted_and_threads_do_not_matter():
    numba = pytest.importorskip("numba")
    a = trimesh.creation.icosphere(subdivisions=3)
    b = a.copy()
    b.apply_translation([0.7, 0.1, 0.05])
    v, f = as_arrays(trimesh.util.concatenate([a, b]))
    full = self_intersections(v, f, limit=10**6)
    few = self_intersections(v, f, limit=5)
    assert full.count == few.count > DEFAULT_LIMIT and len(few.pairs) == 5 and len(full.pairs) == full.count
    assert set(map(tuple, few.pairs.tolist())) <= set(map(tuple, full.pairs.tolist()))
    assert np.array_equal(full.pairs, np.unique(full.pairs, axis=0))  # sorted, no repeats
    threads = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        one = self_intersections(v, f, limit=10**6)
    finally:
        numba.set_num_threads(threads)
    assert one.count == full.count and np.array_equal(one.pairs, full.pairs)
    assert np.array_equal(one.point, full.point) and np.array_equal(one.box_min, full.box_min)


def test_zero_area_faces_are_skipped_and_counted():
    v, f = as_arrays(trimesh.creation.box())
    v = np.vstack([v, [[0.0, 0, 0], [0.1, 0, 0], [0.2, 0, 0]]])  # a needle with no area inside
    r = self_intersections(v, np.vstack([f, [8, 9, 10]]))
    assert r.count == 0 and r.degenerate == 1


def test_bad_arrays_and_tolerances_name_the_parameter():
    with pytest.raises(InputError, match="^faces: "):
        self_intersections(np.zeros((3, 3)), np.array([[0, 1, 3]]))
    with pytest.raises(InputError, match="^vertices: "):
        self_intersections(np.zeros((3, 2)), np.array([[0, 1, 2]]))
    with pytest.raises(InputError, match="^vertices: "):
        self_intersections(np.array([[0.0, 0, 0], [1, 0, 0], [0, np.inf, 0]]), np.array([[0, 1, 2], [0, 2, 1]]))
    with pytest.raises(InputError, match="^tol: "):
        self_intersections(np.eye(3), np.array([[0, 1, 2], [0, 2, 1]]), tol=-1.0)


# --------------------------------------------------------------------------- impossible tensors


def test_the_integral_over_a_pierced_box_is_an_impossible_tensor():
    from bladesolid.moments import check_physical_inertia, surface_volume_moments

    # the spike's apex through the bottom face: the divergence-theorem integral counts the
    # part of the spike below the box negatively (constructed: box 2 x 2 x 1, volume 4)
    v, f = spiked_box([0.0, 0.0, -1.0])
    assert self_intersections(v, f).count > 0
    m = surface_volume_moments(v, f).scaled(2810.0)
    assert m.mass == pytest.approx(2810.0 * 4 / 3, rel=1e-12)  # 4 - 8/3: far from the box's 4
    with pytest.raises(InputError, match=r"^blade\.stl: the inertia tensor is impossible .*I1 \+ I2 < I3.*"
                                         r"self-intersecting or inside-out$"):
        check_physical_inertia(m, "blade.stl")
    # deeper: the negative part outweighs the rest
    deep = surface_volume_moments(*spiked_box([0.0, 0.0, -3.0]))
    with pytest.raises(InputError, match="mass is -1.333 kg, not positive"):
        check_physical_inertia(deep, "blade.stl")
    with pytest.raises(InputError, match="a negative principal moment and I1 \\+ I2 < I3"):
        check_physical_inertia(deep.inertia(), "blade.stl")
    # the clean box wound inside out
    box = trimesh.creation.box([2.0, 2.0, 1.0])
    with pytest.raises(InputError, match="not positive"):
        check_physical_inertia(surface_volume_moments(box.vertices, box.faces[:, ::-1]), "blade.stl")


def test_marks_box_and_a_thin_plate_are_physical():
    from bladesolid.moments import check_physical_inertia, surface_volume_moments

    # rectangular block about its centroid: I = m (b² + c²)/12 etc. (Marks' Standard Handbook
    # for Mechanical Engineers, table of mass moments of inertia — from memory)
    a, b, c, rho = 0.3, 0.05, 0.02, 2810.0
    box = trimesh.creation.box([a, b, c])
    box.apply_translation([0.1, 0.7, -0.02])
    m = surface_volume_moments(box.vertices, box.faces).scaled(rho)
    mass = rho * a * b * c
    expected = sorted([mass * (b**2 + c**2) / 12, mass * (a**2 + c**2) / 12, mass * (a**2 + b**2) / 12])
    assert np.allclose(check_physical_inertia(m, "box"), expected, rtol=1e-11)
    # a plate 1e-5 of its width thick: I1 + I2 - I3 = 2 ∫ z² dm is ~1e-10 of the trace
    plate = trimesh.creation.box([1.0, 1.0, 1e-5])
    plate.apply_transform(rotation(4))
    p = check_physical_inertia(surface_volume_moments(plate.vertices, plate.faces), "plate")
    assert 0 < p[0] + p[1] - p[2] < 1e-9 * p.sum()


@pytest.mark.parametrize("scale", [1.0, 1e-9, 1e6])
def test_the_round_off_allowance_is_relative_to_the_trace(scale):
    from bladesolid.moments import PHYSICAL_REL_TOL, check_physical_inertia

    # principal moments 1, 2, 3 + d (trace 6 + d, turned to general axes): I1 + I2 - I3 = -d
    R = rotation(9)[:3, :3]
    for excess, refused in ((0.5, False), (2.0, True)):
        d = excess * PHYSICAL_REL_TOL * 6.0
        tensor = scale * (R @ np.diag([1.0, 2.0, 3.0 + d]) @ R.T)
        if refused:
            with pytest.raises(InputError, match="I1 \\+ I2 < I3"):
                check_physical_inertia(tensor, "t")
        else:
            check_physical_inertia(tensor, "t")
