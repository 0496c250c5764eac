"""The elastic blade (docs/CONVENTIONS.md §10) against closed forms, handbook formulas, a
reference finite-element library and 1-D models solved independently inside the tests."""

import math
import os

import numpy as np
import pytest
import trimesh

from bladesolid import api
from bladesolid.errors import InputError
from bladesolid.materials import MATERIALS

AL = ("material", "al-2025-t6")
E_AL, NU_AL, RHO_AL = MATERIALS["al-2025-t6"].modulus_Pa, MATERIALS["al-2025-t6"].poisson, 2810.0


def box_blade(tmp_path, name, size, r0, pitch_deg=0.0, material=AL):
    """A rectangular bar/plate: chord along x, span along y from r0, thickness along z, turned
    ``pitch_deg`` about the pitch axis (y)."""
    b = trimesh.creation.box(size)
    b.apply_translation([0.0, r0 + size[1] / 2, 0.0])
    if pitch_deg:
        b.apply_transform(trimesh.transformations.rotation_matrix(math.radians(pitch_deg), [0, 1, 0]))
    p = os.path.join(tmp_path, f"{name}.stl")
    b.export(p)
    return api.load_blade(p, "m", [material], elements=False)


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    return str(tmp_path_factory.mktemp("elastic"))


# --- material table ---------------------------------------------------------------------------


def test_every_material_has_elastic_constants_with_a_source():
    for m in MATERIALS.values():
        assert m.modulus_Pa is not None and m.modulus_Pa > 0, m.name
        assert m.poisson is not None and 0.0 < m.poisson < 0.5, m.name
        assert m.elastic_source, m.name
    # aluminium forging alloys ~ 71-72 GPa, nu 0.33 (MMPDS-style data sheets, from memory)
    assert 69e9 < MATERIALS["al-2025-t6"].modulus_Pa < 74e9


# --- assembly against a reference library -----------------------------------------------------


def test_matrices_equal_scikit_fem_quadratic_tetrahedra():
    """K and M of our numba kernels against scikit-fem's ElementVector(ElementTetP2) on the
    same mesh (the reference library's own assembly), DOFs matched by location."""
    skfem = pytest.importorskip("skfem")
    from scipy.spatial import cKDTree
    from skfem.helpers import dot
    from skfem.models.elasticity import lame_parameters, linear_elasticity

    from bladesolid.elastic import assemble
    from bladesolid.elastic.qmesh import quadratic, quality_mesh

    b = trimesh.creation.box([0.02, 0.1, 0.01])
    qm = quality_mesh([(b.vertices, b.faces)], element_size_m=0.008, isolate=False)
    q = quadratic(qm.nodes, qm.tets, qm.body)
    pat = assemble.node_pattern(q.elements, len(q.nodes))
    k = len(q)
    K = assemble.stiffness_matrix(q.nodes, q.elements, pat, np.full(k, 70e9), np.full(k, 0.3))
    M = assemble.expand(assemble.mass_scalar(q.nodes, q.elements, pat, np.full(k, 2700.0)))
    basis = skfem.Basis(skfem.MeshTet(qm.nodes.T, qm.tets.T), skfem.ElementVector(skfem.ElementTetP2()), intorder=4)
    K_ref = skfem.asm(linear_elasticity(*lame_parameters(70e9, 0.3)), basis)
    M_ref = skfem.asm(skfem.BilinearForm(lambda u, v, w: 2700.0 * dot(u, v)), basis)
    dist, node = cKDTree(q.nodes).query(basis.doflocs.T)
    assert dist.max() < 1e-12
    comp = np.zeros(basis.N, dtype=int)
    for c in range(3):
        comp[basis.nodal_dofs[c]] = c
        comp[basis.edge_dofs[c]] = c
    ours = 3 * node + comp
    assert abs(K[ours][:, ours] - K_ref).max() <= 1e-12 * abs(K_ref).max()
    assert abs(M[ours][:, ours] - M_ref).max() <= 1e-12 * abs(M_ref).max()
    assert M.sum() / 3 == pytest.approx(2700.0 * 0.02 * 0.1 * 0.01, rel=1e-12)


# --- spinning bar: closed form ------------------------------------------------------------------


