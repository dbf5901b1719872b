"""Opening a file for replay or report: the config to use (given, embedded in the recording, or defaults) and the CsvSource."""

from __future__ import annotations

import datetime as _dt
import math
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from adapters.base import FatalSourceError
from adapters.csv_file import CsvSource
from monitor.errors import ConfigError, UsageError
from monitor.recording.csvformat import RecordingInfo, read_info

__all__ = ["Opened", "WindowTime", "open_file", "parse_speed", "parse_window_time", "sibling", "window_text"]


@dataclass(frozen=True)
class Opened:
    source: CsvSource
    config: Any
    info: RecordingInfo
    config_origin: str       # "--config FILE", "embedded in the recording", "defaults"


def sibling(path: str | Path, suffix: str) -> Path:
    """The file beside a recording with another suffix (shot-0001-...csv -> shot-0001-....alarms.jsonl)."""
    p = Path(path)
    return p.with_name(p.name[: -len(p.suffix)] + suffix if p.suffix else p.name + suffix)


def parse_speed(text: str | None) -> float | None:
    """``max`` (or None) -> None (as fast as possible); ``2``, ``x2``, ``2x``, ``0.5`` -> a positive float."""
    if text is None or str(text).strip().lower() in ("max", "inf", "fastest"):
        return None
    s = str(text).strip().lower().strip("x")
    try:
        v = float(s)
    except ValueError:
        raise UsageError(f"--speed: expected a number like 1, 2, 0.5 or 'max', got {text!r}") from None
    if not v > 0 or v == float("inf"):
        raise UsageError(f"--speed: must be positive, got {text!r}")
    return v


@dataclass(frozen=True)
class WindowTime:
    """A ``--from``/``--to`` value: ``seconds`` from the file's first reading, or with ``absolute``
    the file's own data time in s (its time column after the map's unit)."""

    seconds: float
    absolute: bool = False
    text: str = ""

    def resolve(self, first: float) -> float:
        return self.seconds if self.absolute else first + self.seconds


_WINDOW_HELP = ("seconds from the file's first reading (e.g. 10 or 2.5), or @ and an absolute data time: "
                "@1767261610.5 (the file's own t, s) or @2026-01-01T10:00:10+00:00 (ISO 8601; without an "
                "offset, local time)")


def parse_window_time(text: str, option: str) -> WindowTime:
    """``10`` -> 10 s after the first reading; ``@1767261610.5`` -> that data time;
    ``@2026-01-01T10:00:10Z`` -> its seconds since the epoch (local time without an offset)."""
    body = str(text).strip()
    absolute = body.startswith("@")
    if absolute:
        body = body[1:].strip()
    value: float | None
    try:
        value = float(body)
    except ValueError:
        value = None
        if absolute:
            try:
                value = _dt.datetime.fromisoformat(body).timestamp()
            except (ValueError, OverflowError, OSError):
                value = None
    if value is None or not math.isfinite(value):
        raise UsageError(f"{option}: expected {_WINDOW_HELP}; got {text!r}")
    if not absolute and value < 0:
        raise UsageError(f"{option}: {text!r} is before the file's first reading; expected {_WINDOW_HELP}")
    return WindowTime(value, absolute, str(text).strip())


def _read_toml(path: str | Path, what: str) -> dict[str, Any]:
    try:
        return tomllib.loads(Path(path).read_text(encoding="utf-8"))
    except OSError as exc:
        raise ConfigError(path, "(file)", f"cannot read the {what}: {exc.strerror or exc}") from None
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(path, "(syntax)", f"not valid TOML: {exc}") from None


