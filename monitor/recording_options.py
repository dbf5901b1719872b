"""The [recording] table of the config: the recorder's options (a module of its own, so that the config never imports the recorder)."""

from __future__ import annotations

import string
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping

from monitor.errors import ConfigError
from monitor.units import UnitError, parse_value

__all__ = ["RecordingOptions", "parse_recording", "MAX_FLUSH_INTERVAL"]

MAX_FLUSH_INTERVAL = 0.25       # s; the recorder's promise: at most this much is lost on a kill


@dataclass(frozen=True)
class RecordingOptions:
    """How the recorder splits and writes shots.

    ``split``: "discharge" opens a new file per shot (discharge on while ne >= on_above), with
    ``pre_trigger`` seconds of data before the trigger and ``post_trigger`` seconds after the
    discharge went off; "none" writes one file for the whole session. ``flush_interval`` (s, at
    most 0.25): pending lines are written to the file at least this often. ``fsync``: also ask the
    OS to put them on the disk (every ``flush_interval``). ``name``: file name template with
    ``{shot}`` (the counter) and ``{start}`` (UTC start, e.g. 20261201T220520Z). ``subdirectory``:
    "none" or "day" (one folder per UTC day, YYYY-MM-DD). ``sigma``: also record the per-sample
    uncertainties of the base quantities. ``directory``: where to record when `--record` is not given.
    """

    directory: str | None = None
    split: str = "discharge"
    pre_trigger: float = 1.0
    post_trigger: float = 2.0
    flush_interval: float = 0.2
    fsync: bool = False
    name: str = "shot-{shot:04d}-{start}"
    subdirectory: str = "none"
    sigma: bool = True


_CHOICES = {"split": ("discharge", "none"), "subdirectory": ("none", "day")}


def _seconds(value: Any, path: str | Path | None, key: str) -> float:
    try:
        v, _ = parse_value(value, "time")
    except UnitError as exc:
        raise ConfigError(path, key, str(exc)) from None
    if not v >= 0 or v != v or v == float("inf"):
        raise ConfigError(path, key, f"must be a finite time >= 0 s, got {value!r}")
    return v


def parse_recording(table: Mapping[str, Any] | None, path: str | Path | None) -> RecordingOptions:
    """Read a `[recording]` table; unknown keys or bad values -> ConfigError(path, key, message)."""
    if not table:
        return RecordingOptions()
    known = RecordingOptions.__dataclass_fields__
    out: dict[str, Any] = {}
    for key, value in table.items():
        full = f"recording.{key}"
        if key not in known:
            raise ConfigError(path, full, f"unknown key; known: {', '.join(known)}")
        if key in ("pre_trigger", "post_trigger", "flush_interval"):
            out[key] = _seconds(value, path, full)
        elif key in ("fsync", "sigma"):
            if not isinstance(value, bool):
                raise ConfigError(path, full, f"must be true or false, got {value!r}")
            out[key] = value
        elif key in _CHOICES:
            if value not in _CHOICES[key]:
                raise ConfigError(path, full, f"must be one of {', '.join(_CHOICES[key])}, got {value!r}")
            out[key] = value
        elif key == "name":
            out[key] = _check_template(value, path, full)
        elif key == "directory":
            if not isinstance(value, str) or not value:
                raise ConfigError(path, full, "must be a directory path (a string)")
            out[key] = value
    if out.get("flush_interval", RecordingOptions.flush_interval) > MAX_FLUSH_INTERVAL:
        raise ConfigError(path, "recording.flush_interval",
                          f"at most {MAX_FLUSH_INTERVAL} s (the recorder's crash-safety promise)")
    if out.get("flush_interval", 1.0) == 0.0:
        raise ConfigError(path, "recording.flush_interval", "must be > 0 s")
    return RecordingOptions(**out)


def _check_template(value: Any, path: str | Path | None, key: str) -> str:
    if not isinstance(value, str) or not value:
        raise ConfigError(path, key, "must be a file name template, e.g. \"shot-{shot:04d}-{start}\"")
    fields = {f for _, f, _, _ in string.Formatter().parse(value) if f is not None}
    if "shot" not in fields or not fields <= {"shot", "start"}:
        raise ConfigError(path, key, "must contain {shot} and may contain {start}, nothing else")
    if "/" in value or "\\" in value or value.startswith("."):
        raise ConfigError(path, key, "a file name, not a path")
    try:
        value.format(shot=1, start="20260101T000000Z")
    except (ValueError, IndexError) as exc:
        raise ConfigError(path, key, f"bad template: {exc}") from None
    return value