@pytest.fixture(scope="module")
def bar(folder):
    from bladesolid.elastic import elastic_model

    blade = box_blade(folder, "bar", [0.02, 0.4, 0.02], 0.1)
    return blade, elastic_model(blade, element_size_m=0.01)


def test_spinning_bar_axial_stress_and_tip_elongation(bar):
    """Uniform bar spinning about an axis normal to it, clamped at r0: σ(r) = ρΩ²(R² − r²)/2
    and tip elongation ρΩ²/(2E)·[R²(R − r0) − (R³ − r0³)/3] (closed form: integrate the
    centrifugal tension from the tip, then the strain from the root)."""
    from bladesolid.elastic import solve_static

    blade, model = bar
    st = solve_static(model, 10_000.0, stiffening=False)
    om, r0, R = st.omega_rad_s, 0.1, 0.5
    c = model.mesh.nodes[model.mesh.elements[:, :4]].mean(axis=1)
    away = c[:, 1] > r0 + 0.05  # beyond the clamp's Poisson restraint (2.5 widths)
    exact = RHO_AL * om**2 * (R**2 - c[away, 1] ** 2) / 2
    assert np.abs(st.stress_Pa[away, 1] - exact).max() < 1e-3 * exact.max()
    elong = RHO_AL * om**2 / (2 * E_AL) * (R**2 * (R - r0) - (R**3 - r0**3) / 3)
    tip = model.mesh.nodes[:, 1] > R - 1e-9
    assert st.displacement_m[tip, 1].mean() == pytest.approx(elong, rel=0.01)  # clamp restrains Poisson
    assert np.abs(st.stress_Pa[away][:, [0, 2, 3, 4, 5]]).max() < 0.01 * exact.max()


def test_root_reaction_equals_radial_pull_from_exact_moments(folder):
    """The clamp reaction along e against the radial pull of the loads (exact moments,
    api.loads_at): linear pass to round-off (the body force is exact for quadratic elements);
    the stiffened state adds the centrifugal force of the displacement, a small fraction."""
    from bladesolid.elastic import elastic_model, solve_static

    blade = box_blade(folder, "plate30", [0.04, 0.3, 0.004], 0.1, pitch_deg=30.0)
    for change in (0.0, 15.0):
        model = elastic_model(blade, pitch_change_deg=change, element_size_m=0.008)
        st = solve_static(model, 5000.0)
        pull = api.loads_at(blade, 5000.0, pitch_change_deg=change).radial_pull_N
        assert st.passes[0].root_reaction_N == pytest.approx(pull, rel=1e-9)
        assert st.root_reaction_N == pytest.approx(pull, rel=5e-3)
        assert st.root_reaction_N > pull  # the blade stretches outboard
        assert st.converged and st.iterations >= 1


def test_clamp_radius_and_elastic_constants_are_checked(folder, bar):
    from bladesolid.elastic import elastic_model
    from bladesolid.elastic.model import clamped_nodes

    blade, model = bar
    with pytest.raises(InputError, match="clamp_radius"):
        clamped_nodes(model.mesh.nodes, 0.05)  # inboard of the blade (root at 0.1 m)
    mask, r = clamped_nodes(model.mesh.nodes, 0.15)
    assert r == 0.15 and np.all(model.mesh.nodes[mask, 1] <= 0.15 + 1e-6) and mask.sum() > model.clamp.sum()
    dens = box_blade(folder, "dens", [0.02, 0.2, 0.02], 0.1, material=("density", "2810 kg/m^3"))
    with pytest.raises(InputError, match="modulus"):
        elastic_model(dens, element_size_m=0.02)
    with pytest.raises(InputError, match="poisson"):
        elastic_model(dens, element_size_m=0.02, modulus="71 GPa", poisson=0.7)
    a = trimesh.creation.box([0.02, 0.2, 0.02])
    a.apply_translation([0.0, 0.2, 0.0])
    b = a.copy()
    b.apply_translation([0.05, 0.0, 0.0])
    p = os.path.join(folder, "two.stl")
    trimesh.util.concatenate([a, b]).export(p)
    two = api.load_blade(p, "m", [AL], elements=False)
    assert len(two.surfaces) == 2
    with pytest.raises(InputError, match="single body"):
        elastic_model(two, element_size_m=0.02)


