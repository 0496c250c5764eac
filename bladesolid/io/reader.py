"""The front door: :func:`read_mesh` reads, checks and splits a blade solid into its bodies."""

from __future__ import annotations

import os
from dataclasses import dataclass, field, replace

import numpy as np

from ..errors import InputError
from ..units import length_scale
from .bodies import surface_bodies
from .checks import check_arrays, check_overlaps, merge_exact, plausibility_warning
from .guards import DEFAULT_MAX_BYTES, check_file
from .surfaces import SURFACE_FORMATS, read_surface, write_surface  # noqa: F401 - write_surface: doctest
from .volumes import VOLUME_FORMATS, volume_bodies

__all__ = ["Body", "LoadedMesh", "read_mesh"]


@dataclass(frozen=True)
class Body:
    """One closed solid of the input, in metres in the model frame.

    vertices : (n, 3) float64, metres, model frame
    faces    : (m, 3) int64, the closed boundary, wound outward (right-hand normals out)
    tets     : (k, 4) int64 or None, tetrahedra into ``vertices`` when read from a volume mesh,
               each with positive volume (``(v1-v0)·((v2-v0)×(v3-v0)) > 0``)
    group    : name of the physical group / element set the body came from, "" if none
    cavities : number of cavities (inner shells wound into the void) in its boundary
    host     : for an insert, the name of the body it is nested in ("" otherwise); the host's
               boundary holds the insert's outer shell reversed (its seat)

    ``faces`` is the whole boundary of the body's material: its outer shell, its cavities and
    the seats of its inserts (docs/CONVENTIONS.md §8).
    """

    name: str
    vertices: np.ndarray
    faces: np.ndarray
    tets: np.ndarray | None = None
    group: str = ""
    cavities: int = 0
    host: str = ""


@dataclass(frozen=True)
class LoadedMesh:
    """What :func:`read_mesh` returns: the bodies of one file and the warnings raised.

    ``file_format`` is the format actually read (e.g. ``"binary STL"``, ``"Gmsh"``).
    ``cad`` is the :class:`bladesolid.cad.CadModel` of a CAD file (None for meshes): its
    curved triangles carry the solid's exact mass moments, the bodies hold the straight
    triangulation that the mass elements fill.
    ``geometry`` : what the loader did and found, SI (the ``geometry`` section of the report,
    docs/CONVENTIONS.md §6): ``welded_vertices``, ``weld_tolerance_m``, ``weld``,
    ``weld_dropped_faces``, ``bodies`` (per body: name, kind ``"body"``/``"insert"``, host,
    cavities, faces, volume_m3), ``cavities``, ``inserts``, ``self_intersecting_pairs``.
    ``repairs`` : None when no repair was asked; else one dict per change made
    (:meth:`bladesolid.repair.RepairResult.records`: what, where, faces_added, faces_removed,
    volume_added, volume_removed in the file's unit, plus ``unit``, ``where_m``,
    ``volume_added_m3``, ``volume_removed_m3`` and ``part``), empty when nothing needed mending.
    ``mended`` : the mended surface ``(vertices (n, 3) in the file's unit, faces (m, 3), part
    (n,) int or None)`` when the repair changed anything, for the record; else None.
    """

    path: str
    units: str
    bodies: tuple[Body, ...]
    warnings: tuple[str, ...] = field(default_factory=tuple)
    file_format: str = ""
    geometry: dict = field(default_factory=dict)
    repairs: tuple | None = None
    mended: tuple | None = None
    cad: object | None = None



