"""Shot splitting by the discharge on/off rule (ne >= on_above) with pre- and post-trigger margins."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np

__all__ = ["Action", "ShotSplitter", "discharge_state"]

Kind = Literal["idle", "open", "rows", "close"]


@dataclass(frozen=True)
class Action:
    """What to do with rows [start, stop) of a frame: keep them as pre-trigger history ("idle"),
    open a new shot triggered at row ``start`` ("open"), write them to the open shot ("rows"), or
    close the open shot before row ``start`` ("close")."""

    kind: Kind
    start: int
    stop: int = 0


def discharge_state(ne: np.ndarray | None, on_above: float, previous: bool) -> np.ndarray:
    """Per-sample discharge state: ne >= on_above where ne is known, else the last known state."""
    if ne is None:
        return np.zeros(0, dtype=bool)
    ne = np.asarray(ne, dtype=np.float64)
    known = np.isfinite(ne)
    raw = ne >= on_above
    if known.all():
        return raw
    idx = np.where(known, np.arange(len(ne)), -1)
    np.maximum.accumulate(idx, out=idx)
    return np.where(idx >= 0, raw[np.maximum(idx, 0)], previous)


class ShotSplitter:
    """Turns each frame's (t, ne) into Actions. Whole arrays; a Python step only per on/off change.

    ``split`` "discharge": a shot opens at the first sample with the discharge on and closes at the
    first sample later than ``post`` seconds after the discharge went off (a discharge that comes
    back within the margin continues the same shot). "none": one shot from the first sample on.
    """

    def __init__(self, on_above: float, post: float, split: str = "discharge") -> None:
        self.on_above = float(on_above)
        self.post = float(post)
        self.split = split
        self.on = False                 # discharge state after the last sample seen
        self.in_shot = False
        self.off_since: float | None = None

    def feed(self, t: np.ndarray, ne: np.ndarray | None) -> list[Action]:
        n = len(t)
        if n == 0:
            return []
        if self.split == "none":
            if self.in_shot:
                return [Action("rows", 0, n)]
            self.in_shot = True
            return [Action("open", 0), Action("rows", 0, n)]
        state = discharge_state(ne, self.on_above, self.on) if ne is not None else np.full(n, self.on)
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