# --- cantilever frequencies ---------------------------------------------------------------------

L_BEAM, B_BEAM, H_BEAM, R0_BEAM = 0.4, 0.03, 0.006, 0.1


@pytest.fixture(scope="module")
def cantilever(folder):
    from bladesolid.elastic import elastic_model

    blade = box_blade(folder, "cantilever", [B_BEAM, L_BEAM, H_BEAM], R0_BEAM, material=("material", "steel-4340"))
    return elastic_model(blade, element_size_m=0.006)


def euler_bernoulli_hz(beta_L, E, I, rho, A, L):
    """ω_n = (β_n L)² sqrt(E I / (ρ A L⁴)) (Euler–Bernoulli cantilever; Blevins, Formulas for
    Natural Frequency and Mode Shape — from memory), in Hz."""
    return beta_L**2 * math.sqrt(E * I / (rho * A * L**4)) / (2 * math.pi)


def test_cantilever_frequencies_against_euler_bernoulli_and_saint_venant(cantilever):
    from bladesolid.elastic import modes_at

    st = MATERIALS["steel-4340"]
    E, nu, rho = st.modulus_Pa, st.poisson, st.density_kg_m3
    ms = modes_at(cantilever, 0.0, 6)
    A = B_BEAM * H_BEAM
    flat1 = euler_bernoulli_hz(1.8751, E, B_BEAM * H_BEAM**3 / 12, rho, A, L_BEAM)  # beta_1 L = 1.8751
    flat2 = euler_bernoulli_hz(4.6941, E, B_BEAM * H_BEAM**3 / 12, rho, A, L_BEAM)  # beta_2 L = 4.6941
    edge1 = euler_bernoulli_hz(1.8751, E, H_BEAM * B_BEAM**3 / 12, rho, A, L_BEAM)
    # clamped-free shaft in torsion: ω1 = (π / 2L) sqrt(G J / (ρ I_p)), J = b t³/3 (1 − 0.63 t/b)
    # (thin rectangle, Roark — from memory)
    G = E / (2 * (1 + nu))
    J = B_BEAM * H_BEAM**3 / 3 * (1 - 0.63 * H_BEAM / B_BEAM)
    Ip = B_BEAM * H_BEAM * (B_BEAM**2 + H_BEAM**2) / 12
    tors1 = math.pi / (2 * L_BEAM) * math.sqrt(G * J / (rho * Ip)) / (2 * math.pi)
    f, lab = ms.frequencies_Hz, ms.labels
    got = {name: [fi for fi, li in zip(f, lab) if li == name] for name in ("flatwise", "edgewise", "torsion")}
    assert got["flatwise"][0] == pytest.approx(flat1, rel=0.02)
    assert got["flatwise"][1] == pytest.approx(flat2, rel=0.03)
    assert got["edgewise"][0] == pytest.approx(edge1, rel=0.02)
    assert got["torsion"][0] == pytest.approx(tors1, rel=0.05)
    assert np.all(np.diff(f) >= 0)
    assert np.allclose(ms.shares.sum(axis=1), 1.0)


def hermite_rotating_beam(EI, rhoA, r0, R, omega, n_el=60, n_modes=2):
    """First flap frequencies (Hz) of a uniform cantilever from r0 to R spinning at omega about
    an axis through r = 0 normal to the span, flap out of the plane of rotation: cubic Hermite
    elements, bending stiffness plus the centrifugal tension T(r) = ρAΩ²(R² − r²)/2 as geometric
    stiffness ∫ T w' v' dr (3-point Gauss), consistent mass (standard beam elements, e.g.
    Przemieniecki, Theory of Matrix Structural Analysis — from memory)."""
    from scipy.linalg import eigh

    x = np.linspace(r0, R, n_el + 1)
    n = 2 * (n_el + 1)
    K, M = np.zeros((n, n)), np.zeros((n, n))
    gp, gw = np.polynomial.legendre.leggauss(3)
    for e in range(n_el):
        l = x[e + 1] - x[e]
        kb = EI / l**3 * np.array([[12, 6 * l, -12, 6 * l], [6 * l, 4 * l * l, -6 * l, 2 * l * l],
                                   [-12, -6 * l, 12, -6 * l], [6 * l, 2 * l * l, -6 * l, 4 * l * l]])
        m = rhoA * l / 420 * np.array([[156, 22 * l, 54, -13 * l], [22 * l, 4 * l * l, 13 * l, -3 * l * l],
                                       [54, 13 * l, 156, -22 * l], [-13 * l, -3 * l * l, -22 * l, 4 * l * l]])
        kg = np.zeros((4, 4))
        for s, w in zip(gp, gw):
            xi = (s + 1) / 2
            r = x[e] + xi * l
            T = rhoA * omega**2 * (R**2 - r**2) / 2
            dN = np.array([6 * xi * xi - 6 * xi, l * (3 * xi * xi - 4 * xi + 1), -6 * xi * xi + 6 * xi,
                           l * (3 * xi * xi - 2 * xi)]) / l
            kg += w * l / 2 * T * np.outer(dN, dN)
        ix = slice(2 * e, 2 * e + 4)
        K[ix, ix] += kb + kg
        M[ix, ix] += m
    vals = eigh(K[2:, 2:], M[2:, 2:], eigvals_only=True)[:n_modes]
    return np.sqrt(vals) / (2 * math.pi)


