"""`regime simulate`: publish a simulated discharge on ZeroMQ (text, JSON or binary batches, with seq)."""

from __future__ import annotations

import argparse
import math
import signal
import sys
import threading
import time
from pathlib import Path
from typing import Any

from monitor.errors import EXIT_OK, EXIT_SOURCE, UsageError

__all__ = ["register", "run", "encode_json", "encode_text", "encode_binary", "check_bind_endpoint"]

_FIELDS = ("ne", "Te", "p0", "B")


# ----------------------------------------------------------------------------- encoders (our wire formats)

def _rows(batch: Any) -> tuple[list[float], list[int | None], list[list[tuple[str, float]]]]:
    """Per reading: the (key, value) pairs it carries (NaN columns left out)."""
    t: list[float] = batch.t.tolist()
    seq: list[int | None] = batch.seq.tolist() if batch.seq is not None else [None] * len(t)
    keys = [k for k in batch.columns]
    cols = [batch.columns[k].tolist() for k in keys]
    pairs = [[(k, v) for k, v in zip(keys, vals) if v == v] for vals in zip(*cols)] if cols else [[] for _ in t]
    return t, seq, pairs


def encode_json(batch: Any) -> list[bytes]:
    """One JSON object per reading: ``{"t": .., "seq": .., "ne": .., ...}`` (keys with NaN omitted)."""
    t, seq, pairs = _rows(batch)
    out = []
    for ti, si, pr in zip(t, seq, pairs):
        body = "".join(f',"{k}":{v!r}' for k, v in pr)
        head = f'{{"t":{ti!r}' + (f',"seq":{si}' if si is not None else "")
        out.append((head + body + "}").encode())
    return out


def encode_text(batch: Any) -> list[bytes]:
    """One ``t=.. seq=.. ne=.. Te=..`` line per reading (keys with NaN omitted), no line end."""
    t, seq, pairs = _rows(batch)
    return [(f"t={ti!r}" + (f" seq={si}" if si is not None else "") + "".join(f" {k}={v!r}" for k, v in pr)).encode()
            for ti, si, pr in zip(t, seq, pairs)]


def encode_binary(batch: Any, fields: tuple[str, ...] = _FIELDS) -> tuple[bytes, bytes]:
    """A binary batch: JSON header + one little-endian float64 column per field (t first)."""
    import json

    import numpy as np

    names = ("t",) + tuple(f for f in fields if f in batch.columns)
    cols = [batch.t] + [batch.columns[f] for f in names[1:]]
    header = {"fields": list(names), "n": len(batch), "dtype": "<f8"}
    if batch.seq is not None and len(batch):
        header["seq"] = int(batch.seq[0])
    payload = np.ascontiguousarray(np.stack(cols).astype("<f8")).tobytes()
    return json.dumps(header).encode(), payload


# ----------------------------------------------------------------------------- endpoint policy

def check_bind_endpoint(endpoint: str, allow_remote: bool) -> str:
    """Return the endpoint to bind, refusing non-loopback addresses unless allowed."""
    from adapters.zmq_stream import is_loopback_endpoint

    if endpoint.startswith("tcp://localhost:"):
        endpoint = "tcp://127.0.0.1:" + endpoint.rsplit(":", 1)[1]
    if not endpoint.startswith(("tcp://", "ipc://")):
        raise UsageError(f"{endpoint}: the endpoint must be tcp://HOST:PORT or ipc://PATH")
    if not is_loopback_endpoint(endpoint) and not allow_remote:
        raise UsageError(f"{endpoint}: binds off loopback; add --allow-remote to publish to other machines")
    return endpoint


# ----------------------------------------------------------------------------- command

