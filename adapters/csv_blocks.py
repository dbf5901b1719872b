"""A CSV file read in blocks: the vectorised parse, the damaged-line fallback, the block index (the head: csv_header)."""

from __future__ import annotations

import io
import math
import re
from typing import Callable

import numpy as np

from adapters.batch import Batch
from adapters.csv_header import MAGIC, MAX_CSV_LINE, CsvHeader, last_time, read_header, text_columns
from adapters.csv_header import SIGMA_PREFIX as _SIGMA_PREFIX
from adapters.framing import T_LIMIT, shown

__all__ = ["MAGIC", "BLOCK_BYTES", "MAX_CSV_LINE", "CsvHeader", "read_header", "last_time", "BlockReader",
           "rows_to_batch", "text_columns"]

BLOCK_BYTES = 4 << 20               # bytes read per chunk (bounded memory)
_EMPTY_FIELD = re.compile(rb"(?<=,)(?=,|\r?\n|$)|^(?=,)", re.MULTILINE)
_SEQ_MAX = (1 << 62) - 1

# (line number, reason token, why, the raw line, the seq it still shows or None)
OnDamaged = Callable[[int, str, str, bytes, int | None], None]


def rows_to_batch(rows: np.ndarray, header: CsvHeader, tcol: int, seqcol: int | None, source: str,
                  names: tuple[str, ...] | None = None) -> Batch:
    """Parsed rows as a Batch: ``sigma_X`` columns become uncertainties of X, the seq column (where every
    row has one) sequence numbers, every other column a key of its own name. ``names`` are the columns
    the rows hold (default: all of the header's); ``tcol``/``seqcol`` index the rows."""
    names = header.columns if names is None else names
    columns: dict[str, np.ndarray] = {}
    sigma: dict[str, np.ndarray] = {}
    seq = None
    for j, name in enumerate(names):
        if j == tcol:
            continue
        col = np.ascontiguousarray(rows[:, j])
        if j == seqcol:
            if np.all(np.isfinite(col)):
                seq = col.astype(np.int64)
        elif name.startswith(_SIGMA_PREFIX) and name[len(_SIGMA_PREFIX):] in names:
            sigma[name[len(_SIGMA_PREFIX):]] = col
        else:
            columns[name] = col
    t = np.ascontiguousarray(rows[:, tcol])
    return Batch(source=source, t=t, columns=columns, sigma=sigma, seq=seq, t_from_source=True)


