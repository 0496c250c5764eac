"""Natural frequencies of the spinning blade and their crossings with the engine orders.

At each speed: the steady state with centrifugal stiffening (:func:`.static.solve_static`),
then the lowest modes of (K + Kσ − Ω² M⊥) φ = ω² M φ by shift-invert Lanczos (``eigsh``
with σ = 0 on the factor of the stiffened operator; docs/CONVENTIONS.md §10). The Coriolis
coupling of the rotating frame is neglected, as usual for a frequency–speed (Campbell)
chart of a blade. Frequencies are those seen on the blade (rotating frame), Hz.

Each mode is labelled by the dominant share of its kinetic energy (HRZ-lumped node masses):
the blade is cut into slabs along e; in each slab the in-plane motion of its nodes is fitted,
weighted by mass, by a rigid in-plane motion about the slab's centroid: a translation along
the slab's chord direction (the principal direction of largest spread of its nodes normal to
e — edgewise), one along the normal to it (flatwise), and a rotation about e (torsion); the
motion along e is axial. The shares of the four and of what the fit leaves (section
deformation) add up to 1.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .model import ElasticModel
from .static import solve_static

LABELS = ("flatwise", "edgewise", "torsion", "axial")

#: Extra vectors of the Rayleigh–Ritz subspace (see :func:`modes_at`).
RITZ_EXTRA = 6

#: Slabs along the span for the mode labels.
LABEL_SLABS = 24

COUPLING_NOTE = "Coriolis coupling neglected; frequencies in the rotating frame (as seen on the blade)"


@dataclass(frozen=True)
class ModeSet:
    """Modes at one speed: rpm; frequencies_Hz (ascending); labels; shares (m, 5) of the
    modal kinetic energy (flatwise, edgewise, torsion, axial, section deformation); shapes
    (n, 3, m) mass-normalised mode shapes at the nodes (None unless asked for);
    untwist_deg and passes of the steady state."""

    rpm: float
    frequencies_Hz: np.ndarray
    labels: tuple[str, ...]
    shares: np.ndarray
    shapes: np.ndarray | None
    untwist_deg: float
    passes: int

    def summary(self) -> dict:
        """One entry of the ``modes`` list of the JSON report (docs/CONVENTIONS.md §10)."""
        return {"rpm": self.rpm, "frequencies_Hz": [float(f) for f in self.frequencies_Hz],
                "labels": list(self.labels)}


def lumped_masses(model: ElasticModel) -> np.ndarray:
    """(n,) HRZ-lumped node masses, kg: the diagonal of the consistent mass scaled to the
    total mass (positive at every node, unlike row sums for quadratic tetrahedra)."""
    d = model.mass_scalar.diagonal()
    return d * (model.mass_scalar.sum() / d.sum())


def energy_shares(model: ElasticModel, shapes: np.ndarray, slabs: int = LABEL_SLABS) -> np.ndarray:
    """(m, 5) shares of kinetic energy: flatwise, edgewise, torsion, axial, rest (see module).

    shapes : (n, 3, m) mode shapes at the nodes (hub frame).
    """
    x = model.mesh.nodes
    w = lumped_masses(model)
    y = x[:, 1]
    edges = np.linspace(y.min(), y.max(), slabs + 1)
    slab = np.clip(np.searchsorted(edges, y, side="right") - 1, 0, slabs - 1)
    m_modes = shapes.shape[2]
    E = np.zeros((m_modes, 5))
    total = np.einsum("n,nim->m", w, shapes**2)
    for s in range(slabs):
        ix = np.flatnonzero(slab == s)
        if len(ix) < 3:
            continue
        ws = w[ix]
        p = x[ix][:, [0, 2]]
        c = (ws[:, None] * p).sum(axis=0) / ws.sum()
        d = p - c
        C = (ws[:, None, None] * d[:, :, None] * d[:, None, :]).sum(axis=0)
        evals, evecs = np.linalg.eigh(C)
        tdir = evecs[:, 1]
        ndir = np.array([-tdir[1], tdir[0]])
        rot = np.column_stack([d[:, 1], -d[:, 0]])  # in-plane part of e × (r − c), e = y
        Bm = np.stack([np.tile(tdir, (len(ix), 1)), np.tile(ndir, (len(ix), 1)), rot], axis=2)  # (q, 2, 3)
        u = shapes[ix][:, [0, 2], :]  # (q, 2, m)
        N = np.einsum("q,qia,qib->ab", ws, Bm, Bm)
        rhs = np.einsum("q,qia,qim->am", ws, Bm, u)
        coef = np.linalg.solve(N, rhs)  # (3, m): edgewise, flatwise, rotation
        E[:, 1] += ws.sum() * coef[0] ** 2
        E[:, 0] += ws.sum() * coef[1] ** 2
        E[:, 2] += (ws * (d**2).sum(axis=1)).sum() * coef[2] ** 2
        E[:, 3] += np.einsum("q,qm->m", ws, shapes[ix][:, 1, :] ** 2)
    E[:, 4] = np.maximum(total - E[:, :4].sum(axis=1), 0.0)
    return E / np.maximum(E.sum(axis=1, keepdims=True), 1e-300)


def modes_at(model: ElasticModel, rpm: float, n_modes: int = 8, *, stiffening: bool = True,
             solver: str = "direct", keep_shapes: bool = False, slabs: int = LABEL_SLABS, **static_kw) -> ModeSet:
    """The lowest ``n_modes`` natural frequencies at ``rpm`` with their labels.

    The operator is that of the last stiffened pass of the steady state (docs/CONVENTIONS.md §10):
    by shift-invert Lanczos on its factor, or, when that pass was solved by CG on the first
    pass's factor, by Rayleigh–Ritz on the lowest ``n_modes`` + :data:`RITZ_EXTRA` modes of
    the first stiffened operator (one factorization per speed; the error is of second order
    in the change of the prestress between the passes).
    """
    from scipy.sparse.linalg import LinearOperator, eigsh

    from . import assemble
    from .solvers import factorize

    state, last = solve_static(model, rpm, stiffening=stiffening, solver=solver, keep_factor=True, **static_kw)
    free = model.free
    M_ff = assemble.expand(model.mass_scalar)[free][:, free].tocsr()
    A_ff, fac = last["A"], last["factor"]
    n = A_ff.shape[0]
    k = int(min(n_modes, n - 2))
    if fac is not None and solver == "direct":
        op = LinearOperator((n, n), matvec=fac.solve, dtype=float)
        vals, vecs = eigsh(A_ff, k=k, M=M_ff, sigma=0.0, which="LM", OPinv=op)
    elif last["first_factor"] is not None and solver == "direct":
        # Rayleigh–Ritz: the lowest modes of the first stiffened operator (factored exactly)
        # span the subspace; the last operator differs from it only by the change of the
        # prestress between passes, so the error is of second order in that change.
        kk = int(min(k + RITZ_EXTRA, n - 2))
        op = LinearOperator((n, n), matvec=last["first_factor"].solve, dtype=float)
        _, V = eigsh(last["first_A"], k=kk, M=M_ff, sigma=0.0, which="LM", OPinv=op)
        from scipy.linalg import eigh

        w, y = eigh(V.T @ (A_ff @ V), V.T @ (M_ff @ V))
        vals, vecs = w[:k], V @ y[:, :k]
    else:
        fac = factorize(A_ff, "direct", cache=model.cache)
        op = LinearOperator((n, n), matvec=fac.solve, dtype=float)
        vals, vecs = eigsh(A_ff, k=k, M=M_ff, sigma=0.0, which="LM", OPinv=op)
    order = np.argsort(vals)
    vals, vecs = vals[order], vecs[:, order]
    freq = np.sign(vals) * np.sqrt(np.abs(vals)) / (2.0 * math.pi)
    shapes = np.zeros((3 * len(model.mesh.nodes), k))
    shapes[free] = vecs
    shapes = shapes.reshape(-1, 3, k)
    shares = energy_shares(model, shapes, slabs)
    labels = tuple(LABELS[int(i)] for i in np.argmax(shares[:, :4], axis=1))
    return ModeSet(float(rpm), freq, labels, shares, shapes if keep_shapes else None, state.untwist_deg,
                   state.iterations)


def campbell(model: ElasticModel, rpms, n_modes: int = 8, **kw) -> list[ModeSet]:
    """:func:`modes_at` at every speed of ``rpms`` (ascending order kept as given)."""
    return [modes_at(model, float(r), n_modes, **kw) for r in rpms]


@dataclass(frozen=True)
class Crossing:
    """A mode's frequency meets an excitation line n·rpm/60: rpm, frequency_Hz, mode (1 = lowest),
    label of the mode there, order n, blade_passing (n is the number of blades)."""

    rpm: float
    frequency_Hz: float
    mode: int
    label: str
    order: int
    blade_passing: bool


def crossings(sweep: list[ModeSet], blades: int | None = None, orders=range(1, 9)) -> list[Crossing]:
    """Crossings of each mode (by its rank at each speed) with n·rpm/60 Hz for n in ``orders``
    and the blade-passing order ``blades``, by linear interpolation between sweep speeds.

    >>> s = [ModeSet(0.0, np.array([10.0]), ("flatwise",), np.zeros((1, 5)), None, 0.0, 0),
    ...      ModeSet(600.0, np.array([14.0]), ("flatwise",), np.zeros((1, 5)), None, 0.0, 0)]
    >>> [(round(c.rpm, 3), c.order) for c in crossings(s, orders=[1, 2])]   # 10 + r/150 = 2 r/60
    [(375.0, 2)]
    """
    orders = sorted(set(int(n) for n in orders) | ({int(blades)} if blades else set()))
    pts = sorted(sweep, key=lambda s: s.rpm)
    out = []
    if len(pts) < 2:
        return out
    n_modes = min(len(s.frequencies_Hz) for s in pts)
    rpm = np.array([s.rpm for s in pts])
    for i in range(n_modes):
        f = np.array([s.frequencies_Hz[i] for s in pts])
        for n in orders:
            g = f - n * rpm / 60.0
            for j in range(len(pts) - 1):
                if g[j] == 0.0 or g[j] * g[j + 1] < 0.0:
                    t = 0.0 if g[j] == 0.0 else g[j] / (g[j] - g[j + 1])
                    r = rpm[j] + t * (rpm[j + 1] - rpm[j])
                    lab = pts[j].labels[i] if t < 0.5 else pts[j + 1].labels[i]
                    out.append(Crossing(float(r), float(n * r / 60.0), i + 1, lab, n, bool(blades and n == blades)))
    return sorted(out, key=lambda c: (c.rpm, c.mode, c.order))
