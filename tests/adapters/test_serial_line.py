"""SerialSource on real pseudo-terminals, pyserial loop:// and socket://, including unplug and replug."""

from __future__ import annotations

import os
import re
import socket
import threading
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from adapter_helpers import Drained, drain, free_port, wait_until
from adapters.base import FatalSourceError, LinkState
from adapters.serial_line import SerialSource, parse_serial_spec


class FakePort:
    """A real pty whose slave is reached through a stable symlink, so it can be unplugged and replugged."""

    def __init__(self, directory: Path) -> None:
        self.link = directory / "ttyRGM0"
        self.master = -1
        self.plug()

    def plug(self) -> None:
        master, slave = os.openpty()
        name = os.ttyname(slave)
        os.close(slave)
        if self.link.is_symlink():
            self.link.unlink()
        self.link.symlink_to(name)
        self.master = master

    def unplug(self) -> None:
        os.close(self.master)
        self.master = -1
        self.link.unlink()

    def write(self, data: bytes) -> None:
        view = memoryview(data)
        while view:
            n = os.write(self.master, view)
            view = view[n:]

    def close(self) -> None:
        if self.master >= 0:
            os.close(self.master)
            self.master = -1


@pytest.fixture
def pty_port(short_tmp: Path):
    p = FakePort(short_tmp)
    yield p
    p.close()


_FUZZ: dict[int, SerialSource] = {}


@pytest.fixture
def opened():
    made: list[SerialSource] = []

    def make(url: str, **kw) -> SerialSource:
        s = SerialSource(url, **kw)
        s.open()
        made.append(s)
        return s

    yield make
    for s in made:
        s.close()


def test_pty_lines_lf_crlf_and_partial_across_reads(pty_port: FakePort, opened) -> None:
    src = opened(str(pty_port.link), baud=921600)
    assert src.connected.wait(5), src.status()
    pty_port.write(b"t=1 seq=1 ne=5e16\r\nt=2 seq=2 ne=6e16 Te=3\nt=3 seq=3 ")
    d = drain(src, lambda d: d.readings >= 2)
    assert d.seqs().tolist() == [1, 2] and src.bytes_read > 0
    pty_port.write(b"ne=7e16\n# a comment\n\n")
    d = drain(src, lambda d: d.readings >= 3, into=d)
    assert d.seqs().tolist() == [1, 2, 3] and d.rejections == []
    assert d.column("ne").tolist() == [5e16, 6e16, 7e16]
    assert src.status().state is LinkState.CONNECTED and src.name == f"serial:{pty_port.link}"


def test_pty_bulk_lines_arrive_in_few_batches_and_none_lost(pty_port: FakePort, opened) -> None:
    src = opened(str(pty_port.link), baud=921600)
    assert src.connected.wait(5)
    n = 20_000
    data = b"".join(b"t=%.3f seq=%d ne=5.0e16 Te=3.0 p0=2.0\n" % (i * 1e-3, i) for i in range(n))
    writer = threading.Thread(target=pty_port.write, args=(data,))
    writer.start()
    d = drain(src, lambda d: d.readings >= n, timeout=30)
    writer.join(timeout=10)
    assert np.array_equal(d.seqs(), np.arange(n)) and d.rejections == []
    assert len(d.batches) < n / 10        # many lines per batch, not one batch per line


def test_pty_oversized_line_is_rejected_and_the_stream_continues(pty_port: FakePort, opened) -> None:
    src = opened(str(pty_port.link), max_line=100)
    assert src.connected.wait(5)
    pty_port.write(b"seq=1 ne=1\n" + b"x" * 500 + b"\nseq=2 ne=2\nseq=3 ne=zz\n")
    d = drain(src, lambda d: d.readings >= 2 and len(d.rejections) >= 2)
    assert d.seqs().tolist() == [1, 2] and d.reasons() == ["oversized", "bad_value"]


def test_pty_unplug_then_replug_resumes(pty_port: FakePort, opened) -> None:
    src = opened(str(pty_port.link), backoff=(0.05, 0.2))
    assert src.connected.wait(5)
    d = Drained()
    pty_port.write(b"seq=1 ne=1\nseq=2 ne=")                       # the second line is cut off by the unplug
    drain(src, lambda d: d.readings >= 1, into=d)
    pty_port.unplug()
    drain(src, lambda d: "truncated" in d.reasons() and src.status().state is LinkState.DISCONNECTED, into=d)
    assert src.status().state is LinkState.DISCONNECTED
    assert [r.raw for r in d.rejections if r.reason == "truncated"] == [b"seq=2 ne="]
    # while unplugged the port is retried (the message names the retry); then it comes back
    assert wait_until(lambda: src.status().retries >= 2, timeout=5)
    pty_port.plug()
    assert src.connected.wait(5), src.status()
    pty_port.write(b"seq=3 ne=3\n")
    drain(src, lambda d: d.readings >= 2, into=d)
    assert d.seqs().tolist() == [1, 3]
    assert d.states[0] is LinkState.CONNECTED and LinkState.DISCONNECTED in d.states
    assert d.states[-1] is LinkState.CONNECTED


