"""Read and validate blade solids: closed triangle surfaces and tetrahedral volume meshes.

One front door, :func:`read_mesh`. It reads

* surfaces: STL (ASCII and binary), OBJ, PLY, OFF — through trimesh, except binary STL,
  which is read here with one ``numpy.fromfile`` after the header has been checked;
* tetrahedral volume meshes: Gmsh ``.msh``, VTK ``.vtu``, Abaqus ``.inp`` — through meshio
  (a volume file holding triangles only is treated as a surface),

scales the coordinates from the declared length unit to metres (model frame), and splits the
input into closed solids (:class:`Body`). Every problem found is an
:class:`~bladesolid.errors.InputError` ``"<path>: <one line>"``; things that were fixed or look
odd but may be right are returned as ``LoadedMesh.warnings``.

Checks, in order (the first failing one is reported):

file       missing, not a regular file, unreadable, empty, larger than ``max_bytes``,
           unknown extension; binary STL whose triangle count disagrees with its size
           (refused from the 84-byte header, before anything is allocated)
parse      any exception of trimesh/meshio becomes "cannot be read as <format>: <reason>"
arrays     no triangles; face indices out of range; NaN / infinite coordinates;
           coordinates beyond 1000 km
merge      exactly coincident vertices are merged (bit-exact, ``-0.0 == 0.0``)
faces      degenerate faces (repeated vertex, or area below 1e-12 of the squared bounding
           box diagonal) are refused, never dropped
edges      non-manifold edges (more than two faces), boundary edges (open surface),
           inconsistent winding (both faces traverse an edge the same way)
shells     each edge-connected closed shell is one body; zero volume is refused; a shell
           with negative volume (inside out) is flipped, with a warning
bodies     at most :data:`MAX_BODIES`; bodies whose bounding boxes overlap are intersected
           with manifold3d and refused when the common volume exceeds 1e-6 of the smaller
           (touching is fine; a shell inside another — e.g. an inner cavity — is refused)
size       a solid longer than 20 m or shorter than 20 mm gives a warning naming a unit
           that would make it plausible

Volume meshes: linear tetrahedra (``tetra``); quadratic ``tetra10`` are read through their
four corner nodes with a warning that states how far the mid-edge nodes lie from the straight
edges. Other 3-D cells are refused; points, lines and triangles beside tetrahedra are ignored.
Bodies come from Gmsh physical groups, Abaqus element sets or a region id array, else from the
face-connected components of the tetrahedra. Negative tetrahedra are reordered (warning);
zero-volume ones, faces shared by more than two tetrahedra and interior faces with both
tetrahedra on the same side (folded or overlapping elements) are refused.

Not checked here: self-intersection of one shell (no cheap exact test exists; the
tetrahedraliser in :mod:`bladesolid.mesh` refuses such a surface when it fills the solid).

Hostile input: binary STL sizes are checked from the header; third-party parsers run with a
temporary address-space limit proportional to the file size (Linux, single-threaded callers),
with a guard that stops a parser reading past the end of the file in a loop, and Abaqus
``*INCLUDE`` (which would open other files) is refused.
"""

from __future__ import annotations

import contextlib
import io as _io
import os
import re
import stat
from dataclasses import dataclass, field

import numpy as np

from .errors import InputError
from .units import LENGTH_UNITS, length_scale


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
    """

    path: str
    units: str
    bodies: tuple[Body, ...]
    warnings: tuple[str, ...] = field(default_factory=tuple)
    file_format: str = ""


#: Surface formats read through trimesh (binary STL read directly), by extension.
SURFACE_FORMATS = {".stl": "STL", ".obj": "OBJ", ".ply": "PLY", ".off": "OFF"}
#: Tetrahedral volume formats read through meshio, by extension.
VOLUME_FORMATS = {".msh": "Gmsh", ".vtu": "VTU", ".inp": "Abaqus"}
#: Default cap on the size of an input file (bytes).
DEFAULT_MAX_BYTES = 2 * 1024**3
#: Most closed shells accepted in one file (a blade, a sheath, a few inserts).
MAX_BODIES = 100
#: Plausible overall length of a blade solid, metres (common practice, no source).
PLAUSIBLE_LENGTH_M = (0.02, 20.0)
#: Coordinates farther than this from the origin (metres) cannot be a blade.
MAX_COORDINATE_M = 1.0e6
#: A face is degenerate when its area is below this times the squared bounding-box diagonal.
DEGENERATE_AREA_REL = 1e-12
#: A shell has zero volume when |V| is below this times the cube of its bounding-box diagonal.
ZERO_VOLUME_REL = 1e-9
#: A tetrahedron has zero volume when |V| is below this times the cube of the mesh diagonal.
ZERO_TET_REL = 1e-16
#: Two bodies overlap when their common volume exceeds this fraction of the smaller one.
OVERLAP_REL = 1e-6

_STL_HEADER = 84
_STL_RECORD = 50
_STL_DTYPE = np.dtype([("normal", "<f4", (3,)), ("v", "<f4", (3, 3)), ("attr", "<u2")])


# --------------------------------------------------------------------------- front door


def read_mesh(path, units: str, *, max_bytes: int | None = None) -> LoadedMesh:
    """Read a blade solid, validate it and return its closed bodies in metres.

    Parameters
    ----------
    path : str or os.PathLike
        A surface (``.stl .obj .ply .off``) or tetrahedral volume mesh (``.msh .vtu .inp``).
    units : str
        The length unit of the file's coordinates, one of ``LENGTH_UNITS``.
    max_bytes : int, optional
        Refuse files larger than this (default :data:`DEFAULT_MAX_BYTES`, 2 GiB).

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
    scale = length_scale(units, source)  # unknown unit -> InputError naming the file
    limit = DEFAULT_MAX_BYTES if max_bytes is None else int(max_bytes)
    size = _check_file(source, limit)
    ext = os.path.splitext(source)[1].lower()
    warnings: list[str] = []

    if ext in SURFACE_FORMATS:
        vertices, faces, part, fmt = _read_surface(source, ext, size)
        bodies = _surface_bodies(source, vertices, faces, units, warnings, part=part)
    elif ext in VOLUME_FORMATS:
        fmt = VOLUME_FORMATS[ext]
        bodies = _volume_bodies(source, ext, size, units, warnings)
    else:
        raise InputError(
            source,
            f"unknown mesh format {ext or '(no extension)'!r}; expected a surface "
            f"({', '.join(SURFACE_FORMATS)}) or a tetrahedral volume mesh "
            f"({', '.join(VOLUME_FORMATS)})",
        )

    # bodies are (raw vertices, faces, tets, volume_raw, first, group) in the declared unit
    bodies.sort(key=lambda b: (-b[3], b[4]))
    out = tuple(
        Body(f"body {i + 1}", v * scale, f, t, g) for i, (v, f, t, _, _, g) in enumerate(bodies)
    )
    if len(out) > 1:
        _check_overlaps(source, out, units, scale, warnings)
    size_warning = _plausibility_warning(out, units, scale)
    if size_warning:
        warnings.append(size_warning)
    return LoadedMesh(source, units, out, tuple(warnings), fmt)


