"""Sparse solves of the elastic blade: direct (SuperLU) or AMG-preconditioned conjugate gradients.

``direct``: a sparse Cholesky factor, kept and reused (several right-hand sides, shift-invert
Lanczos): CHOLMOD (through scikit-sparse, the optional ``fast`` extra; SuiteSparse, LGPL/GPL)
when it is installed, else scipy's SuperLU (``splu``) with the minimum-degree ordering of
AᵀA + A and symmetric mode. SuperLU's fill and time grow much faster with the mesh: it suits
meshes up to some 10⁴ quadratic elements (``scripts/bench.py`` measures both). CHOLMOD's
supernodal factorization runs on the system BLAS: with the reference BLAS it is several
times slower than with an optimised one (OpenBLAS). ``amg-cg``: pyamg smoothed aggregation with the six rigid-body
modes as near-null space, as a preconditioner of scipy's CG to a relative residual of
:data:`CG_RTOL`. ``scripts/bench.py`` measures one against the other on a blade.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

SOLVERS = ("direct", "amg-cg")

#: Relative residual at which the preconditioned CG stops.
CG_RTOL = 1e-10


@dataclass
class Factor:
    """A prepared solver for one matrix: ``solve(b)``; name; memory_bytes (matrix + factor or
    hierarchy); iterations (CG iterations of the last solve, 0 for direct)."""

    solve: object
    name: str
    memory_bytes: int
    iterations: int = 0


def matrix_bytes(A) -> int:
    return int(A.data.nbytes + A.indices.nbytes + A.indptr.nbytes)


def rigid_body_modes(points: np.ndarray) -> np.ndarray:
    """(3p, 6) the three translations and three rotations of points (p, 3), node-major."""
    p = np.asarray(points, float) - np.asarray(points, float).mean(axis=0)
    n = len(p)
    B = np.zeros((n, 3, 6))
    for i in range(3):
        B[:, i, i] = 1.0
    x, y, z = p[:, 0], p[:, 1], p[:, 2]
    B[:, 1, 3], B[:, 2, 3] = -z, y
    B[:, 0, 4], B[:, 2, 4] = z, -x
    B[:, 0, 5], B[:, 1, 5] = -y, x
    return B.reshape(3 * n, 6)


def factorize(A, solver: str = "direct", points: np.ndarray | None = None, cache: dict | None = None) -> Factor:
    """Prepare solves with the symmetric positive definite A (CSR).

    cache : a dict kept with the model; CHOLMOD's ordering and symbolic analysis are kept in
      it and reused for every later matrix of the same size (the operators of one model all
      have the pattern of its node graph), so later factorizations are numeric only.
    points : (p, 3) positions of the free nodes (for the AMG near-null space).
    """
    if solver == "direct":
        try:
            from sksparse.cholmod import cholesky
        except ImportError:
            cholesky = None
        if cholesky is not None:
            from sksparse.cholmod import analyze

            Ac = A.tocsc()
            key = ("cholmod", A.shape[0])
            if cache is not None and key in cache:
                f, nnz_l = cache[key]
                f.cholesky_inplace(Ac)
            else:
                f = analyze(Ac)
                f.cholesky_inplace(Ac)
                try:
                    nnz_l = int(f.L().nnz)  # once per model: converting the factor costs a little
                except Exception:  # pragma: no cover - older wrappers
                    nnz_l = 0
                if cache is not None:
                    cache[key] = (f, nnz_l)
            return Factor(f, "direct (CHOLMOD Cholesky, scikit-sparse)", int(matrix_bytes(A) + 12 * nnz_l))
        from scipy.sparse.linalg import splu

        lu = splu(A.tocsc(), permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0,
                  options={"SymmetricMode": True})
        mem = matrix_bytes(A) + (lu.L.nnz + lu.U.nnz) * 12
        return Factor(lu.solve, "direct (SuperLU, minimum degree on AᵀA + A)", int(mem))
    if solver == "amg-cg":
        import pyamg
        from scipy.sparse.linalg import cg

        B = rigid_body_modes(points) if points is not None else None
        ml = pyamg.smoothed_aggregation_solver(A, B=B, symmetry="symmetric", max_coarse=500)
        M = ml.aspreconditioner(cycle="V")
        mem = sum(matrix_bytes(lv.A) for lv in ml.levels) + sum(
            matrix_bytes(lv.P) + matrix_bytes(lv.R) for lv in ml.levels[:-1])
        f = Factor(None, "amg-cg (pyamg smoothed aggregation, rigid-body modes, CG)", int(mem))

        def solve(b):
            count = [0]

            def cb(_):
                count[0] += 1

            x, info = cg(A, b, rtol=CG_RTOL, atol=0.0, M=M, maxiter=2000, callback=cb)
            f.iterations = count[0]
            if info != 0:
                raise RuntimeError(f"CG did not converge in {count[0]} iterations")
            return x

        f.solve = solve
        return f
    from ..errors import InputError

    raise InputError("solver", f"expected one of {', '.join(SOLVERS)}, got {solver!r}")