def test_hermite_beam_reproduces_southwell_coefficient():
    """Sanity check of the 1-D model itself: first flap mode ω² ≈ ω0² + K_S Ω² with
    K_S ≈ 1.19 at zero hub offset (Southwell, the slope at low speed — from memory)."""
    EI, rhoA, R = 10.0, 1.0, 1.0
    f0 = hermite_rotating_beam(EI, rhoA, 0.0, R, 0.0)[0]
    om = 2 * math.pi * 0.1 * f0
    f = hermite_rotating_beam(EI, rhoA, 0.0, R, om)[0]
    Ks = ((2 * math.pi * f) ** 2 - (2 * math.pi * f0) ** 2) / om**2
    assert Ks == pytest.approx(1.19, abs=0.02)


@pytest.mark.slow
def test_flatwise_frequency_rises_with_speed_as_the_rotating_beam(cantilever):
    """Stiffened first flatwise frequency at speed against the Hermite rotating-beam model of
    the same bar (hub offset r0): the rise ω² − ω0² compared, which does not depend on EI
    (so the plate's Poisson stiffening of E does not enter)."""
    from bladesolid.elastic import modes_at

    st = MATERIALS["steel-4340"]
    rhoA = st.density_kg_m3 * B_BEAM * H_BEAM
    EI = st.modulus_Pa * B_BEAM * H_BEAM**3 / 12
    fe0 = modes_at(cantilever, 0.0, 1).frequencies_Hz[0]
    fb0 = hermite_rotating_beam(EI, rhoA, R0_BEAM, R0_BEAM + L_BEAM, 0.0)[0]
    for rpm in (2000.0, 4000.0):
        om = rpm * math.pi / 30
        fe = modes_at(cantilever, rpm, 1).frequencies_Hz[0]
        fb = hermite_rotating_beam(EI, rhoA, R0_BEAM, R0_BEAM + L_BEAM, om)[0]
        rise_fe, rise_b = fe**2 - fe0**2, fb**2 - fb0**2
        assert rise_fe == pytest.approx(rise_b, rel=0.03)
        assert fe > 1.5 * fe0  # a real rise, not round-off


# --- flat plate untwist -----------------------------------------------------------------------


