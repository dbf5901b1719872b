"""ZmqSource on real sockets: tcp on 127.0.0.1 and ipc:// in a temporary directory, restarts, limits, CURVE."""

from __future__ import annotations

import json
import time
from pathlib import Path

import numpy as np
import pytest
import zmq
import zmq.auth
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from zmq.auth.thread import ThreadAuthenticator

from adapter_helpers import Drained, drain, free_port, wait_until
from adapters.base import FatalSourceError, LinkState
from adapters.batch import Rejection
from adapters.simulated import generate
from adapters.zmq_stream import ZmqSource, is_loopback_endpoint
from monitor.commands.simulate import encode_binary, encode_json, encode_text


def _endpoint(kind: str, short_tmp: Path) -> str:
    return f"tcp://127.0.0.1:{free_port()}" if kind == "tcp" else f"ipc://{short_tmp}/feed.ipc"


def _pub(ctx: zmq.Context, endpoint: str, sndhwm: int = 0) -> zmq.Socket:
    s = ctx.socket(zmq.XPUB)
    s.setsockopt(zmq.LINGER, 0)
    s.setsockopt(zmq.XPUB_VERBOSE, 1)
    s.setsockopt(zmq.SNDHWM, sndhwm)
    s.bind(endpoint)
    return s


def _await_subscriber(pub: zmq.Socket, src: ZmqSource, into: Drained | None = None, timeout: float = 5.0) -> None:
    """Poll the source (so its side runs) until the XPUB sees the subscription."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if into is not None:
            into.add(src.poll(0.02))
        else:
            src.poll(0.02)
        if pub.poll(0, zmq.POLLIN):
            if pub.recv()[:1] == b"\x01":
                return
    raise AssertionError("no subscription arrived")


@pytest.fixture
def source_factory(ctx: zmq.Context):
    made: list[ZmqSource] = []

    def make(endpoint: str, **kw) -> ZmqSource:
        s = ZmqSource(endpoint, context=ctx, **kw)
        s.open()
        made.append(s)
        return s

    yield make
    for s in made:
        s.close()


@pytest.mark.parametrize("kind", ["tcp", "ipc"])
def test_three_formats_arrive_with_seq(kind: str, ctx, short_tmp, source_factory) -> None:
    ep = _endpoint(kind, short_tmp)
    pub = _pub(ctx, ep)
    src = source_factory(ep)
    _await_subscriber(pub, src)
    sim = generate("steady", seed=1, rate=1000.0, t0=0.0, t1=0.3)          # 300 readings, seq 0..299
    first, second, third = (sim_slice(sim, 0, 100), sim_slice(sim, 100, 200), sim_slice(sim, 200, 300))
    for frame in encode_json(first):
        pub.send(frame)
    pub.send(b"\n".join(encode_text(second)))
    pub.send_multipart(encode_binary(third))
    d = drain(src, lambda d: d.readings >= 300, timeout=10)
    assert d.rejections == []
    assert d.seqs().tolist() == list(range(300))
    assert np.allclose(d.column("ne"), sim.columns["ne"])
    assert src.status().state is LinkState.CONNECTED
    src.close()
    assert src.poll(0.01).status.state is LinkState.ENDED       # closed stays closed


def sim_slice(b, lo: int, hi: int):
    from adapters.batch import Batch

    return Batch(source=b.source, t=b.t[lo:hi], columns={k: v[lo:hi] for k, v in b.columns.items()}, seq=b.seq[lo:hi])


def test_bad_messages_are_counted_by_reason(ctx, short_tmp, source_factory) -> None:
    ep = _endpoint("tcp", short_tmp)
    pub = _pub(ctx, ep)
    src = source_factory(ep, max_frame=10_000)
    _await_subscriber(pub, src)
    pub.send(b'{"ne": 1e16, "seq": 0}')
    pub.send(b"{not json")
    pub.send(b"ne=oops seq=1")
    pub.send_multipart([b"a", b"b", b"c"])
    pub.send_multipart([b'{"fields": ["ne"], "n": 2, "dtype": "<f8"}', b"\x00" * 8])
    pub.send(b"x" * 20_000)
    pub.send_multipart([json.dumps({"fields": ["ne"], "n": 2000, "dtype": "<f8"}).encode(), np.zeros(2000).tobytes()])
    pub.send(b'{"ne": 2e16, "seq": 7}')
    d = drain(src, lambda d: d.readings + len(d.rejections) >= 8, timeout=10)
    assert sorted(d.reasons()) == sorted(["bad_json", "bad_value", "bad_frame_count", "size_mismatch",
                                          "oversized", "oversized"])
    assert d.seqs().tolist() == [0, 7]
    assert all(len(r.raw) <= 4096 + 1 + 4096 for r in d.rejections)


@pytest.mark.parametrize("kind", ["tcp", "ipc"])
def test_publisher_restart_is_survived(kind: str, ctx, short_tmp, source_factory) -> None:
    ep = _endpoint(kind, short_tmp)
    pub = _pub(ctx, ep)
    src = source_factory(ep)
    d = Drained()
    _await_subscriber(pub, src, d)
    pub.send(b"seq=0 ne=1e16")
    drain(src, lambda d: d.readings >= 1, into=d)
    pub.close(0)                                          # the publisher goes away ...
    drain(src, lambda d: src.status().state is LinkState.DISCONNECTED, into=d, timeout=10)
    assert src.status().state is LinkState.DISCONNECTED
    pub = _pub(ctx, ep)                                   # ... and comes back on the same address
    _await_subscriber(pub, src, d, timeout=10)
    pub.send(b"seq=1 ne=2e16")
    drain(src, lambda d: d.readings >= 2, into=d)
    assert d.seqs().tolist() == [0, 1]
    assert d.states[-1] is LinkState.CONNECTED and LinkState.DISCONNECTED in d.states
    assert src.status().retries >= 1
    pub.close(0)


@pytest.mark.parametrize("rcvhwm, lossless", [(None, True), (1000, False)])
def test_subscriber_stall_is_absorbed_by_the_receive_queue(rcvhwm, lossless, ctx, short_tmp, source_factory) -> None:
    """20,000 JSON readings at 25,000/s over ipc from a publisher with ZeroMQ's default send queue,
    while the subscriber does not read (a 0.8 s stall): our default receive queue keeps them all;
    ZeroMQ's default (1000) drops many (about 1,000 + 1,000 queued + the kernel's socket buffer survive).
    In the lossless case the publisher's own queue is unbounded: on a loaded machine its I/O thread can
    fall behind and drop at the sender, which is not what this test is about."""
    ep = _endpoint("ipc", short_tmp)
    pub = _pub(ctx, ep, sndhwm=0 if lossless else 1000)
    src = source_factory(ep, **({} if rcvhwm is None else {"rcvhwm": rcvhwm}))
    _await_subscriber(pub, src)
    n, rate = 20_000, 25_000.0
    t0, i = time.perf_counter(), 0
    while i < n:                                       # pacing the sender, not synchronising
        due = min(n, int((time.perf_counter() - t0) * rate) + 1)
        while i < due:
            pub.send(b'{"seq": %d, "ne": 5e16}' % i)
            i += 1
        time.sleep(0.002)
    d = drain(src, lambda d: d.readings >= n, timeout=10 if lossless else 2)
    assert d.rejections == []
    if lossless:
        assert d.readings == n and np.array_equal(d.seqs(), np.arange(n))
    else:
        assert d.readings < n          # the seq gap the pipeline counts as lost


def test_non_loopback_endpoint_needs_permission() -> None:
    assert is_loopback_endpoint("tcp://127.0.0.1:5") and is_loopback_endpoint("tcp://[::1]:5")
    assert is_loopback_endpoint("tcp://localhost:5") and is_loopback_endpoint("ipc:///tmp/x")
    assert not is_loopback_endpoint("tcp://10.1.2.3:5") and not is_loopback_endpoint("tcp://lab-daq:5")
    with pytest.raises(FatalSourceError, match="allow_remote"):
        ZmqSource("tcp://10.1.2.3:5555")
    ZmqSource("tcp://10.1.2.3:5555", allow_remote=True)          # constructing connects nothing
    with pytest.raises(FatalSourceError):
        ZmqSource("udp://127.0.0.1:5")


# ----------------------------------------------------------------------------- CURVE

@pytest.fixture
def certs(short_tmp: Path) -> dict[str, Path]:
    keys = short_tmp / "keys"
    allowed = short_tmp / "allowed"
    keys.mkdir()
    allowed.mkdir()
    server_pub, server_sec = zmq.auth.create_certificates(keys, "server")
    client_pub, client_sec = zmq.auth.create_certificates(keys, "client")
    _, stranger_sec = zmq.auth.create_certificates(keys, "stranger")
    Path(client_pub).rename(allowed / "client.key")
    return {"server_pub": Path(server_pub), "server_sec": Path(server_sec), "client_sec": Path(client_sec),
            "stranger_sec": Path(stranger_sec), "allowed": allowed}


def _curve_pub(ctx: zmq.Context, ep: str, certs: dict[str, Path]) -> tuple[zmq.Socket, ThreadAuthenticator]:
    auth = ThreadAuthenticator(ctx)
    auth.start()
    auth.configure_curve(domain="*", location=str(certs["allowed"]))
    pub = ctx.socket(zmq.XPUB)
    pub.setsockopt(zmq.LINGER, 0)
    pub.setsockopt(zmq.XPUB_VERBOSE, 1)
    pub.curve_server = True
    pub.curve_publickey, pub.curve_secretkey = zmq.auth.load_certificate(certs["server_sec"])
    pub.bind(ep)
    return pub, auth


def test_curve_client_with_allowed_key_receives(ctx, short_tmp, certs, source_factory) -> None:
    ep = _endpoint("tcp", short_tmp)
    pub, auth = _curve_pub(ctx, ep, certs)
    try:
        src = source_factory(ep, curve=(certs["server_pub"], certs["client_sec"]))
        _await_subscriber(pub, src)
        pub.send(b'{"seq": 1, "ne": 4e16}')
        d = drain(src, lambda d: d.readings >= 1)
        assert d.seqs().tolist() == [1]
        assert "CURVE" in src.status().message
    finally:
        pub.close(0)
        auth.stop()


def test_curve_client_with_unknown_key_is_refused_and_says_so(ctx, short_tmp, certs, source_factory) -> None:
    ep = _endpoint("tcp", short_tmp)
    pub, auth = _curve_pub(ctx, ep, certs)
    try:
        src = source_factory(ep, curve=(certs["server_pub"], certs["stranger_sec"]))
        d = Drained()
        ok = wait_until(lambda: (d.add(src.poll(0.05)), "handshake" in src.status().message)[1], timeout=10)
        assert ok, src.status()
        assert src.status().state is not LinkState.CONNECTED
        for _ in range(20):
            pub.send(b'{"seq": 1, "ne": 4e16}')
        d = drain(src, lambda d: False, timeout=0.5, into=d)
        assert d.readings == 0
    finally:
        pub.close(0)
        auth.stop()


def test_curve_bad_key_files_are_fatal(ctx, short_tmp, certs) -> None:
    with pytest.raises(FatalSourceError, match="key"):
        ZmqSource("tcp://127.0.0.1:1", curve=(certs["server_pub"], short_tmp / "missing.key_secret"), context=ctx).open()
    with pytest.raises(FatalSourceError, match="secret"):
        ZmqSource("tcp://127.0.0.1:1", curve=(certs["server_pub"], certs["server_pub"]), context=ctx).open()


# ----------------------------------------------------------------------------- fuzz through a real socket

_PAIR: dict[str, object] = {}


def _fuzz_pair() -> tuple[zmq.Socket, ZmqSource]:
    """One publisher/subscriber pair over ipc, shared by all fuzz examples (closed at interpreter exit)."""
    if not _PAIR:
        import atexit
        import tempfile

        d = tempfile.mkdtemp(prefix="rgmf")
        ctx = zmq.Context()
        ep = f"ipc://{d}/fuzz.ipc"
        pub = _pub(ctx, ep)
        src = ZmqSource(ep, context=ctx, max_frame=4096)
        src.open()
        _await_subscriber(pub, src)
        _PAIR.update(pub=pub, src=src, n=0)
        import shutil

        atexit.register(lambda: (src.close(), pub.close(0), ctx.term(), shutil.rmtree(d, ignore_errors=True)))
    return _PAIR["pub"], _PAIR["src"]  # type: ignore[return-value]


def _expected(parts: list[bytes]) -> int:
    """Readings + rejections the pure parsers make of one message (the adapter must match it)."""
    from adapters.parsing import parse_binary_batch, parse_json_frames, parse_text_lines

    if len(parts) == 2:
        r = parse_binary_batch(parts[0], parts[1], "x", 0.0, max_frame=4096)
        return len(r) if not isinstance(r, Rejection) else 1
    if len(parts) != 1:
        return 1
    f = parts[0]
    if len(f) > 4096:
        return 1
    if f.lstrip()[:1] == b"{":
        p = parse_json_frames([f], "x", 0.0, max_frame=4096)
    else:
        from adapters.framing import split_lines

        p = parse_text_lines(split_lines(f), "x", 0.0)      # LF, CR or CRLF line ends
    return p.readings + len(p.rejections)


_part = st.one_of(st.binary(max_size=60), st.sampled_from([b'{"ne": 1}', b"ne=2 Te=3", b"\n", b"{", b"seq=1 ne=x",
                                                            b'{"fields": ["ne"], "n": 1}', b"\x00" * 8]))


@settings(max_examples=300, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.lists(_part, min_size=1, max_size=3), min_size=1, max_size=4))
def test_fuzz_messages_through_a_real_socket_are_all_accounted(msgs: list[list[bytes]]) -> None:
    pub, src = _fuzz_pair()
    _PAIR["n"] = int(_PAIR["n"]) + 1  # type: ignore[call-overload]
    mark = int(_PAIR["n"])  # type: ignore[call-overload]
    for m in msgs:
        pub.send_multipart(m)
    pub.send(b'{"seq": %d, "zz_sentinel": 1}' % mark)
    d = drain(src, lambda d: any(b.seq is not None and mark in b.seq.tolist() and "zz_sentinel" in b.columns
                                 for b in d.batches), timeout=10)
    sentinel_seen = sum(int(np.isfinite(b.columns["zz_sentinel"]).sum()) for b in d.batches if "zz_sentinel" in b.columns)
    assert sentinel_seen >= 1
    assert d.readings - sentinel_seen + len(d.rejections) == sum(_expected(m) for m in msgs)
