"""Write the result sheets back into the workbook, at the zip level, without touching anything else.

A workbook (.xlsx, .xlsm) is a zip of XML parts. Loading it into a spreadsheet library and saving it again rewrites
every part and drops what the library does not model (charts' finer formatting, images, slicers, shapes), and is slow
for large lane sheets. This module instead

1. finds the sheets an earlier run wrote -- those listed by the mark, a hidden defined name
   (:data:`MARK_NAME`) every run writes, or, in a workbook solved before results carried a mark, the sheets named
   exactly like a result sheet when *LS Summary* holds lanesolve's own "lanesolve version" row. Any other sheet
   is the planner's and is kept, even one whose name starts with :data:`lanesolve.contract.RESULT_PREFIX`; one
   named like a result sheet stops the run with a :class:`~lanesolve.errors.WriteError` (rename it);
2. copies every member of the source zip as it is stored -- the same compressed bytes, never decompressed
   (:mod:`lanesolve.write.zipcopy`) -- except the parts of those earlier result sheets: their worksheet part, its
   relationships part and its table parts are dropped;
3. edits the index parts as text, with targeted edits only -- ``xl/workbook.xml`` (the ``<sheets>`` list,
   ``localSheetId`` of defined names, ``activeTab``/``firstSheet``, the mark and the print titles),
   ``xl/_rels/workbook.xml.rels``, ``[Content_Types].xml``, ``docProps/app.xml`` (sheet titles and counts, when
   present and well formed) and ``xl/styles.xml`` (number formats appended, every existing entry and index kept).
   They are never round-tripped through an XML library, which would rename namespace prefixes and break
   ``mc:Ignorable`` (a spreadsheet program then refuses the file);
4. adds one worksheet part and one table part per result sheet (:mod:`lanesolve.write.sheetxml`).

The sheets themselves are built in :mod:`lanesolve.write.tables` (what goes in them) and
:mod:`lanesolve.write.sheetxml` (their XML); the index edits of step 3 are in :mod:`lanesolve.write.zipindex`.
This module holds the zip splice and re-exports the public names of the other three.
"""

from __future__ import annotations

import html
import posixpath
import re
import time
import zipfile
from collections.abc import Callable
from pathlib import Path

from lanesolve.write import atomic
from lanesolve.write import zipcopy
from lanesolve.contract import RESULT_PREFIX
from lanesolve.errors import WriteError
from lanesolve.write.tables import (  # noqa: F401  (re-exported: the public names of the result sheets)
    CAUTION, COST_WORDS, DESIGN_SHEET, FIGURE_WORDS, FINGERPRINT_ITEM, FLOWS_SHEET, KINDS, KNOWN_SHEETS,
    MAX_REDUCED_COST_ROWS, NO_LIMIT, NUMBER_FORMATS,
    NODES_SHEET, SCENARIOS_SHEET, SENSITIVITY_SHEET, SUMMARY_SHEET, TRIPS_SHEET, WHY_SHEET, ResultSheet, cost_keys,
    design_sheet, frame_sheet, insight_sheets, result_sheets, scenario_sheet, sensitivity_sheet, trips_sheet,
    why_no_plan_sheet)
from lanesolve.write.sheetxml import (  # noqa: F401  (sheet_pieces and table_xml are looked up here, at call time)
    _FORBIDDEN_CHARS, REL_NS, TABLE_STYLE, _attributes, _header_names, _rels_path, _table_name, _tags, sheet_pieces,
    sheet_xml, table_xml)
from lanesolve.write.zipindex import (
    _edit_app, _edit_content_types, _edit_rels, _edit_workbook, _parse_rels, _SheetEntry, add_number_formats,
    defined_name_values)

