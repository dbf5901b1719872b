"""The TOML configuration: device constants, discharge rule, source timing, channel map, limits, alarm and recording options."""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, Mapping

from monitor.channels import BASE_KEYS, ChannelMap, parse_channels
from monitor.errors import ConfigError
from monitor.model import Device
from monitor.physics.ranges import DEVICE_FIELDS, check_value
from monitor.units import UnitError, parse_value

if TYPE_CHECKING:
    from monitor.alarms.envelope import AlarmOptions, LimitSpec
    from monitor.recording_options import RecordingOptions

__all__ = ["Config", "load_config", "parse_config", "PipelineOptions", "config_quantity"]

_TABLES = ("device", "discharge", "sources", "channels", "limit", "alarms", "recording", "pipeline",
           "interferometer", "probe")

# [device] key -> (Device field, dimension for monitor.units)
_DEVICE_KEYS: dict[str, tuple[str, str]] = {
    "length": ("length", "length"),
    "ion_mass": ("ion_mass_u", "mass"),
    "A": ("ion_mass_u", "mass"),
    "Z": ("ion_charge", "dimensionless"),
    "gas_temperature": ("gas_temperature", "temperature_gas"),
    "wave_frequency": ("wave_frequency", "frequency"),
    "sigma_en": ("sigma_en", "area"),
}
MAX_CONFIG_BYTES = 1 << 20                           # a config file is read up to this size, never more
_TIME_MAX = 1e6                                      # s: the longest stale_after, max_age, window, ... (11.6 days)
_SOURCES_KEYS = {"stale_after", "max_age", "curve_server_key", "curve_client_key", "allow_remote", "receive_queue"}
_PIPELINE_KEYS = {"window", "bins", "trail_seconds", "trail_points", "keep_rejected", "clock_restart"}


@dataclass(frozen=True)
class PipelineOptions:
    """``[pipeline]``: rolling window (s of data time) split into ``bins`` buckets;
    trails for the screen over ``trail_seconds`` at ``trail_points`` points;
    ``keep_rejected`` recent rejections kept in memory (all of them go to the sinks);
    ``clock_restart`` how far (s) a source's time may fall back before it counts as a
    restarted clock rather than readings refused as ``time_backwards`` (``"off"``: never;
    the same default as ``monitor.pipeline.validate.CLOCK_RESTART``)."""

    window: float = 10.0
    bins: int = 200
    trail_seconds: float = 60.0
    trail_points: int = 600
    keep_rejected: int = 1000
    clock_restart: float = 10.0


@dataclass(frozen=True)
class Config:
    """Everything a run needs, canonical units throughout.

    ``max_age`` is the default alignment hold (s of data time): a channel's last
    value stands in for at most this long, then it is missing;
    ``max_age_by_key`` overrides it per canonical key. ``limits`` holds the
    alarm helper's LimitSpec values, ``alarms`` its AlarmOptions (None when the
    parser is not installed), ``recording`` the recorder's options (likewise).
    ``curve_server_key``/``curve_client_key`` name the zmq.auth key files of a
    CURVE-secured ZeroMQ source; ``allow_remote`` lets a ZeroMQ source connect
    beyond loopback without CURVE; ``receive_queue`` is a ZeroMQ source's receive
    high-water mark in messages (None: the adapter's default, 200,000). ``raw``
    is the parsed TOML as read.
    """

    path: str | None = None
    device: Device = field(default_factory=Device)
    on_above: float = 1.0e15
    stale_after: float = 2.0
    max_age: float = 0.25
    max_age_by_key: Mapping[str, float] = field(default_factory=dict)
    channels: ChannelMap = field(default_factory=ChannelMap)
    limits: tuple[LimitSpec, ...] = ()
    alarms: AlarmOptions | None = None
    recording: RecordingOptions | None = None
    pipeline: PipelineOptions = field(default_factory=PipelineOptions)
    curve_server_key: str | None = None
    curve_client_key: str | None = None
    allow_remote: bool = False
    receive_queue: int | None = None
    raw: Mapping[str, Any] = field(default_factory=dict)

    def hold_for(self, key: str) -> float:
        """The alignment hold of canonical key ``key`` (s)."""
        return self.max_age_by_key.get(key, self.max_age)


