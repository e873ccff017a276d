"""The blank workbook a planner starts from (``lanesolve template PATH``).

Everything here is derived from :mod:`lanesolve.contract` -- the sheets of :data:`~lanesolve.contract.INPUT_SHEETS`
with their columns in contract order, and the rows of :data:`~lanesolve.contract.SETTINGS_ROWS` -- so the template
cannot drift from what the reader accepts. The workbook holds:

- a "Guide" sheet first: the steps to run and, for every sheet and column, whether it is required, its unit,
  its default and its meaning;
- one sheet per input sheet with the headers in row 1 (frozen), a comment on each header (meaning, unit,
  default), number formats on numeric columns and a drop-down on every choice column (yes/no flags, node status);
- the Settings sheet prefilled with every setting and its default (blank where there is none), with a drop-down on
  the value of every choice setting (``solver``, ``distance_unit``, yes/no settings);
- a Scenarios sheet with two example what-ifs that work on any network (they change every row, ``*``), and
  drop-downs on its ``sheet``, ``column`` and ``change`` columns.
"""

from __future__ import annotations

import os
from pathlib import Path

from openpyxl import Workbook
from openpyxl.comments import Comment
from openpyxl.styles import Alignment, Border, Font, PatternFill, Side
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.datavalidation import DataValidation

from lanesolve.write import atomic
from lanesolve.write import paths
from lanesolve import contract
from lanesolve.errors import WriteError
from lanesolve.model import scenarios

GUIDE_SHEET = "Guide"

#: Number formats by unit; a column's format follows from its contract unit.
MONEY_FORMAT = "#,##0.00"
QUANTITY_FORMAT = "#,##0.##"
DEGREES_FORMAT = "0.000000"  # six decimals of a degree is about 0.1 m: more than a map needs, never too coarse

#: Rows the yes/no drop-down covers; whole columns make some spreadsheet programs slow, 10,000 lanes is plenty.
VALIDATION_ROWS = 10_000

_INK = "1E3A34"
_HEADER_FILL = PatternFill("solid", fgColor="D8E6DF")
_REQUIRED_FILL = PatternFill("solid", fgColor="B9D3C7")
_HEADER_FONT = Font(bold=True, color=_INK)
_TITLE_FONT = Font(bold=True, size=14, color=_INK)
_SECTION_FONT = Font(bold=True, size=12, color=_INK)
_RULE = Border(bottom=Side(style="medium", color="5B8C7B"))
_WRAP = Alignment(wrap_text=True, vertical="top")

_KIND_WORDS = {
    contract.ID: "id (text)",
    contract.NUMBER: "number",
    contract.FLAG: "yes / no",
    contract.TEXT: "text",
    contract.CHOICE: "one of a list",
}


def number_format_for(unit: str) -> str:
    """The cell number format for a numeric column with contract unit ``unit``.

    >>> number_format_for("currency per unit")
    '#,##0.00'
    >>> number_format_for("units")
    '#,##0.##'
    """
    if "currency" in unit:
        return MONEY_FORMAT
    if unit == "degrees":
        return DEGREES_FORMAT
    return QUANTITY_FORMAT


def _default_text(value: object) -> str:
    if value is None:
        return "none"
    if value is True:
        return "yes"
    if value is False:
        return "no"
    if value == "":
        return "blank"
    if isinstance(value, float):
        return f"{value:g}"  # 60.0 reads as 60, 1e-4 as 0.0001
    return str(value)


def column_note(column: contract.Column) -> str:
    """Header comment text for one contract column: meaning, required or optional, kind, unit, default."""
    lines = [column.doc or column.name, ""]
    lines.append("Required." if column.required else "Optional.")
    lines.append(f"Type: {_KIND_WORDS.get(column.kind, column.kind)}.")
    if column.choices:
        lines.append("Choices: " + ", ".join(column.choices) + ".")
    if column.unit:
        lines.append(f"Unit: {column.unit}.")
    if column.minimum is not None or column.maximum is not None:
        low = "" if column.minimum is None else f"at least {column.minimum:g}"
        high = "" if column.maximum is None else f"at most {column.maximum:g}"
        lines.append("Range: " + " and ".join(p for p in (low, high) if p) + ".")
    if not column.required:
        lines.append(f"Default: {_default_text(column.default)}.")
    return "\n".join(lines)


def setting_note(setting: contract.Setting) -> str:
    """Comment text for one Settings row: meaning, unit, default."""
    lines = [setting.doc, ""]
    if setting.unit:
        lines.append(f"Unit: {setting.unit}.")
    lines.append(f"Default: {_default_text(setting.default)}.")
    return "\n".join(lines)


