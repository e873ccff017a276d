"""Refusing workbooks open in a spreadsheet program, and serialising two runs on one workbook."""

import multiprocessing
import time

import pytest

from lanesolve.write import locking
from lanesolve.errors import WriteError


def test_excel_owner_file_is_detected(tmp_path):
    book = tmp_path / "plan.xlsx"
    book.write_bytes(b"")
    (tmp_path / "~$plan.xlsx").write_bytes(b"owner")
    with pytest.raises(WriteError, match="open in a spreadsheet program"):
        locking.refuse_if_open(book)


def test_libreoffice_lock_file_is_detected(tmp_path):
    book = tmp_path / "plan.xlsx"
    (tmp_path / ".~lock.plan.xlsx#").write_text("user,host")
    assert locking.spreadsheet_lock_files(book) == [tmp_path / ".~lock.plan.xlsx#"]


def test_no_lock_file_passes(tmp_path):
    locking.refuse_if_open(tmp_path / "plan.xlsx")


def _hold(path, seconds, ready):
    with locking.workbook_lock(path):
        ready.set()
        time.sleep(seconds)


def test_second_run_refuses_while_the_first_holds_the_lock(tmp_path):
    book = tmp_path / "plan.xlsx"
    ready = multiprocessing.Event()
    holder = multiprocessing.Process(target=_hold, args=(book, 3.0, ready))
    holder.start()
    try:
        assert ready.wait(20)
        with pytest.raises(WriteError, match="another lanesolve run"):
            with locking.workbook_lock(book, wait_s=0.3):
                pass
    finally:
        holder.join()


def test_second_run_waits_for_a_short_first_run(tmp_path):
    book = tmp_path / "plan.xlsx"
    ready = multiprocessing.Event()
    holder = multiprocessing.Process(target=_hold, args=(book, 0.5, ready))
    holder.start()
    try:
        assert ready.wait(20)
        with locking.workbook_lock(book, wait_s=30):
            entered = True
    finally:
        holder.join()
    assert entered
    assert not (tmp_path / ".plan.xlsx.lanesolve-lock").exists()


def test_lock_file_of_another_workbook_does_not_block_this_one(tmp_path):
    # "~$plan.xlsx" is the lock file of plan.xlsx, which sits in the folder; it is not Excel's shortened lock file
    # of abplan.xlsx (Excel replaces the first two characters of a long name with ~$ -- recalled from memory).
    (tmp_path / "plan.xlsx").write_bytes(b"")
    (tmp_path / "~$plan.xlsx").write_bytes(b"owner")
    locking.refuse_if_open(tmp_path / "abplan.xlsx")
    with pytest.raises(WriteError, match="open in a spreadsheet program"):
        locking.refuse_if_open(tmp_path / "plan.xlsx")


def test_shortened_excel_lock_file_still_counts_when_no_other_workbook_owns_it(tmp_path):
    (tmp_path / "~$ekly-plan.xlsx").write_bytes(b"owner")
    assert locking.spreadsheet_lock_files(tmp_path / "weekly-plan.xlsx") == [tmp_path / "~$ekly-plan.xlsx"]


def test_libreoffice_lock_file_of_another_workbook_does_not_count(tmp_path):
    (tmp_path / ".~lock.other.xlsx#").write_text("user,host")
    assert locking.spreadsheet_lock_files(tmp_path / "plan.xlsx") == []
