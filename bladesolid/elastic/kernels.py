"""numba kernels of the 10-node tetrahedron (imported only when an elastic solve runs).

See :mod:`bladesolid.elastic.assemble` for what each one computes; all loop over elements
serially and add into preallocated arrays (the assembly positions come from the node graph).
"""

import numba
import numpy as np


@numba.njit(cache=True)
def grads(X):
    # ∇λ (4, 3) and volume of the affine tetrahedron with vertices X (4, 3)
    J = np.empty((3, 3))
    for c in range(3):
        for r in range(3):
            J[r, c] = X[c + 1, r] - X[0, r]
    det = (J[0, 0] * (J[1, 1] * J[2, 2] - J[1, 2] * J[2, 1])
           - J[0, 1] * (J[1, 0] * J[2, 2] - J[1, 2] * J[2, 0])
           + J[0, 2] * (J[1, 0] * J[2, 1] - J[1, 1] * J[2, 0]))
    inv = np.empty((3, 3))
    inv[0, 0] = (J[1, 1] * J[2, 2] - J[1, 2] * J[2, 1]) / det
    inv[0, 1] = (J[0, 2] * J[2, 1] - J[0, 1] * J[2, 2]) / det
    inv[0, 2] = (J[0, 1] * J[1, 2] - J[0, 2] * J[1, 1]) / det
    inv[1, 0] = (J[1, 2] * J[2, 0] - J[1, 0] * J[2, 2]) / det
    inv[1, 1] = (J[0, 0] * J[2, 2] - J[0, 2] * J[2, 0]) / det
    inv[1, 2] = (J[0, 2] * J[1, 0] - J[0, 0] * J[1, 2]) / det
    inv[2, 0] = (J[1, 0] * J[2, 1] - J[1, 1] * J[2, 0]) / det
    inv[2, 1] = (J[0, 1] * J[2, 0] - J[0, 0] * J[2, 1]) / det
    inv[2, 2] = (J[0, 0] * J[1, 1] - J[0, 1] * J[1, 0]) / det
    G = np.empty((4, 3))
    for d in range(3):
        G[1, d] = inv[0, d]
        G[2, d] = inv[1, d]
        G[3, d] = inv[2, d]
        G[0, d] = -(inv[0, d] + inv[1, d] + inv[2, d])
    return G, det / 6.0

@numba.njit(cache=True)
def dshape(G, lam, edges, dN):
    # dN (10, 3): gradients of the quadratic shape functions at barycentric lam
    for i in range(4):
        for d in range(3):
            dN[i, d] = (4.0 * lam[i] - 1.0) * G[i, d]
    for e in range(6):
        i, j = edges[e, 0], edges[e, 1]
        for d in range(3):
            dN[4 + e, d] = 4.0 * (lam[i] * G[j, d] + lam[j] * G[i, d])

@numba.njit(cache=True)
def stiffness(nodes, elems, lame1, lame2, pts, wts, edges, pos, data):
    # data (nnzb, 3, 3) += element stiffness blocks; pos (k, 10, 10) block positions
    X = np.empty((4, 3))
    dN = np.empty((10, 3))
    Ke = np.empty((10, 10, 3, 3))
    for el in range(elems.shape[0]):
        for a in range(4):
            for d in range(3):
                X[a, d] = nodes[elems[el, a], d]
        G, V = grads(X)
        lm, mu = lame1[el], lame2[el]
        Ke[:] = 0.0
        for q in range(pts.shape[0]):
            dshape(G, pts[q], edges, dN)
            w = wts[q] * V
            for a in range(10):
                for b in range(10):
                    dot = dN[a, 0] * dN[b, 0] + dN[a, 1] * dN[b, 1] + dN[a, 2] * dN[b, 2]
                    for i in range(3):
                        for k in range(3):
                            v = lm * dN[a, i] * dN[b, k] + mu * dN[a, k] * dN[b, i]
                            if i == k:
                                v += mu * dot
                            Ke[a, b, i, k] += w * v
        for a in range(10):
            for b in range(10):
                p = pos[el, a, b]
                for i in range(3):
                    for k in range(3):
                        data[p, i, k] += Ke[a, b, i, k]

