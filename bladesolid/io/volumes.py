"""Tetrahedral volume formats: Gmsh ``.msh``, VTK ``.vtu`` and keyword decks of tetrahedra ``.inp``.

Read through meshio inside :func:`~bladesolid.io.guards.parser_boundary`. Linear tetrahedra
(``tetra``); quadratic ``tetra10`` are read through their four corner nodes with a warning that
states how far the mid-edge nodes lie from the straight edges. Other 3-D cells are refused;
points, lines and triangles beside tetrahedra are ignored (a file of triangles only is a
surface). Bodies come from Gmsh physical groups, element sets (``*ELSET``) or a region id
array, else from the face-connected components of the tetrahedra.
"""

from __future__ import annotations

import io as _io

import numpy as np

from ..errors import InputError
from .bodies import surface_bodies
from .checks import check_arrays, check_body_count, check_edges, components, orient_tets, reindex, tet_faces
from .guards import GuardedBinary, GuardedText, guard_keyword_deck, parser_boundary, reason

__all__ = ["VOLUME_FORMATS", "read_meshio", "volume_bodies"]

#: Tetrahedral volume formats read through meshio, by extension.
VOLUME_FORMATS = {".msh": "Gmsh", ".vtu": "VTU", ".inp": "keyword deck of tetrahedra"}

_REGION_KEYS = ("gmsh:physical", "cellentityids", "medit:ref", "region", "regions",
                "material", "materialids", "material_id", "physical", "body", "part")
_IGNORED_CELLS = {"vertex", "line", "line3", "triangle", "triangle6", "triangle7",
                  "quad", "quad8", "quad9", "polygon"}


def read_meshio(source: str, ext: str, size: int):
    """The meshio Mesh of a volume file, with the hostile-input guards."""
    what = VOLUME_FORMATS[ext]
    if ext == ".inp":
        guard_keyword_deck(source)
    import meshio  # outside the memory guard: importing is not parsing
    from meshio.gmsh import main as gmsh_main

    with parser_boundary(source, what, size):
        if ext == ".msh":
            with GuardedBinary(_io.FileIO(source, "rb")) as fh:
                return gmsh_main.read_buffer(fh)
        if ext == ".inp":
            with GuardedText(_io.FileIO(source, "rb"), encoding="utf-8",
                              errors="replace") as fh:
                return meshio.abaqus.read(fh)
        return meshio.vtu.read(source)



def volume_bodies(source, ext, size, unit, warnings):
    """Validate a tetrahedral volume mesh (declared unit) and split it into bodies."""
    mesh = read_meshio(source, ext, size)
    what = VOLUME_FORMATS[ext]
    try:
        points = np.asarray(mesh.points)
        blocks = [(str(b.type), np.asarray(b.data)) for b in mesh.cells]
    except Exception as exc:  # noqa: BLE001 - loader boundary
        raise InputError(source, f"cannot be read as {what}: {reason(exc)}") from None
    if points.ndim != 2 or points.shape[1] not in (2, 3) or not np.issubdtype(
        points.dtype, np.number
    ):
        raise InputError(source, f"cannot be read as {what}: node coordinates are not (n, 3)")
    if points.shape[1] == 2:
        raise InputError(source, "has 2-D node coordinates; a solid needs x, y and z")

    tet_parts, tri_parts, others = [], [], {}
    for k, (kind, data) in enumerate(blocks):
        if data.ndim != 2 or not len(data):
            continue
        if kind == "tetra" and data.shape[1] == 4:
            tet_parts.append((k, data, False))
        elif kind == "tetra10" and data.shape[1] == 10:
            tet_parts.append((k, data, True))
        elif kind == "triangle" and data.shape[1] == 3:
            tri_parts.append(data)
        elif kind not in _IGNORED_CELLS:
            others[kind] = others.get(kind, 0) + len(data)
    if others:
        listing = ", ".join(f"{n} {kind}" for kind, n in sorted(others.items()))
        raise InputError(
            source,
            f"contains {listing} cells; only tetrahedra (tetra, or tetra10 read by their "
            "corners) are supported",
        )
    if not tet_parts:
        if tri_parts:  # a surface in a volume-mesh container
            return surface_bodies(source, points, np.concatenate(tri_parts), unit, warnings)
        raise InputError(source, "contains no tetrahedra (and no triangles)")

    for _, data, _ in tet_parts:
        if not np.issubdtype(data.dtype, np.integer):
            raise InputError(source, f"cannot be read as {what}: cell indices are not integers")
        if data.min() < 0 or data.max() >= len(points):
            raise InputError(
                source,
                "cells refer to nodes that do not exist "
                f"(indices must lie in 0..{len(points) - 1})",
            )
    points = np.asarray(points, dtype=np.float64)
    referenced = np.zeros(len(points), dtype=bool)
    for _, d, _ in tet_parts:
        referenced[d] = True
    check_arrays(source, points[referenced], np.zeros((1, 3), np.int64), unit)
    quad = [d for _, d, q in tet_parts if q]
    if quad:
        warnings.append(_tetra10_warning(points, np.concatenate(quad), unit))
    # keep only the corner nodes of the tetrahedra, in file order
    cells_all = np.concatenate([d[:, :4].astype(np.int64) for _, d, _ in tet_parts])
    used, cells_all = reindex(cells_all, len(points))
    points = points[used]

    tets, volumes = orient_tets(source, points, cells_all, unit, warnings)
    faces, tet_of_face, pairs = tet_faces(source, points, tets, unit)
    groups = _region_labels(mesh, tet_parts, len(tets), warnings)
    if groups is None:
        labels = components(len(tets), pairs[0], pairs[1])
        names = {}
    else:
        labels, names = groups
    count = check_body_count(source, labels, "separate bodies")
    bodies = []
    for k in range(count):
        sel = labels == k
        tk = tets[sel]
        if groups is None:
            fk = faces[sel[tet_of_face]]
        else:
            fk, _, _ = tet_faces(source, points, tk, unit)
        name = names.get(k, "")
        check_edges(source, points, fk, unit, f"boundary of {name or 'a body'}")
        if count == 1:
            used = np.arange(len(points))
        else:
            used, both = reindex(np.concatenate([tk.ravel(), fk.ravel()]), len(points))
            tk, fk = both[: tk.size].reshape(-1, 4), both[tk.size:].reshape(-1, 3)
        vk = points[used]
        vol = float(volumes[sel].sum())
        bodies.append((vk, fk, tk, vol, int(used[0]), name))
    return bodies


