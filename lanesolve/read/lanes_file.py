"""Read the lanes file named by the Settings ``lanes_file``: a CSV or Parquet table with the Lanes columns.

Strategic lane sets outgrow a sheet (a spreadsheet holds at most 1,048,576 rows and is slow to read), so the lanes may
come from a file beside the workbook. This module only turns the file into cells laid out like a sheet -- a header
row and one record per line -- so :mod:`lanesolve.read.validate` checks them with exactly the code it uses for the Lanes
sheet, and names the file (as the sheet) and the line in its messages.

Cells as the validator expects them from a sheet:

- CSV: every field is text. Fields under a number column (by the contract) that parse as a finite number become
  floats, so they are not flagged as "numbers stored as text"; anything else stays text for the validator to judge
  (``"1,5"``, ``"ten"``, ``"nan"``). Id and text columns stay text, so an id ``007`` keeps its zeros. An empty field is
  blank. Blank lines are kept (and then skipped as blank records) so that ``row`` is the line number, header = line 1;
  a quoted field that spans lines shifts the numbering of the lines after it.
- Parquet: values as stored (numbers, text, booleans; nulls are blank); ``row`` is the record's position + 2, as if
  the header were row 1.
"""

from __future__ import annotations

import importlib.util
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from lanesolve import contract
from lanesolve.errors import Problem, WorkbookError
from lanesolve.read import source

#: Suffixes accepted for a lanes file, and the reader of each.
SUFFIXES = (".csv", ".parquet", ".pq")
#: Largest lanes file read (2 GiB): checked from its size before reading and enforced while reading. Far above a
#: strategic lane set (a million lanes of CSV is about 60 MB) and below what a 64-bit machine reads into memory.
MAX_BYTES = 2 << 30
PARQUET_HINT = 'install pyarrow to read Parquet files: pip install "lanesolve[parquet]" (or save the lanes as .csv)'


@dataclass
class LanesFile:
    """The cells of a lanes file laid out like a sheet.

    Attributes
    ----------
    label : str
        The name messages use for the file (as they use a sheet's name): the setting's value as written.
    path : Path
        The file that was read.
    header : list
        The header row (row 1).
    data : DataFrame
        One record per row (row 2 onwards), columns numbered like ``header`` positions, object dtype; blank cells
        are ``""``.
    """

    label: str
    path: Path
    header: list
    data: pd.DataFrame


def resolve(workbook_path: str | Path, value: str) -> Path:
    """The lanes file's path: ``value`` relative to the workbook's folder (an absolute ``value`` is kept)."""
    return Path(workbook_path).resolve().parent / Path(value).expanduser()


def read_lanes_file(workbook_path: str | Path, value: str) -> LanesFile:
    """Read the lanes file named by the Settings ``lanes_file`` value.

    Parameters
    ----------
    workbook_path : path-like
        The workbook whose Settings name the file; a relative ``value`` is taken from its folder.
    value : str
        The setting's value as written.

    Returns
    -------
    LanesFile

    Raises
    ------
    WorkbookError
        One problem on the Settings sheet (column value) naming the file: the suffix is not .csv, .parquet or .pq;
        the file does not exist, is a folder or cannot be read; a Parquet file without pyarrow installed; the
        file is not valid CSV/Parquet, not UTF-8 text, or has no header row.

    Examples
    --------
    >>> import tempfile, os
    >>> folder = tempfile.mkdtemp()
    >>> with open(os.path.join(folder, "lanes.csv"), "w") as fh:
    ...     _ = fh.write("origin,destination,cost_per_unit\\nD1,007,2.5\\n")
    >>> lanes = read_lanes_file(os.path.join(folder, "plan.xlsx"), "lanes.csv")
    >>> lanes.header, lanes.data.iloc[0].tolist()
    (['origin', 'destination', 'cost_per_unit'], ['D1', '007', 2.5])
    """
    label = str(value).strip()
    path = resolve(workbook_path, label)

    def fail(message: str, hint: str) -> WorkbookError:
        return WorkbookError(Problem("Settings", None, "value", label, f"lanes_file '{label}': {message}", hint))

    suffix = path.suffix.lower()
    if suffix not in SUFFIXES:
        raise fail(f"'{path.suffix or 'no suffix'}' is not a lanes file type lanesolve reads",
                   "save the lanes as .csv (comma separated, UTF-8) or .parquet, and name that file")
    if not path.exists():
        raise fail(f"no such file ({path})",
                   "check the name; a relative path is taken from the workbook's folder")
    if path.is_dir():
        raise fail(f"{path} is a folder, not a file", "name the CSV or Parquet file inside it")
    try:
        stream = source.open_bounded(path, MAX_BYTES)  # refuses a pipe or device before opening, and bounds reading
    except ValueError as exc:
        raise fail(str(exc), "name a regular CSV or Parquet file of at most 2 GiB (split a larger one)") from exc
    except OSError as exc:
        raise fail(f"{path} cannot be opened: {exc.strerror or exc}", "check that you may read the file") from exc

    with stream:
        header, data = (_read_csv if suffix == ".csv" else _read_parquet)(stream, fail)
    return LanesFile(label, path, header, data)


