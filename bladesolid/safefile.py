"""Safe output files: written whole or not at all, never replacing anything unasked.

Every writer goes through a temporary file in the destination folder and an atomic rename,
so an interrupted run (Ctrl-C, a full disk) leaves no half-written file and no temporary
file behind; an existing output is only replaced with ``force``. Used by every stage that
writes (views and reports alike). Every folder written whole (:func:`staged_folder`) holds a
``CAUTION.txt`` with the safety caution.
"""

from __future__ import annotations

import contextlib
import os
import re
import shutil
import socket
import tempfile

from . import CAUTION, __version__
from .errors import InputError, OutputExistsError

__all__ = ["STALE_AFTER_S", "TEMP_PREFIX", "atomic_write_bytes", "atomic_write_text", "check_new_folder",
           "check_new_output", "owner_of", "CAUTION_FILE", "caution_text", "write_caution_file", "probe_writable", "staged_file", "staged_folder", "sweep_stale",
           "temp_folder", "temp_prefix"]

# --- temporary names: one prefix, the owner in the name, stale ones swept ---------------------------
#
# Every temporary file or folder bladesolid makes is named ``bladesolid-<pid>-<host>-<random>``
# (with a leading dot beside an output, where it is staged before its rename): in the system
# temporary folder (the mesher's working folder, the review's scratch files) and beside the
# outputs (atomic writes, staged files and folders). A run that ends normally, by an error, by
# Ctrl-C or by SIGTERM removes its own; one killed outright (SIGKILL, power cut) cannot, so
# every run first sweeps the folder it is about to use of entries that are stale: older than
# :data:`STALE_AFTER_S`, made on this host, by a process that no longer exists. A live run's
# entries are never touched (its process exists), nor another host's (a shared filesystem).

#: The one prefix of every temporary name (after an optional leading dot).
TEMP_PREFIX = "bladesolid-"
#: Temporary entries older than this (seconds) whose owner is gone are removed by the next run.
STALE_AFTER_S = 6 * 3600.0

_OWNED = re.compile(r"^\.?" + re.escape(TEMP_PREFIX) + r"(\d+)-([A-Za-z0-9._]+)-[A-Za-z0-9_]+(\.[A-Za-z0-9]+)?$")


def _host() -> str:
    """This machine's name as it appears in temporary names (letters, digits, dots, underscores)."""
    return re.sub(r"[^A-Za-z0-9.]", "_", socket.gethostname() or "host")[:60] or "host"


def temp_prefix(hidden: bool = False) -> str:
    """``bladesolid-<pid>-<host>-`` (``.bladesolid-...`` when ``hidden``): the prefix of this
    process's temporary names, to which ``tempfile`` adds its random part.

    >>> temp_prefix().startswith(f"bladesolid-{os.getpid()}-")
    True
    """
    return f"{'.' if hidden else ''}{TEMP_PREFIX}{os.getpid()}-{_host()}-"


def owner_of(name: str) -> tuple[int, str] | None:
    """(pid, host) of a temporary name made by :func:`temp_prefix`, else None.

    >>> owner_of(".bladesolid-4242-build.example-x1y2z3_a.part")
    (4242, 'build.example')
    >>> owner_of("report.json") is None
    True
    """
    m = _OWNED.match(name)
    return (int(m.group(1)), m.group(2)) if m else None


def _alive(pid: int) -> bool:
    if pid <= 0:
        return True  # not a real owner: never swept
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OSError):
        return True  # exists (another user's process) or cannot tell: keep
    return True


def sweep_stale(folder=None, *, older_than_s: float = STALE_AFTER_S, now: float | None = None) -> list[str]:
    """Remove from ``folder`` (default: the system temporary folder) the temporary entries of
    bladesolid runs that are gone: named by :func:`temp_prefix` on this host, owned by a process
    that no longer exists, last changed more than ``older_than_s`` seconds ago. Returns the
    names removed; never raises (a folder that cannot be listed is left alone)."""
    import time

    folder = tempfile.gettempdir() if folder is None else os.fspath(folder)
    now = time.time() if now is None else now
    host = _host()
    removed = []
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return removed
    for entry in entries:
        owner = owner_of(entry.name)
        if owner is None or owner[1] != host or owner[0] == os.getpid() or _alive(owner[0]):
            continue
        try:
            if now - entry.stat(follow_symlinks=False).st_mtime <= older_than_s:
                continue
            if entry.is_dir(follow_symlinks=False):
                shutil.rmtree(entry.path)
            else:
                os.unlink(entry.path)
            removed.append(entry.name)
        except OSError:
            continue
    return removed


@contextlib.contextmanager
def temp_folder():
    """A private temporary folder (``bladesolid-<pid>-<host>-*`` in the system temporary folder),
    removed when the block ends, however it ends; stale folders of runs that are gone are swept
    first (:func:`sweep_stale`)."""
    sweep_stale()
    path = tempfile.mkdtemp(prefix=temp_prefix())
    try:
        yield path
    finally:
        shutil.rmtree(path, ignore_errors=True)


def probe_writable(folder) -> str | None:
    """None when a file can be created in ``folder`` (tried: a temporary file made and removed,
    which also holds for root and read-only filesystems), else the reason in words."""
    try:
        fd, tmp = tempfile.mkstemp(prefix=temp_prefix(hidden=True), suffix=".part", dir=os.fspath(folder))
    except OSError as exc:
        return (exc.strerror or str(exc)).lower()
    os.close(fd)
    with contextlib.suppress(OSError):
        os.unlink(tmp)
    return None


