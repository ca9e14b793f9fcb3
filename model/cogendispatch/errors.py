"""Exceptions the command line turns into clear messages and exit codes."""

from __future__ import annotations

from pathlib import Path


class InputError(ValueError):
    """Bad input: names the file and the place in it. The command line exits with code 2."""

    def __init__(self, path: str | Path | None, where: str, message: str) -> None:
        self.path = str(path) if path is not None else None
        self.where = where
        self.message = message
        super().__init__(str(self))

    def __str__(self) -> str:
        head = f"{self.path}: " if self.path else ""
        place = f"{self.where}: " if self.where else ""
        return f"{head}{place}{self.message}"


class InputErrors(InputError):
    """Several problems found in one file; each is reported."""

    def __init__(self, problems: list[InputError]) -> None:
        self.problems = problems
        first = problems[0]
        super().__init__(first.path, first.where, first.message)

    def __str__(self) -> str:
        return "\n".join(InputError.__str__(p) for p in self.problems)


class SolveError(RuntimeError):
    """The solver returned no usable schedule (e.g. time limit hit with no incumbent)."""
