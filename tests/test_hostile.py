"""Hostile workbooks: entity expansion, zip bombs, formula-looking names, macros.

Sources: the "billion laughs" document is the classic one from the defusedxml README (ten nested entities, each
expanding the previous one ten times); XML 1.0 section 2.8 puts a document type declaration before the root
element; the zip bomb is a part of one repeated byte, which DEFLATE (RFC 1951) shrinks about 1000:1.
"""

from __future__ import annotations

import os
import zipfile

import openpyxl
import pytest
from click.testing import CliRunner

import _workbooks as wbk
from conftest import valid_sheets, write_workbook
from lanesolve.read import guard
from lanesolve import pipeline
from lanesolve.read import reader
from lanesolve.cli import main
from lanesolve.errors import WorkbookError

LAUGHS = ('<!DOCTYPE lolz [<!ENTITY lol "lol">'
          + "".join(f'<!ENTITY lol{i} "{("&lol" + (str(i - 1) if i > 1 else "") + ";") * 10}">' for i in range(1, 10))
          + "]>")


def _sheet_part(path, sheet_name: str) -> str:
    parts = reader._xlsx_sheet_parts(path)
    return parts[sheet_name]


def _insert_doctype(xml: bytes, doctype: str, use: str | None = None) -> bytes:
    """Put ``doctype`` after the XML declaration (where XML 1.0 section 2.8 allows it), optionally using an entity."""
    text = xml.decode("utf-8")
    if text.startswith("<?xml"):
        end = text.index("?>") + 2
        text = text[:end] + doctype + text[end:]
    else:
        text = doctype + text
    if use is not None:
        # Replace the first depot id with the entity reference, so a reader that expands it would blow up.
        text = text.replace("North Yard", use, 1)
    return text.encode("utf-8")


@pytest.fixture
def book(tmp_path):
    return write_workbook(tmp_path / "book.xlsx", valid_sheets())


def test_laughs_sheet_is_the_classic_nested_expansion():
    # Check the fixture itself: 9 levels of 10 gives 10**9 copies of "lol" if expanded (defusedxml README).
    assert LAUGHS.count("<!ENTITY") == 10 and "&lol8;" * 10 in LAUGHS


def test_billion_laughs_in_a_sheet_part_is_refused(book):
    part = _sheet_part(book, "Depots")
    with zipfile.ZipFile(book) as z:
        xml = z.read(part)
    # openpyxl writes inline or shared strings; put the entity into the shared strings part when the sheet has none.
    with zipfile.ZipFile(book) as z:
        names = set(z.namelist())
        target = "xl/sharedStrings.xml" if "North Yard".encode() not in xml and "xl/sharedStrings.xml" in names \
            else part
        data = z.read(target)
    wbk.rewrite_zip(book, {target: _insert_doctype(data, LAUGHS, "&lol9;")})
    with pytest.raises(WorkbookError, match=r"declares a document type or XML entities") as info:
        reader.read_workbook(book)
    assert target in str(info.value)


def test_entity_in_a_worksheet_part_itself_is_refused(book):
    part = _sheet_part(book, "Lanes")
    with zipfile.ZipFile(book) as z:
        data = z.read(part)
    wbk.rewrite_zip(book, {part: _insert_doctype(data, LAUGHS)})
    with pytest.raises(WorkbookError, match=part.replace("/", r"\/")):
        reader.read_workbook(book)


def test_doctype_in_workbook_xml_is_refused(book):
    with zipfile.ZipFile(book) as z:
        data = z.read("xl/workbook.xml")
    wbk.rewrite_zip(book, {"xl/workbook.xml": _insert_doctype(data, LAUGHS)})
    with pytest.raises(WorkbookError, match=r"xl/workbook\.xml declares a document type"):
        pipeline.run(book, write=False)


def test_external_entity_declaration_is_refused(book, tmp_path):
    # An external entity would make an expanding parser read a local file into the workbook (an "XXE" read).
    secret = tmp_path / "secret.txt"
    secret.write_text("not for the workbook")
    with zipfile.ZipFile(book) as z:
        data = z.read("xl/workbook.xml")
    doctype = f'<!DOCTYPE x [<!ENTITY leak SYSTEM "file://{secret}">]>'
    wbk.rewrite_zip(book, {"xl/workbook.xml": _insert_doctype(data, doctype)})
    with pytest.raises(WorkbookError, match="DOCTYPE"):
        reader.read_workbook(book)


