"""Validation of readings as they arrive: bad values, time going backwards, duplicate or backwards seq, seq gaps,
and the restarts of a source's seq or clock."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

import numpy as np

__all__ = ["ABSURD", "POSITIVE", "Verdict", "SeqTimeState", "validate", "find_restart", "find_clock_restart",
           "RESTART_GAP", "CLOCK_RESTART"]

# Magnitudes beyond which a reading is refused as absurd (canonical units).
# ne above 1e33 m^-3 is beyond solid density by several orders, Te/Ti above
# 1e7 eV beyond any laboratory plasma; |B| above 1e4 T and p0 above 1e8 Pa
# (1000 bar) are beyond any device this tool watches (common practice).
ABSURD: dict[str, float] = {"ne": 1e33, "Te": 1e7, "Ti": 1e7, "B": 1e4, "p0": 1e8}
# Keys that must be strictly positive; B may be zero or negative (direction).
POSITIVE: frozenset[str] = frozenset({"ne", "Te", "Ti", "p0"})
# A seq that falls back by more than this (or to 0) is a restarted publisher,
# not a stream of duplicates: the source's seq and time references start over.
RESTART_GAP = 1000
# A reading whose time falls back by more than this many seconds behind the
# latest accepted time is a restarted clock (an instrument that rebooted, a
# clock reset far into the past, a wild future time before it), not jitter:
# the source's time reference starts over. Smaller steps back stay
# ``time_backwards``; a clock that restarts less than this far back costs at
# most this many seconds of readings, refused and kept, until it catches up.
CLOCK_RESTART = 10.0
# A seq that steps forward by more than this, or back by more than RESTART_GAP (not to 0), is
# implausible on its own (a bit flip, a garbled number): it is refused (``seq_jump`` forward,
# ``seq_backwards`` back) and moves no reference, until CONFIRM consecutive readings continue
# from it; then the stream has really been renumbered and starts over there, with no loss
# counted across the jump. A restart to seq 0 needs no confirmation (common practice for
# publishers that number from 0).
SEQ_JUMP = 1_000_000
CONFIRM = 3
_NEAR = 8          # a garbled seq is recognised as one of the next this many expected ones

_FIXED = ("time_not_finite", "time_backwards", "seq_duplicate", "seq_backwards", "seq_jump", "no_channels")


@dataclass
class SeqTimeState:
    """What validation remembers of one source between batches."""

    last_t: float = -np.inf
    last_seq: int | None = None
    # an implausible seq run still waiting for confirmation: (its last seq, its length so far)
    pending: tuple[int, int] | None = None
    # refused readings since the last plausible one whose seq is one bit away from the expected one:
    # each is the garbled copy of a reading missing from the next gap (received, so not lost)
    floating: int = 0


@dataclass(frozen=True, eq=False)
class Verdict:
    """``code`` per reading: 0 accepted, else 1 + index into ``reasons``."""

    code: np.ndarray
    reasons: tuple[str, ...]
    lost: int
    gap_lo: np.ndarray | None = None     # each seq gap is the open interval (gap_lo, gap_hi)
    gap_hi: np.ndarray | None = None

    @property
    def accepted(self) -> np.ndarray:
        return self.code == 0

    def counts(self) -> dict[str, int]:
        """Rejected readings by reason."""
        if len(self.code) == 0:
            return {}
        hist = np.bincount(self.code, minlength=len(self.reasons) + 1)
        return {self.reasons[i - 1]: int(hist[i]) for i in np.nonzero(hist)[0] if i > 0}


def _before(x: np.ndarray, start: float) -> np.ndarray:
    """For each position, the largest of ``start`` and every earlier element."""
    if len(x) == 0:
        return x.copy()
    cm = np.maximum.accumulate(x)
    out = np.empty_like(cm)
    out[0] = start
    out[1:] = np.maximum(cm[:-1], start)
    return out


def _plausible(s: np.ndarray, start: int) -> tuple[np.ndarray, np.ndarray]:
    """For each reading, the highest plausible seq before it (``start`` or an earlier reading's),
    and whether its own seq is an implausible jump from there (forward by more than SEQ_JUMP, or
    back by more than RESTART_GAP to anything but 0). A few passes: a refused jump must not become
    the reference of the readings after it."""
    lo, hi = int(s.min()), int(s.max())
    if hi - start <= SEQ_JUMP and max(start, hi) - lo <= RESTART_GAP:
        # the usual batch: no seq can be a jump from anything before it (one pass, no jump)
        return _before(s, start), np.zeros(len(s), dtype=bool)
    floor = np.iinfo(np.int64).min
    jump = np.zeros(len(s), dtype=bool)
    before = _before(s, start)
    for _ in range(4):
        before = _before(np.where(jump, floor, s), start)
        new = ((s - SEQ_JUMP) > before) | ((s < before) & (s != 0) & (before - s > RESTART_GAP))
        if np.array_equal(new, jump):
            break
        jump = new
    return before, jump


def _run_lengths(s: np.ndarray) -> np.ndarray:
    """For each reading, how many readings from it on continue its seq one by one (itself included)."""
    n = len(s)
    ends = np.append(np.flatnonzero(np.diff(s) != 1), n - 1)      # the last index of each run
    first_end = ends[np.searchsorted(ends, np.arange(n), side="left")]
    result: np.ndarray = first_end - np.arange(n) + 1
    return result


def find_restart(seq: np.ndarray | None, state: SeqTimeState) -> int | None:
    """Index of the first reading that starts a restarted sequence, or None: a fall back to 0, or an
    implausible jump (forward or back) confirmed by CONFIRM consecutive readings, counting a run
    that began in an earlier batch (``state.pending``)."""
    if seq is None or len(seq) == 0 or state.last_seq is None:
        return None
    s = seq.astype(np.int64, copy=False)
    last = state.last_seq
    if state.pending is None:
        lo, hi = int(s.min()), int(s.max())
        if lo > 0 and hi - last <= SEQ_JUMP and max(last, hi) - lo <= RESTART_GAP:
            return None                 # the usual batch: nothing in it can start a new numbering
    before, jump = _plausible(s, last)
    if state.pending is None and not jump.any():
        hit0 = (s < before) & (s == 0)
        return int(np.argmax(hit0)) if hit0.any() else None
    runs = _run_lengths(s)
    if state.pending is not None and int(s[0]) == state.pending[0] + 1:
        runs = runs.copy()
        runs[0] += state.pending[1]
        jump = jump.copy()
        jump[0] = True
    hit = ((s < before) & (s == 0)) | (jump & (runs >= CONFIRM))
    idx = np.flatnonzero(hit)
    return int(idx[0]) if len(idx) else None


def find_clock_restart(t: np.ndarray, values: Mapping[str, np.ndarray], seq: np.ndarray | None,
                       state: SeqTimeState, gap: float = CLOCK_RESTART) -> int | None:
    """Index of the first reading whose clock restarted, or None; ``state`` is not changed.

    A reading restarts the clock when it would pass every check but time
    (its time finite, its values good, its seq, if any, above the latest) and
    its time lies more than ``gap`` seconds before the time reference
    ``validate`` holds for it (the latest accepted time). A reading whose seq
    steps back is not one: with its time far back it is more likely a reading
    sent again (a logger replaying its buffer) than a restart, and accepting
    it would count the same reading twice; it stays refused (as
    ``time_backwards``, time being judged first).
    """
    n = len(t)
    if n == 0 or not gap < np.inf:
        return None
    # cheap screens: the latest time of any reading bounds the time reference from above
    lo, hi = float(np.fmin.reduce(t)), float(np.fmax.reduce(t))
    if lo != lo or lo >= max(state.last_t, hi) - gap:
        return None                       # no time at all, or none so far back from any other
    tf = np.isfinite(t)
    if not (t < _before(np.where(tf, t, -np.inf), state.last_t) - gap).any():
        return None
    code, _ = _value_code(values, n)
    good = tf & (code == 0)
    if seq is not None:
        s = seq.astype(np.int64, copy=False)
        good &= s > _before(s, state.last_seq if state.last_seq is not None else int(s[0]) - 1)
    # the same reference validate uses: readings that pass the value and seq checks
    idx = np.flatnonzero(good & (t < _before(np.where(good, t, -np.inf), state.last_t) - gap))
    return int(idx[0]) if len(idx) else None


def validate(t: np.ndarray, values: Mapping[str, np.ndarray], seq: np.ndarray | None,
             state: SeqTimeState) -> Verdict:
    """Judge each reading; update ``state`` (latest time, latest seq).

    A reading is one row: its time, its seq, and the channel values it carries
    (NaN = not carried). It is accepted when its time is finite and not before
    the latest time seen, its seq (if any) is above the latest seq seen, every
    value it carries is finite, positive where the quantity must be, and not
    absurd, and it carries at least one known channel. The first failing
    check names the reason (time first, then seq, then values). Only accepted
    readings move the time reference on; every reading with a seq moves the
    seq reference on (a refused reading was received, so it is not lost).
    Seq gaps between readings that pass the seq check count as lost readings.
    A restarted seq or clock (``find_restart``, ``find_clock_restart``) is the
    caller's to handle before: here every step back is refused.
    """
    n = len(t)
    if n == 0:
        return Verdict(np.zeros(0, dtype=np.int64), _FIXED, 0)
    code, reasons = _value_code(values, n)
    lost = 0
    gap_lo = gap_hi = None
    if seq is not None:
        s = seq.astype(np.int64, copy=False)
        # the first seq ever seen sets the baseline: nothing before it counts as lost
        start = state.last_seq if state.last_seq is not None else int(s[0]) - 1
        before, jump = _plausible(s, start)
        _set(code, jump & (s > before), reasons, "seq_jump")
        _set(code, s < before, reasons, "seq_backwards")
        _set(code, s == before, reasons, "seq_duplicate")
        fresh = (s > before) & ~jump
        gaps = s[fresh] - before[fresh] - 1
        # a refused implausible reading whose seq is one bit away from one of the next expected ones is
        # that reading, garbled: it stands for one missing position of the gap it sits in (received, so
        # not lost); any other implausible reading is an extra one and fills nothing
        any_jump = bool(jump.any())
        if any_jump or state.floating:
            garbled = np.zeros(n, dtype=bool)
            if any_jump:
                for m in range(1, _NEAR + 1):
                    flipped = s ^ (before + m)
                    garbled |= (flipped > 0) & ((flipped & (flipped - 1)) == 0)
                garbled &= jump
            taken = np.cumsum(garbled)[fresh]
            between = np.diff(np.concatenate(([0], taken)))
            if len(between):
                between[0] += state.floating
                state.floating = int(garbled.sum() - taken[-1])
            else:
                state.floating += int(garbled.sum())
            gaps = gaps - np.minimum(gaps, between)
        lost = int(gaps.sum())
        if lost:
            where = gaps > 0
            gap_lo, gap_hi = before[fresh][where], s[fresh][where]
        plausible = s[~jump] if any_jump else s
        state.last_seq = int(max(int(plausible.max()), start)) if len(plausible) else start
        # an implausible run reaching the end of the batch waits for the next one to confirm it
        previous, state.pending = state.pending, None
        if any_jump and jump[-1]:
            breaks = np.flatnonzero(np.diff(s) != 1)
            run_start = int(breaks[-1]) + 1 if len(breaks) else 0
            length = n - run_start
            if run_start == 0 and previous is not None and int(s[0]) == previous[0] + 1:
                length += previous[1]
            state.pending = (int(s[-1]), length)
    tf = np.isfinite(t)
    # only readings that passed every other check set the time reference, so a
    # refused reading with a wild time cannot block the ones after it
    tt = np.where(tf & (code == 0), t, -np.inf)
    tbefore = _before(tt, state.last_t)
    _set(code, tf & (t < tbefore), reasons, "time_backwards")
    _set(code, ~tf, reasons, "time_not_finite")
    state.last_t = float(max(state.last_t, tt.max()))
    return Verdict(code, tuple(reasons), lost, gap_lo, gap_hi)


def _value_code(values: Mapping[str, np.ndarray], n: int) -> tuple[np.ndarray, list[str]]:
    """Codes and reasons of the value checks alone (0 = every value it carries is good)."""
    reasons: list[str] = list(_FIXED)
    code = np.zeros(n, dtype=np.int64)
    # lowest priority first; each later check overwrites
    carried_any = np.zeros(n, dtype=bool)
    checks: list[tuple[str, np.ndarray]] = []
    for key in sorted(values, key=_order):
        v = values[key]
        carried = ~np.isnan(v)
        carried_any |= carried
        limit = ABSURD.get(key, np.inf)
        # fast path: the smallest and largest carried values (NaN ignored) show whether any is bad
        lo, hi = float(np.fmin.reduce(v)), float(np.fmax.reduce(v))
        if lo != lo or ((lo > 0 or key not in POSITIVE) and -limit <= lo and hi <= limit
                        and -np.inf < lo and hi < np.inf):
            continue          # nothing carried, or every carried value finite, in range and positive
        finite = np.isfinite(v)
        checks.append((f"{key}_not_finite", carried & ~finite))
        if key in POSITIVE:
            checks.append((f"{key}_not_positive", finite & (v <= 0)))
        if limit != np.inf:
            checks.append((f"{key}_absurd", finite & (np.abs(v) > limit)))
    _set(code, ~carried_any, reasons, "no_channels")
    for name, mask in reversed(checks):
        _set(code, mask, reasons, name)
    return code, reasons


def _order(key: str) -> tuple[int, str]:
    order = ("ne", "Te", "Ti", "B", "p0")
    return (order.index(key) if key in order else len(order), key)


def _set(code: np.ndarray, mask: np.ndarray, reasons: list[str], name: str) -> None:
    if not mask.any():
        return
    if name not in reasons:
        reasons.append(name)
    code[mask] = reasons.index(name) + 1
