"""The Settings sheet: one setting per row, each value checked against the contract."""

from __future__ import annotations

from lanesolve import contract
from lanesolve.model.network import Settings
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
            alike = max(contract.SETTINGS_ROWS, key=lambda s: contract.resemblance(written, s.name))
            if contract.resemblance(written, alike.name) > 0:
                # Ignoring it would silently leave the setting at its default (a misspelt unmet_penalty makes
                # every demand hard), so it is an error like a look-alike header.
                found.add(sheet.name, row, headers["setting"], name_cell,
                          f"setting {show(written)} is not one lanesolve knows, but it looks like '{alike.name}'; "
                          f"as written it would be ignored",
                          f"rename it to '{alike.name}'; units belong in the rows units and currency")
                continue
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
    """The setting's value from its cell (:func:`lanesolve.contract.setting_value`), or ``_INVALID`` after reporting
    the problem at the cell."""
    value, problem = contract.setting_value(setting, cell)
    if problem is None:
        return value
    found.add(sheet_name, row, column, cell, *problem)
    return _INVALID
