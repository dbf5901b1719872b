"""The pipeline: channel map -> validate -> align -> derive -> rolling statistics, on whole batches, with every reading counted."""

from __future__ import annotations

import collections
import json
import math
import re
import time
from dataclasses import dataclass, field
from typing import Callable, Iterable, Mapping

import numpy as np

from adapters.batch import Batch, Rejection
from adapters.framing import DTYPES, MAX_FRAME, SEQ_MAX
from monitor.config import Config
from monitor.model import Frame
from monitor.pipeline.align import Aligner
from monitor.pipeline.rolling import Rolling
from monitor.pipeline.validate import (SeqTimeState, Verdict, find_clock_restart, find_restart,
                                       validate)
from monitor.snapshot import SourceCounts, Stats

__all__ = ["Pipeline"]

_RATE_SPAN = 2.0      # s of data time over which the reading rate is measured
_RATE_BUCKET = 0.1
_AUXILIARY = frozenset({"Ti", "B", "p0"})
_KEEP_REFUSED = 100_000     # seq spans of refused lines and frames remembered until their gap is seen
# the most readings a binary batch within the default frame limit can hold (one field of 4-byte values)
_MOST_IN_FRAME = MAX_FRAME // min(np.dtype(d).itemsize for d in DTYPES)
_SEQ_IN_RAW = re.compile(rb'(?:\bseq\s*=\s*|"seq"\s*:\s*)(\d{1,18})\b')