def read_mesh(path, units: str | None, *, max_bytes: int | None = None, weld_tol: float | None = None,
              repair: bool = False, repair_limit_pct: float = 1.0, cad_tolerance: float | None = None) -> LoadedMesh:
    """Read a blade solid, validate it and return its closed bodies in metres.

    Parameters
    ----------
    path : str or os.PathLike
        A surface (``.stl .obj .ply .off``), a tetrahedral volume mesh (``.msh .vtu .inp``)
        or a CAD file (``.step .stp .iges .igs .brep``, read by :func:`bladesolid.cad.read_cad`).
    units : str or None
        The length unit of the file's coordinates, one of ``LENGTH_UNITS``. A STEP or IGES
        file declares its own: None takes it, a unit given must agree (docs/CONVENTIONS.md §9).
    max_bytes : int, optional
        Refuse files larger than this (default :data:`DEFAULT_MAX_BYTES`, 2 GiB).
    cad_tolerance : float, optional
        Chord tolerance of a CAD file's triangulation, a fraction of the model's bounding-box
        diagonal (default :data:`bladesolid.cad.DEFAULT_CAD_TOLERANCE`); ignored for meshes.
    weld_tol : float, optional
        Surfaces: weld vertices closer than this (in ``units``) always; default: weld at 1e-6
        of the bounding-box diagonal only when the exact merge leaves the surface open or
        non-manifold (docs/CONVENTIONS.md §8).
    repair : bool
        Surfaces: mend the surface first (:func:`bladesolid.repair.repair_surface`, once per
        part of the file — parts are materials), every change recorded in ``repairs``;
        refused when the hole fills and re-triangulations change the volume by more than
        ``repair_limit_pct`` percent.

    Returns
    -------
    LoadedMesh
        Bodies named ``"body 1"``, ``"body 2"``, ... in file order (the order of each body's
        first face for surfaces — of its first part for a file that names parts —, of its first
        node for volume meshes), the order in which densities are given; vertices in metres in
        the model frame, outer shells wound outward, cavities into the void.

    Raises
    ------
    InputError
        ``"<path>: <problem>"`` on one line, for every problem listed in the module docstring.

    Examples
    --------
    >>> import tempfile, os, numpy as np
    >>> v = np.array([[0, 0, 0], [10, 0, 0], [0, 10, 0], [0, 0, 10]], float)
    >>> f = np.array([[0, 2, 1], [0, 1, 3], [1, 2, 3], [0, 3, 2]])
    >>> p = os.path.join(tempfile.mkdtemp(), "tet.stl")
    >>> write_surface(p, v, f)
    >>> m = read_mesh(p, "mm")
    >>> [b.name for b in m.bodies], float(m.bodies[0].vertices.max())
    (['body 1'], 0.01)
    >>> m.warnings  # doctest: +ELLIPSIS
    ('...bounding box is 10 mm long...',)
    """
    source = os.fsdecode(os.fspath(path))
    ext = os.path.splitext(source)[1].lower()
    if ext in _CAD_EXTENSIONS:
        return _read_cad(source, units, max_bytes, cad_tolerance)
    if units is None:
        raise InputError(source, "no length unit given: give units (mm, cm, m, in or ft); a mesh file carries no "
                                 "unit")
    scale = length_scale(units, source)  # unknown unit -> InputError naming the file
    if weld_tol is not None and not (np.isfinite(float(weld_tol)) and float(weld_tol) >= 0):
        raise InputError("weld_tol", f"must be a distance >= 0 in the mesh unit, got {weld_tol!r}")
    if not (np.isfinite(float(repair_limit_pct)) and 0 < float(repair_limit_pct) <= 100):
        raise InputError("repair_limit_pct", f"must be a percentage above 0 and at most 100, got {repair_limit_pct!r}")
    limit = DEFAULT_MAX_BYTES if max_bytes is None else int(max_bytes)
    size = check_file(source, limit)
    warnings: list[str] = []
    geometry: dict = {}
    repairs = mended = None

    if ext in SURFACE_FORMATS:
        vertices, faces, part, fmt = read_surface(source, ext, size)
        if repair:
            vertices, faces, part, repairs, mended = _repair(source, vertices, faces, part, units, scale,
                                                             repair_limit_pct, weld_tol)
        bodies = surface_bodies(source, vertices, faces, units, warnings, part=part, weld_tol=weld_tol,
                                geometry=geometry, repaired=repair)
    elif ext in VOLUME_FORMATS:
        fmt = VOLUME_FORMATS[ext]
        bodies = volume_bodies(source, ext, size, units, warnings)
        if repair:
            repairs = ()
            warnings.append("nothing was mended: the repair applies to surfaces, a volume mesh is taken as it is")
    else:
        raise InputError(
            source,
            f"unknown mesh format {ext or '(no extension)'!r}; expected a surface "
            f"({', '.join(SURFACE_FORMATS)}), a tetrahedral volume mesh "
            f"({', '.join(VOLUME_FORMATS)}) or a CAD file ({', '.join(_CAD_EXTENSIONS)})",
        )

    # bodies are (raw vertices, faces, tets, volume_raw, first, group[, info]) in the declared unit
    bodies = [b if len(b) == 7 else (*b, {}) for b in bodies]
    bodies.sort(key=lambda b: b[4])  # file order: densities are given once per body in this order
    names = {b[6].get("id"): f"body {i + 1}" for i, b in enumerate(bodies) if b[6]}
    out = tuple(
        Body(f"body {i + 1}", v * scale, f, t, g, int(info.get("cavities", 0)),
             names.get(info.get("host"), "") if info.get("host") is not None else "")
        for i, (v, f, t, _, _, g, info) in enumerate(bodies)
    )
    if len(out) > 1:
        check_overlaps(source, out, units, scale, warnings, hint=_overlap_hint(repair))
    size_warning = plausibility_warning(out, units, scale)
    if size_warning:
        warnings.append(size_warning)
    _describe_nesting(out, bodies, units, scale, warnings)
    geometry = _geometry_section(geometry, out, bodies, scale, ext in SURFACE_FORMATS)
    return LoadedMesh(source, units, out, tuple(warnings), fmt, geometry, repairs, mended)


def _overlap_hint(repaired: bool) -> str:
    if repaired:
        return ("repair=True unites overlapping parts of one material only (one part of the file); parts of "
                "different materials must be mended in a CAD or scan tool")
    return "parts of one material: repair=True unites them"


