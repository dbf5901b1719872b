"""Derived quantities grouped by kind (lengths, frequencies, speeds, collisions, densities, dimensionless)."""

from __future__ import annotations

from rich.text import Text
from textual.app import RenderResult

from monitor.quantities import DERIVED
from monitor.tui import palette
from monitor.tui.formatting import fmt_value
from monitor.tui.renderables.grid import grid_text
from monitor.tui.widgets.snapshot_view import SnapshotView

__all__ = ["DerivedTable", "KIND_ORDER"]

KIND_ORDER = ("lengths", "frequencies", "speeds", "collisions", "densities", "dimensionless")


class DerivedTable(SnapshotView):
    """Every derived quantity in the snapshot, a heading per kind, value ± uncertainty."""

    DEFAULT_CSS = """
    DerivedTable {
        height: auto;
    }
    """

    def render(self) -> RenderResult:
        snap = self.snapshot
        if snap is None:
            return Text("no derived quantities yet", style=palette.DIM)
        wide = (self.size.width or 40) >= 60
        lines: list[list[Text]] = []
        any_row = False
        for kind in KIND_ORDER:
            rows = [q for q in DERIVED if q.kind == kind and q.name in snap.latest]
            if not rows:
                continue
            lines.append([Text(f"─ {kind}", style=palette.DIM)])
            for q in rows:
                value, sigma = snap.latest[q.name]
                number, unc, unit = fmt_value(value, sigma, q.unit, self.units)
                label = q.meaning if wide else q.name.replace("electron_", "e ").replace("_", " ")
                lines.append([Text(f"  {label}", style=palette.LABEL), Text(number, style=palette.NORMAL),
                             Text(unc, style=palette.DIM), Text(unit, style=palette.DIM)])
                any_row = True
        if not any_row:
            return Text("no derived quantities yet", style=palette.DIM)
        return grid_text(lines, right=(1,), max_width=self.size.width or None)