@dataclass
class _Counts:
    accepted: int = 0
    rejected: collections.Counter = field(default_factory=collections.Counter)
    lost: int = 0
    unknown: collections.Counter = field(default_factory=collections.Counter)
    restarts: int = 0
    last_data_time: float | None = None
    last_wall_time: float | None = None
    rate_buckets: dict[int, int] = field(default_factory=dict)
    first_time: float | None = None
    # [first, past-the-last) seq numbers of readings an adapter refused
    refused_seqs: collections.deque = field(default_factory=lambda: collections.deque(maxlen=_KEEP_REFUSED))

    def add_rate(self, t: np.ndarray) -> None:
        if len(t) == 0:
            return
        first, newest = int(t[0] // _RATE_BUCKET), int(t[-1] // _RATE_BUCKET)
        if first == newest:                      # the usual small batch: one bucket
            self.rate_buckets[newest] = self.rate_buckets.get(newest, 0) + len(t)
        else:
            b = np.floor(t / _RATE_BUCKET).astype(np.int64)
            starts = np.concatenate(([0], np.flatnonzero(np.diff(b)) + 1))
            counts = np.diff(np.concatenate((starts, [len(b)])))
            for key, c in zip(b[starts][-64:].tolist(), counts[-64:].tolist()):
                self.rate_buckets[key] = self.rate_buckets.get(key, 0) + c
        for key in [k for k in self.rate_buckets if k <= newest - _RATE_SPAN / _RATE_BUCKET]:
            del self.rate_buckets[key]

    def rate(self) -> float:
        if not self.rate_buckets or self.last_data_time is None or self.first_time is None:
            return 0.0
        span = min(_RATE_SPAN, self.last_data_time - self.first_time)
        if span <= 0:
            return 0.0
        return sum(self.rate_buckets.values()) / max(span, _RATE_BUCKET)

    def freeze(self) -> SourceCounts:
        return SourceCounts(accepted=self.accepted, rejected=dict(self.rejected), lost=self.lost,
                            unknown_keys=dict(self.unknown), rate=self.rate(),
                            last_data_time=self.last_data_time, last_wall_time=self.last_wall_time)


def _default_derive() -> Callable:
    from monitor.physics import derive
    return derive


class Pipeline:
    """Turns batches into frames. Not thread-safe: one caller (the Session) at a time.

    What one reading is: one row of a batch (one time, one seq), carrying the
    channels that arrived with it; channels that arrive as separate samples
    are separate readings (NaN in the channels they do not carry). Accepted
    counts the readings that passed validation; every other reading is
    counted by reason and kept as a Rejection for the sinks.
    """

    def __init__(self, config: Config | None = None, *, derive: Callable | None = None,
                 wall: Callable[[], float] = time.time, clock_restart: float | None = None) -> None:
        self.config = config if config is not None else Config()
        opts = self.config.pipeline
        self._derive = derive if derive is not None else _default_derive()
        self._wall = wall
        self._clock_restart = opts.clock_restart if clock_restart is None else clock_restart   # [pipeline]
        self._aligner = Aligner(self.config.max_age, dict(self.config.max_age_by_key))
        self._seq: dict[str, SeqTimeState] = {}
        self._counts: dict[str, _Counts] = {}
        self._rolling: dict[str, Rolling] = {}
        self._window, self._bins = opts.window, opts.bins
        self._last_source: str | None = None
        self._pending: list[Rejection] = []
        self.rejected_samples: collections.deque[Rejection] = collections.deque(maxlen=opts.keep_rejected)

    # -- counting -----------------------------------------------------------
    def _c(self, source: str) -> _Counts:
        c = self._counts.get(source)
        if c is None:
            c = self._counts[source] = _Counts()
        return c

    def reject(self, rejections: Iterable[Rejection]) -> None:
        """Count and keep rejections an adapter made (malformed lines, bad frames, ...).

        Each counts as the readings it stands for (``_refused_span``): a line or
        frame as one, a binary batch whose header still reads as its ``n``.
        The seq numbers it still shows (in its raw text, else ``seq=N`` in its
        detail) are remembered, so that the gap it leaves is not counted once
        more as lost."""
        for r in rejections:
            c = self._c(r.source)
            n, span = _refused_span(r.raw)
            if r.reason == "size_mismatch" and n > 1:
                n, span = _held_by_payload(n, span, r.detail)
            if span is None and n == 1 and r.detail:
                span = _seq_shown(r.detail.encode("utf-8", "replace"))   # e.g. a CSV line: "... (seq=N)"
            c.rejected[r.reason] += n
            self.rejected_samples.append(r)
            if span is not None:
                c.refused_seqs.append(span)

    def refuse_batch(self, batch: Batch, reason: str, detail: str = "") -> list[Rejection]:
        """Count and keep every reading of ``batch`` as refused (used when processing it failed);
        rejections already made for it and not yet drained are taken back, so none counts twice."""
        counts = self._c(batch.source)
        for r in self.drain_rejections():
            counts.rejected[r.reason] -= 1
            if counts.rejected[r.reason] <= 0:
                del counts.rejected[r.reason]
        wall = self._wall()
        cols = list(batch.columns.items())
        out = [Rejection(source=batch.source, reason=reason, raw=_row_line(batch, cols, i), received=wall,
                         detail=detail) for i in range(len(batch))]
        self._c(batch.source).rejected[reason] += len(out)
        self.rejected_samples.extend(out)
        return out

    def drain_rejections(self) -> list[Rejection]:
        """Rejections the pipeline itself made since the last call (for the sinks)."""
        out, self._pending = self._pending, []
        return out

    def counts(self) -> dict[str, SourceCounts]:
        return {name: c.freeze() for name, c in self._counts.items()}

    def restarts(self) -> dict[str, int]:
        return {name: c.restarts for name, c in self._counts.items()}

    def stats(self, source: str | None = None) -> dict[str, Stats]:
        """Rolling statistics of the given source (default: the last one processed)."""
        name = source if source is not None else self._last_source
        r = self._rolling.get(name) if name is not None else None
        return r.stats() if r is not None else {}

    def rolling(self, source: str) -> Rolling | None:
        return self._rolling.get(source)

    def reset(self, source: str) -> None:
        """Forget the source's time, seq, held values and rolling window (after a seek);
        its counts stay."""
        self._seq.pop(source, None)
        self._aligner.reset(source)
        self._rolling.pop(source, None)

    # -- processing ---------------------------------------------------------
    def process(self, batch: Batch) -> Frame:
        """Map, validate, align, derive and add to the rolling statistics: one frame (a batch cut by a
        restart gives its parts joined; the Session uses ``process_parts`` to keep them apart)."""
        parts = self.process_parts(batch)
        frame = parts[0][0]
        for more, _new_clock in parts[1:]:
            frame = _concat(frame, more)
        return frame

    def process_parts(self, batch: Batch) -> list[tuple[Frame, bool]]:
        """As ``process``, but a batch cut by a restarted publisher or clock gives one frame per part,
        in order, each with True where its part begins a restarted clock (time went back: whoever keeps
        time from the frames, the alarm engine's timers and stale check, must start over there)."""
        source = batch.source
        self._last_source = source
        counts = self._c(source)
        counts.last_wall_time = self._wall()
        state = self._seq.setdefault(source, SeqTimeState())
        seq = None if batch.seq is None else np.asarray(batch.seq, dtype=np.int64)
        mapped = self.config.channels.apply(batch)
        k = find_restart(seq, state)
        clock = find_clock_restart(mapped.t, mapped.values, seq, state, self._clock_restart)
        keep_seq = clock is not None and (k is None or clock < k)
        if keep_seq:
            k = clock
        if k is not None:
            # a restarted publisher or clock: finish the old stream, then start over (a seq
            # that goes on through a restarted clock keeps its reference, so gaps still count)
            head = self.process_parts(_slice(batch, 0, k)) if k > 0 else []
            counts.restarts += 1
            self._seq[source] = SeqTimeState(last_seq=state.last_seq if keep_seq else None)
            self._aligner.reset(source)
            self._rolling.pop(source, None)
            tail = self.process_parts(_slice(batch, k, len(batch)))
            if keep_seq:                   # the clock restarted here (not only the seq)
                tail[0] = (tail[0][0], True)
            return head + tail
        for key, n in mapped.unknown.items():
            counts.unknown[key] += n
        verdict = validate(mapped.t, mapped.values, seq, state)
        counts.lost += verdict.lost - _refused_in_gaps(counts, verdict, state.last_seq)
        ok = verdict.accepted
        n_ok = int(ok.sum())
        if n_ok < len(ok):
            for reason, n in verdict.counts().items():
                counts.rejected[reason] += n
            self._keep_rejections(batch, mapped.t, verdict)
        t = mapped.t[ok] if n_ok < len(ok) else mapped.t
        raw = {key: (v[ok] if n_ok < len(ok) else v) for key, v in mapped.values.items()}
        raw_sigma = {key: (s[ok] if n_ok < len(ok) else s) for key, s in mapped.sigma.items()}
        frame_seq = None if seq is None else (seq[ok] if n_ok < len(ok) else seq)
        values, sigma = self._aligner.align(source, t, raw, raw_sigma)
        frame = self._derive_frame(source, t, values, sigma, raw, frame_seq)
        counts.accepted += n_ok          # counted once the frame exists (see Session: a fault refuses the batch)
        if n_ok:
            counts.last_data_time = float(t[-1])
            if counts.first_time is None:
                counts.first_time = float(t[0])
            counts.add_rate(t)
        return [(frame, False)]

    def _derive_frame(self, source: str, t: np.ndarray, values: dict[str, np.ndarray],
                      sigma: dict[str, np.ndarray], raw: Mapping[str, np.ndarray],
                      seq: np.ndarray | None) -> Frame:
        n = len(t)
        all_values: dict[str, np.ndarray] = dict(values)
        all_sigma: dict[str, np.ndarray] = dict(sigma)
        warnings: dict[str, np.ndarray] = {}
        valid = np.zeros(n, dtype=bool)
        if n:
            ne, te = values.get("ne"), values.get("Te")
            valid = np.ones(n, dtype=bool)
            valid &= np.isfinite(ne) if ne is not None else False
            valid &= np.isfinite(te) if te is not None else False
            if values:
                derived = self._derive(values, self.config.device, sigma or None)
                for name, arr in derived.values.items():
                    all_values[name] = np.asarray(arr, dtype=np.float64)
                for name, arr in derived.sigma.items():
                    all_sigma[name] = np.asarray(arr, dtype=np.float64)
                for reason, mask in derived.invalid.items():
                    # an auxiliary input (Ti, B, p0) past its hold is missing, not bad: the
                    # quantities that need it are NaN, the reading stays valid
                    if reason.endswith("_not_finite") and reason.split("_", 1)[0] in _AUXILIARY:
                        continue
                    valid &= ~np.asarray(mask, dtype=bool)
                warnings = {k: np.asarray(m, dtype=bool) for k, m in derived.warnings.items()}
            rolling = self._rolling.get(source)
            if rolling is None:
                rolling = self._rolling[source] = Rolling(self._window, self._bins)
            # base quantities as measured (no hold), derived quantities as derived
            stat_values = {k: v for k, v in raw.items()}
            stat_values.update({k: v for k, v in all_values.items() if k not in values})
            rolling.add(t, stat_values)
        return Frame(source=source, t=t, values=all_values, sigma=all_sigma, valid=valid,
                     warnings=warnings, seq=seq, raw=dict(raw))

    def _keep_rejections(self, batch: Batch, t: np.ndarray, verdict: Verdict) -> None:
        bad = np.flatnonzero(~verdict.accepted)
        wall = self._wall()
        cols = list(batch.columns.items())
        for i in bad.tolist():
            reason = verdict.reasons[int(verdict.code[i]) - 1]
            rej = Rejection(source=batch.source, reason=reason, raw=_row_line(batch, cols, i), received=wall,
                            detail=f"reading at t={float(t[i])!r}: {reason.replace('_', ' ')}")
            self._pending.append(rej)
            self.rejected_samples.append(rej)


def _refused_span(raw: bytes) -> tuple[int, tuple[int, int] | None]:
    """How many readings a refused input stands for, and the seq numbers [first, past-the-last) it shows.

    A text line or a JSON frame is one reading, numbered by the ``seq`` its
    text still shows. A binary batch whose JSON header still reads is its
    ``n`` readings numbered on from its ``seq`` (none without one); when its
    ``n`` cannot be trusted (not a count, or more than a frame holds) it counts
    as one, standing for its first seq, and the gap its other readings leave
    counts them as lost. Either way each seq number is counted once.
    """
    head = raw[:4096]
    if b'"fields"' not in head:
        return 1, _seq_shown(head)
    try:
        h, _ = json.JSONDecoder().raw_decode(raw.decode("utf-8", "replace").lstrip())
    except (ValueError, RecursionError):
        return 1, None
    if not isinstance(h, dict) or not isinstance(h.get("fields"), list):
        return 1, _seq_shown(head)                  # a JSON reading that names a key "fields"
    n, seq = h.get("n"), h.get("seq")
    seq = seq if type(seq) is int and 0 <= seq < SEQ_MAX else None
    if type(n) is int and 0 < n <= _MOST_IN_FRAME and (seq is None or seq <= SEQ_MAX - n):
        return n, (None if seq is None else (seq, seq + n))
    if n == 0:
        return 1, None                           # a refused frame that carried no reading
    return 1, (None if seq is None else (seq, seq + 1))


_PAYLOAD = re.compile(r"payload (\d+) B, header says \d+ x (\d+) x (\d+) B")


def _held_by_payload(n: int, span: tuple[int, int] | None, detail: str) -> tuple[int, tuple[int, int] | None]:
    """A binary batch refused for its size stands for at most the readings its payload could hold
    (its header's ``n`` may be the very thing that is wrong); the rest, if any were sent, leave a
    seq gap and count as lost there, so each reading counts once."""
    m = _PAYLOAD.search(detail or "")
    if m is None:
        return n, span
    per_reading = int(m.group(2)) * int(m.group(3))
    # a payload cut inside a reading still held that reading: round up
    held = max(1, min(n, -(-int(m.group(1)) // per_reading))) if per_reading else 1
    return held, (None if span is None else (span[0], span[0] + held))


def _seq_shown(text: bytes) -> tuple[int, int] | None:
    m = _SEQ_IN_RAW.search(text)
    return None if m is None else (int(m.group(1)), int(m.group(1)) + 1)


def _refused_in_gaps(counts: _Counts, verdict: Verdict, last_seq: int | None) -> int:
    """How many seq numbers in this batch's gaps belong to readings an adapter refused
    (they were received, so they are rejected, not lost); forgets those and older ones."""
    if not counts.refused_seqs:
        return 0
    found = 0
    spans = np.array(counts.refused_seqs, dtype=np.int64).reshape(-1, 2)
    if verdict.gap_lo is not None and len(verdict.gap_lo):
        # a seq refused twice (a duplicate) still fills one gap position only: the union of the spans
        a, b = _union(spans[:, 0], spans[:, 1])
        # each gap holds the seq numbers gap_lo + 1 .. gap_hi - 1
        found = int((_covered(a, b, verdict.gap_hi) - _covered(a, b, verdict.gap_lo + 1)).sum())
    if last_seq is not None:
        keep = spans[spans[:, 1] > last_seq + 1]
        if len(keep) != len(spans):
            counts.refused_seqs.clear()
            counts.refused_seqs.extend(tuple(x) for x in keep.tolist())
    return found


def _union(lo: np.ndarray, hi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The union of the spans [lo, hi) as sorted, disjoint spans."""
    order = np.argsort(lo, kind="stable")
    lo, hi = lo[order], hi[order]
    new = np.ones(len(lo), dtype=bool)
    new[1:] = lo[1:] > np.maximum.accumulate(hi)[:-1]
    starts = np.flatnonzero(new)
    return lo[starts], np.maximum.reduceat(hi, starts)


def _covered(a: np.ndarray, b: np.ndarray, x: np.ndarray) -> np.ndarray:
    """For each x, how many integers below it lie in the sorted, disjoint spans [a, b)."""
    before = np.concatenate(([0], np.cumsum(b - a)))
    i = np.searchsorted(a, x, side="left")          # spans that start below x
    j = np.maximum(i - 1, 0)
    return np.where(i > 0, before[j] + np.minimum(x, b[j]) - a[j], 0)


def _fmt(x: float) -> str:
    return repr(float(x)) if math.isfinite(x) else ("nan" if math.isnan(x) else ("inf" if x > 0 else "-inf"))


def _row_line(batch: Batch, cols: list[tuple[str, np.ndarray]], i: int) -> bytes:
    """The refused reading as one text line in the project's key=value format."""
    parts = [f"t={_fmt(batch.t[i])}"]
    if batch.seq is not None:
        parts.append(f"seq={int(batch.seq[i])}")
    for key, col in cols:
        v = float(col[i])
        if not math.isnan(v):
            parts.append(f"{key}={_fmt(v)}")
    return " ".join(parts).encode("utf-8")


def _slice(batch: Batch, a: int, b: int) -> Batch:
    return Batch(source=batch.source, t=batch.t[a:b], columns={k: v[a:b] for k, v in batch.columns.items()},
                 sigma={k: v[a:b] for k, v in batch.sigma.items()},
                 seq=None if batch.seq is None else batch.seq[a:b], t_from_source=batch.t_from_source)


def _concat(a: Frame, b: Frame) -> Frame:
    def join(x: Mapping[str, np.ndarray], y: Mapping[str, np.ndarray], dtype: type = np.float64) -> dict:
        keys = list(x) + [k for k in y if k not in x]
        return {k: np.concatenate((x.get(k, np.full(len(a), np.nan, dtype=dtype)) if dtype is np.float64
                                   else x.get(k, np.zeros(len(a), dtype=bool)),
                                   y.get(k, np.full(len(b), np.nan, dtype=dtype)) if dtype is np.float64
                                   else y.get(k, np.zeros(len(b), dtype=bool)))) for k in keys}
    seq = None if a.seq is None or b.seq is None else np.concatenate((a.seq, b.seq))
    valid = np.concatenate((a.valid if a.valid is not None else np.zeros(len(a), bool),
                            b.valid if b.valid is not None else np.zeros(len(b), bool)))
    return Frame(source=a.source, t=np.concatenate((a.t, b.t)), values=join(a.values, b.values),
                 sigma=join(a.sigma, b.sigma), valid=valid, warnings=join(a.warnings, b.warnings, bool),
                 seq=seq, raw=join(a.raw, b.raw))