def write_surface(path, vertices, faces) -> None:
    """Write a triangle surface as binary STL (little helper for tests and examples).

    vertices : (n, 3) float, any unit; faces : (m, 3) int into ``vertices``.
    """
    v = np.asarray(vertices, dtype=np.float64)[np.asarray(faces, dtype=np.int64)]
    rec = np.zeros(len(v), dtype=_STL_DTYPE)
    rec["v"] = v
    with np.errstate(all="ignore"):
        n = np.cross(v[:, 1] - v[:, 0], v[:, 2] - v[:, 0])
        norm = np.linalg.norm(n, axis=1, keepdims=True)
        rec["normal"] = np.divide(n, norm, out=np.zeros_like(n), where=norm > 0)
    with open(path, "wb") as fh:
        fh.write(b"bladesolid".ljust(80, b" "))
        fh.write(np.uint32(len(v)).tobytes())
        fh.write(rec.tobytes())


# --------------------------------------------------------------------------- file checks


def _check_file(source: str, limit: int) -> int:
    """Existence, kind, readability and size of the file; returns its size in bytes."""
    try:
        st = os.stat(source)
    except FileNotFoundError:
        raise InputError(source, "file not found") from None
    except PermissionError:
        raise InputError(source, "cannot be read: permission denied") from None
    except (OSError, ValueError) as exc:
        raise InputError(source, f"cannot be read: {_reason(exc)}") from None
    if stat.S_ISDIR(st.st_mode):
        raise InputError(source, "is a directory, not a mesh file")
    if not stat.S_ISREG(st.st_mode):
        raise InputError(source, "is not a regular file (a device, pipe or socket); give a mesh file")
    size = int(st.st_size)
    if size == 0:
        raise InputError(source, "file is empty (0 bytes); expected a mesh")
    if size > limit:
        raise InputError(
            source,
            f"file is {size:,} bytes, over the {limit:,}-byte limit; "
            "raise max_bytes if it really is one blade",
        )
    try:
        with open(source, "rb") as fh:
            fh.read(1)
    except PermissionError:
        raise InputError(source, "cannot be read: permission denied") from None
    except OSError as exc:
        raise InputError(source, f"cannot be read: {_reason(exc)}") from None
    return size


def _reason(exc: BaseException) -> str:
    """The first line of an exception's message in plain words (class name if empty)."""
    if isinstance(exc, MemoryError):
        return "it needs far more memory than its size justifies (corrupt counts in the file?)"
    if isinstance(exc, OSError) and exc.strerror:
        return exc.strerror.lower()
    text = str(exc).strip()
    line = text.splitlines()[0].strip() if text else ""
    if len(line) > 160:
        line = line[:157] + "..."
    name = type(exc).__name__
    return f"{line} ({name})" if line else f"malformed data ({name})"


def _sniff(head: bytes) -> str | None:
    """A guess of the real format from the first bytes, for teaching messages."""
    h = head.lstrip()[:64].lower()
    if h.startswith(b"ply"):
        return "PLY"
    if h.startswith((b"off", b"coff", b"noff")):
        return "OFF"
    if h.startswith(b"$meshformat") or h.startswith(b"$comments"):
        return "Gmsh .msh"
    if h.startswith(b"<?xml") or h.startswith(b"<vtkfile"):
        return "XML (VTU?)"
    if h.startswith((b"*heading", b"*node", b"**")):
        return "Abaqus .inp"
    if re.match(rb"(#[^\n]*\n\s*)*(v|vn|vt|o|g|mtllib)\s", h):
        return "OBJ"
    return None


