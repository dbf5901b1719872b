"""SOURCE specs to adapters: each kind, its parameters, and usage errors for bad specs."""

from __future__ import annotations

from pathlib import Path

import pytest

from monitor.config import parse_config
from monitor.errors import UsageError
from monitor.sources import is_live, open_source


def test_zeromq_specs() -> None:
    import adapters.zmq_stream  # noqa: F401 - fails loudly if the module is broken
    src = open_source("tcp://127.0.0.1:5599", None)
    assert type(src).__name__ == "ZmqSource" and src.endpoint == "tcp://127.0.0.1:5599"
    assert type(open_source("ipc:///tmp/x.ipc", None)).__name__ == "ZmqSource"
    with pytest.raises(UsageError):
        open_source("tcp://192.0.2.1:5599", None)            # off this machine: asked for explicitly
    remote = open_source("tcp://192.0.2.1:5599", parse_config({"sources": {"allow_remote": True}}, None))
    assert remote.endpoint == "tcp://192.0.2.1:5599"


def test_serial_specs() -> None:
    import adapters.serial_line  # noqa: F401 - fails loudly if the module is broken
    s = open_source("serial:/dev/ttyUSB7@9600", None)
    assert (s.url, s.baud) == ("/dev/ttyUSB7", 9600)
    s = open_source("/dev/ttyACM3", None)
    assert s.url == "/dev/ttyACM3" and s.baud == 115200
    assert open_source("loop://", None).url == "loop://"
    assert open_source("socket://127.0.0.1:7001", None).url == "socket://127.0.0.1:7001"
    assert is_live("serial:/dev/ttyUSB7") and is_live("loop://")


def test_sim_spec_parameters() -> None:
    import adapters.simulated  # noqa: F401 - fails loudly if the module is broken
    s = open_source("sim:excursion?seed=4&rate=2000&speed=max&duration=3&loop=1", None)
    assert (s.scenario, s.seed, s.rate, s.speed, s.loop) == ("excursion", 4, 2000.0, None, True)
    assert open_source("sim:steady?speed=2.5", None).speed == 2.5
    for bad in ("sim:", "sim:steady?seed=x", "sim:steady?speed=0", "sim:steady?loop=maybe", "sim:steady?colour=red",
                "sim:no-such-scenario"):
        with pytest.raises(UsageError):
            open_source(bad, None)


def test_file_specs(tmp_path: Path) -> None:
    import adapters.csv_file  # noqa: F401 - fails loudly if the module is broken
    p = tmp_path / "shot.csv"
    p.write_text("time_ms,ne\n0,1e17\n", encoding="utf-8")
    config = parse_config({"channels": {"time_ms": {"quantity": "t", "unit": "ms"}}}, None)
    src = open_source(str(p), config)
    assert type(src).__name__ == "CsvSource"
    assert src._time_column == "time_ms" and src._time_scale == pytest.approx(1e-3)
    assert not is_live(str(p))
    with pytest.raises(UsageError):
        open_source(str(tmp_path), None)                     # a directory
    with pytest.raises(UsageError):
        open_source(str(tmp_path / "absent.csv"), None)


@pytest.mark.parametrize("spec", ["", "   ", "http://example.invalid/feed", "serial:", "nonsense"])
def test_bad_specs(spec: str) -> None:
    with pytest.raises(UsageError):
        open_source(spec, None)


def test_the_zeromq_receive_queue_is_a_sources_setting(tmp_path) -> None:
    # [sources] receive_queue sets the ZeroMQ receive high-water mark (messages); checked on a real socket
    import zmq

    from monitor.config import ConfigError

    assert open_source("tcp://127.0.0.1:5599", parse_config({}, None)).rcvhwm == 200_000
    config = parse_config({"sources": {"receive_queue": 5000}}, None)
    src = open_source("tcp://127.0.0.1:5599", config)
    src.open()
    try:
        assert src.rcvhwm == 5000
        socks = [v for v in vars(src).values() if isinstance(v, zmq.Socket)]
        assert socks and socks[0].getsockopt(zmq.RCVHWM) == 5000
    finally:
        src.close()
    for bad in (0, -1, 2.5, "many", True):
        with pytest.raises(ConfigError, match="receive_queue"):
            parse_config({"sources": {"receive_queue": bad}}, None)


# issue 12 point 9: specs that could never work are usage errors at once (exit 2), not endless retries
@pytest.mark.parametrize("spec, words", [
    ("tcp://127.0.0.1:99999", "port '99999'"),
    ("tcp://127.0.0.1:0", "port '0'"),
    ("tcp://127.0.0.1", "HOST:PORT"),
    ("tcp://:5555", "HOST:PORT"),
    ("ipc://", "path"),
    ("serial:/dev/x@abc", "baud rate 'abc'"),
    ("serial:/dev/x@", "baud rate ''"),
    ("/dev/ttyUSB0@fast", "baud rate 'fast'"),
    ("sim:demo?rate=1e12", "ceiling"),
])
def test_specs_that_can_never_work_are_usage_errors(spec: str, words: str) -> None:
    with pytest.raises(UsageError, match=words.replace("(", r"\(")):
        open_source(spec, None)


def test_serial_url_with_at_sign_is_left_alone() -> None:
    assert open_source("serial:socket://127.0.0.1:7001", None).url == "socket://127.0.0.1:7001"


# issue 12 point 4: the channel map's keys are always numbers; other text columns are ignored and named
def test_csv_source_parses_the_mapped_columns_as_numbers(tmp_path: Path) -> None:
    path = tmp_path / "log.csv"
    path.write_text("t,dens,note\n0.0,bad,ok\n0.1,1e17,fine\n")
    cfg = parse_config({"channels": {"dens": {"quantity": "ne", "unit": "m^-3"}}}, None)
    src = open_source(str(path), cfg)
    src.open()
    try:
        assert src.ignored_columns == ("note",)           # "dens" is mapped: read as numbers, line 2 damaged
        assert src.damage is not None and src.damage[0] == 2
    finally:
        src.close()
