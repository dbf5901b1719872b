"""Builds the post-shot report: replays the file through the session, then summarises limits, alarms, quantities and criteria."""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from adapters.base import SourceStatus
from adapters.batch import Rejection
from monitor.alarms.events import AlarmEvent
from monitor.model import Frame
from monitor.quantities import ALL, BASE, DERIVED
from monitor.recording.replaying import open_file, sibling
from monitor.report.summary import (LimitSummary, QuantityStats, limit_summary, quantity_stats,
                                    sample_durations)

__all__ = ["Report", "Collector", "build_report", "engine_for"]

_TRACE_POINTS = 4000


_BASE_KEYS = ("ne", "Te", "Ti", "B", "p0")
# Draws of the report's Monte Carlo at the median operating point (a few tens of ms).
MC_DRAWS = 20000


def _append_aligned(store: dict[str, list[np.ndarray]], got: Mapping[str, np.ndarray], fill: float | bool,
                    before: int, n: int) -> None:
    """Append one frame's columns to ``store`` so every column stays aligned with the samples."""
    dtype = bool if isinstance(fill, bool) else np.float64
    for name, v in got.items():
        col = store.get(name)
        if col is None:
            col = store[name] = [np.full(before, fill, dtype=dtype)] if before else []
        col.append(np.broadcast_to(np.asarray(v, dtype=dtype), (n,)).copy())
    for name, col in store.items():
        if name not in got:
            col.append(np.full(n, fill, dtype=dtype))


class Collector:
    """A sink keeping every frame's time and values (for the report; memory grows with the shot)."""

    def __init__(self) -> None:
        self.t: list[np.ndarray] = []
        self.values: dict[str, list[np.ndarray]] = {}
        self.valid: list[np.ndarray] = []
        self.events: list[AlarmEvent] = []
        self.rejections: dict[str, int] = {}
        self.readings: dict[str, int] = {}      # base key -> readings that carried it (before the hold)
        self.read: dict[str, list[np.ndarray]] = {}     # base key -> those readings' values (finite only)
        self.sigma: dict[str, list[np.ndarray]] = {}    # base key -> its sigma per sample (NaN: none)
        self.flags: dict[str, list[np.ndarray]] = {}    # warning code -> its mask per sample
        self.n = 0

    def on_frame(self, frame: Frame) -> None:
        n = len(frame.t)
        if n == 0:
            return
        self.t.append(np.asarray(frame.t, dtype=np.float64))
        for name, v in frame.values.items():
            col = self.values.get(name)
            if col is None:
                col = self.values[name] = [np.full(self.n, np.nan)] if self.n else []
            col.append(np.asarray(v, dtype=np.float64))
        for name, col in self.values.items():
            if name not in frame.values:
                col.append(np.full(n, np.nan))
        for store, got, fill in ((self.sigma, {k: v for k, v in frame.sigma.items() if k in _BASE_KEYS}, np.nan),
                                 (self.flags, frame.warnings, False)):
            _append_aligned(store, got, fill, self.n, n)
        self.valid.append(np.asarray(frame.valid, dtype=bool) if frame.valid is not None else np.ones(n, dtype=bool))
        for key, v in (frame.raw or {k: frame.values[k] for k in ("ne", "Te", "Ti", "B", "p0") if k in frame.values}).items():
            v = np.asarray(v, dtype=np.float64)
            got = v[np.isfinite(v)]
            self.readings[key] = self.readings.get(key, 0) + len(got)
            self.read.setdefault(key, []).append(got)
        self.n += n

    def on_rejections(self, rejections: list[Rejection]) -> None:
        for r in rejections:
            self.rejections[r.reason] = self.rejections.get(r.reason, 0) + 1

    def on_alarm(self, event: AlarmEvent) -> None:
        self.events.append(event)

    def on_status(self, status: SourceStatus) -> None:
        return None

    def close(self) -> None:
        return None

    def read_values(self) -> dict[str, np.ndarray]:
        """Base key -> the finite values of the readings that carried it, as read (no hold)."""
        return {k: np.concatenate(v) for k, v in self.read.items()}

    def arrays(self) -> tuple[np.ndarray, dict[str, np.ndarray], np.ndarray]:
        t = np.concatenate(self.t) if self.t else np.empty(0)
        values = {k: np.concatenate(v) if v else np.empty(0) for k, v in self.values.items()}
        valid = np.concatenate(self.valid) if self.valid else np.empty(0, dtype=bool)
        return t, values, valid


