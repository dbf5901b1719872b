"""`regime simulate` as a real subprocess publishing to ZmqSource: formats, seq, loopback policy, Ctrl-C, CURVE."""

from __future__ import annotations

import signal
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import zmq.auth

from adapter_helpers import drain, free_port
from adapters.simulated import generate
from adapters.zmq_stream import ZmqSource

REGIME = [sys.executable, "-m", "monitor"]


def _start(*args: str) -> subprocess.Popen:
    return subprocess.Popen([*REGIME, "simulate", *args], stdout=subprocess.PIPE, stderr=subprocess.PIPE)


def _finish(proc: subprocess.Popen, timeout: float = 20) -> tuple[int, str]:
    try:
        _, err = proc.communicate(timeout=timeout)
    except subprocess.TimeoutExpired:
        proc.kill()
        _, err = proc.communicate()
        raise
    return proc.returncode, err.decode()


@pytest.mark.parametrize("fmt, batch", [("json", None), ("text", "7"), ("binary", "250")])
def test_every_reading_arrives_with_seq(fmt: str, batch: str | None, ctx, short_tmp: Path) -> None:
    ep = f"ipc://{short_tmp}/sim.ipc" if fmt == "text" else f"tcp://127.0.0.1:{free_port()}"
    n = 3000
    args = [ep, "--scenario", "excursion", "--format", fmt, "--count", str(n), "--speed", "max",
            "--wait-subscribers", "1", "--wait-timeout", "15", "--seed", "4"]
    proc = _start(*args, *(["--batch", batch] if batch else []))
    src = ZmqSource(ep, context=ctx)
    src.open()
    try:
        d = drain(src, lambda d: d.readings >= n, timeout=30)
    finally:
        src.close()
    rc, err = _finish(proc)
    assert rc == 0, err
    assert f"published {n} readings" in err
    assert d.rejections == [] and np.array_equal(d.seqs(), np.arange(n))
    expected = generate("excursion", seed=4, rate=1000.0, t0=0.0, t1=3.0)
    for key in ("ne", "Te", "p0", "B"):
        assert np.array_equal(d.column(key), expected.columns[key], equal_nan=True), key
    assert np.allclose(np.diff(np.concatenate([b.t for b in d.batches])), 1e-3, atol=1e-6)   # epoch ~1.8e9 s: float64 steps of 2.4e-7 s
    if fmt == "binary":
        assert len(d.batches) <= n // 250


@pytest.mark.parametrize("endpoint", ["tcp://0.0.0.0:5599", "tcp://*:5599", "tcp://10.0.0.1:5599"])
def test_non_loopback_bind_is_refused_without_allow_remote(endpoint: str) -> None:
    rc, err = _finish(_start(endpoint, "--count", "1"))
    assert rc == 2 and "--allow-remote" in err


@pytest.mark.parametrize("bad", [["--speed", "0"], ["--speed", "fast"], ["--rate", "-5"], ["--batch", "0"],
                                 ["--curve-secret", "x"]])
def test_bad_usage_exits_2(bad: list[str]) -> None:
    rc, err = _finish(_start("tcp://127.0.0.1:5598", *bad))
    assert rc == 2 and err


def test_ctrl_c_stops_cleanly_with_a_summary(ctx) -> None:
    ep = f"tcp://127.0.0.1:{free_port()}"
    proc = _start(ep, "--scenario", "steady", "--loop", "--rate", "500")
    src = ZmqSource(ep, context=ctx)
    src.open()
    try:
        d = drain(src, lambda d: d.readings >= 50, timeout=20)
    finally:
        src.close()
    assert d.readings >= 50
    proc.send_signal(signal.SIGINT)
    rc, err = _finish(proc, timeout=10)
    assert rc == 0, err
    assert "published" in err and "Traceback" not in err


def test_curve_publisher_serves_allowed_clients(ctx, short_tmp: Path) -> None:
    keys, allowed = short_tmp / "keys", short_tmp / "allowed"
    keys.mkdir()
    allowed.mkdir()
    server_pub, server_sec = zmq.auth.create_certificates(keys, "server")
    client_pub, client_sec = zmq.auth.create_certificates(keys, "client")
    Path(client_pub).rename(allowed / "client.key")
    ep = f"tcp://127.0.0.1:{free_port()}"
    proc = _start(ep, "--count", "500", "--speed", "max", "--wait-subscribers", "1", "--wait-timeout", "15",
                  "--curve-secret", str(server_sec), "--curve-clients", str(allowed), "--scenario", "steady")
    src = ZmqSource(ep, context=ctx, curve=(server_pub, client_sec))
    src.open()
    try:
        d = drain(src, lambda d: d.readings >= 500, timeout=30)
    finally:
        src.close()
    rc, err = _finish(proc)
    assert rc == 0, err
    assert np.array_equal(d.seqs(), np.arange(500))
