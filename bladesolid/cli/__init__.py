"""The ``bladesolid`` command line (docs/CONVENTIONS.md §7): argument handling and printing only.

Every command is a thin layer over :mod:`bladesolid.api`, :mod:`bladesolid.review` and
:mod:`bladesolid.report`. Exit status: 0 done, 1 done but a limit is exceeded, 2 bad input or
usage (one line on stderr naming the file, key or flag and the problem; no traceback; no
partial output), 3 an internal error (one line; ``--verbose`` shows the traceback), 130
interrupted (Ctrl-C), 143 terminated (SIGTERM) — both after removing every temporary file and
staged folder of the run.

============  ==================================================================
parser        the sub-commands and their flags (:func:`build_parser`)
options       flags to job keys, output checks, API parameter names to flags
commands      one function per sub-command: read the arguments, compute, write, print
printing      the tables and lines on the terminal (rich), SI or US customary
============  ==================================================================
"""

from __future__ import annotations

import contextlib
import signal
import sys
import warnings

from ..errors import InputError, one_line
from .options import UsageError, command_line_message
from .parser import build_parser, join_signed_values

__all__ = ["EXIT_INTERNAL", "EXIT_INTERRUPTED", "EXIT_TERMINATED", "Terminated", "UsageError", "build_parser", "main"]

#: Exit status of an internal error (a bug), of Ctrl-C (128 + SIGINT) and of SIGTERM (128 + 15).
EXIT_INTERNAL = 3
EXIT_INTERRUPTED = 130
EXIT_TERMINATED = 143


class Terminated(KeyboardInterrupt):
    """SIGTERM, raised in the main thread like Ctrl-C, so that every cleanup Ctrl-C runs
    (temporary files, staged folders, the mesher's child process and folder) runs for it too."""


def _raise_terminated(signum, frame):
    raise Terminated()


@contextlib.contextmanager
def _sigterm_like_sigint():
    """While a command runs, SIGTERM raises :class:`Terminated` (main thread only; elsewhere,
    and on platforms without SIGTERM, nothing changes)."""
    try:
        old = signal.signal(signal.SIGTERM, _raise_terminated)
    except (AttributeError, OSError, ValueError):
        yield
        return
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, old)


def _error(text: str) -> None:
    print(text, file=sys.stderr)


def _stopped(exc: KeyboardInterrupt) -> int:
    if isinstance(exc, Terminated):
        _error("bladesolid: terminated (SIGTERM); no partial output was left")
        return EXIT_TERMINATED
    _error("bladesolid: interrupted; no partial output was left")
    return EXIT_INTERRUPTED


def main(argv=None) -> int:
    """Entry point: returns the exit status."""
    parser = build_parser()
    with _sigterm_like_sigint():
        try:
            argv = join_signed_values([str(a) for a in (sys.argv[1:] if argv is None else argv)])
            args = parser.parse_args(argv)
        except UsageError as exc:
            _error(str(exc).splitlines()[0])
            return 2
        except KeyboardInterrupt as exc:
            return _stopped(exc)
        if not getattr(args, "command", None):
            parser.print_help()
            return 2
        return _run(args, bool(getattr(args, "verbose", False)))


def _numeric_note(caught) -> str | None:
    """One warning line for the numerical warnings (numpy's RuntimeWarning) of a run, or None."""
    numeric = [w for w in caught if issubclass(w.category, RuntimeWarning)]
    if not numeric:
        return None
    return (f"a numerical overflow or invalid value occurred ({one_line(numeric[0].message, 120)}); some figures "
            "may be infinite or undefined: check the inputs for implausible values")


def _run(args, verbose: bool) -> int:
    """Run the command of ``args`` under the contract of docs/CONVENTIONS.md §7."""
    from ..safefile import sweep_stale
    from . import printing

    sweep_stale()  # temporary folders left by runs that were killed outright (SIGKILL, power cut)
    with printing.stderr_session(verbose), warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", RuntimeWarning)
        try:
            code = int(args.func(args) or 0)
        except UsageError as exc:
            _error(str(exc).splitlines()[0])
            return 2
        except InputError as exc:
            _error(f"bladesolid: error: {command_line_message(exc)}")
            return 2
        except KeyboardInterrupt as exc:
            return _stopped(exc)
        except MemoryError:
            _error("bladesolid: error: out of memory; try a coarser mesh")
            return 2
        except OSError as exc:  # disk full, unwritable folder, ... : one line, no traceback
            where = exc.filename if exc.filename else "output"
            _error(f"bladesolid: error: {one_line(where, 300)}: {one_line(exc.strerror or exc, 300)}")
            return 2
        except Exception as exc:  # a bug: still one line, the traceback only when asked for
            if verbose:
                import traceback

                traceback.print_exc()
            _error(f"bladesolid: internal error: {type(exc).__name__}: {one_line(exc, 300)} (a bug: please report "
                   "it; --verbose shows the traceback)")
            return EXIT_INTERNAL
        if code != 2:  # on the way to success: the held-back warnings, and the numerical ones as one line
            printing.release(_numeric_note(caught))
            if verbose:
                for w in caught:
                    if not issubclass(w.category, RuntimeWarning):
                        _error(f"warning: {w.category.__name__}: {one_line(w.message, 300)}")
        return code


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