def register(parser: argparse.ArgumentParser) -> None:
    from adapters.scenarios import SCENARIOS

    parser.add_argument("endpoint", help="where to bind: tcp://127.0.0.1:PORT (PORT may be *) or ipc://PATH")
    parser.add_argument("--scenario", default="demo", choices=sorted(SCENARIOS), help="scenario (default demo)")
    parser.add_argument("--rate", type=float, default=1000.0, help="density samples per second (default 1000)")
    parser.add_argument("--count", type=int, default=None, help="readings to publish (default: one pass of the scenario)")
    parser.add_argument("--format", choices=("json", "text", "binary"), default="json", help="wire format (default json)")
    parser.add_argument("--batch", type=int, default=None,
                        help="readings per message: text lines per frame, binary batch size (default 1; binary 1000)")
    parser.add_argument("--seed", type=int, default=0, help="noise seed (default 0)")
    parser.add_argument("--speed", default="1", help="x real time, or 'max' for as fast as possible (default 1)")
    parser.add_argument("--loop", action="store_true", help="repeat the scenario until --count or Ctrl-C")
    parser.add_argument("--allow-remote", action="store_true", help="allow binding to a non-loopback address")
    parser.add_argument("--wait-subscribers", type=int, default=0, metavar="N",
                        help="wait until N subscribers have joined before publishing")
    parser.add_argument("--wait-timeout", type=float, default=30.0, metavar="S", help="give up waiting after S s")
    parser.add_argument("--sndhwm", type=int, default=200_000, help="send queue in messages (default 200000)")
    parser.add_argument("--curve-secret", type=Path, default=None, metavar="FILE",
                        help="serve CURVE with this server .key_secret file (zmq.auth format)")
    parser.add_argument("--curve-clients", type=Path, default=None, metavar="DIR",
                        help="directory of allowed client public .key files (with --curve-secret)")
    parser.add_argument("--quiet", action="store_true", help="no progress on stderr")


def _speed(text: str) -> float | None:
    if text == "max":
        return None
    try:
        v = float(text)
    except ValueError:
        raise UsageError(f"--speed {text!r}: a positive number or 'max'") from None
    if not (v > 0 and math.isfinite(v)):
        raise UsageError(f"--speed {text!r}: a positive number or 'max'")
    return v


def _wait_subscribers(sock: Any, want: int, timeout: float, stop: threading.Event) -> bool:
    """XPUB (verbose): count subscribe messages until ``want`` subscribers joined."""
    import zmq

    joined = 0
    deadline = time.monotonic() + timeout
    while joined < want and not stop.is_set():
        left = deadline - time.monotonic()
        if left <= 0:
            return False
        if sock.poll(int(min(left, 0.2) * 1000), zmq.POLLIN):
            msg = sock.recv()
            joined += 1 if msg[:1] == b"\x01" else -1 if msg[:1] == b"\x00" else 0
    return joined >= want