def load_config(path: str | Path | None) -> Config:
    """Read and check a TOML config; None gives the defaults. Raises ConfigError (exit 2)."""
    if path is None:
        return parse_config({}, None)
    p = Path(path)
    try:
        if p.is_dir():
            raise ConfigError(p, "(file)", "is a directory, not a config file")
        with open(p, "rb") as fh:
            text = fh.read(MAX_CONFIG_BYTES + 1)       # bounded: /dev/zero or a huge file cannot fill memory
    except OSError as exc:
        raise ConfigError(p, "(file)", f"cannot read: {exc.strerror or exc}") from None
    if len(text) > MAX_CONFIG_BYTES:
        raise ConfigError(p, "(file)", f"larger than {MAX_CONFIG_BYTES} bytes; a config file is a few kilobytes "
                                       "of TOML")
    try:
        raw = tomllib.loads(text.decode("utf-8"))
    except UnicodeDecodeError as exc:
        raise ConfigError(p, "(file)", f"not UTF-8 text: {exc}") from None
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(p, "(syntax)", f"not valid TOML: {exc}") from None
    return parse_config(raw, p)


def parse_config(raw: Mapping[str, Any], path: str | Path | None) -> Config:
    """Build a Config from an already parsed TOML mapping."""
    unknown = sorted(set(raw) - set(_TABLES))
    if unknown:
        raise ConfigError(path, unknown[0], f"unknown table or key; accepted tables: {', '.join(_TABLES)}")
    for name in _TABLES:
        if name in raw and name != "limit" and not isinstance(raw[name], Mapping):
            raise ConfigError(path, name, f"expected a table [{name}]")
    device = _parse_device(raw.get("device", {}), path)
    discharge = raw.get("discharge", {})
    _only(discharge, {"on_above"}, "discharge", path)
    on_above = _number(discharge, "on_above", "density", 1.0e15, path, "discharge", positive=True)
    sources = raw.get("sources", {})
    _only(sources, _SOURCES_KEYS, "sources", path)
    stale_after = _number(sources, "stale_after", "time", 2.0, path, "sources", positive=True)
    max_age, by_key = _parse_max_age(sources.get("max_age"), path)
    curve = {k: _string(sources, k, path, "sources") for k in ("curve_server_key", "curve_client_key")}
    allow_remote = sources.get("allow_remote", False)
    if not isinstance(allow_remote, bool):
        raise ConfigError(path, "sources.allow_remote", f"must be true or false, got {allow_remote!r}")
    receive_queue = sources.get("receive_queue")
    if receive_queue is not None and (isinstance(receive_queue, bool) or not isinstance(receive_queue, int)
                                      or not 1 <= receive_queue <= 100_000_000):
        raise ConfigError(path, "sources.receive_queue",
                          f"expected a whole number of messages from 1 to 100000000, got {receive_queue!r}")
    if (curve["curve_server_key"] is None) != (curve["curve_client_key"] is None):
        raise ConfigError(path, "sources.curve_client_key", "CURVE needs both curve_server_key and curve_client_key")
    channels_table = raw.get("channels", {})
    channels = parse_channels(channels_table, path)
    limits_raw = raw.get("limit", [])
    if not isinstance(limits_raw, list) or not all(isinstance(x, Mapping) for x in limits_raw):
        raise ConfigError(path, "limit", "expected [[limit]] tables")
    from monitor.alarms.envelope import parse_alarm_options, parse_limits
    from monitor.recording_options import parse_recording

    limits = tuple(parse_limits(list(limits_raw), path))
    alarms = parse_alarm_options(dict(raw.get("alarms", {})), path)
    recording = parse_recording(dict(raw.get("recording", {})), path)
    pipeline = _parse_pipeline(raw.get("pipeline", {}), path)
    return Config(
        path=str(path) if path is not None else None,
        device=device, on_above=on_above, stale_after=stale_after,
        max_age=max_age, max_age_by_key=by_key, channels=channels,
        limits=limits, alarms=alarms, recording=recording, pipeline=pipeline,
        curve_server_key=curve["curve_server_key"], curve_client_key=curve["curve_client_key"],
        allow_remote=allow_remote, receive_queue=receive_queue, raw=dict(raw),
    )


def _only(table: Mapping[str, Any], allowed: set[str], where: str, path: str | Path | None) -> None:
    extra = sorted(set(table) - allowed)
    if extra:
        raise ConfigError(path, f"{where}.{extra[0]}", f"unknown key; accepted: {', '.join(sorted(allowed))}")