def _comment(text: str) -> Comment:
    note = Comment(text, "lanesolve")
    # Size the box to the text so the whole note shows on hover (openpyxl's default box is tiny).
    note.width = 320
    note.height = 40 + 18 * (text.count("\n") + len(text) // 45)
    return note


def _column_width(column: contract.Column) -> float:
    # Wide enough for the header, and for ids and money amounts typed below it.
    return max(len(column.name) + 4, 14 if column.kind in (contract.ID, contract.NUMBER) else 10)


def _dropdown(ws, cells: str, choices: tuple[str, ...] | list[str], title: str, hint: str) -> None:
    """A list drop-down on ``cells``; typing anything else is refused with ``hint``.

    The choices go inline in the validation (a quoted comma list), which spreadsheet programs limit to 255
    characters (common practice, recalled from memory); every list here is shorter, and a test checks it.
    """
    formula = '"' + ",".join(choices) + '"'
    if len(formula) > 257:
        raise ValueError(f"drop-down list for {title} is longer than 255 characters")
    choice = DataValidation(type="list", formula1=formula, allow_blank=True, showDropDown=False,
                            showErrorMessage=True, errorTitle=title[:32], error=hint)
    choice.add(cells)
    ws.add_data_validation(choice)


def _add_input_sheet(book: Workbook, sheet: contract.Sheet) -> None:
    ws = book.create_sheet(sheet.name)
    for index, column in enumerate(sheet.columns, start=1):
        cell = ws.cell(row=1, column=index, value=column.name)
        cell.font = _HEADER_FONT
        cell.fill = _REQUIRED_FILL if column.required else _HEADER_FILL
        cell.border = _RULE
        cell.comment = _comment(column_note(column))
        letter = get_column_letter(index)
        dimension = ws.column_dimensions[letter]
        dimension.width = _column_width(column)
        if column.kind == contract.NUMBER:
            # A column style: a spreadsheet program applies it to every value typed into the column later.
            dimension.number_format = number_format_for(column.unit)
        cells = f"{letter}2:{letter}{VALIDATION_ROWS + 1}"
        if column.kind == contract.FLAG:
            _dropdown(ws, cells, ("yes", "no"), f"{sheet.name}: {column.name}",
                      f"Type yes or no (blank means {_default_text(column.default)}).")
        elif column.kind == contract.CHOICE and column.choices:
            _dropdown(ws, cells, column.choices, f"{sheet.name}: {column.name}",
                      f"Choose one of {', '.join(column.choices)} (blank means {_default_text(column.default)}).")
    ws.freeze_panes = "A2"


def _fill_settings(book: Workbook) -> None:
    ws = book[contract.SETTINGS.name]
    for row, setting in enumerate(contract.SETTINGS_ROWS, start=2):
        name = ws.cell(row=row, column=1, value=setting.name)
        name.comment = _comment(setting_note(setting))
        # Blank where there is no default (None) or the default is empty text: a blank value means "default".
        value = None if setting.default in (None, "") else setting.default
        cell = ws.cell(row=row, column=2, value=value)
        if setting.kind == contract.NUMBER:
            cell.number_format = "General"  # 0.0001 and 60 both read best unformatted
        choices = ("yes", "no") if setting.kind == contract.FLAG else setting.choices
        if choices:
            _dropdown(ws, f"B{row}", choices, f"Settings: {setting.name}",
                      f"Choose one of {', '.join(choices)} (blank means {_default_text(setting.default)}).")
    ws.column_dimensions["A"].width = max(len(s.name) for s in contract.SETTINGS_ROWS) + 4
    ws.column_dimensions["B"].width = 16


#: The example rows of the template's Scenarios sheet: they change every row (``*``), so they run on any network.
EXAMPLE_SCENARIOS = (
    ("peak season", "Customers", "*", "demand", "scale", 1.2),
    ("diesel up 8 %", "Lanes", "*", "cost_per_unit", "scale", 1.08),
)

SCENARIO_NOTES = {
    "scenario": "Name of the what-if (any text but 'baseline'). Rows with the same name build one scenario; its "
                "changes apply in row order to a copy of the workbook.",
    "sheet": "The sheet the row changes: " + ", ".join(n for n in ("Depots", "Customers", "Hubs", "Lanes",
                                                                     "Settings")) + ".",
    "match": "Which rows: an id, a comma list of ids, or * for all. On Lanes origin>destination (every mode) or "
             "origin>destination>mode; on Settings the setting's name.",
    "column": "The number or yes/no column to change (demand, capacity, cost_per_unit, active, ...); on Settings "
              "value.",
    "change": "set to the value, scale by the value (multiply), or add the value.",
    "value": "A number, or yes/no for set on a yes/no column. A blank set value means what a blank cell means.",
}


def scenario_columns() -> list[str]:
    """Every column a Scenarios row may change: the number and yes/no columns of the node and lane sheets, then
    ``value`` (for Settings)."""
    names: list[str] = []
    for sheet in (*contract.NODE_SHEETS, contract.LANES):
        names += [c.name for c in sheet.columns if c.kind in (contract.NUMBER, contract.FLAG) and c.name not in names]
    return names + ["value"]


def _add_scenarios(book: Workbook) -> None:
    ws = book.create_sheet(scenarios.SHEET)
    for index, name in enumerate(scenarios.HEADERS, start=1):
        cell = ws.cell(row=1, column=index, value=name)
        cell.font = _HEADER_FONT
        cell.fill = _HEADER_FILL
        cell.border = _RULE
        cell.comment = _comment(SCENARIO_NOTES[name])
        ws.column_dimensions[get_column_letter(index)].width = 16 if name != "scenario" else 22
    for row in EXAMPLE_SCENARIOS:
        ws.append(list(row))
    last = VALIDATION_ROWS + 1
    letter = {name: get_column_letter(i) for i, name in enumerate(scenarios.HEADERS, start=1)}
    _dropdown(ws, f"{letter['sheet']}2:{letter['sheet']}{last}", ("Depots", "Customers", "Hubs", "Lanes", "Settings"),
              "Scenarios: sheet", "Choose the sheet the row changes.")
    _dropdown(ws, f"{letter['column']}2:{letter['column']}{last}", scenario_columns(), "Scenarios: column",
              "Choose a number or yes/no column (value on Settings).")
    _dropdown(ws, f"{letter['change']}2:{letter['change']}{last}", scenarios.CHANGES, "Scenarios: change",
              "Choose set, scale or add.")
    ws.freeze_panes = "A2"


def _guide_row(ws, row: int, values: list, font: Font | None = None) -> None:
    for index, value in enumerate(values, start=1):
        cell = ws.cell(row=row, column=index, value=value if value != "" else None)  # no empty-text cells
        cell.alignment = _WRAP
        if font is not None:
            cell.font = font


def _add_guide(book: Workbook) -> None:
    ws = book.create_sheet(GUIDE_SHEET, 0)
    widths = (22, 12, 16, 22, 14, 70)
    for index, width in enumerate(widths, start=1):
        ws.column_dimensions[get_column_letter(index)].width = width
    row = 1
    _guide_row(ws, row, ["lanesolve workbook: how to fill it in"], _TITLE_FONT)
    row += 2
    steps = [
        "Steps",
        "1. Fill in Depots (where goods start), Customers (where they go) and Lanes (how they can move). Hubs "
        "and Settings are optional.",
        "2. One row per record, headers stay in row 1. Extra columns (notes, owner) are allowed and kept. Blank "
        "rows are skipped.",
        "3. Ids must be unique across Depots, Customers and Hubs: lanes name their origin and destination by id.",
        "4. Save the workbook and close it, then run:  lanesolve check WORKBOOK.xlsx  (lists every problem) "
        "and  lanesolve solve WORKBOOK.xlsx .",
        f"5. Results are written back as sheets whose names start with '{contract.RESULT_PREFIX.strip()}' "
        "(a rerun replaces them, other sheets are never touched), and a <name>-summary.html page is written "
        "beside the workbook.",
        "6. Check every plan against vehicle weight limits, driver working-time rules, hazardous-goods rules and "
        "carrier contracts; local regulations and licensed professionals take precedence.",
    ]
    _guide_row(ws, row, [steps[0]], _SECTION_FONT)
    for step in steps[1:]:
        row += 1
        ws.cell(row=row, column=1, value=step)
    row += 2
    headers = ["Column", "Required", "Type", "Unit", "Default", "Meaning"]
    for sheet in contract.INPUT_SHEETS:
        status = "required sheet" if sheet.required else "optional sheet"
        _guide_row(ws, row, [f"Sheet {sheet.name} ({status})"], _SECTION_FONT)
        row += 1
        _guide_row(ws, row, [sheet.doc])
        ws.merge_cells(start_row=row, start_column=1, end_row=row, end_column=len(headers))
        row += 1
        _guide_row(ws, row, headers, _HEADER_FONT)
        for index in range(1, len(headers) + 1):
            ws.cell(row=row, column=index).fill = _HEADER_FILL
        for column in sheet.columns:
            row += 1
            _guide_row(ws, row, [
                column.name,
                "required" if column.required else "optional",
                _KIND_WORDS.get(column.kind, column.kind),
                column.unit,
                "" if column.required else _default_text(column.default),
                column.doc,
            ])
        row += 2
    _guide_row(ws, row, ["Settings rows (sheet Settings, one per row)"], _SECTION_FONT)
    row += 1
    _guide_row(ws, row, ["Setting", "", "Type", "Unit", "Default", "Meaning"], _HEADER_FONT)
    for index in range(1, len(headers) + 1):
        ws.cell(row=row, column=index).fill = _HEADER_FILL
    for setting in contract.SETTINGS_ROWS:
        row += 1
        _guide_row(ws, row, [setting.name, "optional", _KIND_WORDS.get(setting.kind, setting.kind), setting.unit,
                             _default_text(setting.default), setting.doc])
    row += 2
    _guide_row(ws, row, [f"Sheet {scenarios.SHEET} (optional sheet)"], _SECTION_FONT)
    row += 1
    _guide_row(ws, row, ["What-if variants of the workbook, solved beside it (the workbook as given is the "
                         "baseline). Each row changes one column of the matching rows of one sheet; rows with the "
                         "same scenario name build one scenario. The two example rows (peak season: every demand "
                         "x 1.2; diesel up 8 %: every lane cost x 1.08) work on any network: keep, change or "
                         "delete them. lanesolve solve writes the comparison as the sheet LS Scenarios and in the "
                         "summary; --scenario NAME solves only some."])
    ws.merge_cells(start_row=row, start_column=1, end_row=row, end_column=len(headers))
    row += 1
    _guide_row(ws, row, ["Column", "", "", "", "", "Meaning"], _HEADER_FONT)
    for index in range(1, len(headers) + 1):
        ws.cell(row=row, column=index).fill = _HEADER_FILL
    for name in scenarios.HEADERS:
        row += 1
        _guide_row(ws, row, [name, "required" if name != "value" else "optional", "", "", "",
                             SCENARIO_NOTES[name]])
    row += 2
    _guide_row(ws, row, [f"Headers: case, surrounding spaces and spaces versus underscores do not matter "
                         f"('Cost per Unit' reads as cost_per_unit). Workbook contract version "
                         f"{contract.CONTRACT_VERSION}."])


def build_template() -> Workbook:
    """The blank workbook as an openpyxl :class:`~openpyxl.Workbook` (not yet saved).

    Returns
    -------
    openpyxl.Workbook
        Sheets: Guide, then every sheet of :data:`lanesolve.contract.INPUT_SHEETS` in contract order, then
        Scenarios.
    """
    book = Workbook()
    book.remove(book.active)
    for sheet in contract.INPUT_SHEETS:
        _add_input_sheet(book, sheet)
    _fill_settings(book)
    _add_scenarios(book)
    _add_guide(book)
    book.active = 0
    return book


def save_atomically(book: Workbook, path: str | os.PathLike) -> None:
    """Save ``book`` to a temporary file beside ``path``, then move it over ``path`` with :func:`os.replace`.

    Raises
    ------
    WriteError
        The name does not end in .xlsx, or the file cannot be written (folder missing, file open elsewhere).
    """
    path = Path(path)
    if path.suffix.lower() != ".xlsx":
        raise WriteError(f"Cannot write the workbook {path}: the name must end in .xlsx (for example "
                         f"{path.with_suffix('.xlsx').name})")
    with atomic.replacing(path, "the workbook",
                          hint="check that the folder exists and the file is not open in a spreadsheet program") \
            as handle:
        book.save(handle)


def write_template(path: str | os.PathLike, force: bool = False) -> None:
    """Write the blank workbook to ``path`` (atomically; through a symbolic link to the file it names).

    Parameters
    ----------
    path : path-like
        Where to write; must end in .xlsx.
    force : bool
        Replace an existing file (``--force``); without it an existing file is refused, since it may be a filled
        workbook.

    Raises
    ------
    WriteError
        The file exists and ``force`` is false; it is read-only, a folder or a pipe; or it cannot be written.

    Examples
    --------
    >>> import tempfile, pathlib, openpyxl
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "blank.xlsx"
    >>> write_template(target)
    >>> openpyxl.load_workbook(target).sheetnames
    ['Guide', 'Depots', 'Customers', 'Hubs', 'Lanes', 'Carriers', 'Rate breaks', 'Settings', 'Scenarios']
    """
    if Path(path).suffix.lower() == ".xlsx":  # a wrong suffix gets save_atomically's own message
        path = paths.check_new_file(path, "the template", "template", force).real
    save_atomically(build_template(), path)
