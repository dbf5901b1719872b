"""Opening a file for replay or report: the config to use (given, embedded in the recording, or defaults) and the CsvSource."""

from __future__ import annotations

import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from adapters.base import FatalSourceError
from adapters.csv_file import CsvSource
from monitor.errors import ConfigError, UsageError
from monitor.recording.csvformat import RecordingInfo, read_info

__all__ = ["Opened", "open_file", "parse_speed", "sibling"]


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
              speed: float | None = None, start: float | None = None, stop: float | None = None,
              on_damage: str = "stop") -> Opened:
    """Read the file's header, choose the config, build the CsvSource (opened). FatalSourceError
    (exit 3) when the file cannot be read; ConfigError/UsageError (exit 2) for bad options."""
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
    if start is not None and stop is not None and stop < start:
        raise UsageError("--to must not be before --from")
    source = CsvSource(p, speed=speed, start=start, stop=stop, time_column=time_column, time_scale=scale,
                       on_damage=on_damage)
    source.open()
    return Opened(source=source, config=config, info=info, config_origin=origin)

