"""CsvSource: streams a CSV file (a recording or any CSV with a header row) as batches, with speed, pause and seek."""

from __future__ import annotations

import io
import os
import threading
import time
from pathlib import Path
from typing import Callable, Collection

import numpy as np

from adapters.base import FatalSourceError, LinkState, Polled, SourceStatus
from adapters.batch import Batch, Rejection
from adapters.csv_blocks import BLOCK_BYTES, MAGIC, BlockReader, CsvHeader, last_time, read_header, rows_to_batch
from adapters.csv_header import columns_to_parse
from adapters.csv_damage import DamageAccess, DamageRecord
from adapters.framing import shown

__all__ = ["CsvHeader", "CsvSource", "read_header", "MAGIC"]


class CsvSource(DamageAccess):
    """A CSV file as a Source. ``speed`` None plays as fast as possible, a number plays at that
    multiple of data time. ``start``/``stop`` bound the data time played (s, after ``time_scale``).
    ``time_column`` names the time column (scaled by ``time_scale`` to seconds). Columns named like
    the canonical keys pass through; ``sigma_X`` columns become uncertainties of X; ``seq`` becomes
    sequence numbers; any other column is passed as a raw key for the channel map.
    ``batch_rows`` caps the rows of one batch (the pipeline's temporaries grow with it).
    ``on_damage`` "stop" ends the replay at the first unreadable line, "skip" rejects it and goes on;
    either way the line is a Rejection and the status names the line number and the reason. ``damage``
    is the first damaged line (number, reason); in skip mode ``skipped`` counts the skipped lines and
    ``skipped_lines`` holds the first ``KEEP_SKIPPED_LINES`` (csv_damage) of their numbers. A damaged line's
    rejection carries the seq its seq column still shows (``seq_first``/``seq_last``; ``(seq=N)`` in its
    detail). ``numeric``: the channel map's keys, always parsed as numbers (csv_header.text_columns: other
    columns holding text are ignored, named in the status and in ``ignored_columns``).
    """

    def __init__(self, path: str | os.PathLike[str], *, speed: float | None = None, start: float | None = None,
                 stop: float | None = None, chunk: int = BLOCK_BYTES, name: str | None = None,
                 time_column: str = "t", time_scale: float = 1.0, on_damage: str = "stop",
                 step_seconds: float = 0.1, batch_rows: int = 16384,
                 clock: Callable[[], float] = time.monotonic, numeric: Collection[str] | None = None) -> None:
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
        self._numeric = numeric
        self.ignored_columns: tuple[str, ...] = ()      # text columns, never parsed
        self._names: tuple[str, ...] = ()               # the columns parsed, in row order
        self.name = name or self.path.name
        self.header: CsvHeader | None = None
        self._damage = DamageRecord(on_damage)         # the damaged lines met (csv_damage)
        self._end_label = "end of file"                # or "end of the replay window" (--to)
        self._lock = threading.RLock()
        self._wake = threading.Event()
        self._fh: io.BufferedReader | None = None
        self._reader: BlockReader | None = None        # made by open()
        self._state = LinkState.CONNECTING
        self._message = ""
        self._reset_stream()

    # -- opening -------------------------------------------------------------------------------------
    def open(self) -> None:
        if self._fh is not None:
            return                  # already open (the session opens what a command opened)
        if not self.path.exists():
            raise FatalSourceError(f"{self.path}: no such file")
        if not self.path.is_file():
            raise FatalSourceError(f"{self.path}: not a regular file (a recording or CSV file is needed)")
        try:
            self.header = read_header(self.path)
        except OSError as exc:
            raise FatalSourceError(f"{self.path}: cannot read: {exc}") from exc
        cols = self.header.columns
        self.ignored_columns, use = columns_to_parse(self.header, self._time_column, self._numeric, self.path)
        if self._explicit_name is None:
            self.name = self.header.first("source") or self.path.name
        ftcol = cols.index(self._time_column)
        fseq = cols.index("seq") if "seq" in cols else None
        self._names = tuple(cols[j] for j in use)
        self._tcol = use.index(ftcol)
        self._seqcol = use.index(fseq) if fseq is not None else None
        self._end = last_time(self.path, self.header, ftcol, self._time_scale)
        self._fh = open(self.path, "rb")
        self._reader = BlockReader(self._fh, self.header, tcol=ftcol, seqcol=fseq,
                                   time_scale=self._time_scale, block=self._block,
                                   stop_on_damage=self._on_damage == "stop", on_damaged=self._damaged,
                                   usecols=use)
        self._rewind(self.header.data_offset, self.header.data_line)
        while not self._rd.eof and len(self._rows) == 0:     # prime: the start time is known at once
            if not self._read_block():
                break
        self._skip_before_start()
        self._state = LinkState.CONNECTED
        if self.damage is None:                        # damage in the first block stays the status
            self._message = f"replaying {self.path.name}" + self._ignored_note()

    def _ignored_note(self) -> str:
        n = len(self.ignored_columns)
        return f"; ignoring text column{'s' * (n > 1)} {', '.join(map(shown, self.ignored_columns))}" if n else ""

    @property
    def _rd(self) -> BlockReader:
        assert self._reader is not None, "open() first"
        return self._reader

    def _reset_stream(self) -> None:
        self._rows: np.ndarray = np.empty((0, 0))
        self._row_lines: np.ndarray = np.empty(0, dtype=np.int64)
        self._pos = 0                      # next row within self._rows
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
        self._rd.rewind(offset, line)
        self._rows = np.empty((0, len(self.header.columns) if self.header else 0))
        self._row_lines = np.empty(0, dtype=np.int64)
        self._pos = 0
        self._ended = False
        self._played = None

    # -- reading ------------------------------------------------------------------------------------
    def _read_block(self) -> bool:
        """The next block of whole lines (csv_blocks.BlockReader) as self._rows; False at the end of the file."""
        got = self._rd.read()
        if got is None:
            return False
        self._rows, self._row_lines = got
        self._pos = 0
        return True

    @property
    def _index(self) -> list[tuple[int, int, float]]:
        """(byte offset, line number, first t) of each block read, sorted (the reader's block index)."""
        return self._reader.index if self._reader is not None else []   # none before open()

    def _damaged(self, number: int, reason: str, why: str, raw: bytes, seq: int | None) -> None:
        """One damaged line: a Rejection (with the seq it shows), the first damage, the skip count, the status."""
        detail = f"line {number}: {why}" + ("" if seq is None else f" (seq={seq})")
        self._pending_rejections.append(Rejection(self.name, reason, raw[:4096], time.time(), detail,
                                                  seq_first=seq, seq_last=seq))
        self._damage.note(number, reason, why)
        if self._on_damage == "stop":
            self._message = f"{self.path.name}: damaged at line {number}: {why}"
            return
        self._message = (f"{self.path.name}: damaged at line {number} ({why}); skipping, "
                         f"{self.skipped} skipped so far")

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
            if self._rd.eof or not self._read_block():
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
        assert self.header is not None
        return rows_to_batch(taken, self.header, self._tcol, self._seqcol, self.name, self._names)

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

    def _finish(self, end: str = "end of file") -> None:
        self._ended = True
        self._catch_up = None
        self._state = LinkState.ENDED
        self._end_label = end
        self._message = f"{self.path.name}: {self.end_message(end)}"
        if self.released == 0 and self.damage is None and end == "end of file":
            self._message += "; no data line after the header"
        self._message += self._ignored_note()

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
                if self._rd.eof or not self._read_block():
                    break
            self._start = old_start
            self._current = t
            self._reanchor()
        self._wake.set()
        return "back"

    def _next_time(self) -> float | None:
        """Data time of the next row to play (reading on if the block is used up); None at the end."""
        while self._pos >= len(self._rows):
            if self._rd.eof or not self._read_block():
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

    def position(self) -> tuple[float, float, float | None, float | None, bool] | None:
        """(time, start, end, speed, paused) in data time; the shape of monitor.snapshot.ReplayPosition.
        None before ``open`` (the screen may ask while the session's thread is still opening the file)."""
        with self._lock:
            if self._reader is None:
                return None
            first = self._index[0][2] if self._index else float("nan")
            start = self._start if self._start is not None else first
            # a forward seek in progress stands at its target already (as a seek back does at once)
            now = self._catch_up if self._catch_up is not None else self._current
            now = now if now is not None else start
            end = self._end if self._stop is None or self._end is None else min(self._end, self._stop)
            return (now, start, end, self._speed, self._paused)
