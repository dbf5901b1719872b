"""The report's figure (matplotlib, the optional extra `plot`): time traces with limits shaded, and the ne-Te path."""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import numpy as np

from monitor.errors import UsageError
from monitor.physics.constants import ELEMENTARY_CHARGE, EPSILON_0, PI
from monitor.quantities import ALL
from monitor.report.build import Report

__all__ = ["plot_report", "draw_report", "te_for_debye_length", "te_for_debye_number"]


def te_for_debye_length(ne: np.ndarray, length: float | np.ndarray) -> np.ndarray:
    """Te (eV) at which the Debye length sqrt(eps0 Te / (e ne)) equals ``length`` (m)."""
    return length**2 * ne * ELEMENTARY_CHARGE / EPSILON_0


def te_for_debye_number(ne: np.ndarray, number: float) -> np.ndarray:
    """Te (eV) at which (4/3) pi ne lambda_D^3 equals ``number``."""
    lam = (3.0 * number / (4.0 * PI * ne)) ** (1.0 / 3.0)
    return te_for_debye_length(ne, lam)


def _shade(ax: Any, low: float | None, high: float | None) -> None:
    if high is not None:
        ax.axhline(high, color="tab:red", lw=0.8, ls="--")
        ax.axhspan(high, high * 1e6 if high > 0 else high + 1e300, color="tab:red", alpha=0.12, lw=0)
    if low is not None:
        ax.axhline(low, color="tab:red", lw=0.8, ls="--")
        ax.axhspan(low * 1e-6 if low > 0 else -1e300, low, color="tab:red", alpha=0.12, lw=0)


def _view(lims: tuple[float, float], bounds: list[float], log: bool) -> tuple[float, float]:
    """The y range ``lims`` of the data widened so that every limit in ``bounds`` is inside it, with a
    5 % margin past a limit that widened it (in log space on a log axis)."""
    lo, hi = float(lims[0]), float(lims[1])
    marks = [b for b in bounds if math.isfinite(b) and (b > 0 or not log)]
    if not marks:
        return lo, hi
    f = (lambda x: math.log10(x)) if log else (lambda x: x)
    g = (lambda x: 10.0**x) if log else (lambda x: x)
    a, b = f(lo), f(hi)
    new_a, new_b = min(a, *map(f, marks)), max(b, *map(f, marks))
    pad = 0.05 * ((new_b - new_a) or 1.0)
    return g(new_a - pad if new_a < a else a), g(new_b + pad if new_b > b else b)


def plot_report(report: Report, out: str | Path) -> Path:
    """Draw the figure to ``out`` (PNG). UsageError when matplotlib is not installed."""
    fig = draw_report(report)                  # UsageError first when matplotlib is missing
    import matplotlib.pyplot as plt

    out = Path(out)
    fig.savefig(out, dpi=110)
    plt.close(fig)
    return out