class BlockReader:
    """The data lines of an open CSV file, a block of whole lines at a time, parsed into float64 rows.

    A block that the vectorised parse cannot take whole goes line by line, and each damaged line is
    handed to ``on_damaged``; with ``stop_on_damage`` the reading ends at the first one. ``index``
    holds (byte offset, line number, first t) of each block read, sorted, for seeking back.
    Lines end in LF, CR or CRLF; a line over ``MAX_CSV_LINE`` bytes is damaged (``oversized``) and
    skipped to its end; a time not finite or beyond ``T_LIMIT`` makes its line damaged (``bad_time``).
    ``usecols`` (indices into the header) are the columns parsed; the rows hold them in that order and
    ``tcol``/``seqcol`` are header indices."""

    def __init__(self, fh: io.BufferedReader, header: CsvHeader, *, tcol: int, seqcol: int | None,
                 time_scale: float, block: int, stop_on_damage: bool, on_damaged: OnDamaged,
                 usecols: tuple[int, ...] | None = None) -> None:
        self._fh = fh
        self.header = header
        self._ncol = len(header.columns)
        self._use = tuple(range(self._ncol)) if usecols is None else tuple(usecols)
        self._partial = len(self._use) != self._ncol
        self._tcol = self._use.index(tcol)                     # in row space
        self._seqcol = self._use.index(seqcol) if seqcol is not None else None
        self._seq_field = seqcol                                # in field space
        self._time_scale = time_scale
        self._block = block
        self._stop_on_damage = stop_on_damage
        self._on_damaged = on_damaged
        self.index: list[tuple[int, int, float]] = []   # (byte offset, line number, first t) per block
        self.eof = False
        self._offset = 0
        self._line = 0
        self._carry = b""
        self._after_cr = False            # the last read ended in CR: an LF first in the next is its pair
        self._discarding = False          # skipping the rest of an oversized line

    def rewind(self, offset: int, line: int) -> None:
        """Read on from byte ``offset``, which starts line number ``line``."""
        self._fh.seek(offset)
        self._offset = offset
        self._line = line
        self._carry = b""
        self.eof = False
        self._after_cr = self._discarding = False

    def _normalised(self, data: bytes) -> bytes:
        """Line ends as LF only; an oversized line's rest skipped."""
        if self._after_cr and data[:1] == b"\n":
            data = data[1:]
        self._after_cr = data[-1:] == b"\r"
        if b"\r" in data:
            data = data.replace(b"\r\n", b"\n").replace(b"\r", b"\n")
        if self._discarding:
            cut = data.find(b"\n")
            if cut < 0:
                return b""
            self._discarding = False
            self._line += 1
            data = data[cut + 1:]
        return data

    def read(self) -> tuple[np.ndarray, np.ndarray] | None:
        """The next block of whole lines as (rows, their line numbers); None at the end of the file.
        A read that ends inside a line gives no rows (the line is carried to the next read)."""
        ncol = len(self._use)
        raw = self._fh.read(self._block)
        self._offset += len(raw)
        data = self._normalised(raw) if raw else b""
        start_offset = self._offset - len(raw) - len(self._carry)
        buf = self._carry + data
        if not raw:
            self.eof = True
            if not buf.strip():
                return None
            body, self._carry, unterminated = buf, b"", True
        else:
            cut = buf.rfind(b"\n")
            if cut < 0:
                if len(buf) > MAX_CSV_LINE:          # its number stays: the line ends when its rest is skipped
                    self._on_damaged(self._line, "oversized", f"line longer than {MAX_CSV_LINE} bytes",
                                     buf[:4096], None)
                    self._carry, self._discarding = b"", True
                    if self._stop_on_damage:
                        self.eof = True
                else:
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

    def _loadtxt(self, body: bytes) -> np.ndarray:
        use = self._use if self._partial else None
        return np.loadtxt(io.BytesIO(body), delimiter=",", comments="#", ndmin=2, dtype=np.float64, usecols=use)

    def _parse(self, body: bytes, first_line: int, unterminated: bool, newlines: int) -> tuple[np.ndarray, np.ndarray]:
        ncol = len(self._use)
        if unterminated and self.header.ours:
            # our recorder writes whole lines only: an unterminated last line is a cut-off write
            return self._fallback(body, first_line, force_bad_last=True)
        if self._partial and body.count(b",") != (self._ncol - 1) * (newlines + (1 if unterminated else 0)):
            return self._fallback(body, first_line, force_bad_last=False)   # (text columns: loadtxt skips them)
        try:
            rows = self._loadtxt(body)
        except ValueError:
            # empty fields (missing values in a foreign file) are NaN; only then is the block rewritten
            try:
                rows = self._loadtxt(_EMPTY_FIELD.sub(b"nan", body))
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
        if not (np.abs(rows[:, self._tcol]) <= T_LIMIT).all():
            return self._fallback(body, first_line, force_bad_last=False)     # which lines, and why
        return rows, np.arange(first_line, first_line + len(rows), dtype=np.int64)

    def _fallback(self, body: bytes, first_line: int, force_bad_last: bool) -> tuple[np.ndarray, np.ndarray]:
        """Line by line, only for a block that failed the fast path: find where and why."""
        ncol = self._ncol
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
                        row = [float(fields[j]) if fields[j].strip() else float("nan") for j in self._use]
                    except ValueError:
                        reason, why = "damaged_line", self._unreadable(fields)
                    else:
                        t = row[self._tcol] * self._time_scale
                        if abs(t) <= T_LIMIT:
                            good.append(row)
                            lines.append(number)
                            since_good = 0
                            continue
                        reason, why = "bad_time", f"time {shown(repr(t))} is not finite or beyond {T_LIMIT:g} s"
            since_good += 1
            self._on_damaged(number, reason, why, raw, self._damaged_seq(fields, ncol, good, since_good))
            if self._stop_on_damage:
                self.eof = True
                self._carry = b""
                break
        rows = np.array(good, dtype=np.float64).reshape(-1, len(self._use))
        if len(rows):
            rows[:, self._tcol] *= self._time_scale
        return rows, np.array(lines, dtype=np.int64)

    def _unreadable(self, fields: list[bytes]) -> str:
        """Why a line with the right number of fields does not read: its first bad field and column."""
        for j in self._use:
            f = fields[j]
            if not f.strip():
                continue
            try:
                float(f)
            except ValueError:
                text = f.strip().decode("utf-8", errors="replace")
                return f"unreadable number {shown(text, 40)!r} in column {shown(self.header.columns[j])}"
        return "unreadable number"

    def _damaged_seq(self, fields: list[bytes], ncol: int, good: list[list[float]], nth: int) -> int | None:
        """The seq of a damaged line (the ``nth`` since the last good line of this block), so that the
        gap it leaves is not counted again as lost. Its own seq column where that can be trusted: all
        fields there, or a line cut short whose seq follows the good line before it. A line with a field
        missing or extra has its columns shifted (another column's number would pass for its seq): it
        stands in the place after the good line before it. None where neither is known."""
        if self._seqcol is None or self._seq_field is None:
            return None
        seq = self._seq_of(fields)
        if seq is not None and len(fields) == ncol:
            return seq
        prev = good[-1][self._seqcol] if good else None
        if prev is None or not math.isfinite(prev):
            return seq if seq is not None and len(fields) < ncol and self._seq_field < len(fields) - 1 else None
        if seq is not None and len(fields) < ncol and seq == int(prev) + nth:
            return seq
        return int(prev) + nth

    def _seq_of(self, fields: list[bytes]) -> int | None:
        """The seq a damaged line still shows in the seq column, if it reads as a whole number."""
        if self._seq_field is None or self._seq_field >= len(fields):
            return None
        try:
            v = float(fields[self._seq_field])
        except ValueError:
            return None
        return int(v) if v.is_integer() and 0 <= v <= _SEQ_MAX else None
