"""Exception hierarchy of rateabs.

Every error the user can cause maps to one exit code of the command-line tool, and carries
enough context (file, row, column, what to do) to be printed as a single line.

Exit codes: 0 success, 1 internal error, 2 usage error (bad option), 3 bad input file,
4 analysis not possible (no fit could be made from the data), 5 a run over many files (or
groups) finished but some of them failed: their rows say why, the others were written
(:data:`SOME_FAILED`).
"""

from __future__ import annotations

#: Exit code of a many-file (or many-group) run in which some items failed and the rest were
#: written; each failed item has a row that says why.
SOME_FAILED = 5


class RateabsError(Exception):
    """Base class of all errors raised on purpose by rateabs."""

    exit_code = 1

    def __init__(self, problem: str, fix: str = "", *, file: str | None = None,
                 row: int | None = None, column: str | int | None = None) -> None:
        self.problem = problem
        self.fix = fix
        self.file = file
        self.row = row
        self.column = column
        super().__init__(self.one_line())

    def where(self) -> str:
        """The location part of the message, e.g. ``plate.csv: row 12, column B3``."""
        parts = []
        loc = []
        if self.row is not None:
            loc.append(f"row {self.row}")
        if self.column is not None:
            loc.append(f"column {self.column}")
        if self.file:
            parts.append(str(self.file))
        if loc:
            parts.append(", ".join(loc))
        return ": ".join(parts)

    def one_line(self) -> str:
        """The message as one line: ``FILE: row N, column C: what is wrong; what to do``."""
        text = self.problem
        if self.fix:
            text = f"{text}; {self.fix}"
        where = self.where()
        return f"{where}: {text}" if where else text

    def located(self, file: str) -> RateabsError:
        """Return the same error with the file name filled in (if it was missing)."""
        if self.file is None:
            self.file = file
            self.args = (self.one_line(),)
        return self


class UsageError(RateabsError):
    """An option or argument has a value the tool cannot use."""

    exit_code = 2


class InputError(RateabsError):
    """An input file cannot be read as kinetic data."""

    exit_code = 3


class UnitError(UsageError):
    """A quantity string has a unit that does not fit, or no number."""


class AnalysisError(RateabsError):
    """The data are readable but do not support the requested analysis."""

    exit_code = 4


class FitError(AnalysisError):
    """A fit failed or its parameters are not identifiable from the data."""
