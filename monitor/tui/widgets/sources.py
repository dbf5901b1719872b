"""The sources panel: link state, rate, age of the last reading, accepted / rejected / lost, and the recorder; trouble is loud."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from rich.text import Text
from textual.app import RenderResult
from textual.reactive import reactive
from textual.widget import Widget

from monitor.snapshot import Snapshot
from monitor.tui import feed, palette
from monitor.tui.formatting import fmt_age, fmt_number
from monitor.tui.renderables.grid import grid_text

__all__ = ["SourcesPanel", "source_trouble", "recorder_trouble", "recorder_line"]

_LINK = {   # one state per source (monitor.tui.feed.source_view)
    "connecting": ("◌", "connecting", palette.CAUTION),
    "connected": ("●", "connected", palette.OK_MARK),
    "stale": ("◼", "STALE", palette.ALERT),
    "disconnected": ("✖", "DISCONNECTED", palette.ALERT),
    "ended": ("■", "ended", palette.DIM),
    "failed": ("✖", "FAILED", palette.ALERT),
}


def source_trouble(snapshot: Snapshot, name: str, now: float, stale_after: float) -> str | None:
    """``STALE``, ``DISCONNECTED`` or ``FAILED`` when the source needs attention, else None (its one state:
    monitor.tui.feed.source_view)."""
    state = feed.source_view(snapshot, name, now, stale_after).state
    return state.upper() if state in ("stale", "disconnected", "failed") else None


def _count(n: int) -> str:
    return f"{n:,}"


def recorder_trouble(status: Any) -> str | None:
    """``WRITE FAILING`` while the disk refuses writes, ``DROPPED`` once readings of a shot were lost, else None."""
    if status is None:
        return None
    if not status.ok:
        return "WRITE FAILING"
    if status.dropped:
        return "DROPPED"
    return None


def recorder_line(status: Any, *, wide: bool) -> Text:
    """One line for the recorder: rows written, readings outside shots not recorded (unless
    split = "none"), dropped, then the file (the first to be cut on a narrow screen); a failing
    write in words, glyph and colour, with its reason."""
    trouble = recorder_trouble(status)
    line = Text(no_wrap=True)
    if trouble == "WRITE FAILING":
        line.append("✖", style=palette.ALERT)
        line.append(" recorder ", style=palette.NORMAL)
        line.append("WRITE FAILING", style=palette.ALERT + palette.LOUD)
    else:
        line.append("●" if status.file else "◌", style=palette.ALERT if trouble else palette.OK_MARK)
        line.append(" recorder", style=palette.NORMAL)
    line.append(f"  written {_count(status.rows_written)}", style=palette.DIM)
    if status.split != "none":
        line.append(f"  outside shots: {_count(status.rows_idle)} not recorded", style=palette.DIM)
    line.append(f"  dropped {_count(status.dropped)}", style=palette.ALERT if status.dropped else palette.DIM)
    if trouble == "WRITE FAILING":
        line.append(f"  {status.message}", style=palette.ALERT)
        return line
    if wide and status.errors:
        line.append(f"  write errors {status.errors}", style=palette.CAUTION)
    line.append(f"  {Path(status.file).name}" if status.file else "  between shots", style=palette.DIM)
    return line


class SourcesPanel(Widget):
    """One line per source; a stale or broken link is shown in words, a glyph and colour."""

    DEFAULT_CSS = """
    SourcesPanel {
        height: auto;
    }
    """

    snapshot: reactive[Snapshot | None] = reactive(None, always_update=True)
    """The snapshot whose sources and counters are shown."""

    now: reactive[float] = reactive(0.0)
    """Wall time of this frame (the screen's clock), for ages."""

    stale_after: reactive[float] = reactive(2.0)
    """Seconds without a reading after which a source is stale."""

    error: reactive[str | None] = reactive(None)
    """The pipeline worker's fatal error, if it stopped."""

    def __init__(self, *, name: str | None = None, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(name=name, id=id, classes=classes)
        self._shape: object = None

    def watch_snapshot(self, snapshot: Snapshot | None) -> None:
        trouble = snapshot is not None and (any(
            source_trouble(snapshot, n, self.now, self.stale_after) for n in snapshot.sources)
            or recorder_trouble(snapshot.recorder) is not None)
        self.set_class(bool(trouble) or self.error is not None, "-trouble")
        shape = (None if snapshot is None else len(set(snapshot.sources) | set(snapshot.counts)), self.error is not None,
                 snapshot is not None and snapshot.recorder is not None)
        if shape != self._shape:
            self._shape = shape
            self.refresh(layout=True)

    def render(self) -> RenderResult:
        snap = self.snapshot
        if snap is None:
            return Text("◌ waiting for the source…" if self.error is None else f"✖ PIPELINE STOPPED: {self.error}",
                        style=palette.CAUTION if self.error is None else palette.ALERT)
        wide = (self.size.width or 80) >= 110
        rows: list[list[Text]] = []
        for name in sorted(set(snap.sources) | set(snap.counts)):
            view = feed.source_view(snap, name, self.now, self.stale_after)
            counts = snap.counts.get(name)
            glyph, word, style = _LINK.get(view.state, ("?", view.state, palette.CAUTION))
            trouble = view.state in ("stale", "disconnected", "failed")
            rejected = sum(counts.rejected.values()) if counts else 0
            extra = f" retry {view.retries}" if view.retries and view.state != "stale" else ""
            message = view.message if view.message and (trouble or wide) else ""
            rows.append([
                Text(glyph, style=style), Text(name, style=palette.NORMAL),
                Text(word + extra, style=style + palette.LOUD if trouble else style),
                Text(f"{fmt_number(counts.rate if counts else 0.0)}/s", style=palette.DIM),
                Text(f"last reading {fmt_age(view.age)} ago" if view.state == "stale" else f"age {fmt_age(view.age)}",
                     style=palette.CAUTION if view.state == "stale" else palette.DIM),
                Text(f"ok {_count(counts.accepted if counts else 0)}", style=palette.DIM),
                Text(f"rej {_count(rejected)}", style=palette.CAUTION if rejected else palette.DIM),
                Text(f"lost {_count(counts.lost if counts else 0)}", style=palette.ALERT if counts and counts.lost else palette.DIM),
                Text(message, style=palette.DIM),
            ])
        if self.error is not None:
            rows.append([Text("✖", style=palette.ALERT), Text("pipeline", style=palette.NORMAL),
                         Text(f"STOPPED: {self.error}", style=palette.ALERT)])
        # left out first on a narrow screen: the link's message, readings/s, ok count
        out = grid_text(rows, max_width=self.size.width or None, drop=(8, 3, 5))
        if snap.recorder is not None:
            out.append("\n")
            out.append_text(recorder_line(snap.recorder, wide=wide))
        return out
