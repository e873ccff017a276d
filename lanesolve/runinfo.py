"""Facts about one run (paths, the input's checksum, version, start time) that results and reports show."""

from __future__ import annotations

import datetime as _dt
import hashlib
from dataclasses import dataclass, field
from pathlib import Path

from lanesolve import __version__


@dataclass
class RunInfo:
    """Facts about one run that the result sheets, the report and ``--json`` show beside the plan."""

    input_path: str
    output_path: str
    summary_path: str
    checksum: str
    version: str = __version__
    started: str = field(default_factory=lambda: _dt.datetime.now().astimezone().isoformat(timespec="seconds"))


def file_checksum(path: str | Path) -> str:
    """SHA-256 of the file's bytes, hex."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            digest.update(chunk)
    return digest.hexdigest()
