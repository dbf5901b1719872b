"""A base for the panels that draw the latest snapshot as one Text: built once per snapshot, repainted only when it changed."""

from __future__ import annotations

from rich.text import Text
from textual.app import RenderResult
from textual.reactive import reactive
from textual.widget import Widget

from monitor.snapshot import Snapshot

__all__ = ["SnapshotView"]


class SnapshotView(Widget):
    """Holds the snapshot to draw, the unit system and the frame's wall time. A subclass builds its Text
    (``build``) and says which rows it shows (``row_shape``): the Text is built once per snapshot and the
    panel repaints only when the Text differs from the last one; a change of shape re-lays it out."""

    snapshot: reactive[Snapshot | None] = reactive(None, always_update=True, repaint=False)
    """The snapshot to show; None before the first one."""

    units: reactive[str] = reactive("practical", repaint=False)
    """``practical`` (cm^-3, eV, G, mTorr) or ``SI``."""

    def __init__(self, *, name: str | None = None, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(name=name, id=id, classes=classes)
        self._shape: object = None
        self._text: Text | None = None
        self.now = 0.0
        """Wall time of the frame (the screen's clock), for ages."""
        self.stale_after = 2.0
        """Seconds without a reading after which a live source's values are stale."""

    def row_shape(self, snapshot: Snapshot | None) -> object:
        """What decides the panel's height; the default is the set of quantities present."""
        return None if snapshot is None else tuple(sorted(snapshot.latest))

    def build(self) -> Text:
        """The panel's Text for the current snapshot, units and width."""
        raise NotImplementedError

    def watch_snapshot(self) -> None:
        self.rebuild()

    def watch_units(self) -> None:
        self.rebuild()

    def on_resize(self) -> None:
        self.rebuild(force=True)

    def rebuild(self, force: bool = False) -> None:
        """Build the Text; repaint if it changed, re-lay out if the shape changed."""
        text = self.build()
        shape = self.row_shape(self.snapshot)
        old = self._text
        self._text = text
        if shape != self._shape:
            self._shape = shape
            self.refresh(layout=True)
        elif force or old is None or old.plain != text.plain or old.spans != text.spans:
            self.refresh()

    def render(self) -> RenderResult:
        return self._text if self._text is not None else self.build()
