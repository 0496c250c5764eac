"""Quality tetrahedral meshes for the elastic blade, and their quadratic (10-node) form.

The mass elements of :mod:`bladesolid.mesh` keep the input surface exactly and may be of any
shape: the moments they integrate are exact whatever the shape. Stresses are not; they want
elements of bounded shape. Here TetGen is run with a radius–edge bound (``q``) and a volume
bound (``a``) from the element size asked for, with Steiner points allowed on the boundary, so
that slivers of the input surface are split too (docs/CONVENTIONS.md §10). On surfaces where
that refinement fails (thin trailing edges, needle triangles of scans can make TetGen give up
or crash), the mesh is made again with the surface kept (``Y``): quality then holds inside the
solid and at the boundary as far as the surface triangles allow, and the result says so.

The TetGen call itself is one small function, :func:`quality_tetrahedra`; :func:`quality_mesh`
runs it in a child process so that a crash of the C library cannot take the caller down.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputError

#: Radius–edge ratio bound of the quality mesh (TetGen ``q``); 1.414 is the smallest for which
#: TetGen's refinement is guaranteed to end (TetGen manual, from memory).
RADIUS_EDGE = 1.5

#: Time allowed to the refinement with boundary Steiner points before falling back to keeping
#: the surface (on thin trailing edges TetGen may refine without end), and to the fallback, s.
STEINER_TIMEOUT_S = 30.0
KEPT_SURFACE_TIMEOUT_S = 900.0

#: Default number of (linear) elements when neither an element size nor a count is given.
DEFAULT_ELEMENTS = 20_000

#: Edges of a tetrahedron in the order of VTK's 10-node tetrahedron (VTK_QUADRATIC_TETRA):
#: nodes 4..9 sit at the midpoints of these vertex pairs.
TET10_EDGES = np.array([[0, 1], [1, 2], [0, 2], [0, 3], [1, 3], [2, 3]])


def regular_tet_volume(size: float) -> float:
    """Volume of the regular tetrahedron of edge ``size``: h³ / (6 √2), m³.

    >>> round(regular_tet_volume(1.0), 6)
    0.117851
    """
    return size**3 / (6.0 * math.sqrt(2.0))


def quality_tetrahedra(vertices: np.ndarray, faces: np.ndarray, max_volume: float,
                       radius_edge: float = RADIUS_EDGE, keep_surface: bool = False):
    """One TetGen run: a quality mesh of one closed surface.

    vertices : (n, 3) m; faces : (m, 3) closed and outward; max_volume : largest element, m³;
    radius_edge : bound on the circumradius / shortest edge; keep_surface : no Steiner points
    on the boundary (``Y``). Returns ``(nodes (p, 3) m, tets (k, 4))`` or raises the C
    library's error. The first n nodes are the input vertices (moved by round-off only).
    """
    import tetgen

    v = np.ascontiguousarray(vertices, dtype=np.float64)
    f = np.ascontiguousarray(faces, dtype=np.int32)
    centre = 0.5 * (v.min(axis=0) + v.max(axis=0))  # TetGen works best near unit scale
    scale = float(np.max(v.max(axis=0) - v.min(axis=0))) or 1.0
    switches = f"p{'Y' if keep_surface else ''}q{radius_edge:g}a{max_volume / scale**3:.6g}Q"
    out = tetgen.TetGen((v - centre) / scale, f).tetrahedralize(switches=switches)
    return np.asarray(out[0]) * scale + centre, np.asarray(out[1], dtype=np.int64)


_CHILD = r"""
import io, os, sys
import numpy as np
out = os.dup(1)
os.dup2(os.open(os.devnull, os.O_WRONLY), 1)  # the C library prints to file descriptor 1
d = np.load(io.BytesIO(sys.stdin.buffer.read()))
from bladesolid.elastic.qmesh import quality_tetrahedra
try:
    nodes, tets = quality_tetrahedra(d["v"], d["f"], float(d["max_volume"]), float(d["radius_edge"]), bool(d["keep"]))
    buf = io.BytesIO()
    np.savez(buf, nodes=nodes, tets=tets)
    payload = b"OK" + buf.getvalue()
