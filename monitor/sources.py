"""SOURCE specs of the command line turned into adapters: ZeroMQ, serial lines, the simulator, CSV files."""

from __future__ import annotations

import importlib
import math
import os
import re
from pathlib import Path
from typing import TYPE_CHECKING, Any
from urllib.parse import parse_qsl

from adapters.base import Source
from monitor.config import Config
from monitor.errors import UsageError

if TYPE_CHECKING:
    from monitor.diagnostics.probe_spec import ProbeSpec

__all__ = ["open_source", "is_live", "SPEC_HELP"]

SPEC_HELP = ("tcp://HOST:PORT or ipc://PATH (ZeroMQ), serial:PORT[@BAUD], /dev/tty..., loop://, "
             "socket://HOST:PORT (serial lines), sim:NAME[?seed=N&rate=HZ&speed=X|max&duration=S&loop=1], "
             "sim:probe[?rate=SWEEPS_PER_S&points=N&seed=N&speed=X|max&duration=S] (probe sweeps), "
             "sim:interferometer (I/Q), the path of a CSV file or recording (a sweep file when the config has "
             "a [probe] table), or relay+tcp://HOST:PORT / relay+ipc://PATH (a console on another run's relay: "
             "regime watch only)")
_SIM_PARAMS = ("seed", "rate", "speed", "duration", "loop")
_PROBE_PARAMS = ("seed", "rate", "speed", "duration", "points")
_BAUD = re.compile(r"^(?P<port>.+)@(?P<baud>\d+)$")


def _adapter(module: str, cls: str, spec: str) -> Any:
    try:
        mod = importlib.import_module(module)
    except ModuleNotFoundError as exc:
        if exc.name == module:
            raise UsageError(f"{spec}: this kind of source is not available ({module} is missing)") from None
        raise
    return getattr(mod, cls)


def is_live(spec: str) -> bool:
    """False for a file (replayed in data time), True for every live kind."""
    return not _looks_like_file(spec)


def _looks_like_file(spec: str) -> bool:
    if "://" in spec or spec.startswith(("sim:", "serial:", "/dev/")):
        return False
    return True


def open_source(spec: str, config: Config | None = None) -> Source:
    """The adapter for ``spec`` (not opened yet). A spec that names no known
    kind of source, or bad parameters, raise UsageError (exit 2). With an
    ``[interferometer]`` table (or for ``sim:interferometer``) the adapter is
    wrapped, so that its phase or I/Q columns become density readings."""
    config = config if config is not None else Config()
    spec = spec.strip()
    return _with_interferometer(spec, _open(spec, config), config)


def _with_interferometer(spec: str, source: Source, config: Config) -> Source:
    from monitor.diagnostics.interferometer_config import interferometer_config

    setup = interferometer_config(config.raw, config.path)
    if setup is None and spec.partition("?")[0] == "sim:interferometer":
        from monitor.diagnostics.interferometer_source import simulator_config
        setup = simulator_config()
    if setup is None:
        return source
    from monitor.diagnostics.interferometer_source import InterferometerSource
    return InterferometerSource(source, setup, on_above=config.on_above)


def _open(spec: str, config: Config) -> Source:
    if not spec:
        raise UsageError(f"empty SOURCE; give {SPEC_HELP}")
    if spec.startswith(("tcp://", "ipc://")):
        _check_endpoint(spec)
        ZmqSource = _adapter("adapters.zmq_stream", "ZmqSource", spec)
        curve = None
        if config.curve_server_key and config.curve_client_key:
            curve = (config.curve_server_key, config.curve_client_key)
        zkw: dict[str, Any] = {"curve": curve}
        if config.allow_remote:
            zkw["allow_remote"] = True
        if config.receive_queue is not None:
            zkw["rcvhwm"] = config.receive_queue      # [sources] receive_queue
        return _construct(ZmqSource, spec, spec, **zkw)
    if spec.startswith("serial:"):
        rest = spec[len("serial:"):]
        m = _BAUD.match(rest)
        port, baud = (m.group("port"), int(m.group("baud"))) if m else (rest, None)
        if m is None and "@" in rest and not rest.startswith(("loop://", "socket://", "rfc2217://", "spy://")):
            bad = rest.rpartition("@")[2]
            raise UsageError(f"{spec}: baud rate {bad!r} is not a whole number; write serial:PORT@BAUD, "
                             "e.g. serial:/dev/ttyUSB0@115200")
        if not port:
            raise UsageError(f"{spec}: serial: needs a port, e.g. serial:/dev/ttyUSB0@115200")
        return _serial(spec, port, baud)
    if spec.startswith(("loop://", "socket://", "rfc2217://", "spy://", "/dev/")):
        m = _BAUD.match(spec) if spec.startswith("/dev/") else None
        if m:
            return _serial(spec, m.group("port"), int(m.group("baud")))
        if spec.startswith("/dev/") and "@" in spec:
            raise UsageError(f"{spec}: baud rate {spec.rpartition('@')[2]!r} is not a whole number; "
                             "write /dev/PORT@BAUD, e.g. /dev/ttyUSB0@115200")
        return _serial(spec, spec, None)
    if spec.startswith("sim:"):
        return _sim(spec, config)
    if spec.startswith("relay+"):
        raise UsageError(f"{spec}: a relay is watched as a console (regime watch {spec}), not replayed or recorded")
    if "://" in spec:
        scheme = spec.split("://", 1)[0]
        raise UsageError(f"{spec}: unknown scheme {scheme!r}; give {SPEC_HELP}")
    path = Path(spec)
    if path.is_file() and "probe" in config.raw:          # a sweep file, when the config describes a probe
        ProbeSweepSource = _adapter("monitor.diagnostics.probe_source", "ProbeSweepSource", spec)
        return _construct(ProbeSweepSource, spec, path, probe=_probe_spec(config), speed=None)
    if path.is_file():
        CsvSource = _adapter("adapters.csv_file", "CsvSource", spec)
        kwargs: dict[str, Any] = {"speed": None, "numeric": tuple(config.channels.channels)}
        tcol = next((c for c in config.channels.channels.values() if c.quantity == "t"), None)
        if tcol is not None:
            kwargs.update(time_column=tcol.key, time_scale=tcol.scale)
        return _construct(CsvSource, spec, path, **kwargs)
    if path.exists():
        raise UsageError(f"{spec}: not a regular file")
    raise UsageError(f"{spec}: no such file, and not a source spec; give {SPEC_HELP}")


