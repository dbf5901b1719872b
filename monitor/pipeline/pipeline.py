"""The pipeline: channel map -> validate -> align -> derive -> rolling statistics, on whole batches, with every reading counted."""

from __future__ import annotations

import collections
import math
import time
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Callable, Iterable, Literal, Mapping

import numpy as np

from adapters.batch import Batch, Rejection
from monitor.alarms.discharge import DischargeDetector
from monitor.alarms.envelope import AlarmOptions
from monitor.config import Config
from monitor.model import Device, Frame
from monitor.pipeline.align import Aligner
from monitor.pipeline.ledger import Ledger, Tally
from monitor.pipeline.rolling import Rolling
from monitor.pipeline.validate import (SeqTimeState, Verdict, find_clock_restart, find_restart,
                                       validate)
from monitor.snapshot import SourceCounts, Stats

if TYPE_CHECKING:
    from monitor.physics.derive import Derived

__all__ = ["Pipeline", "Part", "Processed", "Restart", "MAX_ROWS"]

# why time started over at the beginning of a part: the source's clock went back, or its
# publisher restarted its numbering (a seek back is the session's, see Session.restart)
Restart = Literal["clock", "publisher"]


@dataclass(frozen=True)
class Part:
    """One frame of a processed batch; ``restart`` says why time starts over at its first sample."""

    frame: Frame
    restart: Restart | None = None


@dataclass(frozen=True)
class Processed:
    """What one batch became: its frames in order and the readings the pipeline refused."""

    parts: tuple[Part, ...]
    rejections: tuple[Rejection, ...] = ()

    def frame(self) -> Frame:
        """The parts joined into one frame (for callers that do not keep time restarts apart)."""
        frame = self.parts[0].frame
        for later in self.parts[1:]:
            frame = _concat(frame, later.frame)
        return frame

_AUXILIARY = frozenset({"Ti", "B", "p0"})
MAX_ROWS = 65_536        # readings processed at a time (a larger batch is cut into slices of this size)


def _default_derive() -> Callable[[Mapping[str, np.ndarray], Device, Mapping[str, np.ndarray] | None], Derived]:
    from monitor.physics import derive
    return derive


