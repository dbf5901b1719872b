"""The base readings (ne, Te and whichever of Ti, B, p0 arrive): value, uncertainty, unit and a short trend."""

from __future__ import annotations

from rich.table import Table
from rich.text import Text
from textual.app import RenderResult
from textual.reactive import reactive
from textual.widget import Widget

from monitor.quantities import BASE
from monitor.snapshot import Snapshot
from monitor.tui import palette
from monitor.tui.formatting import fmt_value
from monitor.tui.renderables.trend import trend_cells

__all__ = ["Readings"]

_SHORT = {"ne": "density", "Te": "e temp", "Ti": "ion temp", "B": "field", "p0": "pressure"}


class Readings(Widget):
    """One row per base quantity present in the snapshot."""

    DEFAULT_CSS = """
    Readings {
        height: auto;
    }
    """

    snapshot: reactive[Snapshot | None] = reactive(None, always_update=True)
    """The snapshot to show; None before the first one."""

    units: reactive[str] = reactive("practical")
    """``practical`` (cm^-3, eV, G, mTorr) or ``SI``."""

    def __init__(self, *, name: str | None = None, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(name=name, id=id, classes=classes)
        self._shape: object = None

    def watch_snapshot(self, snapshot: Snapshot | None) -> None:
        shape = None if snapshot is None else tuple(sorted(set(snapshot.latest) & {"ne", "Te", "Ti", "B", "p0"}))
        if shape != self._shape:
            self._shape = shape
            self.refresh(layout=True)

    def render(self) -> RenderResult:
        snap = self.snapshot
        if snap is None:
            return Text("waiting for the first reading…", style=palette.DIM)
        width = self.size.width or 40
        wide = width >= 52
        trend_w = max(6, min(24, width - (46 if wide else 34)))
        table = Table.grid(padding=(0, 1))
        table.add_column(style=palette.LABEL, no_wrap=True)
        if wide:
            table.add_column(style=palette.DIM, no_wrap=True)
        table.add_column(justify="right", style=palette.STRONG, no_wrap=True)
        table.add_column(justify="left", style=palette.DIM, no_wrap=True)
        table.add_column(style=palette.DIM, no_wrap=True, min_width=5)
        table.add_column(style=palette.DIM, no_wrap=True)
        shown = 0
        for q in BASE:
            if q.name not in snap.latest and q.name not in snap.trail:
                continue
            value, sigma = snap.latest.get(q.name, (float("nan"), None))
            number, unc, unit = fmt_value(value, sigma, q.unit, self.units)
            trail = snap.trail.get(q.name)
            trend = trend_cells(trail, trend_w, log=q.name == "ne") if trail is not None else ""
            cells = [q.name] + ([_SHORT[q.name]] if wide else []) + [number, unc, unit, trend]
            table.add_row(*cells)
            shown += 1
        if not shown:
            return Text("no base readings yet", style=palette.DIM)
        return table
