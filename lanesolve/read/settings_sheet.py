"""The Settings sheet: one setting per row, each value checked against the contract."""

from __future__ import annotations

import math

from lanesolve import contract
from lanesolve.contract import CHOICE, FLAG, TEXT
from lanesolve.model.network import Settings
from lanesolve.read.cells import DATE_TYPES
from lanesolve.read.findings import ERROR_VALUE_HINT, FORMULA_HINT, Findings, did_you_mean, header_text, is_blank, show
from lanesolve.read.reader import RawSheet
from lanesolve.read.sheets import match_headers


def read_settings(sheet: RawSheet | None, found: Findings) -> Settings:
    settings = Settings()
    if sheet is None:
        return settings
    spec = contract.SETTINGS
    index_of, headers, complete, _ = match_headers(spec, sheet, found)
    if not complete:
        return settings
    name_at, value_at = index_of["setting"], index_of["value"]
    known = {s.name: s.name for s in contract.SETTINGS_ROWS}
    seen: dict[str, int] = {}
    bad = sheet.bad_cells
    for offset, cells in enumerate(sheet.rows[1:]):
        row = offset + 2
        name_cell = cells[name_at] if name_at < len(cells) else ""
        value_cell = cells[value_at] if value_at < len(cells) else ""
        name_bad, value_bad = bad.get((row, name_at + 1)), bad.get((row, value_at + 1))
        for text, at in ((name_bad, name_at), (value_bad, value_at)):
            if text:
                is_formula = text.endswith("has no saved value")
                found.add(sheet.name, row, headers["setting" if at == name_at else "value"], text,
                          f"the cell's {text}" if is_formula else f"the cell holds the error value {text}",
                          FORMULA_HINT if is_formula else ERROR_VALUE_HINT)
        if name_bad:
            continue
        name_blank = is_blank(name_cell)
        if name_blank:
            if not is_blank(value_cell):
                found.add(sheet.name, row, headers["setting"], None,
                          f"the value {show(value_cell)} has no setting name",
                          "write the setting's name in column 'setting', or delete the row")
            continue
        written = header_text(name_cell)
        try:
            setting = contract.setting_by_name(written)
        except KeyError:
            near = did_you_mean(written, known)
            found.add(sheet.name, row, headers["setting"], name_cell, f"unknown setting {show(written)} is ignored",
                      f"did you mean '{near}'?" if near else
                      "known settings: " + ", ".join(s.name for s in contract.SETTINGS_ROWS), severity="warning")
            continue
        if setting.name in seen:
            found.add(sheet.name, row, headers["setting"], name_cell,
                      f"setting '{setting.name}' is already given in row {seen[setting.name]}",
                      "keep one row per setting")
            continue
        seen[setting.name] = row
        if value_bad:
            continue
        value = setting_value(setting, value_cell, sheet.name, row, headers["value"], found)
        if value is not _INVALID:
            setattr(settings, setting.name, value)
    return settings


_INVALID = object()


def setting_value(setting: contract.Setting, cell, sheet_name, row, column, found: Findings):
    if is_blank(cell):
        return setting.default
    if setting.kind in (FLAG, CHOICE):
        word = (header_text(cell) if not isinstance(cell, bool) else ("yes" if cell else "no")).lower()
        if setting.kind == FLAG and (word in contract.YES or word in contract.NO):
            return word in contract.YES
        if setting.kind == CHOICE and word in setting.choices:
            return word
        allowed = "yes or no" if setting.kind == FLAG else "one of " + ", ".join(setting.choices)
        found.add(sheet_name, row, column, cell, f"{show(cell)} is not {allowed} for setting '{setting.name}'",
                  f"write {allowed}, or leave it blank for the default")
        return _INVALID
    if setting.kind == TEXT:
        if isinstance(cell, float) and cell.is_integer():
            return str(int(cell))
        return show(cell).strip("'") if not isinstance(cell, str) else cell.strip()
    # A number setting. The value column holds text and numbers alike, so text that parses is accepted quietly.
    if isinstance(cell, bool) or isinstance(cell, DATE_TYPES):
        found.add(sheet_name, row, column, cell, f"{show(cell)} is not a number; setting '{setting.name}' "
                  f"needs a number{' (' + setting.unit + ')' if setting.unit else ''}", "enter a number in the cell")
        return _INVALID
    try:
        number = float(cell.strip() if isinstance(cell, str) else cell)
    except (TypeError, ValueError):
        found.add(sheet_name, row, column, cell, f"{show(cell)} is not a number; setting '{setting.name}' "
                  f"needs a number{' (' + setting.unit + ')' if setting.unit else ''}",
                  "enter a number with a point for decimals, or leave it blank for the default")
        return _INVALID
    if not math.isfinite(number):
        found.add(sheet_name, row, column, cell, f"{show(cell)} is not a finite number",
                  f"enter an ordinary number for '{setting.name}', or leave it blank for the default")
        return _INVALID
    if setting.minimum is not None and number < setting.minimum:
        low = "is negative" if number < 0 else "is too small"  # circuity_factor's minimum is 1, not 0
        found.add(sheet_name, row, column, cell, f"{show(cell)} {low}; '{setting.name}' must be "
                  f"{show(float(setting.minimum))} or more",
                  "enter 0 or a positive number" if setting.minimum == 0 else
                  f"enter {show(float(setting.minimum))} or more")
        return _INVALID
    return number

