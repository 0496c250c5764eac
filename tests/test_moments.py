"""Exact mass moments: published worked example, handbook formulas, reference library, properties."""

import numpy as np
import pytest
import trimesh

from bladesolid.mesh import tetrahedralise_surface
from bladesolid.moments import (
    Moments,
    moved,
    point_mass,
    relative_difference,
    surface_volume_moments,
    tet_volume_moments,
    tet_volume_moments_numpy,
)
from scipy.spatial.transform import Rotation


def tonon_tet():
    # F. Tonon (2004), "Explicit exact formulas for the 3-D tetrahedron inertia tensor in terms
    # of its vertex coordinates", J. Math. Stat. 1(1), worked example (values from memory).
    v = np.array(
        [(8.33220, -11.86875, 0.93355), (0.75523, 5, 16.37072), (52.61236, 5, -5.38580), (2, 5, 3)]
    )
    return v, np.array([[0, 1, 2, 3]])


def test_tonon_worked_example_about_centroid():
    v, t = tonon_tet()
    m = tet_volume_moments(v, t).total()  # density 1
    I = m.inertia_cg()
    S = m.about(m.cg).second
    # Tonon 2004 (from memory): a, b, c the moments of inertia; a', b', c' = ∫yz, ∫xz, ∫xy.
    # The published vertices are rounded to 5 decimals, hence the 1e-7 relative tolerance.
    assert I[0, 0] == pytest.approx(43520.33257, rel=1e-7)
    assert I[1, 1] == pytest.approx(194711.28938, rel=1e-7)
    assert I[2, 2] == pytest.approx(191168.76173, rel=1e-7)
    assert S[1, 2] == pytest.approx(4417.66150, rel=1e-7)
    assert S[0, 2] == pytest.approx(-46343.16662, rel=1e-7)
    assert S[0, 1] == pytest.approx(11996.20119, rel=1e-7)
    # the inertia tensor carries the products with a minus sign (docs/CONVENTIONS.md §3)
    assert I[1, 2] == pytest.approx(-4417.66150, rel=1e-7)