__all__ = [
    "CAUTION", "COST_WORDS", "DESIGN_SHEET", "FIGURE_WORDS", "FLOWS_SHEET", "KINDS",
    "MAX_REDUCED_COST_ROWS", "NO_LIMIT", "NODES_SHEET", "SCENARIOS_SHEET", "SENSITIVITY_SHEET", "SUMMARY_SHEET",
    "TABLE_STYLE", "TRIPS_SHEET", "WHY_SHEET", "ResultSheet", "cost_keys", "design_sheet", "frame_sheet",
    "insight_sheets", "result_sheets", "scenario_sheet", "sensitivity_sheet", "sheet_xml", "table_xml",
    "trips_sheet", "why_no_plan_sheet", "write_results", "check_result_sheets", "KNOWN_SHEETS", "NUMBER_FORMATS",
    "FINGERPRINT_ITEM", "MARK_NAME",
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
STYLES = "xl/styles.xml"

#: zlib level of the result sheets' worksheet parts (the index parts keep zlib's default, 6). Measured on the four
#: sheets of the 1M-lane benchmark plan, 73.9 MB of XML: level 6 took 0.70 s of CPU for 6.18 MB, level 5 0.36 s for
#: 6.49 MB -- half the time for 0.31 MB more in a 39 MB workbook (level 1: 0.17 s for 8.09 MB).
SHEET_COMPRESSION = 5

#: Result sheets with at least this many rows in all are compressed in the zip writer's thread of its own
#: (:class:`lanesolve.write.zipcopy.ZipSplicer`) while their XML is made: four pieces of sheet XML
#: (:data:`lanesolve.write.sheetxml.ROWS_PER_PIECE` rows each). Below it the thread's start, and its waits for the
#: GIL, cost more than they save (the bundled example: about 4 ms of a 10 ms write).
BACKGROUND_FROM_ROWS = 4 * 4096

#: The mark: a hidden workbook-wide defined name whose value lists the result sheets lanesolve wrote, so a rerun
#: replaces exactly those and never a planner's sheet that happens to share a name. A defined name (rather than a
#: custom document property) lives in workbook.xml, which the writer edits anyway, and spreadsheet programs keep
#: hidden names when they save.
MARK_NAME = "_lanesolve_result_sheets"
MARK_SEPARATOR = ";"


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


def _sheet_entries(workbook: str, rels: dict) -> list[_SheetEntry]:
    """The workbook's sheets in tab order, each with its part and relationship type."""
    entries: list[_SheetEntry] = []
    for m in _tags(workbook, "sheet"):
        attrs = _attributes(m.group(0))
        rel_id = next((v for k, v in attrs.items() if k.endswith(":id")), "")
        rel = rels.get(rel_id)
        sheet_id = int(attrs.get("sheetId", "0")) if attrs.get("sheetId", "0").isdigit() else 0
        entries.append(_SheetEntry(attrs.get("name", ""), sheet_id, rel_id, m,
                                   rel[2] if rel else None, rel[0] if rel else ""))
    return entries


def _marked_names(workbook: str) -> set[str] | None:
    """The sheet names the mark of an earlier run lists, or None when the workbook carries no mark."""
    values = defined_name_values(workbook, MARK_NAME)
    if not values:
        return None
    names: set[str] = set()
    for value in values:
        value = value.strip()
        if len(value) >= 2 and value[0] == value[-1] == '"':
            value = value[1:-1].replace('""', '"')
        names.update(n for n in value.split(MARK_SEPARATOR) if n)
    return names


def _has_fingerprint(zin: zipfile.ZipFile, part: str | None) -> bool:
    """Whether a sheet part holds lanesolve's own summary row (:data:`FINGERPRINT_ITEM`), written inline as
    lanesolve writes it or as a shared string after a spreadsheet program saved the workbook."""
    text = _read_text(zin, part) if part else None
    if text is None:
        return False
    wanted = FINGERPRINT_ITEM.lower()
    inline = re.findall(r"<(?:[\w.-]+:)?t\b[^>]*>([^<]*)</(?:[\w.-]+:)?t\s*>", text)
    if any(html.unescape(s).strip().lower() == wanted for s in inline):
        return True
    shared = _read_text(zin, "xl/sharedStrings.xml")
    if shared is None:
        return False
    items = re.findall(r"<(?:[\w.-]+:)?si\b[^>]*>(.*?)</(?:[\w.-]+:)?si\s*>", shared, re.S)
    indices = {str(i) for i, item in enumerate(items)
               if "".join(html.unescape(s) for s in re.findall(r">([^<]*)<", item)).strip().lower() == wanted}
    cells = re.findall(r"<(?:[\w.-]+:)?c\b[^>]*\bt=[\"']s[\"'][^>]*>\s*<(?:[\w.-]+:)?v>(\d+)<", text)
    return bool(indices & set(cells))


def _lanesolve_sheets(zin: zipfile.ZipFile, workbook: str, entries: list[_SheetEntry]) -> list[_SheetEntry]:
    """The sheets an earlier lanesolve run wrote: the ones its mark lists or, in a workbook solved before result
    sheets carried a mark, the sheets named exactly like a known result sheet when LS Summary carries the
    fingerprint. Every other sheet -- a planner's own "LS Notes" included -- is the planner's."""
    worksheets = [e for e in entries if e.name.startswith(RESULT_PREFIX) and e.rel_type.endswith("/worksheet")]
    marked = _marked_names(workbook)
    if marked is not None:
        return [e for e in worksheets if e.name in marked]
    summary = next((e for e in worksheets if e.name == SUMMARY_SHEET), None)
    if summary is None or not _has_fingerprint(zin, summary.part):
        return []
    return [e for e in worksheets if e.name in KNOWN_SHEETS]


def _clashes(kept: list[_SheetEntry], names: list[str]) -> list[str]:
    """The planner's sheets named like a result sheet lanesolve writes (names ignore case)."""
    wanted = {n.lower() for n in (*KNOWN_SHEETS, *names)}
    return [e.name for e in kept if e.name.lower() in wanted]


def _clash_message(clashes: list[str]) -> str:
    listed = ", ".join(repr(n) for n in clashes)
    return (f"the workbook has its own sheet{'s' if len(clashes) > 1 else ''} named {listed}, which lanesolve "
            "uses for its results but did not write; lanesolve does not replace a sheet it did not write. Rename "
            f"{'those sheets' if len(clashes) > 1 else 'that sheet'} (for example to "
            f"{clashes[0].replace(RESULT_PREFIX, 'My ', 1)!r}) and run again")


def earlier_result_sheets(path: str | Path) -> list[str]:
    """Names of the sheets an earlier lanesolve run wrote into the workbook (by its mark, see
    :func:`write_results`); empty for a file that is not a workbook zip or holds no results."""
    try:
        zin = zipfile.ZipFile(path)
    except (OSError, zipfile.BadZipFile):
        return []
    with zin:
        workbook, wb_rels = _read_text(zin, WORKBOOK), _read_text(zin, _rels_path(WORKBOOK))
        if workbook is None or wb_rels is None:
            return []
        return [e.name for e in _lanesolve_sheets(zin, workbook, _sheet_entries(workbook, _parse_rels(wb_rels, "xl")))]


def check_result_sheets(path: str | Path) -> None:
    """Refuse, before any solving, a workbook with a sheet of its own named like a result sheet.

    Parameters
    ----------
    path : path-like
        The workbook the results will be written into (.xlsx or .xlsm).

    Raises
    ------
    WriteError
        A sheet lanesolve did not write (no mark lists it, see :func:`write_results`) has the name of a result
        sheet (:data:`~lanesolve.write.tables.KNOWN_SHEETS`, ignoring case); the message names each such sheet
        and says to rename it. A file that is not a workbook zip is left to the writer to report.
    """
    try:
        zin = zipfile.ZipFile(path)
    except (OSError, zipfile.BadZipFile):
        return
    with zin:
        workbook, wb_rels = _read_text(zin, WORKBOOK), _read_text(zin, _rels_path(WORKBOOK))
        if workbook is None or wb_rels is None:
            return
        entries = _sheet_entries(workbook, _parse_rels(wb_rels, "xl"))
        ours = _lanesolve_sheets(zin, workbook, entries)
        clashes = _clashes([e for e in entries if e not in ours], [])
    if clashes:
        raise WriteError(_clash_message(clashes))


def _new_defined_names(sheets: list[ResultSheet], first_position: int) -> list[tuple[str, int | None, str, bool]]:
    """The mark listing the result sheets written, and each sheet's print titles (its header row on every page)."""
    mark = '"' + MARK_SEPARATOR.join(s.name for s in sheets).replace('"', '""') + '"'
    names = [(MARK_NAME, None, mark, True)]
    for position, sheet in enumerate(sheets, start=first_position):
        quoted = sheet.name.replace("'", "''")
        names.append(("_xlnm.Print_Titles", position, f"'{quoted}'!$1:$1", False))
    return names


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
        entries = _sheet_entries(workbook, rels)
        dropped = _lanesolve_sheets(zin, workbook, entries)
        kept = [e for e in entries if e not in dropped]
        clashes = _clashes(kept, [s.name for s in sheets])
        if clashes:
            raise WriteError(_clash_message(clashes))

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

        # Number formats: appended to styles.xml (existing entries untouched); without a styles part the sheets
        # carry no formats rather than a styles.xml this module would have to invent.
        styles: dict[str, int] = {}
        styles_text = _read_text(zin, STYLES) if STYLES in remaining else None
        formatted = add_number_formats(styles_text, NUMBER_FORMATS) if styles_text is not None else None
        if formatted is not None:
            styles_text, styles = formatted

        used_rel_ids = set(rels)
        next_sheet_id = max([e.sheet_id for e in entries] + [0]) + 1
        next_table_id = max(table_ids | {0}) + 1
        # Each new sheet's parts are named here; its XML is built only when it is written (below), one sheet at a
        # time, so the largest result sheet is the only one held in memory.
        new_parts: list[tuple[ResultSheet, str, str, int, str]] = []
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
            new_parts.append((sheet, sheet_part, table_part, next_table_id, _table_name(sheet.name, taken_names)))
            next_table_id += 1
            rid = _fresh_number(used_rel_ids, "rId{}")
            used_rel_ids.add(f"rId{rid}")
            new_rels.append((f"rId{rid}", WORKSHEET_REL, f"worksheets/sheet{n}.xml"))
            new_sheet_tags.append((sheet.name, next_sheet_id, f"rId{rid}"))
            next_sheet_id += 1
            new_types += [(sheet_part, WORKSHEET_TYPE), (table_part, TABLE_TYPE)]

        edited = {
            WORKBOOK: _edit_workbook(workbook, entries, dropped, new_sheet_tags,
                                     _new_defined_names(sheets, len(kept)), {MARK_NAME}),
            wb_rels_path: _edit_rels(wb_rels, {e.rel_id for e in dropped}, new_rels),
            CONTENT_TYPES: _edit_content_types(content_types, dropped_parts, new_types),
        }
        if formatted is not None:
            edited[STYLES] = styles_text
        app = _read_text(zin, APP)
        if app is not None:
            edited[APP] = _edit_app(app, [e.name for e in dropped], [s.name for s in sheets],
                                    [e.name for e in kept])

        # Unchanged members are copied as stored (their compressed bytes, not recompressed); edited index parts and
        # the new sheets are compressed here -- for large sheets in the writer's thread, while the next piece of
        # sheet XML is made. Leaving the block, by an error or not, stops that thread before the temporary file is
        # closed.
        background = sum(len(sheet.rows) for sheet in sheets) >= BACKGROUND_FROM_ROWS
        with zipcopy.ZipSplicer(out, background=background) as zout:
            with open(source, "rb") as raw:
                for info in infos:
                    if info.filename in dropped_parts:
                        continue
                    if info.filename in edited:
                        zout.add(info.filename, edited[info.filename], info.date_time, info.external_attr)
                        continue
                    try:
                        zout.copy(raw, info)
                    except zipcopy.ZipCopyError as exc:
                        raise WriteError(f"{source} is damaged ({exc}); results were not written (open it in a "
                                         "spreadsheet program and save it, then run again)") from exc
            now = time.localtime()[:6]
            for sheet, sheet_part, table_part, table_id, table_name in new_parts:
                # The sheet's cells are rendered here; its XML is made a slice of rows at a time as the writer
                # takes it, and at most zipcopy.MAX_QUEUED_BYTES of it waits for compression.
                ref, pieces = sheet_pieces(sheet, "rId1", styles)
                zout.add(sheet_part, pieces, now, level=SHEET_COMPRESSION)  # rw-r--r--, the default
                sheet_rels = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Relationships xmlns='
                              '"http://schemas.openxmlformats.org/package/2006/relationships"><Relationship '
                              f'Id="rId1" Type="{TABLE_REL}" Target="../{table_part[len("xl/"):]}"/></Relationships>')
                zout.add(_rels_path(sheet_part), sheet_rels, now)
                zout.add(table_part, table_xml(table_id, table_name, _header_names(sheet.columns), ref), now)
            zout.close()


def write_results(source: str | Path, target: str | Path, sheets: list[ResultSheet],
                  before_replace: Callable[[], None] | None = None) -> None:
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
    before_replace : callable, optional
        Passed to :func:`lanesolve.write.atomic.replacing`: a last check before the new file replaces the target.

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
                               "folder, and run again", before_replace=before_replace) as handle:
        _build_zip(source, handle, sheets, target)
