"""The input files as lanesolve reads them: regular files only, bounded reads, and the workbook's fingerprint.

References: POSIX ``stat`` file types (``S_ISREG``, ``S_ISFIFO``, ``S_ISCHR``) as Python's ``stat`` module exposes
them; SHA-256 from ``hashlib`` (FIPS 180-4) on the file's bytes.
"""

from __future__ import annotations

import hashlib
import os

import pytest

from lanesolve.read import source


def test_file_kinds_are_told_from_stat(tmp_path):
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    plain = tmp_path / "plain.csv"
    plain.write_text("x")
    assert source.file_kind(fifo) == "a named pipe (FIFO)"
    assert source.file_kind(tmp_path) == "a folder"
    assert source.file_kind("/dev/zero") == "a device"
    assert source.file_kind(plain) is None
    assert source.file_kind(tmp_path / "missing") is None


def test_open_bounded_refuses_a_fifo_without_blocking(tmp_path):
    fifo = tmp_path / "pipe.csv"
    os.mkfifo(fifo)
    with pytest.raises(ValueError, match="named pipe"):
        source.open_bounded(fifo, 1000)


def test_open_bounded_stops_a_file_that_grows_past_the_bound(tmp_path):
    path = tmp_path / "lanes.csv"
    path.write_bytes(b"a" * 50)
    with source.open_bounded(path, 100) as stream:
        with open(path, "ab") as grower:  # another program appends while lanesolve reads
            grower.write(b"b" * 200)
        with pytest.raises(OSError, match="grew past 100 bytes"):
            stream.read()


def test_open_bounded_reads_a_file_within_the_bound(tmp_path):
    path = tmp_path / "lanes.csv"
    path.write_bytes(b"origin,destination\nA,B\n")
    with source.open_bounded(path, 100) as stream:
        assert stream.read() == b"origin,destination\nA,B\n"


def test_fingerprint_hashes_the_bytes_and_sees_a_save_by_rename(tmp_path):
    path = tmp_path / "book.xlsx"
    path.write_bytes(b"first contents")
    mark = source.fingerprint(path)
    assert mark.sha256 == hashlib.sha256(b"first contents").hexdigest()
    assert not source.changed_since(mark, path)
    (tmp_path / "new.tmp").write_bytes(b"first contents")  # same bytes, new file: a save by rename
    os.replace(tmp_path / "new.tmp", path)
    assert source.changed_since(mark, path)


def test_changed_since_compares_the_bytes_when_the_stat_looks_the_same(tmp_path, monkeypatch):
    path = tmp_path / "book.xlsx"
    path.write_bytes(b"aaaa")
    mark = source.fingerprint(path)
    path.write_bytes(b"bbbb")
    # A file system with coarse times could show the same stat; the hash must still tell.
    monkeypatch.setattr(source.Fingerprint, "same_stat", lambda self, info: True)
    assert source.changed_since(mark, path)