def run(args: argparse.Namespace) -> int:
    import zmq

    from adapters.simulated import MAX_RATE, generate_samples, scenario_length

    endpoint = check_bind_endpoint(args.endpoint, args.allow_remote)
    speed = _speed(args.speed)
    if not (args.rate > 0 and math.isfinite(args.rate)):
        raise UsageError(f"--rate {args.rate}: must be positive")
    if args.rate > MAX_RATE:
        raise UsageError(f"--rate {args.rate:g}: over the simulator's ceiling of {MAX_RATE:g} per second")
    if args.sndhwm < 0:
        raise UsageError(f"--sndhwm {args.sndhwm}: a number of messages, 0 (no limit) or more")
    if not (args.wait_timeout >= 0 and math.isfinite(args.wait_timeout)) or args.wait_subscribers < 0:
        raise UsageError("--wait-subscribers and --wait-timeout must be 0 or more")
    batch_k = args.batch if args.batch is not None else (1000 if args.format == "binary" else 1)
    if batch_k < 1 or (args.count is not None and args.count < 0):
        raise UsageError("--batch must be >= 1 and --count >= 0")
    if (args.curve_secret is None) != (args.curve_clients is None):
        raise UsageError("--curve-secret and --curve-clients go together")
    total = args.count if args.count is not None else (None if args.loop else scenario_length(args.scenario, args.rate))
    if not args.loop and total is not None:
        total = min(total, scenario_length(args.scenario, args.rate))

    stop = threading.Event()
    previous = {s: signal.signal(s, lambda *_: stop.set()) for s in (signal.SIGINT, signal.SIGTERM)}
    ctx = zmq.Context()
    sock = ctx.socket(zmq.XPUB)
    auth = None
    sent = messages = 0
    try:
        sock.setsockopt(zmq.LINGER, 0)
        sock.setsockopt(zmq.XPUB_VERBOSE, 1)
        sock.setsockopt(zmq.SNDHWM, args.sndhwm)
        sock.setsockopt(zmq.SNDBUF, 4 * 1024 * 1024)
        if args.curve_secret is not None:
            from zmq.auth.thread import ThreadAuthenticator

            try:
                public, secret = zmq.auth.load_certificate(args.curve_secret)
            except (OSError, ValueError) as exc:
                raise UsageError(f"--curve-secret: {exc}") from exc
            if not secret:
                raise UsageError(f"{args.curve_secret}: holds no secret key")
            auth = ThreadAuthenticator(ctx)
            auth.start()
            auth.configure_curve(domain="*", location=str(args.curve_clients))
            sock.curve_server = True
            sock.curve_publickey, sock.curve_secretkey = public, secret
        try:
            sock.bind(endpoint)
        except zmq.ZMQError as exc:
            print(f"regime simulate: cannot bind {endpoint}: {exc}", file=sys.stderr)
            return EXIT_SOURCE
        last = sock.getsockopt(zmq.LAST_ENDPOINT)
        bound = last.decode() if isinstance(last, bytes) else str(last)
        if not args.quiet:
            print(f"regime simulate: {args.scenario} at {args.rate:g} Hz as {args.format} on {bound}", file=sys.stderr, flush=True)
        if args.wait_subscribers and not _wait_subscribers(sock, args.wait_subscribers, args.wait_timeout, stop):
            if not stop.is_set():
                print(f"regime simulate: fewer than {args.wait_subscribers} subscribers after {args.wait_timeout:g} s",
                      file=sys.stderr)
                return EXIT_SOURCE
        epoch = time.time()
        wall0 = time.monotonic()
        step = max(batch_k, int(args.rate * 0.02) if speed is not None else 10_000)
        end = total if total is not None else 2**62
        k = 0
        while k < end and not stop.is_set():
            if speed is None:
                k1 = min(k + step, end)
            else:
                due = int((time.monotonic() - wall0) * speed * args.rate)
                if due <= k:
                    stop.wait(max(0.0, (k + min(batch_k, end - k)) / (args.rate * speed) - (time.monotonic() - wall0)))
                    continue
                k1 = min(due, end, k + 10 * step)
                if k1 - k < batch_k and k1 < end:      # wait for a whole message's worth
                    stop.wait(max(0.0, (k + batch_k) / (args.rate * speed) - (time.monotonic() - wall0)))
                    continue
            b = generate_samples(args.scenario, args.seed, args.rate, k, k1, loop=args.loop)
            b = type(b)(source=b.source, t=b.t + epoch, columns=b.columns, seq=b.seq, t_from_source=True)
            if args.format == "binary":
                for lo in range(0, len(b), batch_k):
                    sock.send_multipart(encode_binary(b if len(b) <= batch_k else _slice(b, lo, lo + batch_k)), copy=False)
                    messages += 1
            elif args.format == "json":
                for frame in encode_json(b):
                    sock.send(frame)
                messages += len(b)
            else:
                lines = encode_text(b)
                for lo in range(0, len(lines), batch_k):
                    sock.send(b"\n".join(lines[lo:lo + batch_k]))
                    messages += 1
            sent += len(b)
            k = k1
        sock.setsockopt(zmq.LINGER, 5000 if not stop.is_set() else 500)
        if not args.quiet:
            took = time.monotonic() - wall0
            print(f"regime simulate: published {sent} readings in {messages} messages (seq 0..{max(sent - 1, 0)}) "
                  f"in {took:.2f} s", file=sys.stderr)
        return EXIT_OK
    finally:
        sock.close()
        if auth is not None:
            auth.stop()
        ctx.term()
        for s, h in previous.items():
            signal.signal(s, h)


def _slice(b: Any, lo: int, hi: int) -> Any:
    return type(b)(source=b.source, t=b.t[lo:hi], columns={k: v[lo:hi] for k, v in b.columns.items()},
                   seq=None if b.seq is None else b.seq[lo:hi], t_from_source=b.t_from_source)
