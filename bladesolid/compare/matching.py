"""Blade-set matching: which blade goes to which hub position.

The blades of one hub, each read from its bladesolid report, are assigned to the N equally
spaced positions so that the resultant static imbalance is smallest, with the blades' CTMs
kept balanced second (all (N−1)! assignments up to 8 blades, a seeded local search beyond).
"""

from __future__ import annotations

import itertools
import math
import os
from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..units import rpm_to_rad_s

__all__ = ["REPORT_SCHEMA", "Assignment", "MatchResult", "SetBlade", "match_blades", "match_section", "match_set",
           "read_set_report", "set_blade_from_report"]


#: The schema of the reports read for set matching (docs/CONVENTIONS.md §6; the same string as
#: ``bladesolid.report.SCHEMA``, not imported from there: report is downstream of compare).
REPORT_SCHEMA = "bladesolid.report/1"


@dataclass(frozen=True)
class SetBlade:
    """One blade of a set, from its bladesolid report (SI, the blade's hub frame).

    moment_vector : (3,) m·c⊥, the static moment vector in the plane of rotation, kg·m
    """

    source: str
    name: str
    mass_kg: float
    cg_m: np.ndarray
    static_moment_kgm: float
    moment_vector: np.ndarray
    ctm_Nm: float
    radial_pull_N: float
    rpm: float
    precone_deg: float


