"""Targeted text edits of the workbook's index parts, never a round trip through an XML library.

``xl/workbook.xml`` (the ``<sheets>`` list, ``localSheetId`` of defined names, ``activeTab``/``firstSheet``),
``xl/_rels/workbook.xml.rels``, ``[Content_Types].xml`` and ``docProps/app.xml`` (sheet titles and counts, when
present and well formed) are edited as text. An XML library would rename namespace prefixes and break
``mc:Ignorable`` (a spreadsheet program then refuses the file).
"""

from __future__ import annotations

import html
import re
from dataclasses import dataclass

from lanesolve.errors import WriteError
from lanesolve.write.sheetxml import _ATTRS, REL_NS, _attributes, _ns_prefix, _resolve, _tags, escape


@dataclass
class _SheetEntry:
    name: str
    sheet_id: int
    rel_id: str
    tag: re.Match
    part: str | None = None
    rel_type: str = ""


def _parse_rels(text: str, base_dir: str) -> dict[str, tuple[str, str, str | None, re.Match]]:
    """Relationships by id: (type, target, resolved member name or None for external, the tag match)."""
    rels = {}
    for m in _tags(text, "Relationship"):
        attrs = _attributes(m.group(0))
        target = attrs.get("Target", "")
        member = None if attrs.get("TargetMode") == "External" else _resolve(base_dir, target)
        rels[attrs.get("Id", "")] = (attrs.get("Type", ""), target, member, m)
    return rels


def _remove_spans(text: str, spans: list[tuple[int, int]]) -> str:
    out, pos = [], 0
    for start, end in sorted(spans):
        out.append(text[pos:start])
        pos = end
    out.append(text[pos:])
    return "".join(out)


def _edit_workbook(text: str, entries: list[_SheetEntry], dropped: list[_SheetEntry],
                   new_sheets: list[tuple[str, int, str]],
                   new_names: list[tuple[str, int | None, str, bool]] = (), replace_names: set[str] = frozenset()
                   ) -> str:
    """workbook.xml with the dropped sheets removed, the new ones appended and sheet indices renumbered.

    ``new_names`` are defined names to add, each ``(name, local sheet position or None, formula text, hidden)``;
    workbook-wide names listed in ``replace_names`` are removed first (an earlier run's mark).
    """
    dropped_positions = [i for i, e in enumerate(entries) if e in dropped]
    kept_count = len(entries) - len(dropped_positions)

    def new_position(old: int) -> int | None:
        if old in dropped_positions:
            return None
        return old - sum(1 for p in dropped_positions if p < old)

    rel_prefix = _ns_prefix(text, REL_NS)
    sheets_close = re.search(r"</((?:[\w.-]+:)?)sheets\s*>", text)
    if sheets_close is None:
        raise WriteError("xl/workbook.xml has no list of sheets; the file is not a workbook this program can "
                         "extend (open and save it in a spreadsheet program, then run again).")
    main_prefix = sheets_close.group(1)
    new_tags = []
    for name, sheet_id, rel_id in new_sheets:
        if rel_prefix:
            rid = f'{rel_prefix}:id="{rel_id}"'
        else:
            rid = f'xmlns:lsr="{REL_NS[0]}" lsr:id="{rel_id}"'
        new_tags.append(f'<{main_prefix}sheet name="{escape(name)}" sheetId="{sheet_id}" {rid}/>')

    # Edits as (start, end, replacement), applied from the end so earlier offsets stay valid.
    edits: list[tuple[int, int, str]] = [(e.tag.start(), e.tag.end(), "") for e in dropped]
    edits.append((sheets_close.start(), sheets_close.start(), "".join(new_tags)))

    for m in re.finditer(r"<((?:[\w.-]+:)?)definedName\b(" + _ATTRS + r")>(.*?)</\1definedName\s*>", text, re.S):
        attrs = _attributes(m.group(2))
        if attrs.get("name") in replace_names and attrs.get("localSheetId") is None:
            edits.append((m.start(), m.end(), ""))
    if dropped_positions:
        for m in re.finditer(r"<((?:[\w.-]+:)?)definedName\b(" + _ATTRS + r")>(.*?)</\1definedName\s*>", text,
                             re.S):
            local = _attributes(m.group(2)).get("localSheetId")
            if local is None or not local.strip().isdigit():
                continue
            position = new_position(int(local))
            if position is None:
                edits.append((m.start(), m.end(), ""))  # a name local to a removed sheet goes with it
            elif position != int(local):
                attr = re.search(r"""localSheetId\s*=\s*["'][^"']*["']""", m.group(0))
                edits.append((m.start() + attr.start(), m.start() + attr.end(), f'localSheetId="{position}"'))
        for m in _tags(text, "workbookView"):
            for attr_name in ("activeTab", "firstSheet"):
                attr = re.search(attr_name + r"""\s*=\s*["'](\d+)["']""", m.group(0))
                if attr is None:
                    continue
                position = new_position(int(attr.group(1)))
                if position is None:
                    # The tab shown was an earlier result sheet: show its successor, the new summary.
                    position = kept_count if attr_name == "activeTab" and new_sheets else 0
                if position != int(attr.group(1)):
                    edits.append((m.start() + attr.start(), m.start() + attr.end(), f'{attr_name}="{position}"'))

    for start, end, replacement in sorted(edits, key=lambda e: (e[0], e[1]), reverse=True):
        text = text[:start] + replacement + text[end:]
    # An emptied list of defined names goes too (an empty element is schema-valid, but some programs object).
    text = re.sub(r"<((?:[\w.-]+:)?)definedNames\s*>\s*</\1definedNames\s*>|<(?:[\w.-]+:)?definedNames\s*/>", "",
                  text)
    if new_names:
        text = _add_defined_names(text, main_prefix, new_names)
    return text


