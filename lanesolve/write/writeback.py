"""Write the result sheets back into the workbook, at the zip level, without touching anything else.

A workbook (.xlsx, .xlsm) is a zip of XML parts. Loading it into a spreadsheet library and saving it again rewrites
every part and drops what the library does not model (charts' finer formatting, images, slicers, shapes), and is slow
for large lane sheets. This module instead

1. copies every member of the source zip unchanged (the same uncompressed bytes), except the parts that belong to
   earlier result sheets (sheets whose name starts with :data:`lanesolve.contract.RESULT_PREFIX`): their worksheet
   part, its relationships part and its table parts are dropped;
2. edits the four index parts as text, with targeted edits only -- ``xl/workbook.xml`` (the ``<sheets>`` list,
   ``localSheetId`` of defined names, ``activeTab``/``firstSheet``), ``xl/_rels/workbook.xml.rels``,
   ``[Content_Types].xml`` and ``docProps/app.xml`` (sheet titles and counts, when present and well formed).
   They are never round-tripped through an XML library, which would rename namespace prefixes and break
   ``mc:Ignorable`` (a spreadsheet program then refuses the file);
3. adds one worksheet part and one table part per result sheet. Text is written as inline strings, so
   ``xl/sharedStrings.xml`` and ``xl/styles.xml`` stay byte-identical and text that looks like a formula
   (``=SUM(A1)``) can only ever be text. Looks come from a built-in table style (banded rows, header row with
   filter buttons), column widths sized to the content and a frozen header row; numbers are rounded for reading
   (money 2 decimals, quantities 4, percentages 1) instead of carrying a number format, since a number format
   would need a new entry in ``styles.xml``.

The sheets themselves are built in :mod:`lanesolve.write.tables` (what goes in them) and
:mod:`lanesolve.write.sheetxml` (their XML); the index edits of step 2 are in :mod:`lanesolve.write.zipindex`.
This module holds the zip splice and re-exports the public names of the other three.
"""

from __future__ import annotations

import posixpath
import shutil
import time
import zipfile
from pathlib import Path

from lanesolve.write import atomic
from lanesolve.contract import RESULT_PREFIX
from lanesolve.errors import WriteError
from lanesolve.write.tables import (  # noqa: F401  (re-exported: the public names of the result sheets)
    CAUTION, COST_WORDS, DECIMALS, DESIGN_SHEET, FIGURE_WORDS, FLOWS_SHEET, KINDS, MAX_REDUCED_COST_ROWS, NO_LIMIT,
    NODES_SHEET, SCENARIOS_SHEET, SENSITIVITY_SHEET, SUMMARY_SHEET, TRIPS_SHEET, WHY_SHEET, ResultSheet, cost_keys,
    design_sheet, frame_sheet, insight_sheets, result_sheets, scenario_sheet, sensitivity_sheet, trips_sheet,
    why_no_plan_sheet)
from lanesolve.write.sheetxml import (  # noqa: F401  (sheet_xml and table_xml are looked up here, at call time)
    _FORBIDDEN_CHARS, REL_NS, TABLE_STYLE, _attributes, _header_names, _rels_path, _table_name, _tags, sheet_xml,
    table_xml)
from lanesolve.write.zipindex import (
    _edit_app, _edit_content_types, _edit_rels, _edit_workbook, _parse_rels, _SheetEntry)

__all__ = [
    "CAUTION", "COST_WORDS", "DECIMALS", "DESIGN_SHEET", "FIGURE_WORDS", "FLOWS_SHEET", "KINDS",
    "MAX_REDUCED_COST_ROWS", "NO_LIMIT", "NODES_SHEET", "SCENARIOS_SHEET", "SENSITIVITY_SHEET", "SUMMARY_SHEET",
    "TABLE_STYLE", "TRIPS_SHEET", "WHY_SHEET", "ResultSheet", "cost_keys", "design_sheet", "frame_sheet",
    "insight_sheets", "result_sheets", "scenario_sheet", "sensitivity_sheet", "sheet_xml", "table_xml",
    "trips_sheet", "why_no_plan_sheet", "write_results",
]

MAX_SHEET_NAME = 31  # the spreadsheet programs' limit on a sheet name's length
FORBIDDEN_IN_SHEET_NAME = set('[]:*?/\\')

WORKSHEET_REL = REL_NS[0] + "/worksheet"
TABLE_REL = REL_NS[0] + "/table"
WORKSHEET_TYPE = "application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"
TABLE_TYPE = "application/vnd.openxmlformats-officedocument.spreadsheetml.table+xml"
MACRO_MAIN_TYPE = "application/vnd.ms-excel.sheet.macroEnabled.main+xml"

WORKBOOK = "xl/workbook.xml"
CONTENT_TYPES = "[Content_Types].xml"
APP = "docProps/app.xml"


