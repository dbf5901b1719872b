"""Recorder: a sink writing every accepted reading to per-shot CSV files, with the alarm journal and rejects beside them."""

from __future__ import annotations

import collections
import datetime as _dt
import errno
import functools
import os
import re
import sys
import threading
import time
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable, Mapping

import numpy as np

from adapters.base import SourceStatus
from adapters.batch import Rejection
from monitor.alarms.envelope import AlarmOptions
from monitor.alarms.events import AlarmEvent
from monitor.model import Frame
from monitor.recording.csvformat import BASE_ORDER, dump_toml, header_block
from monitor.recording.files import LineFile, json_line, rejection_json
from monitor.recording.history import PreTrigger
from monitor.recording_options import RecordingOptions, parse_recording
from monitor.recording.shots import ShotSplitter
from monitor.recording.streams import Stream, journal_factory, limit_text, utc_stamp

if TYPE_CHECKING:
    from monitor.config import Config

__all__ = ["Recorder", "RecorderStatus"]

_MAX_BACKLOG = 64 << 20        # bytes kept in memory while the disk refuses writes
_RETRY_EVERY = 1.0             # s between retries after a write error


@dataclass(frozen=True)
class RecorderStatus:
    """The recorder's health, for status lines and the screen. ``ok`` False is loud: it means
    readings are not reaching the disk (``message`` says why) and ``dropped`` counts those lost."""

    ok: bool
    message: str
    file: str | None
    shots: int
    rows_written: int
    rows_idle: int          # readings outside any shot, not recorded (split="discharge")
    dropped: int
    errors: int
    split: str = "discharge"
    rows_pending: int = 0   # formatted, waiting for the next write (or for the disk to accept it)

    @property
    def complete(self) -> bool:
        """Every reading that belonged to a shot reached the disk, and no write is failing now."""
        return self.ok and self.dropped == 0