@contextlib.contextmanager
def _memory_guard(size: int):
    """Temporarily cap the address space while a third-party parser runs.

    The cap is the current address space plus 256 MiB plus 24 times the file size, so honest
    files parse and a small file that claims billions of items fails with MemoryError instead
    of exhausting the machine. Only on platforms with ``resource`` and only when the caller
    runs a single Python thread (the limit is process-wide).
    """
    old = None
    try:
        import resource
        import threading

        if threading.active_count() == 1:
            with open("/proc/self/statm", "rb") as fh:
                vm = int(fh.read().split()[0]) * os.sysconf("SC_PAGE_SIZE")
            limits = resource.getrlimit(resource.RLIMIT_AS)
            cap = vm + 2**28 + 24 * size
            inf = resource.RLIM_INFINITY
            if (limits[0] == inf or limits[0] > cap) and (limits[1] == inf or limits[1] >= cap):
                resource.setrlimit(resource.RLIMIT_AS, (cap, limits[1]))
                old = limits
    except Exception:  # noqa: BLE001 - no guard available on this platform
        old = None
    try:
        yield
    finally:
        if old is not None:
            resource.setrlimit(resource.RLIMIT_AS, old)


class _EofGuard:
    """A file whose ``readline`` raises EOFError when it keeps returning nothing at EOF.

    Some parsers loop ``count`` times over ``readline()`` with ``count`` taken from the file;
    at the end of a corrupt file that would spin for as long as the count says.
    """

    _eof_reads = 0

    def readline(self, size=-1):
        line = super().readline(size)
        if not line:
            self._eof_reads += 1
            if self._eof_reads > 1000:
                raise EOFError("the file ended before the counts in it were satisfied")
        return line


class _GuardedBinary(_EofGuard, _io.BufferedReader):
    """A guarded binary file (see :class:`_EofGuard`)."""


class _GuardedText(_EofGuard, _io.TextIOWrapper):
    """A guarded text file (see :class:`_EofGuard`)."""


@contextlib.contextmanager
def _parser_boundary(source: str, what: str, size: int):
    """Run a third-party parser: quiet, memory-capped, every failure an InputError."""
    import warnings as _warnings

    sink = _io.StringIO()
    try:
        with _memory_guard(size), contextlib.redirect_stderr(sink), contextlib.redirect_stdout(
            sink
        ), _warnings.catch_warnings():
            _warnings.simplefilter("ignore")
            yield
    except InputError:
        raise
    except (Exception, SystemExit) as exc:  # noqa: BLE001 - the loader boundary
        raise InputError(source, f"cannot be read as {what}: {_reason(exc)}") from None


# --------------------------------------------------------------------------- surfaces


def _read_surface(source: str, ext: str, size: int):
    """Raw (vertices, faces, format name) of a surface file, nothing dropped or merged."""
    with open(source, "rb") as fh:
        head = fh.read(_STL_HEADER)
    if ext == ".stl":
        binary = _stl_kind(source, head, size)
        if binary:
            return (*_read_binary_stl(source, size), None, "binary STL")
        what = "ASCII STL"
    else:
        what = SURFACE_FORMATS[ext]
    import trimesh  # outside the memory guard: importing is not parsing

    with _parser_boundary(source, what, size):
        with open(source, "rb") as fh:
            data = fh.read()
        if ext == ".stl":
            loaded = trimesh.exchange.stl.load_stl_ascii(_io.BytesIO(data))
            parts = loaded["geometry"].values() if "geometry" in loaded else [loaded]
            arrays = [(p["vertices"], p["faces"]) for p in parts]
        else:
            obj = trimesh.load(_io.BytesIO(data), file_type=ext[1:], process=False)
            geoms = obj.geometry.values() if isinstance(obj, trimesh.Scene) else [obj]
            arrays = [
                (g.vertices, g.faces)
                for g in geoms
                if isinstance(g, trimesh.Trimesh) and len(g.faces)
            ]
        vertices, faces, part = _concatenate(arrays)
    if not len(faces):
        hint = _sniff(head)
        extra = f" (the content looks like {hint}, not {what})" if hint and hint != what else ""
        raise InputError(source, f"contains no triangles{extra}; expected {'an' if what[:1].upper() in 'AEIOU' else 'a'} {what} surface")
    return vertices, faces, part, what


def _concatenate(arrays):
    """One (vertices, faces, part of each vertex or None) from several parts; shapes checked."""
    vs, fs, offset = [], [], 0
    for v, f in arrays:
        v = np.asarray(v, dtype=np.float64)
        f = np.asarray(f)
        if f.size == 0:
            continue
        if v.ndim != 2 or v.shape[1] != 3 or f.ndim != 2 or f.shape[1] != 3:
            raise ValueError(f"unexpected array shapes {v.shape} and {f.shape}")
        if not np.issubdtype(f.dtype, np.integer):
            raise ValueError("face indices are not integers")
        vs.append(v)
        fs.append(f.astype(np.int64) + offset)
        offset += len(v)
    if not fs:
        return np.zeros((0, 3)), np.zeros((0, 3), dtype=np.int64), None
    part = np.repeat(np.arange(len(vs)), [len(v) for v in vs]) if len(vs) > 1 else None
    return np.concatenate(vs), np.concatenate(fs), part


