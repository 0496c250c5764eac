"""Element matrices of the 10-node (quadratic) tetrahedron and their assembly (numba).

Every element is affine (straight edges), so the shape-function gradients are linear and:

* the stiffness ``∫ Bᵀ D B dV`` is integrated exactly by the 4-point rule of degree 2;
* the geometric (stress) stiffness ``∫ σ_ij ∂_i N_a ∂_j N_b dV`` with the element's linear
  stress field is integrated exactly by the 5-point rule of degree 3;
* the consistent mass ``∫ ρ N_a N_b dV`` is ρ V times a fixed 10 × 10 matrix, computed here
  exactly from the integral of barycentric monomials, ∫ λ^α dV = 6 V α! / (|α| + 3)!
  (e.g. Zienkiewicz & Taylor, *The Finite Element Method* Vol. 1 — from memory).

Matrices are assembled on the node graph: 3 × 3 blocks (BSR) for the stiffness; scalar
node matrices for the mass and the geometric stiffness, which act alike on the three
displacement components (``M ⊗ I₃``, ``Kσ = G ⊗ I₃``). Degrees of freedom are node-major,
``3 · node + component``, hub frame.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from .qmesh import TET10_EDGES

# 4-point rule, degree 2 (Keast; e.g. Zienkiewicz & Taylor — from memory): weights of the volume
_A, _B = 0.5854101966249685, 0.1381966011250105
RULE2_POINTS = np.array([[_A, _B, _B, _B], [_B, _A, _B, _B], [_B, _B, _A, _B], [_B, _B, _B, _A]])
RULE2_WEIGHTS = np.full(4, 0.25)
# 5-point rule, degree 3 (Keast; negative centre weight — from memory)
RULE3_POINTS = np.array([[0.25] * 4, [0.5, 1 / 6, 1 / 6, 1 / 6], [1 / 6, 0.5, 1 / 6, 1 / 6],
                         [1 / 6, 1 / 6, 0.5, 1 / 6], [1 / 6, 1 / 6, 1 / 6, 0.5]])
RULE3_WEIGHTS = np.array([-0.8, 0.45, 0.45, 0.45, 0.45])


def p2_shape(lam: np.ndarray) -> np.ndarray:
    """(..., 10) values of the quadratic shape functions at barycentric coordinates (..., 4):
    λ_i (2 λ_i − 1) at the vertices, 4 λ_i λ_j at the edge midpoints (VTK order).

    >>> p2_shape(np.array([0.25, 0.25, 0.25, 0.25])).round(4).tolist()
    [-0.125, -0.125, -0.125, -0.125, 0.25, 0.25, 0.25, 0.25, 0.25, 0.25]
    """
    lam = np.asarray(lam, dtype=float)
    vert = lam * (2.0 * lam - 1.0)
    edge = 4.0 * lam[..., TET10_EDGES[:, 0]] * lam[..., TET10_EDGES[:, 1]]
    return np.concatenate([vert, edge], axis=-1)


@lru_cache(maxsize=1)
def reference_mass() -> np.ndarray:
    """(10, 10) ∫ N_a N_b dV / V for an affine 10-node tetrahedron (exact).

    Each shape function is written as a homogeneous quadratic in λ (using Σλ = 1) and the
    products integrated with ∫ λ^α dV = 6 V α! / (|α| + 3)!. Its entries add up to 1:

    >>> round(float(reference_mass().sum()), 12)
    1.0
    """
    # coefficient tensors Q_a (4x4 symmetric) with N_a = λᵀ Q_a λ
    Q = np.zeros((10, 4, 4))
    for i in range(4):  # λ_i (2 λ_i − 1) = 2 λ_i² − λ_i Σ_k λ_k
        Q[i, i, i] += 2.0
        for k in range(4):
            Q[i, i, k] -= 0.5
            Q[i, k, i] -= 0.5
    for e, (i, j) in enumerate(TET10_EDGES):
        Q[4 + e, i, j] += 2.0
        Q[4 + e, j, i] += 2.0
    # I4[p,q,r,s] = ∫ λ_p λ_q λ_r λ_s dV / V
    I4 = np.zeros((4, 4, 4, 4))
    for p in range(4):
        for q in range(4):
            for r in range(4):
                for s in range(4):
                    counts = np.bincount([p, q, r, s], minlength=4)
                    I4[p, q, r, s] = 6.0 * np.prod([math.factorial(c) for c in counts]) / math.factorial(7)
    return np.einsum("apq,pqrs,brs->ab", Q, I4, Q)


def _kernels():
    """The element kernels (compiled on first use, cached on disk by numba)."""
    from . import kernels

    return {"stiffness": kernels.stiffness, "scalar_mass": kernels.scalar_mass, "geometric": kernels.geometric,
            "corner_stress": kernels.corner_stress, "volumes": kernels.volumes}


def lame(E, nu):
    """Lamé constants (λ, μ), Pa, of an isotropic solid from Young's modulus and Poisson's ratio.

    >>> [round(float(x) / 1e9, 4) for x in lame(200e9, 0.25)]
    [80.0, 80.0]
    """
    E, nu = np.asarray(E, float), np.asarray(nu, float)
    return E * nu / ((1 + nu) * (1 - 2 * nu)), E / (2 * (1 + nu))


@dataclass(frozen=True)
class Pattern:
    """Sparsity of the node graph of a quadratic mesh (CSR of nodes), and where each element's
    10 × 10 node pairs land in it. indptr (n+1,), indices (nnzb,), pos (k, 10, 10) int64."""

    n_nodes: int
    indptr: np.ndarray
    indices: np.ndarray
    pos: np.ndarray

    @property
    def nnzb(self) -> int:
        return int(self.indices.shape[0])


def node_pattern(elements: np.ndarray, n_nodes: int) -> Pattern:
    """The node graph of ``elements`` (k, 10): every pair of nodes sharing an element."""
    el = np.asarray(elements, dtype=np.int64)
    rows = np.repeat(el, 10, axis=1)  # (k, 100): a a a ... ; b varies fastest
    cols = np.tile(el, (1, 10))
    key = (rows * n_nodes + cols).ravel()
    uniq, inv = np.unique(key, return_inverse=True)
    r = uniq // n_nodes
    indptr = np.zeros(n_nodes + 1, dtype=np.int64)
    np.cumsum(np.bincount(r, minlength=n_nodes), out=indptr[1:])
    return Pattern(n_nodes, indptr, (uniq % n_nodes).astype(np.int64), inv.reshape(-1, 10, 10).astype(np.int64))


def element_volumes(nodes, elements) -> np.ndarray:
    """(k,) volumes of the (affine) elements, m³."""
    out = np.empty(len(elements))
    _kernels()["volumes"](np.ascontiguousarray(nodes, float), np.ascontiguousarray(elements, np.int64), out)
    return out


def _block_csr(pattern: Pattern, data: np.ndarray):
    """CSR matrix of 3 × 3 node blocks (nnzb, 3, 3)."""
    import scipy.sparse as sp

    n = pattern.n_nodes
    return sp.bsr_matrix((data, pattern.indices, pattern.indptr), shape=(3 * n, 3 * n)).tocsr()


def scalar_matrix(pattern: Pattern, data: np.ndarray):
    """The scalar node matrix (n, n) with values ``data`` (nnzb,) as CSR."""
    import scipy.sparse as sp

    n = pattern.n_nodes
    return sp.csr_matrix((data, pattern.indices, pattern.indptr), shape=(n, n))


def expand(scalar, block: np.ndarray | None = None):
    """``scalar ⊗ block`` as a DOF matrix (3n, 3n) CSR; block (3, 3), default the identity."""
    import scipy.sparse as sp

    return sp.kron(scalar, np.eye(3) if block is None else np.asarray(block, float), format="csr")


def stiffness_matrix(nodes, elements, pattern: Pattern, E, nu):
    """Linear elastic stiffness K (3n, 3n), N/m; E (k,) Pa and nu (k,) per element."""
    l1, l2 = lame(E, nu)
    data = np.zeros((pattern.nnzb, 3, 3))
    _kernels()["stiffness"](np.ascontiguousarray(nodes, float), np.ascontiguousarray(elements, np.int64),
                            np.ascontiguousarray(l1, float), np.ascontiguousarray(l2, float),
                            RULE2_POINTS, RULE2_WEIGHTS, TET10_EDGES, pattern.pos, data)
    return _block_csr(pattern, data)


def mass_scalar(nodes, elements, pattern: Pattern, rho):
    """Consistent scalar mass matrix (n, n), kg: ∫ ρ N_a N_b dV; rho (k,) kg/m³."""
    data = np.zeros(pattern.nnzb)
    _kernels()["scalar_mass"](np.ascontiguousarray(nodes, float), np.ascontiguousarray(elements, np.int64),
                              np.ascontiguousarray(rho, float), reference_mass(), pattern.pos, data)
    return scalar_matrix(pattern, data)


def geometric_scalar(nodes, elements, pattern: Pattern, corner_stress: np.ndarray):
    """Scalar geometric stiffness (n, n), N/m: ∫ σ_ij ∂_i N_a ∂_j N_b dV from the element
    stress fields given at the corners, corner_stress (k, 4, 6) Pa (Voigt xx yy zz yz xz xy)."""
    data = np.zeros(pattern.nnzb)
    _kernels()["geometric"](np.ascontiguousarray(nodes, float), np.ascontiguousarray(elements, np.int64),
                            np.ascontiguousarray(corner_stress, float), RULE3_POINTS, RULE3_WEIGHTS,
                            TET10_EDGES, pattern.pos, data)
    return scalar_matrix(pattern, data)


def corner_stresses(nodes, elements, displacement, E, nu) -> np.ndarray:
    """(k, 4, 6) stress at the element corners, Pa (Voigt xx, yy, zz, yz, xz, xy), from the
    nodal displacements (n, 3) m; the stress is linear in each element."""
    l1, l2 = lame(E, nu)
    out = np.empty((len(elements), 4, 6))
    _kernels()["corner_stress"](np.ascontiguousarray(nodes, float), np.ascontiguousarray(elements, np.int64),
                                np.ascontiguousarray(displacement, float), np.ascontiguousarray(l1, float),
                                np.ascontiguousarray(l2, float), TET10_EDGES, out)
    return out


def von_mises(s: np.ndarray) -> np.ndarray:
    """Von Mises equivalent stress of (..., 6) Voigt stresses (xx, yy, zz, yz, xz, xy).

    >>> float(von_mises(np.array([100.0, 0, 0, 0, 0, 0])))
    100.0
    """
    s = np.asarray(s, float)
    xx, yy, zz, yz, xz, xy = (s[..., i] for i in range(6))
    return np.sqrt(0.5 * ((xx - yy) ** 2 + (yy - zz) ** 2 + (zz - xx) ** 2) + 3.0 * (yz**2 + xz**2 + xy**2))