class Recorder:
    """A Sink (monitor.sinks.Sink). Every row of every frame (``t``, ``seq``, the base quantities in
    canonical units, their sigma) goes to the CSV of the shot it belongs to; alarm events to the
    shot's and the session's JSON Lines journal; rejections to the rejects side files. Lines are
    formatted per frame as whole arrays and written at least every ``flush_interval`` seconds.
    A write that fails (disk full, directory gone) is kept and retried; ``status()`` turns loud,
    a line goes to stderr and ``dropped`` counts what the memory backlog could not hold."""

    def __init__(self, directory: str | os.PathLike[str], config: Config, *, source_name: str,
                 options: RecordingOptions | None = None, clock: Callable[[], float] = time.time,
                 on_problem: Callable[[str], None] | None = None) -> None:
        self.directory = Path(directory)
        self.config = config
        self.source_name = source_name
        self.options = options or self._options_from(config)
        self._clock = clock
        self._on_problem = on_problem
        self.on_above = float(config.on_above)
        alarms = config.alarms if config.alarms is not None else AlarmOptions()
        self._splitter = ShotSplitter(self.on_above, self.options.post_trigger, self.options.split,
                                      deadband=alarms.discharge_deadband, delay=alarms.discharge_delay)
        self._journal_factory = journal_factory()
        self._lock = threading.RLock()
        self._stream: Stream | None = None
        self._pending: list[str] = []
        self._pending_rows = 0
        self._pending_bytes = 0
        self._pending_since: float | None = None
        self._last_fsync = 0.0
        self._history = PreTrigger(self.options.pre_trigger, self._hold)
        self._idle_events: collections.deque[AlarmEvent] = collections.deque(maxlen=1000)
        self._shot_counter = 0
        self._shots = 0
        self._rows_written = 0
        self._rows_idle = 0
        self._dropped = 0
        self._errors = 0
        self._error: str | None = None
        self._next_retry = 0.0
        self._closed = False
        self._session: tuple[Any, Any] | None = None
        self._session_stamp = utc_stamp(clock())
        self._open_session_files()
        self._stop = threading.Event()
        self._flusher = threading.Thread(target=self._flush_loop, name="recorder-flush", daemon=True)
        self._flusher.start()

    # -- set-up ----------------------------------------------------------------------------------------
    @staticmethod
    def _options_from(config: Config) -> RecordingOptions:
        if config.recording is not None:
            return config.recording
        table = config.raw.get("recording")
        if isinstance(table, Mapping):
            return parse_recording(table, config.path)
        return RecordingOptions()

    def _folder(self, wall: float) -> Path:
        if self.options.subdirectory == "day":
            return self.directory / _dt.datetime.fromtimestamp(wall, _dt.timezone.utc).strftime("%Y-%m-%d")
        return self.directory

    def _open_session_files(self) -> None:
        try:
            self.directory.mkdir(parents=True, exist_ok=True)
            stem = self.directory / f"session-{self._session_stamp}"
            self._session = (self._journal_factory(stem.with_suffix(".alarms.jsonl")),
                             LineFile(stem.with_suffix(".rejects.jsonl"), exclusive=False))
        except OSError as exc:
            self._problem(f"cannot open the session journal in {self.directory}: {exc}")

    def _next_shot_number(self, folder: Path) -> int:
        template = self.options.name
        pattern = re.escape(template)
        pattern = re.sub(r"\\\{shot[^}]*\\\}", r"(?P<shot>\\d+)", pattern)
        pattern = re.sub(r"\\\{start[^}]*\\\}", r".*", pattern)
        highest = self._shot_counter
        rx = re.compile(pattern + r"\.csv$")
        for base in {folder, self.directory}:
            if base.is_dir():
                for entry in base.iterdir():
                    m = rx.match(entry.name)
                    if m:
                        highest = max(highest, int(m.group("shot")))
        return highest + 1

    # -- the Sink protocol --------------------------------------------------------------------------------
    def on_frame(self, frame: Frame) -> None:
        n = len(frame.t)
        if n == 0 or self._closed:
            return
        # the values as read (before the alignment hold), so that a replay aligns as this run did;
        # frames built without ``raw`` (by hand, in tests) record their values as they are
        source = frame.raw if frame.raw else frame.values
        base = {k: np.asarray(source[k], dtype=np.float64) for k in BASE_ORDER if k in source}
        sigma: dict[str, np.ndarray] = {}
        if self.options.sigma:
            for k, v in base.items():
                s = frame.sigma.get(k)
                if s is not None:
                    sigma[k] = np.where(np.isfinite(v), np.asarray(s, dtype=np.float64), np.nan)
        with self._lock:
            for action in self._splitter.feed(np.asarray(frame.t), frame.discharge, frame.values.get("ne")):
                if action.kind == "idle":
                    self._keep_idle(frame, base, sigma, action.start, action.stop)
                elif action.kind == "open":
                    self._open_shot(frame, base, sigma, action.start)
                elif action.kind == "rows":
                    self._write_rows(frame, base, sigma, action.start, action.stop)
                elif action.kind == "close":
                    self._close_shot()
            self._maybe_flush(force=False)

    def on_rejections(self, rejections: list[Rejection]) -> None:
        if not rejections:
            return
        data = b"".join(json_line(rejection_json(r)) for r in rejections)
        with self._lock:
            session, stream = self._session, self._stream
            if session is not None:
                self._safe(lambda: session[1].write(data), "rejects side file")
            if stream is not None:
                self._safe(lambda: stream.rejects.write(data), "rejects side file")

    def on_alarm(self, event: AlarmEvent) -> None:
        with self._lock:
            session, stream = self._session, self._stream
            if session is not None:
                self._safe(lambda: session[0].on_alarm(event), "session journal", session[0])
            if stream is not None:
                self._safe(lambda: stream.journal.on_alarm(event), "alarm journal", stream.journal)
            else:
                self._idle_events.append(event)

    def on_status(self, status: SourceStatus) -> None:
        return None

    def close(self) -> None:
        with self._lock:
            if self._closed:
                return
            self._closed = True
            self._close_shot()
            if self._session is not None:
                journal, rejects = self._session
                for part in (journal, rejects):
                    try:
                        part.close()
                    except OSError as exc:
                        self._problem(f"closing the session files: {exc}")
                self._session = None
        self._stop.set()
        self._flusher.join(timeout=2.0)

    # -- status ----------------------------------------------------------------------------------------
    @property
    def recording(self) -> str | None:
        """The CSV being written now, or None between shots."""
        stream = self._stream
        return str(stream.csv.path) if stream is not None else None

    def status(self) -> RecorderStatus:
        with self._lock:
            ok = self._error is None
            msg = self._error or (f"recording {self.recording}" if self._stream else "waiting for a discharge")
            return RecorderStatus(ok, msg, self.recording, self._shots, self._rows_written, self._rows_idle,
                                  self._dropped, self._errors, self.options.split, self._pending_rows)

    # -- shots ---------------------------------------------------------------------------------------
    def _columns_for(self, base: Mapping[str, np.ndarray], sigma: Mapping[str, np.ndarray]) -> tuple[str, ...]:
        keys = [k for k in BASE_ORDER if k in base]
        return ("t", "seq", *keys, *[f"sigma_{k}" for k in keys if k in sigma])

    def _header(self, columns: tuple[str, ...], shot: int, wall: float, primed: int = 0) -> str:
        cfg = self.config
        toml = dump_toml(cfg.raw) if cfg.raw else None
        limits = [limit_text(spec) for spec in cfg.limits]
        path = cfg.path
        return header_block(columns, shot=shot, start_wall=wall, source=self.source_name, on_above=self.on_above,
                            limits=limits, config_toml=toml, config_path=str(path) if path else None,
                            extra=[("split", self.options.split), ("pre_trigger", repr(self.options.pre_trigger)),
                                   ("post_trigger", repr(self.options.post_trigger))]
                            + ([("primed", f"{primed} rows with empty seq first: the last reading of a channel "
                                           f"before the first row, still within its alignment hold")]
                               if primed else []))

    def _open_shot(self, frame: Frame, base: dict[str, np.ndarray], sigma: dict[str, np.ndarray], row: int,
                   part: int = 1) -> None:
        t0 = float(frame.t[row])
        if part == 1:
            first_t, primes, pre = self._history.take(t0, {k: float(v[row]) for k, v in base.items()})
        else:
            first_t, primes, pre = t0, [], []
        wall = first_t if first_t > 1e9 else self._clock()     # epoch data time names the shot by itself
        try:
            folder = self._folder(wall)
            folder.mkdir(parents=True, exist_ok=True)
            if part == 1:
                self._shot_counter = self._next_shot_number(folder)
            stem_name = self.options.name.format(shot=self._shot_counter, start=utc_stamp(wall))
            if part > 1:
                stem_name += f"-part{part}"
            columns = self._columns_for(base, sigma)
            self._stream = Stream(folder / stem_name, columns,
                                   self._header(columns, self._shot_counter, wall, len(primes)),
                                   self._journal_factory)
        except OSError as exc:
            self._stream = None
            self._next_retry = self._clock() + _RETRY_EVERY
            self._problem(f"cannot open a recording file in {self.directory}: {exc}; readings are not "
                          f"being recorded (retrying)")
            lost = len(primes) + sum(len(t) for t, _, _ in pre)
            self._dropped += lost
            self._rows_idle -= lost
            return
        if part == 1:
            self._shots += 1
            for t_p, prime in primes:
                self._format(np.array([t_p]), {c: np.array([x]) for c, x in prime.items()}, None, slice(None))
                self._rows_idle -= 1
            for t, vals, seq in pre:
                self._format(t, vals, seq, slice(None))
                self._rows_idle -= len(t)
            journal = self._stream.journal
            for event in self._idle_events:
                if event.time >= first_t:
                    self._safe(functools.partial(journal.on_alarm, event), "alarm journal", journal)
            self._idle_events.clear()

    def _close_shot(self) -> None:
        if self._stream is None:
            return
        self._maybe_flush(force=True)
        if self._pending:
            lost = self._pending_rows
            self._dropped += lost
            self._pending, self._pending_bytes, self._pending_since, self._pending_rows = [], 0, None, 0
            self._problem(f"{lost} readings of {self._stream.csv.path.name} could not be written before it closed")
        try:
            self._stream.close()
        except OSError as exc:
            self._problem(f"closing {self._stream.csv.path}: {exc}")
        self._stream = None

    def _write_rows(self, frame: Frame, base: dict[str, np.ndarray], sigma: dict[str, np.ndarray],
                    a: int, b: int) -> None:
        if self._stream is None and self._clock() >= self._next_retry:
            self._open_shot(frame, base, sigma, a)
        stream = self._stream
        if stream is None:
            self._dropped += b - a
            if self._error is None:
                self._problem("no recording file is open; readings of this shot are not being recorded")
            return
        if not set(self._columns_for(base, sigma)) <= set(stream.columns):
            # a quantity appeared that the file has no column for: continue in a new part of the shot
            self._maybe_flush(force=True)
            parts = re.search(r"-part(\d+)$", stream.stem.name)
            part = int(parts.group(1)) + 1 if parts else 2
            self._close_shot()
            self._open_shot(frame, base, sigma, a, part=part)
            if self._stream is None:
                return
        values = dict(base)
        values.update({f"sigma_{k}": v for k, v in sigma.items()})
        self._format(np.asarray(frame.t), values, frame.seq, slice(a, b))

    def _format(self, t: np.ndarray, values: Mapping[str, np.ndarray], seq: np.ndarray | None, rows: slice) -> None:
        assert self._stream is not None
        text = self._stream.formatter.format(t, values, seq, rows)
        if not text:
            return
        self._pending.append(text)
        self._pending_bytes += len(text)
        self._pending_rows += len(t[rows])
        if self._pending_since is None:
            self._pending_since = self._clock()
        if self._pending_bytes > _MAX_BACKLOG:
            dropped = self._pending.pop(0)
            self._pending_bytes -= len(dropped)
            lost = dropped.count("\n")
            self._dropped += lost
            self._pending_rows -= lost
            self._problem(f"the disk refuses writes and the backlog is full: {self._dropped} readings dropped")

    def _keep_idle(self, frame: Frame, base: dict[str, np.ndarray], sigma: dict[str, np.ndarray],
                   a: int, b: int) -> None:
        self._rows_idle += b - a
        cols = {k: v[a:b] for k, v in base.items()}
        cols.update({f"sigma_{k}": v[a:b] for k, v in sigma.items()})
        self._history.keep(np.asarray(frame.t[a:b]), cols, frame.seq[a:b] if frame.seq is not None else None)

    def _hold(self, key: str) -> float:
        return float(self.config.hold_for(key))

    # -- writing ---------------------------------------------------------------------------------------
    def _maybe_flush(self, force: bool) -> None:
        if not self._pending or self._stream is None:
            return
        now = self._clock()
        due = force or self._pending_bytes >= (1 << 18) or \
            (self._pending_since is not None and now - self._pending_since >= self.options.flush_interval * 0.5)
        if not due or (self._error is not None and now < self._next_retry and not force):
            return
        data = "".join(self._pending).encode("ascii")
        try:
            if self._stream.csv.unlinked():
                # the file (or its directory) was deleted while open: writing on would succeed into nothing
                raise FileNotFoundError(errno.ENOENT, "the file was deleted while it was being recorded")
            self._stream.csv.write(data)
            if self.options.fsync and (force or now - self._last_fsync >= self.options.flush_interval):
                self._stream.csv.fsync()
                self._last_fsync = now
        except OSError as exc:
            self._next_retry = now + _RETRY_EVERY
            self._problem(f"cannot write {self._stream.csv.path}: {exc}; keeping {self._pending_bytes} bytes "
                          f"in memory and retrying")
            return
        self._rows_written += self._pending_rows
        self._pending_rows = 0
        self._pending = []
        self._pending_bytes = 0
        self._pending_since = None
        if self._error is not None:
            self._error = None
            self._report("recording resumed: the disk accepts writes again")

    def _flush_loop(self) -> None:
        period = self.options.flush_interval / 4
        while not self._stop.wait(period):
            with self._lock:
                self._maybe_flush(force=False)

    def _safe(self, write: Callable[[], Any], what: str, journal: Any = None) -> None:
        """Run one write; an OSError, or a journal that counts a new error of its own (the alarm
        package's JournalSink never raises), is a loud problem."""
        before = getattr(journal, "errors", 0)
        try:
            write()
        except OSError as exc:
            self._problem(f"cannot write the {what}: {exc}")
            return
        if getattr(journal, "errors", 0) > before:
            self._problem(f"cannot write the {what}: {getattr(journal, 'last_error', 'write failed')}")

    def _problem(self, message: str) -> None:
        """A write problem: counted, said once on stderr, and shown by ``status()`` (not ok) until
        writes succeed again; the session raises the engine's ``recorder:write`` alarm from it."""
        self._errors += 1
        first = self._error != message
        self._error = message
        if first:
            self._report(message)

    def _report(self, message: str) -> None:
        print(f"regime recorder: {message}", file=sys.stderr, flush=True)
        if self._on_problem is not None:
            try:
                self._on_problem(message)
            except Exception:   # a listener's failure must not stop the recording
                pass
