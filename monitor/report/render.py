"""The report as Markdown (for people) and as one JSON object (for tools)."""

from __future__ import annotations

import math
from dataclasses import asdict
from typing import Any

from monitor.report.build import Report

__all__ = ["to_markdown", "to_json"]


def _g(x: float | None, digits: int = 4) -> str:
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "-"
    return f"{x:.{digits}g}"


def _num(x: Any) -> Any:
    if isinstance(x, float) and not math.isfinite(x):
        return None
    return x


def _clean(obj: Any) -> Any:
    if isinstance(obj, dict):
        return {k: _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    return _num(obj)


def to_json(report: Report) -> dict[str, Any]:
    """Every figure of the report; NaN and infinities as null."""
    out = {
        "type": "report",
        "file": report.file, "shot": report.shot, "source": report.source, "start": report.start,
        "config": report.config_origin, "on_above": report.on_above,
        "t_first": report.t_first, "t_last": report.t_last, "duration_s": report.duration,
        "discharge_on_s": report.discharge_on_s,
        "samples": report.samples, "readings": dict(report.samples_by_quantity),
        "rejected": dict(report.rejected), "lost": report.lost, "damage": report.damage,
        "limits": [
            {"name": s.name, "quantity": s.quantity, "low": s.low, "high": s.high,
             "evaluated_s": s.evaluated_s, "inside_s": s.inside_s, "inside_fraction": s.fraction,
             "excursions": [asdict(e) for e in s.excursions]}
            for s in report.limits
        ],
        "alarm_source": report.alarm_origin,
        "alarms": [{**dict(a), "t_rel": (a["time"] - report.t_first) if isinstance(a.get("time"), (int, float))
                    and report.t_first is not None else None} for a in report.alarms],
        "quantities": {q.name: {"unit": q.unit, "n": q.n, "min": q.min, "median": q.median, "max": q.max,
                                **({} if q.held is None else {"held_samples": q.held})}
                       for q in report.quantities},
        "criteria": [dict(v) for v in report.verdicts],
        "uncertainty": {"operating_point": dict(report.operating_point),
                        "quantities": {r["name"]: {k: v for k, v in r.items() if k != "name"}
                                       for r in report.uncertainty}},
        "flags": dict(report.flag_shares),
    }
    return _clean(out)


def to_markdown(report: Report) -> str:
    lines: list[str] = []
    t0 = report.t_first if report.t_first is not None else 0.0
    title = f"shot {report.shot}" if report.shot is not None else report.file
    lines += [f"# Report: {title}", ""]
    lines += [f"- file: `{report.file}`",
              f"- source: {report.source or '-'}",
              f"- start: {report.start or '-'}",
              f"- envelope: {report.config_origin}",
              f"- data time: {report.t_first if report.t_first is not None else math.nan:.6f} s to "
              f"{report.t_last if report.t_last is not None else math.nan:.6f} s "
              f"(duration {report.duration:.3f} s, discharge on {report.discharge_on_s:.3f} s "
              f"with ne >= {report.on_above:.3g} m^-3)",
              f"- samples: {report.samples}; readings: "
              + (", ".join(f"{k} {n}" for k, n in report.samples_by_quantity.items()) or "-"),
              f"- rejected: {sum(report.rejected.values())}"
              + (" (" + ", ".join(f"{k} {n}" for k, n in sorted(report.rejected.items())) + ")"
                 if report.rejected else ""),
              f"- lost (sequence gaps): {report.lost}"]
    if report.damage:
        lines.append(f"- **damaged file**: replayed up to {report.damage}")
    lines += ["", "## Envelope", ""]
    if not report.limits:
        lines.append("No limits configured.")
    else:
        lines += ["| limit | quantity | low | high | evaluated (s) | inside (s) | inside | excursions |",
                  "|---|---|---|---|---|---|---|---|"]
        for s in report.limits:
            frac = "-" if s.fraction is None else f"{100 * s.fraction:.1f} %"
            lines.append(f"| {s.name} | {s.quantity} | {_g(s.low)} | {_g(s.high)} | {s.evaluated_s:.3f} | "
                         f"{s.inside_s:.3f} | {frac} | {len(s.excursions)} |")
        excursions = sorted((e for s in report.limits for e in s.excursions), key=lambda e: e.start)
        lines += ["", f"### Excursions (times in s from the first sample, data time {t0:.6f} s)", ""]
        if not excursions:
            lines.append("None: every limit held while the discharge was on.")
        else:
            lines += ["| limit | side | start (s) | end (s) | duration (s) | peak | limit value |",
                      "|---|---|---|---|---|---|---|"]
            for e in excursions:
                lines.append(f"| {e.limit} | {e.side} | {e.start - t0:.3f} | {e.end - t0:.3f} | {e.duration:.3f} | "
                             f"{_g(e.peak)} | {_g(e.bound)} |")
    lines += ["", f"## Alarm timeline ({report.alarm_origin}; s from the first sample)", ""]
    if not report.alarms:
        lines.append("No alarm events.")
    else:
        lines += ["| data time (s) | alarm | state | previous | value | limit | priority | action |",
                  "|---|---|---|---|---|---|---|---|"]
        for a in report.alarms:
            at = a.get("time")
            when = f"{at - t0:.3f}" if isinstance(at, (int, float)) else "-"
            lines.append(f"| {when} | {a.get('alarm')} | {a.get('state')} | {a.get('previous', '-')} | "
                         f"{_g(a.get('value'))} | {_g(a.get('limit'))} | {a.get('priority', '-')} | "
                         f"{a.get('action') or '-'} |")
    lines += ["", "## Quantities", "",
              "Readings (ne, Te, ...): n, min, median, max over the readings as they arrived; \"held onto\" counts "
              "the samples a slow channel's readings were held onto (the alignment hold). Derived quantities: "
              "over the samples.", "",
              "| quantity | unit | n | min | median | max |", "|---|---|---|---|---|---|"]
    for q in report.quantities:
        n = f"{q.n}" if q.held is None or q.held == q.n else f"{q.n} (held onto {q.held} samples)"
        lines.append(f"| {q.name} | {q.unit} | {n} | {_g(q.min)} | {_g(q.median)} | {_g(q.max)} |")
    lines += ["", "## Plasma criteria (at the shot's median values, discharge on)", ""]
    if not report.verdicts:
        lines.append("No criteria could be evaluated (no discharge-on samples, or the criteria module is absent).")
    for v in report.verdicts:
        mark = {True: "holds", False: "FAILS", None: "n/a"}[v.get("holds")]
        share = v.get("held_fraction")
        extra = f" (held at {100 * share:.0f} % of sampled discharge-on points)" if share is not None else ""
        lines.append(f"- {mark}: {v.get('text')}{extra}")
    lines += _uncertainty_section(report)
    return "\n".join(lines) + "\n"


def _uncertainty_section(report: Report) -> list[str]:
    """Validity flags over the shot, and linear sigma beside the Monte Carlo interval at the median point."""
    from monitor.physics.nonlinear import RHO_MAX
    from monitor.physics.tables import warning_text

    lines = ["", "## Validity flags (share of discharge-on samples)", ""]
    if not report.flag_shares:
        lines.append("None raised.")
    for code, share in sorted(report.flag_shares.items()):
        lines.append(f"- {100 * share:.1f} %: {warning_text(code)}")
    point = report.operating_point
    lines += ["", "## Uncertainty at the median operating point (discharge on)", ""]
    if not report.uncertainty:
        lines.append("No reading carried an uncertainty: nothing to propagate.")
        return lines
    inputs = ", ".join(f"{k} = {_g(v)} ± {_g(point.get('sigma', {}).get(k))}" if k in point.get("sigma", {})
                       else f"{k} = {_g(v)}" for k, v in point.get("inputs", {}).items())
    lines += [f"Inputs (medians, with their median sigma): {inputs}. Linear (first-order) sigma beside the "
              f"16th-84th percentile interval of a {point.get('draws', 0)}-draw Monte Carlo; \"no\" where the "
              f"second-order term exceeds {RHO_MAX:g} of the linear sigma (then use the interval).", "",
              "| quantity | unit | value | ± sigma (linear) | 16th percentile | 84th percentile | linear ± holds |",
              "|---|---|---|---|---|---|---|"]
    for r in report.uncertainty:
        lines.append(f"| {r['name']} | {r['unit']} | {_g(r['value'])} | {_g(r['sigma'], 3)} | {_g(r['p16'])} | "
                     f"{_g(r['p84'])} | {'no' if r['nonlinear'] else 'yes'} |")
    return lines