def _stl_kind(source: str, head: bytes, size: int) -> bool:
    """True for binary STL, False for ASCII STL; refuse a binary header that lies.

    Binary STL is 84 bytes (80 header + uint32 count n) then 50 bytes per triangle, so a
    binary file has exactly 84 + 50 n bytes. A file that does not match and does not read as
    text beginning with ``solid`` is refused here, before anything is allocated for it.
    """
    n = int.from_bytes(head[80:84], "little") if len(head) >= _STL_HEADER else -1
    if size >= _STL_HEADER and n >= 0:
        if size == _STL_HEADER + _STL_RECORD * n:
            return False if n == 0 and head.lstrip().startswith(b"solid") else True
    text = head.lstrip()
    textual = not any(b < 32 and b not in b"\t\n\r\f\v" for b in head)  # UTF-8 allowed
    if text[:5].lower() == b"solid" and textual:
        return False
    if size < _STL_HEADER:
        hint = _sniff(head)
        extra = f"; it looks like {hint}" if hint else ""
        raise InputError(
            source,
            f"not an STL file: {size} bytes is shorter than the 84-byte binary header "
            f"and it does not start with 'solid'{extra}",
        )
    holds = (size - _STL_HEADER) // _STL_RECORD
    hint = _sniff(head)
    extra = f" (it looks like {hint})" if hint else ""
    raise InputError(
        source,
        f"binary STL header claims {n} triangles but the file holds {holds} "
        f"({size} bytes = 84-byte header + 50 bytes per triangle); the file is truncated, "
        f"padded or not an STL{extra}",
    )


def _read_binary_stl(source: str, size: int):
    """Corner coordinates of a binary STL whose size matches its header: (3n, 3), (n, 3)."""
    n = (size - _STL_HEADER) // _STL_RECORD
    try:
        with open(source, "rb") as fh:
            fh.seek(_STL_HEADER)
            rec = np.fromfile(fh, dtype=_STL_DTYPE, count=n)
    except (OSError, ValueError, MemoryError) as exc:
        raise InputError(source, f"cannot be read as binary STL: {_reason(exc)}") from None
    if len(rec) != n:
        raise InputError(source, f"binary STL ended after {len(rec)} of {n} triangles")
    if n == 0:
        raise InputError(source, "contains no triangles (binary STL with a count of 0)")
    with np.errstate(invalid="ignore"):  # signalling NaNs are reported by _check_arrays
        vertices = rec["v"].reshape(-1, 3).astype(np.float64)
    faces = np.arange(3 * n, dtype=np.int64).reshape(-1, 3)
    return vertices, faces


def _surface_bodies(source, vertices, faces, unit, warnings, part=None):
    """Validate a raw triangle surface (declared unit) and split it into closed shells.

    ``part`` (n,) int, optional: the solid / object of the file each vertex belongs to
    (ASCII STL ``solid`` blocks, OBJ objects); vertices are merged within a part only, so
    parts that touch along coincident faces stay separate manifold shells.
    Returns a list of ``(vertices, faces, None, volume, first_face, "")`` per shell.
    """
    vertices, faces = _check_arrays(source, vertices, faces, unit)
    vertices, faces = merge_coincident(vertices, faces, part)
    _check_degenerate(source, vertices, faces, unit)
    pairs = _check_edges(source, vertices, faces, unit)
    labels = _components(len(faces), pairs[0], pairs[1])
    count = int(labels.max()) + 1
    if count > MAX_BODIES:
        raise InputError(
            source,
            f"has {count} separate closed shells, more than the {MAX_BODIES} accepted; "
            "a blade file holds the blade and a few parts (sheath, inserts)",
        )
    centre = 0.5 * (vertices.min(axis=0) + vertices.max(axis=0))
    vol = np.bincount(labels, weights=_signed_volumes(vertices - centre, faces), minlength=count)
    bodies = []
    for k in range(count):
        fk = faces[labels == k]
        used, fk = _reindex(fk, len(vertices))
        vk = vertices[used]
        diag = float(np.linalg.norm(vk.max(axis=0) - vk.min(axis=0)))
        if not np.isfinite(vol[k]) or abs(vol[k]) <= ZERO_VOLUME_REL * diag**3:
            raise InputError(
                source,
                f"a closed shell of {len(fk)} faces has zero volume (a flat or collapsed "
                f"surface) {_where(vk, unit)}; a solid must enclose volume",
            )
        first = int(np.flatnonzero(labels == k)[0])
        if vol[k] < 0:
            fk = fk[:, [0, 2, 1]]
            warnings.append(
                f"a closed shell of {len(fk)} faces {_where(vk, unit)} was wound inside out "
                "(negative volume); its faces were flipped to point outward"
            )
        bodies.append((vk, fk, None, abs(float(vol[k])), first, ""))
    return bodies


def _check_arrays(source, vertices, faces, unit):
    """No triangles, index range, finite coordinates, coordinate range."""
    vertices = np.asarray(vertices, dtype=np.float64)
    faces = np.asarray(faces, dtype=np.int64)
    if faces.ndim != 2 or faces.shape[1] != 3 or len(faces) == 0:
        raise InputError(source, "contains no triangles")
    n = len(vertices)
    if faces.min() < 0 or faces.max() >= n:
        bad = (faces < 0) | (faces >= n)
        raise InputError(
            source,
            f"{int(bad.any(axis=1).sum())} faces refer to vertices that do not exist "
            f"(indices must lie in 0..{n - 1})",
        )
    if not np.isfinite(vertices).all():
        nan = np.isnan(vertices).any(axis=1)
        inf = np.isinf(vertices).any(axis=1) & ~nan
        raise InputError(
            source,
            f"{int(nan.sum() + inf.sum())} vertices have non-finite coordinates "
            f"({int(nan.sum())} NaN, {int(inf.sum())} infinite); expected finite numbers",
        )
    reach = float(np.abs(vertices).max()) if n else 0.0
    if reach * LENGTH_UNITS[unit] > MAX_COORDINATE_M:
        raise InputError(
            source,
            f"coordinates reach {reach:.3g} {unit}, more than {MAX_COORDINATE_M / 1000:.0f} km "
            "from the origin; this cannot be a blade (corrupt file or wrong --units?)",
        )
    return vertices, faces


