"""The per-shot summary: one pure function of (file, config) giving the catalogue's flat row, built from the report's own code."""

from __future__ import annotations

import datetime as _dt
import hashlib
import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Mapping

import numpy as np

from monitor.archive.columns import COLUMN_NAMES, PRIORITY_RANK, STAT_QUANTITIES
from monitor.criteria import CRITERIA
from monitor.model import Frame
from monitor.quantities import ALL, BASE, DERIVED
from monitor.report.build import (Collector, Report, _run, _verdicts, alarms_of, damage_of, engine_for,
                                  rejections_of)
from monitor.report.summary import LimitSummary, limit_summary, quantity_stats, sample_durations
from monitor.recording.replaying import open_file, sibling

__all__ = ["Value", "Row", "summarise", "ShotFacts", "row_of", "shot_report", "envelope_time", "file_fingerprint",
           "content_hash", "config_fingerprint", "utc_iso", "HASH_BYTES"]

Value = str | int | float | None
Row = dict[str, Value]

HASH_BYTES = 4096           # bytes hashed at each end of a file (the header and the last rows) for its fingerprint


def content_hash(path: str | os.PathLike[str], size: int) -> tuple[str, bytes]:
    """blake2b of the size and the first and last HASH_BYTES of the file, and its first bytes."""
    h = hashlib.blake2b(digest_size=16)
    h.update(str(size).encode())
    with open(path, "rb") as fh:
        head = fh.read(HASH_BYTES)
        h.update(head)
        if size > HASH_BYTES:
            fh.seek(max(HASH_BYTES, size - HASH_BYTES))
            h.update(fh.read(HASH_BYTES))
    return h.hexdigest(), head


def file_fingerprint(path: str | os.PathLike[str]) -> tuple[int, int, str]:
    """(size, mtime_ns, content_hash): what makes a re-run incremental."""
    st = os.stat(path)
    return int(st.st_size), int(st.st_mtime_ns), content_hash(path, int(st.st_size))[0]


def config_fingerprint(text: str | bytes | None) -> str:
    """sha256 (first 16 hex digits) of a config's text; "none" without one."""
    if text is None:
        return "none"
    data = text.encode("utf-8") if isinstance(text, str) else text
    return hashlib.sha256(data).hexdigest()[:16]


class _SigmaSink:
    """A sink keeping each summarised quantity's per-sample standard uncertainty (beside the report's Collector)."""

    def __init__(self) -> None:
        self.sigma: dict[str, list[np.ndarray]] = {}

    def on_frame(self, frame: Frame) -> None:
        for name in STAT_QUANTITIES:
            s = frame.sigma.get(name)
            if s is not None:
                self.sigma.setdefault(name, []).append(np.asarray(s, dtype=np.float64))

    def on_rejections(self, rejections: object) -> None:
        return None

    def on_alarm(self, event: object) -> None:
        return None

    def on_status(self, status: object) -> None:
        return None

    def close(self) -> None:
        return None

    def medians(self) -> dict[str, float]:
        out: dict[str, float] = {}
        for name, parts in self.sigma.items():
            s = np.concatenate(parts)
            s = s[np.isfinite(s)]
            if len(s):
                out[name] = float(np.median(s))
        return out


@dataclass(frozen=True)
class ShotFacts:
    """A shot's report with what the catalogue needs beyond it."""

    report: Report
    sigma: Mapping[str, float]      # quantity -> median standard uncertainty of its samples
    accepted: int                   # readings the pipeline accepted
    envelope: tuple[float | None, int, float | None, float | None]   # envelope_time(...)


def shot_report(path: str | Path, config_path: str | None = None) -> ShotFacts:
    """The report of ``path`` (the same steps and functions as monitor.report.build_report, alarms from the
    journal beside the file unless ``config_path`` is given; ``traces`` holds every sample, not decimated),
    with the median sigma of each summarised quantity, the readings accepted and the time in the envelope."""
    opened = open_file(path, config_path=config_path, speed=None)
    config, info = opened.config, opened.info
    collector, sigmas = Collector(), _SigmaSink()
    engine = engine_for(config) if config.limits else None
    summary = _run(opened.source, config, [collector, sigmas], engine)
    t, values, _valid = collector.arrays()
    on_above = float(config.on_above)
    ne = values.get("ne", np.full(len(t), np.nan))
    on = np.isfinite(ne) & (ne >= on_above)
    dt = sample_durations(t, float(config.stale_after))
    limits = tuple(limit_summary(spec, t, values.get(spec.quantity, np.full(len(t), np.nan)), on, dt)
                   for spec in config.limits)
    units = {q.name: q.unit for q in ALL.values()}
    stats = tuple(quantity_stats(values, units, [q.name for q in BASE + DERIVED], collector.read_values()))
    alarms, alarm_origin = alarms_of(path, collector, engine, use_journal=config_path is None)
    rejected, lost = rejections_of(path, summary)
    damage = damage_of(opened.source.damage)
    samples_by = {q.name: collector.readings[q.name] for q in BASE if q.name in collector.readings}
    report = Report(
        file=str(path), shot=info.shot, source=info.source or opened.source.name, start=info.start,
        config_origin=opened.config_origin,
        t_first=float(t[0]) if len(t) else None, t_last=float(t[-1]) if len(t) else None,
        duration=float(t[-1] - t[0]) if len(t) else 0.0, discharge_on_s=float(dt[on].sum()),
        samples=int(len(t)), samples_by_quantity=samples_by, rejected=rejected, lost=lost, damage=damage,
        limits=limits, alarm_origin=alarm_origin, alarms=alarms, quantities=stats,
        verdicts=tuple(_verdicts(values, on)), on_above=on_above, traces={"t": t, **values},
        limit_specs=tuple(config.limits),
    )
    return ShotFacts(report, sigmas.medians(), int(summary.get("accepted", len(t)) or 0),
                     envelope_time(limits, t, on, dt))


