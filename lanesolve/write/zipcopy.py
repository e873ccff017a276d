"""A zip writer that copies members of another zip as their stored, compressed bytes.

Write-back keeps every part of the workbook it does not edit byte for byte. Decompressing such a part and
compressing it again gives the same content but costs most of the write-back on a large workbook (the input sheets
are the bulk of the file) and need not give the same compressed bytes. :class:`ZipSplicer` instead copies an
unchanged member as it is stored -- local file header, compressed data and data descriptor -- and only compresses
the members it is given as new content. The central directory is rebuilt at the end from the source's entries
(with the new offsets), using the ZIP64 extensions where a size, an offset or the member count needs them.

Reference: PKWARE, *APPNOTE.TXT - .ZIP File Format Specification*, version 6.3.10 (2022): section 4.3.7 (local file
header), 4.3.9 (data descriptor; its sizes are 8 bytes when the local header has a ZIP64 extra field), 4.3.12
(central directory header), 4.3.14-4.3.16 (ZIP64 end of central directory record and locator, end of central
directory record), 4.5.3 (the ZIP64 extended information extra field, header id 0x0001).
"""

from __future__ import annotations

import collections
import struct
import sys
import time
import zipfile
import zlib
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from typing import TYPE_CHECKING, BinaryIO

if TYPE_CHECKING:
    from concurrent.futures import Future

_LOCAL = struct.Struct("<4s2B4HL2L2H")  # local file header (APPNOTE 4.3.7), 30 bytes
_CENTRAL = struct.Struct("<4s4B4HL2L5H2L")  # central directory header (APPNOTE 4.3.12), 46 bytes
_END = struct.Struct("<4s4H2LH")  # end of central directory record (4.3.16), 22 bytes
_END64 = struct.Struct("<4sQ2H2L4Q")  # ZIP64 end of central directory record (4.3.14), 56 bytes
_LOCATOR64 = struct.Struct("<4sLQL")  # ZIP64 end of central directory locator (4.3.15), 20 bytes

_LOCAL_SIG = b"PK\x03\x04"
_CENTRAL_SIG = b"PK\x01\x02"
_DESCRIPTOR_SIG = b"PK\x07\x08"
_ZIP64_EXTRA = 0x0001

#: Above this a size or offset is written through ZIP64. The format's own limit is 0xFFFFFFFF; like Python's zipfile
#: the writer switches at 2**31 - 1, because some readers take these fields as signed numbers.
ZIP64_LIMIT = (1 << 31) - 1
#: Above this many members the count is written through ZIP64 (the 16-bit field's 0xFFFF is the ZIP64 marker).
COUNT_LIMIT = 0xFFFF - 1
_VERSION_ZIP64 = 45  # "version needed to extract" for ZIP64 (APPNOTE 4.4.3.2)
_VERSION_DEFLATE = 20
_UTF8_NAME = 0x800  # general purpose flag bit 11: the name is UTF-8
_HAS_DESCRIPTOR = 0x08  # general purpose flag bit 3: sizes and CRC follow the data
_CHUNK = 1 << 20
#: New content is encoded and compressed this many characters (or bytes) at a time.
_SLICE = 1 << 22
#: Bytes of new content queued for the writer's thread before the caller waits for the oldest step: room for a
#: large result sheet's XML, so the next sheet's cells are rendered while this one is compressed (the writer held a
#: whole sheet's text before it compressed in a thread of its own).
MAX_QUEUED_BYTES = 1 << 25


class ZipCopyError(Exception):
    """A member of the source zip is not where or what its central directory says; the caller reports it."""


@dataclass
class _Entry:
    """What the central directory needs of one member written."""

    name: bytes
    create_version: int
    create_system: int
    extract_version: int
    flags: int
    method: int
    dos_time: int
    dos_date: int
    crc: int
    compressed: int
    size: int
    extra: bytes
    comment: bytes
    internal_attr: int
    external_attr: int
    offset: int


