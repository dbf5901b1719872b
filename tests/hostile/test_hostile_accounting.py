"""accepted + rejected + lost = sent, whatever mix of good and hostile frames arrives (hypothesis, bounded).

Frames go through the real parsers (and, in the last test, a real ZeroMQ socket and ZmqSource) and
the current pipeline counts them. A hostile frame here keeps its seq (a value that is not a number, a
key twice, an impossible time, a cut JSON frame, a binary batch cut short, too big or with one bad
time): the pipeline can only tell a refused reading from a lost one by the seq the adapter read. Pure
garbage frames (no reading, no seq) are extra frames, each counted once as rejected.
"""

from __future__ import annotations

import json
import time

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from adapters.batch import Batch, Rejection
from adapters.framing import split_lines
from adapters.parsing import parse_binary_batch, parse_json_frames, parse_text_lines
from monitor.config import Config
from monitor.pipeline import Pipeline

SRC = "probe"
T0 = 1000.0
MAX_FRAME = 4096                 # small, so that "too big" is cheap
Message = list[bytes]            # one ZeroMQ message: 1 part (text or JSON) or 2 (binary)

_TEXT_BAD = [b"seq=%d ne=abc", b"seq=%d ne=nan Te=3", b"seq=%d ne=1e17 ne=2e17", b"t=1e300 seq=%d ne=1e17",
             b"seq=%d ne"]
_JSON_BAD = [b'{"seq": %d, "ne": "x"}', b'{"seq": %d, "ne": -1, "ne": 5e16}', b'{"seq": %d, "t": 1e300, "ne": 1e17}',
             b'{"seq": %d, "ne": ']
_GARBAGE = [b"\xff\xfe", b"{", b"[]", b"x=1=2", b'{"ne": "x"}', b"ne=abc"]


def _t(k: int) -> float:
    return T0 + k * 1e-3


def _good(kind: str, k: int) -> Message:
    if kind == "text":
        return [b"t=%r seq=%d ne=1e17 Te=3" % (_t(k), k)]
    return [json.dumps({"t": _t(k), "seq": k, "ne": 1e17, "Te": 3.0}).encode()]


def _binary(lo: int, m: int, harm: str) -> Message:
    t = np.array([_t(k) for k in range(lo, lo + m)])
    if harm == "bad_time":
        t[m // 2] = 1e300
    payload = np.stack([t, np.full(m, 1e17), np.full(m, 3.0)]).astype("<f8").tobytes()
    if harm == "cut":
        payload = payload[: len(payload) // 2 + 3]
    elif harm == "big":
        payload = payload + b"\0" * MAX_FRAME
    return [json.dumps({"fields": ["t", "ne", "Te"], "n": m, "seq": lo}).encode(), payload]


@st.composite
def streams(draw: st.DrawFn) -> tuple[list[Message], int]:
    """Messages in arrival order and how many readings and garbage frames were sent."""
    msgs: list[Message] = [_good("text", 0)]       # the first one arrives: it sets where seq starts
    k, sent = 1, 0
    for _ in range(draw(st.integers(1, 30))):
        what = draw(st.sampled_from(["text", "json", "text_bad", "json_bad", "binary", "binary_bad", "garbage",
                                     "dropped"]))
        if what in ("text", "json"):
            msgs.append(_good(what, k))
            k += 1
        elif what == "text_bad":
            msgs.append([draw(st.sampled_from(_TEXT_BAD)) % k])
            k += 1
        elif what == "json_bad":
            msgs.append([draw(st.sampled_from(_JSON_BAD)) % k])
            k += 1
        elif what.startswith("binary"):
            m = draw(st.integers(1, 40))
            harm = draw(st.sampled_from(["cut", "big", "bad_time"])) if what == "binary_bad" else ""
            msgs.append(_binary(k, m, harm))
            k += m
        elif what == "garbage":
            msgs.append([draw(st.sampled_from(_GARBAGE))])
            sent += 1
        else:
            k += draw(st.integers(1, 5))            # sent, never arrived
    msgs.append(_good("json", k))                   # the last one arrives: a gap before it is seen
    return msgs, sent + k + 1


def _parse(msgs: list[Message]) -> tuple[list[Batch], list[Rejection]]:
    """The adapters' parsers on messages as the ZeroMQ source cuts them (one parser call per message)."""
    batches: list[Batch] = []
    rejections: list[Rejection] = []
    for m in msgs:
        if len(m) == 2:
            r = parse_binary_batch(m[0], m[1], SRC, 0.0, max_frame=MAX_FRAME)
            (rejections if isinstance(r, Rejection) else batches).append(r)  # type: ignore[arg-type]
            continue
        p = (parse_json_frames([m[0]], SRC, 0.0, max_frame=MAX_FRAME) if m[0].lstrip()[:1] == b"{"
             else parse_text_lines(split_lines(m[0]), SRC, 0.0))
        batches += p.batches
        rejections += p.rejections
    return batches, rejections


def _ledger(p: Pipeline) -> int:
    c = p.counts()[SRC]
    return c.accepted + sum(c.rejected.values()) + c.lost


@settings(max_examples=200, deadline=None)
@given(streams(), st.integers(1, 6))
def test_every_frame_is_accepted_rejected_or_lost(stream: tuple[list[Message], int], polls: int) -> None:
    msgs, sent = stream
    p = Pipeline(Config())
    cut = max(1, len(msgs) // polls)
    for lo in range(0, len(msgs), cut):               # a poll: its rejections, then its batches, as the session does
        batches, rejections = _parse(msgs[lo:lo + cut])
        p.reject(rejections)
        for b in batches:
            p.process(b)
    assert _ledger(p) == sent, p.counts()[SRC]


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(streams())
def test_the_same_through_a_real_socket(stream: tuple[list[Message], int]) -> None:
    import zmq

    from adapters.zmq_stream import ZmqSource

    msgs, sent = stream
    ctx = zmq.Context()
    pub = ctx.socket(zmq.XPUB)
    pub.setsockopt(zmq.LINGER, 0)
    pub.setsockopt(zmq.SNDHWM, 0)
    port = pub.bind_to_random_port("tcp://127.0.0.1")
    src = ZmqSource(f"tcp://127.0.0.1:{port}", context=ctx, name=SRC, max_frame=MAX_FRAME)
    p = Pipeline(Config())
    try:
        src.open()
        deadline = time.monotonic() + 5
        while not pub.poll(0, zmq.POLLIN):
            src.poll(0.02)
            assert time.monotonic() < deadline, "no subscription"
        pub.recv()
        for m in msgs:
            pub.send_multipart(m)
        deadline = time.monotonic() + 10
        while _ledger(p) < sent if SRC in p.counts() else True:
            polled = src.poll(0.05)
            p.reject(polled.rejections)
            for b in polled.batches:
                p.process(b)
            assert time.monotonic() < deadline, p.counts().get(SRC)
        assert _ledger(p) == sent, p.counts()[SRC]
    finally:
        src.close()
        pub.close(0)
        ctx.term()