def _check_sheets(sheets: list[ResultSheet]) -> None:
    seen: set[str] = set()
    for sheet in sheets:
        name = sheet.name
        hint = "result sheet names start with the prefix, have at most 31 characters and none of [ ] : * ? / \\"
        if (not name.startswith(RESULT_PREFIX) or len(name) > MAX_SHEET_NAME
                or FORBIDDEN_IN_SHEET_NAME & set(name) or name.startswith("'") or name.endswith("'")
                or _FORBIDDEN_CHARS.search(name)):
            raise WriteError(f"cannot write a result sheet named {name!r} ({hint}; prefix {RESULT_PREFIX!r})")
        if name.lower() in seen:
            raise WriteError(f"two result sheets are named {name!r} (sheet names must differ, ignoring case)")
        seen.add(name.lower())
        for kind in sheet.kinds.values():
            if kind not in KINDS:
                raise WriteError(f"result sheet {name!r}: unknown column kind {kind!r} (one of {', '.join(KINDS)})")


def _read_text(zin: zipfile.ZipFile, member: str) -> str | None:
    try:
        data = zin.read(member)
    except KeyError:
        return None
    return data.decode("utf-8-sig") if data[:3] == b"\xef\xbb\xbf" else data.decode("utf-8")


def _fresh_number(taken: set[str], pattern: str) -> int:
    n = 1
    while pattern.format(n) in taken:
        n += 1
    return n


def _build_zip(source: Path, out, sheets: list[ResultSheet], target: Path) -> None:
    """Write the new workbook zip into the open binary file ``out``."""
    try:
        zin = zipfile.ZipFile(source)
    except zipfile.BadZipFile as exc:
        raise WriteError(f"{source} is not a workbook (not a zip file); results were not written") from exc
    with zin:
        infos = [i for i in zin.infolist() if not i.is_dir()]
        members = {i.filename for i in infos}
        workbook = _read_text(zin, WORKBOOK)
        wb_rels_path = _rels_path(WORKBOOK)
        wb_rels = _read_text(zin, wb_rels_path)
        content_types = _read_text(zin, CONTENT_TYPES)
        if workbook is None or wb_rels is None or content_types is None:
            raise WriteError(f"{source} is not an Excel workbook (xl/workbook.xml or its index is missing); results "
                             "were not written (save it as .xlsx in a spreadsheet program)")
        is_macro = MACRO_MAIN_TYPE in content_types
        suffix = target.suffix.lower()
        if is_macro and suffix != ".xlsm" or not is_macro and suffix == ".xlsm":
            want = ".xlsm" if is_macro else ".xlsx"
            raise WriteError(f"cannot write {target.name}: the workbook {'has' if is_macro else 'has no'} macros, so "
                             f"the file name must end in {want} (spreadsheet programs refuse a mismatch)")

        rels = _parse_rels(wb_rels, "xl")
        entries: list[_SheetEntry] = []
        for m in _tags(workbook, "sheet"):
            attrs = _attributes(m.group(0))
            rel_id = next((v for k, v in attrs.items() if k.endswith(":id")), "")
            rel = rels.get(rel_id)
            sheet_id = int(attrs.get("sheetId", "0")) if attrs.get("sheetId", "0").isdigit() else 0
            entries.append(_SheetEntry(attrs.get("name", ""), sheet_id, rel_id, m,
                                       rel[2] if rel else None, rel[0] if rel else ""))
        dropped = [e for e in entries if e.name.startswith(RESULT_PREFIX) and e.rel_type.endswith("/worksheet")]
        kept = [e for e in entries if e not in dropped]
        kept_lower = {e.name.lower(): e.name for e in kept}
        for sheet in sheets:
            if sheet.name.lower() in kept_lower:
                raise WriteError(f"cannot add the result sheet {sheet.name!r}: the workbook already has a sheet "
                                 f"named {kept_lower[sheet.name.lower()]!r} (sheet names ignore case); rename that "
                                 "sheet and run again")

        # Members of the earlier result sheets: worksheet part, its rels, its tables.
        dropped_parts: set[str] = set()
        for entry in dropped:
            if entry.part is None:
                continue
            dropped_parts.add(entry.part)
            sheet_rels_path = _rels_path(entry.part)
            sheet_rels = _read_text(zin, sheet_rels_path)
            if sheet_rels is not None:
                dropped_parts.add(sheet_rels_path)
                for rtype, _target, member, _m in _parse_rels(sheet_rels, posixpath.dirname(entry.part)).values():
                    if member and rtype.endswith("/table"):
                        dropped_parts.add(member)
        remaining = members - dropped_parts

        # Names already used by remaining tables and defined names (table names share the defined-name space).
        taken_names: set[str] = set()
        table_ids: set[int] = set()
        for member in remaining:
            if member.startswith("xl/tables/") and member.endswith(".xml"):
                head = zin.read(member)[:4096].decode("utf-8", "replace")
                table_tag = _tags(head, "table")
                if table_tag:
                    attrs = _attributes(table_tag[0].group(0))
                    taken_names.update(attrs.get(k, "").lower() for k in ("name", "displayName"))
                    if attrs.get("id", "").isdigit():
                        table_ids.add(int(attrs["id"]))
        for m in _tags(workbook, "definedName"):
            taken_names.add(_attributes(m.group(0)).get("name", "").lower())

        used_rel_ids = set(rels)
        next_sheet_id = max([e.sheet_id for e in entries] + [0]) + 1
        next_table_id = max(table_ids | {0}) + 1
        new_members: list[tuple[str, str]] = []
        new_sheet_tags: list[tuple[str, int, str]] = []
        new_rels: list[tuple[str, str, str]] = []
        new_types: list[tuple[str, str]] = []
        taken_members = set(remaining)
        for sheet in sheets:
            n = _fresh_number(taken_members, "xl/worksheets/sheet{}.xml")
            sheet_part = f"xl/worksheets/sheet{n}.xml"
            t = _fresh_number(taken_members, "xl/tables/table{}.xml")
            table_part = f"xl/tables/table{t}.xml"
            taken_members.update((sheet_part, table_part, _rels_path(sheet_part)))
            body, ref = sheet_xml(sheet, "rId1")
            headers = _header_names(sheet.columns)
            table = table_xml(next_table_id, _table_name(sheet.name, taken_names), headers, ref)
            next_table_id += 1
            sheet_rels = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Relationships xmlns='
                          '"http://schemas.openxmlformats.org/package/2006/relationships"><Relationship Id="rId1" '
                          f'Type="{TABLE_REL}" Target="../tables/table{t}.xml"/></Relationships>')
            new_members += [(sheet_part, body), (_rels_path(sheet_part), sheet_rels), (table_part, table)]
            rid = _fresh_number(used_rel_ids, "rId{}")
            used_rel_ids.add(f"rId{rid}")
            new_rels.append((f"rId{rid}", WORKSHEET_REL, f"worksheets/sheet{n}.xml"))
            new_sheet_tags.append((sheet.name, next_sheet_id, f"rId{rid}"))
            next_sheet_id += 1
            new_types += [(sheet_part, WORKSHEET_TYPE), (table_part, TABLE_TYPE)]

        edited = {
            WORKBOOK: _edit_workbook(workbook, entries, dropped, new_sheet_tags),
            wb_rels_path: _edit_rels(wb_rels, {e.rel_id for e in dropped}, new_rels),
            CONTENT_TYPES: _edit_content_types(content_types, dropped_parts, new_types),
        }
        app = _read_text(zin, APP)
        if app is not None:
            edited[APP] = _edit_app(app, [e.name for e in dropped], [s.name for s in sheets],
                                    [e.name for e in kept])

        with zipfile.ZipFile(out, "w", compression=zipfile.ZIP_DEFLATED) as zout:
            for info in infos:
                if info.filename in dropped_parts:
                    continue
                copy = zipfile.ZipInfo(info.filename, date_time=info.date_time)
                copy.compress_type = zipfile.ZIP_DEFLATED
                copy.external_attr = info.external_attr
                if info.filename in edited:
                    zout.writestr(copy, edited[info.filename].encode("utf-8"))
                    continue
                copy.file_size = info.file_size  # lets zipfile choose ZIP64 up front for huge members
                with zin.open(info) as src, zout.open(copy, "w") as dst:
                    shutil.copyfileobj(src, dst, 1 << 20)
            now = time.localtime()[:6]
            for name, text in new_members:
                info = zipfile.ZipInfo(name, date_time=now)
                info.compress_type = zipfile.ZIP_DEFLATED
                info.external_attr = 0o644 << 16  # rw-r--r-- for tools that unpack the zip
                zout.writestr(info, text.encode("utf-8"))