@numba.njit(cache=True)
def scalar_mass(nodes, elems, rho, mref, pos, data):
    # data (nnzb,) += ρ V Mref
    X = np.empty((4, 3))
    for el in range(elems.shape[0]):
        for a in range(4):
            for d in range(3):
                X[a, d] = nodes[elems[el, a], d]
        G, V = grads(X)
        c = rho[el] * V
        for a in range(10):
            for b in range(10):
                data[pos[el, a, b]] += c * mref[a, b]

@numba.njit(cache=True)
def geometric(nodes, elems, sig, pts, wts, edges, pos, data):
    # data (nnzb,) += ∫ σ_ij ∂_i N_a ∂_j N_b dV; sig (k, 4, 6) corner stresses (Voigt xx yy zz yz xz xy)
    X = np.empty((4, 3))
    dN = np.empty((10, 3))
    S = np.empty((3, 3))
    Ge = np.empty((10, 10))
    for el in range(elems.shape[0]):
        for a in range(4):
            for d in range(3):
                X[a, d] = nodes[elems[el, a], d]
        G, V = grads(X)
        Ge[:] = 0.0
        for q in range(pts.shape[0]):
            lam = pts[q]
            s = np.zeros(6)
            for c in range(4):
                for m in range(6):
                    s[m] += lam[c] * sig[el, c, m]
            S[0, 0], S[1, 1], S[2, 2] = s[0], s[1], s[2]
            S[1, 2] = S[2, 1] = s[3]
            S[0, 2] = S[2, 0] = s[4]
            S[0, 1] = S[1, 0] = s[5]
            dshape(G, lam, edges, dN)
            w = wts[q] * V
            for a in range(10):
                t0 = S[0, 0] * dN[a, 0] + S[1, 0] * dN[a, 1] + S[2, 0] * dN[a, 2]
                t1 = S[0, 1] * dN[a, 0] + S[1, 1] * dN[a, 1] + S[2, 1] * dN[a, 2]
                t2 = S[0, 2] * dN[a, 0] + S[1, 2] * dN[a, 1] + S[2, 2] * dN[a, 2]
                for b in range(10):
                    Ge[a, b] += w * (t0 * dN[b, 0] + t1 * dN[b, 1] + t2 * dN[b, 2])
        for a in range(10):
            for b in range(10):
                data[pos[el, a, b]] += Ge[a, b]

@numba.njit(cache=True)
def corner_stress(nodes, elems, u, lame1, lame2, edges, out):
    # out (k, 4, 6): stress at the four corners (the field is linear in the element)
    X = np.empty((4, 3))
    dN = np.empty((10, 3))
    lam = np.zeros(4)
    for el in range(elems.shape[0]):
        for a in range(4):
            for d in range(3):
                X[a, d] = nodes[elems[el, a], d]
        G, V = grads(X)
        lm, mu = lame1[el], lame2[el]
        for c in range(4):
            lam[:] = 0.0
            lam[c] = 1.0
            dshape(G, lam, edges, dN)
            H = np.zeros((3, 3))  # H[i, j] = ∂u_i/∂x_j
            for a in range(10):
                n = elems[el, a]
                for i in range(3):
                    for j in range(3):
                        H[i, j] += u[n, i] * dN[a, j]
            tr = H[0, 0] + H[1, 1] + H[2, 2]
            out[el, c, 0] = lm * tr + 2 * mu * H[0, 0]
            out[el, c, 1] = lm * tr + 2 * mu * H[1, 1]
            out[el, c, 2] = lm * tr + 2 * mu * H[2, 2]
            out[el, c, 3] = mu * (H[1, 2] + H[2, 1])
            out[el, c, 4] = mu * (H[0, 2] + H[2, 0])
            out[el, c, 5] = mu * (H[0, 1] + H[1, 0])

@numba.njit(cache=True)
def volumes(nodes, elems, out):
    X = np.empty((4, 3))
    for el in range(elems.shape[0]):
        for a in range(4):
            for d in range(3):
                X[a, d] = nodes[elems[el, a], d]
        G, V = grads(X)
        out[el] = V