def draw_report(report: Report) -> Any:
    """The report's matplotlib Figure (Agg backend): traces with each limit drawn and its outside shaded,
    every limit inside the visible range; the ne-Te path with the ne and Te limits. UsageError when
    matplotlib is not installed."""
    try:
        import matplotlib
        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        raise UsageError("--plot needs matplotlib: pip install 'regime[plot]' (or pip install matplotlib)") from None
    tr = report.traces
    t = np.asarray(tr.get("t", np.empty(0)))
    t_rel = t - t[0] if len(t) else t
    specs = list(report.limit_specs)
    names = ["ne", "Te", "debye_length"]
    names += [q for q in dict.fromkeys(s.quantity for s in specs) if q not in names]
    names = [n for n in names if n in tr]
    fig = plt.figure(figsize=(13, max(6.0, 2.1 * len(names))), constrained_layout=True)
    grid = fig.add_gridspec(max(len(names), 1), 2, width_ratios=[1.6, 1.0])
    axes: list[Any] = []
    for i, name in enumerate(names):
        ax = fig.add_subplot(grid[i, 0], sharex=axes[0] if axes else None)
        axes.append(ax)
        v = np.asarray(tr[name])
        ax.plot(t_rel, v, lw=0.9, color="tab:blue")
        finite = v[np.isfinite(v)]
        if len(finite) and finite.min() > 0 and finite.max() / finite.min() > 30:
            ax.set_yscale("log")
        lims = ax.get_ylim()
        _shade_off(ax, t_rel, np.asarray(tr.get("ne", np.full(len(t), np.nan))), report.on_above)
        bounds: list[float] = []
        for s in specs:
            if s.quantity == name:
                _shade(ax, s.low, s.high)
                bounds += [float(b) for b in (s.low, s.high) if b is not None]
        ax.set_ylim(_view(lims, bounds, ax.get_yscale() == "log"))
        unit = ALL[name].unit if name in ALL else ""
        ax.set_ylabel(f"{name}\n[{unit}]", fontsize=9)
        ax.grid(True, alpha=0.3)
        if i < len(names) - 1:
            ax.tick_params(labelbottom=False)
    if axes:
        axes[-1].set_xlabel(f"time since the first sample (data time {t[0]:.3f} s) [s]" if len(t) else "time [s]")
        title = f"shot {report.shot}" if report.shot is not None else Path(report.file).name
        axes[0].set_title(f"{title}: traces (red: outside the envelope, grey: discharge off)", fontsize=10)
    ax = fig.add_subplot(grid[:, 1])
    ne = np.asarray(tr.get("ne", np.empty(0)))
    te = np.asarray(tr.get("Te", np.empty(0)))
    ok = np.isfinite(ne) & np.isfinite(te) & (ne > 0) & (te > 0)
    if ok.any():
        lo_n, hi_n = ne[ok].min() / 10, ne[ok].max() * 10
        lo_t, hi_t = te[ok].min() / 5, te[ok].max() * 5
    else:
        lo_n, hi_n, lo_t, hi_t = 1e14, 1e20, 0.1, 100.0
    plane_limits = [(s.quantity, float(b)) for s in specs if s.quantity in ("ne", "Te")
                    for b in (s.low, s.high) if b is not None and math.isfinite(b) and b > 0]
    for quantity, bound in plane_limits:       # every ne and Te limit inside the plane's view
        if quantity == "Te":
            lo_t, hi_t = min(lo_t, bound / 1.5), max(hi_t, bound * 1.5)
        else:
            lo_n, hi_n = min(lo_n, bound / 1.5), max(hi_n, bound * 1.5)
    grid_n = np.logspace(math.log10(lo_n), math.log10(hi_n), 200)
    for exp in range(-7, 0):
        lam = 10.0**exp
        ax.plot(grid_n, te_for_debye_length(grid_n, lam), color="0.6", lw=0.7, ls="-")
        _label(ax, grid_n, te_for_debye_length(grid_n, lam), f"λD=1e{exp} m", lo_t, hi_t, "0.4")
    for exp in range(1, 10):
        nd = 10.0**exp
        ax.plot(grid_n, te_for_debye_number(grid_n, nd), color="tab:green", lw=0.7, ls=":")
        _label(ax, grid_n, te_for_debye_number(grid_n, nd), f"N_D=1e{exp}", lo_t, hi_t, "tab:green")
    cutoff = next((q.median for q in report.quantities if q.name == "cutoff_density" and q.n), None)
    if cutoff is not None and math.isfinite(cutoff):
        ax.axvline(cutoff, color="tab:red", lw=1.0, ls="--")
        ax.text(cutoff, hi_t / 1.5, " cutoff density", color="tab:red", fontsize=8, rotation=90, va="top")
    for quantity, bound in plane_limits:
        (ax.axhline if quantity == "Te" else ax.axvline)(bound, color="tab:red", lw=0.8, ls="--")
    if ok.any():
        sc = ax.scatter(ne[ok], te[ok], c=t_rel[ok], s=6, cmap="viridis", zorder=3)
        fig.colorbar(sc, ax=ax, label="time [s]", shrink=0.6)
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlim(lo_n, hi_n)
    ax.set_ylim(lo_t, hi_t)
    ax.set_xlabel("ne [m^-3]")
    ax.set_ylabel("Te [eV]")
    ax.set_title("path on the ne-Te plane\n(grey: constant Debye length, green dotted: constant N_D,\n"
                 "red dashed: ne and Te limits)", fontsize=10)
    ax.grid(True, which="major", alpha=0.2)
    return fig


def _shade_off(ax: Any, t: np.ndarray, ne: np.ndarray, on_above: float) -> None:
    """Grey bands where the discharge is off (ne below on_above): limits are not evaluated there."""
    off = ~(np.isfinite(ne) & (ne >= on_above))
    if not off.any() or len(t) < 2:
        return
    m = np.concatenate(([False], off, [False])).astype(np.int8)
    edges = np.flatnonzero(np.diff(m))
    for a, b in zip(edges[0::2], edges[1::2]):
        ax.axvspan(t[a], t[min(b, len(t) - 1)], color="0.85", alpha=0.6, lw=0)


def _label(ax: Any, x: np.ndarray, y: np.ndarray, text: str, lo: float, hi: float, color: str) -> None:
    inside = np.flatnonzero((y > lo) & (y < hi))
    if len(inside):
        i = inside[len(inside) // 2]
        ax.text(x[i], y[i], text, fontsize=7, color=color, rotation=0, ha="center", va="bottom", clip_on=True)