def write_results(source: str | Path, target: str | Path, sheets: list[ResultSheet]) -> None:
    """Write result sheets into a copy of the source workbook and move it onto the target atomically.

    Parameters
    ----------
    source : path-like
        The workbook read (.xlsx or .xlsm). Never modified unless it is also the target.
    target : path-like
        Where the workbook with results goes; may equal ``source``. Its suffix must match the source's kind
        (.xlsm for a workbook with macros, .xlsx otherwise).
    sheets : list of ResultSheet
        The sheets to write, in tab order, after the workbook's own sheets. Earlier sheets whose name starts with
        :data:`~lanesolve.contract.RESULT_PREFIX` are replaced; every other sheet and part is kept byte for byte.

    Raises
    ------
    WriteError
        The source is not a workbook; a result sheet name is invalid or clashes with a sheet of the workbook
        (names ignore case); the target's suffix does not match; the target folder is not writable or the target
        is locked (open in a spreadsheet program); any failure while writing. The target is then unchanged and no
        temporary file is left behind.

    Notes
    -----
    Parts referenced only from an earlier result sheet other than its tables (a drawing someone added to it) stay
    in the file, unreferenced; spreadsheet programs ignore such parts.
    """
    source, target = Path(source), Path(target)
    _check_sheets(sheets)
    if not source.is_file():
        raise WriteError(f"cannot write results: the workbook {source} does not exist any more")
    # The new file keeps the permissions of the file it replaces (or of the source, for a new --output).
    with atomic.replacing(target, "the results to", mode_from=target if target.exists() else source,
                          hint="close the workbook in the spreadsheet program, or choose another --output "
                               "folder, and run again") as handle:
        _build_zip(source, handle, sheets, target)
