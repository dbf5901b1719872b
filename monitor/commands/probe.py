"""`regime probe FILE`: analyse a file of Langmuir probe sweeps, one line (or JSON object) per sweep, then a summary."""

from __future__ import annotations

import argparse
import json
import math
import sys
from collections import Counter
from typing import Any

from monitor.errors import EXIT_OK, EXIT_SOURCE, UsageError

__all__ = ["register", "run", "rows"]

_KEYS = ("Te", "ne", "ni", "Vf", "Vp", "I_sat")
_UNITS = {"Te": "eV", "ne": "m^-3", "ni": "m^-3", "Vf": "V", "Vp": "V", "I_sat": "A"}


def register(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", help="sweep file: CSV with sweep,t,V,I columns, JSON lines "
                                                     "or text lines (see the README's formats)")
    parser.add_argument("--config", metavar="F", help="TOML config with the [probe] table and [device] A, Z")
    parser.add_argument("--json", action="store_true", help="one JSON object per sweep, then a summary object")
    parser.add_argument("--plot", metavar="OUT.png", help="draw one sweep with its fits and marks (needs matplotlib)")
    parser.add_argument("--sweep", type=int, metavar="N", help="the sweep id to draw (default: the median accepted one)")


def _num(x: float) -> float | None:
    return float(x) if math.isfinite(x) else None


def rows(found: Any) -> list[dict[str, Any]]:
    """One dict per sweep (sorted by sweep id) with the JSON contract's fields."""
    out: list[dict[str, Any]] = []
    for res in found.results:
        for k in range(len(res)):
            row: dict[str, Any] = {"type": "sweep", "sweep": int(res.sweep[k]), "t": _num(res.t[k])}
            for key in _KEYS:
                row[key] = _num(res[key][k])
            for key in _KEYS:
                row[f"sigma_{key}"] = _num(res[f"sigma_{key}"][k])
            row["method"] = res.method[k] or None
            row["quality"] = res.quality[k]
            row["reason"] = res.reason[k] or None
            out.append(row)
    out.sort(key=lambda r: r["sweep"])
    return out


def _fmt(value: float | None, sigma: float | None, unit: str, rel: bool = False) -> str:
    if value is None:
        return "-"
    if sigma is None:
        return f"{value:.4g} {unit}"
    if rel and value != 0:
        return f"{value:.3g} {unit} ±{100 * sigma / abs(value):.2g}%"
    return f"{value:.4g}±{sigma:.2g} {unit}"


def _line(r: dict[str, Any]) -> str:
    head = f"sweep {r['sweep']:>6}  t={r['t']:.4g} s" if r["t"] is not None else f"sweep {r['sweep']:>6}"
    if r["quality"] == "rejected":
        return f"{head}  rejected: {r['reason']}"
    parts = [f"Te={_fmt(r['Te'], r['sigma_Te'], 'eV')}", f"ne={_fmt(r['ne'], r['sigma_ne'], 'm^-3', True)}",
             f"ni={_fmt(r['ni'], r['sigma_ni'], 'm^-3', True)} [{r['method']}]"]
    if r["Vf"] is not None:
        parts += [f"Vf={_fmt(r['Vf'], r['sigma_Vf'], 'V')}", f"Vp={_fmt(r['Vp'], r['sigma_Vp'], 'V')}"]
    parts.append(f"Isat={_fmt(r['I_sat'], r['sigma_I_sat'], 'A', True)}")
    tail = r["quality"] + (f": {r['reason']}" if r["reason"] else "")
    return f"{head}  " + "  ".join(parts) + f"  {tail}"


def summary(found: Any, table: list[dict[str, Any]]) -> dict[str, Any]:
    """Counts by quality and by rejection reason (parser refusals included), medians of accepted values."""
    quality = Counter(r["quality"] for r in table)
    reasons = Counter(r["reason"] for r in table if r["quality"] == "rejected")
    reasons.update(rej.reason for rej in found.rejections)
    good = [r for r in table if r["quality"] != "rejected"]
    med: dict[str, float | None] = {}
    for key in _KEYS:
        vals = sorted(r[key] for r in good if r[key] is not None)
        med[key] = vals[len(vals) // 2] if vals else None
    return {"type": "summary", "sweeps": len(table), "accepted": quality.get("accepted", 0),
            "doubtful": quality.get("doubtful", 0), "rejected": quality.get("rejected", 0),
            "refused_input": len(found.rejections), "rejected_by_reason": dict(sorted(reasons.items())),
            "median": med}


def run(args: argparse.Namespace) -> int:
    from pathlib import Path

    from monitor.config import load_config
    from monitor.diagnostics.probe_config import probe_spec
    from monitor.diagnostics.probe_file import analyse_file

    config = load_config(args.config)
    spec = probe_spec(config)
    if "probe" not in config.raw:
        print("regime probe: no [probe] table given (--config): assuming a single cylindrical probe, "
              "radius 0.1 mm, length 5 mm", file=sys.stderr)
    path = Path(args.file)
    if not path.is_file():
        raise UsageError(f"{args.file}: no such file")
    try:
        found = analyse_file(path, spec)
    except OSError as exc:
        print(f"regime probe: {args.file}: cannot read: {exc.strerror or exc}", file=sys.stderr)
        return EXIT_SOURCE
    table = rows(found)
    summ = summary(found, table)
    if args.json:
        out = sys.stdout
        for r in table:
            out.write(json.dumps(r, separators=(",", ":"), allow_nan=False) + "\n")
        for rej in found.rejections:
            out.write(json.dumps({"type": "rejection", "reason": rej.reason, "detail": rej.detail,
                                  "raw": rej.raw[:200].decode("utf-8", "replace")}, separators=(",", ":")) + "\n")
        out.write(json.dumps(summ, separators=(",", ":"), allow_nan=False) + "\n")
    else:
        for r in table:
            print(_line(r))
        for rej in found.rejections:
            print(f"refused input: {rej.reason}: {rej.detail}")
        print(f"summary: {summ['sweeps']} sweeps, {summ['accepted']} accepted, {summ['doubtful']} doubtful, "
              f"{summ['rejected']} rejected, {summ['refused_input']} refused input"
              + (f"; rejected by reason: {', '.join(f'{k} {v}' for k, v in summ['rejected_by_reason'].items())}"
                 if summ["rejected_by_reason"] else ""))
        med = summ["median"]
        if med["Te"] is not None:
            print(f"median of the analysed sweeps: Te {med['Te']:.3g} eV, ne {med['ne']:.3g} m^-3, "
                  f"ni {med['ni']:.3g} m^-3")
    if args.plot:
        from monitor.diagnostics.probe_plot import plot_sweep

        out_path = plot_sweep(found, args.plot, args.sweep, spec.current_sign)
        print(f"regime probe: figure written to {out_path}", file=sys.stderr)
    return EXIT_OK
