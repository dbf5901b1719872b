"""Vectorised condition timing: first samples where a condition has held for a delay, and the raise/return toggles."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

__all__ = ["TIME_EPS", "RunState", "qualified", "toggles"]

# Two data times closer than this are the same instant (sample times are
# often sums of a float step, e.g. 0.1 + 0.4 != 0.5 exactly).
TIME_EPS = 1e-9


@dataclass
class RunState:
    """What evaluation carries from one chunk to the next for one condition pair.

    ``active``: the condition is in alarm (after delays and deadband).
    ``run_start``: data time at which the condition that would toggle
    ``active`` (raise when inactive, return when active) began to hold
    continuously up to the last evaluated sample; None if it did not hold there.
    """

    active: bool = False
    run_start: float | None = None

    def reset(self) -> None:
        self.active = False
        self.run_start = None


def qualified(t: np.ndarray, c: np.ndarray, delay: float, carry: float | None) -> np.ndarray:
    """True where ``c`` has held continuously since the start of its run for at least ``delay`` s.

    ``carry`` is the start time of a run that was holding at the end of the
    previous chunk (applies to a run that begins at index 0).
    """
    if delay <= 0.0:
        return c
    n = len(c)
    starts = np.empty(n, dtype=bool)
    starts[0] = c[0]
    np.logical_and(c[1:], ~c[:-1], out=starts[1:])
    start_idx = np.flatnonzero(starts)
    if start_idx.size == 0:
        return np.zeros(n, dtype=bool)
    start_t = t[start_idx]
    if carry is not None and c[0]:
        start_t = start_t.copy()
        start_t[0] = carry
    run_of = np.cumsum(starts) - 1
    run_of[run_of < 0] = 0
    return c & (t - start_t[run_of] >= delay - TIME_EPS)


def _run_start_at_end(t: np.ndarray, c: np.ndarray, carry: float | None) -> float | None:
    if not c[-1]:
        return None
    rev_false = int(np.argmin(c[::-1]))        # offset from the end of the last False
    if c[::-1][rev_false]:                      # no False at all: the run spans the chunk
        return carry if carry is not None else float(t[0])
    return float(t[len(c) - rev_false])


def toggles(t: np.ndarray, raise_c: np.ndarray, clear_fn: Callable[[], np.ndarray], on_delay: float,
            off_delay: float, st: RunState) -> list[tuple[int, bool]]:
    """Indices where the alarm condition is raised (True) or returns (False), updating ``st``.

    ``raise_c`` and the return condition from ``clear_fn()`` (computed only if
    needed) must never hold on the same sample, so each run of a condition
    after a toggle starts after it and the whole-chunk run starts stay valid.
    """
    n = len(t)
    if n == 0:
        return []
    active0 = st.active
    if not active0 and not raise_c.any():
        st.run_start = None
        return []
    out: list[tuple[int, bool]] = []
    r_idx: np.ndarray | None = None
    c_idx: np.ndarray | None = None
    clear_c: np.ndarray | None = None
    pos = 0
    active = active0
    while pos < n:
        if not active:
            if r_idx is None:
                r_idx = np.flatnonzero(qualified(t, raise_c, on_delay, st.run_start if not active0 else None))
            j = int(np.searchsorted(r_idx, pos))
            if j >= r_idx.size:
                break
            i = int(r_idx[j])
        else:
            if c_idx is None:
                clear_c = clear_fn()
                c_idx = np.flatnonzero(qualified(t, clear_c, off_delay, st.run_start if active0 else None))
            j = int(np.searchsorted(c_idx, pos))
            if j >= c_idx.size:
                break
            i = int(c_idx[j])
        active = not active
        out.append((i, active))
        pos = i + 1
    end_c = (clear_c if clear_c is not None else clear_fn()) if active else raise_c
    st.run_start = _run_start_at_end(t, end_c, st.run_start if active == active0 else None)
    st.active = active
    return out