def plate_untwist_ode(E, nu, rho, c, t, r0, R, beta_deg, omega, r_eval, n=1000, tension=True, feedback=True):
    """θ(r) of d/dr[(G J + T k²) θ'] + q = 0, θ(r0) = 0, θ'(R) = 0 with T = ρAΩ²(R² − r²)/2,
    k² = (c² + t²)/12, J = c t³/3 (1 − 0.63 t/c) (thin rectangle, Roark — from memory) and
    q = −ρΩ²(I_cc − I_nn)[sin 2β / 2 + cos 2β θ] (the strip CTM linearised in θ): second-order
    finite differences (flux form), solved directly. Returns θ(r_eval) in degrees.
    tension / feedback False drop the T k² term / the θ term of q (pure G J torsion)."""
    G = E / (2 * (1 + nu))
    A = c * t
    J = c * t**3 / 3 * (1 - 0.63 * t / c)
    k2 = (c * c + t * t) / 12
    dI = t * c**3 / 12 - c * t**3 / 12
    b = math.radians(beta_deg)
    r = np.linspace(r0, R, n + 1)
    h = r[1] - r[0]
    rm = 0.5 * (r[:-1] + r[1:])
    a = G * J + (rho * A * omega**2 * (R**2 - rm**2) / 2 * k2 if tension else 0.0 * rm)
    s = rho * omega**2 * dI
    cb = s * math.cos(2 * b) if feedback else 0.0
    # unknowns θ_1..θ_n; (a θ')' − s cos2β θ = s sin2β / 2
    Mx = np.zeros((n, n))
    rhs = np.full(n, s * math.sin(2 * b) / 2)
    for i in range(1, n + 1):
        j = i - 1
        if i < n:
            Mx[j, j] = -(a[i - 1] + a[i]) / h**2 - cb
            Mx[j, j + 1] = a[i] / h**2
        else:  # θ'(R) = 0: ghost node, half cell
            Mx[j, j] = -2 * a[i - 1] / h**2 - cb
        if j > 0:
            Mx[j, j - 1] = a[i - 1] / h**2 if i < n else 2 * a[i - 1] / h**2
    theta = np.concatenate([[0.0], np.linalg.solve(Mx, rhs)])
    return math.degrees(float(np.interp(r_eval, r, theta)))


@pytest.mark.slow
def test_flat_plate_untwist_against_the_torsion_equation_with_tension_stiffening(folder):
    """A thin flat plate at 30°, where the tension term T k² is of the order of G J. Compared
    with the torsion equation (plate_untwist_ode): the twist between two stations away from
    the clamp (the solid's clamp also restrains the section's warping, which the 1-D equation
    does not know: it makes the solid's root a little stiffer, a local effect), the untwist at
    the reference station, and the share of the linear untwist that stiffening removes."""
    from bladesolid.elastic import elastic_model, solve_static, spanwise_elastic

    c, t, r0, L, beta, rpm = 0.05, 0.003, 0.1, 0.5, 30.0, 6000.0
    blade = box_blade(folder, "untwist", [c, L, t], r0, pitch_deg=beta)
    model = elastic_model(blade, element_size_m=0.006)
    st = solve_static(model, rpm)
    om = rpm * math.pi / 30

    def ode(r, w=om, stiff=True):
        return plate_untwist_ode(E_AL, NU_AL, RHO_AL, c, t, r0, r0 + L, beta, w, r, tension=stiff, feedback=stiff)

    ref = ode(blade.reference_radius_m)
    assert ref < 0  # the plate's CTM drives it toward fine
    assert st.converged and st.iterations >= 2
    assert st.untwist_deg == pytest.approx(ref, rel=0.07)
    sp = spanwise_elastic(model, st, [0.25, 0.4, 0.55])
    d_fe = np.diff(sp.untwist_deg)
    d_ode = np.diff([ode(r) for r in sp.radius_m])
    assert d_fe == pytest.approx(d_ode, rel=0.04)
    lin = st.passes[0].untwist_deg  # pass 0: no tension stiffening, no CTM feedback
    ratio_ode = ref / ode(blade.reference_radius_m, stiff=False)
    assert ratio_ode < 0.7  # stiffening matters on this plate
    assert st.untwist_deg / lin == pytest.approx(ratio_ode, abs=0.03)
    # mean axial stress over a section against P/A of everything outboard (equilibrium)
    assert np.allclose(sp.mean_axial_stress_Pa, sp.p_over_a_Pa, rtol=0.01)


# --- outputs ------------------------------------------------------------------------------------