def merge_coincident(vertices: np.ndarray, faces: np.ndarray, part: np.ndarray | None = None):
    """Merge vertices with bit-identical coordinates (after ``-0.0 → 0.0``).

    vertices : (n, 3) float64, finite; faces : (m, 3) int64; part : (n,) int, optional —
    vertices of different parts are never merged.
    Returns (unique vertices in order of first occurrence, faces re-indexed).

    >>> v = np.array([[0., 0, 0], [1, 0, 0], [0, 1, 0], [1, 0, 0], [-0., 0, 0]])
    >>> merge_coincident(v, np.array([[0, 1, 2], [4, 3, 2]]))[1].tolist()
    [[0, 1, 2], [0, 1, 2]]
    """
    v = np.ascontiguousarray(vertices, dtype=np.float64) + 0.0  # + 0.0 turns -0.0 into 0.0
    if not len(v):
        return v.reshape(0, 3), faces
    bits = v.view(np.uint64)
    cols = [np.ascontiguousarray(bits[:, k]) for k in range(3)]
    if part is not None:
        cols.append(np.asarray(part, dtype=np.int64).view(np.uint64))
    h = np.zeros(len(v), dtype=np.uint64)
    for c in cols:  # splitmix64 finaliser over the three coordinates' bits
        h ^= c
        h ^= h >> np.uint64(30)
        h *= np.uint64(0xBF58476D1CE4E5B9)
        h ^= h >> np.uint64(27)
        h *= np.uint64(0x94D049BB133111EB)
        h ^= h >> np.uint64(31)
    order = np.argsort(h)

    def same_as_previous(order):
        s = [c[order] for c in cols]
        same = s[0][1:] == s[0][:-1]
        for sk in s[1:]:
            same &= sk[1:] == sk[:-1]
        return same

    same = same_as_previous(order)
    sh = h[order]
    if np.any((sh[1:] == sh[:-1]) & ~same):  # distinct points with one hash: sort exactly
        order = np.lexsort(cols[::-1])
        same = same_as_previous(order)
    new = np.empty(len(v), dtype=bool)
    new[0] = True
    new[1:] = ~same
    starts = np.flatnonzero(new)
    first = np.minimum.reduceat(order, starts)  # first occurrence of each point in the file
    rank = np.empty(len(first), dtype=np.int64)
    rank[np.argsort(first)] = np.arange(len(first))
    rep = np.empty(len(v), dtype=np.int64)
    rep[order] = rank[np.cumsum(new) - 1]
    return v[np.sort(first)], rep[faces]


def _signed_volumes(v, faces):
    """Signed volume of the tetrahedron (origin, face) per face, (m,); sums to the enclosed volume."""
    a, b, c = v[faces[:, 0]], v[faces[:, 1]], v[faces[:, 2]]
    return np.einsum("ij,ij->i", a, np.cross(b, c)) / 6.0


def _check_degenerate(source, vertices, faces, unit):
    """Refuse faces with a repeated vertex or (relatively) zero area."""
    repeated = (
        (faces[:, 0] == faces[:, 1]) | (faces[:, 1] == faces[:, 2]) | (faces[:, 0] == faces[:, 2])
    )
    a, b, c = vertices[faces[:, 0]], vertices[faces[:, 1]], vertices[faces[:, 2]]
    area = 0.5 * np.linalg.norm(np.cross(b - a, c - a), axis=1)
    diag = float(np.linalg.norm(vertices.max(axis=0) - vertices.min(axis=0)))
    flat = (area <= DEGENERATE_AREA_REL * diag**2) & ~repeated
    bad = repeated | flat
    if bad.any():
        pts = vertices[faces[bad].ravel()]
        raise InputError(
            source,
            f"{int(bad.sum())} degenerate faces (zero area: {int(repeated.sum())} with a "
            f"repeated vertex, {int(flat.sum())} with collinear corners) {_where(pts, unit)}; "
            "remove or repair them",
        )


def _edge_table(faces: np.ndarray, n_vertices: int):
    """Group the 3m directed edges by their undirected edge.

    Returns (order, starts, counts, forward): ``order`` sorts the edge slots (slot ``3i+j``
    is edge j of face i: ``faces[i, j] → faces[i, (j+1)%3]``) so that slots of one edge are
    adjacent; ``starts``/``counts`` delimit each undirected edge; ``forward`` tells per slot
    whether the edge runs from the lower to the higher vertex index.
    """
    a = faces.ravel()
    b = faces[:, [1, 2, 0]].ravel()
    lo = np.minimum(a, b)
    hi = np.maximum(a, b)
    key = lo * np.int64(n_vertices) + hi
    order = np.argsort(key)
    sk = key[order]
    brk = np.empty(len(sk), dtype=bool)
    brk[:1] = True
    brk[1:] = sk[1:] != sk[:-1]
    starts = np.flatnonzero(brk)
    counts = np.diff(np.append(starts, len(sk)))
    return order, starts, counts, a < b


