"""A CSV file's head: line ends (LF, CR, CRLF), the byte-order mark, the header row and metadata, text columns, the last time."""

from __future__ import annotations

import io
import os
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Collection, Iterator

from adapters.base import FatalSourceError
from adapters.framing import T_LIMIT, shown

__all__ = ["MAGIC", "MAX_CSV_LINE", "SIGMA_PREFIX", "CsvHeader", "read_header", "text_columns", "last_time",
           "columns_to_parse"]

MAGIC = "regime recording"          # first metadata line of our own recordings
MAX_CSV_LINE = 1 << 16              # bytes in one CSV line (header, metadata or data) without its line end
SIGMA_PREFIX = "sigma_"
_BOM = b"\xef\xbb\xbf"              # UTF-8 byte-order mark (spreadsheets write it in "CSV UTF-8")
_LINE_END = re.compile(rb"\r\n|\r|\n")
_NUMERIC_NAMES = ("ne", "Te", "Ti", "B", "p0", "t", "seq")   # always parsed as numbers


@dataclass(frozen=True)
class CsvHeader:
    """What precedes the data: column names, `# key: value` metadata (values in order), where data starts."""

    columns: tuple[str, ...]
    metadata: dict[str, list[str]] = field(default_factory=dict)
    data_offset: int = 0              # byte offset of the first data line
    data_line: int = 1                # 1-based line number of the first data line
    ours: bool = False                # written by our recorder
    first_data: bytes = b""           # the first data line (which columns hold text)

    def first(self, key: str, default: str | None = None) -> str | None:
        values = self.metadata.get(key)
        return values[0] if values else default


def _raw_lines(fh: io.BufferedReader, path: object) -> Iterator[tuple[bytes, int]]:
    """(line without its end, bytes it took with its end) at LF, CR or CRLF; a line over MAX_CSV_LINE is fatal."""
    buf, eof = b"", False
    while True:
        m = _LINE_END.search(buf)
        if m is None or (not eof and m.end() == len(buf) and m.group() == b"\r"):   # a CR last: CRLF may follow
            if len(buf) > MAX_CSV_LINE + 2:
                raise FatalSourceError(f"{path}: a line of the header (or the first data line) is longer than "
                                       f"{MAX_CSV_LINE} bytes")
            if eof:
                if buf:
                    yield buf, len(buf)
                return
            more = fh.read(1 << 16)
            eof = not more
            buf += more
            continue
        yield buf[:m.start()], m.end()
        buf = buf[m.end():]


def read_header(path: str | os.PathLike[str]) -> CsvHeader:
    """Read the header row and the `#` metadata lines around it (before the first data line).

    Lines may end in LF, CR or CRLF; a UTF-8 byte-order mark is skipped; column names must be distinct."""
    columns: tuple[str, ...] | None = None
    meta: dict[str, list[str]] = {}
    ours = False
    offset = 0
    line_no = 0
    first = b""
    with open(path, "rb") as fh:
        for raw, took in _raw_lines(fh, path):
            line_no += 1
            if offset == 0 and raw.startswith(_BOM):
                raw, offset = raw[len(_BOM):], len(_BOM)
                took -= len(_BOM)
            text = raw.decode("utf-8", errors="replace").strip()
            if text.startswith("#"):
                body = text[1:].strip()
                if body.startswith(MAGIC):
                    ours = True
                if ":" in body:
                    key, _, value = body.partition(":")
                    meta.setdefault(key.strip(), []).append(value.strip())
            elif not text:
                pass
            elif columns is None:
                columns = tuple(c.strip().strip('"') for c in text.split(","))
            else:
                first = raw
                break
            offset += took
    if columns is None:
        raise FatalSourceError(f"{path}: no header row (a first line naming the columns, e.g. t,ne,Te)")
    dup = sorted({c for c in columns if columns.count(c) > 1})
    if dup:
        raise FatalSourceError(f"{path}: duplicate_key: the header names {', '.join(map(repr, map(shown, dup)))} "
                               "more than once")
    return CsvHeader(columns=columns, metadata=meta, data_offset=offset, data_line=line_no, ours=ours,
                     first_data=first)


def text_columns(header: CsvHeader, numeric: Collection[str] | None = None) -> tuple[str, ...]:
    """The columns that hold text, not numbers: ignored (never parsed). A column is numeric when named in
    ``numeric`` (the channel map's keys), a canonical key, ``t``, ``seq`` or ``sigma_X``; any other column
    is text when its first data value is not a number (an empty value is a missing number)."""
    fields = header.first_data.split(b",")
    out = []
    for j, name in enumerate(header.columns):
        if name in _NUMERIC_NAMES or name.startswith(SIGMA_PREFIX) or (numeric is not None and name in numeric):
            continue
        value = fields[j].strip() if j < len(fields) else b""
        if not value:
            continue
        try:
            float(value)
        except ValueError:
            out.append(name)
    return tuple(out)


def last_time(path: Path, header: CsvHeader, tcol: int, scale: float) -> float | None:
    """Data time of the last whole line, read from the file's tail (None if none parses)."""
    size = path.stat().st_size
    with open(path, "rb") as fh:
        fh.seek(max(header.data_offset, size - 65536))
        tail = fh.read()
    if b"\r" in tail:
        tail = tail.replace(b"\r\n", b"\n").replace(b"\r", b"\n")
    for raw in reversed(tail.split(b"\n")[:-1] if not tail.endswith(b"\n") else tail.split(b"\n")):
        fields = raw.split(b",")
        if len(fields) == len(header.columns) and not raw.startswith(b"#"):
            try:
                v = float(fields[tcol]) * scale
            except ValueError:
                continue
            if abs(v) <= T_LIMIT:
                return v
    return None


def columns_to_parse(header: CsvHeader, time_column: str, numeric: Collection[str] | None,
                     path: object) -> tuple[tuple[str, ...], tuple[int, ...]]:
    """(the text columns ignored, the indices of the columns parsed); no time column is fatal."""
    cols = header.columns
    if time_column not in cols:
        raise FatalSourceError(f"{path}: no time column {shown(time_column)!r} among "
                               f"{', '.join(shown(c) for c in cols)} "
                               f"(map one with a channel map entry of quantity 't')")
    ignored = tuple(c for c in text_columns(header, numeric) if c != time_column)
    return ignored, tuple(j for j, c in enumerate(cols) if c not in ignored)
