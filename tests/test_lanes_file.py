"""Settings lanes_file: lanes from a CSV (or Parquet) file beside the workbook, read in addition to the Lanes sheet
and checked by the same code.

The reference for the equivalence checks is the workbook itself: moving lanes from the sheet into the file must
leave the validated lanes and the optimal cost unchanged (cost compared with a tolerance). CSV line numbers are
counted as a text editor shows them (header = line 1), which is also Python's ``csv`` module's ``line_num``.
Places and companies are invented.
"""

from __future__ import annotations

import importlib.util

import pytest

from lanesolve.read import lanes_file
from lanesolve import pipeline
from lanesolve.read import validate
from lanesolve.errors import WorkbookError
from lanesolve.read.reader import read_workbook

from conftest import valid_sheets


def load(path):
    return validate.validate(read_workbook(path))


def write_csv(path, rows):
    path.write_text("\n".join(",".join("" if v is None else str(v) for v in row) for row in rows) + "\n",
                    encoding="utf-8")
    return path


def split_lanes(n_in_file: int):
    """VALID_SHEETS with its last ``n_in_file`` lanes moved from the sheet to rows for a CSV file."""
    sheets = valid_sheets()
    header, *lanes = sheets["Lanes"]
    sheets["Lanes"] = [header, *lanes[:len(lanes) - n_in_file]]
    sheets["Settings"].append(["lanes_file", "lanes.csv"])
    return sheets, [header, *lanes[len(lanes) - n_in_file:]]


def test_file_lanes_are_read_with_the_sheet_lanes(make_workbook, tmp_path):
    whole = make_workbook(valid_sheets(), "whole.xlsx")
    sheets, file_rows = split_lanes(3)
    write_csv(tmp_path / "lanes.csv", file_rows)
    split = make_workbook(sheets, "split.xlsx")
    whole_net, _ = load(whole)
    split_net, warnings = load(split)
    assert warnings == []
    keep = ["origin", "destination", "mode", "cost_per_unit", "capacity", "fixed_cost", "active"]
    assert split_net.lanes[keep].to_dict("records") == whole_net.lanes[keep].to_dict("records")
    sources = split_net.cost_sources()
    assert sources["sheet"].tolist() == ["Lanes", "Lanes", "lanes.csv", "lanes.csv", "lanes.csv"]
    assert split_net.lanes["row"].tolist() == [2, 3, 2, 3, 4]
    a = pipeline.run(whole, write=False).result
    b = pipeline.run(split, write=False).result
    assert a.total_cost == pytest.approx(b.total_cost, rel=1e-9)


def test_lanes_sheet_may_be_absent_or_empty(make_workbook, tmp_path):
    sheets, file_rows = split_lanes(5)
    write_csv(tmp_path / "lanes.csv", file_rows)
    del sheets["Lanes"]
    network, _ = load(make_workbook(sheets, "absent.xlsx"))
    assert len(network.lanes) == 5
    sheets["Lanes"] = []
    network, _ = load(make_workbook(sheets, "empty.xlsx"))
    assert len(network.lanes) == 5


def test_errors_in_the_file_name_the_file_line_and_column(make_workbook, tmp_path):
    sheets, file_rows = split_lanes(3)
    file_rows[1][2] = "ten"                 # line 2: cost_per_unit not a number
    file_rows[3][0] = "Nowhere Depot"       # line 5 (after the blank line 4): unknown origin
    file_rows.insert(3, [None] * len(file_rows[0]))
    write_csv(tmp_path / "lanes.csv", file_rows)
    with pytest.raises(WorkbookError) as info:
        load(make_workbook(sheets))
    found = {(p.sheet, p.row, p.column) for p in info.value.problems}
    assert ("lanes.csv", 2, "cost_per_unit") in found and ("lanes.csv", 5, "origin") in found
    assert all(p.sheet == "lanes.csv" for p in info.value.problems)


def test_missing_required_column_in_the_file(make_workbook, tmp_path):
    sheets, file_rows = split_lanes(2)
    write_csv(tmp_path / "lanes.csv", [row[1:] for row in file_rows])  # no origin column
    with pytest.raises(WorkbookError) as info:
        load(make_workbook(sheets))
    problem = next(p for p in info.value.problems if p.sheet == "lanes.csv")
    assert (problem.row, problem.column) == (1, "origin") and "missing" in problem.message


def test_duplicate_lane_across_sheet_and_file_names_both(make_workbook, tmp_path):
    sheets, file_rows = split_lanes(2)
    file_rows.append(sheets["Lanes"][1])  # North Yard -> Midway, road: also Lanes row 2
    write_csv(tmp_path / "lanes.csv", file_rows)
    with pytest.raises(WorkbookError) as info:
        load(make_workbook(sheets))
    problem = next(p for p in info.value.problems if "already appears" in p.message)
    assert (problem.sheet, problem.row) == ("lanes.csv", 4) and "Lanes row 2" in problem.message