def _check_endpoint(spec: str) -> None:
    """A ZeroMQ endpoint that can never connect is a usage error: tcp:// needs HOST:PORT with PORT 1-65535,
    ipc:// a path."""
    scheme, _, rest = spec.partition("://")
    if scheme == "ipc":
        if not rest:
            raise UsageError(f"{spec}: ipc:// needs a path, e.g. ipc:///tmp/feed.ipc")
        return
    target = rest.split(";", 1)[1] if ";" in rest else rest      # source-address syntax: SRC;HOST:PORT
    host, sep, port = target.rpartition(":")
    if not sep or not host.strip("[]"):
        raise UsageError(f"{spec}: tcp:// needs HOST:PORT, e.g. tcp://127.0.0.1:5556")
    if not port.isdigit() or not 1 <= int(port) <= 65535:
        raise UsageError(f"{spec}: port {port!r} is not a port number (1-65535)")


def _construct(cls: Any, spec: str, *args: Any, **kwargs: Any) -> Source:
    from adapters.base import FatalSourceError
    try:
        return cls(*args, **kwargs)
    except (ValueError, TypeError, FatalSourceError) as exc:
        raise UsageError(f"{spec}: {exc}") from None


def _serial(spec: str, port: str, baud: int | None) -> Source:
    SerialSource = _adapter("adapters.serial_line", "SerialSource", spec)
    if baud is not None:
        if not 50 <= baud <= 20_000_000:
            raise UsageError(f"{spec}: baud rate {baud} out of range")
        return _construct(SerialSource, spec, port, baud=baud)
    return _construct(SerialSource, spec, port)


def _sim(spec: str, config: Config) -> Source:
    """sim:NAME[?...]: the simulator's scenarios; sim:probe (our probe model's sweeps, with ``points``
    instead of ``loop``); sim:interferometer (I/Q, wrapped by open_source)."""
    body = spec[len("sim:"):]
    name, _, query = body.partition("?")
    if not name:
        raise UsageError(f"{spec}: sim: needs a scenario name, e.g. sim:steady")
    allowed = _PROBE_PARAMS if name == "probe" else _SIM_PARAMS
    kwargs: dict[str, Any] = {}
    for key, value in parse_qsl(query, keep_blank_values=True, strict_parsing=False):
        if key not in allowed:
            raise UsageError(f"{spec}: unknown parameter {key!r}; accepted: {', '.join(allowed)}")
        try:
            if key in ("seed", "points"):
                kwargs[key] = int(value)
            elif key == "loop":
                if value.lower() not in ("0", "1", "true", "false", "yes", "no"):
                    raise ValueError(value)
                kwargs["loop"] = value.lower() in ("1", "true", "yes")
            elif key == "speed" and value.lower() in ("max", "inf", ""):
                kwargs["speed"] = None
            else:
                v = float(value)
                if not math.isfinite(v) or v <= 0:
                    raise ValueError(value)
                kwargs[key] = v
        except ValueError:
            raise UsageError(f"{spec}: bad value {value!r} for {key}") from None
    if query and not kwargs and "=" not in query:
        raise UsageError(f"{spec}: cannot read the parameters {query!r}; write ?seed=1&rate=1000")
    if name == "probe":
        ProbeSweepSource = _adapter("monitor.diagnostics.probe_source", "ProbeSweepSource", spec)
        return _construct(ProbeSweepSource, spec, None, probe=_probe_spec(config), **kwargs)
    if name == "interferometer":
        InterferometerSimSource = _adapter("adapters.sim_interferometer", "InterferometerSimSource", spec)
        return _construct(InterferometerSimSource, spec, name, **kwargs)
    SimSource = _adapter("adapters.simulated", "SimSource", spec)
    return _construct(SimSource, spec, name, **kwargs)


def _probe_spec(config: Config) -> ProbeSpec | None:
    """The [probe] table as a ProbeSpec (ConfigError names file and key), None without the table."""
    if "probe" not in config.raw:
        return None
    from monitor.diagnostics.probe_config import probe_spec
    return probe_spec(config)


def spec_is_path(spec: str) -> bool:
    return _looks_like_file(spec) and os.path.exists(spec)
