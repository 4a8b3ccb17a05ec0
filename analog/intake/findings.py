"""Collect every problem, warning and dropped record found while reading a study.

Intake never stops at the first fault: each check adds to one :class:`Findings`
object and ``load_study`` raises all problems together at the end.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import ProblemList

__all__ = ["Findings", "MAX_LINES", "show"]

# Lines listed per (file, column, rule) before a single "... and N more rows" line.
MAX_LINES = 20


def show(value, width: int = 60) -> str:
    """A value as it appears in a message: quoted, shortened, blank made visible."""
    if value is None or (isinstance(value, float) and np.isnan(value)) or value is pd.NA:
        return "a blank cell"
    text = str(value)
    if len(text) > width:
        text = text[: width - 1] + "…"
    return repr(text)


def _row_list(rows, limit: int = 10) -> str:
    rows = list(rows)
    head = ", ".join(str(r) for r in rows[:limit])
    return head + (f" and {len(rows) - limit} more" if len(rows) > limit else "")


@dataclass
class Findings:
    """Problems (errors), warnings and dropped-record notes from one intake run."""

    problems: ProblemList = field(default_factory=ProblemList)
    warnings: list[str] = field(default_factory=list)
    dropped: list[dict] = field(default_factory=list)

    # -- single problems ---------------------------------------------------------------
    def add(self, file, found, expected, fix, *, row=None, column=None):
        self.problems.add(file, found, expected, fix, row=row, column=column)

    def warn(self, message: str):
        if message not in self.warnings:
            self.warnings.append(message)

    def drop(self, role: str, reason: str, count: int, examples):
        self.dropped.append({"role": role, "reason": reason, "count": int(count),
                             "examples": "; ".join(str(e) for e in list(examples)[:10])})

    # -- many rows with the same fault -------------------------------------------------
    def rows(self, file, column, rows, found, expected, fix, *, limit: int = MAX_LINES):
        """One problem per row for the first ``limit`` rows, then one summary line.

        Parameters
        ----------
        rows : array-like of int
            Spreadsheet row numbers (header = row 1), already in file order.
        found : array-like of str, or str
            What each row holds (aligned with ``rows``), or one text for all rows.
        """
        rows = np.asarray(rows)
        n = len(rows)
        if n == 0:
            return
        head = rows[:limit]
        if isinstance(found, str):
            texts = [found] * len(head)
        else:
            texts = list(found[:limit])
        for r, text in zip(head, texts):
            self.add(file, text, expected, fix, row=int(r), column=column)
        if n > limit:
            self.add(file, f"... and {n - limit} more rows with the same fault "
                     f"(rows {_row_list(rows[limit:], 5)})", expected, fix, column=column)

    def row_warning(self, text: str, rows) -> str:
        """Warning text naming a few rows; returns the text after recording it."""
        rows = list(rows)
        message = f"{text} (row{'s' if len(rows) != 1 else ''} {_row_list(rows)})"
        self.warn(message)
        return message

    def dropped_frame(self) -> pd.DataFrame:
        return pd.DataFrame(self.dropped, columns=["role", "reason", "count", "examples"]).astype(
            {"count": "int64"})
