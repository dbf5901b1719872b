"""Whether the discharge is on, decided once per sample: the one rule the alarms, the shot splitter and the screen read."""

from __future__ import annotations

import numpy as np

from monitor.alarms.detect import RunState, toggles

__all__ = ["DischargeDetector"]


class DischargeDetector:
    """The discharge-on rule, with its state carried from one frame to the next.

    On at ``ne >= on_above``; off below ``on_above * (1 - deadband)``; either
    change only after it has held for ``delay`` s of data time. A NaN density
    neither continues nor breaks a run; a frame without density holds the
    state. ``on_above`` None: no rule, the discharge counts as always on.
    ``on`` is None until a density has been judged (the state is unknown).
    The result does not depend on how the stream was cut into frames.
    """

    def __init__(self, on_above: float | None, deadband: float = 0.0, delay: float = 0.0) -> None:
        self.on_above = on_above
        self.deadband = float(deadband)
        self.delay = float(delay)
        self._on: bool | None = True if on_above is None else None
        self._run = RunState()

    @property
    def on(self) -> bool | None:
        """The state after the last sample judged; None before any density."""
        return self._on

    def restart(self) -> None:
        """Time starts over (a seek back, a restarted clock or publisher): a change that was
        waiting for its delay waits afresh; the state itself is kept."""
        self._run.run_start = None

    def step(self, t: np.ndarray, ne: np.ndarray | None) -> np.ndarray:
        """Per-sample discharge-on flags for the samples at ``t`` with densities ``ne`` (m^-3)."""
        n = len(t)
        if self.on_above is None:
            return np.ones(n, dtype=bool)
        on = np.full(n, bool(self._on))
        if ne is None or n == 0:
            return on
        ne = np.asarray(ne, dtype=np.float64)
        fin = np.isfinite(ne)
        idx = None if fin.all() else np.flatnonzero(fin)
        tt, nn = (t, ne) if idx is None else (t[idx], ne[idx])
        if len(tt) == 0:
            return on
        off_below = self.on_above * (1.0 - self.deadband)
        if self._run.active and not (nn < off_below).any():
            # on, and nothing in the frame could turn it off: what ``toggles`` would find, without its work
            self._run.run_start = None
            self._on = True
            return on
        with np.errstate(invalid="ignore"):
            for i, flag in toggles(tt, nn >= self.on_above, lambda: nn < off_below, self.delay, self.delay,
                                   self._run):
                on[(i if idx is None else int(idx[i])):] = flag
        self._on = bool(on[-1])
        return on
