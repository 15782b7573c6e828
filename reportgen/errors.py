"""Errors the command line reports with exit status 2."""
from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class InputProblem:
    """One thing wrong with the input, phrased for the person who must fix it."""

    file: str  # relative to the project folder, e.g. "results/day1.csv"
    line: int | None  # line as an editor shows it (CSV header = line 1)
    field: str | None  # column name or YAML key path, e.g. "testing.reference_method"
    expected: str  # what would have been accepted
    found: str | None = None
    # a spreadsheet's sheet: then ``line`` is the sheet's row number, shown as "row"
    sheet: str | None = None

    def __str__(self) -> str:
        place = self.line and (f"row {self.line}" if self.sheet is not None else f"line {self.line}")
        sheet = self.sheet is not None and f"sheet {self.sheet}"
        where = ", ".join(part for part in (self.file, sheet, place, self.field) if part)
        found = f" (got {self.found!r})" if self.found is not None else ""
        return f"{where}: expected {self.expected}{found}"


class ReportgenError(Exception):
    """Any failure the command line reports with exit status 2."""


class InputError(ReportgenError):
    """The project folder cannot be used; holds every problem found, in file order."""

    def __init__(self, problems: list[InputProblem]) -> None:
        super().__init__(f"{len(problems)} problem(s) in the project folder")
        self.problems = problems


class WorkerTraceback(Exception):
    """The traceback of a failed worker, as text: the cause of the error the parent raises.

    Raised from by the PDF stage (local worker processes, cluster workers). The command
    line prints it with ``--debug`` (after the error's own traceback's
    "direct cause" line); without, only the error's one-line message is shown.
    """

    def __str__(self) -> str:
        return "\n" + str(self.args[0]).rstrip()
