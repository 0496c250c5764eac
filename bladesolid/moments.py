"""Mass moments: the only things bladesolid integrates.

Everything downstream (mass properties, loads at any blade angle and speed, spanwise and
per-element figures) comes from ten numbers per body or element, in SI, in whatever frame
the coordinates are given:

* ``mass``   m = ∫ dm                     (kg)
* ``first``  m c = ∫ r dm                 (kg·m, shape (3,))
* ``second`` S = ∫ r rᵀ dm                (kg·m², shape (3, 3))

The inertia tensor is ``I = tr(S)·1 − S`` (docs/CONVENTIONS.md §3).

Two independent routes give the totals: the tetrahedral mass elements (closed form for a
linear tetrahedron, Tonon 2004) and the closed surface alone (divergence theorem over the
signed tetrahedra that each face makes with a reference point). A third,
:func:`curved_surface_moments`, integrates a closed surface of curved (quadratic, 6-node)
triangles, the route of CAD input whose mid-edge nodes lie on the exact surface. The numba kernels of the
integrals live in this module. :func:`check_physical_inertia` refuses a tensor that no solid
can have (what a self-intersecting or inside-out surface integrates to).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["DUNAVANT_8", "ElementMoments", "curved_surface_moments", "inertia_from_second", "Moments", "moved",
           "point_mass", "quadratic_triangle_points", "relative_difference", "surface_volume_moments",
           "tet_volume_moments", "tet_volume_moments_numpy", "zero_moments"]

# --------------------------------------------------------------------------------------
# numba kernels (compiled on first use, cached on disk)
# --------------------------------------------------------------------------------------


def _numba():
    import numba

    return numba


_KERNELS: dict = {}


def _kernel(name):
    """Compile (once per process, cached on disk across processes) and return a kernel."""
    if name in _KERNELS:
        return _KERNELS[name]
    numba = _numba()
    if name == "tet":

        @numba.njit(parallel=True, cache=True, fastmath=False)
        def tet_kernel(nodes, tets, vol, first, second):
            n = tets.shape[0]
            for i in numba.prange(n):
                i0, i1, i2, i3 = tets[i, 0], tets[i, 1], tets[i, 2], tets[i, 3]
                ax, ay, az = nodes[i0, 0], nodes[i0, 1], nodes[i0, 2]
                bx, by, bz = nodes[i1, 0], nodes[i1, 1], nodes[i1, 2]
                cx, cy, cz = nodes[i2, 0], nodes[i2, 1], nodes[i2, 2]
                dx, dy, dz = nodes[i3, 0], nodes[i3, 1], nodes[i3, 2]
                # signed volume of (a, b, c, d): ((b-a) x (c-a)) . (d-a) / 6
                ux, uy, uz = bx - ax, by - ay, bz - az
                vx, vy, vz = cx - ax, cy - ay, cz - az
                wx, wy, wz = dx - ax, dy - ay, dz - az
                v = (
                    (uy * vz - uz * vy) * wx + (uz * vx - ux * vz) * wy + (ux * vy - uy * vx) * wz
                ) / 6.0
                v = abs(v)
                sx, sy, sz = ax + bx + cx + dx, ay + by + cy + dy, az + bz + cz + dz
                vol[i] = v
                first[i, 0] = v * sx * 0.25
                first[i, 1] = v * sy * 0.25
                first[i, 2] = v * sz * 0.25
                k = v / 20.0
                xx = k * (ax * ax + bx * bx + cx * cx + dx * dx + sx * sx)
                yy = k * (ay * ay + by * by + cy * cy + dy * dy + sy * sy)
                zz = k * (az * az + bz * bz + cz * cz + dz * dz + sz * sz)
                xy = k * (ax * ay + bx * by + cx * cy + dx * dy + sx * sy)
                xz = k * (ax * az + bx * bz + cx * cz + dx * dz + sx * sz)
                yz = k * (ay * az + by * bz + cy * cz + dy * dz + sy * sz)
                second[i, 0, 0] = xx
                second[i, 1, 1] = yy
                second[i, 2, 2] = zz
                second[i, 0, 1] = xy
                second[i, 1, 0] = xy
                second[i, 0, 2] = xz
                second[i, 2, 0] = xz
                second[i, 1, 2] = yz
                second[i, 2, 1] = yz

        _KERNELS[name] = tet_kernel
    elif name == "surface":

        @numba.njit(parallel=True, cache=True, fastmath=False)
        def surface_kernel(verts, faces, ref, nchunk, out):
            # out: (nchunk, 10) partial sums of V, ∫x, ∫y, ∫z, ∫xx, ∫yy, ∫zz, ∫xy, ∫xz, ∫yz
            n = faces.shape[0]
            per = (n + nchunk - 1) // nchunk
            px, py, pz = ref[0], ref[1], ref[2]
            for c in numba.prange(nchunk):
                acc0 = 0.0
                acc1 = 0.0
                acc2 = 0.0
                acc3 = 0.0
                acc4 = 0.0
                acc5 = 0.0
                acc6 = 0.0
                acc7 = 0.0
                acc8 = 0.0
                acc9 = 0.0
                lo = c * per
                hi = min(n, lo + per)
                for i in range(lo, hi):
                    f0, f1, f2 = faces[i, 0], faces[i, 1], faces[i, 2]
                    # vertices relative to the reference point (the fourth tet vertex, at 0)
                    ax, ay, az = verts[f0, 0] - px, verts[f0, 1] - py, verts[f0, 2] - pz
                    bx, by, bz = verts[f1, 0] - px, verts[f1, 1] - py, verts[f1, 2] - pz
                    cx, cy, cz = verts[f2, 0] - px, verts[f2, 1] - py, verts[f2, 2] - pz
                    v = (ax * (by * cz - bz * cy) + ay * (bz * cx - bx * cz) + az * (bx * cy - by * cx)) / 6.0
                    sx, sy, sz = ax + bx + cx, ay + by + cy, az + bz + cz
                    k = v / 20.0
                    acc0 += v
                    acc1 += v * sx * 0.25
                    acc2 += v * sy * 0.25
                    acc3 += v * sz * 0.25
                    acc4 += k * (ax * ax + bx * bx + cx * cx + sx * sx)
                    acc5 += k * (ay * ay + by * by + cy * cy + sy * sy)
                    acc6 += k * (az * az + bz * bz + cz * cz + sz * sz)
                    acc7 += k * (ax * ay + bx * by + cx * cy + sx * sy)
                    acc8 += k * (ax * az + bx * bz + cx * cz + sx * sz)
                    acc9 += k * (ay * az + by * bz + cy * cz + sy * sz)
                out[c, 0] = acc0
                out[c, 1] = acc1
                out[c, 2] = acc2
                out[c, 3] = acc3
                out[c, 4] = acc4
                out[c, 5] = acc5
                out[c, 6] = acc6
                out[c, 7] = acc7
                out[c, 8] = acc8
                out[c, 9] = acc9

        _KERNELS[name] = surface_kernel
    else:  # pragma: no cover - programming error
        raise KeyError(name)
    return _KERNELS[name]


# --------------------------------------------------------------------------------------
# results
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Moments:
    """Mass moments of a body about the origin of its frame (SI).

    mass   : float, kg
    first  : (3,) float, kg·m, ∫ r dm
    second : (3, 3) float, kg·m², ∫ r rᵀ dm

    >>> p = point_mass(2.0, [0.0, 1.0, 0.0])
    >>> p.cg.tolist(), float(p.inertia()[0, 0])
    ([0.0, 1.0, 0.0], 2.0)
    """

    mass: float
    first: np.ndarray
    second: np.ndarray

    def __add__(self, other: "Moments") -> "Moments":
        return Moments(self.mass + other.mass, self.first + other.first, self.second + other.second)

    @property
    def cg(self) -> np.ndarray:
        """(3,) centre of gravity, m."""
        return self.first / self.mass

    def inertia(self) -> np.ndarray:
        """(3, 3) inertia tensor about the frame origin, kg·m²."""
        return inertia_from_second(self.second)

    def about(self, point) -> "Moments":
        """The same moments with the frame origin moved to ``point`` (r → r − point)."""
        return moved(self, np.eye(3), -np.asarray(point, dtype=float))

    def inertia_about(self, point) -> np.ndarray:
        """(3, 3) inertia tensor about ``point``, kg·m²."""
        return self.about(point).inertia()

    def inertia_cg(self) -> np.ndarray:
        """(3, 3) inertia tensor about the centre of gravity, kg·m²."""
        return self.inertia_about(self.cg)

    def scaled(self, factor: float) -> "Moments":
        """Moments of the same geometry with every mass multiplied by ``factor`` (e.g. density)."""
        return Moments(self.mass * factor, self.first * factor, self.second * factor)


@dataclass(frozen=True)
class ElementMoments:
    """Mass moments of every element, about the frame origin (SI).

    mass   : (k,) float, kg
    first  : (k, 3) float, kg·m
    second : (k, 3, 3) float, kg·m²
    """

    mass: np.ndarray
    first: np.ndarray
    second: np.ndarray

    def total(self) -> Moments:
        """Sum over the elements (pairwise summation of numpy)."""
        return Moments(float(self.mass.sum()), self.first.sum(axis=0), self.second.sum(axis=0))

    def __len__(self) -> int:
        return int(self.mass.shape[0])

    def select(self, index) -> "ElementMoments":
        """The elements picked by a boolean mask or an index array."""
        return ElementMoments(self.mass[index], self.first[index], self.second[index])


def inertia_from_second(second: np.ndarray) -> np.ndarray:
    """Inertia tensor I = tr(S)·1 − S from second moments S = ∫ r rᵀ dm; (..., 3, 3).

    >>> inertia_from_second(np.diag([1.0, 2.0, 3.0])).diagonal().tolist()
    [5.0, 4.0, 3.0]
    """
    tr = np.trace(second, axis1=-2, axis2=-1)
    return tr[..., None, None] * np.eye(3) - second


def moved(m, rotation, translation):
    """Moments after the rigid motion r' = R r + t of the body (works for elements too).

    m' = m;  (m c)' = R (m c) + m t;
    S' = R S Rᵀ + (R m c) tᵀ + t (R m c)ᵀ + m t tᵀ.

    ``m`` is a :class:`Moments` or :class:`ElementMoments`; returns the same kind.

    >>> p = moved(point_mass(1.0, [1.0, 0.0, 0.0]), np.eye(3), [0.0, 2.0, 0.0])
    >>> p.cg.tolist()
    [1.0, 2.0, 0.0]
    """
    R = np.asarray(rotation, dtype=float)
    t = np.asarray(translation, dtype=float)
    mass = np.asarray(m.mass, dtype=float)
    Rf = m.first @ R.T
    first = Rf + mass[..., None] * t
    second = (
        R @ m.second @ R.T
        + Rf[..., :, None] * t
        + t[:, None] * Rf[..., None, :]
        + mass[..., None, None] * np.outer(t, t)
    )
    if isinstance(m, ElementMoments):
        return ElementMoments(m.mass, first, second)
    return Moments(float(mass), first, second)


def point_mass(mass: float, position) -> Moments:
    """Moments of a lumped point mass (kg) at ``position`` (m)."""
    p = np.asarray(position, dtype=float).reshape(3)
    return Moments(float(mass), mass * p, mass * np.outer(p, p))


def zero_moments() -> Moments:
    """Moments of nothing (the neutral element of ``+``)."""
    return Moments(0.0, np.zeros(3), np.zeros((3, 3)))


# --------------------------------------------------------------------------------------
# integrals
# --------------------------------------------------------------------------------------


def tet_volume_moments(nodes: np.ndarray, tets: np.ndarray) -> ElementMoments:
    """Exact volume moments of linear tetrahedra (unit density).

    For vertices v0..v3 and volume V (F. Tonon 2004, J. Math. Stat. 1(1)):
    ∫ r dV = V (v0+v1+v2+v3)/4;  ∫ r rᵀ dV = V/20 (Σ v_a v_aᵀ + (Σ v_a)(Σ v_a)ᵀ).

    nodes : (n, 3) float, m;  tets : (k, 4) int.  Returns volume (m³) in ``mass``,
    first (m⁴) and second (m⁵) moments; multiply by density for mass moments.
    Orientation of the tetrahedra does not matter (|V| is used).

    >>> e = tet_volume_moments(np.array([[0., 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]]),
    ...                        np.array([[0, 1, 2, 3]]))
    >>> round(float(e.mass[0]), 12), round(float(e.second[0, 0, 0]), 12)  # 1/6, 1/60
    (0.166666666667, 0.016666666667)
    """
    nodes = np.ascontiguousarray(nodes, dtype=np.float64)
    tets = np.ascontiguousarray(tets, dtype=np.int64)
    k = tets.shape[0]
    vol = np.empty(k)
    first = np.empty((k, 3))
    second = np.empty((k, 3, 3))
    if k:
        _kernel("tet")(nodes, tets, vol, first, second)
    return ElementMoments(vol, first, second)


def tet_volume_moments_numpy(nodes: np.ndarray, tets: np.ndarray) -> ElementMoments:
    """The same integrals as :func:`tet_volume_moments`, in plain numpy (reference, slower)."""
    from .geometry import tet_signed_volumes

    v = np.asarray(nodes, dtype=float)[np.asarray(tets)]
    vol = np.abs(tet_signed_volumes(nodes, tets))
    s = v.sum(axis=1)
    first = vol[:, None] * s / 4.0
    second = vol[:, None, None] / 20.0 * (np.einsum("kai,kaj->kij", v, v) + np.einsum("ki,kj->kij", s, s))
    return ElementMoments(vol, first, second)


def surface_volume_moments(vertices: np.ndarray, faces: np.ndarray) -> Moments:
    """Exact volume moments of the solid bounded by a closed, outward-wound triangle surface.

    Divergence theorem: the solid is the signed sum of the tetrahedra (reference point, face);
    the reference is the centre of the bounding box to keep round-off small. Unit density:
    returns volume (m³), first (m⁴) and second (m⁵) moments about the frame origin.

    >>> import trimesh
    >>> box = trimesh.creation.box([1.0, 2.0, 3.0])
    >>> round(surface_volume_moments(box.vertices, box.faces).mass, 12)
    6.0
    """
    verts = np.ascontiguousarray(vertices, dtype=np.float64)
    faces = np.ascontiguousarray(faces, dtype=np.int64)
    if len(faces) == 0:
        return zero_moments()
    ref = 0.5 * (verts.min(axis=0) + verts.max(axis=0))
    nchunk = 64 if len(faces) > 4096 else 1
    out = np.zeros((nchunk, 10))
    _kernel("surface")(verts, faces, ref, nchunk, out)
    acc = out.sum(axis=0)
    S = np.array(
        [[acc[4], acc[7], acc[8]], [acc[7], acc[5], acc[9]], [acc[8], acc[9], acc[6]]], dtype=float
    )
    local = Moments(float(acc[0]), acc[1:4].copy(), S)
    return moved(local, np.eye(3), ref)


#: Dunavant's symmetric rule of degree 8 on the triangle, 16 points, positive weights:
#: D. A. Dunavant (1985), "High degree efficient symmetrical Gaussian quadrature rules for the
#: triangle", Int. J. Numer. Meth. Eng. 21, 1129-1148 (the p = 8 rule, as tabulated with 15
#: digits in J. Burkardt's ``dunavant`` library). Rows: (orbit point in barycentric
#: coordinates, weight); the weights sum to 1 (multiply by the triangle's area). Exact for
#: polynomials up to degree 8 (tests/test_moments.py checks every monomial).
DUNAVANT_8 = (
    ((1.0 / 3.0, 1.0 / 3.0, 1.0 / 3.0), 0.144315607677787),
    ((0.081414823414554, 0.459292588292723, 0.459292588292723), 0.095091634267285),
    ((0.658861384496480, 0.170569307751760, 0.170569307751760), 0.103217370534718),
    ((0.898905543365938, 0.050547228317031, 0.050547228317031), 0.032458497623198),
    ((0.008394777409958, 0.263112829634638, 0.728492392955404), 0.027230314174435),
)


def quadratic_triangle_points(rule=DUNAVANT_8) -> tuple[np.ndarray, np.ndarray]:
    """The points of a symmetric triangle rule expanded over its orbits: ``(bary (q, 3),
    weights (q,))``, the weights summing to 1.

    >>> bary, w = quadratic_triangle_points()
    >>> bary.shape, round(float(w.sum()), 12)
    ((16, 3), 1.0)
    """
    import itertools

    pts, wts = [], []
    for bary, weight in rule:
        orbit = sorted(set(itertools.permutations(bary)))
        pts += orbit
        wts += [weight] * len(orbit)
    return np.array(pts, dtype=float), np.array(wts, dtype=float)


def curved_surface_moments(nodes: np.ndarray, tri6: np.ndarray, *, chunk: int = 32768) -> Moments:
    """Exact volume moments of the solid bounded by a closed surface of quadratic triangles.

    nodes : (n, 3) float, m
    tri6  : (k, 6) int, each row corners ``a, b, c`` (outward, right-hand order) then the
            mid-edge nodes of ``ab``, ``bc``, ``ca``; neighbouring triangles share the three
            nodes of their common edge (the surface is closed and watertight)

    Each patch is the isoparametric map x(ξ, η) = Σ N_a(ξ, η) x_a of the six-node triangle
    (N_a the quadratic Lagrange shape functions). By the divergence theorem with Euler's
    identity for a homogeneous polynomial f of degree p (div(f x) = (p + 3) f),
    ∫_V f dV = 1/(p + 3) ∮ f x·n dA, with n dA = x_ξ × x_η dξ dη on each patch:

        V = 1/3 ∮ x·n dA,   ∫ x dV = 1/4 ∮ x (x·n) dA,   ∫ x xᵀ dV = 1/5 ∮ x xᵀ (x·n) dA.

    x is quadratic and x_ξ × x_η of degree 2 in (ξ, η), so the integrands are polynomials of
    degree at most 8, integrated exactly by Dunavant's degree-8 rule (:data:`DUNAVANT_8`).
    The result is exact for the piecewise-quadratic surface (flat triangles with their mid
    nodes at the edge midpoints give :func:`surface_volume_moments`). Coordinates are taken
    from the centre of the bounding box to keep round-off small. Unit density: returns volume
    (m³), first (m⁴) and second (m⁵) moments about the frame origin.

    The error of a surface of curved triangles whose nodes lie on a smooth surface falls as
    the fourth power of the triangle size (flat triangles: the second power). A sphere of
    radius 1 from an octahedron's eight faces, the mid nodes on the sphere: the curved patches
    hold 3.564 of the exact 4π/3 = 4.189, the flat faces 1.333 (an icosphere of 1280 curved
    triangles is 9e-6 low, of 1280 flat ones 8.6e-3 low).

    >>> v = np.array([[1., 0, 0], [0, 1, 0], [0, 0, 1], [-1, 0, 0], [0, -1, 0], [0, 0, -1]])
    >>> corners = np.array([[0, 1, 2], [1, 3, 2], [3, 4, 2], [4, 0, 2],
    ...                     [1, 0, 5], [3, 1, 5], [4, 3, 5], [0, 4, 5]])
    >>> edges = {}
    >>> mids = []
    >>> def mid(a, b):
    ...     key = (min(a, b), max(a, b))
    ...     if key not in edges:
    ...         p = v[a] + v[b]; mids.append(p / np.linalg.norm(p)); edges[key] = 5 + len(mids)
    ...     return edges[key]
    >>> tri6 = np.array([[a, b, c, mid(a, b), mid(b, c), mid(c, a)] for a, b, c in corners])
    >>> m = curved_surface_moments(np.vstack([v, mids]), tri6)
    >>> round(m.mass, 3), round(surface_volume_moments(v, corners).mass, 3)
    (3.564, 1.333)
    """
    nodes = np.asarray(nodes, dtype=np.float64)
    tri6 = np.asarray(tri6, dtype=np.int64)
    if tri6.ndim != 2 or tri6.shape[1] != 6:
        raise ValueError(f"tri6 must have shape (k, 6), got {tri6.shape}")
    if len(tri6) == 0:
        return zero_moments()
    bary, w = quadratic_triangle_points()
    L1, L2, L3 = bary[:, 0], bary[:, 1], bary[:, 2]  # ξ = L2, η = L3
    # shape functions (q, 6) and their derivatives along ξ and η, node order a, b, c, ab, bc, ca
    N = np.stack([L1 * (2 * L1 - 1), L2 * (2 * L2 - 1), L3 * (2 * L3 - 1), 4 * L1 * L2, 4 * L2 * L3,
                  4 * L3 * L1], axis=1)
    zero = np.zeros_like(L1)
    dxi = np.stack([1 - 4 * L1, 4 * L2 - 1, zero, 4 * (L1 - L2), 4 * L3, -4 * L3], axis=1)
    deta = np.stack([1 - 4 * L1, zero, 4 * L3 - 1, -4 * L2, 4 * L2, 4 * (L1 - L3)], axis=1)
    wq = 0.5 * w  # the reference triangle's area is 1/2
    used = nodes[np.unique(tri6)]
    ref = 0.5 * (used.min(axis=0) + used.max(axis=0))
    acc = np.zeros(10)
    for lo in range(0, len(tri6), chunk):
        P = nodes[tri6[lo:lo + chunk]] - ref  # (t, 6, 3)
        x = np.einsum("qa,tai->tqi", N, P)
        n = np.cross(np.einsum("qa,tai->tqi", dxi, P), np.einsum("qa,tai->tqi", deta, P))
        g = np.einsum("tqi,tqi->tq", x, n) * wq  # x·n dA per point
        acc[0] += g.sum() / 3.0
        acc[1:4] += np.einsum("tq,tqi->i", g, x) / 4.0
        xx = np.einsum("tq,tqi,tqj->ij", g, x, x) / 5.0
        acc[4:] += xx[[0, 1, 2, 0, 0, 1], [0, 1, 2, 1, 2, 2]]
    S = np.array([[acc[4], acc[7], acc[8]], [acc[7], acc[5], acc[9]], [acc[8], acc[9], acc[6]]])
    return moved(Moments(float(acc[0]), acc[1:4].copy(), S), np.eye(3), ref)


def relative_difference(a: Moments, b: Moments) -> float:
    """Largest relative disagreement between two sets of moments (mass, first, second).

    Each group is compared in its own scale: |Δm|/m, |Δ(mc)|/(m·L), ‖ΔS‖/‖S‖ with L the
    radius of gyration, so that a first moment near zero is not divided by zero.
    """
    m = max(abs(a.mass), abs(b.mass), 1e-300)
    s_norm = max(np.linalg.norm(a.second), np.linalg.norm(b.second), 1e-300)
    length = np.sqrt(s_norm / m)
    return float(
        max(
            abs(a.mass - b.mass) / m,
            np.linalg.norm(a.first - b.first) / (m * length),
            np.linalg.norm(a.second - b.second) / s_norm,
        )
    )


#: violations of the conditions of :func:`check_physical_inertia` up to this fraction of the
#: trace are taken for round-off (common practice, no source)
PHYSICAL_REL_TOL = 1e-8


def check_physical_inertia(inertia, source: str, rel_tol: float = PHYSICAL_REL_TOL) -> np.ndarray:
    """Refuse an inertia tensor that no solid can have; return its principal moments.

    inertia : :class:`Moments` (tested about its centre of gravity, and its mass must be
    positive) or a (3, 3) inertia tensor, kg·m², about any point. ``source`` names what it
    came from (a file, a body) for the message.

    Every body of non-negative density has principal moments I1 <= I2 <= I3 with I1 >= 0 and
    I1 + I2 >= I3 (I1 + I2 - I3 = 2 ∫ z² dm along the third principal axis; equal only for a
    flat body). The tensor about the centre of gravity is the tightest test: about any other
    point a point-mass tensor, itself physical, is added. A divergence-theorem integral over a
    surface that crosses itself or is wound inside out counts some volume negatively and can
    break either condition; breaking one beyond ``rel_tol`` of the trace raises
    :class:`~bladesolid.errors.InputError`. Passing does not prove the surface clean.
    Returns ``(3,)`` principal moments, ascending, kg·m².

    >>> from bladesolid.moments import point_mass
    >>> check_physical_inertia(np.diag([2.0, 3.0, 4.0]), "part").tolist()
    [2.0, 3.0, 4.0]
    >>> check_physical_inertia(np.diag([1.0, 1.0, 3.0]), "part")
    Traceback (most recent call last):
    ...
    bladesolid.errors.InputError: part: the inertia tensor is impossible for a solid (principal moments 1, 1, 3 kg·m²: I1 + I2 < I3); the surface is probably self-intersecting or inside-out
    """
    from .errors import InputError

    if isinstance(inertia, Moments):
        if not inertia.mass > 0:
            raise InputError(source, f"the mass is {inertia.mass:.4g} kg, not positive; the surface is probably "
                             "self-intersecting or inside-out")
        tensor = inertia.inertia_cg()
    else:
        tensor = np.asarray(inertia, dtype=float)
        if tensor.shape != (3, 3):
            raise InputError(source, f"expected a (3, 3) inertia tensor, got shape {tensor.shape}")
    if not np.isfinite(tensor).all():
        raise InputError(source, "the inertia tensor has non-finite entries")
    principal = np.linalg.eigvalsh(0.5 * (tensor + tensor.T))
    slack = rel_tol * abs(float(np.trace(tensor)))
    why = []
    if principal[0] < -slack:
        why.append("a negative principal moment")
    if principal[0] + principal[1] - principal[2] < -slack:
        why.append("I1 + I2 < I3")
    if why:
        values = ", ".join(f"{x:.4g}" for x in principal)
        raise InputError(source, f"the inertia tensor is impossible for a solid (principal moments {values} kg·m²: "
                         f"{' and '.join(why)}); the surface is probably self-intersecting or inside-out")
    return principal
