"""The catalogue's columns: name, SQL type and meaning of each; the whitelist the query language may name."""

from __future__ import annotations

import math
from dataclasses import dataclass

from monitor.criteria import CRITERIA
from monitor.quantities import ALL

__all__ = ["Column", "COLUMNS", "COLUMN_NAMES", "STAT_QUANTITIES", "READINGS", "PRIORITY_RANK", "column", "cell_text"]


@dataclass(frozen=True)
class Column:
    name: str
    sql: str            # "TEXT", "INTEGER" or "REAL"
    meaning: str


READINGS: tuple[str, ...] = ("ne", "Te", "Ti", "B", "p0")
STAT_QUANTITIES: tuple[str, ...] = READINGS + ("debye_length", "debye_number", "cutoff_ratio", "collectivity",
                                               "knudsen_number", "plasma_beta")
PRIORITY_RANK: dict[str, int] = {"advisory": 1, "high": 2, "urgent": 3}

_FIXED: tuple[Column, ...] = (
    Column("file", "TEXT", "path of the recording, relative to the archive directory"),
    Column("status", "TEXT", "ok, damaged, in_progress or unreadable"),
    Column("shot", "INTEGER", "shot number from the file's header"),
    Column("started", "TEXT", "start of the recording, UTC, ISO 8601"),
    Column("started_local", "TEXT", "start of the recording as written (local time of the recorder, with offset)"),
    Column("duration", "REAL", "s from the first to the last reading"),
    Column("source", "TEXT", "the source the shot was recorded from"),
    Column("config_fingerprint", "TEXT", "sha256 (first 16 hex) of the config text the shot was analysed with"),
    Column("config_origin", "TEXT", "where that config came from (--config F, embedded, defaults)"),
    Column("accepted", "INTEGER", "readings accepted by the pipeline"),
    Column("rejected", "INTEGER", "readings refused (live side file and replay), all reasons"),
    Column("rejected_by_reason", "TEXT", "reason=count pairs, ';'-separated"),
    Column("lost", "INTEGER", "readings missing from the sequence numbers"),
    Column("discharge_on", "REAL", "s with the discharge on (ne >= on_above)"),
    Column("time_in_envelope", "REAL", "s with the discharge on and no limit's excursion under way"),
    Column("envelope_fraction", "REAL", "time_in_envelope / discharge_on"),
    Column("excursions", "INTEGER", "excursions beyond any limit (the report's hysteresis and merging)"),
    Column("excursion_longest", "REAL", "s, the longest excursion"),
    Column("excursion_total", "REAL", "s covered by at least one excursion"),
    Column("alarms_raised", "INTEGER", "alarm raises (transitions to unacknowledged), all alarms"),
    Column("alarm_names", "TEXT", "name=raises pairs, ';'-separated"),
    Column("priority_max", "TEXT", "highest priority of a raised alarm (advisory, high, urgent) or none"),
    Column("priority_rank", "INTEGER", "priority_max as 0 none, 1 advisory, 2 high, 3 urgent"),
    Column("alarm_origin", "TEXT", "journal beside the file, or the alarm engine run over it"),
    Column("damage", "TEXT", "the first damaged line and why, or empty"),
    Column("size", "INTEGER", "bytes of the file when catalogued"),
    Column("mtime_ns", "INTEGER", "modification time of the file when catalogued (ns since the epoch)"),
    Column("content_hash", "TEXT", "blake2b of the file's head and tail (with size and mtime: the fingerprint)"),
)

_STATS: tuple[Column, ...] = tuple(
    Column(f"{q}_{stat}", "REAL", f"{q} ({ALL[q].unit}): {meaning}")
    for q in STAT_QUANTITIES
    for stat, meaning in (("median", "median"), ("min", "minimum"), ("max", "maximum"),
                          ("sigma", "median standard uncertainty (same unit)"))
)

_HELD: tuple[Column, ...] = tuple(
    Column(f"held_{c.name}", "REAL", f"share of the report's 200 discharge-on samples where {c.name} held")
    for c in CRITERIA)

_BUILD: tuple[Column, ...] = (Column("built", "TEXT", "UTC time the row was written into the catalogue"),)

COLUMNS: tuple[Column, ...] = _FIXED + _STATS + _HELD + _BUILD
COLUMN_NAMES: tuple[str, ...] = tuple(c.name for c in COLUMNS)
_BY_NAME = {c.name: c for c in COLUMNS}


def column(name: str) -> Column | None:
    """The column called ``name`` (exact), or None: the whitelist the query language resolves against."""
    return _BY_NAME.get(name)


def cell_text(value: object) -> str:
    """A catalogue value as a table shows it: "-" for none or NaN, 4 significant digits for a float."""
    if value is None:
        return "-"
    if isinstance(value, float):
        return "-" if math.isnan(value) else f"{value:.4g}"
    return str(value)