def _number(table: Mapping[str, Any], key: str, dimension: str, default: float | None,
            path: str | Path | None, where: str, *, positive: bool = False) -> Any:
    if key not in table:
        return default
    value = config_quantity(table[key], dimension, path, f"{where}.{key}")
    if positive and not value > 0:
        raise ConfigError(path, f"{where}.{key}", f"must be positive, got {table[key]!r}")
    high = _TIME_MAX if dimension == "time" else 1e33 if dimension == "density" else math.inf
    if value > high:
        raise ConfigError(path, f"{where}.{key}", f"{table[key]!r} is beyond the accepted {high:g} "
                                                  f"{'s' if dimension == 'time' else 'm^-3'}")
    return value


def config_quantity(raw: Any, dimension: str, path: str | Path | None, key: str) -> float:
    """One value of a TOML table in canonical units (a number, or a string with a unit); ConfigError naming
    the file and ``key`` when it is not a finite quantity or carries an uncertainty. Every table's parser
    (the diagnostics' too) reads its quantities through this."""
    if isinstance(raw, bool) or not isinstance(raw, (int, float, str)):
        raise ConfigError(path, key, f"expected a number or a string with a unit, got {raw!r}")
    try:
        value, sigma = parse_value(raw, dimension)
    except UnitError as exc:
        raise ConfigError(path, key, str(exc)) from None
    if sigma is not None:
        raise ConfigError(path, key, "takes no uncertainty here")
    if not math.isfinite(value):
        raise ConfigError(path, key, f"must be finite, got {raw!r}")
    return value


def _string(table: Mapping[str, Any], key: str, path: str | Path | None, where: str) -> str | None:
    if key not in table:
        return None
    value = table[key]
    if not isinstance(value, str) or not value:
        raise ConfigError(path, f"{where}.{key}", f"expected a file name, got {value!r}")
    if path is not None and not Path(value).is_absolute():
        value = str(Path(path).parent / value)
    return value


def _parse_device(table: Mapping[str, Any], path: str | Path | None) -> Device:
    _only(table, set(_DEVICE_KEYS), "device", path)
    if "A" in table and "ion_mass" in table:
        raise ConfigError(path, "device.A", "give the ion mass once, as A or as ion_mass")
    kwargs: dict[str, float] = {}
    for key, (attr, dimension) in _DEVICE_KEYS.items():
        if key in table:
            value = config_quantity(table[key], dimension, path, f"device.{key}")
            # the one table of physical ranges, as `regime calc` checks its inputs
            problem = check_value(DEVICE_FIELDS[attr], value)
            if problem:
                raise ConfigError(path, f"device.{key}", f"{table[key]!r}: {problem}")
            kwargs[attr] = value
    return Device(**kwargs)


def _parse_max_age(raw: Any, path: str | Path | None) -> tuple[float, dict[str, float]]:
    if raw is None:
        return 0.25, {}
    if not isinstance(raw, Mapping):
        return _number({"max_age": raw}, "max_age", "time", None, path, "sources", positive=True), {}
    allowed = {"default", *BASE_KEYS}
    _only(raw, allowed, "sources.max_age", path)
    default = 0.25
    by_key: dict[str, float] = {}
    for key, item in raw.items():
        value = _number(raw, key, "time", None, path, "sources.max_age", positive=True)
        if key == "default":
            default = value
        else:
            by_key[key] = value
    return default, by_key


def _parse_pipeline(table: Mapping[str, Any], path: str | Path | None) -> PipelineOptions:
    _only(table, _PIPELINE_KEYS, "pipeline", path)
    d = PipelineOptions()
    window = _number(table, "window", "time", d.window, path, "pipeline", positive=True)
    trail_seconds = _number(table, "trail_seconds", "time", d.trail_seconds, path, "pipeline", positive=True)
    if table.get("clock_restart") == "off":
        clock_restart = math.inf
    else:
        clock_restart = _number(table, "clock_restart", "time", d.clock_restart, path, "pipeline", positive=True)
    ints: dict[str, int] = {}
    for key, lo, hi in (("bins", 2, 100_000), ("trail_points", 2, 1_000_000), ("keep_rejected", 0, 10_000_000)):
        if key in table:
            v = table[key]
            if isinstance(v, bool) or not isinstance(v, int) or not lo <= v <= hi:
                raise ConfigError(path, f"pipeline.{key}", f"expected a whole number from {lo} to {hi}, got {v!r}")
            ints[key] = v
    return PipelineOptions(window=window, trail_seconds=trail_seconds,
                           bins=ints.get("bins", d.bins), trail_points=ints.get("trail_points", d.trail_points),
                           keep_rejected=ints.get("keep_rejected", d.keep_rejected), clock_restart=clock_restart)