def _check_edges(source, vertices, faces, unit, what="surface"):
    """Refuse non-manifold, open and inconsistently wound surfaces.

    Returns the face pairs ``(u, v)`` across every edge, for the components.
    """
    order, starts, counts, forward = _edge_table(faces, len(vertices))

    def edge_points(mask):
        slots = order[starts[mask]]
        f, j = slots // 3, slots % 3
        return np.concatenate([vertices[faces[f, j]], vertices[faces[f, (j + 1) % 3]]])

    many = counts > 2
    if many.any():
        raise InputError(
            source,
            f"non-manifold {what}: {int(many.sum())} edges are shared by more than two faces "
            f"{_where(edge_points(many), unit)}; each edge of a closed solid joins exactly two",
        )
    single = counts == 1
    if single.any():
        raise InputError(
            source,
            f"open {what}: {int(single.sum())} boundary edges (holes) "
            f"{_where(edge_points(single), unit)}; the solid must be closed (watertight)",
        )
    s0, s1 = order[starts], order[starts + 1]
    same = forward[s0] == forward[s1]
    if same.any():
        raise InputError(
            source,
            f"inconsistent winding: {int(same.sum())} edges are traversed the same way by both "
            f"of their faces {_where(edge_points(same), unit)}; some faces are flipped",
        )
    return s0 // 3, s1 // 3


def _components(n: int, u: np.ndarray, v: np.ndarray) -> np.ndarray:
    """Connected components of n nodes joined by edges (u, v); labels 0.. by lowest node.

    Vectorised union-find: hook each root to the smallest neighbouring root, then jump
    pointers to full compression; repeat until every edge joins one root.

    >>> _components(5, np.array([3, 1]), np.array([4, 0])).tolist()
    [0, 0, 1, 2, 2]
    """
    parent = np.arange(n)
    u = np.asarray(u, dtype=np.int64)
    v = np.asarray(v, dtype=np.int64)
    while len(u):
        pu, pv = parent[u], parent[v]
        live = pu != pv
        if not live.any():
            break
        u, v, pu, pv = u[live], v[live], pu[live], pv[live]
        np.minimum.at(parent, np.maximum(pu, pv), np.minimum(pu, pv))
        while True:
            grand = parent[parent]
            if np.array_equal(grand, parent):
                break
            parent = grand
    _, labels = np.unique(parent, return_inverse=True)
    return labels.reshape(-1)


def _reindex(cells: np.ndarray, n: int | None = None):
    """(used vertex indices ascending, cells re-indexed into them); cells int, values < n.

    >>> [a.tolist() for a in _reindex(np.array([[5, 2, 9]]))]
    [[2, 5, 9], [[1, 0, 2]]]
    """
    n = int(cells.max()) + 1 if n is None else n
    mask = np.zeros(n, dtype=bool)
    mask[cells] = True
    remap = np.cumsum(mask) - 1
    return np.flatnonzero(mask), remap[cells].astype(np.int64)


def _fmt3(p) -> str:
    return "(" + ", ".join(f"{x:.4g}" for x in p) + ")"


def _where(points: np.ndarray, unit: str) -> str:
    """Where a set of points lies, in the declared unit: centroid and bounding box."""
    points = np.asarray(points, dtype=np.float64).reshape(-1, 3)
    lo, hi = points.min(axis=0), points.max(axis=0)
    if np.allclose(lo, hi):
        return f"at {_fmt3(lo)} {unit}"
    return f"around {_fmt3(points.mean(axis=0))} {unit} (box {_fmt3(lo)} to {_fmt3(hi)})"


# --------------------------------------------------------------------------- volume meshes

_REGION_KEYS = ("gmsh:physical", "cellentityids", "medit:ref", "region", "regions",
                "material", "materialids", "material_id", "physical", "body", "part")
_IGNORED_CELLS = {"vertex", "line", "line3", "triangle", "triangle6", "triangle7",
                  "quad", "quad8", "quad9", "polygon"}


def _read_meshio(source: str, ext: str, size: int):
    """The meshio Mesh of a volume file, with the hostile-input guards."""
    what = VOLUME_FORMATS[ext]
    if ext == ".inp":
        _guard_abaqus(source)
    import meshio  # outside the memory guard: importing is not parsing
    from meshio.gmsh import main as gmsh_main

    with _parser_boundary(source, what, size):
        if ext == ".msh":
            with _GuardedBinary(_io.FileIO(source, "rb")) as fh:
                return gmsh_main.read_buffer(fh)
        if ext == ".inp":
            with _GuardedText(_io.FileIO(source, "rb"), encoding="utf-8",
                              errors="replace") as fh:
                return meshio.abaqus.read(fh)
        return meshio.vtu.read(source)


def _guard_abaqus(source: str) -> None:
    """Refuse ``*INCLUDE`` (it opens other files) and GENERATE ranges longer than the file."""
    import mmap

    with open(source, "rb") as fh, mmap.mmap(fh.fileno(), 0, access=mmap.ACCESS_READ) as mm:
        size = len(mm)
        if re.search(rb"(?im)^[ \t]*\*[ \t]*include\b", mm):
            raise InputError(
                source,
                "uses *INCLUDE, which is not supported (it would read other files); "
                "merge the included files into one .inp",
            )
        for m in re.finditer(rb"(?im)^[ \t]*\*[^\n]*generate[^\n]*\n([^\n]*)", mm):
            nums = re.findall(rb"-?\d{1,30}", m.group(1))
            if len(nums) >= 2:
                a, b = int(nums[0]), int(nums[1])
                step = int(nums[2]) if len(nums) > 2 and int(nums[2]) != 0 else 1
                if abs(b - a) // abs(step) > size:
                    raise InputError(
                        source,
                        f"a GENERATE range {a}..{b} lists more items than the file could "
                        "describe; the file is corrupt",
                    )


