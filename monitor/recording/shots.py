"""Shot splitting by the discharge state the pipeline decided (monitor.alarms.discharge), with a post-trigger margin."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np

from monitor.alarms.discharge import DischargeDetector

__all__ = ["Action", "ShotSplitter"]

Kind = Literal["idle", "open", "rows", "close"]


@dataclass(frozen=True)
class Action:
    """What to do with rows [start, stop) of a frame: keep them as pre-trigger history ("idle"),
    open a new shot triggered at row ``start`` ("open"), write them to the open shot ("rows"), or
    close the open shot before row ``start`` ("close")."""

    kind: Kind
    start: int
    stop: int = 0


class ShotSplitter:
    """Turns each frame's (t, discharge state) into Actions. Whole arrays; a Python step only per on/off change.

    The discharge state is the frame's own (``Frame.discharge``, the pipeline's one rule, which the
    alarm engine's suppression reads too). A frame built without a pipeline (by hand) is judged here
    by the same rule (``DischargeDetector``), so a shot never opens while the alarms treat the
    discharge as off.

    ``split`` "discharge": a shot opens at the first sample with the discharge on and closes at the
    first sample later than ``post`` seconds after the discharge went off (a discharge that comes
    back within the margin continues the same shot). "none": one shot from the first sample on.
    """

    def __init__(self, on_above: float, post: float, split: str = "discharge", *, deadband: float = 0.1,
                 delay: float = 0.0) -> None:
        self.on_above = float(on_above)
        self._detector = DischargeDetector(self.on_above, deadband, delay)
        self.post = float(post)
        self.split = split
        self.on = False                 # discharge state after the last sample seen
        self.in_shot = False
        self.off_since: float | None = None

    def feed(self, t: np.ndarray, discharge: np.ndarray | None, ne: np.ndarray | None = None) -> list[Action]:
        """Actions for the samples at ``t``: ``discharge`` the frame's per-sample state, or None for a
        frame built by hand, whose density ``ne`` is then judged by the same rule."""
        n = len(t)
        if n == 0:
            return []
        if self.split == "none":
            if self.in_shot:
                return [Action("rows", 0, n)]
            self.in_shot = True
            return [Action("open", 0), Action("rows", 0, n)]
        state = np.asarray(discharge, dtype=bool) if discharge is not None else self._detector.step(t, ne)
        change = np.flatnonzero(state[1:] != state[:-1]) + 1
        bounds = [0, *change.tolist(), n]
        actions: list[Action] = []
        for a, b in zip(bounds[:-1], bounds[1:]):
            if state[a]:
                self.off_since = None
                if not self.in_shot:
                    self.in_shot = True
                    actions.append(Action("open", a))
                actions.append(Action("rows", a, b))
                continue
            if not self.in_shot:
                actions.append(Action("idle", a, b))
                continue
            if self.off_since is None:
                self.off_since = float(t[a])
            close_t = self.off_since + self.post
            k = a + int(np.searchsorted(t[a:b], close_t, side="right"))
            if k > a:
                actions.append(Action("rows", a, k))
            if k < b:
                actions.append(Action("close", k))
                self.in_shot = False
                self.off_since = None
                actions.append(Action("idle", k, b))
        self.on = bool(state[-1])
        return actions