def _strip_zip64(extra: bytes) -> bytes:
    """The extra field without its ZIP64 record (the writer adds its own where needed)."""
    kept, i = [], 0
    while i + 4 <= len(extra):
        header_id, size = struct.unpack_from("<2H", extra, i)
        if header_id != _ZIP64_EXTRA:
            kept.append(extra[i:i + 4 + size])
        i += 4 + size
    kept.append(extra[i:])  # trailing bytes too short for a record: kept as they were
    return b"".join(kept)


def _has_zip64(extra: bytes) -> bool:
    i = 0
    while i + 4 <= len(extra):
        header_id, size = struct.unpack_from("<2H", extra, i)
        if header_id == _ZIP64_EXTRA:
            return True
        i += 4 + size
    return False


class _Deflated:
    """One new member's content being compressed: raw deflate, as zip stores it (APPNOTE 4.4.5), its CRC-32 and
    size."""

    def __init__(self, level: int) -> None:
        self.compressor = zlib.compressobj(level, zlib.DEFLATED, -15)
        self.crc = 0
        self.size = 0
        self.parts: list[bytes] = []

    def count(self, data: bytes) -> None:
        """Add a slice to the CRC and size. Called in the caller's thread, so the writer's thread makes one zlib
        call a slice instead of two: after each such call, which releases the GIL, it waits for the caller to give
        the GIL back."""
        self.crc = zlib.crc32(data, self.crc)
        self.size += len(data)

    def compress(self, data: bytes) -> None:
        self.parts.append(self.compressor.compress(data))

    def finish(self) -> list[bytes]:
        self.parts.append(self.compressor.flush())
        return self.parts


