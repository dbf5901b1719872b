"""A restarted clock is a counted restart, not a source refused for ever; a refused binary batch counts once.

Every number compared here is the test's own input (times, seq numbers, counts); no outside physical
value is checked in this module.
"""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from adapters.batch import Rejection
from adapters.parsing import parse_binary_batch
from monitor.commands.simulate import encode_binary
from monitor.config import Config
from monitor.pipeline import Pipeline
from monitor.pipeline.validate import CLOCK_RESTART
from pipeline_helpers import make_batch, split

EPOCH = 1.8e9          # an epoch-like data time, s


def received_everything(p: Pipeline, n: int, source: str = "probe") -> None:
    c = p.counts()[source]
    assert c.accepted + sum(c.rejected.values()) + c.lost == n, (c.accepted, dict(c.rejected), c.lost)


def test_a_clock_that_restarts_without_seq_is_a_restart_and_its_readings_are_accepted() -> None:
    old = EPOCH + np.arange(2000) * 1e-3
    rebooted = np.arange(1500) * 1e-3                     # the instrument's clock starts again near zero
    t = np.concatenate((old, rebooted))
    batch = make_batch(t, ne=1e17, Te=3.0)
    p = Pipeline(Config())
    frames = [p.process(b) for b in split(batch, [700, 1400, 2300, 3000])]    # the restart inside a batch
    c = p.counts()["probe"]
    assert c.accepted == 3500 and not c.rejected and c.lost == 0
    assert p.restarts()["probe"] == 1
    np.testing.assert_array_equal(np.concatenate([f.t for f in frames]), t)
    # the rolling statistics start over in the new clock: only its readings are in the window
    s = p.stats("probe")["ne"]
    assert 0 < s.n <= 1500
    # a second restart, far into the past (not to zero), is counted too
    p.process(make_batch(-1e6 + np.arange(10) * 1e-3, ne=1e17, Te=3.0))
    assert p.restarts()["probe"] == 2 and p.counts()["probe"].accepted == 3510
    received_everything(p, 3510)


def test_small_steps_back_are_still_refused_as_time_backwards_and_kept() -> None:
    t = np.array([100.0, 100.5, 100.1, 101.0, 101.0 - 0.9 * CLOCK_RESTART, 102.0])
    p = Pipeline(Config())
    processed = p.process_batch(make_batch(t, ne=1e17, Te=3.0))
    frame = processed.frame()
    c = p.counts()["probe"]
    assert dict(c.rejected) == {"time_backwards": 2} and c.accepted == 4
    assert p.restarts()["probe"] == 0
    np.testing.assert_array_equal(frame.t, [100.0, 100.5, 101.0, 102.0])
    assert [r.reason for r in processed.rejections] == ["time_backwards"] * 2
    received_everything(p, 6)


def test_a_refused_reading_with_a_wild_time_does_not_start_a_new_clock() -> None:
    # a reading refused for its value does not move the time reference, so it cannot make one either
    p = Pipeline(Config())
    p.process(make_batch([10.0, 1e12, 11.0, 12.0], ne=[1e17, -1.0, 1e17, 1e17], Te=3.0))
    assert p.restarts()["probe"] == 0 and p.counts()["probe"].accepted == 3
    # but an accepted wild future time no longer blocks the source for ever: the next reading restarts the clock
    p.process(make_batch([1e12, 13.0, 14.0], ne=1e17, Te=3.0))
    c = p.counts()["probe"]
    assert p.restarts()["probe"] == 1 and c.accepted == 6 and dict(c.rejected) == {"ne_not_positive": 1}


def test_a_seq_that_goes_on_through_a_restarted_clock_keeps_counting_gaps() -> None:
    b1 = make_batch(EPOCH + np.arange(100) * 1e-3, seq=np.arange(100), ne=1e17, Te=3.0)
    b2 = make_batch(np.arange(50) * 1e-3, seq=105 + np.arange(50), ne=1e17, Te=3.0)   # clock back, seq on
    b3 = make_batch([0.06, 0.07], seq=[155, 155], ne=1e17, Te=3.0)                    # a duplicate still refused
    p = Pipeline(Config())
    for b in (b1, b2, b3):
        p.process(b)
    c = p.counts()["probe"]
    assert p.restarts()["probe"] == 1
    assert c.accepted == 151 and c.lost == 5 and dict(c.rejected) == {"seq_duplicate": 1}
    received_everything(p, 152 + 5)


