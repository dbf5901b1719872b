"""Derived quantities grouped by kind (lengths, frequencies, speeds, collisions, densities, dimensionless)."""

from __future__ import annotations

from rich.text import Text

from monitor.quantities import DERIVED, Quantity
from monitor.snapshot import Snapshot
from monitor.tui import feed, palette
from monitor.tui.formatting import fmt_age, fmt_value
from monitor.tui.renderables.grid import grid_text
from monitor.tui.widgets.snapshot_view import SnapshotView

__all__ = ["DerivedTable", "KIND_ORDER"]

KIND_ORDER = ("lengths", "frequencies", "speeds", "collisions", "densities", "dimensionless")

# The trade's own symbols, for a narrow panel where the words would push the numbers off the edge.
SYMBOL = {
    "debye_length": "λD", "debye_number": "ND", "debye_ratio": "L/λD",
    "electron_plasma_frequency": "ωpe", "ion_plasma_frequency": "ωpi",
    "electron_most_probable_speed": "v mp", "electron_mean_speed": "v mean", "electron_rms_speed": "v rms",
    "electron_thermal_speed": "v th", "coulomb_logarithm": "lnΛ",
    "electron_ion_collision_frequency": "ν ei", "electron_neutral_collision_frequency": "ν en",
    "electron_mean_free_path": "λ mfp", "knudsen_number": "Kn", "neutral_density": "n0",
    "ionization_fraction": "ne/(ne+n0)", "collectivity": "ωpe/ν", "electron_cyclotron_frequency": "ωce",
    "ion_cyclotron_frequency": "ωci", "electron_gyroradius": "r e", "ion_gyroradius": "r i",
    "hall_parameter": "ωce/ν", "plasma_beta": "β", "cutoff_density": "n cutoff", "cutoff_ratio": "ne/n cutoff",
}


class DerivedTable(SnapshotView):
    """Every derived quantity in the snapshot, a heading per kind, value ± uncertainty."""

    DEFAULT_CSS = """
    DerivedTable {
        height: auto;
    }
    """

    def build(self) -> Text:
        snap = self.snapshot
        if snap is None:
            return Text("no derived quantities yet", style=palette.DIM)
        wide = (self.size.width or 40) >= 60
        lines: list[list[Text]] = []
        any_row = False
        inputs = [feed.value_quality(snap, k, self.now, self.stale_after) for k in ("ne", "Te")]
        stale = [q for q in inputs if q.stale]
        value_style = palette.STALE if stale else palette.NORMAL
        for kind in KIND_ORDER:
            rows = [q for q in DERIVED if q.kind == kind and q.name in snap.latest]
            if not rows:
                continue
            lines.append([Text(f"─ {kind}", style=palette.DIM)])
            for q in rows:
                value, sigma = snap.latest[q.name]
                number, unc, unit = fmt_value(value, sigma, q.unit, self.units)
                if unc and f"nonlinear_sigma:{q.name}" in snap.warnings:
                    unc += " (!)"       # its linear sigma does not hold here (see help and `regime calc --mc`)
                label = _label(q, wide=wide, practical=self.units == "practical")
                lines.append([Text(f"  {label}", style=palette.LABEL), Text(number, style=value_style),
                             Text(unc, style=palette.STALE if stale else palette.DIM), Text(unit, style=palette.DIM)])
                any_row = True
        if not any_row:
            return Text("no derived quantities yet", style=palette.DIM)
        # too narrow: the uncertainty goes first, never the unit
        table = grid_text(lines, right=(1,), max_width=self.size.width or None, drop=(2,))
        if stale:   # said in words above the struck values, never by colour alone
            return Text.assemble(Text(f"STALE inputs: last reading {fmt_age(stale[0].age)} ago\n", style=palette.CAUTION), table)
        return table

    def row_shape(self, snapshot: Snapshot | None) -> object:
        if snapshot is None:
            return None
        stale = any(feed.value_quality(snapshot, k, self.now, self.stale_after).stale for k in ("ne", "Te"))
        return (tuple(sorted(snapshot.latest)), stale,
                tuple(sorted(w for w in snapshot.warnings if w.startswith("nonlinear_sigma:"))))


def _label(q: Quantity, *, wide: bool, practical: bool) -> str:
    """The row's label. Practical units show an angular frequency as f = omega / 2 pi in Hz, so the
    label says f rather than omega there."""
    label = q.meaning if wide else SYMBOL.get(q.name, q.name)
    if practical and q.unit == "rad/s":
        label = label.replace("(angular)", "(f = ω/2π)") if wide else label.replace("ω", "f ", 1)
    return label