def _dos_time(date_time: tuple) -> tuple[int, int]:
    year, month, day, hour, minute, second = date_time
    return (hour << 11) | (minute << 5) | (second // 2), ((max(year, 1980) - 1980) << 9) | (month << 5) | day


class ZipSplicer:
    """Write a zip into ``out``: members copied raw from a source zip, and new members compressed here.

    Parameters
    ----------
    out : binary file
        Written sequentially from its current position, which counts as offset 0 of the zip.
    background : bool
        Compress new members and write them in a thread of the writer's own, one step at a time and in the order
        they were added, while the caller makes the next piece of content. zlib releases the GIL while it
        compresses, so on a machine with two cores the sheet XML and its compression overlap; the bytes written
        are the same either way. Use the writer in a ``with`` block then, so its thread is stopped (and never
        writes into ``out`` again) when the block ends, by an error or not.

    Notes
    -----
    Call :meth:`close` once every member is written; it writes the central directory. The writer never seeks, so
    ``out`` may be any binary file opened for writing.
    """

    def __init__(self, out: BinaryIO, background: bool = False) -> None:
        self.out = out
        self.offset = 0
        self.entries: list[_Entry] = []
        self._pool = None
        if background:
            # Imported here: concurrent.futures (and the logging it imports) takes several milliseconds, which a
            # small workbook, written in the foreground, need not pay.
            from concurrent.futures import ThreadPoolExecutor

            self._pool = ThreadPoolExecutor(1, thread_name_prefix="lanesolve-zip")
        self._pending: collections.deque[tuple[Future, int]] = collections.deque()
        self._queued = 0
        self._failed = False

    def _write(self, data: bytes) -> None:
        self.out.write(data)
        self.offset += len(data)

    def copy(self, source: BinaryIO, info: zipfile.ZipInfo) -> None:
        """Copy one member of the open source zip file ``source`` (described by ``info``) as it is stored.

        Raises
        ------
        ZipCopyError
            The local header is missing or names another member, or the data descriptor the header announces is
            not there.
        """
        self._drain()  # copied here, in this thread, after every member queued before it
        source.seek(info.header_offset)
        head = source.read(_LOCAL.size)
        if len(head) != _LOCAL.size or head[:4] != _LOCAL_SIG:
            raise ZipCopyError(f"member {info.filename!r}: no local header where the central directory points")
        fields = _LOCAL.unpack(head)
        flags, dos_time, dos_date, name_length, extra_length = fields[3], fields[5], fields[6], fields[10], fields[11]
        name_extra = source.read(name_length + extra_length)
        name = name_extra[:name_length]
        expected = info.orig_filename.encode("utf-8" if info.flag_bits & _UTF8_NAME else "cp437")
        if name != expected:
            raise ZipCopyError(f"member {info.filename!r}: its local header names {name!r}")
        entry = _Entry(name, info.create_version, info.create_system, info.extract_version, info.flag_bits,
                       info.compress_type, dos_time, dos_date, info.CRC, info.compress_size, info.file_size,
                       _strip_zip64(info.extra), info.comment, info.internal_attr, info.external_attr, self.offset)
        self._write(head + name_extra)
        remaining = info.compress_size
        while remaining:
            chunk = source.read(min(remaining, _CHUNK))
            if not chunk:
                raise ZipCopyError(f"member {info.filename!r}: its data ends early")
            self._write(chunk)
            remaining -= len(chunk)
        if flags & _HAS_DESCRIPTOR:
            self._write(self._descriptor(source, info, _has_zip64(name_extra[name_length:])))
        self.entries.append(entry)

    @staticmethod
    def _descriptor(source: BinaryIO, info: zipfile.ZipInfo, zip64: bool) -> bytes:
        """The data descriptor after a member's data, as stored: an optional signature, the CRC and both sizes (8
        bytes each with ZIP64). The signature is optional (APPNOTE 4.3.9.3), so it is recognised only when the CRC
        follows it; a CRC that happens to equal the signature is then still read right."""
        sizes = 16 if zip64 else 8
        data = source.read(4 + 4 + sizes)
        crc = struct.pack("<L", info.CRC)
        if data[:4] == _DESCRIPTOR_SIG and data[4:8] == crc:
            return data
        if data[:4] == crc:
            return data[:4 + sizes]
        raise ZipCopyError(f"member {info.filename!r}: its data descriptor is missing or does not match")

    def add(self, name: str, content: str | bytes | Iterable[str | bytes], date_time: tuple | None = None,
            external_attr: int = 0o644 << 16, level: int = zlib.Z_DEFAULT_COMPRESSION) -> None:
        """Add a member holding ``content`` (text is written as UTF-8), deflate-compressed.

        ``content`` is text, bytes, or an iterable of text and bytes pieces written one after another (a sheet's XML
        as it is made). Text is encoded and compressed a slice at a time, so a large sheet's XML is never held a
        second time as bytes. With ``background`` the slices are compressed, and the member written, by the
        writer's thread while the caller makes the next piece.
        """
        date_time = date_time or time.localtime()[:6]
        deflated = _Deflated(level)
        for piece in (content,) if isinstance(content, (str, bytes)) else content:
            for start in range(0, len(piece), _SLICE):
                data = piece[start:start + _SLICE]
                data = data.encode("utf-8") if isinstance(data, str) else data
                deflated.count(data)
                self._run(deflated.compress, data, size=len(data))
        self._run(self._write_new, name, deflated, date_time, external_attr)

    def _write_new(self, name: str, deflated: "_Deflated", date_time: tuple, external_attr: int) -> None:
        """Write a member whose content has been compressed: its local header, then the compressed data."""
        parts = deflated.finish()
        crc, size = deflated.crc, deflated.size
        compressed = sum(len(p) for p in parts)
        encoded_name = name.encode("utf-8")
        flags = 0 if encoded_name.isascii() else _UTF8_NAME
        dos_time, dos_date = _dos_time(date_time)
        large = size > ZIP64_LIMIT or compressed > ZIP64_LIMIT
        version = _VERSION_ZIP64 if large else _VERSION_DEFLATE
        local_extra = struct.pack("<2H2Q", _ZIP64_EXTRA, 16, size, compressed) if large else b""
        entry = _Entry(encoded_name, _VERSION_DEFLATE, 0 if sys.platform == "win32" else 3, version, flags,
                       zipfile.ZIP_DEFLATED, dos_time, dos_date, crc, compressed, size, b"", b"", 0, external_attr,
                       self.offset)
        self._write(_LOCAL.pack(_LOCAL_SIG, version, 0, flags, zipfile.ZIP_DEFLATED, dos_time, dos_date, crc,
                                0xFFFFFFFF if large else compressed, 0xFFFFFFFF if large else size,
                                len(encoded_name), len(local_extra)) + encoded_name + local_extra)
        for part in parts:
            self._write(part)
        self.entries.append(entry)

    def _run(self, task: Callable[..., None], *args, size: int = 0) -> None:
        """Run a step of writing now, or queue it for the writer's thread (steps run one at a time, in order).
        ``size`` is the bytes of content the step holds. A step that failed there raises here, at a later call or
        at :meth:`close`; the steps after it are skipped."""
        if self._pool is None:
            task(*args)
            return
        self._pending.append((self._pool.submit(self._step, task, args), size))
        self._queued += size
        # Hold at most MAX_QUEUED_BYTES of content in the queue, and raise a failure as soon as it is seen.
        while self._pending and (self._pending[0][0].done() or self._queued > MAX_QUEUED_BYTES):
            self._settle()

    def _settle(self) -> None:
        """Wait for the oldest queued step; raise its failure."""
        future, size = self._pending.popleft()
        self._queued -= size
        future.result()

    def _step(self, task: Callable[..., None], args: tuple) -> None:
        if self._failed:
            return
        try:
            task(*args)
        except BaseException:
            self._failed = True
            raise

    def _drain(self) -> None:
        """Wait until every queued step has run; raise the first failure."""
        while self._pending:
            self._settle()

    def shutdown(self) -> None:
        """Stop the writer's thread: queued steps not yet started are dropped, a running one is waited for. Called
        on leaving a ``with`` block, whether or not it failed, so no thread writes into ``out`` afterwards."""
        if self._pool is not None:
            self._pending.clear()
            self._queued = 0
            self._pool.shutdown(wait=True, cancel_futures=True)
            self._pool = None

    def __enter__(self) -> "ZipSplicer":
        return self

    def __exit__(self, *exc_info) -> None:
        self.shutdown()

    def close(self) -> None:
        """Wait for the members queued, then write the central directory and its end records (ZIP64 ones where
        needed)."""
        self._drain()
        start = self.offset
        for e in self.entries:
            wide = []  # ZIP64 values in the order APPNOTE 4.5.3 fixes: size, compressed size, offset
            size, compressed, offset = e.size, e.compressed, e.offset
            if size > ZIP64_LIMIT:
                wide.append(size)
                size = 0xFFFFFFFF
            if compressed > ZIP64_LIMIT:
                wide.append(compressed)
                compressed = 0xFFFFFFFF
            if offset > ZIP64_LIMIT:
                wide.append(offset)
                offset = 0xFFFFFFFF
            extra = e.extra
            extract_version = e.extract_version
            if wide:
                extra = struct.pack(f"<2H{len(wide)}Q", _ZIP64_EXTRA, 8 * len(wide), *wide) + extra
                extract_version = max(extract_version, _VERSION_ZIP64)
            self._write(_CENTRAL.pack(_CENTRAL_SIG, e.create_version, e.create_system, extract_version, 0, e.flags,
                                      e.method, e.dos_time, e.dos_date, e.crc, compressed, size, len(e.name),
                                      len(extra), len(e.comment), 0, e.internal_attr, e.external_attr, offset)
                        + e.name + extra + e.comment)
        count, directory_size = len(self.entries), self.offset - start
        if count > COUNT_LIMIT or start > ZIP64_LIMIT or directory_size > ZIP64_LIMIT:
            end64 = self.offset
            self._write(_END64.pack(b"PK\x06\x06", _END64.size - 12, _VERSION_ZIP64, _VERSION_ZIP64, 0, 0, count,
                                    count, directory_size, start))
            self._write(_LOCATOR64.pack(b"PK\x06\x07", 0, end64, 1))
            # The 32-bit fields hold their ZIP64 marker where the value is in the ZIP64 record (APPNOTE 4.4.1.4).
            count16 = 0xFFFF if count > COUNT_LIMIT else count
            self._write(_END.pack(b"PK\x05\x06", 0, 0, count16, count16,
                                  0xFFFFFFFF if directory_size > ZIP64_LIMIT else directory_size,
                                  0xFFFFFFFF if start > ZIP64_LIMIT else start, 0))
        else:
            self._write(_END.pack(b"PK\x05\x06", 0, 0, count, count, directory_size, start, 0))
