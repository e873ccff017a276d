"""Shared test fixtures: tiny workbooks written into ``tmp_path`` from plain rows.

``write_workbook(path, {"Depots": [["depot", "supply"], ["D1", 10]], ...})`` writes one sheet per key with openpyxl,
rows appended from row 1. Use ``None`` for an empty cell. A string starting with ``=`` becomes a formula with no saved
value (openpyxl never calculates), and ``"#N/A"`` an error cell -- both what the reader must detect.
"""

from __future__ import annotations

import copy
from pathlib import Path

import openpyxl
import pytest


def write_workbook(path: str | Path, sheets: dict[str, list[list]], hidden: tuple[str, ...] = ()) -> Path:
    """Write a workbook with one sheet per entry of ``sheets`` (rows from row 1) and return its path.

    Parameters
    ----------
    path : path-like
        Where to write (.xlsx or .xlsm).
    sheets : dict
        Sheet name -> list of rows, each a list of cell values (``None`` leaves a cell empty).
    hidden : tuple of str
        Names of sheets to mark hidden.
    """
    path = Path(path)
    book = openpyxl.Workbook()
    book.remove(book.active)
    for name, rows in sheets.items():
        sheet = book.create_sheet(name)
        for row in rows:
            sheet.append(list(row))
        if name in hidden:
            sheet.sheet_state = "hidden"
    book.save(path)
    return path


#: A small valid network: two depots, a hub, two customers, five lanes and two settings. Invented data.
VALID_SHEETS: dict[str, list[list]] = {
    "Depots": [
        ["depot", "supply", "handling_cost", "latitude", "longitude"],
        ["North Yard", 100, 1.5, 52.1, 4.3],
        ["South Yard", 80, None, None, None],
    ],
    "Customers": [
        ["customer", "demand", "unmet_penalty"],
        ["Alder Foods", 60, 50],
        ["Birch Market", 70, None],
    ],
    "Hubs": [
        ["hub", "capacity", "handling_cost"],
        ["Midway", 90, 0.5],
    ],
    "Lanes": [
        ["origin", "destination", "cost_per_unit", "mode", "capacity", "fixed_cost", "active"],
        ["North Yard", "Midway", 2.0, "road", 90, None, "yes"],
        ["South Yard", "Midway", 2.5, None, None, 100, None],
        ["Midway", "Alder Foods", 1.0, "road", None, None, "yes"],
        ["Midway", "Birch Market", 1.2, "rail", 50, None, "no"],
        ["South Yard", "Birch Market", 3.0, "road", None, None, "y"],
    ],
    "Settings": [
        ["setting", "value"],
        ["units", "pallets"],
        ["time_limit_s", 30],
    ],
}


def valid_sheets() -> dict[str, list[list]]:
    """A deep copy of :data:`VALID_SHEETS`, safe to edit in a test."""
    return copy.deepcopy(VALID_SHEETS)


@pytest.fixture
def make_workbook(tmp_path):
    """Factory: ``make_workbook(sheets, name="book.xlsx", hidden=())`` writes into ``tmp_path``, returns the path."""

    def make(sheets: dict[str, list[list]], name: str = "book.xlsx", hidden: tuple[str, ...] = ()) -> Path:
        return write_workbook(tmp_path / name, sheets, hidden=hidden)

    return make
