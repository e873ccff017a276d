"""Collecting input problems and showing cell values in messages, shared by the validate modules."""

from __future__ import annotations

import difflib

import numpy as np

from lanesolve import contract
from lanesolve.errors import Problem

FORMULA_HINT = ("open the file in a spreadsheet program and save it, so formula results are stored, "
                 "or type the value in")
ERROR_VALUE_HINT = "fix the cell or the cells its formula uses so it shows a proper value, or type the value in"


class Findings(list):
    """Problems in the order found; :meth:`sorted` puts them in sheet order, then row order."""

    def add(self, sheet, row, column, value, message, hint="", severity="error"):
        self.append(Problem(sheet, None if row is None else int(row), column, plain(value), message, hint,
                            severity))

    def sorted(self, severity: str) -> list[Problem]:
        order = {contract.normalize(spec.name): i for i, spec in enumerate(contract.INPUT_SHEETS)}

        def key(p: Problem):
            sheet = -1 if p.sheet is None else order.get(contract.normalize(p.sheet), len(order))
            return sheet, -1 if p.row is None else p.row

        # Stable sort: within a sheet and row, problems keep the order the checks found them.
        return sorted((p for p in self if p.severity == severity), key=key)


def plain(value):
    """Numpy scalars to Python, so problems print and serialise plainly."""
    if isinstance(value, np.generic):
        return value.item()
    return value


def show(value) -> str:
    """A cell value as a planner would recognise it in a message (:func:`lanesolve.contract.show_cell`)."""
    return contract.show_cell(value)


def as_number(value) -> float:
    """A cell already known to parse as a number (a number, or numeric text possibly with thousands commas)."""
    return float(value.strip().replace(",", "")) if isinstance(value, str) else float(value)


def did_you_mean(word: str, candidates: dict[str, str], cutoff: float = 0.6) -> str | None:
    """The written form of the candidate whose normalised form is closest to ``normalize(word)`` (difflib)."""
    close = difflib.get_close_matches(contract.normalize(word), list(candidates), n=1, cutoff=cutoff)
    return candidates[close[0]] if close else None



def is_blank(cell) -> bool:
    return cell is None or (isinstance(cell, str) and not cell.strip())



def header_text(cell) -> str:
    if isinstance(cell, float) and cell.is_integer():
        return str(int(cell))
    return "" if cell is None else str(cell).strip()