def test_utf16_part_with_doctype_is_refused(book):
    with zipfile.ZipFile(book) as z:
        data = z.read("xl/workbook.xml")
    text = _insert_doctype(data, LAUGHS).decode("utf-8").replace('encoding="UTF-8"', 'encoding="UTF-16"')
    wbk.rewrite_zip(book, {"xl/workbook.xml": text.encode("utf-16")})
    with pytest.raises(WorkbookError, match="declares a document type"):
        reader.read_workbook(book)


def test_defusedxml_refuses_entities_even_past_the_scanned_head(book, monkeypatch):
    # Second line of defence: if the prolog scan missed a declaration, the reader's own parse (defusedxml) refuses.
    monkeypatch.setattr(guard, "PROLOG_BYTES", 0)
    with zipfile.ZipFile(book) as z:
        data = z.read("xl/workbook.xml")
    wbk.rewrite_zip(book, {"xl/workbook.xml": _insert_doctype(data, LAUGHS)})
    with pytest.raises(WorkbookError, match="declares XML entities"):
        reader.read_workbook(book)


def test_zip_bomb_part_is_refused_from_the_directory(book):
    # 60 MB of one byte: above RATIO_MIN_BYTES and compressed far beyond MAX_RATIO.
    wbk.rewrite_zip(book, add={"xl/media/padding.bin": b"\0" * (60 * 1000 * 1000)})
    with zipfile.ZipFile(book) as z:
        info = z.getinfo("xl/media/padding.bin")
    assert info.file_size / info.compress_size > guard.MAX_RATIO  # the fixture really is a bomb
    with pytest.raises(WorkbookError, match=r"xl/media/padding\.bin unpacks from .* \(a zip bomb\?\)"):
        pipeline.run(book, write=False)


def test_total_uncompressed_size_is_bounded(book, monkeypatch):
    # Building a real 1 GiB archive would take the machine's memory; the same check runs against a lowered limit.
    assert guard.MAX_TOTAL_BYTES == 1 << 30  # the documented limit (docs/FUZZING.md, guard module docstring)
    monkeypatch.setattr(guard, "MAX_TOTAL_BYTES", 200_000)
    wbk.rewrite_zip(book, add={"xl/media/noise.bin": bytes(range(256)) * 1000})  # 256 kB, barely compressible
    with pytest.raises(WorkbookError, match=r"unpacks to .* MB, more than"):
        reader.read_workbook(book)


def test_too_many_members_are_refused(book, monkeypatch):
    monkeypatch.setattr(guard, "MAX_MEMBERS", 5)
    with pytest.raises(WorkbookError, match=r"parts, more than the 5"):
        reader.read_workbook(book)


def test_ordinary_workbook_passes_the_guard(book):
    guard.check_archive(book)  # raises on refusal
    network, _ = pipeline.load(book)
    assert len(network.depots) == 2


FORMULA_NAMES = {"depot": "=SUM(A1:A9)", "hub": "+Midway", "customer": "-Alder Foods", "customer2": "@Birch Market"}


def _text_cell(sheet, row, col, value):
    cell = sheet.cell(row=row, column=col, value=value)
    cell.data_type = "s"  # typed as text, as a spreadsheet program stores a quote-prefixed entry
    return cell