def _number_columns(header: list) -> list[int]:
    """Positions of the header cells that name a contract number column of the Lanes sheet."""
    numbers = {col.name for col in contract.LANES.columns if col.kind == contract.NUMBER}
    return [i for i, name in enumerate(header) if contract.normalize(name) in numbers]


def _read_csv(path: Path, fail) -> tuple[list, pd.DataFrame]:
    try:
        # All text, nothing read as NaN: the validator decides what a field means, as for a sheet's cells. The C
        # engine reads 100k lanes in a fraction of a second; utf-8-sig drops the byte-order mark some programs write.
        cells = pd.read_csv(path, header=None, dtype=str, keep_default_na=False, na_filter=False,
                            skip_blank_lines=False, encoding="utf-8-sig", engine="c")
    except pd.errors.EmptyDataError as exc:
        raise fail("the file is empty", "write the Lanes headers in line 1 and one lane per line") from exc
    except UnicodeDecodeError as exc:
        raise fail(f"the file is not UTF-8 text ({exc.reason} at byte {exc.start})",
                   "save it as CSV UTF-8 from the spreadsheet program") from exc
    except (pd.errors.ParserError, ValueError, OSError) as exc:
        raise fail(f"the file could not be read as CSV ({str(exc).strip()})",
                   "check that every line has the same number of comma-separated fields") from exc
    if cells.empty:
        raise fail("the file is empty", "write the Lanes headers in line 1 and one lane per line")
    header = [str(h).strip() for h in cells.iloc[0].tolist()]
    data = cells.iloc[1:].reset_index(drop=True).astype(object)
    data.columns = range(data.shape[1])
    # Short lines are padded with NaN by the parser; to the validator an absent field is a blank cell.
    data = data.where(data.notna(), "")
    for index in _number_columns(header):
        text = data[index].str.strip()
        parsed = pd.to_numeric(text, errors="coerce")
        # "1.200" parses, but may mean 1200: such text stays text so the validator reports it as ambiguous.
        unsure = (text.str.fullmatch(contract.AMBIGUOUS_POINT) | text.str.fullmatch(contract.NUMBER_WITH_POINTS))
        plain = np.isfinite(parsed.to_numpy(dtype=float)) & ~unsure.to_numpy()
        if plain.any():
            column = data[index].copy()
            column[plain] = parsed[plain].astype(float)
            data[index] = column
    return header, data


def _read_parquet(path: Path, fail) -> tuple[list, pd.DataFrame]:
    if importlib.util.find_spec("pyarrow") is None:
        raise fail("reading Parquet needs the pyarrow package, which is not installed", PARQUET_HINT)
    try:
        import pyarrow.parquet as pq

        table = pq.read_table(path)
        frame = table.to_pandas()
        # Arrow tells a missing value (null: a blank cell) from a NaN (a value, reported as NaN); pandas does not.
        nulls = {name: table.column(name).is_null().to_numpy(zero_copy_only=False) for name in table.column_names}
    except (ImportError, ValueError, OSError) as exc:
        raise fail(f"the file could not be read as Parquet ({exc})", "write it again as Parquet, or as .csv") from exc
    except Exception as exc:  # pyarrow's own error types (ArrowInvalid...) are not importable without pyarrow
        if type(exc).__module__.startswith("pyarrow"):
            raise fail(f"the file could not be read as Parquet ({exc})",
                       "write it again as Parquet, or as .csv") from exc
        raise
    header = [str(h) for h in frame.columns]
    data = frame.astype(object)
    for index, name in enumerate(frame.columns):
        null = nulls.get(name)
        if null is not None and null.any():
            column = data.iloc[:, index].copy()
            column[null] = ""
            data.iloc[:, index] = column
    data.columns = range(data.shape[1])
    return header, data.reset_index(drop=True)
