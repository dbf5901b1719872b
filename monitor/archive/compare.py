"""Comparing shots: resolving shot numbers through the catalogue, the table of differences and the overlay figure."""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import numpy as np

from monitor.archive.summary import Row, ShotFacts, row_of, shot_report
from monitor.errors import UsageError

__all__ = ["MAX_SHOTS", "TABLE_ROWS", "Compared", "resolve", "compare", "differences", "plot_overlay"]

MAX_SHOTS = 8
TABLE_ROWS = ("shot", "started", "duration", "discharge_on", "time_in_envelope", "envelope_fraction", "excursions",
              "excursion_longest", "alarms_raised", "priority_max", "ne_median", "ne_max", "Te_median",
              "debye_length_median", "debye_number_median", "cutoff_ratio_max", "collectivity_median",
              "held_under_cutoff")
_PLOT_POINTS = 4000


@dataclass(frozen=True)
class Compared:
    label: str
    facts: ShotFacts
    row: Row


def resolve(items: Sequence[str], archive: str | os.PathLike[str]) -> list[str]:
    """Each item as a file: a path that exists, or a shot number found in the catalogue of ``archive``
    (its latest version); UsageError for none, an ambiguous number, or more than MAX_SHOTS."""
    if not items:
        raise UsageError("give at least one shot number or recording")
    if len(items) > MAX_SHOTS:
        raise UsageError(f"at most {MAX_SHOTS} shots can be compared, got {len(items)}")
    out: list[str] = []
    for item in items:
        if os.path.isfile(item):
            out.append(item)
            continue
        if not item.isdigit():
            raise UsageError(f"{item}: no such file, and not a shot number")
        out.append(_lookup(int(item), archive))
    return out


def _lookup(shot: int, archive: str | os.PathLike[str]) -> str:
    from monitor.archive import catalogue
    from monitor.archive.where import Condition

    try:
        db = catalogue.open_readonly(archive)
    except FileNotFoundError as exc:
        raise UsageError(f"shot {shot}: {exc}") from None
    try:
        version = catalogue.latest_version(db)
        rows = catalogue.select(db, version or 0, Condition('("shot" = ?)', (shot,)), columns=["file"])
    finally:
        db.close()
    if not rows:
        raise UsageError(f"shot {shot}: not in the catalogue of {archive}")
    if len(rows) > 1:
        names = ", ".join(str(r["file"]) for r in rows)
        raise UsageError(f"shot {shot}: {len(rows)} recordings carry that number ({names}); give the file")
    return str(Path(archive) / str(rows[0]["file"]))


def compare(files: Sequence[str], config_path: str | None = None) -> list[Compared]:
    """Each file's full report (the report's own code) and catalogue row."""
    out = []
    for f in files:
        facts = shot_report(f, config_path)
        out.append(Compared(os.path.basename(f), facts, row_of(facts, config_path)))
    return out


def differences(shots: Sequence[Compared]) -> list[dict[str, object]]:
    """One entry per TABLE_ROWS item: each shot's value, and for numbers the change from the first shot."""
    table: list[dict[str, object]] = []
    for name in TABLE_ROWS:
        values = [s.row.get(name) for s in shots]
        entry: dict[str, object] = {"name": name, "values": values}
        ref = values[0]
        if isinstance(ref, (int, float)) and not isinstance(ref, bool):
            entry["change"] = [float(v) - float(ref) if isinstance(v, (int, float)) else None for v in values]
            entry["ratio"] = [float(v) / float(ref) if isinstance(v, (int, float)) and ref not in (0, 0.0)
                              and math.isfinite(float(ref)) else None for v in values]
        table.append(entry)
    return table


def discharge_start(facts: ShotFacts) -> float:
    """Data time of the first sample with the discharge on (ne >= on_above); the first sample without one."""
    t = facts.report.traces["t"]
    ne = facts.report.traces.get("ne", np.full(len(t), np.nan))
    on = np.flatnonzero(np.isfinite(ne) & (ne >= facts.report.on_above))
    if len(on):
        return float(t[on[0]])
    return float(t[0]) if len(t) else 0.0


def plot_overlay(shots: Sequence[Compared], out: str | os.PathLike[str], quantity: str = "debye_length") -> Path:
    """ne, Te and ``quantity`` of every shot against the time from its discharge start, each shot's
    excursions shaded in its colour; written to ``out`` (PNG)."""
    from monitor.archive.trend import _matplotlib

    _matplotlib()
    import matplotlib.pyplot as plt

    names = ("ne", "Te", quantity)
    fig, axes = plt.subplots(len(names), 1, sharex=True, figsize=(9, 7.5), squeeze=False)
    colours = plt.rcParams["axes.prop_cycle"].by_key()["color"]
    for k, shot in enumerate(shots):
        colour = colours[k % len(colours)]
        t0 = discharge_start(shot.facts)
        traces = shot.facts.report.traces
        t = traces["t"]
        step = max(1, len(t) // _PLOT_POINTS)
        for ax, name in zip(axes[:, 0], names):
            v = traces.get(name)
            if v is not None:
                ax.plot(t[::step] - t0, v[::step], color=colour, linewidth=0.8, label=shot.label)
            for lim in shot.facts.report.limits:
                for e in lim.excursions:
                    ax.axvspan(e.start - t0, e.end - t0, color=colour, alpha=0.08, linewidth=0)
    for ax, name in zip(axes[:, 0], names):
        ax.set_ylabel(name)
        ax.grid(True, alpha=0.3)
    axes[0, 0].legend(fontsize=8, loc="upper right")
    axes[0, 0].set_title("aligned at discharge start; shading: excursions")
    axes[-1, 0].set_xlabel("s from discharge start")
    fig.tight_layout()
    path = Path(out)
    fig.savefig(path, dpi=100)
    plt.close(fig)
    return path