def envelope_time(limits: tuple[LimitSummary, ...], t: np.ndarray, on: np.ndarray,
                  dt: np.ndarray) -> tuple[float | None, int, float | None, float | None]:
    """(time inside the envelope, excursion count, longest, time covered by any excursion) from the
    report's excursions: a sample is outside while any limit's excursion [start, end) is under way;
    inside is the discharge-on time of the other samples. No limits: (None, 0, None, None)."""
    if not limits:
        return None, 0, None, None
    excursions = [e for lim in limits for e in lim.excursions]
    merged: list[list[float]] = []
    for a, b in sorted((e.start, e.end) for e in excursions):
        if merged and a <= merged[-1][1]:
            merged[-1][1] = max(merged[-1][1], b)
        else:
            merged.append([a, b])
    outside = np.zeros(len(t), dtype=bool)
    if merged:
        starts = np.array([m[0] for m in merged])
        ends = np.array([m[1] for m in merged])
        k = np.searchsorted(starts, t, side="right") - 1
        outside = (k >= 0) & (t < ends[np.maximum(k, 0)])
    inside = float(dt[on & ~outside].sum())
    longest = max((e.duration for e in excursions), default=0.0)
    return inside, len(excursions), longest, float(sum(b - a for a, b in merged))


def _alarm_counts(alarms: tuple[Mapping[str, object], ...]) -> tuple[dict[str, int], dict[str, str]]:
    """Raises per alarm name (transitions the engine made into unacknowledged) and each name's priority."""
    raised: dict[str, int] = {}
    priority: dict[str, str] = {}
    for a in alarms:
        if a.get("state") == "unacknowledged" and a.get("action") is None:
            name = str(a.get("alarm"))
            raised[name] = raised.get(name, 0) + 1
            priority[name] = str(a.get("priority"))
    return raised, priority


def utc_iso(start: str | None) -> str | None:
    """An ISO 8601 time (with an offset; local time without) as UTC ISO 8601 to the microsecond; None if unreadable."""
    if not start:
        return None
    try:
        when = _dt.datetime.fromisoformat(start)
    except ValueError:
        return None
    if when.tzinfo is None:
        when = when.astimezone()
    return when.astimezone(_dt.timezone.utc).isoformat(timespec="microseconds")


def _num(x: float | None) -> float | None:
    return None if x is None or not math.isfinite(x) else float(x)


def summarise(path: str, config_path: str | None = None) -> Row:
    """The catalogue row of one recording analysed with ``config_path`` (None: the config embedded in it).
    Never raises for a bad file: an unreadable one gives a row with status "unreadable" and the reason."""
    row: Row = {name: None for name in COLUMN_NAMES}
    row["file"] = str(path)
    try:
        row["size"], row["mtime_ns"], row["content_hash"] = file_fingerprint(path)
    except OSError as exc:
        row.update(status="unreadable", damage=f"cannot read: {exc.strerror or exc}")
        return row
    try:
        facts = shot_report(path, config_path)
    except Exception as exc:            # a bad file is catalogued with its reason, never stops the build
        row.update(status="unreadable", damage=f"{type(exc).__name__}: {exc}")
        return row
    row.update(row_of(facts, config_path))
    return row


def row_of(facts: ShotFacts, config_path: str | None) -> Row:
    """The summary columns of the row (not the file's fingerprint) from a shot's facts."""
    from monitor.recording.csvformat import read_info

    report, sigma = facts.report, facts.sigma
    info = read_info(report.file)
    if config_path is not None:
        config_text: str | None = Path(config_path).read_text(encoding="utf-8")
    else:
        config_text = info.config_toml
    inside, count, longest, total = facts.envelope
    raised, priority = _alarm_counts(report.alarms)
    top = max((PRIORITY_RANK.get(p, 0) for p in priority.values()), default=0)
    names = {v: k for k, v in PRIORITY_RANK.items()}
    row: Row = {
        "status": "damaged" if report.damage else "ok",
        "shot": report.shot, "started": utc_iso(report.start), "started_local": report.start,
        "duration": report.duration, "source": report.source,
        "config_fingerprint": config_fingerprint(config_text), "config_origin": report.config_origin,
        "accepted": facts.accepted, "rejected": int(sum(report.rejected.values())),
        "rejected_by_reason": ";".join(f"{k}={v}" for k, v in sorted(report.rejected.items())),
        "lost": report.lost, "discharge_on": report.discharge_on_s,
        "time_in_envelope": inside,
        "envelope_fraction": (inside / report.discharge_on_s) if inside is not None and report.discharge_on_s > 0
        else None,
        "excursions": count, "excursion_longest": longest, "excursion_total": total,
        "alarms_raised": int(sum(raised.values())),
        "alarm_names": ";".join(f"{k}={v}" for k, v in sorted(raised.items())),
        "priority_max": names.get(top, "none"), "priority_rank": top,
        "alarm_origin": report.alarm_origin, "damage": report.damage or "",
    }
    stats = {q.name: q for q in report.quantities}
    for name in STAT_QUANTITIES:
        q = stats.get(name)
        if q is None or q.n == 0:
            continue
        row[f"{name}_median"], row[f"{name}_min"], row[f"{name}_max"] = _num(q.median), _num(q.min), _num(q.max)
        row[f"{name}_sigma"] = _num(sigma.get(name))
    held = {str(v["name"]): v.get("held_fraction") for v in report.verdicts}
    for c in CRITERIA:
        h = held.get(c.name)
        row[f"held_{c.name}"] = float(h) if isinstance(h, (int, float)) else None
    return row