def _add_defined_names(text: str, prefix: str, names: list[tuple[str, int | None, str, bool]]) -> str:
    """Append defined names to workbook.xml, into its ``definedNames`` or a new one where the schema puts it
    (after ``sheets``, ``functionGroups`` and ``externalReferences``; ECMA-376 Part 1, 18.2.27)."""
    tags = "".join(
        f'<{prefix}definedName name="{escape(name)}"'
        + (f' localSheetId="{local}"' if local is not None else "")
        + (' hidden="1"' if hidden else "") + f">{escape(formula)}</{prefix}definedName>"
        for name, local, formula, hidden in names)
    close = re.search(r"</((?:[\w.-]+:)?)definedNames\s*>", text)
    if close is not None:
        return text[:close.start()] + tags + text[close.start():]
    after = None
    for element in ("externalReferences", "functionGroups", "sheets"):
        after = re.search(r"</(?:[\w.-]+:)?" + element + r"\s*>|<(?:[\w.-]+:)?" + element + _ATTRS + r"/>", text)
        if after is not None:
            break
    block = f"<{prefix}definedNames>{tags}</{prefix}definedNames>"
    return text[:after.end()] + block + text[after.end():]


def defined_name_values(text: str, name: str) -> list[str]:
    """The formula texts of every workbook-wide defined name ``name`` in workbook.xml (unescaped)."""
    found = []
    for m in re.finditer(r"<((?:[\w.-]+:)?)definedName\b(" + _ATTRS + r")>(.*?)</\1definedName\s*>", text, re.S):
        attrs = _attributes(m.group(2))
        if attrs.get("name") == name and attrs.get("localSheetId") is None:
            found.append(html.unescape(m.group(3)))
    return found


