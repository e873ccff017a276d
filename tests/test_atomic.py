"""Whole-or-nothing writes: the previous file survives every failure, and dead runs' leftovers are cleared."""

import os
import time

import pytest

from lanesolve.write import atomic
from lanesolve.errors import LanesolveError, WriteError


def test_clean_block_replaces_the_file(tmp_path):
    path = tmp_path / "summary.html"
    path.write_bytes(b"old")
    with atomic.replacing(path, "the summary") as handle:
        handle.write(b"new")
    assert path.read_bytes() == b"new"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["summary.html"]


def test_exception_in_the_block_keeps_the_old_file_and_no_temporary(tmp_path):
    path = tmp_path / "summary.html"
    path.write_bytes(b"old")
    with pytest.raises(WriteError, match="could not write the summary .*boom.*left as it was"):
        with atomic.replacing(path, "the summary") as handle:
            handle.write(b"half")
            raise ValueError("boom")
    assert path.read_bytes() == b"old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["summary.html"]


def test_lanesolve_errors_pass_through_unchanged(tmp_path):
    class Custom(LanesolveError):
        pass

    with pytest.raises(Custom):
        with atomic.replacing(tmp_path / "x.bin", "the file"):
            raise Custom("mine")


def test_new_file_keeps_the_replaced_files_permissions(tmp_path):
    path = tmp_path / "plan.xlsx"
    path.write_bytes(b"old")
    os.chmod(path, 0o640)
    with atomic.replacing(path, "the workbook") as handle:
        handle.write(b"new")
    assert (os.stat(path).st_mode & 0o777) == 0o640


def test_missing_folder_is_a_clear_write_error(tmp_path):
    with pytest.raises(WriteError, match="cannot write into the folder"):
        with atomic.replacing(tmp_path / "nowhere" / "x.html", "the summary"):
            pass


def test_stale_temporaries_are_removed_and_fresh_ones_kept(tmp_path):
    path = tmp_path / "plan [v2].xlsx"  # brackets would be a glob pattern if not escaped
    stale = tmp_path / ".plan [v2].xlsx.abc123.tmp"
    fresh = tmp_path / ".plan [v2].xlsx.def456.tmp"
    other = tmp_path / ".other.xlsx.abc123.tmp"
    for leftover in (stale, fresh, other):
        leftover.write_bytes(b"partial")
    hour_ago = time.time() - 2 * atomic.STALE_AFTER_S
    os.utime(stale, (hour_ago, hour_ago))
    os.utime(other, (hour_ago, hour_ago))
    assert atomic.remove_stale_temporaries(path) == [stale]
    assert fresh.exists() and other.exists() and not stale.exists()
