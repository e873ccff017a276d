"""Files that are not what they claim, other workbook kinds, and empty workbooks -- end to end through pipeline.run.

References: the ZIP local header signature ``PK\\x03\\x04`` (PKWARE APPNOTE 4.3.7); an encrypted OOXML workbook is an
OLE compound file holding an ``EncryptedPackage`` stream (MS-OFFCRYPTO 2.3.4.4), made here with msoffcrypto-tool;
.xls and .ods copies are made by LibreOffice (an independent writer) and their cells compared with what openpyxl
reads from the original .xlsx.
"""

from __future__ import annotations

import json
import shutil
import subprocess
import zipfile
from pathlib import Path

import openpyxl
import pytest
from click.testing import CliRunner

from conftest import valid_sheets, write_workbook
from lanesolve.read import guard
from lanesolve import pipeline
from lanesolve.read import reader
from lanesolve.cli import main
from lanesolve.errors import WorkbookError, WriteError


@pytest.fixture
def book(tmp_path):
    return write_workbook(tmp_path / "plan.xlsx", valid_sheets())


def _refused(path, pattern):
    with pytest.raises(WorkbookError, match=pattern):
        pipeline.run(path, write=False)
    result = CliRunner().invoke(main, ["solve", str(path)])
    # Exit code 1 through the CLI's own error path: click reports it as SystemExit, anything else is a traceback.
    assert result.exit_code == 1, result.output
    assert result.exception is None or isinstance(result.exception, SystemExit), result.exception
    assert "Traceback" not in result.output


def test_text_file_renamed_xlsx(tmp_path):
    path = tmp_path / "lanes.xlsx"
    path.write_text("origin,destination,cost_per_unit\nNorth Yard,Alder Foods,2.5\n")
    _refused(path, r"is a text file \(perhaps CSV\).*save it as \.xlsx")


