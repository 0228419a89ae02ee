"""One exception type for mistakes in the user's input files.

Every problem is one line that says where (file, row as a spreadsheet or editor shows it, column or
key), what is wrong and what is allowed, e.g.::

    catalogs/magnets.csv: row 5, column width_mm: must be > 0 mm (got -3)

Loaders collect all problems of a file set before raising, so the user fixes them in one pass.
"""
from __future__ import annotations

import difflib
from dataclasses import dataclass
from typing import Iterable

__all__ = ["Problem", "InputError", "did_you_mean"]


@dataclass(frozen=True)
class Problem:
    """A single defect in an input file.

    ``row`` is the 1-based line number in the file (header and comment lines counted), or None
    when the problem concerns the whole file. ``column`` is the column (CSV) or key (TOML) name, or
    None. ``row_label``/``column_label`` let TOML files say "line"/"key" instead.
    """

    file: str
    row: int | None
    column: str | None
    message: str
    row_label: str = "row"
    column_label: str = "column"

    def __str__(self) -> str:
        where = []
        if self.row is not None:
            where.append(f"{self.row_label} {self.row}")
        if self.column is not None:
            where.append(f"{self.column_label} {self.column}")
        prefix = f"{self.file}: " + (", ".join(where) + ": " if where else "")
        return prefix + self.message

    def as_dict(self) -> dict:
        return {"file": self.file, "row": self.row, "column": self.column, "message": self.message}


class InputError(Exception):
    """Raised with every problem found in the user's input; the CLI prints them and exits 2."""

    def __init__(self, problems: Iterable[Problem]):
        self.problems = list(problems)
        super().__init__("\n".join(str(p) for p in self.problems))


def did_you_mean(word: str, allowed: Iterable[str]) -> str:
    """Suffix for an 'unknown name' message: a close match if there is one, else the allowed list."""
    allowed = list(allowed)
    close = difflib.get_close_matches(word, allowed, n=1, cutoff=0.6)
    if close:
        return f"did you mean {close[0]}?"
    return "allowed: " + ", ".join(allowed)