def _plane_basis(precone_deg: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(k, u1, u2): rotation axis in the hub frame and a right-handed basis of the plane of
    rotation (u1 = x, u2 = k × u1)."""
    phi = math.radians(precone_deg)
    k = np.array([0.0, math.sin(phi), math.cos(phi)])
    u1 = np.array([1.0, 0.0, 0.0])
    return k, u1, np.cross(k, u1)


def _get(d, key, where, kind="number"):
    if not isinstance(d, dict) or key not in d:
        raise InputError(where, f"missing key '{key}'; is this a bladesolid report (schema bladesolid.report/1)?")
    v = d[key]
    if kind == "number":
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(float(v)):
            raise InputError(where, f"'{key}' must be a finite number, got {v!r}")
        return float(v)
    if kind == "vec3":
        if (not isinstance(v, list) or len(v) != 3
                or not all(isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x) for x in v)):
            raise InputError(where, f"'{key}' must be a list of three finite numbers, got {v!r}")
        return np.array(v, dtype=float)
    return v


def set_blade_from_report(data, source: str) -> SetBlade:
    """Read the figures matching needs from one parsed report; :class:`InputError` naming
    the file on any missing key or wrong type."""
    if not isinstance(data, dict):
        raise InputError(source, "not a bladesolid report (expected a JSON object)")
    if data.get("schema") != REPORT_SCHEMA:
        raise InputError(source, f"schema is {data.get('schema')!r}, expected {REPORT_SCHEMA!r} (a report of "
                                 "`bladesolid loads` or `check`)")
    mp = data.get("mass_properties")
    if not isinstance(mp, dict):
        raise InputError(source, "missing 'mass_properties'")
    where = f"{source}: mass_properties"
    mass = _get(mp, "mass_kg", where)
    cg = _get(mp, "cg_m", where, "vec3")
    sm = _get(mp, "static_moment_kgm", where)
    if mass <= 0:
        raise InputError(where, f"'mass_kg' must be positive, got {mass}")
    ops = data.get("operating_points")
    if not isinstance(ops, list) or not ops or not isinstance(ops[0], dict):
        raise InputError(source, "missing 'operating_points' (at least one, with rpm, ctm_Nm and radial_pull_N); "
                                 "write the report with `bladesolid loads ... --rpm N --json FILE`")
    w0 = f"{source}: operating_points[0]"
    ctm = _get(ops[0], "ctm_Nm", w0)
    pull = _get(ops[0], "radial_pull_N", w0)
    rpm = _get(ops[0], "rpm", w0)
    precone = 0.0
    hf = (data.get("input") or {}).get("hub_frame") if isinstance(data.get("input"), dict) else None
    if isinstance(hf, dict) and hf.get("precone_deg") is not None:
        precone = _get(hf, "precone_deg", f"{source}: input.hub_frame")
    k, _, _ = _plane_basis(precone)
    vec = mass * (cg - (cg @ k) * k)
    name = (data.get("input") or {}).get("name") if isinstance(data.get("input"), dict) else None
    if not isinstance(name, str) or not name:
        name = os.path.basename(source)
    return SetBlade(source, name, mass, cg, sm, vec, ctm, pull, rpm, precone)


def read_set_report(path) -> SetBlade:
    """:func:`set_blade_from_report` of a JSON report file."""
    from ..io import read_json

    p = os.fspath(path)
    return set_blade_from_report(read_json(p, "report file", 200_000_000), p)


@dataclass(frozen=True)
class Assignment:
    """Blades on hub positions. ``order[i]`` is the blade (0-based) at position i, clocked
    360°/N·i about the rotation axis.

    imbalance_kgm : |Σ_i R(θ_i) (m c⊥)_order[i]|, the resultant static imbalance, kg·m
    imbalance_direction_deg : its clocking from position 1's x axis, about k
    ctm_resultant_Nm : |Σ_i CTM_order[i] a_i| in the plane of rotation, N·m (zero when
      the CTMs balance; for even N, built of the differences between opposite blades)
    """

    order: tuple[int, ...]
    imbalance_kgm: float
    imbalance_direction_deg: float
    ctm_resultant_Nm: float


@dataclass(frozen=True)
class MatchResult:
    best: Assignment
    worst: Assignment
    method: str
    evaluated: int


def _phasors(n: int) -> np.ndarray:
    return np.exp(2j * np.pi * np.arange(n) / n)


def _objective(z: np.ndarray, c: np.ndarray, orders: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(imbalance (p,), ctm resultant (p,), resultant phasor (p,)) of orders (p, n)."""
    e = _phasors(orders.shape[1])
    U = (z[orders] * e).sum(axis=1)
    C = (c[orders] * e).sum(axis=1)
    return np.abs(U), np.abs(C), U


def _assignment(z, c, order, cos_phi) -> Assignment:
    o = np.asarray(order)[None, :]
    imb, ctm, U = _objective(z, c, o)
    return Assignment(tuple(int(i) for i in order), float(imb[0]), math.degrees(math.atan2(U[0].imag, U[0].real)),
                      float(ctm[0]) * cos_phi)


def _pick(imb: np.ndarray, ctm: np.ndarray, worst: bool, tol_kgm: float) -> int:
    """Index of the best (smallest imbalance; among those within ``tol_kgm`` plus round-off
    of it, the smallest CTM resultant) or of the worst (largest imbalance, largest CTM
    resultant among ties)."""
    scale = max(float(np.abs(imb).max()), 1e-300)
    tie = tol_kgm + 1e-9 * scale
    if worst:
        cand = np.flatnonzero(imb >= imb.max() - tie)
        return int(cand[np.argmax(ctm[cand])])
    cand = np.flatnonzero(imb <= imb.min() + tie)
    return int(cand[np.argmin(ctm[cand])])


def _normalise(order) -> tuple[int, ...]:
    """The same assignment turned about the hub so that blade 0 sits at position 0 (a
    rotation of the whole rotor does not change any resultant's magnitude)."""
    order = list(order)
    i = order.index(0)
    return tuple(order[i:] + order[:i])


def _local_search(z, c, start, worst: bool, tol_kgm: float) -> tuple[tuple[int, ...], int]:
    """Steepest pairwise-swap descent (ascent for the worst) from ``start``: each step takes
    the best of the current order and all its single swaps (:func:`_pick`), until the
    current order is the best of its neighbourhood."""
    order = np.array(start)
    n = len(order)
    pairs = np.array([(a, b) for a in range(n) for b in range(a + 1, n)])
    rows = np.arange(1, len(pairs) + 1)
    evaluated = 0
    for _ in range(50 * n * n):  # a safeguard; descent ends long before
        cand = np.repeat(order[None, :], len(pairs) + 1, axis=0)
        cand[rows, pairs[:, 0]], cand[rows, pairs[:, 1]] = order[pairs[:, 1]], order[pairs[:, 0]]
        imb, ctm, _ = _objective(z, c, cand)
        evaluated += len(cand)
        k = _pick(imb, ctm, worst, tol_kgm)
        if k == 0:
            break
        order = cand[k]
    return tuple(int(i) for i in order), evaluated


def match_blades(vectors, ctms, *, precone_deg: float = 0.0, exhaustive_up_to: int = 8, starts: int = 12,
                 seed: int = 0, imbalance_tolerance_kgm: float = 0.0) -> MatchResult:
    """Assign N blades to N equally spaced hub positions (clocking 360°/N·i about k).

    vectors : (N, 3) static moment vectors m·c⊥ of the blades in their hub frames, kg·m
    ctms : (N,) CTM of each blade at the operating point, N·m
    Primary objective: the smallest resultant static imbalance |Σ R(θ_i) v_σ(i)|; secondary
    (among assignments within ``imbalance_tolerance_kgm`` of it): the smallest in-plane
    resultant of the CTMs. N ≤ ``exhaustive_up_to``: all (N−1)! assignments with blade 1 at
    position 1; beyond: steepest pairwise-swap search from ``starts`` seeded starts.
    Also returns the worst assignment (largest imbalance), found the same way.
    """
    V = np.asarray(vectors, dtype=float).reshape(-1, 3)
    n = len(V)
    if n < 2:
        raise ValueError("matching needs at least two blades")
    _, u1, u2 = _plane_basis(precone_deg)
    z = V @ u1 + 1j * (V @ u2)
    c = np.asarray(ctms, dtype=float).reshape(n).astype(complex)
    cos_phi = math.cos(math.radians(precone_deg))
    tol = float(imbalance_tolerance_kgm)
    if n <= exhaustive_up_to:
        rest = np.array(list(itertools.permutations(range(1, n))), dtype=np.int64).reshape(-1, n - 1)
        orders = np.hstack([np.zeros((len(rest), 1), dtype=np.int64), rest])
        imb, ctm, _ = _objective(z, c, orders)
        b, w = _pick(imb, ctm, False, tol), _pick(imb, ctm, True, tol)
        return MatchResult(_assignment(z, c, orders[b], cos_phi), _assignment(z, c, orders[w], cos_phi),
                           f"exhaustive: all {len(orders)} assignments with blade 1 at position 1", len(orders))
    rng = np.random.default_rng(seed)
    start_list = [tuple(range(n))] + [tuple(int(i) for i in rng.permutation(n)) for _ in range(max(starts - 1, 0))]
    evaluated = 0
    found = {False: [], True: []}
    for worst in (False, True):
        for s in start_list:
            order, ev = _local_search(z, c, s, worst, tol)
            evaluated += ev
            found[worst].append(_normalise(order))
    res = {}
    for worst in (False, True):
        orders = np.array(sorted(set(found[worst])), dtype=np.int64)
        imb, ctm, _ = _objective(z, c, orders)
        res[worst] = _assignment(z, c, orders[_pick(imb, ctm, worst, tol)], cos_phi)
    return MatchResult(res[False], res[True], f"pairwise-swap local search from {len(start_list)} seeded starts "
                                              f"(seed {seed}); not proven optimal", evaluated)


def match_set(blades: list[SetBlade], *, rpm: float | None = None, imbalance_tolerance_kgm: float = 0.0,
              exhaustive_up_to: int = 8, seed: int = 0) -> tuple[MatchResult, float, list[str]]:
    """Match a set of blades read from their reports; returns (result, rpm used, warnings)."""
    if len(blades) < 2:
        raise InputError(blades[0].source if blades else "match", "matching needs the reports of at least two blades")
    warnings = []
    pre = blades[0].precone_deg
    for b in blades[1:]:
        if abs(b.precone_deg - pre) > 1e-9:
            raise InputError(b.source, f"precone {b.precone_deg:g}° differs from {pre:g}° of {blades[0].source}; "
                                       "the blades of one hub share the hub frame")
    for b in blades:
        if abs(np.linalg.norm(b.moment_vector) - b.static_moment_kgm) > 1e-6 * max(b.static_moment_kgm, 1e-9):
            warnings.append(f"{b.source}: static_moment_kgm {b.static_moment_kgm:.6g} disagrees with mass_kg·|cg⊥| "
                            f"{np.linalg.norm(b.moment_vector):.6g}; the vector from mass and CG is used")
    rpms = {b.rpm for b in blades}
    if rpm is None:
        rpm = blades[0].rpm
        if len(rpms) > 1:
            warnings.append(f"the reports' first operating points are at different speeds ({', '.join(f'{r:g}' for r in sorted(rpms))} rpm); "
                            f"the CTMs are compared as reported and the imbalance force is given at {rpm:g} rpm")
    elif any(abs(r - rpm) > 1e-9 for r in rpms):
        warnings.append(f"CTMs and radial pulls are the reports' own (at {', '.join(f'{r:g}' for r in sorted(rpms))} rpm); "
                        f"only the imbalance force is at {rpm:g} rpm")
    result = match_blades([b.moment_vector for b in blades], [b.ctm_Nm for b in blades], precone_deg=pre,
                          exhaustive_up_to=exhaustive_up_to, seed=seed, imbalance_tolerance_kgm=imbalance_tolerance_kgm)
    return result, float(rpm), warnings


def _assignment_section(a: Assignment, blades: list[SetBlade], omega: float) -> dict:
    n = len(a.order)
    out = {
        "positions": [
            {"position": i + 1, "clocking_deg": 360.0 * i / n, "blade": j + 1, "name": blades[j].name,
             "report": blades[j].source, "ctm_Nm": blades[j].ctm_Nm}
            for i, j in enumerate(a.order)
        ],
        "imbalance_kgm": a.imbalance_kgm,
        "imbalance_force_N": a.imbalance_kgm * omega**2,
        "imbalance_direction_deg": a.imbalance_direction_deg,
        "ctm_resultant_Nm": a.ctm_resultant_Nm,
    }
    if n % 2 == 0:
        out["opposite_ctm_differences_Nm"] = [
            blades[a.order[i]].ctm_Nm - blades[a.order[i + n // 2]].ctm_Nm for i in range(n // 2)
        ]
    return out


def match_section(result: MatchResult, blades: list[SetBlade], rpm: float, warnings=()) -> dict:
    """The ``match`` key of the report."""
    omega = rpm_to_rad_s(rpm)
    ctm = [b.ctm_Nm for b in blades]
    n = len(blades)
    return {
        "blades": [
            {"blade": i + 1, "name": b.name, "report": b.source, "mass_kg": b.mass_kg, "cg_m": b.cg_m,
             "static_moment_kgm": b.static_moment_kgm, "static_moment_vector_kgm": b.moment_vector,
             "ctm_Nm": b.ctm_Nm, "radial_pull_N": b.radial_pull_N, "rpm": b.rpm}
            for i, b in enumerate(blades)
        ],
        "positions": n,
        "clocking_deg": [360.0 * i / n for i in range(n)],
        "rpm": rpm,
        "objective": "smallest resultant static imbalance |sum_i R(clocking_i) m c_perp| (kg·m); then the smallest "
                     "in-plane resultant of the CTMs about the pitch axes (N·m)",
        "method": result.method,
        "assignments_evaluated": result.evaluated,
        "best": _assignment_section(result.best, blades, omega),
        "worst": _assignment_section(result.worst, blades, omega),
        "ctm_spread_Nm": max(ctm) - min(ctm),
        "radial_pull_spread_N": max(b.radial_pull_N for b in blades) - min(b.radial_pull_N for b in blades),
        "mass_spread_kg": max(b.mass_kg for b in blades) - min(b.mass_kg for b in blades),
        "static_moment_spread_kgm": max(b.static_moment_kgm for b in blades) - min(b.static_moment_kgm for b in blades),
        "imbalance_force_note": "equivalent rotating force at rpm: imbalance × (2π·rpm/60)²",
        "warnings": list(warnings),
    }
