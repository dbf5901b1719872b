"""Plain settings of the screen (no Textual): device guides for the map, the envelope box, bell, units, clock."""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import Any, Callable

__all__ = ["Box", "ScreenSettings", "envelope_box"]

Box = tuple[float | None, float | None, float | None, float | None]


@dataclass(frozen=True)
class ScreenSettings:
    """What the screen needs beyond the snapshot.

    ``clock`` gives wall time (ages of readings, the flashing phase); tests
    inject a fixed one so SVG snapshots are stable. ``refresh_hz`` is the
    bounded render rate (10-20 Hz). ``quit_after`` (wall seconds, None: never)
    makes the screen quit by itself (``regime demo --duration``, automation).
    """

    title: str = "regime"
    source_label: str = ""
    length: float | None = None
    wave_frequency: float | None = None
    box: Box = (None, None, None, None)
    units: str = "practical"
    bell: bool = True
    refresh_hz: float = 15.0
    clock: Callable[[], float] = field(default=time.time)
    seek_step: float = 5.0
    stale_after: float = 2.0
    quit_after: float | None = None


def envelope_box(limits: Any) -> Box:
    """(ne low, ne high, Te low, Te high) from ALARMS' LimitSpec values (duck-typed: quantity, low, high).

    Several limits on one quantity: the innermost box (highest low, lowest high).
    """
    lo_n = hi_n = lo_t = hi_t = None
    for spec in limits or ():
        q = getattr(spec, "quantity", None)
        lo, hi = getattr(spec, "low", None), getattr(spec, "high", None)
        if q == "ne":
            lo_n = lo if lo_n is None or (lo is not None and lo > lo_n) else lo_n
            hi_n = hi if hi_n is None or (hi is not None and hi < hi_n) else hi_n
        elif q == "Te":
            lo_t = lo if lo_t is None or (lo is not None and lo > lo_t) else lo_t
            hi_t = hi if hi_t is None or (hi is not None and hi < hi_t) else hi_t
    return (lo_n, hi_n, lo_t, hi_t)