@dataclass(frozen=True)
class Report:
    file: str
    shot: int | None
    source: str | None
    start: str | None
    config_origin: str
    t_first: float | None
    t_last: float | None
    duration: float
    discharge_on_s: float
    samples: int
    samples_by_quantity: Mapping[str, int]
    rejected: Mapping[str, int]
    lost: int
    damage: str | None
    limits: tuple[LimitSummary, ...]
    alarm_origin: str
    alarms: tuple[Mapping[str, Any], ...]
    quantities: tuple[QuantityStats, ...]
    verdicts: tuple[Mapping[str, Any], ...]
    on_above: float
    traces: Mapping[str, np.ndarray] = field(default_factory=dict, repr=False)
    limit_specs: tuple[Any, ...] = field(default=(), repr=False)
    # At the shot's median operating point (discharge on): per derived quantity its value, linear
    # sigma, Monte Carlo 16th/84th percentiles and whether the linear sigma is flagged; the inputs.
    uncertainty: tuple[Mapping[str, Any], ...] = ()
    operating_point: Mapping[str, Any] = field(default_factory=dict)
    # warning code -> share of the discharge-on samples it was raised on
    flag_shares: Mapping[str, float] = field(default_factory=dict)


def engine_for(config: Any) -> Any:
    """The alarm engine of the config."""
    from monitor.alarms.engine import AlarmEngine

    return AlarmEngine.from_config(config)


def _run(source: Any, config: Any, sinks: list[Any], engine: Any) -> dict[str, Any]:
    from monitor.session import Session

    session = Session(source, config, sinks=sinks, engine=engine, live=False)
    session.run()
    summary = session.summary()
    close = getattr(session, "close", None)
    if close is not None:
        close()
    return dict(summary) if isinstance(summary, Mapping) else {}


def _read_jsonl(path: Path, kind: str) -> list[dict[str, Any]]:
    out: list[dict[str, Any]] = []
    if not path.is_file():
        return out
    with open(path, encoding="utf-8", errors="replace") as fh:
        for line in fh:
            line = line.strip()
            if not line:
                continue
            try:
                obj = json.loads(line)
            except json.JSONDecodeError:
                continue            # a cut-off last line of a killed run
            if isinstance(obj, dict) and obj.get("type", kind) == kind:
                out.append(obj)
    return out


def _not_judged(values: Mapping[str, np.ndarray], on: np.ndarray, shares: Mapping[str, float]) -> dict[str, str]:
    """Quantity -> why its criterion is not judged: derive() withheld it on most discharge-on samples."""
    from monitor.physics.tables import WITHHELD

    out: dict[str, str] = {}
    for code, (names, why) in WITHHELD.items():
        if shares.get(code, 0.0) >= 0.5:
            for name in names:
                v = values.get(name)
                if v is not None and len(v) == len(on) and not np.isfinite(v[on]).any():
                    out.setdefault(name, why)
    return out


