"""The plasma criteria as verdicts in words, each with its margin to failing (monitor.criteria.evaluate)."""

from __future__ import annotations

import math
from typing import Any, Callable

from rich.text import Text

from monitor.snapshot import Snapshot
from monitor.tui import feed, palette
from monitor.tui.formatting import fmt_age, fmt_number
from monitor.tui.renderables.grid import grid_text
from monitor.tui.widgets.snapshot_view import SnapshotView

__all__ = ["Verdicts", "verdict_rows"]


def _evaluator() -> Callable[[dict[str, float]], list[Any]] | None:
    try:
        from monitor.criteria import evaluate
    except ImportError:
        return None
    return evaluate


_SYMBOL = {"L/lambda_D": "L/λD", "N_D": "ND", "omega_pe/nu": "ωpe/ν", "ne/n_c": "ne/nc",
           "omega_ce/nu": "ωce/ν", "L/r_i": "L/ri"}
_SHORT = {  # (holds, fails) labels short enough for 80 columns
    "quasi_neutral": ("quasi-neutral", "NOT quasi-neutral"),
    "many_particles": ("many per Debye sphere", "FEW per Debye sphere"),
    "collective": ("collective", "COLLISION-DOMINATED"),
    "under_cutoff": ("under cutoff", "OVER CUTOFF"),
    "electrons_magnetised": ("electrons magnetised", "electrons NOT magnetised"),
    "ions_magnetised": ("ions magnetised", "ions NOT magnetised"),
}
NEAR_FACTOR = 3.0
"""A holding criterion within this factor of its threshold is shown as NEAR (our choice)."""


def verdict_rows(snapshot: Snapshot, judge: str = "on") -> list[tuple[str, str, Any, str, str, str]]:
    """(glyph, word, style, label, value text, margin text) per criterion, from the latest values.

    ``judge`` is ``on`` (judge), ``off`` (no discharge: nothing to judge, no ✓ or ✗) or ``unknown``
    (the inputs are stale or missing: the verdict is unknown, never a ✓ or ✗ carried over)."""
    evaluate = _evaluator()
    if evaluate is None:
        return [("?", "n/a", palette.DIM, "criteria module not available", "", "")]
    from monitor.criteria import CRITERIA
    by_name = {c.name: c for c in CRITERIA}
    values = {k: v for k, (v, _s) in snapshot.latest.items() if v is not None and math.isfinite(v)}
    rows = []
    for v in evaluate(values):
        c = by_name.get(v.name)
        yes, no = _SHORT.get(v.name, (c.yes, c.no) if c is not None else (v.text.split(":", 1)[0],) * 2)
        label = yes if v.holds or v.holds is None else no
        symbol = _SYMBOL.get(c.symbol, c.symbol) if c is not None else ""
        value = values.get(c.quantity) if c is not None else None
        shown = f"{symbol} {fmt_number(value)}" if value is not None else symbol
        if judge == "off":
            rows.append(("·", "not judged", palette.DIM, yes, shown, "not judged"))
        elif judge != "on" or v.holds is None:
            rows.append(("?", "unknown", palette.DIM, yes, shown if v.holds is not None else f"{symbol} —", "unknown"))
        elif v.holds:
            close = _is_close(v.margin)
            rows.append(("!" if close else "✓", "near limit" if close else "holds",
                         palette.CAUTION if close else palette.OK_MARK, label + (" (near)" if close else ""), shown, f"margin ×{fmt_number(v.margin, 2)}"))
        else:
            short = 1.0 / v.margin if v.margin > 0 else math.inf
            rows.append(("✗", "FAILS", palette.ALERT, label, shown, f"short ×{fmt_number(short, 2)}"))
    return rows


def _is_close(margin: float) -> bool:
    """A holding verdict is near failing when its margin factor is under NEAR_FACTOR."""
    return margin is not None and math.isfinite(margin) and 1.0 <= margin < NEAR_FACTOR


class Verdicts(SnapshotView):
    """One line per criterion: glyph, word, what holds or fails, the value and its margin factor; while no
    discharge is on nothing is judged, and on stale inputs every verdict is unknown."""

    DEFAULT_CSS = """
    Verdicts {
        height: auto;
    }
    """

    def _judge(self, snapshot: Snapshot) -> tuple[str, str]:
        """(on / off / unknown, the note under the rows)."""
        state = feed.discharge_state(snapshot, self.now, self.stale_after)
        quality = feed.value_quality(snapshot, "ne", self.now, self.stale_after)
        if quality.stale:
            return "unknown", f"inputs STALE ({fmt_age(quality.age)}): verdicts unknown"
        if state == "off":
            return "off", "discharge off: no plasma to judge"
        if state == "unknown":
            return "unknown", "discharge state unknown: verdicts unknown"
        return "on", ""

    def row_shape(self, snapshot: Snapshot | None) -> object:
        return None if snapshot is None else (tuple(sorted(snapshot.latest)), self._judge(snapshot)[0])

    def build(self) -> Text:
        snap = self.snapshot
        if snap is None or not snap.latest:
            return Text("no verdicts until ne and Te arrive", style=palette.DIM)
        judge, note = self._judge(snap)
        wide = (self.size.width or 44) >= 52
        rows: list[list[Text]] = []
        for glyph, word, style, label, shown, margin in verdict_rows(snap, judge):
            # the word (holds / near limit / FAILS / unknown) is carried by the label's own wording and the glyph
            strong = word not in ("holds", "not judged", "unknown")
            cells = [Text(glyph, style=style), Text(label, style=style if strong else
                                                    (palette.NORMAL if word == "holds" else palette.DIM))]
            cells += [Text(shown, style=palette.STALE if judge == "unknown" else palette.DIM)] if wide else []
            cells.append(Text(margin, style=style if strong else palette.DIM))
            rows.append(cells)
        table = grid_text(rows, max_width=self.size.width or None, drop=(2,) if wide else ())
        if note:   # its own line, so it never widens a column and pushes the margins off the edge
            table.append("\n")
            table.append_text(Text(note, style=palette.CAUTION if judge == "unknown" else palette.DIM))
        return table
