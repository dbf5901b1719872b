"""The `regime probe --plot` figure (matplotlib, the optional extra `plot`): one sweep with its fits and marks."""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import numpy as np

from monitor.errors import UsageError

__all__ = ["plot_sweep", "choose_sweep"]


def choose_sweep(found: Any, wanted: int | None) -> tuple[Any, Any, int]:
    """(block, results, row) of sweep id ``wanted``, or of the median analysed sweep; UsageError if none."""
    places = [(int(res.sweep[k]), b, res, k) for b, res in zip(found.blocks, found.results) for k in range(len(res))
              if wanted is not None or res.quality[k] != "rejected"]
    places.sort(key=lambda p: p[0])
    if wanted is not None:
        places = [p for p in places if p[0] == wanted]
        if not places:
            raise UsageError(f"--sweep {wanted}: no such sweep in the file")
    if not places:
        raise UsageError("--plot: no sweep could be analysed, nothing to draw")
    _, block, res, row = places[len(places) // 2] if wanted is None else places[0]
    return block, res, row


def plot_sweep(found: Any, out: str | Path, wanted: int | None = None, current_sign: float = 1.0) -> Path:
    """Draw one sweep to ``out`` (PNG): I-V with the ion line, ion + exponential fit, Vf, Vp and knee marks,
    and ln Ie beside it (the current as analysed: times ``current_sign``, bias ascending). UsageError
    when matplotlib is not installed."""
    try:
        import matplotlib
        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        raise UsageError("--plot needs matplotlib: pip install 'regime[plot]' (or pip install matplotlib)") from None
    block, res, k = choose_sweep(found, wanted)
    V, I = block.V[k], block.I[k] * current_sign
    if len(V) > 1 and V[-1] < V[0]:                  # swept downwards: drawn as analysed, ascending
        V, I = V[::-1], I[::-1]
    fig, (ax, axl) = plt.subplots(1, 2, figsize=(11, 4.5), constrained_layout=True)
    ax.plot(V, I, ".", ms=3, color="0.3", label="sweep")
    f = res.fits
    title = f"sweep {int(res.sweep[k])}: {res.quality[k]}" + (f" ({res.reason[k]})" if res.reason[k] else "")
    if math.isfinite(f["ion_a"][k]):
        ion = f["ion_a"][k] + f["ion_b"][k] * (V - f["ion_x0"][k])
        ax.plot(V, ion, "-", color="tab:blue", lw=1, label="ion fit")
        if math.isfinite(f["ret_a"][k]):
            vp = res["Vp"][k]
            vv = V[V <= vp] if math.isfinite(vp) else V
            fit = ion[: len(vv)] + np.exp(f["ret_a"][k] + f["ret_b"][k] * (vv - f["ret_x0"][k]))
            ax.plot(vv, fit, "-", color="tab:orange", lw=1.2, label="ion + exponential fit")
            ie = I - ion
            pos = ie > 0
            axl.semilogy(V[pos], ie[pos], ".", ms=3, color="0.3", label="I - ion fit")
            axl.semilogy(vv, np.exp(f["ret_a"][k] + f["ret_b"][k] * (vv - f["ret_x0"][k])), "-",
                         color="tab:orange", label=f"Te = {res['Te'][k]:.3g} eV")
    elif res.method[k] == "double_bohm":
        from monitor.diagnostics.probe_double import double_model

        one = np.ones(1)
        fit = double_model(V[None, :], res["I_sat"][k] * one, res["Te"][k] * one, f["dbl_slope"][k] * one,
                           f["dbl_offset"][k] * one)[0]
        ax.plot(V, fit, "-", color="tab:orange", label=f"tanh fit, Te = {res['Te'][k]:.3g} eV")
        axl.plot(V, I - fit, ".", ms=3, color="0.3", label="residual I - fit")
        axl.axhline(0.0, color="tab:orange", lw=0.8)
        axl.set_yscale("linear")
    for name, style in (("Vf", "tab:green"), ("Vp", "tab:red")):
        x = res[name][k]
        if math.isfinite(x):
            for a in (ax, axl):
                a.axvline(x, color=style, lw=0.8, ls="--")
            ax.annotate(name, (x, ax.get_ylim()[1]), color=style, ha="left", va="top")
    knee = res["Vp_knee"][k]
    if math.isfinite(knee):
        axl.axvline(knee, color="tab:purple", lw=0.8, ls=":", label="knee")
    if math.isfinite(res["I_sat"][k]):
        ax.axhline(-res["I_sat"][k], color="tab:blue", lw=0.6, ls=":")
    ax.set_xlabel("bias V (V)")
    ax.set_ylabel("current I (A, electron collection > 0)")
    ax.set_title(title)
    ax.legend(loc="upper left", fontsize=8)
    axl.set_xlabel("bias V (V)")
    axl.set_ylabel("residual (A)" if res.method[k] == "double_bohm" else "electron current (A)")
    ne = res["ne"][k]
    axl.set_title(f"ne = {ne:.3g} m^-3 [{res.method[k]}]" if math.isfinite(ne) else "electron current")
    if axl.has_data():
        axl.legend(loc="upper left", fontsize=8)
    out = Path(out)
    fig.savefig(out, dpi=110)
    plt.close(fig)
    return out