def _repair(source, vertices, faces, part, unit, scale, limit_pct, weld_tol):
    """Mend each part of the file (one material each) with :func:`bladesolid.repair.repair_surface`.

    Returns ``(vertices, faces, part, repairs, mended)`` in the file's unit (see :class:`LoadedMesh`)."""
    from ..repair import repair_surface

    vertices, faces = check_arrays(source, vertices, faces, unit)
    # bit-identical corner copies (every binary STL) are merged first: not a change to record
    vertices, faces, kept = merge_exact(vertices, faces, part)
    part = None if part is None else np.asarray(part)[kept]
    groups = [None] if part is None else list(np.unique(np.asarray(part)[faces[:, 0]]))
    out_v, out_f, out_p, records, offset, changed = [], [], [], [], 0, False
    for k, label in enumerate(groups):
        fk = faces if label is None else faces[np.asarray(part)[faces[:, 0]] == label]
        used = np.unique(fk)
        remap = np.full(len(vertices), -1, dtype=np.int64)
        remap[used] = np.arange(len(used))
        r = repair_surface(vertices[used], remap[fk], max_volume_change=limit_pct / 100.0, weld_tol=weld_tol,
                           source=source, unit=unit, limit_parameter="repair_limit_pct")
        for rec in r.records():
            rec.update(unit=unit, part=None if label is None else k + 1,
                       where_m=[x * scale for x in rec["where"]],
                       volume_added_m3=rec["volume_added"] * scale**3,
                       volume_removed_m3=rec["volume_removed"] * scale**3)
            records.append(rec)
        changed = changed or r.changed
        out_v.append(r.vertices)
        out_f.append(r.faces + offset)
        out_p.append(np.full(len(r.vertices), k, dtype=np.int64))
        offset += len(r.vertices)
    v, f = np.concatenate(out_v), np.concatenate(out_f)
    p = None if part is None else np.concatenate(out_p)
    return v, f, p, tuple(records), ((v, f, p) if changed else None)


def _describe_nesting(out, bodies, unit, scale, warnings) -> None:
    """A warning for each cavity and insert found, so that a shell wound the wrong way is seen."""
    for b, raw in zip(out, bodies):
        info = raw[6]
        if b.cavities:
            warnings.append(
                f"{b.name} is hollow: {b.cavities} cavit{'y' if b.cavities == 1 else 'ies'} (inner shell"
                f"{'' if b.cavities == 1 else 's'} wound into the void) of {info['cavity_volume']:.4g} {unit}^3 "
                "subtracted from its material"
            )
        if b.host:
            warnings.append(f"{b.name} is an insert nested in {b.host} (an inner shell wound outward): a body of "
                            f"its own material, which replaces {b.host}'s in its volume")


def _geometry_section(g, out, bodies, scale, surface: bool) -> dict:
    """The ``geometry`` section (SI) from what :func:`surface_bodies` recorded and the bodies."""
    from ..geometry import enclosed_volume

    tol = g.pop("weld_tolerance", None)
    section = {
        "welded_vertices": int(g.get("welded_vertices", 0)),
        "weld_tolerance_m": None if tol is None else tol * scale,
        "weld": g.get("weld", "not applicable: volume mesh" if not surface else ""),
        "weld_dropped_faces": int(g.get("weld_dropped_faces", 0)),
        "self_intersecting_pairs": g.get("self_intersecting_pairs") if surface else None,
        "self_intersection_check": ("every body's boundary checked before integration" if surface
                                    else "not run: a volume mesh's elements are checked instead"),
        "bodies": [
            {"body": b.name, "kind": "insert" if b.host else "body", "host": b.host or None, "cavities": b.cavities,
             "faces": int(len(b.faces)), "volume_m3": abs(enclosed_volume(b.vertices, b.faces)),
             "outer_volume_m3": raw[3] * scale**3}
            for b, raw in zip(out, bodies)
        ],
        "cavities": int(sum(b.cavities for b in out)),
        "inserts": int(sum(1 for b in out if b.host)),
    }
    return section


#: CAD extensions (:data:`bladesolid.cad.CAD_FORMATS`; listed here so that reading a mesh
#: does not import the CAD module).
_CAD_EXTENSIONS = (".step", ".stp", ".iges", ".igs", ".brep")


def _read_cad(source: str, units: str | None, max_bytes: int | None, cad_tolerance) -> LoadedMesh:
    """A CAD file through :func:`bladesolid.cad.read_cad`, as a :class:`LoadedMesh`. A BREP
    file, whose unit the user gives, gets the size plausibility warning of meshes (STEP and
    IGES declare theirs)."""
    from ..cad import read_cad

    model = read_cad(source, units, cad_tolerance=cad_tolerance, max_bytes=max_bytes)
    loaded = model.loaded_mesh()
    size_warning = (plausibility_warning(loaded.bodies, loaded.units, length_scale(loaded.units, source))
                    if model.file_format == "BREP" else None)
    if size_warning:
        loaded = replace(loaded, warnings=(*loaded.warnings, size_warning))
    return loaded
