"""The playback line: live says LIVE; a replay shows position, speed, paused or running."""

from __future__ import annotations

from rich.text import Text
from textual.app import RenderResult
from textual.reactive import reactive
from textual.widget import Widget

from monitor.snapshot import Snapshot
from monitor.tui import palette
from monitor.tui.formatting import fmt_number

__all__ = ["PlaybackBar", "playback_text"]


def playback_text(snapshot: Snapshot | None, width: int) -> Text:
    """One line describing live or replay state."""
    if snapshot is None:
        return Text("", style=palette.DIM)
    if snapshot.live or snapshot.replay is None:
        return Text.assemble(("● LIVE", palette.NORMAL), ("  readings as they arrive; replay keys inactive", palette.DIM))
    r = snapshot.replay
    speed = "max speed" if r.speed is None else f"×{fmt_number(r.speed)}"
    state = ("‖ PAUSED", palette.CAUTION) if r.paused else ("▶ playing", palette.NORMAL)
    pos = r.time - r.start
    if r.end is not None and r.end > r.start:
        total = r.end - r.start
        pos_text = f"{pos:.1f} / {total:.1f} s"
        bar_w = max(4, width - len(pos_text) - len(speed) - 26)
        filled = int(round(bar_w * min(1.0, max(0.0, pos / total))))
        bar = "━" * filled + "╸" + "─" * max(0, bar_w - filled - 1)
    else:
        pos_text, bar = f"{pos:.1f} s", ""
    return Text.assemble(("⟲ REPLAY ", palette.NORMAL), state, ("  ", ""), (pos_text, palette.STRONG),
                         ("  ", ""), (bar, palette.DIM), ("  ", ""), (speed, palette.NORMAL))


class PlaybackBar(Widget):
    """A single line under the sources."""

    DEFAULT_CSS = """
    PlaybackBar {
        height: 1;
    }
    """

    snapshot: reactive[Snapshot | None] = reactive(None, always_update=True)
    """The snapshot whose live flag and replay position are shown."""

    def __init__(self, *, name: str | None = None, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(name=name, id=id, classes=classes)

    def render(self) -> RenderResult:
        return playback_text(self.snapshot, self.size.width or 80)
