"""The playback line: live says LIVE; a replay shows position, speed, paused or running."""

from __future__ import annotations

from rich.text import Text
from textual.app import RenderResult
from textual.reactive import reactive
from textual.widget import Widget

from monitor.snapshot import Snapshot
from monitor.tui import feed, palette
from monitor.tui.formatting import fmt_age, fmt_number

__all__ = ["PlaybackBar", "playback_text"]


def playback_text(snapshot: Snapshot | None, width: int, *, now: float = 0.0, stale_after: float = 2.0) -> Text:
    """One line describing live or replay state: never LIVE while every live source is stale or down,
    and a replay that reached its end says ENDED."""
    if snapshot is None:
        return Text("", style=palette.DIM)
    views = [feed.source_view(snapshot, n, now, stale_after) for n in sorted(set(snapshot.sources) | set(snapshot.counts))]
    if snapshot.live or snapshot.replay is None:
        if views and all(v.state in ("stale", "disconnected", "failed") for v in views):
            words = "STALE" if any(v.state == "stale" for v in views) else views[0].state.upper()
            age = min((v.age for v in views if v.age is not None), default=None)
            return Text.assemble((f"◼ NOT LIVE: source {words}", palette.CAUTION + palette.LOUD),
                                 (f"  last reading {fmt_age(age)} ago; values shown are old", palette.DIM))
        if views and all(v.state == "ended" for v in views):
            return Text.assemble(("■ ENDED", palette.NORMAL), ("  the source has ended; values shown are its last", palette.DIM))
        return Text.assemble(("● LIVE", palette.NORMAL), ("  readings as they arrive; replay keys inactive", palette.DIM))
    r = snapshot.replay
    ended = bool(views) and all(v.state == "ended" for v in views)
    speed = "max speed" if r.speed is None else f"×{fmt_number(r.speed)}"
    if ended:
        state = ("■ ENDED", palette.NORMAL)
    else:
        state = ("‖ PAUSED", palette.CAUTION) if r.paused else ("▶ playing", palette.NORMAL)
    pos = max(0.0, r.time - r.start)
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
        self.now = 0.0
        """Wall time of the frame (the screen's clock), for ages."""
        self.stale_after = 2.0
        """Seconds without a reading after which a live source is stale."""

    def render(self) -> RenderResult:
        return playback_text(self.snapshot, self.size.width or 80, now=self.now, stale_after=self.stale_after)
