"""Exceptions raised by lanesolve.

Every exception the library raises on purpose derives from :class:`LanesolveError`; the CLI catches that root
only, so anything else is a bug and shows its traceback.

- :class:`WorkbookError` -- the workbook has input errors (exit code 1). Carries every :class:`Problem` found.
- :class:`NoPlanError` -- the input is well formed but no feasible plan exists (exit code 3).
- :class:`SolverError` -- the solver failed to run or returned nothing usable (exit code 4).
- :class:`WriteError` -- results could not be written; the original workbook is untouched (exit code 1).
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Problem:
    """One finding about the input workbook.

    Parameters
    ----------
    sheet : str or None
        Sheet name as the user sees it (``None`` for whole-file problems).
    row : int or None
        Spreadsheet row number, 1-based as shown in the spreadsheet program (row 1 holds the headers).
    column : str or None
        Column header as written in the workbook (or the contract name when the column is missing).
    value : object
        The offending value, or ``None``.
    message : str
        What is wrong, in plain words.
    hint : str
        How to fix it (may be empty).
    severity : str
        ``"error"`` (blocks the solve) or ``"warning"`` (accepted, but worth a look).
    """

    sheet: str | None
    row: int | None
    column: str | None
    value: object
    message: str
    hint: str = ""
    severity: str = "error"

    def __str__(self) -> str:
        where = []
        if self.sheet:
            where.append(self.sheet)
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.column:
            where.append(f"column {self.column}")
        text = " ".join(where[:1]) + (" " + ", ".join(where[1:]) if len(where) > 1 else "")
        text = f"{text}: {self.message}" if text else self.message
        if self.hint:
            text += f" ({self.hint})"
        return text


class LanesolveError(Exception):
    """Root of every exception lanesolve raises on purpose."""

    exit_code = 1


class WorkbookError(LanesolveError):
    """The workbook cannot be used as it is; ``problems`` lists every error found in one pass."""

    exit_code = 1

    def __init__(self, problems: list[Problem] | Problem | str, warnings: list[Problem] | None = None):
        if isinstance(problems, str):
            problems = [Problem(None, None, None, None, problems)]
        elif isinstance(problems, Problem):
            problems = [problems]
        self.problems = list(problems)
        self.warnings = list(warnings or [])
        super().__init__("\n".join(str(p) for p in self.problems))


class NoPlanError(LanesolveError):
    """No feasible plan exists; ``reasons`` says why in plain words, ``diagnosis`` holds detail if computed."""

    exit_code = 3

    def __init__(self, reasons: list[str], result=None):
        self.reasons = list(reasons)
        self.result = result
        super().__init__("; ".join(self.reasons) or "no feasible plan")


class SolverError(LanesolveError):
    """The solver could not be run or returned no usable answer."""

    exit_code = 4


class WriteError(LanesolveError):
    """Results could not be written; the original workbook is left as it was."""

    exit_code = 1