def _tetra10_warning(points, cells10, unit) -> str:
    """Warning for quadratic tetrahedra read by their corners, with the mid-node offset."""
    c = points[cells10[:, :4]]
    pairs = np.array([[0, 1], [1, 2], [0, 2], [0, 3], [1, 3], [2, 3]])
    mids = 0.5 * (c[:, pairs[:, 0]] + c[:, pairs[:, 1]])  # (k, 6, 3)
    nodes = points[cells10[:, 4:10]]  # (k, 6, 3)
    dist = np.linalg.norm(nodes[:, :, None, :] - mids[:, None, :, :], axis=-1).min(axis=2)
    off = float(dist.max())
    edge = float(np.linalg.norm(c[:, pairs[:, 0]] - c[:, pairs[:, 1]], axis=-1).max())
    base = (
        f"{len(cells10)} quadratic tetrahedra (tetra10) were read as linear tetrahedra "
        "through their 4 corner nodes"
    )
    if off <= 1e-9 * max(edge, 1e-300):
        return base + "; their mid-edge nodes lie on the straight edges, so nothing is lost"
    return (
        base + f"; mid-edge nodes lie up to {off:.3g} {unit} off the straight edges, so curved "
        "element faces are taken as flat"
    )


def _region_labels(mesh, tet_parts, n_tets, warnings):
    """Body labels per tetrahedron from physical groups / cell sets, or None.

    Returns (labels (n_tets,) 0.., {label: name}) when the file assigns every tetrahedron to
    exactly one of at least one region, else None (then connected components are used).
    """
    offsets = np.cumsum([0] + [len(d) for _, d, _ in tet_parts])
    # 1. an integer cell-data array (Gmsh physical tags, VTU region ids)
    cell_data = getattr(mesh, "cell_data", {}) or {}
    for key in _REGION_KEYS:
        match = [k for k in cell_data if k.lower() == key]
        if not match:
            continue
        arrays = cell_data[match[0]]
        try:
            tags = np.concatenate(
                [np.asarray(arrays[k]).reshape(len(d), -1)[:, 0] for k, d, _ in tet_parts]
            )
        except Exception:  # noqa: BLE001 - unusable region array: fall through
            continue
        if not np.issubdtype(tags.dtype, np.integer):
            if not np.all(np.isfinite(tags)) or not np.all(tags == np.round(tags)):
                continue
            tags = tags.astype(np.int64)
        values, labels = np.unique(tags, return_inverse=True)
        names = {}
        field_data = getattr(mesh, "field_data", {}) or {}
        tag_names = {}
        for name, info in field_data.items():
            info = np.asarray(info).ravel()
            if len(info) >= 2 and int(info[1]) == 3:
                tag_names[int(info[0])] = str(name)
        for i, v in enumerate(values):
            names[i] = tag_names.get(int(v), f"{match[0]} {int(v)}")
        return labels.reshape(-1), names
    # 2. named cell sets (element sets *ELSET of a keyword deck, Gmsh physical names)
    cell_sets = getattr(mesh, "cell_sets", {}) or {}
    block_index = {k: j for j, (k, _, _) in enumerate(tet_parts)}
    sets = []
    for name, per_block in cell_sets.items():
        members = []
        try:
            for k, idx in enumerate(per_block):
                if k in block_index and idx is not None and len(idx):
                    idx = np.asarray(idx, dtype=np.int64)
                    j = block_index[k]
                    if idx.min() < 0 or idx.max() >= len(tet_parts[j][1]):
                        raise ValueError
                    members.append(idx + offsets[j])
        except (ValueError, TypeError):
            continue
        if members:
            sets.append((str(name), np.unique(np.concatenate(members))))
    if len(sets) > 1:
        sets = [(n, m) for n, m in sets if len(m) < n_tets]  # drop "all elements" sets
    if not sets:
        return None
    labels = np.full(n_tets, -1, dtype=np.int64)
    for i, (_, m) in enumerate(sets):
        if (labels[m] >= 0).any():
            warnings.append(
                "element sets overlap; bodies were taken from the connected tetrahedra instead"
            )
            return None
        labels[m] = i
    if (labels < 0).any():
        warnings.append(
            f"{int((labels < 0).sum())} tetrahedra are in no element set; bodies were taken "
            "from the connected tetrahedra instead"
        )
        return None
    return labels, {i: n for i, (n, _) in enumerate(sets)}
