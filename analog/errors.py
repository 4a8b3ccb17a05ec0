"""The package's one error class and one warning class.

Every problem a user can fix is raised as :class:`InputError` (a ``ValueError``),
carrying one :class:`Problem` per fault so that all faults are reported together.
Recoverable oddities are :class:`AnalogWarning` (a ``UserWarning``) and say what
fallback was taken.
"""
from __future__ import annotations

from dataclasses import dataclass

__all__ = ["AnalogError", "AnalogWarning", "InputError", "Problem", "ProblemList"]


class AnalogError(ValueError):
    """Base class of every error ``analog`` raises on purpose."""


class AnalogWarning(UserWarning):
    """A recoverable problem; the message says what was done instead."""


@dataclass(frozen=True)
class Problem:
    """One fault in the user's input.

    Rendered as ``file:row:column: found ...; expected ...; fix: ...``.
    ``row`` is the 1-based data row as a spreadsheet shows it (header is row 1,
    so the first record is row 2); ``None`` when the fault is not tied to a row.
    """

    file: str
    found: str
    expected: str
    fix: str
    row: int | None = None
    column: str | None = None

    def __str__(self) -> str:
        where = self.file
        where += f":{self.row}" if self.row is not None else ":-"
        where += f":{self.column}" if self.column else ":-"
        return f"{where}: found {self.found}; expected {self.expected}; fix: {self.fix}"


class InputError(AnalogError):
    """Bad input. Holds every :class:`Problem` found, one line each."""

    def __init__(self, problems):
        self.problems = list(problems) if not isinstance(problems, Problem) else [problems]
        super().__init__(self._render())

    def _render(self) -> str:
        n = len(self.problems)
        head = f"{n} problem{'s' if n != 1 else ''} in the input:"
        return "\n".join([head] + [str(p) for p in self.problems])


class ProblemList(list):
    """Collects problems; ``raise_if_any()`` raises them together."""

    def add(self, file, found, expected, fix, row=None, column=None):
        self.append(Problem(str(file), str(found), str(expected), str(fix), row, column))

    def raise_if_any(self):
        if self:
            raise InputError(list(self))
