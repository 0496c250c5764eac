"""Errors that the command line turns into one line on stderr and exit status 2."""

from __future__ import annotations

__all__ = ["InputError", "one_line", "OutputExistsError"]


class InputError(ValueError):
    """A bad input: names the file (or key, or flag) and the problem in one line.

    >>> str(InputError("blade.stl", "open surface: 12 boundary edges"))
    'blade.stl: open surface: 12 boundary edges'
    """

    def __init__(self, source: str, problem: str):
        self.source = one_line(source, 300)
        self.problem = one_line(problem, 600)
        super().__init__(f"{self.source}: {self.problem}")


def one_line(text, limit: int = 600) -> str:
    r"""Text made safe for a one-line message: control characters shown as escapes, runs of
    white space folded, and long text shortened in the middle.

    >>> one_line("a\nb\x1b[31m  c")
    'a b\\x1b[31m c'
    >>> len(one_line("x" * 10_000, 50)) <= 50
    True
    """
    s = str(text)
    s = "".join(ch if ch.isprintable() or ch in " \t\n\r" else ascii(ch)[1:-1] for ch in s)
    s = " ".join(s.split())
    if len(s) > limit:
        keep = (limit - 5) // 2
        s = f"{s[:keep]} ... {s[-keep:]}"
    return s


class OutputExistsError(InputError):
    """An output file or folder exists already and ``--force`` was not given."""

    def __init__(self, path: str):
        super().__init__(path, "exists already; give --force to overwrite it")
