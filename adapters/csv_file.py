"""CsvSource: streams a CSV file (a recording or any CSV with a header row) as batches, with speed, pause and seek."""

from __future__ import annotations

import io
import os
import re
import threading
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np

from adapters.base import FatalSourceError, LinkState, Polled, SourceStatus
from adapters.batch import Batch, Rejection

__all__ = ["CsvHeader", "CsvSource", "read_header", "MAGIC"]

MAGIC = "regime recording"          # first metadata line of our own recordings
_BLOCK = 4 << 20                    # bytes read per chunk (bounded memory)
_EMPTY_FIELD = re.compile(rb"(?<=,)(?=,|\r?\n|$)|^(?=,)", re.MULTILINE)
_SIGMA_PREFIX = "sigma_"
_KEEP_SKIPPED_LINES = 100           # line numbers of skipped damaged lines kept for the summary
_SHOW_SKIPPED_LINES = 5             # ... and named in the end message
_SEQ_MAX = (1 << 62) - 1


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


def _last_time(path: Path, header: CsvHeader, tcol: int, scale: float) -> float | None:
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


class CsvSource:
    """A CSV file as a Source. ``speed`` None plays as fast as possible, a number plays at that
    multiple of data time. ``start``/``stop`` bound the data time played (s, after ``time_scale``).
    ``time_column`` names the time column (scaled by ``time_scale`` to seconds). Columns named like
    the canonical keys pass through; ``sigma_X`` columns become uncertainties of X; ``seq`` becomes
    sequence numbers; any other column is passed as a raw key for the channel map.
    ``batch_rows`` caps the rows of one batch (the pipeline's temporaries grow with it).
    ``on_damage`` "stop" ends the replay at the first unreadable line, "skip" rejects it and goes on;
    either way the line is a Rejection and the status names the line number and the reason. ``damage``
    is the first damaged line (number, reason); in skip mode ``skipped`` counts the skipped lines and
    ``skipped_lines`` holds the first ``_KEEP_SKIPPED_LINES`` of their numbers. A damaged line's
    rejection detail ends with ``(seq=N)`` where its seq column still reads, so that the pipeline
    counts it as rejected and not once more as lost.
    """

    def __init__(self, path: str | os.PathLike[str], *, speed: float | None = None, start: float | None = None,
                 stop: float | None = None, chunk: int = _BLOCK, name: str | None = None,
                 time_column: str = "t", time_scale: float = 1.0, on_damage: str = "stop",
                 step_seconds: float = 0.1, batch_rows: int = 16384,
                 clock: Callable[[], float] = time.monotonic) -> None:
        self.path = Path(path)
        if speed is not None and not speed > 0:
            raise ValueError("speed must be positive, or None for as fast as possible")
        if on_damage not in ("stop", "skip"):
            raise ValueError("on_damage must be 'stop' or 'skip'")
        self._speed = speed
        self._start = start
        self._stop = stop
        self._block = max(int(chunk), 4096)
        self._time_column = time_column
        self._time_scale = float(time_scale)
        self._on_damage = on_damage
        self._step_seconds = step_seconds
        self._batch_rows = max(1, int(batch_rows))      # rows per batch: bounds the pipeline's temporaries
        self._clock = clock
        self._explicit_name = name
        self.name = name or self.path.name
        self.header: CsvHeader | None = None
        self.damage: tuple[int, str] | None = None     # (line number, reason) of the first damage
        self.skipped = 0                               # damaged lines skipped (skip mode), each once
        self.skipped_lines: list[int] = []             # their line numbers, the first _KEEP_SKIPPED_LINES
        self._skipped_reasons: dict[str, int] = {}     # reason token -> skipped lines
        self._skipped_upto = 0                         # highest line counted (a seek back reads lines again)
        self._end_label = "end of file"                # or "end of the replay window" (--to)
        self._lock = threading.RLock()
        self._wake = threading.Event()
        self._fh: io.BufferedReader | None = None
        self._state = LinkState.CONNECTING
        self._message = ""
        self._reset_stream()

    # -- opening -------------------------------------------------------------------------------------
    def open(self) -> None:
        if self._fh is not None:
            return                  # already open (the session opens what a command opened)
        if not self.path.is_file():
            raise FatalSourceError(f"{self.path}: no such file")
        try:
            self.header = read_header(self.path)
        except OSError as exc:
            raise FatalSourceError(f"{self.path}: cannot read: {exc}") from exc
        cols = self.header.columns
        if self._time_column not in cols:
            raise FatalSourceError(f"{self.path}: no time column {self._time_column!r} among {', '.join(cols)} "
                                   f"(map one with a channel map entry of quantity 't')")
        if self._explicit_name is None:
            self.name = self.header.first("source") or self.path.name
        self._tcol = cols.index(self._time_column)
        self._seqcol = cols.index("seq") if "seq" in cols else None
        self._end = _last_time(self.path, self.header, self._tcol, self._time_scale)
        self._fh = open(self.path, "rb")
        self._index: list[tuple[int, int, float]] = []   # (byte offset, line number, first t) per block
        self._rewind(self.header.data_offset, self.header.data_line)
        while not self._eof and len(self._rows) == 0:     # prime: the start time is known at once
            if not self._read_block():
                break
        self._skip_before_start()
        self._state = LinkState.CONNECTED
        if self.damage is None:                        # damage in the first block stays the status
            self._message = f"replaying {self.path.name}"

    def _reset_stream(self) -> None:
        self._rows: np.ndarray = np.empty((0, 0))
        self._row_lines: np.ndarray = np.empty(0, dtype=np.int64)
        self._pos = 0                      # next row within self._rows
        self._eof = False
        self._ended = False
        self._paused = False
        self._step_budget: float | None = None
        self._anchor: tuple[float, float] | None = None   # (wall, data time)
        self._current: float | None = None
        self._catch_up: float | None = None   # a forward seek's target: rows before it are due at once
        self._played: float | None = None     # data time of the last row handed out since the (re)wind
        self.released = 0                     # rows handed out in batches (a replay window that selects none)
        self._pending_rejections: list[Rejection] = []

    def _rewind(self, offset: int, line: int) -> None:
        assert self._fh is not None
        self._fh.seek(offset)
        self._offset = offset
        self._line = line
        self._carry = b""
        self._rows = np.empty((0, len(self.header.columns) if self.header else 0))
        self._row_lines = np.empty(0, dtype=np.int64)
        self._pos = 0
        self._eof = False
        self._ended = False
        self._played = None

    # -- parsing -----------------------------------------------------------------------------------
    def _read_block(self) -> bool:
        """Parse the next block of whole lines into self._rows; False at the end of the file."""
        assert self._fh is not None and self.header is not None
        start_offset = self._offset - len(self._carry)
        data = self._fh.read(self._block)
        self._offset += len(data)
        buf = self._carry + data
        if not data:
            self._eof = True
            if not buf.strip():
                return False
            body, self._carry, unterminated = buf, b"", True
        else:
            cut = buf.rfind(b"\n")
            if cut < 0:
                self._carry = buf
                return True
            body, self._carry, unterminated = buf[: cut + 1], buf[cut + 1:], False
        first_line = self._line
        newlines = body.count(b"\n")
        self._line += newlines + (1 if unterminated else 0)
        rows, lines = self._parse(body, first_line, unterminated, newlines)
        if len(rows) and (not self._index or start_offset > self._index[-1][0]):
            # blocks read again after a seek back are indexed already: the index stays sorted
            self._index.append((start_offset, first_line, float(rows[0, self._tcol])))
        self._rows, self._row_lines, self._pos = rows, lines, 0
        return True

    def _parse(self, body: bytes, first_line: int, unterminated: bool, newlines: int) -> tuple[np.ndarray, np.ndarray]:
        ncol = len(self.header.columns) if self.header else 0
        if unterminated and self.header is not None and self.header.ours:
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
        ncol = len(self.header.columns) if self.header else 0
        good: list[list[float]] = []
        lines: list[int] = []
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
                    reason = "truncated_line" if len(fields) < ncol and i == len(raw_lines) - 1 and self._eof \
                        else "damaged_line"
                    why = f"{len(fields)} fields, expected {ncol}"
                else:
                    try:
                        good.append([float(f) if f.strip() else float("nan") for f in fields])
                        lines.append(number)
                        continue
                    except ValueError:
                        reason, why = "damaged_line", self._unreadable(fields)
            self._damaged(number, reason, why, raw, fields)
            if self._on_damage == "stop":
                self._eof = True
                self._carry = b""
                break
        rows = np.array(good, dtype=np.float64).reshape(-1, ncol)
        if len(rows):
            rows[:, self._tcol] *= self._time_scale
        return rows, np.array(lines, dtype=np.int64)

    def _unreadable(self, fields: list[bytes]) -> str:
        """Why a line with the right number of fields does not read: its first bad field and column."""
        assert self.header is not None
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

    def _seq_of(self, fields: list[bytes]) -> int | None:
        """The seq a damaged line still shows in the seq column, if it reads as a whole number."""
        if self._seqcol is None or self._seqcol >= len(fields):
            return None
        try:
            v = float(fields[self._seqcol])
        except ValueError:
            return None
        return int(v) if v.is_integer() and 0 <= v <= _SEQ_MAX else None

    def _damaged(self, number: int, reason: str, why: str, raw: bytes, fields: list[bytes]) -> None:
        """One damaged line: a Rejection (with the seq it shows), the first damage, the skip count, the status."""
        seq = self._seq_of(fields)
        detail = f"line {number}: {why}" + ("" if seq is None else f" (seq={seq})")
        self._pending_rejections.append(Rejection(self.name, reason, raw, time.time(), detail))
        if self.damage is None:
            self.damage = (number, why)
        if self._on_damage == "stop":
            self._message = f"{self.path.name}: damaged at line {number}: {why}"
            return
        if number > self._skipped_upto:           # a line read again after a seek back counts once
            self._skipped_upto = number
            self.skipped += 1
            self._skipped_reasons[reason] = self._skipped_reasons.get(reason, 0) + 1
            if len(self.skipped_lines) < _KEEP_SKIPPED_LINES:
                self.skipped_lines.append(number)
        self._message = (f"{self.path.name}: damaged at line {number} ({why}); skipping, "
                         f"{self.skipped} skipped so far")

    def end_message(self, end: str | None = None) -> str:
        """What the replay's end says about damage (without the file name): in stop mode where it
        stopped and why; in skip mode how many lines were skipped, which, and that they were kept."""
        end = end or self._end_label
        if self.damage is None:
            return end
        line, why = self.damage
        if self._on_damage == "stop":
            return f"replayed up to line {line}, damaged there: {why}"
        n = self.skipped
        shown = ", ".join(str(x) for x in self.skipped_lines[:_SHOW_SKIPPED_LINES])
        more = f" (+{n - _SHOW_SKIPPED_LINES} more)" if n > _SHOW_SKIPPED_LINES else ""
        if len(self._skipped_reasons) == 1:
            (token,) = self._skipped_reasons
            how = f"rejected as {token}"
        else:
            how = "rejected (" + ", ".join(f"{k} {v}" for k, v in sorted(self._skipped_reasons.items())) + ")"
        if n == 1:
            return f"{end}; 1 damaged line skipped (line {line}: {why}), {how} and kept with the rejections"
        return (f"{end}; {n} damaged lines skipped (lines {shown}{more}; first: {why}), each {how} "
                f"and kept with the rejections")

    def damage_summary(self) -> dict[str, object] | None:
        """The summary's ``damage`` object: ``line`` and ``reason`` of the first damaged line, ``mode``;
        in skip mode also ``skipped`` (count), ``lines`` (the first ``lines_cap`` line numbers)."""
        if self.damage is None:
            return None
        out: dict[str, object] = {"line": self.damage[0], "reason": self.damage[1], "mode": self._on_damage}
        if self._on_damage == "skip":
            out.update(skipped=self.skipped, lines=list(self.skipped_lines), lines_cap=_KEEP_SKIPPED_LINES)
        return out

    # -- the Source protocol ---------------------------------------------------------------------------
    def poll(self, timeout: float) -> Polled:
        with self._lock:
            if self._fh is None:
                raise FatalSourceError(f"{self.path}: not open")
            if self._ended:
                return Polled(status=self.status())
            held = self._paused and self._step_budget is None and self._catch_up is None
        if held:
            if timeout > 0:
                self._wake.wait(timeout)
                self._wake.clear()
            return Polled(rejections=self._take_rejections(), status=self.status())
        with self._lock:
            out, wait = self._collect()
        if not out and wait > 0:
            self._wake.wait(min(wait, timeout))
            self._wake.clear()
            with self._lock:
                out, _ = self._collect()
        return Polled(batches=out, rejections=self._take_rejections(), status=self.status())

    def _take_rejections(self) -> list[Rejection]:
        with self._lock:
            out, self._pending_rejections = self._pending_rejections, []
        return out

    def _collect(self) -> tuple[list[Batch], float]:
        """Rows now due (by speed, step, start/stop) as one batch, or how long until the next is due."""
        while self._pos >= len(self._rows):
            if self._eof or not self._read_block():
                self._finish()
                return [], 0.0
            self._skip_before_start()
        rows = self._rows[self._pos:]
        t = rows[:, self._tcol]
        if self._stop is not None and t[0] > self._stop:
            self._finish("end of the replay window")
            return [], 0.0
        if self._catch_up is not None:
            # a forward seek: the rows before its target are due now, whatever the speed or a pause
            n = int(np.searchsorted(t, self._catch_up, side="left"))
            if n:
                return [self._take(rows, n)], 0.0
            self._current, self._catch_up = self._catch_up, None
            if self._paused and self._step_budget is None:
                self._anchor = None
                return [], 0.0
            self._reanchor()
        limit = self._due_limit(float(t[0]))
        if limit is None:
            n = len(rows)
        else:
            n = int(np.searchsorted(t, limit, side="right"))
            if n == 0:
                return [], self._wait_for(float(t[0]))
        batch = self._take(rows, n)
        if self._step_budget is not None:
            self._step_budget = None
        return [batch], 0.0

    def _take(self, rows: np.ndarray, n: int) -> Batch:
        """The first ``n`` of ``rows`` (at most ``batch_rows``, none after ``stop``) as the next batch."""
        if self._stop is not None:
            n = min(n, int(np.searchsorted(rows[:, self._tcol], self._stop, side="right")))
        n = min(n, self._batch_rows)
        taken = rows[:n]
        self._pos += n
        self.released += n
        self._current = self._played = float(taken[-1, self._tcol])
        return self._batch(taken)

    def _due_limit(self, next_t: float) -> float | None:
        if self._step_budget is not None:
            base = self._current if self._current is not None else next_t
            return max(base + self._step_budget, next_t)
        if self._speed is None:
            return None
        if self._anchor is None:
            self._anchor = (self._clock(), next_t)
        wall0, data0 = self._anchor
        return data0 + (self._clock() - wall0) * self._speed

    def _wait_for(self, next_t: float) -> float:
        assert self._anchor is not None and self._speed is not None
        wall0, data0 = self._anchor
        return max(0.0, wall0 + (next_t - data0) / self._speed - self._clock())

    def _skip_before_start(self) -> None:
        if self._start is not None and len(self._rows):
            self._pos = max(self._pos, int(np.searchsorted(self._rows[:, self._tcol], self._start, side="left")))

    def _batch(self, rows: np.ndarray) -> Batch:
        assert self.header is not None
        columns: dict[str, np.ndarray] = {}
        sigma: dict[str, np.ndarray] = {}
        seq = None
        for j, name in enumerate(self.header.columns):
            if j == self._tcol:
                continue
            col = np.ascontiguousarray(rows[:, j])
            if j == self._seqcol:
                if np.all(np.isfinite(col)):
                    seq = col.astype(np.int64)
            elif name.startswith(_SIGMA_PREFIX) and name[len(_SIGMA_PREFIX):] in self.header.columns:
                sigma[name[len(_SIGMA_PREFIX):]] = col
            else:
                columns[name] = col
        t = np.ascontiguousarray(rows[:, self._tcol])
        return Batch(source=self.name, t=t, columns=columns, sigma=sigma, seq=seq, t_from_source=True)

    def _finish(self, end: str = "end of file") -> None:
        self._ended = True
        self._catch_up = None
        self._state = LinkState.ENDED
        self._end_label = end
        self._message = f"{self.path.name}: {self.end_message(end)}"

    def status(self) -> SourceStatus:
        return SourceStatus(self.name, self._state, self._message)

    def close(self) -> None:
        with self._lock:
            if self._fh is not None:
                self._fh.close()
                self._fh = None
        self._wake.set()

    # -- controls for the screen ---------------------------------------------------------------------
    def pause(self) -> None:
        with self._lock:
            self._paused = True
            self._anchor = None

    def resume(self) -> None:
        with self._lock:
            self._paused = False
            self._reanchor()
        self._wake.set()

    def _reanchor(self) -> None:
        """Speed counts from now, at the current position in data time."""
        if self._current is not None:
            self._anchor = (self._clock(), self._current)
        else:
            self._anchor = None

    def step(self, seconds: float | None = None) -> None:
        """While paused, release the next ``seconds`` of data time (default ``step_seconds``)."""
        with self._lock:
            self._paused = True
            self._anchor = None
            self._step_budget = self._step_seconds if seconds is None else float(seconds)
        self._wake.set()

    def set_speed(self, speed: float | None) -> None:
        if speed is not None and not speed > 0:
            raise ValueError("speed must be positive, or None for as fast as possible")
        with self._lock:
            self._speed = speed
            self._reanchor()
        self._wake.set()

    def seek(self, t: float) -> str:
        """Continue from data time ``t``.

        Forward (``t`` at or after the next row not yet played): the rows before ``t`` are released at
        once, in batches of ``batch_rows``, whatever the speed and even while paused, and pacing (or
        the pause) resumes at ``t``; returns "forward" (whoever consumes the batches sees the skipped
        stretch, as in a straight replay). Back: the next batch starts at the first row >= ``t``;
        returns "back" (the consumer starts its own state over)."""
        with self._lock:
            if self._fh is None or self.header is None:
                raise FatalSourceError(f"{self.path}: not open")
            here = self._next_time()
            played = self._played
            if here is not None and not self._ended and (t >= here or (played is not None and t > played)):
                self._catch_up = t
                self._wake.set()
                return "forward"
            self._catch_up = None
            offset, line = self.header.data_offset, self.header.data_line
            for off, ln, first_t in self._index:
                if first_t <= t:
                    offset, line = off, ln
                else:
                    break
            self._rewind(offset, line)
            self._state = LinkState.CONNECTED
            old_start = self._start
            self._start = t if old_start is None else max(t, old_start)
            while True:
                if self._pos < len(self._rows):
                    self._skip_before_start()
                    if self._pos < len(self._rows):
                        break
                if self._eof or not self._read_block():
                    break
            self._start = old_start
            self._current = t
            self._reanchor()
        self._wake.set()
        return "back"

    def _next_time(self) -> float | None:
        """Data time of the next row to play (reading on if the block is used up); None at the end."""
        while self._pos >= len(self._rows):
            if self._eof or not self._read_block():
                return None
            self._skip_before_start()
        return float(self._rows[self._pos, self._tcol])

    @property
    def catching_up(self) -> bool:
        """A forward seek's stretch is still being released."""
        with self._lock:
            return self._catch_up is not None

    @property
    def first_time(self) -> float | None:
        """Data time of the file's first reading (after ``time_scale``); None before ``open`` or if none parsed."""
        with self._lock:
            return self._index[0][2] if self._index else None

    @property
    def end_time(self) -> float | None:
        """Data time of the file's last whole line, from its tail (None if none parses)."""
        return self._end if self._fh is not None else None

    def set_window(self, start: float | None, stop: float | None) -> None:
        """Bound the data time played (s), like ``start``/``stop`` given at construction; call it after
        ``open`` and before the first poll (e.g. once ``first_time`` has turned relative times absolute)."""
        with self._lock:
            self._start, self._stop = start, stop
            self._skip_before_start()

    def position(self) -> tuple[float, float, float | None, float | None, bool]:
        """(time, start, end, speed, paused) in data time; the shape of monitor.snapshot.ReplayPosition."""
        with self._lock:
            first = self._index[0][2] if self._index else float("nan")
            start = self._start if self._start is not None else first
            # a forward seek in progress stands at its target already (as a seek back does at once)
            now = self._catch_up if self._catch_up is not None else self._current
            now = now if now is not None else start
            end = self._end if self._stop is None or self._end is None else min(self._end, self._stop)
            return (now, start, end, self._speed, self._paused)