def test_formula_looking_names_come_back_as_text(tmp_path):
    path = tmp_path / "formulas.xlsx"
    book = openpyxl.Workbook()
    book.remove(book.active)
    depots = book.create_sheet("Depots")
    depots.append(["depot", "supply"])
    _text_cell(depots, 2, 1, FORMULA_NAMES["depot"])
    depots.cell(row=2, column=2, value=100)
    customers = book.create_sheet("Customers")
    customers.append(["customer", "demand"])
    for row, key, demand in ((2, "customer", 30), (3, "customer2", 40)):
        _text_cell(customers, row, 1, FORMULA_NAMES[key])
        customers.cell(row=row, column=2, value=demand)
    hubs = book.create_sheet("Hubs")
    hubs.append(["hub"])
    _text_cell(hubs, 2, 1, FORMULA_NAMES["hub"])
    lanes = book.create_sheet("Lanes")
    lanes.append(["origin", "destination", "cost_per_unit"])
    for row, (origin, destination) in enumerate((("depot", "hub"), ("hub", "customer"), ("hub", "customer2")), 2):
        _text_cell(lanes, row, 1, FORMULA_NAMES[origin])
        _text_cell(lanes, row, 2, FORMULA_NAMES[destination])
        lanes.cell(row=row, column=3, value=1.0)
    book.save(path)

    outcome = pipeline.run(path)
    # Total: 70 units over two lanes each, cost 1 per lane (hand computed): 70 + 30 + 40 = 140.
    assert outcome.result.total_cost == pytest.approx(140.0, abs=1e-6)

    written = openpyxl.load_workbook(path)
    seen = set()
    for name in written.sheetnames:
        if not name.startswith("LS "):
            continue
        for row in written[name].iter_rows():
            for cell in row:
                if cell.value in FORMULA_NAMES.values():
                    assert cell.data_type == "s", (name, cell.coordinate, cell.value)
                    seen.add(cell.value)
    assert seen == set(FORMULA_NAMES.values())  # every name appears in the results, as text
    with zipfile.ZipFile(path) as z:
        new_parts = [n for n in z.namelist() if n.startswith("xl/worksheets/")]
        assert not any(b"<f>" in z.read(n) or b"<f " in z.read(n) for n in new_parts)


def test_macros_are_kept_byte_for_byte_and_never_run(tmp_path):
    # Nothing in lanesolve can run a macro: calamine only reads cell values, and the writer copies vbaProject.bin
    # as opaque bytes. The stand-in project is not even valid VBA, so any attempt to interpret it would fail.
    path = write_workbook(tmp_path / "macros.xlsm", valid_sheets())
    wbk.make_macro(path)
    before = wbk.members(path)
    pipeline.run(path)
    after = wbk.members(path)
    assert after["xl/vbaProject.bin"] == wbk.FAKE_VBA
    assert "macroEnabled" in after["[Content_Types].xml"].decode()
    assert all(after[n] == data for n, data in before.items() if n not in wbk.EDITED_PARTS)
    assert "LS Summary" in openpyxl.load_workbook(path, keep_vba=True).sheetnames


# ----------------------------------------------------------------------------------------------------------------
# files that are not files: a named pipe would block the first open forever, /dev/zero never ends


def test_workbook_that_is_a_fifo_is_refused_without_opening_it(tmp_path):
    fifo = tmp_path / "book.xlsx"
    os.mkfifo(fifo)
    with pytest.raises(WorkbookError, match=r"named pipe \(FIFO\), not a file"):
        pipeline.run(fifo, write=False)
    result = CliRunner().invoke(main, ["check", str(fifo)])
    assert result.exit_code == 1 and "named pipe" in result.output


def _with_lanes_file(tmp_path, target_maker):
    sheets = valid_sheets()
    sheets["Settings"].append(["lanes_file", "lanes.csv"])
    book = write_workbook(tmp_path / "book.xlsx", sheets)
    target_maker(tmp_path / "lanes.csv")
    return book


def test_lanes_file_that_is_a_fifo_is_refused(tmp_path):
    book = _with_lanes_file(tmp_path, os.mkfifo)
    with pytest.raises(WorkbookError, match=r"Settings.*lanes_file 'lanes.csv'.*named pipe"):
        pipeline.run(book, write=False)


def test_lanes_file_linked_to_dev_zero_is_refused(tmp_path):
    book = _with_lanes_file(tmp_path, lambda path: path.symlink_to("/dev/zero"))
    with pytest.raises(WorkbookError, match=r"lanes_file 'lanes.csv'.*is a device"):
        pipeline.run(book, write=False)


def test_lanes_file_larger_than_the_bound_is_refused_before_reading(tmp_path, monkeypatch):
    from lanesolve.read import lanes_file

    book = _with_lanes_file(tmp_path, lambda path: path.write_text("origin,destination,cost_per_unit\n" * 40))
    monkeypatch.setattr(lanes_file, "MAX_BYTES", 100)  # the real bound is 2 GiB; the rule is the same
    with pytest.raises(WorkbookError, match=r"lanes_file 'lanes.csv'.*more than the 100 lanesolve reads"):
        pipeline.run(book, write=False)