def add_number_formats(text: str, formats: dict[str, str]) -> tuple[str, dict[str, int]] | None:
    """styles.xml with a number format and a cell format appended for each kind; existing entries untouched.

    Parameters
    ----------
    text : str
        The workbook's ``xl/styles.xml``.
    formats : dict
        Kind -> number format code (:data:`lanesolve.write.tables.NUMBER_FORMATS`).

    Returns
    -------
    (str, dict) or None
        The new styles text and kind -> index of its cell format (``cellXfs`` entry), or None when the part has
        no ``cellXfs`` list this function understands (the sheets are then written without number formats).

    Notes
    -----
    Only appends: new ``numFmt`` ids are above every id in use (custom ids start at 164; ECMA-376 Part 1,
    18.8.30), new ``xf`` entries go at the end of ``cellXfs``, so every existing style index keeps its meaning and
    the input sheets, which refer to those indices, stay byte-identical. A rerun finds the formats and cell formats
    an earlier run appended and reuses them, so the part does not grow run after run.
    """
    xfs_match = re.search(r"<((?:[\w.-]+:)?)cellXfs\b(" + _ATTRS + r")>(.*?)</\1cellXfs\s*>", text, re.S)
    if xfs_match is None:
        return None
    prefix = xfs_match.group(1)
    xf_tags = list(re.finditer(r"<(?:[\w.-]+:)?xf\b(" + _ATTRS + r")(?:/>|>.*?</(?:[\w.-]+:)?xf\s*>)",
                               xfs_match.group(3), re.S))
    fmts_match = re.search(r"<((?:[\w.-]+:)?)numFmts\b(" + _ATTRS + r")>(.*?)</\1numFmts\s*>", text, re.S)
    code_ids: dict[str, int] = {}
    used_ids: set[int] = set()
    if fmts_match is not None:
        for tag in _tags(fmts_match.group(3), "numFmt"):
            attrs = _attributes(tag.group(0))
            if attrs.get("numFmtId", "").isdigit():
                used_ids.add(int(attrs["numFmtId"]))
                code_ids.setdefault(attrs.get("formatCode", ""), int(attrs["numFmtId"]))
    plain_xf = {}  # numFmtId -> index of an xf that is only that number format on the default font, fill, border
    for index, tag in enumerate(xf_tags):
        attrs = _attributes(tag.group(1))
        if (tag.group(0).endswith("/>") and attrs.get("applyNumberFormat") == "1"
                and all(attrs.get(k, "0") == "0" for k in ("fontId", "fillId", "borderId", "xfId"))
                and attrs.get("numFmtId", "").isdigit()):
            plain_xf.setdefault(int(attrs["numFmtId"]), index)
    new_fmts, new_xfs, styles = [], [], {}
    next_id = max(used_ids | {163}) + 1
    for kind, code in formats.items():
        if code not in code_ids:
            code_ids[code] = next_id
            new_fmts.append(f'<{prefix}numFmt numFmtId="{next_id}" formatCode="{escape(code)}"/>')
            next_id += 1
        fmt_id = code_ids[code]
        if fmt_id not in plain_xf:
            plain_xf[fmt_id] = len(xf_tags) + len(new_xfs)
            new_xfs.append(f'<{prefix}xf numFmtId="{fmt_id}" fontId="0" fillId="0" borderId="0" xfId="0" '
                           'applyNumberFormat="1"/>')
        styles[kind] = plain_xf[fmt_id]
    edits = []
    if new_xfs:
        edits.append((xfs_match.start(3) + len(xfs_match.group(3)), xfs_match.start(3) + len(xfs_match.group(3)),
                      "".join(new_xfs)))
        edits += _count_edit(xfs_match, len(xf_tags) + len(new_xfs))
    if new_fmts:
        if fmts_match is not None:
            end = fmts_match.start(3) + len(fmts_match.group(3))
            edits.append((end, end, "".join(new_fmts)))
            edits += _count_edit(fmts_match, len(_tags(fmts_match.group(3), "numFmt")) + len(new_fmts))
        else:
            # numFmts is the first child of styleSheet (ECMA-376 Part 1, 18.8.39); an empty <numFmts/> is replaced.
            empty = re.search(r"<(?:[\w.-]+:)?numFmts\b" + _ATTRS + r"/>", text)
            block = f'<{prefix}numFmts count="{len(new_fmts)}">' + "".join(new_fmts) + f"</{prefix}numFmts>"
            if empty is not None:
                edits.append((empty.start(), empty.end(), block))
            else:
                sheet = re.search(r"<(?:[\w.-]+:)?styleSheet\b" + _ATTRS + r">", text)
                if sheet is None:
                    return None
                edits.append((sheet.end(), sheet.end(), block))
    for start, end, replacement in sorted(edits, key=lambda e: (e[0], e[1]), reverse=True):
        text = text[:start] + replacement + text[end:]
    return text, styles


def _count_edit(match: re.Match, count: int) -> list[tuple[int, int, str]]:
    """The edit that sets the ``count`` attribute of a list's start tag (group 2 holds its attributes)."""
    attr = re.search(r"""\bcount\s*=\s*["']\d*["']""", match.group(2))
    if attr is None:
        return []
    return [(match.start(2) + attr.start(), match.start(2) + attr.end(), f'count="{count}"')]


def _edit_rels(text: str, drop_ids: set[str], new_rels: list[tuple[str, str, str]]) -> str:
    """Relationships text without drop_ids and with (id, type, target) appended."""
    rels = _parse_rels(text, "xl")
    spans = [(m.start(), m.end()) for rid, (_t, _g, _m, m) in rels.items() if rid in drop_ids]
    text = _remove_spans(text, spans)
    close = re.search(r"</((?:[\w.-]+:)?)Relationships\s*>", text)
    prefix = close.group(1) if close else ""
    added = "".join(f'<{prefix}Relationship Id="{rid}" Type="{rtype}" Target="{escape(target)}"/>'
                    for rid, rtype, target in new_rels)
    if close is None:  # <Relationships .../> written empty
        empty = re.search(r"<((?:[\w.-]+:)?)Relationships\b(" + _ATTRS + r")/>", text)
        return text[:empty.start()] + f"<{empty.group(1)}Relationships{empty.group(2)}>" + added + \
            f"</{empty.group(1)}Relationships>" + text[empty.end():]
    return text[:close.start()] + added + text[close.start():]