def _volume_bodies(source, ext, size, unit, warnings):
    """Validate a tetrahedral volume mesh (declared unit) and split it into bodies."""
    mesh = _read_meshio(source, ext, size)
    what = VOLUME_FORMATS[ext]
    try:
        points = np.asarray(mesh.points)
        blocks = [(str(b.type), np.asarray(b.data)) for b in mesh.cells]
    except Exception as exc:  # noqa: BLE001 - loader boundary
        raise InputError(source, f"cannot be read as {what}: {_reason(exc)}") from None
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
            return _surface_bodies(source, points, np.concatenate(tri_parts), unit, warnings)
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
    _check_arrays(source, points[referenced], np.zeros((1, 3), np.int64), unit)
    quad = [d for _, d, q in tet_parts if q]
    if quad:
        warnings.append(_tetra10_warning(points, np.concatenate(quad), unit))
    # keep only the corner nodes of the tetrahedra, in file order
    cells_all = np.concatenate([d[:, :4].astype(np.int64) for _, d, _ in tet_parts])
    used, cells_all = _reindex(cells_all, len(points))
    points = points[used]

    tets, six_vol = _orient_tets(source, points, cells_all, unit, warnings)
    faces, tet_of_face, pairs = _tet_faces(source, points, tets, unit)
    groups = _region_labels(mesh, tet_parts, len(tets), warnings)
    if groups is None:
        labels = _components(len(tets), pairs[0], pairs[1])
        names = {}
    else:
        labels, names = groups
    count = int(labels.max()) + 1
    if count > MAX_BODIES:
        raise InputError(
            source,
            f"has {count} separate bodies, more than the {MAX_BODIES} accepted",
        )
    bodies = []
    for k in range(count):
        sel = labels == k
        tk = tets[sel]
        if groups is None:
            fk = faces[sel[tet_of_face]]
        else:
            fk, _, _ = _tet_faces(source, points, tk, unit)
        name = names.get(k, "")
        _check_edges(source, points, fk, unit, f"boundary of {name or 'a body'}")
        if count == 1:
            used = np.arange(len(points))
        else:
            used, both = _reindex(np.concatenate([tk.ravel(), fk.ravel()]), len(points))
            tk, fk = both[: tk.size].reshape(-1, 4), both[tk.size:].reshape(-1, 3)
        vk = points[used]
        vol = float(six_vol[sel].sum()) / 6.0
        bodies.append((vk, fk, tk, vol, int(used[0]), name))
    return bodies


def _tet_signed6(p, t):
    """Six times the signed volume of each tetrahedron, (k,)."""
    a = p[t[:, 0]]
    return np.einsum("ij,ij->i", p[t[:, 1]] - a, np.cross(p[t[:, 2]] - a, p[t[:, 3]] - a))


def _orient_tets(source, points, tets, unit, warnings):
    """Refuse zero-volume tetrahedra; reorder negative ones to positive orientation.

    Returns (tets (k, 4) positively oriented, six times their volumes (k,)).
    """
    diag = float(np.linalg.norm(points.max(axis=0) - points.min(axis=0)))
    s = np.sort(tets, axis=1)
    repeated = (s[:, 1:] == s[:, :-1]).any(axis=1)
    d6 = _tet_signed6(points, tets)
    flat = (np.abs(d6) <= 6.0 * ZERO_TET_REL * diag**3) | repeated
    if flat.any():
        raise InputError(
            source,
            f"{int(flat.sum())} of {len(tets)} tetrahedra have zero volume (repeated or "
            f"coplanar nodes) {_where(points[tets[flat].ravel()], unit)}; repair the mesh",
        )
    neg = d6 < 0
    if neg.any():
        tets = tets.copy()
        tets[neg] = tets[neg][:, [0, 2, 1, 3]]
        if neg.all():
            warnings.append(
                f"all {len(tets)} tetrahedra had negative orientation (the opposite node-order "
                "convention); they were reordered"
            )
        else:
            warnings.append(
                f"{int(neg.sum())} of {len(tets)} tetrahedra had negative orientation and were "
                "reordered"
            )
    return tets, np.abs(d6)


_TET_FACES = np.array([[0, 2, 1], [0, 1, 3], [1, 2, 3], [0, 3, 2]])


def _tet_faces(source, points, tets, unit):
    """Outward boundary triangles of positively oriented tetrahedra.

    Returns (boundary faces (b, 3), tet index of each boundary face (b,), tet pairs across
    interior faces (u, v)). Refuses faces shared by more than two tetrahedra and interior
    faces with both tetrahedra on the same side.
    """
    f = tets[:, _TET_FACES].reshape(-1, 3)
    s = np.sort(f, axis=1)
    n = np.int64(len(points))
    if len(points) <= 2_000_000:
        key = (s[:, 0] * n + s[:, 1]) * n + s[:, 2]
        order = np.argsort(key)
        sk = key[order]
        brk = np.empty(len(sk), dtype=bool)
        brk[:1] = True
        brk[1:] = sk[1:] != sk[:-1]
    else:
        order = np.lexsort((s[:, 2], s[:, 1], s[:, 0]))
        ss = s[order]
        brk = np.empty(len(ss), dtype=bool)
        brk[:1] = True
        brk[1:] = (ss[1:] != ss[:-1]).any(axis=1)
    starts = np.flatnonzero(brk)
    counts = np.diff(np.append(starts, len(order)))
    many = counts > 2
    if many.any():
        pts = points[f[order[starts[many]]].ravel()]
        raise InputError(
            source,
            f"{int(many.sum())} faces are shared by more than two tetrahedra (overlapping "
            f"elements) {_where(pts, unit)}; repair the mesh",
        )
    # parity of each face's node order relative to its sorted order (even = 0)
    inv = (f[:, 0] > f[:, 1]).astype(int) + (f[:, 0] > f[:, 2]) + (f[:, 1] > f[:, 2])
    parity = inv % 2
    two = counts == 2
    a, b = order[starts[two]], order[starts[two] + 1]
    same = parity[a] == parity[b]
    if same.any():
        raise InputError(
            source,
            f"{int(same.sum())} interior faces have both of their tetrahedra on the same side "
            f"(folded or overlapping elements) {_where(points[f[a[same]].ravel()], unit)}; "
            "repair the mesh",
        )
    one = order[starts[counts == 1]]
    one.sort()
    return f[one], one // 4, (a // 4, b // 4)


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
    # 2. named cell sets (Abaqus ELSET, Gmsh physical names)
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