def _verdicts(values: Mapping[str, np.ndarray], on: np.ndarray,
              not_judged: Mapping[str, str] | None = None) -> list[dict[str, Any]]:
    from monitor.criteria import evaluate

    medians: dict[str, float] = {}
    for name, v in values.items():
        sel = v[on & np.isfinite(v)] if len(v) == len(on) else v[np.isfinite(v)]
        if len(sel):
            medians[name] = float(np.median(sel))
    if not medians:
        return []
    idx = np.flatnonzero(on)
    picks = idx[np.linspace(0, len(idx) - 1, min(len(idx), 200)).astype(int)] if len(idx) else idx
    held: dict[str, list[bool]] = {}
    for i in picks:
        sample = {k: float(v[i]) for k, v in values.items() if math.isfinite(float(v[i]))}
        for verdict in evaluate(sample):
            if verdict.holds is not None:
                held.setdefault(verdict.name, []).append(bool(verdict.holds))
    out = []
    for verdict in evaluate(medians, not_judged):
        h = held.get(verdict.name)
        out.append({"name": verdict.name, "holds": verdict.holds, "margin": verdict.margin, "text": verdict.text,
                    "held_fraction": (sum(h) / len(h)) if h else None})
    return out


def _column(cols: dict[str, list[np.ndarray]], name: str) -> np.ndarray:
    return np.concatenate(cols[name]) if cols.get(name) else np.empty(0)


def _uncertainty(collector: Collector, values: Mapping[str, np.ndarray], on: np.ndarray,
                 device: Any) -> tuple[tuple[dict[str, Any], ...], dict[str, Any]]:
    """Linear sigma and Monte Carlo interval of every derived quantity at the median discharge-on inputs
    with their median sigmas (nothing when no input carried a sigma)."""
    from monitor.physics import derive
    from monitor.physics.montecarlo import monte_carlo
    from monitor.physics.nonlinear import NONLINEAR
    from monitor.quantities import DERIVED

    point: dict[str, float] = {}
    sig: dict[str, float] = {}
    for key in _BASE_KEYS:
        v = values.get(key)
        if v is None or len(v) != len(on):
            continue
        sel = v[on & np.isfinite(v)]
        if len(sel):
            point[key] = float(np.median(sel))
            s = _column(collector.sigma, key)
            if len(s) == len(on):
                ss = s[on & np.isfinite(s)]
                if len(ss):
                    sig[key] = float(np.median(np.abs(ss)))
    sig = {k: s for k, s in sig.items() if s > 0}
    if not sig or "ne" not in point or "Te" not in point:
        return (), {"inputs": point, "sigma": sig}
    d = derive(point, device, sig)
    mc = monte_carlo(point, device, sig, MC_DRAWS, seed=0)
    rows = []
    for q in DERIVED:
        if q.name not in d.sigma or q.name not in mc.intervals:
            continue
        iv = mc.intervals[q.name]
        rows.append({"name": q.name, "unit": q.unit, "value": float(d.values[q.name][0]),
                     "sigma": float(d.sigma[q.name][0]), "p16": iv.p16, "p84": iv.p84,
                     "nonlinear": f"{NONLINEAR}:{q.name}" in d.warnings})
    return tuple(rows), {"inputs": point, "sigma": sig, "draws": mc.draws, "kept": mc.kept}


def _flag_shares(collector: Collector, on: np.ndarray) -> dict[str, float]:
    total = int(np.count_nonzero(on))
    out: dict[str, float] = {}
    for code in collector.flags:
        mask = _column(collector.flags, code)
        if total and len(mask) == len(on):
            share = float(np.count_nonzero(mask & on)) / total
            if share > 0:
                out[code] = share
    return out


