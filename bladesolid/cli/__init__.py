"""The ``bladesolid`` command line (docs/CONVENTIONS.md §7): argument handling and printing only.

Every command is a thin layer over :mod:`bladesolid.api`, :mod:`bladesolid.review` and
:mod:`bladesolid.report`. Exit status: 0 done, 1 done but a limit is exceeded, 2 bad input or
usage (one line on stderr naming the file, key or flag and the problem; no traceback; no
partial output).

============  ==================================================================
parser        the sub-commands and their flags (:func:`build_parser`)
options       flags to job keys, output checks, API parameter names to flags
commands      one function per sub-command: read the arguments, compute, write, print
printing      the tables and lines on the terminal (rich), SI or US customary
============  ==================================================================
"""

from __future__ import annotations

import sys

from ..errors import InputError, one_line
from .options import UsageError, command_line_message
from .parser import build_parser, join_signed_values

__all__ = ["UsageError", "build_parser", "main"]


def main(argv=None) -> int:
    """Entry point: returns the exit status."""
    parser = build_parser()
    try:
        argv = join_signed_values([str(a) for a in (sys.argv[1:] if argv is None else argv)])
        args = parser.parse_args(argv)
        if not getattr(args, "command", None):
            parser.print_help()
            return 2
        return int(args.func(args) or 0)
    except UsageError as exc:
        print(str(exc).splitlines()[0], file=sys.stderr)
        return 2
    except InputError as exc:
        print(f"bladesolid: error: {command_line_message(exc)}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("bladesolid: interrupted; no partial output was left", file=sys.stderr)
        return 130
    except MemoryError:
        print("bladesolid: error: out of memory; try a coarser mesh", file=sys.stderr)
        return 2
    except OSError as exc:  # disk full, unwritable folder, ... : one line, no traceback
        where = exc.filename if exc.filename else "output"
        print(f"bladesolid: error: {one_line(where, 300)}: {one_line(exc.strerror or exc, 300)}", file=sys.stderr)
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