# --------------------------------------------------------------------------- between bodies


def _check_overlaps(source, bodies, unit, scale, warnings):
    """Refuse bodies whose volumes intersect (beyond OVERLAP_REL of the smaller one).

    Only pairs whose bounding boxes overlap are intersected (manifold3d boolean). A pair
    manifold3d cannot take (e.g. a shell pinched at a vertex) is reported in ``warnings``.
    """
    lo = np.array([b.vertices.min(axis=0) for b in bodies])
    hi = np.array([b.vertices.max(axis=0) for b in bodies])
    span = float(np.max(hi.max(axis=0) - lo.min(axis=0)))
    gap = np.minimum(hi[:, None, :], hi[None, :, :]) - np.maximum(lo[:, None, :], lo[None, :, :])
    boxes = (gap > 1e-9 * span).all(axis=2)
    i_idx, j_idx = np.nonzero(np.triu(boxes, k=1))
    if not len(i_idx):
        return
    import manifold3d

    cache = {}

    def solid(k):
        if k not in cache:
            b = bodies[k]
            mesh = manifold3d.Mesh64(
                vert_properties=np.ascontiguousarray(b.vertices, dtype=np.float64),
                tri_verts=np.ascontiguousarray(b.faces, dtype=np.uint64),
            )
            cache[k] = manifold3d.Manifold(mesh)
        return cache[k]

    for i, j in zip(i_idx.tolist(), j_idx.tolist()):
        a, b = solid(i), solid(j)
        if a.status() != manifold3d.Error.NoError or b.status() != manifold3d.Error.NoError:
            warnings.append(
                f"{bodies[i].name} and {bodies[j].name} could not be checked for overlap "
                f"(manifold3d refused the surfaces: {a.status()}, {b.status()})"
            )
            continue
        common = float((a ^ b).volume())
        small = min(float(a.volume()), float(b.volume()))
        if common > OVERLAP_REL * small:
            inner = bodies[j].name if b.volume() <= a.volume() else bodies[i].name
            outer = bodies[i].name if inner == bodies[j].name else bodies[j].name
            frac = common / small
            if frac > 0.999:
                raise InputError(
                    source,
                    f"{inner} lies inside {outer} (common volume {common / scale**3:.4g} "
                    f"{unit}^3); nested shells such as cavities or embedded parts are not "
                    "supported: give each solid as its own closed shell sharing no volume",
                )
            raise InputError(
                source,
                f"{bodies[i].name} and {bodies[j].name} overlap: they share "
                f"{common / scale**3:.4g} {unit}^3 ({100 * frac:.3g} % of the smaller); "
                "bodies in one file may touch but not interpenetrate",
            )


def _plausibility_warning(bodies, unit, scale) -> str | None:
    """A warning when the solid is implausibly long or short for a blade, with a better unit."""
    lo = np.min([b.vertices.min(axis=0) for b in bodies], axis=0)
    hi = np.max([b.vertices.max(axis=0) for b in bodies], axis=0)
    length = float(np.max(hi - lo))
    low, high = PLAUSIBLE_LENGTH_M
    if low <= length <= high:
        return None
    raw = length / scale
    # prefer a unit giving a typical blade (0.1 m to 6 m), metric first; else any plausible
    order = ["mm", "m", "in", "cm", "ft"]
    typical = [u for u in order if u != unit and 0.1 <= raw * LENGTH_UNITS[u] <= 6.0]
    plausible = [u for u in order if u != unit and low <= raw * LENGTH_UNITS[u] <= high]
    pick = (typical or plausible or [None])[0]
    state = "long" if length > high else "short"
    metres = "" if unit == "m" else f" ({length:.4g} m)"
    msg = (
        f"bounding box is {raw:.4g} {unit} long{metres}, implausibly {state} for a "
        f"blade (expected {low * 1000:.0f} mm to {high:.0f} m)"
    )
    if pick:
        msg += f"; did you mean --units {pick} ({raw * LENGTH_UNITS[pick]:.4g} m)?"
    else:
        msg += "; check --units"
    return msg


def read_toml(path, what: str = "file", max_bytes: int = 10_000_000) -> dict:
    """Parse a small TOML input file (job, limits, transform) into a dict.

    Every problem is one :class:`InputError` naming the file: missing, too large for what it
    is, unreadable, or not valid TOML.
    """
    import tomllib

    p = os.fspath(path)
    if not os.path.isfile(p):
        raise InputError(p, f"{what} not found")
    if os.path.getsize(p) > max_bytes:
        raise InputError(p, f"a {what} is a few lines; this one is larger than {max_bytes // 1_000_000} MB")
    try:
        with open(p, "rb") as fh:
            return tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(p, f"not valid TOML ({exc})") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(p, f"cannot be read ({exc})") from None