def _decimate(t: np.ndarray, values: Mapping[str, np.ndarray], names: list[str]) -> dict[str, np.ndarray]:
    step = max(1, len(t) // _TRACE_POINTS)
    out = {"t": t[::step]}
    for n in names:
        if n in values:
            out[n] = values[n][::step]
    return out


def alarms_of(path: str | Path, collector: Collector, engine: Any, *, use_journal: bool) -> tuple[tuple[dict[str, Any], ...], str]:
    """A shot's alarm events and where they came from: the journal recorded beside it (``use_journal``, when
    there is one), else the alarm engine run over the file, else none."""
    journal = sibling(path, ".alarms.jsonl")
    if use_journal and journal.is_file():
        return tuple(_read_jsonl(journal, "alarm")), f"journal {journal.name}"
    if engine is not None:
        return tuple(e.to_json() for e in collector.events), "alarm engine run over the file"
    return (), "no limits configured"


def rejections_of(path: str | Path, summary: Mapping[str, Any]) -> tuple[dict[str, int], int]:
    """A shot's rejected readings by reason (those refused live, from the rejects side file, and those the
    replay refused) and its lost readings (readings refused live are in the side file and leave seq gaps in
    the CSV: not lost twice)."""
    rejected: dict[str, int] = {}
    for rej in _read_jsonl(sibling(path, ".rejects.jsonl"), "rejection"):
        reason = str(rej.get("reason", "?"))
        rejected[reason] = rejected.get(reason, 0) + 1
    live_rejected = sum(rejected.values())
    for reason, n in dict(summary.get("rejected", {}) or {}).items():
        rejected[reason] = rejected.get(reason, 0) + int(n)
    return rejected, max(0, int(summary.get("lost", 0) or 0) - live_rejected)


def damage_of(damage: tuple[int, str] | None) -> str | None:
    """A replay source's damage (line, why) in words."""
    return None if damage is None else f"line {damage[0]}: {damage[1]}"


def build_report(path: str | Path, *, config_path: str | None = None, map_path: str | None = None,
                 use_journal: bool = True) -> Report:
    """Replay ``path`` through the same pipeline and alarm engine as live, then summarise it."""
    opened = open_file(path, config_path=config_path, map_path=map_path, speed=None)
    config, info = opened.config, opened.info
    collector = Collector()
    engine = engine_for(config) if getattr(config, "limits", ()) else None
    summary = _run(opened.source, config, [collector], engine)
    t, values, _valid = collector.arrays()
    on_above = float(getattr(config, "on_above", 1e15))
    ne = values.get("ne", np.full(len(t), np.nan))
    on = np.isfinite(ne) & (ne >= on_above)
    dt = sample_durations(t, float(getattr(config, "stale_after", 2.0)))
    limits = tuple(limit_summary(spec, t, values.get(spec.quantity, np.full(len(t), np.nan)), on, dt)
                   for spec in getattr(config, "limits", ()))
    units = {q.name: q.unit for q in ALL.values()}
    order = [q.name for q in BASE + DERIVED]
    stats = tuple(quantity_stats(values, units, order, collector.read_values()))
    alarms, alarm_origin = alarms_of(path, collector, engine, use_journal=use_journal and config_path is None)
    rejected, lost = rejections_of(path, summary)
    damage = damage_of(opened.source.damage)
    limited = sorted({spec.quantity for spec in getattr(config, "limits", ())})
    traces = _decimate(t, values, ["ne", "Te", "debye_length", "debye_number", *limited])
    samples_by = {q.name: collector.readings[q.name] for q in BASE if q.name in collector.readings}
    uncertainty, point = _uncertainty(collector, values, on, config.device)
    shares = _flag_shares(collector, on)
    return Report(
        file=str(path), shot=info.shot, source=info.source or opened.source.name, start=info.start,
        config_origin=opened.config_origin,
        t_first=float(t[0]) if len(t) else None, t_last=float(t[-1]) if len(t) else None,
        duration=float(t[-1] - t[0]) if len(t) else 0.0, discharge_on_s=float(dt[on].sum()),
        samples=int(len(t)), samples_by_quantity=samples_by, rejected=rejected, lost=lost, damage=damage,
        limits=limits, alarm_origin=alarm_origin, alarms=alarms, quantities=stats,
        verdicts=tuple(_verdicts(values, on, _not_judged(values, on, shares))), on_above=on_above, traces=traces,
        limit_specs=tuple(getattr(config, "limits", ())),
        uncertainty=uncertainty, operating_point=point, flag_shares=shares,
    )