class Pipeline:
    """Turns batches into frames. Not thread-safe: one caller (the Session) at a time.

    What one reading is: one row of a batch (one time, one seq), carrying the
    channels that arrived with it; channels that arrive as separate samples
    are separate readings (NaN in the channels they do not carry). Accepted
    counts the readings that passed validation; every other reading is
    counted by reason in the ledger and returned as a Rejection for the sinks.
    """

    def __init__(self, config: Config | None = None, *,
                 derive: Callable[[Mapping[str, np.ndarray], Device, Mapping[str, np.ndarray] | None], Derived] | None = None,
                 wall: Callable[[], float] = time.time, clock_restart: float | None = None) -> None:
        self.config = config if config is not None else Config()
        opts = self.config.pipeline
        self._derive = derive if derive is not None else _default_derive()
        self._wall = wall
        self._clock_restart = opts.clock_restart if clock_restart is None else clock_restart   # [pipeline]
        self._aligner = Aligner(self.config.max_age, dict(self.config.max_age_by_key))
        self._seq: dict[str, SeqTimeState] = {}
        self.ledger = Ledger()
        self._rolling: dict[str, Rolling] = {}
        self._window, self._bins = opts.window, opts.bins
        self._last_source: str | None = None
        alarms = self.config.alarms if isinstance(self.config.alarms, AlarmOptions) else AlarmOptions()
        self.discharge = DischargeDetector(self.config.on_above, alarms.discharge_deadband, alarms.discharge_delay)
        self.rejected_samples: collections.deque[Rejection] = collections.deque(maxlen=opts.keep_rejected)

    # -- counting -----------------------------------------------------------
    def reject(self, rejections: Iterable[Rejection]) -> None:
        """Count and keep rejections an adapter made (malformed lines, bad frames, ...): each as the
        ``count`` readings it stands for, its seq numbers remembered so that the gap it leaves is not
        counted once more as lost (``monitor.pipeline.ledger``)."""
        rejections = list(rejections)
        self.ledger.refused(rejections)
        self.rejected_samples.extend(rejections)

    def refuse_batch(self, batch: Batch, reason: str, detail: str = "") -> list[Rejection]:
        """Count and keep every reading of ``batch`` as refused (processing it failed; nothing of it
        had been counted, see ``process_batch``)."""
        wall = self._wall()
        cols = list(batch.columns.items())
        out = [_row_rejection(batch, cols, i, reason, wall, detail) for i in range(len(batch))]
        self.ledger.of(batch.source).rejected[reason] += len(out)
        self.rejected_samples.extend(out)
        return out

    def counts(self) -> dict[str, SourceCounts]:
        return self.ledger.counts()

    def restarts(self) -> dict[str, int]:
        return self.ledger.restarts()

    def stats(self, source: str | None = None) -> dict[str, Stats]:
        """Rolling statistics of the given source (default: the last one processed)."""
        name = source if source is not None else self._last_source
        r = self._rolling.get(name) if name is not None else None
        return r.stats() if r is not None else {}

    def rolling(self, source: str) -> Rolling | None:
        return self._rolling.get(source)

    def restart(self, source: str, *, keep_seq: bool = False) -> None:
        """Time starts over for ``source`` (a seek back, a restarted clock or publisher): its time and
        seq reference (the seq kept with ``keep_seq``: a seq that runs on through a restarted clock
        still shows gaps), held values, rolling window and the discharge rule's pending delay are
        forgotten; its counts stay."""
        state = self._seq.pop(source, None)
        if keep_seq and state is not None:
            self._seq[source] = SeqTimeState(last_seq=state.last_seq)
        self._aligner.reset(source)
        self._rolling.pop(source, None)
        self.discharge.restart()

    # -- processing ---------------------------------------------------------
    def process(self, batch: Batch) -> Frame:
        """Map, validate, align, derive and add to the rolling statistics: one frame (a batch cut by a
        restart gives its parts joined; the Session keeps them apart with ``process_batch``)."""
        return self.process_batch(batch).frame()

    def process_batch(self, batch: Batch) -> Processed:
        """As ``process``, but a batch cut by a restarted publisher or clock gives one frame per part,
        in order, each marked where its part begins a restart (whoever keeps time from the frames, the
        alarm engine's timers and stale check, must start over there), with the readings refused.
        The ledger hears of the batch only once it is done."""
        tally = Tally()
        parts: list[Part] = []
        refused: list[Rejection] = []
        # a large batch (a receiver catching up) is processed in slices: the derivation's temporaries stay
        # bounded (about 70 arrays of at most MAX_ROWS values) and the result does not depend on the cut
        for a in range(0, max(len(batch), 1), MAX_ROWS):
            self._process(batch if len(batch) <= MAX_ROWS else _slice(batch, a, a + MAX_ROWS),
                          tally, parts, refused, None)
        led = self.ledger.of(batch.source)
        led.last_wall_time = self._wall()
        led.commit(tally)
        self.rejected_samples.extend(refused)
        return Processed(tuple(parts), tuple(refused))

    def _process(self, batch: Batch, tally: Tally, parts: list[Part], refused: list[Rejection],
                 restart: Restart | None) -> None:
        source = batch.source
        self._last_source = source
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
            if k > 0:
                self._process(_slice(batch, 0, k), tally, parts, refused, restart)
            tally.restarts += 1
            self.restart(source, keep_seq=keep_seq)
            self._process(_slice(batch, k, len(batch)), tally, parts, refused,
                          "clock" if keep_seq else "publisher")
            return
        tally.unknown.update(mapped.unknown)
        verdict = validate(mapped.t, mapped.values, seq, state)
        led = self.ledger.of(source)
        tally.lost += verdict.lost - led.refused_in_gaps(verdict.gap_lo, verdict.gap_hi, state.last_seq)
        ok = verdict.accepted
        n_ok = int(ok.sum())
        if n_ok < len(ok):
            tally.rejected.update(verdict.counts())
            refused.extend(self._rejections(batch, mapped.t, verdict))
        t = mapped.t[ok] if n_ok < len(ok) else mapped.t
        raw = {key: (v[ok] if n_ok < len(ok) else v) for key, v in mapped.values.items()}
        raw_sigma = {key: (s[ok] if n_ok < len(ok) else s) for key, s in mapped.sigma.items()}
        frame_seq = None if seq is None else (seq[ok] if n_ok < len(ok) else seq)
        values, sigma = self._aligner.align(source, t, raw, raw_sigma)
        parts.append(Part(self._derive_frame(source, t, values, sigma, raw, frame_seq), restart))
        tally.accepted += n_ok
        if n_ok:
            tally.accepted_t.append(t)

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
        discharge = self.discharge.step(t, values.get("ne"))
        return Frame(source=source, t=t, values=all_values, sigma=all_sigma, valid=valid,
                     warnings=warnings, seq=seq, raw=dict(raw), discharge=discharge)

    def _rejections(self, batch: Batch, t: np.ndarray, verdict: Verdict) -> list[Rejection]:
        bad = np.flatnonzero(~verdict.accepted)
        wall = self._wall()
        cols = list(batch.columns.items())
        out = []
        for i in bad.tolist():
            reason = verdict.reasons[int(verdict.code[i]) - 1]
            out.append(_row_rejection(batch, cols, i, reason, wall,
                                      f"reading at t={float(t[i])!r}: {reason.replace('_', ' ')}"))
        return out


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


def _row_rejection(batch: Batch, cols: list[tuple[str, np.ndarray]], i: int, reason: str, wall: float,
                   detail: str) -> Rejection:
    seq = None if batch.seq is None else int(batch.seq[i])
    return Rejection(source=batch.source, reason=reason, raw=_row_line(batch, cols, i), received=wall,
                     detail=detail, count=1, seq_first=seq, seq_last=seq)


def _slice(batch: Batch, a: int, b: int) -> Batch:
    return Batch(source=batch.source, t=batch.t[a:b], columns={k: v[a:b] for k, v in batch.columns.items()},
                 sigma={k: v[a:b] for k, v in batch.sigma.items()},
                 seq=None if batch.seq is None else batch.seq[a:b], t_from_source=batch.t_from_source,
                 auxiliary=batch.auxiliary)


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
    discharge = None if a.discharge is None or b.discharge is None else np.concatenate((a.discharge, b.discharge))
    return Frame(source=a.source, t=np.concatenate((a.t, b.t)), values=join(a.values, b.values),
                 sigma=join(a.sigma, b.sigma), valid=valid, warnings=join(a.warnings, b.warnings, bool),
                 seq=seq, raw=join(a.raw, b.raw), discharge=discharge)
