"""Surface formats: STL (ASCII and binary), OBJ, PLY, OFF.

Binary STL is read here with one ``numpy.fromfile`` after its header has been checked against
the file size (refused before anything is allocated); the other formats go through trimesh
inside :func:`~bladesolid.io.guards.parser_boundary`. :func:`read_surface` returns the raw
arrays, nothing dropped or merged; the checks and the split into bodies are
:func:`bladesolid.io.checks.surface_bodies`.
"""

from __future__ import annotations

import io as _io

import numpy as np

from ..errors import InputError
from .guards import parser_boundary, reason, sniff

__all__ = ["SURFACE_FORMATS", "read_surface", "stl_bytes", "write_surface"]

#: Surface formats read through trimesh (binary STL read directly), by extension.
SURFACE_FORMATS = {".stl": "STL", ".obj": "OBJ", ".ply": "PLY", ".off": "OFF"}

_STL_HEADER = 84
_STL_RECORD = 50
_STL_DTYPE = np.dtype([("normal", "<f4", (3,)), ("v", "<f4", (3, 3)), ("attr", "<u2")])


def read_surface(source: str, ext: str, size: int):
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

    with parser_boundary(source, what, size):
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
        hint = sniff(head)
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
        hint = sniff(head)
        extra = f"; it looks like {hint}" if hint else ""
        raise InputError(
            source,
            f"not an STL file: {size} bytes is shorter than the 84-byte binary header "
            f"and it does not start with 'solid'{extra}",
        )
    holds = (size - _STL_HEADER) // _STL_RECORD
    hint = sniff(head)
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
    if n:
        _refuse_all_degenerate(source, n)
    try:
        with open(source, "rb") as fh:
            fh.seek(_STL_HEADER)
            rec = np.fromfile(fh, dtype=_STL_DTYPE, count=n)
    except (OSError, ValueError, MemoryError) as exc:
        raise InputError(source, f"cannot be read as binary STL: {reason(exc)}") from None
    if len(rec) != n:
        raise InputError(source, f"binary STL ended after {len(rec)} of {n} triangles")
    if n == 0:
        raise InputError(source, "contains no triangles (binary STL with a count of 0)")
    with np.errstate(invalid="ignore"):  # signalling NaNs are reported by check_arrays
        vertices = rec["v"].reshape(-1, 3).astype(np.float64)
    faces = np.arange(3 * n, dtype=np.int64).reshape(-1, 3)
    return vertices, faces


#: A binary STL record with its corners as opaque 12-byte values (compared bit for bit).
_STL_CORNERS = np.dtype([("normal", "V12"), ("a", "V12"), ("b", "V12"), ("c", "V12"), ("attr", "V2")])


def _refuse_all_degenerate(source: str, n: int) -> None:
    """Refuse, before the file is read into memory, a binary STL in which fewer than four of
    its ``n`` triangles have three distinct corners (a closed surface needs at least four, the
    tetrahedron): a file of zeros, or of one point repeated, however large. The file is mapped,
    not read, and scanned in blocks until four good triangles are seen (the first block, for
    any real surface)."""
    try:
        mm = np.memmap(source, dtype=_STL_CORNERS, mode="r", offset=_STL_HEADER, shape=(n,))
    except (OSError, ValueError):
        return  # not mappable here: the ordinary read and checks follow
    distinct = 0
    block = 1 << 20
    try:
        for i in range(0, n, block):
            c = mm[i:i + block]
            a, b, d = c["a"], c["b"], c["c"]
            distinct += int(len(c) - np.count_nonzero((a == b) | (b == d) | (a == d)))
            if distinct >= 4:
                return
    finally:
        del mm
    raise InputError(source, f"only {distinct} of its {n:,} triangles have three distinct corners; "
                             "a closed surface needs at least 4 (is the file blank or zero-filled?)")


def write_surface(path, vertices, faces) -> None:
    """Write a triangle surface as binary STL (little helper for tests and examples).

    vertices : (n, 3) float, any unit; faces : (m, 3) int into ``vertices``.
    """
    with open(path, "wb") as fh:
        fh.write(stl_bytes(vertices, faces))


def stl_bytes(vertices, faces, part=None) -> bytes:
    """A triangle surface as the bytes of an STL file: binary STL, or — when ``part`` ((n,) int,
    the part of each vertex) holds several parts — ASCII STL with one ``solid part_<k>`` block
    per part, so that reading it back keeps the parts (materials) apart. Coordinates are
    written as given (the file's own unit), in full precision.

    >>> import numpy as np
    >>> v = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0]], float)
    >>> len(stl_bytes(v, [[0, 1, 2]]))      # 84-byte header + one 50-byte record
    134
    """
    v = np.asarray(vertices, dtype=np.float64)
    f = np.asarray(faces, dtype=np.int64)
    labels = None if part is None else np.asarray(part)[f[:, 0]]
    if labels is not None and len(np.unique(labels)) > 1:
        out = []
        for k in np.unique(labels):
            out.append(f"solid part_{int(k) + 1}")
            tri = v[f[labels == k]]
            with np.errstate(all="ignore"):
                n = np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0])
                norm = np.linalg.norm(n, axis=1, keepdims=True)
                n = np.divide(n, norm, out=np.zeros_like(n), where=norm > 0)
            for nn, t in zip(n, tri):
                out.append("  facet normal " + " ".join(f"{x:.17g}" for x in nn))
                out.append("    outer loop")
                out.extend("      vertex " + " ".join(f"{x:.17g}" for x in p) for p in t)
                out.append("    endloop")
                out.append("  endfacet")
            out.append(f"endsolid part_{int(k) + 1}")
        return ("\n".join(out) + "\n").encode("ascii")
    tri = v[f]
    rec = np.zeros(len(tri), dtype=_STL_DTYPE)
    rec["v"] = tri
    with np.errstate(all="ignore"):
        n = np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0])
        norm = np.linalg.norm(n, axis=1, keepdims=True)
        rec["normal"] = np.divide(n, norm, out=np.zeros_like(n), where=norm > 0)
    return b"bladesolid".ljust(80, b" ") + np.uint32(len(tri)).tobytes() + rec.tobytes()