def test_readings_sent_again_with_old_seq_and_old_time_are_not_a_restart() -> None:
    # a logger replaying its buffer: seq and time both step back; accepting them would count them twice
    p = Pipeline(Config())
    p.process(make_batch(100.0 + np.arange(500) * 0.1, seq=np.arange(1, 501), ne=1e17, Te=3.0))
    p.process(make_batch(100.0 + np.arange(200, 300) * 0.1, seq=np.arange(201, 301), ne=1e17, Te=3.0))
    c = p.counts()["probe"]
    assert p.restarts()["probe"] == 0
    assert c.accepted == 500 and dict(c.rejected) == {"time_backwards": 100}     # time is judged first


def test_the_threshold_is_a_setting() -> None:
    t = np.array([0.0, 60.0, 1.0, 2.0])
    p = Pipeline(Config(), clock_restart=np.inf)            # never a clock restart: every step back refused
    p.process(make_batch(t, ne=1e17, Te=3.0))
    assert dict(p.counts()["probe"].rejected) == {"time_backwards": 2} and p.restarts()["probe"] == 0
    p = Pipeline(Config(), clock_restart=30.0)
    p.process(make_batch(t, ne=1e17, Te=3.0))
    assert not p.counts()["probe"].rejected and p.restarts()["probe"] == 1


def test_the_threshold_is_a_pipeline_config_key() -> None:
    # [pipeline] clock_restart in seconds or with a unit, "off" for never; the default is the module's.
    from monitor.config import ConfigError, parse_config

    assert parse_config({}, None).pipeline.clock_restart == CLOCK_RESTART
    t = np.array([0.0, 60.0, 1.0, 2.0])
    p = Pipeline(parse_config({"pipeline": {"clock_restart": "off"}}, None))
    p.process(make_batch(t, ne=1e17, Te=3.0))
    assert dict(p.counts()["probe"].rejected) == {"time_backwards": 2} and p.restarts()["probe"] == 0
    p = Pipeline(parse_config({"pipeline": {"clock_restart": "30s"}}, None))
    p.process(make_batch(t, ne=1e17, Te=3.0))
    assert not p.counts()["probe"].rejected and p.restarts()["probe"] == 1
    p = Pipeline(parse_config({"pipeline": {"clock_restart": "2min"}}, None))   # 59 s back: jitter at 120 s
    p.process(make_batch(t, ne=1e17, Te=3.0))
    assert dict(p.counts()["probe"].rejected) == {"time_backwards": 2}
    for bad in (0, -5, "fast", True):
        try:
            parse_config({"pipeline": {"clock_restart": bad}}, None)
        except ConfigError as exc:
            assert "clock_restart" in str(exc)
        else:
            raise AssertionError(f"clock_restart = {bad!r} was accepted")


@settings(max_examples=150, deadline=None)
@given(st.lists(st.tuples(st.sampled_from(["on", "jitter", "restart", "nan"]), st.floats(0.0, 5.0)),
                max_size=80),
       st.lists(st.integers(1, 80), max_size=4))
def test_every_reading_is_counted_once_and_the_cut_into_batches_does_not_matter(steps, cuts) -> None:
    t, now = [EPOCH], EPOCH
    want = {"accepted": 1, "time_backwards": 0, "time_not_finite": 0, "restarts": 0}
    for kind, x in steps:
        if kind == "on":
            now += x
            t.append(now)
            want["accepted"] += 1
        elif kind == "jitter":                             # less than CLOCK_RESTART back: refused
            t.append(now - x)
            want["accepted" if now - x >= now else "time_backwards"] += 1
        elif kind == "restart":                            # a new clock far back (to zero or before)
            now = max(now - 1e3 - 1e9 * x, 0.0) if now > 1e3 + CLOCK_RESTART else now - 1e3 - x
            t.append(now)
            want["accepted"] += 1
            want["restarts"] += 1
        else:
            t.append(np.nan)
            want["time_not_finite"] += 1
    batch = make_batch(np.array(t), ne=1e17, Te=3.0)
    whole = Pipeline(Config())
    fw = whole.process(batch)
    cut = Pipeline(Config())
    fc = [cut.process(b) for b in split(batch, sorted({c for c in cuts if c < len(t)}))]
    received_everything(whole, len(t))
    a, b = whole.counts()["probe"], cut.counts()["probe"]
    got = {"accepted": a.accepted, "time_backwards": a.rejected.get("time_backwards", 0),
           "time_not_finite": a.rejected.get("time_not_finite", 0), "restarts": whole.restarts()["probe"]}
    assert got == want
    assert (a.accepted, dict(a.rejected)) == (b.accepted, dict(b.rejected))
    assert whole.restarts() == cut.restarts()
    np.testing.assert_array_equal(fw.t, np.concatenate([f.t for f in fc]))
    # between restarts the accepted times never step back; each step back is a restart
    d = np.diff(fw.t)
    assert int((d < 0).sum()) == want["restarts"] and np.all(d[d < 0] < -CLOCK_RESTART)