except Exception as exc:
    text = str(exc).strip()
    payload = b"ER" + (text.splitlines()[0] if text else type(exc).__name__).encode()
with os.fdopen(out, "wb") as fh:
    fh.write(payload)
"""


def run_isolated(vertices, faces, max_volume: float, radius_edge: float = RADIUS_EDGE,
                 keep_surface: bool = False, timeout_s: float = 900.0):
    """:func:`quality_tetrahedra` in a child Python process: ``("ok", (nodes, tets))`` or
    ``("error", message)`` — also when the child crashes or runs past ``timeout_s``."""
    import io
    import subprocess
    import sys

    buf = io.BytesIO()
    np.savez(buf, v=np.asarray(vertices, float), f=np.asarray(faces, np.int64), max_volume=float(max_volume),
             radius_edge=float(radius_edge), keep=bool(keep_surface))
    try:
        r = subprocess.run([sys.executable, "-c", _CHILD], input=buf.getvalue(), capture_output=True,
                           timeout=timeout_s)
    except subprocess.TimeoutExpired:
        return "error", f"no result within {timeout_s:g} s"
    if r.stdout[:2] == b"OK":
        d = np.load(io.BytesIO(r.stdout[2:]))
        return "ok", (d["nodes"], d["tets"].astype(np.int64))
    if r.stdout[:2] == b"ER":
        return "error", r.stdout[2:].decode(errors="replace")
    return "error", f"the mesher stopped (exit status {r.returncode})"


@dataclass(frozen=True)
class QualityMesh:
    """A quality tetrahedral mesh of the blade's bodies (hub frame at the modelled position).

    nodes : (n, 3) m; tets : (k, 4) int64, positively oriented; body : (k,) int32 body index;
    element_size_m : the size asked for; max_volume_m3 : the volume bound used;
    boundary_steiner : True when Steiner points were allowed on the boundary (False: the
    surface was kept, see the module docstring); notes : what was done, one line each.
    """

    nodes: np.ndarray
    tets: np.ndarray
    body: np.ndarray
    element_size_m: float
    max_volume_m3: float
    boundary_steiner: bool
    notes: tuple[str, ...] = ()

    def __len__(self) -> int:
        return int(self.tets.shape[0])


def element_size_for(volume_m3: float, target_elements: int) -> float:
    """Edge of the regular tetrahedron that fills ``volume_m3`` with ``target_elements``."""
    return (6.0 * math.sqrt(2.0) * volume_m3 / max(int(target_elements), 1)) ** (1.0 / 3.0)


def quality_mesh(surfaces, *, element_size_m: float | None = None, target_elements: int | None = None,
                 radius_edge: float = RADIUS_EDGE, boundary_steiner: bool = True, isolate: bool = True,
                 source: str = "mesh") -> QualityMesh:
    """Quality tetrahedra for every body of a blade.

    surfaces : per body (vertices (n, 3) m, faces (m, 3)), closed, hub frame
    element_size_m : target edge length, m; the volume bound is that of the regular
      tetrahedron of this edge; or ``target_elements`` : about how many elements in all
      (default :data:`DEFAULT_ELEMENTS` when neither is given)
    boundary_steiner : allow Steiner points on the boundary (falls back to keeping the
      surface when TetGen fails that way); isolate : run TetGen in a child process
    """
    from ..mesh import orient_positive
    from ..moments import surface_volume_moments

    surfaces = [(np.asarray(v, float), np.asarray(f, np.int64)) for v, f in surfaces]
    if element_size_m is not None:
        if not (math.isfinite(element_size_m) and element_size_m > 0):
            raise InputError("element_size", f"must be a positive length, got {element_size_m!r}")
        h = float(element_size_m)
    else:
        n = DEFAULT_ELEMENTS if target_elements is None else int(target_elements)
        if n < 1:
            raise InputError("elements", f"must be a positive count, got {target_elements!r}")
        vol = sum(abs(surface_volume_moments(v, f).mass) for v, f in surfaces)
        h = element_size_for(vol, n)
    max_volume = regular_tet_volume(h)
    nodes_all, tets_all, body_all, notes = [], [], [], []
    offset, steiner_all = 0, True
    for i, (v, f) in enumerate(surfaces):
        attempts = (False, True) if boundary_steiner else (True,)
        result, msgs = None, []
        for keep in attempts:
            args = (v, f, max_volume)
            kw = {"radius_edge": radius_edge, "keep_surface": keep}
            if isolate:
                status, out = run_isolated(*args, **kw, timeout_s=KEPT_SURFACE_TIMEOUT_S if keep else STEINER_TIMEOUT_S)
            else:
                try:
                    status, out = "ok", quality_tetrahedra(*args, **kw)
                except Exception as exc:  # the C library raises plain RuntimeError
                    status, out = "error", str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
            if status == "ok" and len(out[1]):
                result = out
                if keep and boundary_steiner:
                    notes.append(f"body {i + 1}: refinement with boundary Steiner points failed ({msgs[-1]}); "
                                 "meshed with the surface kept (boundary quality as the surface triangles allow)")
                    steiner_all = False
                elif keep:
                    steiner_all = False
                break
            msgs.append(out if status == "error" else "no elements")
        if result is None:
            raise InputError(source, f"body {i + 1} could not be given a quality mesh ({'; '.join(msgs)}); "
                             "the surface is probably self-intersecting or has overlapping faces")
        nodes, tets = result
        nodes_all.append(nodes)
        tets_all.append(orient_positive(nodes, tets) + offset)
        body_all.append(np.full(len(tets), i, dtype=np.int32))
        offset += len(nodes)
    return QualityMesh(np.concatenate(nodes_all), np.concatenate(tets_all), np.concatenate(body_all),
                       h, max_volume, steiner_all, tuple(notes))


@dataclass(frozen=True)
class QuadraticMesh:
    """10-node tetrahedra (VTK node order: 4 vertices, then the midpoints of
    :data:`TET10_EDGES`). nodes : (n, 3) m, the first ``n_vertices`` are the corner nodes;
    elements : (k, 10) int64; body : (k,) int32."""

    nodes: np.ndarray
    elements: np.ndarray
    body: np.ndarray
    n_vertices: int

    def __len__(self) -> int:
        return int(self.elements.shape[0])


def quadratic(nodes: np.ndarray, tets: np.ndarray, body: np.ndarray) -> QuadraticMesh:
    """Add a node at the midpoint of every edge (straight edges: the solid is polyhedral).

    >>> q = quadratic(np.eye(4)[:, :3], np.array([[0, 1, 2, 3]]), np.zeros(1, np.int32))
    >>> mid = 0.5 * (q.nodes[TET10_EDGES[:, 0]] + q.nodes[TET10_EDGES[:, 1]])
    >>> q.nodes.shape, bool(np.allclose(q.nodes[q.elements[0, 4:]], mid))
    ((10, 3), True)
    """
    tets = np.asarray(tets, dtype=np.int64)
    n = len(nodes)
    pairs = np.sort(tets[:, TET10_EDGES], axis=2).reshape(-1, 2)  # (6k, 2)
    key = pairs[:, 0] * n + pairs[:, 1]
    uniq, first, inv = np.unique(key, return_index=True, return_inverse=True)
    edges = pairs[first]
    mid = 0.5 * (nodes[edges[:, 0]] + nodes[edges[:, 1]])
    elements = np.concatenate([tets, n + inv.reshape(-1, 6)], axis=1)
    return QuadraticMesh(np.concatenate([nodes, mid]), elements, np.asarray(body, np.int32), n)