def _config(info: RecordingInfo, config_path: str | None, map_path: str | None) -> tuple[Any, str]:
    from monitor.config import parse_config

    if config_path is not None:
        raw, origin, where = _read_toml(config_path, "config"), f"--config {config_path}", config_path
    elif info.config_toml:
        try:
            raw = tomllib.loads(info.config_toml)
        except tomllib.TOMLDecodeError as exc:
            raise ConfigError(info.path, "# config", f"the embedded config is not valid TOML: {exc}") from None
        origin, where = "embedded in the recording", f"{info.path} (embedded config)"
    else:
        raw, origin, where = {}, "defaults", None
        if info.on_above is not None:
            raw = {"discharge": {"on_above": info.on_above}}
    raw = dict(raw)
    if map_path is not None:
        mapped = _read_toml(map_path, "channel map")
        table = mapped.get("channels", mapped)
        if not isinstance(table, dict):
            raise ConfigError(map_path, "channels", "expected a [channels] table")
        raw["channels"] = {**dict(raw.get("channels", {})), **table}
        origin += f" + --map {map_path}"
    if info.ours and map_path is None:
        # a recording holds canonical columns already: the instrument map of the live run does not apply
        raw.pop("channels", None)
    config = parse_config(raw, where)
    return config, origin


def _time_column(config: Any, columns: tuple[str, ...]) -> tuple[str, float]:
    channels = getattr(getattr(config, "channels", None), "channels", {}) or {}
    for key, ch in channels.items():
        if getattr(ch, "quantity", None) == "t" and key in columns:
            return key, float(getattr(ch, "scale", 1.0))
    return "t", 1.0


def open_file(path: str | Path, *, config_path: str | None = None, map_path: str | None = None,
              speed: float | None = None, start: WindowTime | None = None, stop: WindowTime | None = None,
              on_damage: str = "stop") -> Opened:
    """Read the file's header, choose the config, build the CsvSource (opened) and bound it to the
    window ``start``..``stop``. FatalSourceError (exit 3) when the file cannot be read;
    ConfigError/UsageError (exit 2) for bad options, and for a window wholly outside the file's readings."""
    p = Path(path)
    if not p.is_file():
        raise FatalSourceError(f"{p}: no such file")
    try:
        info = read_info(p)
    except OSError as exc:
        raise FatalSourceError(f"{p}: cannot read: {exc}") from exc
    config, origin = _config(info, config_path, map_path)
    time_column, scale = _time_column(config, info.header.columns)
    if time_column not in info.header.columns:
        raise UsageError(f"{p}: no time column: the header has {', '.join(info.header.columns)}; name one 't' "
                         f"or map one, e.g. [channels] time_ms = {{quantity = \"t\", unit = \"ms\"}}")
    source = CsvSource(p, speed=speed, time_column=time_column, time_scale=scale, on_damage=on_damage)
    source.open()
    if start is not None or stop is not None:
        try:
            source.set_window(*_window(p, source, start, stop))
        except UsageError:
            source.close()
            raise
    return Opened(source=source, config=config, info=info, config_origin=origin)


def window_text(start: WindowTime | None, stop: WindowTime | None) -> str:
    """The window as the operator gave it, e.g. ``--from 40 --to 50``."""
    return " ".join(f"{name} {w.text or w.seconds}" for name, w in (("--from", start), ("--to", stop))
                    if w is not None)


def _window(p: Path, source: CsvSource, start: WindowTime | None,
            stop: WindowTime | None) -> tuple[float | None, float | None]:
    """The window in the file's data time; UsageError if it cannot select any reading."""
    first, last = source.first_time, source.end_time
    given = window_text(start, stop)
    if first is None:
        damage = "" if source.damage is None else f" (damaged at line {source.damage[0]}: {source.damage[1]})"
        raise UsageError(f"{p}: {given} selects no readings: the file has no readable reading{damage}")
    if last is not None and last < first:
        raise UsageError(f"{p}: {given}: the file's clock goes back (its last reading, data time {last!r} s, is "
                         f"before its first, {first!r} s: a restarted clock), so --from/--to cannot cut a window "
                         f"from it; replay it whole")
    a = start.resolve(first) if start is not None else None
    b = stop.resolve(first) if stop is not None else None
    if a is not None and b is not None and b < a:
        raise UsageError(f"{given}: --to is at data time {b!r} s, before --from at {a!r} s")
    if (a is not None and last is not None and a > last) or (b is not None and b < first):
        span = f"{last - first:g} s" if last is not None else "an unknown length"
        raise UsageError(f"{p}: {given} selects no readings: the file's readings run from 0 to {span} after "
                         f"its first (data time {first!r} to {last!r} s); give seconds from the first reading, "
                         f"or @T for an absolute data time")
    return a, b

