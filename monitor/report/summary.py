"""Pure shot arithmetic for the report: time inside each limit, excursions, and per-quantity statistics."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Iterable, Mapping

import numpy as np

__all__ = ["Excursion", "LimitSummary", "QuantityStats", "sample_durations", "limit_summary", "quantity_stats"]


@dataclass(frozen=True)
class Excursion:
    """One run of samples beyond a limit while the discharge was on: from the first sample outside
    (``start``) to the first sample back inside or the end of the evaluated data (``end``)."""

    limit: str
    quantity: str
    side: str            # "high" or "low"
    bound: float
    start: float
    end: float
    duration: float
    peak: float          # the most extreme value of the run


@dataclass(frozen=True)
class LimitSummary:
    name: str
    quantity: str
    low: float | None
    high: float | None
    evaluated_s: float   # discharge on and the quantity known
    inside_s: float
    fraction: float | None
    excursions: tuple[Excursion, ...]


@dataclass(frozen=True)
class QuantityStats:
    """Statistics of one quantity. For a reading (ne, Te, ...) ``n``, min, median and max are over the
    readings as they arrived; ``held`` is then the number of samples that carried one of them after the
    alignment hold (a 20 Hz Te held onto a 1 kHz ne clock: n 20 per s, held up to 1000 per s).
    For a derived quantity ``held`` is None and the figures are over the samples."""

    name: str
    unit: str
    n: int
    min: float
    median: float
    max: float
    held: int | None = None


def sample_durations(t: np.ndarray, cap: float) -> np.ndarray:
    """Each sample stands for the time until the next one (sample and hold), at most ``cap``
    seconds (a longer gap is missing data, not time inside or outside); the last sample: 0 s."""
    t = np.asarray(t, dtype=np.float64)
    if len(t) == 0:
        return t.copy()
    dt = np.empty_like(t)
    dt[:-1] = np.minimum(np.diff(t), cap)
    dt[-1] = 0.0
    return np.maximum(dt, 0.0)


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """[start, stop) index pairs of the True runs of ``mask``."""
    if len(mask) == 0:
        return []
    m = np.concatenate(([False], mask, [False])).astype(np.int8)
    edges = np.flatnonzero(np.diff(m))
    return list(zip(edges[0::2].tolist(), edges[1::2].tolist()))


def _outside(known: np.ndarray, enter: np.ndarray, stay: np.ndarray) -> np.ndarray:
    """Hysteresis: an excursion starts at a known sample beyond the limit (``enter``) and ends at
    the next known sample back inside by the deadband (not ``stay``); samples where the quantity
    is not evaluated (unknown, discharge off) neither end it nor count as outside."""
    n = len(known)
    if n == 0:
        return np.zeros(0, dtype=bool)
    idx = np.arange(n)
    last_enter = np.maximum.accumulate(np.where(enter & known, idx, -1))
    last_break = np.maximum.accumulate(np.where(known & ~stay, idx, -1))
    return last_enter > last_break


def _merge(runs: list[tuple[int, int]], t: np.ndarray, gap: float) -> list[tuple[int, int]]:
    """Join runs whose gap (first sample back inside to the next one outside) is shorter than ``gap`` s."""
    out: list[tuple[int, int]] = []
    for a, b in runs:
        if out and b > a and out[-1][1] < len(t) and t[a] - t[out[-1][1]] < gap:
            out[-1] = (out[-1][0], b)
        else:
            out.append((a, b))
    return out


def limit_summary(spec: Any, t: np.ndarray, value: np.ndarray, on: np.ndarray, dt: np.ndarray) -> LimitSummary:
    """Time inside ``spec`` (low <= value <= high) over the samples with the discharge on and the
    value known, and each excursion, separately for the high and the low side. An excursion starts
    at the first sample beyond the limit and lasts while the value stays beyond the limit less the
    limit's deadband (the alarm's own hysteresis); excursions closer than the limit's off_delay
    are one excursion (as the alarm would see them)."""
    name = str(getattr(spec, "name", "?"))
    quantity = str(getattr(spec, "quantity", "?"))
    high = getattr(spec, "high", None)
    low = getattr(spec, "low", None)
    only_on = bool(getattr(spec, "only_when_on", True))
    off_delay = float(getattr(spec, "off_delay", 0.0) or 0.0)
    band_of = getattr(spec, "band", None)
    v = np.asarray(value, dtype=np.float64)
    n = len(v)
    known = np.isfinite(v) & (on if only_on else np.ones(n, dtype=bool))
    above = known & (v > high) if high is not None else np.zeros(n, dtype=bool)
    below = known & (v < low) if low is not None else np.zeros(n, dtype=bool)
    evaluated = float(dt[known].sum())
    inside = float(dt[known & ~above & ~below].sum())
    excursions: list[Excursion] = []
    for side, enter, bound in (("high", above, high), ("low", below, low)):
        if bound is None:
            continue
        band = float(band_of(bound)) if callable(band_of) else 0.0
        with np.errstate(invalid="ignore"):
            stay = v > bound - band if side == "high" else v < bound + band
        cont = _outside(known, enter, stay)
        mask = cont & known
        runs = []
        for a, b in _runs(cont):
            inside_run = np.flatnonzero(mask[a:b])
            runs.append((a, a + int(inside_run[-1]) + 1))      # ends after its last known sample outside
        for a, b in _merge(runs, t, off_delay):
            start = float(t[a])
            end = float(t[b]) if b < n else float(t[b - 1] + dt[b - 1])
            seg = v[a:b][mask[a:b]]
            peak = float(seg.max() if side == "high" else seg.min())
            excursions.append(Excursion(name, quantity, side, float(bound), start, end, end - start, peak))
    excursions.sort(key=lambda e: e.start)
    return LimitSummary(name, quantity, low, high, evaluated, inside,
                        inside / evaluated if evaluated > 0 else None, tuple(excursions))


def quantity_stats(values: Mapping[str, np.ndarray], units: Mapping[str, str], order: Iterable[str],
                   readings: Mapping[str, np.ndarray] | None = None) -> list[QuantityStats]:
    """min / median / max of the finite samples of each quantity, in ``order`` then the rest. A quantity
    in ``readings`` (its values as read, before the alignment hold) is summarised over those, with the
    number of aligned samples that carried a value as ``held``."""
    readings = readings or {}
    names = [n for n in order if n in values] + sorted(n for n in values if n not in set(order))
    out: list[QuantityStats] = []
    for name in names:
        v = np.asarray(values[name], dtype=np.float64)
        held = None
        if name in readings:
            held = int(np.count_nonzero(np.isfinite(v)))
            v = np.asarray(readings[name], dtype=np.float64)
        v = v[np.isfinite(v)]
        if len(v) == 0:
            out.append(QuantityStats(name, units.get(name, ""), 0, math.nan, math.nan, math.nan, held))
            continue
        out.append(QuantityStats(name, units.get(name, ""), int(len(v)), float(v.min()), float(np.median(v)),
                                 float(v.max()), held))
    return out
