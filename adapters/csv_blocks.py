"""A CSV file read in blocks: header and metadata, the vectorised parse, the damaged-line fallback, the block index."""

from __future__ import annotations

import io
import math
import os
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np

from adapters.base import FatalSourceError
from adapters.batch import Batch

__all__ = ["MAGIC", "BLOCK_BYTES", "CsvHeader", "read_header", "last_time", "BlockReader", "rows_to_batch"]

MAGIC = "regime recording"          # first metadata line of our own recordings
BLOCK_BYTES = 4 << 20               # bytes read per chunk (bounded memory)
_EMPTY_FIELD = re.compile(rb"(?<=,)(?=,|\r?\n|$)|^(?=,)", re.MULTILINE)
_SIGMA_PREFIX = "sigma_"
_SEQ_MAX = (1 << 62) - 1

# (line number, reason token, why, the raw line, the seq it still shows or None)
OnDamaged = Callable[[int, str, str, bytes, int | None], None]


@dataclass(frozen=True)
class CsvHeader:
    """What precedes the data: column names, `# key: value` metadata (values in order), where data starts."""

    columns: tuple[str, ...]
    metadata: dict[str, list[str]] = field(default_factory=dict)
    data_offset: int = 0              # byte offset of the first data line
    data_line: int = 1                # 1-based line number of the first data line
    ours: bool = False                # written by our recorder

    def first(self, key: str, default: str | None = None) -> str | None:
        values = self.metadata.get(key)
        return values[0] if values else default


def read_header(path: str | os.PathLike[str]) -> CsvHeader:
    """Read the header row and the `#` metadata lines around it (before the first data line)."""
    columns: tuple[str, ...] | None = None
    meta: dict[str, list[str]] = {}
    ours = False
    offset = 0
    line_no = 0
    with open(path, "rb") as fh:
        while True:
            raw = fh.readline(1 << 20)
            if not raw:
                break
            line_no += 1
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
                break
            offset += len(raw)
    if columns is None:
        raise FatalSourceError(f"{path}: no header row (a first line naming the columns, e.g. t,ne,Te)")
    return CsvHeader(columns=columns, metadata=meta, data_offset=offset, data_line=line_no, ours=ours)


def last_time(path: Path, header: CsvHeader, tcol: int, scale: float) -> float | None:
    """Data time of the last whole line, read from the file's tail (None if none parses)."""
    size = path.stat().st_size
    with open(path, "rb") as fh:
        fh.seek(max(header.data_offset, size - 65536))
        tail = fh.read()
    for raw in reversed(tail.split(b"\n")[:-1] if not tail.endswith(b"\n") else tail.split(b"\n")):
        fields = raw.split(b",")
        if len(fields) == len(header.columns) and not raw.startswith(b"#"):
            try:
                return float(fields[tcol]) * scale
            except ValueError:
                continue
    return None


def rows_to_batch(rows: np.ndarray, header: CsvHeader, tcol: int, seqcol: int | None, source: str) -> Batch:
    """Parsed rows as a Batch: ``sigma_X`` columns become uncertainties of X, the seq column (where every
    row has one) sequence numbers, every other column a key of its own name."""
    columns: dict[str, np.ndarray] = {}
    sigma: dict[str, np.ndarray] = {}
    seq = None
    for j, name in enumerate(header.columns):
        if j == tcol:
            continue
        col = np.ascontiguousarray(rows[:, j])
        if j == seqcol:
            if np.all(np.isfinite(col)):
                seq = col.astype(np.int64)
        elif name.startswith(_SIGMA_PREFIX) and name[len(_SIGMA_PREFIX):] in header.columns:
            sigma[name[len(_SIGMA_PREFIX):]] = col
        else:
            columns[name] = col
    t = np.ascontiguousarray(rows[:, tcol])
    return Batch(source=source, t=t, columns=columns, sigma=sigma, seq=seq, t_from_source=True)


