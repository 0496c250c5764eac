"""Errors that the command line turns into one line on stderr and exit status 2."""

from __future__ import annotations


class InputError(ValueError):
    """A bad input: names the file (or key, or flag) and the problem in one line.

    >>> str(InputError("blade.stl", "open surface: 12 boundary edges"))
    'blade.stl: open surface: 12 boundary edges'
    """

    def __init__(self, source: str, problem: str):
        self.source = str(source)
        self.problem = " ".join(str(problem).split())  # always one line
        super().__init__(f"{self.source}: {self.problem}")


class OutputExistsError(InputError):
    """An output file or folder exists already and ``--force`` was not given."""

    def __init__(self, path: str):
        super().__init__(path, "exists already; give --force to overwrite it")