def test_ids_in_the_file_stay_text(make_workbook, tmp_path):
    sheets = valid_sheets()
    sheets["Customers"].append(["007", 5, 10])
    sheets["Settings"].append(["lanes_file", "lanes.csv"])
    write_csv(tmp_path / "lanes.csv", [["origin", "destination", "cost_per_unit"], ["Midway", "007", "1.5"]])
    network, warnings = load(make_workbook(sheets))
    file_lane = network.lanes.iloc[-1]
    assert file_lane["destination"] == "007" and file_lane["cost_per_unit"] == pytest.approx(1.5, abs=1e-12)
    assert warnings == []  # numbers in a CSV are text by nature: no "number stored as text" warning


@pytest.mark.parametrize("value, words", [("missing.csv", "no such file"), ("lanes.txt", "not a lanes file type"),
                                          ("folder.csv", "is a folder")])
def test_unusable_file_is_a_settings_error(make_workbook, tmp_path, value, words):
    (tmp_path / "folder.csv").mkdir()
    (tmp_path / "lanes.txt").write_text("origin,destination,cost_per_unit\n", encoding="utf-8")
    sheets = valid_sheets()
    sheets["Settings"].append(["lanes_file", value])
    with pytest.raises(WorkbookError) as info:
        load(make_workbook(sheets))
    problem = next(p for p in info.value.problems if p.sheet == "Settings")
    assert value in problem.message and words in problem.message


def test_file_that_is_not_utf8_is_an_error(make_workbook, tmp_path):
    (tmp_path / "lanes.csv").write_bytes(b"origin,destination,cost_per_unit\n\xff\xfe,x,1\n")
    sheets = valid_sheets()
    sheets["Settings"].append(["lanes_file", "lanes.csv"])
    with pytest.raises(WorkbookError) as info:
        load(make_workbook(sheets))
    assert any("UTF-8" in p.message for p in info.value.problems)


def test_parquet_without_pyarrow_says_what_to_install(make_workbook, tmp_path, monkeypatch):
    (tmp_path / "lanes.parquet").write_bytes(b"PAR1")
    real = importlib.util.find_spec
    monkeypatch.setattr(lanes_file.importlib.util, "find_spec",
                        lambda name, *a: None if name == "pyarrow" else real(name, *a))
    sheets = valid_sheets()
    sheets["Settings"].append(["lanes_file", "lanes.parquet"])
    with pytest.raises(WorkbookError) as info:
        load(make_workbook(sheets))
    problem = next(p for p in info.value.problems if p.sheet == "Settings")
    assert 'pip install "lanesolve[parquet]"' in problem.hint


def test_parquet_file_is_read_like_csv(make_workbook, tmp_path):
    pytest.importorskip("pyarrow")
    import pandas as pd
    sheets, file_rows = split_lanes(3)
    frame = pd.DataFrame(file_rows[1:], columns=file_rows[0])
    frame.to_parquet(tmp_path / "lanes.parquet")
    sheets["Settings"][-1] = ["lanes_file", "lanes.parquet"]
    split, _ = load(make_workbook(sheets))
    whole, _ = load(make_workbook(valid_sheets(), "whole.xlsx"))
    assert split.lanes["cost_per_unit"].tolist() == pytest.approx(whole.lanes["cost_per_unit"].tolist(), abs=1e-12)


def test_ambiguous_number_text_in_a_csv_is_an_error_not_read_as_a_decimal(make_workbook, tmp_path):
    # pandas would parse "1.200" as 1.2; in many locales it is 1200 (the reading rule in the README, Numbers).
    sheets, file_rows = split_lanes(1)
    file_rows[1][2] = "1.200"
    write_csv(tmp_path / "lanes.csv", file_rows)
    with pytest.raises(WorkbookError) as caught:
        load(make_workbook(sheets))
    (problem,) = caught.value.problems
    assert (problem.sheet, problem.row, problem.column) == ("lanes.csv", 2, "cost_per_unit")
    assert problem.message == "'1.200' is ambiguous: 1.2 with a decimal point, or 1200 with a thousands point"


def test_parquet_nan_is_named_nan_and_a_null_is_a_blank(make_workbook, tmp_path):
    pa = pytest.importorskip("pyarrow")
    pq = pytest.importorskip("pyarrow.parquet")
    table = pa.table({"origin": ["North Yard", "South Yard"], "destination": ["Alder Foods", "Alder Foods"],
                      "cost_per_unit": [2.0, 3.0], "capacity": pa.array([None, float("nan")], type=pa.float64())})
    pq.write_table(table, tmp_path / "lanes.parquet")
    sheets = valid_sheets()
    sheets["Settings"].append(["lanes_file", "lanes.parquet"])
    with pytest.raises(WorkbookError) as caught:
        load(make_workbook(sheets))
    (problem,) = caught.value.problems  # row 2's null capacity is a blank: no limit, no problem
    assert (problem.sheet, problem.row, problem.column) == ("lanes.parquet", 3, "capacity")
    assert problem.message == "NaN is not a finite number"
