"""Per-shot trends of catalogue columns against shot number or start date, drawn with matplotlib (the plot extra)."""

from __future__ import annotations

import datetime as _dt
import math
from pathlib import Path
from typing import Mapping, Sequence

from monitor.errors import UsageError

__all__ = ["plot_trend"]


def _matplotlib() -> object:
    try:
        import matplotlib
    except ImportError:
        raise UsageError("--plot needs matplotlib: pip install 'regime[plot]'") from None
    matplotlib.use("Agg")
    return matplotlib


def _x(row: Mapping[str, object], against: str) -> float | _dt.datetime | None:
    value = row.get(against)
    if against == "started":
        if not isinstance(value, str):
            return None
        try:
            return _dt.datetime.fromisoformat(value)
        except ValueError:
            return None
    return float(value) if isinstance(value, (int, float)) else None


def plot_trend(rows: Sequence[Mapping[str, object]], columns: Sequence[str], out: str | Path,
               against: str = "shot") -> Path:
    """One panel per column, a point per shot (shots without the value left out), x the shot number or
    the start (UTC); the figure written to ``out`` (PNG). Returns the path."""
    _matplotlib()
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(len(columns), 1, sharex=True, figsize=(8, 2.2 * len(columns) + 0.8), squeeze=False)
    for ax, name in zip(axes[:, 0], columns):
        pts = []
        for r in rows:
            x, y = _x(r, against), r.get(name)
            if x is not None and isinstance(y, (int, float)) and math.isfinite(float(y)):
                pts.append((x, float(y)))
        pts.sort(key=lambda p: p[0])
        if pts:
            ax.plot([p[0] for p in pts], [p[1] for p in pts], marker="o", markersize=3, linewidth=0.8)
        ax.set_ylabel(name)
        ax.grid(True, alpha=0.3)
    axes[-1, 0].set_xlabel("shot number" if against == "shot" else "start (UTC)")
    axes[0, 0].set_title(f"{len(rows)} shots")
    fig.tight_layout()
    path = Path(out)
    fig.savefig(path, dpi=100)
    plt.close(fig)
    return path