# -- a refused binary batch --------------------------------------------------------------------------------

def _binary(seq0: int, n: int, t0: float) -> tuple[bytes, bytes]:
    return encode_binary(make_batch(t0 + np.arange(n) * 1e-3, seq=seq0 + np.arange(n), ne=1e17, Te=3.0))


def _feed(p: Pipeline, messages: list[tuple[bytes, bytes]]) -> None:
    """What the ZeroMQ source and the Session do with each two-part message."""
    for header, payload in messages:
        res = parse_binary_batch(header, payload, "probe", 0.0)
        if isinstance(res, Rejection):
            p.reject([res])
        else:
            p.process(res)


def test_a_refused_binary_batch_counts_its_readings_once() -> None:
    good1, bad, good2 = _binary(0, 1000, 0.0), _binary(1000, 1000, 1.0), _binary(2000, 1000, 2.0)
    cut = (bad[0], bad[1][:-8])                                    # one value short: size_mismatch
    p = Pipeline(Config())
    _feed(p, [good1, cut, good2])
    c = p.counts()["probe"]
    assert dict(c.rejected) == {"size_mismatch": 1000} and c.lost == 0 and c.accepted == 2000
    received_everything(p, 3000)
    assert len(p.rejected_samples) == 1                            # the frame is kept once, whole header


def test_a_binary_batch_whose_header_overstates_its_payload_counts_what_the_payload_held() -> None:
    # header says 9000 readings, the payload holds 1000, the next batch goes on at seq 2000:
    # 3000 readings were sent, so 3000 are accounted for (the header's n alone would say 11,000)
    good1, good2 = _binary(0, 1000, 0.0), _binary(2000, 1000, 2.0)
    header, payload = _binary(1000, 1000, 1.0)
    lying = (header.replace(b'"n": 1000', b'"n": 9000').replace(b'"n":1000', b'"n":9000'), payload)
    assert lying[0] != header
    p = Pipeline(Config())
    _feed(p, [good1, lying, good2])
    c = p.counts()["probe"]
    assert dict(c.rejected) == {"size_mismatch": 1000} and c.lost == 0 and c.accepted == 2000
    received_everything(p, 3000)


def test_a_refused_binary_batch_and_a_real_loss_are_told_apart() -> None:
    bad_dtype = (_binary(1000, 500, 1.0)[0].replace(b'"<f8"', b'"|O"'), _binary(1000, 500, 1.0)[1])
    p = Pipeline(Config())
    _feed(p, [_binary(0, 1000, 0.0), bad_dtype, _binary(1700, 300, 1.7)])    # 1500..1699 never arrived
    c = p.counts()["probe"]
    assert dict(c.rejected) == {"bad_dtype": 500} and c.lost == 200 and c.accepted == 1300
    received_everything(p, 2000)


def test_a_refused_binary_header_whose_count_cannot_be_trusted_stands_for_its_first_seq() -> None:
    header = b'{"fields": ["t", "ne"], "n": -3, "seq": 100}'
    p = Pipeline(Config())
    _feed(p, [_binary(0, 100, 0.0), (header, b"\x00" * 16), _binary(110, 10, 0.2)])
    c = p.counts()["probe"]
    # the frame is one refused reading at seq 100; 101..109 are missing by seq
    assert dict(c.rejected) == {"bad_binary_header": 1} and c.lost == 9 and c.accepted == 110
    received_everything(p, 120)


def test_refused_lines_and_frames_that_overlap_fill_each_gap_position_once() -> None:
    p = Pipeline(Config())
    p.process(make_batch([0.0], seq=[0], ne=1e17))
    # the fields the adapters fill: how many readings each stands for and the seq numbers it covered
    p.reject([Rejection("probe", "size_mismatch", b'{"fields": ["ne"], "n": 4, "seq": 1}\n\x00', 0.0,
                        count=4, seq_first=1, seq_last=4),
              Rejection("probe", "malformed", b"seq=3 ne=??", 0.0, seq_first=3, seq_last=3),   # inside the frame's span: sent twice
              Rejection("probe", "malformed", b"seq=6 ne=??", 0.0, seq_first=6, seq_last=6)])
    p.process(make_batch([1.0], seq=[8], ne=1e17))                          # 5 and 7 really lost
    c = p.counts()["probe"]
    assert dict(c.rejected) == {"size_mismatch": 4, "malformed": 2} and c.lost == 2
    assert len(p.ledger.of("probe").refused_seqs) == 0                       # settled spans are forgotten