#: The caution's file in every output folder.
CAUTION_FILE = "CAUTION.txt"


def caution_text() -> str:
    """The text of ``CAUTION.txt``: the caution, and what wrote the folder."""
    return f"{CAUTION}\n\nThe files in this folder were written by bladesolid {__version__}.\n"


def write_caution_file(folder) -> str:
    """Write (atomically, replacing any earlier one) ``CAUTION.txt`` into an existing folder;
    for output folders that are not staged whole. Returns its path."""
    return atomic_write_text(os.path.join(os.fspath(folder), CAUTION_FILE), caution_text(), force=True)


def check_new_output(path, force: bool = False) -> None:
    """Refuse (before any work) an output that exists, unless ``force``; check its folder."""
    p = os.fspath(path)
    if os.path.exists(p) and not force:
        raise OutputExistsError(p)
    parent = os.path.dirname(os.path.abspath(p))
    if not os.path.isdir(parent):
        raise InputError(p, f"the folder {parent} does not exist")


def check_new_folder(path, force: bool = False) -> None:
    """Refuse (before any work) an output folder that is a file, that is not empty (unless
    ``force``), or whose parent folder does not exist. Messages name ``path`` as given."""
    p = os.fspath(path)
    full = os.path.abspath(p)
    if os.path.exists(full) and not os.path.isdir(full):
        raise InputError(p, "exists and is not a folder")
    if os.path.isdir(full) and os.listdir(full) and not force:
        raise OutputExistsError(p)
    parent = os.path.dirname(full)
    if not os.path.isdir(parent):
        raise InputError(p, f"the folder {parent} does not exist")


def _umask() -> int:
    """The process umask (read by setting and restoring it)."""
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def atomic_write_bytes(path, data: bytes, force: bool = False) -> str:
    """Write ``data`` to ``path`` through a temporary file and a rename.

    The file gets the permissions of an ordinary new file (0o666 & ~umask), not the
    owner-only 0o600 of the temporary file.
    """
    p = os.fspath(path)
    check_new_output(p, force)
    parent = os.path.dirname(os.path.abspath(p))
    sweep_stale(parent)
    try:
        fd, tmp = tempfile.mkstemp(prefix=temp_prefix(hidden=True), suffix=".part", dir=parent)
    except OSError as exc:
        raise InputError(p, f"cannot be written ({exc.strerror or exc})") from None
    try:
        with os.fdopen(fd, "wb") as fh:
            os.fchmod(fh.fileno(), 0o666 & ~_umask())
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, p)
    except OSError as exc:  # disk full, quota, ...: nothing is left behind
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise InputError(p, f"could not be written ({exc.strerror or exc}); nothing was left behind") from None
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
    return p


def atomic_write_text(path, text: str, force: bool = False) -> str:
    """Write text (UTF-8) atomically."""
    return atomic_write_bytes(path, text.encode("utf-8"), force)


@contextlib.contextmanager
def staged_folder(path, force: bool = False):
    """Build an output folder in a temporary sibling and move it into place at the end.

    Yields the temporary folder's path. On any error (or Ctrl-C) the temporary folder is
    removed and nothing appears at ``path``. An existing non-empty ``path`` needs ``force``.
    The folder gets a ``CAUTION.txt`` (:func:`caution_text`) unless the block wrote its own.
    """
    p = os.path.abspath(os.fspath(path))
    check_new_folder(p, force)
    parent = os.path.dirname(p)
    sweep_stale(parent)
    try:
        tmp = tempfile.mkdtemp(prefix=temp_prefix(hidden=True), suffix=".part", dir=parent)
    except OSError as exc:  # the folder cannot be created there: name the output, not the temporary
        raise InputError(os.fspath(path), f"cannot be written ({(exc.strerror or str(exc)).lower()})") from None
    try:
        os.chmod(tmp, 0o777 & ~_umask())  # an ordinary folder, not mkdtemp's owner-only 0o700
        yield tmp
        caution = os.path.join(tmp, CAUTION_FILE)
        if not os.path.exists(caution):
            with open(caution, "w", encoding="utf-8") as fh:
                fh.write(caution_text())
        if os.path.isdir(p):
            old = tempfile.mkdtemp(prefix=temp_prefix(hidden=True), suffix=".old", dir=parent)
            os.rmdir(old)
            os.replace(p, old)
            os.replace(tmp, p)
            shutil.rmtree(old, ignore_errors=True)
        else:
            os.replace(tmp, p)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise



@contextlib.contextmanager
def staged_file(path, force: bool = False):
    """Yield a temporary file name (same folder, same extension) that becomes ``path`` when
    the block ends without error; refuse an existing ``path`` unless ``force``."""
    p = os.fspath(path)
    check_new_output(p, force)
    parent = os.path.dirname(os.path.abspath(p))
    sweep_stale(parent)
    try:
        fd, tmp = tempfile.mkstemp(prefix=temp_prefix(hidden=True), suffix=os.path.splitext(p)[1], dir=parent)
    except OSError as exc:
        raise InputError(p, f"cannot be written ({(exc.strerror or str(exc)).lower()})") from None
    os.fchmod(fd, 0o666 & ~_umask())  # writers reopen the file, which keeps its mode: not mkstemp's 0o600
    os.close(fd)
    try:
        yield tmp
        os.replace(tmp, p)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