class BlockReader:
    """The data lines of an open CSV file, a block of whole lines at a time, parsed into float64 rows.

    A block that the vectorised parse cannot take whole goes line by line, and each damaged line is
    handed to ``on_damaged``; with ``stop_on_damage`` the reading ends at the first one. ``index``
    holds (byte offset, line number, first t) of each block read, sorted, for seeking back."""

    def __init__(self, fh: io.BufferedReader, header: CsvHeader, *, tcol: int, seqcol: int | None,
                 time_scale: float, block: int, stop_on_damage: bool, on_damaged: OnDamaged) -> None:
        self._fh = fh
        self.header = header
        self._tcol = tcol
        self._seqcol = seqcol
        self._time_scale = time_scale
        self._block = block
        self._stop_on_damage = stop_on_damage
        self._on_damaged = on_damaged
        self.index: list[tuple[int, int, float]] = []   # (byte offset, line number, first t) per block
        self.eof = False
        self._offset = 0
        self._line = 0
        self._carry = b""

    def rewind(self, offset: int, line: int) -> None:
        """Read on from byte ``offset``, which starts line number ``line``."""
        self._fh.seek(offset)
        self._offset = offset
        self._line = line
        self._carry = b""
        self.eof = False

    def read(self) -> tuple[np.ndarray, np.ndarray] | None:
        """The next block of whole lines as (rows, their line numbers); None at the end of the file.
        A read that ends inside a line gives no rows (the line is carried to the next read)."""
        ncol = len(self.header.columns)
        start_offset = self._offset - len(self._carry)
        data = self._fh.read(self._block)
        self._offset += len(data)
        buf = self._carry + data
        if not data:
            self.eof = True
            if not buf.strip():
                return None
            body, self._carry, unterminated = buf, b"", True
        else:
            cut = buf.rfind(b"\n")
            if cut < 0:
                self._carry = buf
                return np.empty((0, ncol)), np.empty(0, dtype=np.int64)
            body, self._carry, unterminated = buf[: cut + 1], buf[cut + 1:], False
        first_line = self._line
        newlines = body.count(b"\n")
        self._line += newlines + (1 if unterminated else 0)
        rows, lines = self._parse(body, first_line, unterminated, newlines)
        if len(rows) and (not self.index or start_offset > self.index[-1][0]):
            # blocks read again after a seek back are indexed already: the index stays sorted
            self.index.append((start_offset, first_line, float(rows[0, self._tcol])))
        return rows, lines

    def _parse(self, body: bytes, first_line: int, unterminated: bool, newlines: int) -> tuple[np.ndarray, np.ndarray]:
        ncol = len(self.header.columns)
        if unterminated and self.header.ours:
            # our recorder writes whole lines only: an unterminated last line is a cut-off write
            return self._fallback(body, first_line, force_bad_last=True)
        try:
            rows = np.loadtxt(io.BytesIO(body), delimiter=",", comments="#", ndmin=2, dtype=np.float64)
        except ValueError:
            # empty fields (missing values in a foreign file) are NaN; only then is the block rewritten
            try:
                rows = np.loadtxt(io.BytesIO(_EMPTY_FIELD.sub(b"nan", body)), delimiter=",", comments="#",
                                  ndmin=2, dtype=np.float64)
            except ValueError:
                return self._fallback(body, first_line, force_bad_last=False)
        if rows.shape[0] and rows.shape[1] != ncol:
            return self._fallback(body, first_line, force_bad_last=False)
        if rows.shape[0] != newlines + (1 if unterminated else 0):
            # comment or blank lines inside the block: line numbers come from the slow path
            return self._fallback(body, first_line, force_bad_last=False)
        rows = rows.reshape(-1, ncol)
        if self._time_scale != 1.0:
            rows[:, self._tcol] *= self._time_scale
        return rows, np.arange(first_line, first_line + len(rows), dtype=np.int64)

    def _fallback(self, body: bytes, first_line: int, force_bad_last: bool) -> tuple[np.ndarray, np.ndarray]:
        """Line by line, only for a block that failed the fast path: find where and why."""
        ncol = len(self.header.columns)
        good: list[list[float]] = []
        lines: list[int] = []
        since_good = 0                     # damaged lines since the last good one (their seq positions)
        raw_lines = body.split(b"\n")
        if raw_lines and raw_lines[-1] == b"":
            raw_lines.pop()
        for i, raw in enumerate(raw_lines):
            number = first_line + i
            stripped = raw.strip()
            if not stripped or stripped.startswith(b"#"):
                continue
            reason = ""
            fields = stripped.split(b",")
            if force_bad_last and i == len(raw_lines) - 1:
                reason, why = "truncated_line", "the file ends inside a line (cut off mid-write)"
            else:
                if len(fields) != ncol:
                    reason = "truncated_line" if len(fields) < ncol and i == len(raw_lines) - 1 and self.eof \
                        else "damaged_line"
                    why = f"{len(fields)} fields, expected {ncol}"
                else:
                    try:
                        good.append([float(f) if f.strip() else float("nan") for f in fields])
                        lines.append(number)
                        since_good = 0
                        continue
                    except ValueError:
                        reason, why = "damaged_line", self._unreadable(fields)
            since_good += 1
            self._on_damaged(number, reason, why, raw, self._damaged_seq(fields, ncol, good, since_good))
            if self._stop_on_damage:
                self.eof = True
                self._carry = b""
                break
        rows = np.array(good, dtype=np.float64).reshape(-1, ncol)
        if len(rows):
            rows[:, self._tcol] *= self._time_scale
        return rows, np.array(lines, dtype=np.int64)

    def _unreadable(self, fields: list[bytes]) -> str:
        """Why a line with the right number of fields does not read: its first bad field and column."""
        for j, f in enumerate(fields):
            if not f.strip():
                continue
            try:
                float(f)
            except ValueError:
                text = f.strip().decode("utf-8", errors="replace")
                text = text if len(text) <= 40 else text[:40] + "..."
                return f"unreadable number {text!r} in column {self.header.columns[j]}"
        return "unreadable number"

    def _damaged_seq(self, fields: list[bytes], ncol: int, good: list[list[float]], nth: int) -> int | None:
        """The seq of a damaged line (the ``nth`` since the last good line of this block), so that the
        gap it leaves is not counted again as lost. Its own seq column where that can be trusted: all
        fields there, or a line cut short whose seq follows the good line before it. A line with a field
        missing or extra has its columns shifted (another column's number would pass for its seq): it
        stands in the place after the good line before it. None where neither is known."""
        if self._seqcol is None:
            return None
        seq = self._seq_of(fields)
        if seq is not None and len(fields) == ncol:
            return seq
        prev = good[-1][self._seqcol] if good else None
        if prev is None or not math.isfinite(prev):
            return seq if seq is not None and len(fields) < ncol and self._seqcol < len(fields) - 1 else None
        if seq is not None and len(fields) < ncol and seq == int(prev) + nth:
            return seq
        return int(prev) + nth

    def _seq_of(self, fields: list[bytes]) -> int | None:
        """The seq a damaged line still shows in the seq column, if it reads as a whole number."""
        if self._seqcol is None or self._seqcol >= len(fields):
            return None
        try:
            v = float(fields[self._seqcol])
        except ValueError:
            return None
        return int(v) if v.is_integer() and 0 <= v <= _SEQ_MAX else None