def test_numba_kernel_equals_numpy_reference():
    rng = np.random.default_rng(1)
    nodes = rng.normal(size=(200, 3))
    tets = rng.integers(0, 200, size=(500, 4))
    a = tet_volume_moments(nodes, tets)
    b = tet_volume_moments_numpy(nodes, tets)
    np.testing.assert_allclose(a.mass, b.mass, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(a.first, b.first, rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(a.second, b.second, rtol=1e-12, atol=1e-14)


def solid_moments(mesh, density=1.0):
    nodes, tets = tetrahedralise_surface(mesh.vertices, mesh.faces)
    return tet_volume_moments(nodes, tets).total().scaled(density), surface_volume_moments(
        mesh.vertices, mesh.faces
    ).scaled(density)


def test_box_handbook():
    # Rectangular block about its centroid: I_xx = m (b² + c²)/12, etc. (Marks' Standard
    # Handbook for Mechanical Engineers, table of mass moments of inertia — from memory).
    a, b, c, rho = 0.3, 0.05, 0.02, 2810.0
    box = trimesh.creation.box([a, b, c])
    box.apply_translation([0.1, 0.7, -0.02])
    el, surf = solid_moments(box, rho)
    m = rho * a * b * c
    for mom in (el, surf):
        assert mom.mass == pytest.approx(m, rel=1e-12)
        I = mom.inertia_cg()
        assert I[0, 0] == pytest.approx(m * (b**2 + c**2) / 12, rel=1e-11)
        assert I[1, 1] == pytest.approx(m * (a**2 + c**2) / 12, rel=1e-11)
        assert I[2, 2] == pytest.approx(m * (a**2 + b**2) / 12, rel=1e-11)
        assert abs(I[0, 1]) < 1e-12 * I[2, 2]
    assert relative_difference(el, surf) < 1e-12


@pytest.mark.parametrize("sections", [16, 64, 256])
def test_cylinder_converges_to_handbook(sections):
    # Solid cylinder, radius r, length h, about its centroid: I_axis = m r²/2,
    # I_transverse = m (3 r² + h²)/12 (Marks' Handbook — from memory). A polygonal prism
    # converges to it as O(1/n²) with n the number of sides.
    r, h = 0.04, 0.3
    cyl = trimesh.creation.cylinder(radius=r, height=h, sections=sections)
    el, surf = solid_moments(cyl)
    m_exact = np.pi * r**2 * h
    I = el.inertia_cg()
    err_m = abs(el.mass - m_exact) / m_exact
    err_axis = abs(I[2, 2] - m_exact * r**2 / 2) / (m_exact * r**2 / 2)
    err_tr = abs(I[0, 0] - m_exact * (3 * r**2 + h**2) / 12) / (m_exact * (3 * r**2 + h**2) / 12)
    # polygon area error (1 − sin(2π/n)/(2π/n)) ≈ (2π/n)²/6
    bound = 2.0 * (2 * np.pi / sections) ** 2 / 6 * 2
    assert err_m < bound and err_axis < 2 * bound and err_tr < bound
    assert relative_difference(el, surf) < 1e-11


def test_sphere_converges_to_handbook():
    # Solid sphere: I = 2/5 m r² (Marks' Handbook — from memory); icosphere refinement.
    errs = []
    for sub in (1, 2, 3, 4, 5):
        s = trimesh.creation.icosphere(subdivisions=sub, radius=0.1)
        el, surf = solid_moments(s)
        m_exact = 4 / 3 * np.pi * 0.1**3
        I = el.inertia_cg()
        errs.append(abs(I[0, 0] - 0.4 * m_exact * 0.01) / (0.4 * m_exact * 0.01))
        assert relative_difference(el, surf) < 1e-11
    assert all(b < a / 3 for a, b in zip(errs, errs[1:]))  # ~4x per subdivision
    assert errs[-1] < 1.5e-3


def test_surface_route_matches_trimesh_on_demo_blade(demo_mesh):
    # trimesh's mass properties (a reference library, independent integration) on the demo blade
    mesh = demo_mesh
    ours = surface_volume_moments(mesh.vertices, mesh.faces)
    mp = mesh.mass_properties  # density 1, inertia about the centre of mass
    assert ours.mass == pytest.approx(mp["volume"], rel=1e-12)
    np.testing.assert_allclose(ours.cg, mp["center_mass"], rtol=0, atol=1e-12 * np.ptp(mesh.vertices))
    I_ours = ours.inertia_cg()
    np.testing.assert_allclose(I_ours, mp["inertia"], rtol=0, atol=1e-12 * np.abs(mp["inertia"]).max())


def test_demo_blade_elements_fill_the_surface_exactly(demo_mesh):
    # the project's exactness target: element volumes add up to the closed-surface volume to <= 1e-9 relative
    nodes, tets = tetrahedralise_surface(demo_mesh.vertices, demo_mesh.faces)
    el = tet_volume_moments(nodes, tets)
    surf = surface_volume_moments(demo_mesh.vertices, demo_mesh.faces)
    assert abs(el.mass.sum() - surf.mass) / surf.mass <= 1e-9
    assert relative_difference(el.total(), surf) <= 1e-9
    assert np.all(el.mass > 0)


def test_tetrahedralisation_is_deterministic(demo_mesh):
    n1, t1 = tetrahedralise_surface(demo_mesh.vertices, demo_mesh.faces)
    n2, t2 = tetrahedralise_surface(demo_mesh.vertices, demo_mesh.faces)
    assert np.array_equal(n1, n2) and np.array_equal(t1, t2)
    # the input surface is preserved: the input vertices are the first nodes, unchanged
    assert np.array_equal(n1[: len(demo_mesh.vertices)], demo_mesh.vertices)


def test_finer_elements_same_totals(demo_mesh):
    surf = surface_volume_moments(demo_mesh.vertices, demo_mesh.faces)
    coarse = tet_volume_moments(*tetrahedralise_surface(demo_mesh.vertices, demo_mesh.faces))
    max_volume = surf.mass / 20000
    fine = tet_volume_moments(*tetrahedralise_surface(demo_mesh.vertices, demo_mesh.faces, max_volume=max_volume))
    assert len(fine) > 1.5 * len(coarse)
    # the size target is met wherever the preserved surface allows: elements against large
    # surface triangles (the flat root face) cannot be split without moving the surface
    assert np.mean(fine.mass <= max_volume * (1 + 1e-6)) > 0.98
    assert relative_difference(fine.total(), surf) < 1e-9


# --- properties that must hold --------------------------------------------------------------


def random_rigid(seed):
    rng = np.random.default_rng(seed)
    return Rotation.random(random_state=seed).as_matrix(), rng.normal(size=3)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_invariance_under_rigid_motion(demo_mesh, seed):
    # moving the body and integrating again = moving the moments (frame-independent physics)
    R, t = random_rigid(seed)
    m0 = surface_volume_moments(demo_mesh.vertices, demo_mesh.faces)
    m1 = surface_volume_moments(demo_mesh.vertices @ R.T + t, demo_mesh.faces)
    assert relative_difference(moved(m0, R, t), m1) < 1e-11
    # principal moments about the CG do not change
    np.testing.assert_allclose(
        np.linalg.eigvalsh(m0.inertia_cg()), np.linalg.eigvalsh(m1.inertia_cg()), rtol=1e-10
    )


def test_scaling_mass_cubed_inertia_fifth(demo_mesh):
    m1 = surface_volume_moments(demo_mesh.vertices, demo_mesh.faces)
    m2 = surface_volume_moments(demo_mesh.vertices * 2.5, demo_mesh.faces)
    assert m2.mass == pytest.approx(m1.mass * 2.5**3, rel=1e-12)
    np.testing.assert_allclose(m2.inertia(), m1.inertia() * 2.5**5, rtol=1e-11, atol=1e-14)


def test_additivity_of_two_bodies():
    a = trimesh.creation.box([0.1, 0.2, 0.3])
    b = trimesh.creation.icosphere(3, radius=0.05)
    b.apply_translation([0.3, 0.1, 0.0])
    both = trimesh.util.concatenate([a, b])
    ma = surface_volume_moments(a.vertices, a.faces)
    mb = surface_volume_moments(b.vertices, b.faces)
    mab = surface_volume_moments(both.vertices, both.faces)
    assert relative_difference(ma + mb, mab) < 1e-12


def test_parallel_axis_theorem():
    # I_O = I_cg + m (|c|² 1 − c cᵀ) (Steiner; any dynamics text)
    p = point_mass(2.0, [0.0, 1.0, 0.0]) + point_mass(1.0, [0.5, 0.0, 0.2])
    c = p.cg
    steiner = p.inertia_cg() + p.mass * (c @ c * np.eye(3) - np.outer(c, c))
    np.testing.assert_allclose(p.inertia(), steiner, rtol=1e-13, atol=1e-14)


def test_moments_dataclass_is_plain():
    m = Moments(1.0, np.zeros(3), np.eye(3))
    assert (m + m).mass == 2.0


# --------------------------------------------------------------------------- curved triangles


def test_dunavant_rule_integrates_monomials_exactly():
    # ∫∫ over the unit right triangle ξ^a η^b dξ dη = a! b! / (a + b + 2)! (the classical
    # Dirichlet integral; from memory). Dunavant's rule is exact to degree 8 and not beyond.
    from math import factorial

    from bladesolid.moments import quadratic_triangle_points

    bary, w = quadratic_triangle_points()
    xi, eta = bary[:, 1], bary[:, 2]
    for deg in range(10):
        worst = 0.0
        for a in range(deg + 1):
            b = deg - a
            exact = factorial(a) * factorial(b) / factorial(a + b + 2)
            worst = max(worst, abs(0.5 * np.sum(w * xi**a * eta**b) / exact - 1))
        if deg <= 8:
            assert worst < 1e-13, deg
        else:
            assert worst > 1e-6  # degree 9 is beyond the rule
    assert np.all(w > 0) and np.allclose(bary.sum(axis=1), 1.0)


def _curved(vertices, faces, place):
    """Six-node triangles over a triangle surface: the mid node of each edge at
    ``place(midpoints)``."""
    e = np.sort(np.vstack([faces[:, [0, 1]], faces[:, [1, 2]], faces[:, [2, 0]]]), axis=1)
    unique, inverse = np.unique(e, axis=0, return_inverse=True)
    mids = place(0.5 * (vertices[unique[:, 0]] + vertices[unique[:, 1]]))
    return np.vstack([vertices, mids]), np.hstack([faces, inverse.reshape(3, -1).T + len(vertices)])


def test_curved_surface_with_midpoints_on_the_edges_is_the_flat_integral():
    from bladesolid.moments import curved_surface_moments

    for mesh in (trimesh.creation.box([0.1, 0.2, 0.3]), trimesh.creation.icosphere(2, radius=0.05)):
        mesh.apply_translation([0.3, 0.7, -0.1])
        nodes, tri6 = _curved(mesh.vertices, mesh.faces, lambda p: p)
        flat = surface_volume_moments(mesh.vertices, mesh.faces)
        assert relative_difference(curved_surface_moments(nodes, tri6), flat) < 1e-12


def test_curved_surface_exact_on_a_quadratic_solid():
    # A prism over the triangle (0,0), (1,0), (0,1) cut by the paraboloid z = 1 + (x² + y²)/4:
    # every face is exactly a six-node patch (the top is quadratic over its corners and edge
    # midpoints, each side a planar strip with a parabolic top edge), so the integral is exact.
    # Reference: scipy's adaptive quadrature of the prism, ∫∫ ∫_0^z f dz dA (independent).
    from scipy.integrate import dblquad

    from bladesolid.moments import curved_surface_moments

    def top(x, y):
        return 1.0 + 0.25 * (x * x + y * y)

    base = np.array([[0.0, 0], [1, 0], [0, 1]])
    xy = np.vstack([base, 0.5 * (base + base[[1, 2, 0]])])  # corners, then mids of 01, 12, 20
    bottom = np.column_stack([xy, np.zeros(6)])                    # nodes 0-5
    upper = np.column_stack([xy, top(xy[:, 0], xy[:, 1])])          # nodes 6-11
    vertical = 0.5 * (bottom[:3] + upper[:3])                        # 12-14: mid of B_i T_i
    diagonal = 0.5 * (bottom[:3] + upper[[1, 2, 0]])                 # 15-17: mid of B_a T_b
    nodes = np.vstack([bottom, upper, vertical, diagonal])
    tri6 = [[0, 2, 1, 5, 4, 3], [6, 7, 8, 9, 10, 11]]  # bottom (normal -z), top (+z)
    for k, (a, b) in enumerate(((0, 1), (1, 2), (2, 0))):  # each side: B_a B_b T_b, B_a T_b T_a
        tri6.append([a, b, 6 + b, 3 + k, 12 + b, 15 + k])
        tri6.append([a, 6 + b, 6 + a, 15 + k, 9 + k, 12 + a])
    tri6 = np.array(tri6)
    got = curved_surface_moments(nodes, tri6)

    def integral(f):
        return dblquad(lambda y, x: f(x, y), 0.0, 1.0, 0.0, lambda x: 1.0 - x, epsabs=1e-14, epsrel=1e-13)[0]

    vol = integral(top)
    assert got.mass == pytest.approx(vol, rel=1e-12)
    np.testing.assert_allclose(got.first, [integral(lambda x, y: x * top(x, y)),
                                           integral(lambda x, y: y * top(x, y)),
                                           integral(lambda x, y: top(x, y) ** 2 / 2)], rtol=1e-12)
    assert got.second[0, 1] == pytest.approx(integral(lambda x, y: x * y * top(x, y)), rel=1e-12)
    assert got.second[2, 2] == pytest.approx(integral(lambda x, y: top(x, y) ** 3 / 3), rel=1e-12)
    assert got.second[0, 2] == pytest.approx(integral(lambda x, y: x * top(x, y) ** 2 / 2), rel=1e-12)


def test_curved_sphere_converges_to_the_handbook_fourth_order():
    # Solid sphere: V = 4/3 π r³, I = 2/5 m r² (Marks' Handbook — from memory). Icospheres
    # with the mid nodes on the sphere: the error falls ~16x a subdivision (flat faces: 4x).
    from bladesolid.moments import curved_surface_moments

    r, errs = 0.1, []
    for sub in (1, 2, 3):
        s = trimesh.creation.icosphere(subdivisions=sub, radius=r)
        nodes, tri6 = _curved(s.vertices, s.faces, lambda p: r * p / np.linalg.norm(p, axis=1)[:, None])
        m = curved_surface_moments(nodes + [0.2, 0.5, 0.0], tri6)
        v = 4 / 3 * np.pi * r**3
        np.testing.assert_allclose(m.cg, [0.2, 0.5, 0.0], atol=1e-12)
        errs.append(max(abs(m.mass / v - 1), abs(m.inertia_cg()[0, 0] / (0.4 * v * r * r) - 1)))
    assert all(12 < a / b < 20 for a, b in zip(errs, errs[1:]))
    assert errs[-1] < 2e-5
