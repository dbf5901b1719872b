"""Alignment of channels arriving at different rates: hold each last value for at most its max age, then missing."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

__all__ = ["Held", "Aligner", "hold"]


@dataclass
class Held:
    """The last value of one channel that alignment may still hold."""

    t: float = -np.inf
    value: float = np.nan
    sigma: float = np.nan


def hold(t: np.ndarray, v: np.ndarray, s: np.ndarray | None, max_age: float,
         prev: Held) -> tuple[np.ndarray, np.ndarray | None, Held]:
    """Forward-fill ``v`` (NaN = no new value) at each time ``t`` with the latest
    value measured at or before it, only while that value is at most ``max_age``
    seconds old; NaN after. ``prev`` carries the value from earlier batches.
    Returns the held values, the held sigma (if ``s`` given) and the new state."""
    n = len(t)
    if n == 0:
        return v.copy(), (s.copy() if s is not None else None), prev
    fresh = ~np.isnan(v)
    last = np.maximum.accumulate(np.where(fresh, np.arange(n), -1))
    have = last >= 0
    pick = np.where(have, last, 0)
    value = np.where(have, v[pick], prev.value)
    t_of = np.where(have, t[pick], prev.t)
    ok = (t - t_of) <= max_age
    out = np.where(ok, value, np.nan)
    sig_out = None
    if s is not None:
        sig = np.where(have, s[pick], prev.sigma)
        sig_out = np.where(ok, sig, np.nan)
    if fresh.any():
        i = int(last[-1])
        state = Held(float(t[i]), float(v[i]), float(s[i]) if s is not None else np.nan)
    else:
        state = prev
    return out, sig_out, state


@dataclass
class Aligner:
    """Holds, per source and per channel, the last value across batches.

    ``holds`` maps a canonical key to its max age (s of data time); keys not in
    it use ``default``. Once a source has delivered a key, every later batch
    of that source carries the key (held or NaN), so frames are the same
    however the stream is cut into batches.
    """

    default: float = 0.25
    holds: Mapping[str, float] = field(default_factory=dict)
    _state: dict[str, dict[str, Held]] = field(default_factory=dict)

    def reset(self, source: str) -> None:
        self._state.pop(source, None)

    def keys(self, source: str) -> tuple[str, ...]:
        return tuple(self._state.get(source, {}))

    def align(self, source: str, t: np.ndarray, values: Mapping[str, np.ndarray],
              sigma: Mapping[str, np.ndarray]) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray]]:
        """Held values and sigma for every key this source has delivered so far."""
        state = self._state.setdefault(source, {})
        n = len(t)
        out_v: dict[str, np.ndarray] = {}
        out_s: dict[str, np.ndarray] = {}
        keys = list(state) + [k for k in values if k not in state]
        for key in keys:
            v = values.get(key)
            if v is None:
                v = np.full(n, np.nan)
            s = sigma.get(key)
            prev = state.get(key, Held())
            if s is None and not np.isnan(prev.sigma):
                s = np.full(n, np.nan)
            held, held_s, new = hold(t, v, s, self.holds.get(key, self.default), prev)
            if key in values and not (~np.isnan(v)).any() and key not in state:
                continue      # the key was only ever NaN: not delivered yet
            state[key] = new
            out_v[key] = held
            if held_s is not None and (np.isfinite(held_s).any() or key in sigma):
                out_s[key] = held_s
        return out_v, out_s
