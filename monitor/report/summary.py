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
    name: str
    unit: str
    n: int
    min: float
    median: float
    max: float


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


def limit_summary(spec: Any, t: np.ndarray, value: np.ndarray, on: np.ndarray, dt: np.ndarray) -> LimitSummary:
    """Time inside ``spec`` (low <= value <= high) over the samples with the discharge on and the
    value known, and each excursion, separately for the high and the low side."""
    name = str(getattr(spec, "name", "?"))
    quantity = str(getattr(spec, "quantity", "?"))
    high = getattr(spec, "high", None)
    low = getattr(spec, "low", None)
    only_on = bool(getattr(spec, "only_when_on", True))
    v = np.asarray(value, dtype=np.float64)
    known = np.isfinite(v) & (on if only_on else np.ones(len(v), dtype=bool))
    above = known & (v > high) if high is not None else np.zeros(len(v), dtype=bool)
    below = known & (v < low) if low is not None else np.zeros(len(v), dtype=bool)
    evaluated = float(dt[known].sum())
    inside = float(dt[known & ~above & ~below].sum())
    excursions: list[Excursion] = []
    for side, mask, bound in (("high", above, high), ("low", below, low)):
        for a, b in _runs(mask):
            start = float(t[a])
            end = float(t[b]) if b < len(t) else float(t[b - 1] + dt[b - 1])
            peak = float(v[a:b].max() if side == "high" else v[a:b].min())
            excursions.append(Excursion(name, quantity, side, float(bound), start, end, end - start, peak))
    excursions.sort(key=lambda e: e.start)
    return LimitSummary(name, quantity, low, high, evaluated, inside,
                        inside / evaluated if evaluated > 0 else None, tuple(excursions))


def quantity_stats(values: Mapping[str, np.ndarray], units: Mapping[str, str],
                   order: Iterable[str]) -> list[QuantityStats]:
    """min / median / max of the finite samples of each quantity, in ``order`` then the rest."""
    names = [n for n in order if n in values] + sorted(n for n in values if n not in set(order))
    out: list[QuantityStats] = []
    for name in names:
        v = np.asarray(values[name], dtype=np.float64)
        v = v[np.isfinite(v)]
        if len(v) == 0:
            out.append(QuantityStats(name, units.get(name, ""), 0, math.nan, math.nan, math.nan))
            continue
        out.append(QuantityStats(name, units.get(name, ""), int(len(v)), float(v.min()), float(np.median(v)),
                                 float(v.max())))
    return out