def test_socket_url_server_restart(opened) -> None:
    port = free_port()
    server = socket.create_server(("127.0.0.1", port))
    src = opened(f"socket://127.0.0.1:{port}", backoff=(0.05, 0.2))
    conn, _ = server.accept()
    assert src.connected.wait(5)
    conn.sendall(b"seq=10 ne=1e16\n")
    d = drain(src, lambda d: d.readings >= 1)
    conn.close()
    server.close()                                              # the device server goes away
    drain(src, lambda d: src.status().state is LinkState.DISCONNECTED, into=d)
    assert src.status().state is LinkState.DISCONNECTED
    server = socket.create_server(("127.0.0.1", port))          # and returns on the same port
    server.settimeout(10)
    conn, _ = server.accept()
    assert src.connected.wait(5)
    conn.sendall(b"seq=11 ne=2e16\r\n")
    drain(src, lambda d: d.readings >= 2, into=d)
    assert d.seqs().tolist() == [10, 11]
    conn.close()
    server.close()


def test_loop_url_round_trip(opened) -> None:
    src = opened("loop://")
    assert src.connected.wait(5)
    src.port.write(b"ne=1e16 Te=2\nne=2e16\n")
    d = drain(src, lambda d: d.readings >= 2)
    assert d.column("ne").tolist() == [1e16, 2e16] and np.isnan(d.column("Te")[1])
    assert all(not b.t_from_source for b in d.batches) and src.name == "loop://"


def test_missing_port_is_retried_not_fatal(short_tmp: Path, opened) -> None:
    src = opened(str(short_tmp / "ttyNOPE"), backoff=(0.05, 0.1))
    assert wait_until(lambda: src.status().retries >= 2, timeout=5)
    st = src.status()
    assert st.state is LinkState.DISCONNECTED and "retry" in st.message
    assert src.poll(0.01).batches == []


def test_unknown_url_scheme_is_fatal(opened) -> None:
    src = opened("nosuch://device")
    assert wait_until(lambda: src.status().state is LinkState.FAILED, timeout=5)
    with pytest.raises(FatalSourceError, match="nosuch"):
        src.poll(0.01)


def test_serial_spec() -> None:
    assert parse_serial_spec("serial:/dev/ttyUSB0@921600") == ("/dev/ttyUSB0", 921600)
    assert parse_serial_spec("serial:/dev/ttyUSB0") == ("/dev/ttyUSB0", 115200)
    assert parse_serial_spec("socket://127.0.0.1:7000") == ("socket://127.0.0.1:7000", 115200)
    with pytest.raises(FatalSourceError):
        parse_serial_spec("serial:/dev/ttyUSB0@fast")
    s = SerialSource("serial:/dev/ttyS9@9600")
    assert (s.url, s.baud) == ("/dev/ttyS9", 9600)


_chunk = st.one_of(st.binary(max_size=50), st.sampled_from([b"\n", b"\r\n", b"\r", b"ne=3\r", b"ne=1\n", b"seq=2 ne=", b"# c\n", b"=\n"]))


@settings(max_examples=150, suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(st.lists(_chunk, min_size=1, max_size=10))
def test_fuzz_bytes_through_loop_url_are_all_accounted(opened, chunks: list[bytes]) -> None:
    """Arbitrary bytes through a real pyserial loop:// port: every line ends up a reading, a rejection or skipped."""
    src = _FUZZ.get(id(opened))                           # one port for all examples of this run
    if src is None:
        src = _FUZZ[id(opened)] = opened("loop://", max_line=64)
        assert src.connected.wait(5)
    data = b"".join(chunks) + b"\nzz_sentinel=1\n"        # the leading LF closes any open fuzz line
    skipped0 = src.skipped
    for c in (data[i:i + 17] for i in range(0, len(data), 17)):
        src.port.write(c)
    d = drain(src, lambda d: any("zz_sentinel" in b.columns for b in d.batches), timeout=10)
    assert any("zz_sentinel" in b.columns for b in d.batches)
    lines = len(re.findall(rb"\r\n|\r|\n", data))         # LF, CR and CRLF each end one line
    assert d.readings + len(d.rejections) + (src.skipped - skipped0) == lines
