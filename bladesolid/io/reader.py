"""The front door: :func:`read_mesh` reads, checks and splits a blade solid into its bodies."""

from __future__ import annotations

import os
from dataclasses import dataclass, field, replace

import numpy as np

from ..errors import InputError
from ..units import length_scale
from .checks import check_overlaps, plausibility_warning, surface_bodies
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
    """

    name: str
    vertices: np.ndarray
    faces: np.ndarray
    tets: np.ndarray | None = None
    group: str = ""


@dataclass(frozen=True)
class LoadedMesh:
    """What :func:`read_mesh` returns: the bodies of one file and the warnings raised.

    ``file_format`` is the format actually read (e.g. ``"binary STL"``, ``"Gmsh"``).
    ``cad`` is the :class:`bladesolid.cad.CadModel` of a CAD file (None for meshes): its
    curved triangles carry the solid's exact mass moments, the bodies hold the straight
    triangulation that the mass elements fill.
    """

    path: str
    units: str
    bodies: tuple[Body, ...]
    warnings: tuple[str, ...] = field(default_factory=tuple)
    file_format: str = ""
    cad: object | None = None



def read_mesh(path, units: str | None, *, max_bytes: int | None = None,
              cad_tolerance: float | None = None) -> LoadedMesh:
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

    Returns
    -------
    LoadedMesh
        Bodies named ``"body 1"``, ``"body 2"``, ... by descending volume (ties: first face
        in the file for surfaces, first node for volume meshes), vertices in metres in the
        model frame, faces wound outward.

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
    limit = DEFAULT_MAX_BYTES if max_bytes is None else int(max_bytes)
    size = check_file(source, limit)
    warnings: list[str] = []

    if ext in SURFACE_FORMATS:
        vertices, faces, part, fmt = read_surface(source, ext, size)
        bodies = surface_bodies(source, vertices, faces, units, warnings, part=part)
    elif ext in VOLUME_FORMATS:
        fmt = VOLUME_FORMATS[ext]
        bodies = volume_bodies(source, ext, size, units, warnings)
    else:
        raise InputError(
            source,
            f"unknown mesh format {ext or '(no extension)'!r}; expected a surface "
            f"({', '.join(SURFACE_FORMATS)}), a tetrahedral volume mesh "
            f"({', '.join(VOLUME_FORMATS)}) or a CAD file ({', '.join(_CAD_EXTENSIONS)})",
        )

    # bodies are (raw vertices, faces, tets, volume_raw, first, group) in the declared unit
    bodies.sort(key=lambda b: (-b[3], b[4]))
    out = tuple(
        Body(f"body {i + 1}", v * scale, f, t, g) for i, (v, f, t, _, _, g) in enumerate(bodies)
    )
    if len(out) > 1:
        check_overlaps(source, out, units, scale, warnings)
    size_warning = plausibility_warning(out, units, scale)
    if size_warning:
        warnings.append(size_warning)
    return LoadedMesh(source, units, out, tuple(warnings), fmt)


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
