"""The files of one shot (CSV, journal, rejects) and the header's limit summary."""

from __future__ import annotations

import datetime as _dt
from pathlib import Path
from typing import Any, Callable

from monitor.recording.csvformat import RowFormatter
from monitor.recording.files import LineFile

__all__ = ["Stream", "utc_stamp", "limit_text", "journal_factory"]


def utc_stamp(wall: float) -> str:
    return _dt.datetime.fromtimestamp(wall, _dt.timezone.utc).strftime("%Y%m%dT%H%M%SZ")


def _short(value: Any) -> str:
    """A number as short as it can be while it still reads back the same (15 digits for display)."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return str(getattr(value, "value", value))
    return f"{value:.15g}"


def limit_text(spec: Any) -> str:
    parts = [str(getattr(spec, "name", "?")), str(getattr(spec, "quantity", "?"))]
    for key in ("low", "high", "deadband", "on_delay", "off_delay", "latch", "priority"):
        value = getattr(spec, key, None)
        if value is None:
            continue
        if key == "deadband" and getattr(spec, "deadband_relative", False):
            parts.append(f"deadband={_short(100 * value)}%")
        else:
            parts.append(f"{key}={_short(value)}")
    return " ".join(parts)


class Stream:
    """One open recording file with its journal and rejects side file."""

    def __init__(self, stem: Path, columns: tuple[str, ...], header: str, journal_factory: Callable[[Path], Any]):
        self.stem = stem
        self.columns = columns
        self.csv = LineFile(stem.with_suffix(".csv"))
        self.csv.write(header.encode("utf-8"))
        self.rejects = LineFile(stem.with_suffix(".rejects.jsonl"))
        self.journal = journal_factory(stem.with_suffix(".alarms.jsonl"))
        self.formatter = RowFormatter(columns)

    def close(self) -> None:
        for part in (self.csv, self.rejects):
            part.close()
        close = getattr(self.journal, "close", None)
        if close is not None:
            close()


def journal_factory() -> Callable[[Path], Any]:
    from monitor.alarms.journal import JournalSink

    return lambda path: JournalSink(path)
