"""Tetrahedral mass elements that fill a closed surface exactly.

TetGen (through the ``tetgen`` package) is run as a constrained tetrahedraliser with the
input surface preserved (switches ``pYQO0``: no Steiner points on the boundary, no facet
merging, no optimisation pass), so the union of the elements is exactly the input solid and the element volumes
add up to the closed-surface volume to round-off. Interior points are only added when a
finer field is asked for (target element size or count). TetGen is deterministic for a
given input and switches.
"""

from __future__ import annotations

import contextlib
import os
import sys
from dataclasses import dataclass

import numpy as np

from .errors import InputError
from .geometry import orient_positive, tet_signed_volumes  # noqa: F401 - the one definition, re-exported


@dataclass(frozen=True)
class TetMesh:
    """Tetrahedral mass elements of all bodies.

    nodes : (n, 3) float, m (frame of the input)
    tets  : (k, 4) int64, positively oriented
    body  : (k,) int32, index of the body each element belongs to
    """

    nodes: np.ndarray
    tets: np.ndarray
    body: np.ndarray

    def __len__(self) -> int:
        return int(self.tets.shape[0])


@contextlib.contextmanager
def _quiet_stdout():
    """Silence the C library's own prints (it writes to file descriptor 1)."""
    try:
        fd = sys.stdout.fileno()
    except (AttributeError, OSError, ValueError):
        yield
        return
    sys.stdout.flush()
    saved = os.dup(fd)
    try:
        with open(os.devnull, "w") as devnull:
            os.dup2(devnull.fileno(), fd)
            try:
                yield
            finally:
                _flush_c_stdio()
    finally:
        os.dup2(saved, fd)
        os.close(saved)


def _flush_c_stdio():
    """Flush the C library's stdout buffer (where the C++ code's prints wait)."""
    try:
        import ctypes

        ctypes.CDLL(None).fflush(None)
    except (OSError, AttributeError):  # pragma: no cover - non-POSIX
        pass


def tetrahedralise_surface(
    vertices: np.ndarray,
    faces: np.ndarray,
    *,
    max_volume: float | None = None,
    source: str = "mesh",
) -> tuple[np.ndarray, np.ndarray]:
    """Fill one closed surface with tetrahedra, the surface preserved exactly.

    vertices : (n, 3) float, m;  faces : (m, 3) int, closed and outward.
    max_volume : optional largest element volume, m³ (adds interior points only, so it is met
      wherever the preserved surface allows: elements against large surface triangles stay
      as large as those triangles make them).
    Returns ``(nodes (p, 3), tets (k, 4))``; the first n nodes are the input vertices.

    Raises :class:`InputError` when the tetrahedraliser refuses the surface (typically a
    self-intersecting or badly degenerate surface).
    """
    import tetgen

    vertices = np.ascontiguousarray(vertices, dtype=np.float64)
    faces = np.ascontiguousarray(faces, dtype=np.int32)
    # Tetgen works best near unit scale: solve in a normalised frame, map back exactly
    # (input vertices are copied back so the surface is bit-for-bit the input one).
    centre = 0.5 * (vertices.min(axis=0) + vertices.max(axis=0))
    scale = float(np.max(vertices.max(axis=0) - vertices.min(axis=0))) or 1.0
    local = (vertices - centre) / scale
    # p: a piecewise linear complex; Y: keep the input surface (no boundary Steiner points);
    # Q: quiet. First without the optimisation pass (O0: the integrals are exact whatever the
    # element shape, and on needle-triangle scans the optimiser is where TetGen spends its
    # time); when TetGen trips over a surface that way, again with it (its robust default).
    if max_volume is None:
        attempts = ("pYQO0", "pYQ")
    else:
        attempts = (f"pYqQa{max_volume / scale**3:.6g}",)
    out = None
    msg = ""
    for switches in attempts:
        try:
            with _quiet_stdout():
                out = tetgen.TetGen(local, faces).tetrahedralize(switches=switches)
            break
        except Exception as exc:  # the C library raises plain RuntimeError on bad input
            msg = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    if out is None:
        raise InputError(
            source,
            f"the surface could not be filled with tetrahedra ({msg}); "
            "it is probably self-intersecting or has overlapping faces",
        )
    nodes_local, tets = np.asarray(out[0]), np.asarray(out[1], dtype=np.int64)
    if tets.size == 0:
        raise InputError(source, "the surface encloses no volume that could be meshed")
    nodes = nodes_local * scale + centre
    n_in = len(vertices)
    if not np.allclose(nodes_local[:n_in], local, rtol=0, atol=1e-12):
        raise InputError(source, "the tetrahedraliser moved the input surface; refusing the result")
    nodes[:n_in] = vertices
    return nodes, orient_positive(nodes, tets)


def mass_elements(
    bodies,
    *,
    max_volume: float | None = None,
    target_elements: int | None = None,
    source: str = "mesh",
    progress=None,
) -> TetMesh:
    """Tetrahedral mass elements for every body (surfaces are meshed, volume meshes kept).

    bodies : sequence of :class:`bladesolid.io.Body`
    max_volume : largest element volume, m³; or ``target_elements`` : roughly how many
    elements in all (converted to a largest volume from the total enclosed volume).
    progress : optional callable(done, total) for a progress display.
    """
    from .moments import surface_volume_moments

    if target_elements is not None and max_volume is None:
        total = sum(abs(surface_volume_moments(b.vertices, b.faces).mass) for b in bodies)
        max_volume = total / max(int(target_elements), 1)
    all_nodes, all_tets, all_body = [], [], []
    offset = 0
    for i, b in enumerate(bodies):
        if b.tets is not None and max_volume is None:
            nodes, tets = np.asarray(b.vertices, float), orient_positive(b.vertices, b.tets)
        else:
            nodes, tets = tetrahedralise_surface(b.vertices, b.faces, max_volume=max_volume, source=source)
        all_nodes.append(nodes)
        all_tets.append(tets + offset)
        all_body.append(np.full(len(tets), i, dtype=np.int32))
        offset += len(nodes)
        if progress is not None:
            progress(i + 1, len(bodies))
    return TetMesh(np.concatenate(all_nodes), np.concatenate(all_tets), np.concatenate(all_body))