def test_vtu_round_trip_and_pictures(folder, bar):
    """The VTU read back by meshio (a general-purpose reader): quadratic tetrahedra, the
    displacement at every node, six stress components and von Mises per element; the
    matplotlib pictures are written."""
    import meshio

    from bladesolid.elastic import spanwise_elastic, solve_static, write_vtu
    from bladesolid.elastic.modes import ModeSet, crossings
    from bladesolid.elastic.plots import plot_campbell, plot_spanwise

    blade, model = bar
    st = solve_static(model, 3000.0)
    path = write_vtu(model, st, os.path.join(folder, "bar.vtu"))
    with pytest.raises(InputError):
        write_vtu(model, st, path)  # exists: needs force
    m = meshio.read(path)
    assert m.cells[0].type == "tetra10" and len(m.cells[0].data) == len(model.mesh)
    assert np.allclose(m.point_data["displacement_m"], st.displacement_m)
    assert np.allclose(m.cell_data["stress_Pa"][0], st.stress_Pa)
    assert np.allclose(m.cell_data["von_mises_Pa"][0], st.von_mises_Pa)
    # away from the clamp the bar is in uniaxial tension: von Mises = the axial stress (definition)
    away = model.mesh.nodes[model.mesh.elements[:, :4]].mean(axis=1)[:, 1] > 0.2
    assert np.allclose(st.von_mises_Pa[away], st.stress_Pa[away, 1], rtol=0.01, atol=0.005 * st.von_mises_Pa.max())
    sp = spanwise_elastic(model, st, 5)
    assert os.path.getsize(plot_spanwise(sp, os.path.join(folder, "span.png"))) > 10_000
    sweep = [ModeSet(r, np.array([40.0 + r / 100.0, 150.0]), ("flatwise", "edgewise"), np.zeros((2, 5)), None, 0.0, 0)
             for r in (0.0, 2000.0, 4000.0)]
    cr = crossings(sweep, blades=3)
    assert any(c.blade_passing and c.order == 3 for c in cr)
    for c in cr:  # each crossing lies on its excitation line n·rpm/60
        assert c.frequency_Hz == pytest.approx(c.order * c.rpm / 60.0)
    assert os.path.getsize(plot_campbell(sweep, os.path.join(folder, "campbell.png"), blades=3)) > 10_000


@pytest.mark.slow
def test_modes_by_rayleigh_ritz_equal_shift_invert_on_the_final_operator(folder):
    """When the later static passes are solved by CG, the modes come from a Rayleigh–Ritz
    projection; here against shift-invert Lanczos on a fresh factor of the same final operator
    (an independent route inside the test)."""
    from scipy.sparse.linalg import LinearOperator, eigsh

    from bladesolid.elastic import assemble, elastic_model, modes_at, solve_static
    from bladesolid.elastic.solvers import factorize

    blade = box_blade(folder, "ritz", [0.05, 0.3, 0.003], 0.1, pitch_deg=30.0)
    model = elastic_model(blade, element_size_m=0.01)
    ms = modes_at(model, 6000.0, 6)
    st, last = solve_static(model, 6000.0, keep_factor=True)
    assert st.iterations >= 2 and last["factor"] is None  # the Rayleigh–Ritz route was taken
    A = last["A"]
    M = assemble.expand(model.mass_scalar)[model.free][:, model.free].tocsr()
    fac = factorize(A, "direct")
    vals = eigsh(A, k=6, M=M, sigma=0.0, OPinv=LinearOperator(A.shape, matvec=fac.solve))[0]
    assert ms.frequencies_Hz == pytest.approx(np.sqrt(np.sort(vals)) / (2 * math.pi), rel=1e-6)


@pytest.mark.slow
def test_tip_elongation_and_axial_stress_converge_under_refinement(folder):
    """Refining the spinning bar's mesh, the tip elongation settles (each change smaller than
    the one before, common practice, no source) and the axial stress away from the clamp
    stays on the closed form σ = ρΩ²(R² − r²)/2."""
    from bladesolid.elastic import elastic_model, solve_static

    blade = box_blade(folder, "refine", [0.02, 0.4, 0.02], 0.1)
    tips = []
    for h in (0.02, 0.01, 0.006):
        model = elastic_model(blade, element_size_m=h)
        st = solve_static(model, 10_000.0, stiffening=False)
        tip = model.mesh.nodes[:, 1] > 0.5 - 1e-9
        tips.append(st.displacement_m[tip, 1].mean())
        c = model.mesh.nodes[model.mesh.elements[:, :4]].mean(axis=1)
        away = c[:, 1] > 0.15
        exact = RHO_AL * st.omega_rad_s**2 * (0.5**2 - c[away, 1] ** 2) / 2
        assert np.abs(st.stress_Pa[away, 1] - exact).max() < 2e-3 * exact.max()
    assert abs(tips[2] - tips[1]) < abs(tips[1] - tips[0])
