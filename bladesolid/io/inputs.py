"""Small input files (job, limits, transform, reports), read with one-line errors.

Each is checked before it is opened: it exists, and it is no larger than a file of its kind
can be (``max_bytes``), so a wrong path given for it is refused at once.
"""

from __future__ import annotations

import os

from ..errors import InputError

__all__ = ["check_input_file", "read_json", "read_toml"]


def check_input_file(path, what: str, max_bytes: int, hint: str = "") -> str:
    """The path of an input file of kind ``what`` that exists and holds at most ``max_bytes``;
    :class:`InputError` naming it otherwise (``hint``: said after "not found")."""
    p = os.fspath(path)
    if not os.path.isfile(p):
        raise InputError(p, f"{what} not found{hint}")
    if os.path.getsize(p) > max_bytes:
        raise InputError(p, f"larger than {max_bytes / 1e6:g} MB, more than a {what} holds; is it the right file?")
    return p


def read_toml(path, what: str = "file", max_bytes: int = 10_000_000) -> dict:
    """Parse a small TOML input file (job, limits, transform) into a dict.

    Every problem is one :class:`InputError` naming the file: missing, too large for what it
    is, unreadable, or not valid TOML.
    """
    import tomllib

    p = check_input_file(path, what, max_bytes)
    try:
        with open(p, "rb") as fh:
            return tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(p, f"not valid TOML ({exc})") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(p, f"cannot be read ({exc})") from None


def read_json(path, what: str = "file", max_bytes: int = 200_000_000):
    """Parse a JSON input file (a report, a transform); one :class:`InputError` naming the
    file on any problem, as :func:`read_toml`."""
    import json

    p = check_input_file(path, what, max_bytes)
    try:
        with open(p, encoding="utf-8") as fh:
            return json.load(fh)
    except json.JSONDecodeError as exc:
        raise InputError(p, f"not valid JSON ({exc.msg} at line {exc.lineno})") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(p, f"cannot be read ({exc})") from None
