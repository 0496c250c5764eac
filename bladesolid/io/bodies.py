"""From a raw triangle surface to closed bodies (docs/CONVENTIONS.md §8).

:func:`surface_bodies` takes the raw arrays of a surface file (in its declared unit) and, in
this order (the first failing check is reported, in one line, in the declared unit):

merge      exactly coincident vertices are merged (bit-exact, ``-0.0 == 0.0``), within a part
weld       when the exact merge leaves boundary or non-manifold edges — the mark of a
           facet-by-facet CAD export, whose corner copies differ by float noise — vertices
           closer than the weld tolerance are merged (:func:`bladesolid.weld.weld`: by default
           1e-6 of the bounding-box diagonal, never across parts). With ``weld_tol`` given, the
           weld is made always, at that distance. A surface that is closed after the exact
           merge is not welded by default: a fine mesh may hold genuine edges far shorter than
           any tolerance that would close a noisy export (the 240 000-face demo blade has tip
           edges of 2e-7 of its diagonal).
faces      degenerate faces (repeated vertex, or area below 1e-12 of the squared diagonal)
edges      non-manifold edges, boundary edges (open surface), inconsistent winding
shells     each edge-connected closed shell; zero volume is refused
nesting    a shell lies inside another when its probe points (its extreme vertices along each
           axis) all lie inside that shell (winding number); its parent is the smallest such.
           The outermost shell of each nest is turned outward when it is wound inside out, and
           every shell nested in it with it (a file wound the other way throughout); a
           warning says so. Then a nested shell wound inward (its normals point into the void,
           away from the material) is a *cavity* of the body around it, and one wound outward
           is an *insert*: a body of its own, whose outer shell, reversed, is added to its
           host's boundary (the insert's seat, :func:`bladesolid.geometry.body_boundaries`).
           A cavity inside another cavity is refused; a body inside a cavity (lying in the
           void, in no material) is a separate body with a warning.
self-intersection  every body's boundary — outer shell, cavities, seats — is checked for face
           pairs that cross, touch or overlap beyond their shared vertices
           (:func:`bladesolid.selfintersect.self_intersections`): a surface that crosses itself
           bounds no solid, and its closed-surface integral gives impossible masses and tensors.

Each body comes back as ``(vertices, faces, None, enclosed volume of its outer shell, first
face, "", info)`` with ``info = {"id", "host" (id or None), "cavities", "cavity_volume",
"shells"}``; :func:`bladesolid.io.read_mesh` numbers the bodies and names the hosts.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..geometry import Shell, body_boundaries, origin_tet_volumes, winding_numbers
from .checks import (ZERO_VOLUME_REL, check_arrays, check_body_count, check_degenerate, check_edges, components,
                     edge_table, mend_hint, merge_exact, reindex, where)

__all__ = ["check_self_intersections", "surface_bodies"]


@dataclass
class _Shell:
    vertices: np.ndarray  # (n, 3) declared unit
    faces: np.ndarray  # (m, 3) into vertices
    volume: float  # signed, declared unit³
    first: int  # first face of the file in this shell
    lo: np.ndarray
    hi: np.ndarray

    def flip(self):
        self.faces = self.faces[:, ::-1].copy()
        self.volume = -self.volume


def surface_bodies(source, vertices, faces, unit, warnings, part=None, *, weld_tol=None, geometry=None,
                   repaired=False):
    """Validate a raw triangle surface (declared unit) and split it into closed bodies.

    part : (n,) int, optional — the solid / object of the file each vertex belongs to (ASCII
      STL ``solid`` blocks, OBJ objects); vertices are merged and welded within a part only.
    weld_tol : weld distance in the declared unit (always weld); None: weld at the default
      tolerance only when the exact merge leaves the surface open or non-manifold.
    geometry : optional dict, filled with what was done (``welded_vertices``,
      ``weld_tolerance`` in the declared unit, ``weld``, ``weld_dropped_faces``,
      ``self_intersecting_pairs``).
    repaired : the surface has been through :func:`bladesolid.repair.repair_surface` already
      (a refusal then says that the repair could not mend it).
    Returns the bodies (see the module notes).
    """
    g = geometry if geometry is not None else {}
    hint = mend_hint(repaired)
    vertices, faces = check_arrays(source, vertices, faces, unit)
    vertices, faces, kept = merge_exact(vertices, faces, part)
    if ((faces[:, 0] == faces[:, 1]) | (faces[:, 1] == faces[:, 2]) | (faces[:, 0] == faces[:, 2])).any():
        check_degenerate(source, vertices, faces, unit)  # degenerate in the file itself: refused, not welded away
    table = edge_table(faces, len(vertices))
    g.update(welded_vertices=0, weld_tolerance=None, weld="not needed: closed after the exact merge",
             weld_dropped_faces=0)
    if weld_tol is not None or (table[2] != 2).any():
        from ..weld import weld

        w = weld(vertices, faces, tol=weld_tol, part=None if part is None else np.asarray(part)[kept])
        why = ("tolerance given" if weld_tol is not None
               else "the surface was open after the exact merge, as facet-by-facet CAD exports are")
        g.update(welded_vertices=int(w.merged), weld_tolerance=float(w.tol), weld=why,
                 weld_dropped_faces=int(len(w.dropped)))
        if w.merged:
            dropped = (f"; {len(w.dropped)} faces that collapsed to a line or a point were dropped"
                       if len(w.dropped) else "")
            warnings.append(f"welded {w.merged} vertices lying within {w.tol:.3g} {unit} of another ({why}){dropped}")
        vertices, faces, table = w.vertices, w.faces, None
    check_degenerate(source, vertices, faces, unit)
    pairs = check_edges(source, vertices, faces, unit, table=table, hint=hint)
    labels = components(len(faces), pairs[0], pairs[1])
    count = check_body_count(source, labels, "separate closed shells")
    shells = _shells(source, vertices, faces, labels, count, unit)
    parent = _nesting(shells)
    _orient(shells, parent, unit, warnings)
    bodies = _assemble(source, shells, parent, unit, warnings)
    g["self_intersecting_pairs"] = check_self_intersections(source, bodies, unit, hint)
    return bodies


def _shells(source, vertices, faces, labels, count, unit) -> list[_Shell]:
    """The closed shells (own vertices, signed volume, first face), zero volume refused."""
    centre = 0.5 * (vertices.min(axis=0) + vertices.max(axis=0))
    vol = np.bincount(labels, weights=origin_tet_volumes(vertices, faces, centre), minlength=count)
    out = []
    for k in range(count):
        fk = faces[labels == k]
        used, fk = reindex(fk, len(vertices))
        vk = vertices[used]
        lo, hi = vk.min(axis=0), vk.max(axis=0)
        diag = float(np.linalg.norm(hi - lo))
        if not np.isfinite(vol[k]) or abs(vol[k]) <= ZERO_VOLUME_REL * diag**3:
            raise InputError(
                source,
                f"a closed shell of {len(fk)} faces has zero volume (a flat or collapsed "
                f"surface) {where(vk, unit)}; a solid must enclose volume",
            )
        out.append(_Shell(vk, fk, float(vol[k]), int(np.flatnonzero(labels == k)[0]), lo, hi))
    return out


def _probes(v: np.ndarray) -> np.ndarray:
    """Up to six points of a shell: its extreme vertices along x, y and z (a shell that crosses
    another sticks out of it at one of its extremes)."""
    idx = np.unique(np.concatenate([v.argmin(axis=0), v.argmax(axis=0)]))
    return v[idx]


def _nesting(shells: list[_Shell]) -> list[int]:
    """The parent of each shell (the smallest shell holding all its probe points), or -1."""
    n = len(shells)
    parent = [-1] * n
    if n < 2:
        return parent
    size = [abs(s.volume) for s in shells]
    for i, s in enumerate(shells):
        holders = []
        probes = None
        for j, t in enumerate(shells):
            if j == i or size[j] <= size[i] or (t.lo > s.lo).any() or (t.hi < s.hi).any():
                continue
            probes = _probes(s.vertices) if probes is None else probes
            if (np.abs(winding_numbers(t.vertices, t.faces, probes)) > 0.5).all():
                holders.append(j)
        if holders:
            parent[i] = min(holders, key=lambda j: size[j])
    return parent


def _orient(shells, parent, unit, warnings) -> None:
    """Turn each outermost shell wound inside out, with every shell nested in it."""
    children: dict[int, list[int]] = {}
    for i, p in enumerate(parent):
        children.setdefault(p, []).append(i)
    for root in children.get(-1, []):
        if shells[root].volume > 0:
            continue
        nest, stack = [], list(children.get(root, []))
        while stack:
            k = stack.pop()
            nest.append(k)
            stack.extend(children.get(k, []))
        for k in [root, *nest]:
            shells[k].flip()
        s = shells[root]
        also = (f", and so were those of the {len(nest)} shell{'' if len(nest) == 1 else 's'} nested in it" if nest
                else "")
        warnings.append(
            f"a closed shell of {len(s.faces)} faces {where(s.vertices, unit)} was wound inside out "
            f"(negative volume); its faces were flipped to point outward{also}"
        )


def _assemble(source, shells, parent, unit, warnings):
    """Bodies from the classified shells: outer shells are bodies, cavities join the body around
    them, inserts get a seat in their host."""
    body_of = {i: b for b, i in enumerate(i for i, s in enumerate(shells) if s.volume > 0)}
    parts: list[Shell] = []
    hosts: dict[int, int] = {}
    cavities: dict[int, list[int]] = {b: [] for b in body_of.values()}
    for i, s in enumerate(shells):
        p = parent[i]
        if s.volume > 0:
            parts.append(Shell(s.vertices, s.faces, body_of[i]))
            if p >= 0 and shells[p].volume > 0:
                hosts[body_of[i]] = body_of[p]
            elif p >= 0:
                warnings.append(
                    f"a closed shell of {len(s.faces)} faces {where(s.vertices, unit)} lies inside a cavity, in "
                    "no material; it is taken as a separate body"
                )
            continue
        if p < 0 or shells[p].volume < 0:  # roots are outward after _orient: p < 0 cannot happen
            raise InputError(
                source,
                f"a closed shell wound into the void (a cavity) of {len(s.faces)} faces {where(s.vertices, unit)} "
                "lies inside another cavity, in no material; check the winding of the inner shells",
            )
        b = body_of[p]
        parts.append(Shell(s.vertices, s.faces, b, cavity=True))
        cavities[b].append(i)
    bounds = body_boundaries(parts, len(body_of), hosts=hosts)
    out = []
    for i, b in body_of.items():
        s = shells[i]
        v, f = bounds[b]
        cav = cavities[b]
        info = {"id": b, "host": hosts.get(b), "cavities": len(cav),
                "cavity_volume": float(sum(-shells[k].volume for k in cav)),
                "shells": 1 + len(cav) + sum(1 for h in hosts.values() if h == b)}
        out.append((v, f, None, s.volume, s.first, "", info))
    return out


def check_self_intersections(source, bodies, unit, hint="") -> int:
    """Refuse a body whose boundary (outer shell, cavities, seats of its inserts) has face pairs
    that cross, touch or overlap; the one line gives the count, a point and the box of the
    crossing in the declared unit. ``bodies`` are the tuples of :func:`surface_bodies`.
    Returns the number of pairs found (0: the refusal is raised otherwise)."""
    from ..geometry import shell_labels
    from ..selfintersect import self_intersections

    for v, f, *_ in bodies:
        r = self_intersections(v, f)
        if not r.count:
            continue
        tail = f"; {hint}" if hint else ""
        lab = shell_labels(f) if len(r.pairs) else np.zeros(0, np.int64)
        between = len(r.pairs) and bool((lab[r.pairs[:, 0]] != lab[r.pairs[:, 1]]).all())
        what = ("an inner shell (a cavity or an insert) crosses or touches the shell around it" if between
                else "the surface crosses itself and bounds no solid")
        raise InputError(source, f"{r.describe(unit)}: {what}{tail}")
    return 0
