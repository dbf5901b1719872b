"""The recording's CSV layout: the header row, the `#` metadata lines (write and read) and fast row formatting."""

from __future__ import annotations

import datetime as _dt
import json
import math
import os
from dataclasses import dataclass
from typing import Any, Iterable, Mapping, Sequence

import numpy as np

from adapters.csv_file import MAGIC, CsvHeader, read_header
from monitor import __version__
from monitor.quantities import ALL, BASE

__all__ = ["FORMAT_VERSION", "BASE_ORDER", "unit_of", "RowFormatter", "header_block", "RecordingInfo",
           "read_info", "dump_toml", "iso_time"]

FORMAT_VERSION = 1
BASE_ORDER: tuple[str, ...] = tuple(q.name for q in BASE)


def unit_of(column: str) -> str:
    """Unit of a recording column: t in s, seq a count, sigma_X as X, quantities as monitor.quantities."""
    if column == "t":
        return "s"
    if column == "seq":
        return "1"
    if column.startswith("sigma_"):
        column = column[len("sigma_"):]
    q = ALL.get(column)
    return q.unit if q is not None else "?"


def iso_time(wall: float) -> str:
    """ISO 8601 with the local time zone offset, to the microsecond (e.g. 2026-12-01T22:05:20.123456+00:00)."""
    return _dt.datetime.fromtimestamp(wall).astimezone().isoformat(timespec="microseconds")


class RowFormatter:
    """Formats whole arrays to CSV text in one C-level ``%`` operation (shortest round-trip floats)."""

    def __init__(self, columns: Sequence[str]) -> None:
        self.columns = tuple(columns)
        self._formats: dict[bool, str] = {}

    def _row_format(self, has_seq: bool) -> str:
        fmt = self._formats.get(has_seq)
        if fmt is None:
            parts = ["%d" if (c == "seq" and has_seq) else ("nan" if c == "seq" else "%r") for c in self.columns]
            fmt = self._formats[has_seq] = ",".join(parts) + "\n"
        return fmt

    def format(self, t: np.ndarray, values: Mapping[str, np.ndarray], seq: np.ndarray | None,
               rows: slice | np.ndarray | None = None) -> str:
        """Rows of ``t``/``values``/``seq`` (optionally a slice or index array of them) as CSV lines."""
        sel = slice(None) if rows is None else rows
        tt = np.asarray(t, dtype=np.float64)[sel]
        n = len(tt)
        if n == 0:
            return ""
        cols: list[np.ndarray] = []
        has_seq = seq is not None
        nan = np.full(n, np.nan)
        for c in self.columns:
            if c == "t":
                cols.append(tt)
            elif c == "seq":
                if has_seq:
                    cols.append(np.asarray(seq, dtype=np.float64)[sel])
            else:
                v = values.get(c)
                cols.append(nan if v is None else np.asarray(v, dtype=np.float64)[sel])
        flat = np.column_stack(cols).ravel().tolist()
        return (self._row_format(has_seq) * n) % tuple(flat)


def _exact(value: float) -> str:
    """The shortest of ``%g`` and ``repr`` that reads back as the same float."""
    short = f"{value:g}"
    return short if float(short) == value else repr(value)


def dump_toml(table: Mapping[str, Any]) -> str:
    """A small TOML writer for configuration dicts (scalars, strings, lists, tables, arrays of tables)."""
    out: list[str] = []

    def scalar(v: Any) -> str:
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, (int, float)):
            if isinstance(v, float) and not math.isfinite(v):
                return "nan" if math.isnan(v) else ("inf" if v > 0 else "-inf")
            return repr(v)
        if isinstance(v, (list, tuple)):
            return "[" + ", ".join(scalar(x) for x in v) + "]"
        if isinstance(v, Mapping):
            return "{" + ", ".join(f"{_key(k)} = {scalar(x)}" for k, x in v.items()) + "}"
        return json.dumps(str(v))

    def emit(prefix: str, tbl: Mapping[str, Any]) -> None:
        plain = [(k, v) for k, v in tbl.items() if not _is_table(v) and not _is_table_array(v)]
        for k, v in plain:
            out.append(f"{_key(k)} = {scalar(v)}")
        for k, v in tbl.items():
            name = f"{prefix}.{_key(k)}" if prefix else _key(k)
            if _is_table(v):
                out.append(f"[{name}]")
                emit(name, v)
            elif _is_table_array(v):
                for item in v:
                    out.append(f"[[{name}]]")
                    emit(name, item)

    emit("", table)
    return "\n".join(out) + "\n"


def _key(k: str) -> str:
    return k if k.replace("_", "").replace("-", "").isalnum() else json.dumps(k)


def _is_table(v: Any) -> bool:
    return isinstance(v, Mapping)


def _is_table_array(v: Any) -> bool:
    return isinstance(v, (list, tuple)) and bool(v) and all(isinstance(x, Mapping) for x in v)


def header_block(columns: Sequence[str], *, shot: int, start_wall: float, source: str, on_above: float,
                 limits: Iterable[str] = (), config_toml: str | None = None, config_path: str | None = None,
                 extra: Iterable[tuple[str, str]] = ()) -> str:
    """The header row, then the `#` metadata lines. The header row comes first so that
    ``numpy.loadtxt(f, delimiter=",", comments="#", skiprows=1)`` and
    ``pandas.read_csv(f, comment="#")`` read the file as it is."""
    lines = [",".join(columns),
             f"# {MAGIC}, format {FORMAT_VERSION}",
             f"# shot: {shot}",
             f"# start: {iso_time(start_wall)}",
             f"# source: {source}",
             f"# tool: regime {__version__}",
             "# units: " + ", ".join(f"{c}={unit_of(c)}" for c in columns),
             f"# on_above: {_exact(on_above)}"]
    lines += [f"# {k}: {v}" for k, v in extra]
    if config_path:
        lines.append(f"# config_file: {config_path}")
    lines += [f"# limit: {text}" for text in limits]
    if config_toml:
        lines += [f"# config: {line}" for line in config_toml.splitlines() if line.strip()]
    return "\n".join(lines) + "\n"


@dataclass(frozen=True)
class RecordingInfo:
    """What a recording's header says about it."""

    path: str
    header: CsvHeader
    shot: int | None
    start: str | None
    source: str | None
    tool: str | None
    units: dict[str, str]
    on_above: float | None
    limits: tuple[str, ...]
    config_toml: str | None

    @property
    def ours(self) -> bool:
        return self.header.ours


def read_info(path: str | os.PathLike[str]) -> RecordingInfo:
    """Read a recording's metadata (works on any CSV with a header row; foreign files give mostly None)."""
    header = read_header(path)
    units: dict[str, str] = {}
    for item in (header.first("units") or "").split(","):
        if "=" in item:
            k, _, v = item.partition("=")
            units[k.strip()] = v.strip()
    shot = header.first("shot")
    on_above = header.first("on_above")
    config_lines = header.metadata.get("config")
    return RecordingInfo(
        path=str(path), header=header,
        shot=int(shot) if shot and shot.isdigit() else None,
        start=header.first("start"), source=header.first("source"), tool=header.first("tool"),
        units=units, on_above=float(on_above) if on_above else None,
        limits=tuple(header.metadata.get("limit", ())),
        config_toml="\n".join(config_lines) + "\n" if config_lines else None,
    )
