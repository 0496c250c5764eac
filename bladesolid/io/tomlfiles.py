"""Small TOML input files (job, limits, transform), read with one-line errors."""

from __future__ import annotations

import os

from ..errors import InputError

__all__ = ["read_toml"]


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