def test_truncated_workbook(tmp_path, book):
    data = book.read_bytes()
    path = tmp_path / "cut.xlsx"
    path.write_bytes(data[: len(data) // 2])
    _refused(path, r"damaged or incomplete")


def test_zero_byte_workbook(tmp_path):
    path = tmp_path / "empty.xlsx"
    path.write_bytes(b"")
    _refused(path, r"is empty")


def test_really_encrypted_workbook(tmp_path, book):
    ooxml = pytest.importorskip("msoffcrypto.format.ooxml", reason="msoffcrypto-tool makes the encrypted file")
    path = tmp_path / "locked.xlsx"
    with open(book, "rb") as plain, open(path, "wb") as out:
        ooxml.OOXMLFile(plain).encrypt("invented-password", out)
    assert path.read_bytes()[:8] == b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"  # an OLE container, as MS-OFFCRYPTO says
    _refused(path, r"protected with a password")


def test_workbook_without_any_sheet(tmp_path, book):
    # Remove every <sheet> from workbook.xml: a package spreadsheet programs would call empty.
    with zipfile.ZipFile(book) as z:
        members = {n: z.read(n) for n in z.namelist()}
    text = members["xl/workbook.xml"].decode()
    start, end = text.index("<sheets>"), text.index("</sheets>") + len("</sheets>")
    members["xl/workbook.xml"] = (text[:start] + "<sheets/>" + text[end:]).encode()
    path = tmp_path / "nosheets.xlsx"
    with zipfile.ZipFile(path, "w") as z:
        for name, data in members.items():
            z.writestr(name, data)
    with pytest.raises(WorkbookError) as info:
        pipeline.run(path, write=False)
    assert {p.sheet for p in info.value.problems} >= {"Depots", "Customers", "Lanes"}


def test_workbook_with_only_an_empty_sheet(tmp_path):
    path = tmp_path / "blank.xlsx"
    openpyxl.Workbook().save(path)  # one empty sheet named "Sheet"
    with pytest.raises(WorkbookError) as info:
        pipeline.run(path, write=False)
    assert all("has no sheet named" in p.message for p in info.value.problems)
    assert {p.sheet for p in info.value.problems} == {"Depots", "Customers", "Lanes"}


def test_required_sheets_present_but_empty(make_workbook):
    path = make_workbook({"Depots": [], "Customers": [], "Lanes": []})
    with pytest.raises(WorkbookError) as info:
        pipeline.run(path, write=False)
    # Each required sheet lacks its required columns, reported in row 1 with the column's name.
    missing = {(p.sheet, p.column) for p in info.value.problems if p.row == 1}
    assert {("Depots", "depot"), ("Customers", "demand"), ("Lanes", "cost_per_unit")} <= missing


def test_binary_workbook_part_is_not_scanned_as_xml(tmp_path, book):
    # An .xlsb package names a binary main part (xl/workbook.bin); the reader must hand it to calamine instead of
    # calling it damaged XML. A fake binary part is enough to test that routing.
    with zipfile.ZipFile(book) as z:
        members = {n: z.read(n) for n in z.namelist()}
    members["_rels/.rels"] = members["_rels/.rels"].replace(b"xl/workbook.xml", b"xl/workbook.bin")
    members["xl/workbook.bin"] = b"\x83\x01\x00binary records"
    path = tmp_path / "fake.xlsb"
    with zipfile.ZipFile(path, "w") as z:
        for name, data in members.items():
            z.writestr(name, data)
    assert reader._xlsx_sheet_parts(path) == {}


# ----------------------------------------------------------------------------------------------------------------
# .xls and .ods, written by LibreOffice


def _convert(source: Path, kind: str, folder: Path) -> Path:
    soffice = shutil.which("soffice") or shutil.which("libreoffice")
    if soffice is None:
        pytest.skip("LibreOffice is not installed")
    profile = folder / "lo-profile"
    try:
        subprocess.run([soffice, f"-env:UserInstallation=file://{profile}", "--headless", "--convert-to", kind,
                        "--outdir", str(folder), str(source)], check=True, capture_output=True, timeout=180)
    except (subprocess.SubprocessError, OSError) as exc:
        pytest.skip(f"LibreOffice could not convert: {exc}")
    out = folder / f"{source.stem}.{kind}"
    if not out.exists():
        pytest.skip("LibreOffice wrote no file")
    return out


@pytest.fixture(scope="module")
def converted(tmp_path_factory):
    folder = tmp_path_factory.mktemp("kinds")
    original = write_workbook(folder / "plan.xlsx", valid_sheets())
    return original, {kind: _convert(original, kind, folder) for kind in ("xls", "ods")}


def _openpyxl_cells(path: Path) -> dict[str, list[list]]:
    book = openpyxl.load_workbook(path, data_only=True)
    return {ws.title: [["" if v is None else v for v in row] for row in ws.iter_rows(values_only=True)]
            for ws in book.worksheets}


@pytest.mark.slow  # converts with LibreOffice; CI runs it
@pytest.mark.parametrize("kind", ["xls", "ods"])
def test_other_kinds_read_the_same_cells_as_openpyxl(converted, kind):
    original, copies = converted
    raw = reader.read_workbook(copies[kind])
    expected = _openpyxl_cells(original)
    assert list(raw.sheets) == list(expected)
    for name, rows in expected.items():
        got = [row + [""] * (len(rows[0]) - len(row)) for row in raw.sheets[name].rows]
        assert len(got) == len(rows), name
        for got_row, want_row in zip(got, rows):
            for a, b in zip(got_row, want_row):
                assert a == pytest.approx(b) if isinstance(b, float) else a == b, (name, got_row, want_row)


@pytest.mark.slow  # converts with LibreOffice; CI runs it
@pytest.mark.parametrize("kind", ["xls", "ods"])
def test_other_kinds_solve_to_the_xlsx_plan(converted, kind, tmp_path):
    original, copies = converted
    path = shutil.copy(copies[kind], tmp_path / copies[kind].name)
    want = pipeline.run(original, write=False).result
    got = pipeline.run(path, write=False).result
    assert got.status == want.status
    assert got.total_cost == pytest.approx(want.total_cost, rel=1e-9)


@pytest.mark.slow  # converts with LibreOffice; CI runs it
@pytest.mark.parametrize("kind", ["xls", "ods"])
def test_write_back_into_other_kinds_is_refused_and_the_file_kept(converted, kind, tmp_path):
    _original, copies = converted
    path = Path(shutil.copy(copies[kind], tmp_path / copies[kind].name))
    before = path.read_bytes()
    with pytest.raises(WriteError, match=r"nothing was written|results were not written"):
        pipeline.run(path)
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == [path.name]  # no temp file, no summary, no lock file
    with pytest.raises(WriteError, match=r"writes result sheets only into \.xlsx or \.xlsm.*save it as \.xlsx"):
        guard.check_write_target(path, path)
    with pytest.raises(WriteError, match=r"writes result sheets only into \.xlsx"):
        guard.check_write_target(path, tmp_path / "solved.xlsx")


def test_check_write_target_accepts_xlsx_and_refuses_odd_output_names(book, tmp_path):
    guard.check_write_target(book, book)
    guard.check_write_target(book, tmp_path / "copy.xlsx")
    with pytest.raises(WriteError, match=r"must be an \.xlsx or \.xlsm file"):
        guard.check_write_target(book, tmp_path / "copy.csv")
    fake = tmp_path / "fake.xlsx"
    fake.write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\0" * 504)  # an OLE file named .xlsx
    with pytest.raises(WriteError, match=r"binary"):
        guard.check_write_target(fake, fake)


# PNG signature: the eight bytes of the PNG specification (ISO/IEC 15948, section 5.2).
PNG_HEAD = b"\x89PNG\r\n\x1a\n" + b"\0" * 64


@pytest.mark.parametrize("kind, contents, words", [
    ("csv", lambda _book: b"origin,destination,cost_per_unit\nA,B,1\n", "a text file (perhaps CSV)"),
    ("empty", lambda _book: b"", "is empty"),
    ("truncated", lambda book: book.read_bytes()[:300], "damaged or incomplete"),
    ("png", lambda _book: PNG_HEAD, "not a workbook"),
])
def test_solve_calls_a_file_that_is_no_workbook_an_input_error(tmp_path, book, kind, contents, words):
    path = tmp_path / f"{kind}.xlsx"
    path.write_bytes(contents(book))
    result = CliRunner().invoke(main, ["solve", str(path), "--json"])
    assert result.exit_code == 1, result.output
    doc = json.loads(result.stdout)
    assert doc["status"] == "input_error", doc
    assert words in doc["error"] and "binary" not in doc["error"] and "reads it" not in doc["error"]
