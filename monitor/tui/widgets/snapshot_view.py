"""A base for the panels that draw the latest snapshot and re-lay themselves out only when their rows change."""

from __future__ import annotations

from textual.reactive import reactive
from textual.widget import Widget

from monitor.snapshot import Snapshot

__all__ = ["SnapshotView"]


class SnapshotView(Widget):
    """Holds the snapshot to draw and the unit system; a subclass says which rows it shows
    (``row_shape``), and a change of that shape triggers a layout refresh (the height changes)."""

    snapshot: reactive[Snapshot | None] = reactive(None, always_update=True)
    """The snapshot to show; None before the first one."""

    units: reactive[str] = reactive("practical")
    """``practical`` (cm^-3, eV, G, mTorr) or ``SI``."""

    def __init__(self, *, name: str | None = None, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(name=name, id=id, classes=classes)
        self._shape: object = None

    def row_shape(self, snapshot: Snapshot | None) -> object:
        """What decides the panel's height; the default is the set of quantities present."""
        return None if snapshot is None else tuple(sorted(snapshot.latest))

    def watch_snapshot(self, snapshot: Snapshot | None) -> None:
        shape = self.row_shape(snapshot)
        if shape != self._shape:
            self._shape = shape
            self.refresh(layout=True)