def _edit_content_types(text: str, dropped_parts: set[str], new_parts: list[tuple[str, str]]) -> str:
    spans = []
    for m in _tags(text, "Override"):
        part = _attributes(m.group(0)).get("PartName", "").lstrip("/")
        if part in dropped_parts:
            spans.append((m.start(), m.end()))
    text = _remove_spans(text, spans)
    close = re.search(r"</((?:[\w.-]+:)?)Types\s*>", text)
    if close is None:
        raise WriteError("[Content_Types].xml is not readable; the file is not a workbook this program can extend "
                         "(open and save it in a spreadsheet program, then run again).")
    added = "".join(f'<{close.group(1)}Override PartName="/{part}" ContentType="{ctype}"/>'
                    for part, ctype in new_parts)
    return text[:close.start()] + added + text[close.start():]


def _edit_app(text: str, old_names: list[str], new_names: list[str], kept_names: list[str]) -> str:
    """docProps/app.xml with the sheet titles and the worksheet count updated; unchanged when not understood.

    The titles are grouped under headings (worksheets, named ranges...) whose labels depend on the program's
    language, so the worksheet group is found by content: the group holding the old result sheets, else the one
    holding a kept sheet name.
    """
    heading = re.search(r"<(?:[\w.-]+:)?HeadingPairs\b[^>]*>(.*?)</(?:[\w.-]+:)?HeadingPairs\s*>", text, re.S)
    titles = re.search(r"<(?:[\w.-]+:)?TitlesOfParts\b[^>]*>(.*?)</(?:[\w.-]+:)?TitlesOfParts\s*>", text, re.S)
    if heading is None or titles is None:
        return text
    variants = re.findall(r"<(?:[\w.-]+:)?variant\b[^>]*>(.*?)</(?:[\w.-]+:)?variant\s*>", heading.group(1), re.S)
    if len(variants) % 2:
        return text
    counts = []
    for k in range(1, len(variants), 2):
        m = re.search(r"<((?:[\w.-]+:)?)i4\s*>\s*(\d+)\s*</\1i4\s*>", variants[k])
        if m is None:
            return text
        counts.append(int(m.group(2)))
    title_tags = list(re.finditer(r"<((?:[\w.-]+:)?)lpstr\s*>(.*?)</\1lpstr\s*>|<(?:[\w.-]+:)?lpstr\s*/>",
                                  titles.group(1), re.S))
    if sum(counts) != len(title_tags):
        return text
    values = [html.unescape(t.group(2) or "") for t in title_tags]
    groups, start = [], 0
    for count in counts:
        groups.append((start, start + count))
        start += count
    old_set, kept_set = set(old_names), set(kept_names)
    target = next((g for g, (a, b) in enumerate(groups) if old_set & set(values[a:b])), None)
    if target is None:
        target = next((g for g, (a, b) in enumerate(groups) if kept_set & set(values[a:b])), None)
    if target is None:
        return text
    a, b = groups[target]
    drop = [k for k in range(a, b) if values[k] in old_set]
    new_count = counts[target] - len(drop) + len(new_names)

    # Titles: remove the dropped, add the new after the group's last title.
    inner = titles.group(1)
    base = titles.start(1)
    prefix = title_tags[0].group(1) if title_tags and title_tags[0].group(1) is not None else "vt:"
    insert_at = base + title_tags[b - 1].end()  # the group was found by a title, so it is not empty
    added = "".join(f"<{prefix}lpstr>{escape(n)}</{prefix}lpstr>" for n in new_names)
    edits = [(base + title_tags[k].start(), base + title_tags[k].end(), "") for k in drop]
    edits.append((insert_at, insert_at, added))
    vector = re.search(r"""(<(?:[\w.-]+:)?vector\b[^>]*\bsize\s*=\s*["'])(\d+)(["'])""", inner)
    if vector is None:
        return text
    edits.append((base + vector.start(2), base + vector.end(2), str(len(title_tags) - len(drop) + len(new_names))))

    # The group's count in the heading pairs.
    variant_tags = list(re.finditer(r"<(?:[\w.-]+:)?variant\b[^>]*>(.*?)</(?:[\w.-]+:)?variant\s*>",
                                    heading.group(1), re.S))
    count_variant = variant_tags[2 * target + 1]
    i4 = re.search(r"(<((?:[\w.-]+:)?)i4\s*>\s*)(\d+)(\s*</\2i4\s*>)", count_variant.group(0))
    start_i4 = heading.start(1) + count_variant.start() + i4.start(3)
    edits.append((start_i4, start_i4 + len(i4.group(3)), str(new_count)))
    for start, end, replacement in sorted(edits, key=lambda e: (e[0], e[1]), reverse=True):
        text = text[:start] + replacement + text[end:]
    return text
