"""The base readings (ne, Te and whichever of Ti, B, p0 arrive): value, uncertainty, unit, a short trend; stale ones struck with their age."""

from __future__ import annotations

from rich.text import Text

from monitor.quantities import BASE
from monitor.snapshot import Snapshot
from monitor.tui import feed, palette
from monitor.tui.formatting import fmt_age, fmt_value
from monitor.tui.renderables.grid import grid_text
from monitor.tui.renderables.trend import trend_cells
from monitor.tui.widgets.snapshot_view import SnapshotView

__all__ = ["Readings"]

_SHORT = {"ne": "density", "Te": "e temp", "Ti": "ion temp", "B": "field", "p0": "pressure"}


class Readings(SnapshotView):
    """One row per base quantity present in the snapshot."""

    DEFAULT_CSS = """
    Readings {
        height: auto;
    }
    """

    def row_shape(self, snapshot: Snapshot | None) -> object:
        return None if snapshot is None else tuple(sorted(set(snapshot.latest) & {"ne", "Te", "Ti", "B", "p0"}))

    def build(self) -> Text:
        snap = self.snapshot
        if snap is None:
            return Text("waiting for the first reading…", style=palette.DIM)
        width = self.size.width or 40
        wide = width >= 52
        rows: list[list[Text]] = []
        for q in BASE:
            if q.name not in snap.latest and q.name not in snap.trail:
                continue
            value, sigma = snap.latest.get(q.name, (float("nan"), None))
            quality = feed.value_quality(snap, q.name, self.now, self.stale_after)
            number, unc, unit = fmt_value(value, sigma, q.unit, self.units)
            cells = [Text(q.name, style=palette.LABEL)] + ([Text(_SHORT[q.name], style=palette.DIM)] if wide else [])
            if quality.stale:
                cells += [Text(number, style=palette.STALE), Text(unc, style=palette.STALE),
                          Text(unit.ljust(5), style=palette.DIM), Text(f"stale {fmt_age(quality.age)}", style=palette.CAUTION)]
            else:
                trend_w = max(6, min(24, width - (46 if wide else 34)))
                trail = snap.trail.get(q.name)
                trend = trend_cells(trail, trend_w, log=q.name == "ne") if trail is not None else ""
                cells += [Text(number, style=palette.STRONG), Text(unc, style=palette.DIM),
                          Text(unit.ljust(5), style=palette.DIM), Text(trend, style=palette.DIM)]
            rows.append(cells)
        if not rows:
            return Text("no base readings yet", style=palette.DIM)
        # too narrow: the trend goes first, then the uncertainty; never the number or its unit
        drop_trend, drop_unc = (6, 4) if wide else (5, 3)
        return grid_text(rows, right=(2 if wide else 1,), max_width=width, drop=(drop_trend, drop_unc))
