"""Guards around reading a mesh file: the file itself, third-party parsers, hostile content.

* :func:`check_file` — existence, kind, readability and size, before anything is parsed;
* :func:`parser_boundary` — a third-party parser run quiet, with a temporary address-space
  limit proportional to the file size (Linux, single-threaded callers), every failure turned
  into one :class:`~bladesolid.errors.InputError`;
* :class:`GuardedBinary` / :class:`GuardedText` — files that stop a parser reading past the
  end of the file in a loop;
* :func:`guard_keyword_deck` — ``*INCLUDE`` (which would open other files) and GENERATE
  ranges longer than the file, refused in a keyword deck of tetrahedra (``.inp``);
* :func:`sniff` — a guess of the real format from the first bytes, for teaching messages.
"""

from __future__ import annotations

import contextlib
import io as _io
import os
import re
import stat

from ..errors import InputError

__all__ = ["DEFAULT_MAX_BYTES", "GuardedBinary", "GuardedText", "check_file", "guard_keyword_deck",
           "parser_boundary", "reason", "sniff"]

#: Default cap on the size of an input file (bytes).
DEFAULT_MAX_BYTES = 2 * 1024**3


def check_file(source: str, limit: int) -> int:
    """Existence, kind, readability and size of the file; returns its size in bytes."""
    try:
        st = os.stat(source)
    except FileNotFoundError:
        raise InputError(source, "file not found") from None
    except PermissionError:
        raise InputError(source, "cannot be read: permission denied") from None
    except (OSError, ValueError) as exc:
        raise InputError(source, f"cannot be read: {reason(exc)}") from None
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
        raise InputError(source, f"cannot be read: {reason(exc)}") from None
    return size


def reason(exc: BaseException) -> str:
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


def sniff(head: bytes) -> str | None:
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
        return "a keyword deck (.inp)"
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


class GuardedBinary(_EofGuard, _io.BufferedReader):
    """A guarded binary file (see :class:`_EofGuard`)."""


class GuardedText(_EofGuard, _io.TextIOWrapper):
    """A guarded text file (see :class:`_EofGuard`)."""


@contextlib.contextmanager
def parser_boundary(source: str, what: str, size: int):
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
        raise InputError(source, f"cannot be read as {what}: {reason(exc)}") from None


def guard_keyword_deck(source: str) -> None:
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
