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
import shutil
import tempfile

from . import CAUTION, __version__
from .errors import InputError, OutputExistsError

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
    try:
        fd, tmp = tempfile.mkstemp(prefix=".bladesolid-", suffix=".part", dir=parent)
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
    tmp = tempfile.mkdtemp(prefix=f".{os.path.basename(p)}-", suffix=".part", dir=parent)
    try:
        os.chmod(tmp, 0o777 & ~_umask())  # an ordinary folder, not mkdtemp's owner-only 0o700
        yield tmp
        caution = os.path.join(tmp, CAUTION_FILE)
        if not os.path.exists(caution):
            with open(caution, "w", encoding="utf-8") as fh:
                fh.write(caution_text())
        if os.path.isdir(p):
            old = tempfile.mkdtemp(prefix=f".{os.path.basename(p)}-", suffix=".old", dir=parent)
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
    fd, tmp = tempfile.mkstemp(prefix=".bladesolid-", suffix=os.path.splitext(p)[1], dir=parent)
    os.fchmod(fd, 0o666 & ~_umask())  # writers reopen the file, which keeps its mode: not mkstemp's 0o600
    os.close(fd)
    try:
        yield tmp
        os.replace(tmp, p)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


