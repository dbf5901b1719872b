"""An implausible seq (a bit flip, a garbled number) is a refused reading, never a new baseline that
turns into millions of lost readings; a real renumbering is taken once the stream confirms it."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from monitor.config import Config
from monitor.pipeline import Pipeline
from monitor.pipeline.validate import CONFIRM, SEQ_JUMP
from pipeline_helpers import make_batch


def _sent(p: Pipeline) -> int:
    c = p.counts()["probe"]
    return c.accepted + sum(c.rejected.values()) + c.lost


def test_one_huge_seq_is_refused_and_loses_nothing() -> None:
    p = Pipeline(Config())
    p.process(make_batch(np.arange(10) * 0.01, seq=np.arange(10), ne=1e17))
    p.process(make_batch([0.1], seq=[10**15], ne=5e16))                      # the hostile frame
    p.process(make_batch(0.11 + np.arange(5) * 0.01, seq=10 + np.arange(5), ne=1e17))
    c = p.counts()["probe"]
    assert dict(c.rejected) == {"seq_jump": 1} and c.lost == 0 and c.accepted == 15
    assert p.restarts()["probe"] == 0 and _sent(p) == 16


def test_a_bit_flipped_seq_that_passes_the_value_checks_is_refused() -> None:
    p = Pipeline(Config())
    p.process(make_batch(np.arange(10) * 0.01, seq=np.arange(10), ne=1e17))
    p.process(make_batch([0.1, 0.11, 0.12], seq=[10, 11 + 2**40, 12], ne=1e17))
    c = p.counts()["probe"]
    # the garbled reading stands for seq 11: rejected, not also lost
    assert dict(c.rejected) == {"seq_jump": 1} and c.lost == 0 and c.accepted == 12
    # across batches: the flip ends one batch, its neighbour opens the next
    p.process(make_batch([0.13], seq=[13 + 2**40], ne=1e17))
    p.process(make_batch([0.14], seq=[14], ne=1e17))
    c = p.counts()["probe"]
    assert dict(c.rejected) == {"seq_jump": 2} and c.lost == 0 and _sent(p) == 15


def test_a_garbled_low_seq_is_not_a_restart() -> None:
    p = Pipeline(Config())
    p.process(make_batch(np.arange(5000) * 1e-3, seq=np.arange(5000), ne=1e17))
    p.process(make_batch([5.0, 5.001, 5.002], seq=[5000, 7, 5001], ne=1e17))   # 7: refused, back
    c = p.counts()["probe"]
    assert dict(c.rejected) == {"seq_backwards": 1} and c.lost == 0 and p.restarts()["probe"] == 0


def test_a_confirmed_renumbering_starts_over_across_batches() -> None:
    p = Pipeline(Config())
    p.process(make_batch(np.arange(10) * 0.01, seq=np.arange(10), ne=1e17))
    new = 10 + 5 * SEQ_JUMP
    for k in range(CONFIRM + 2):                       # one reading per batch: confirmed at the CONFIRM-th
        p.process(make_batch([0.2 + k * 0.01], seq=[new + k], ne=1e17))
    c = p.counts()["probe"]
    assert dict(c.rejected) == {"seq_jump": CONFIRM - 1}        # refused and kept until confirmed
    assert c.accepted == 10 + 3 and c.lost == 0 and p.restarts()["probe"] == 1


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.sampled_from(["good", "huge", "flip", "low", "gap"]), st.integers(1, 40)),
                min_size=1, max_size=30))
def test_accepted_rejected_and_lost_add_up_to_what_was_sent(plan) -> None:
    p = Pipeline(Config())
    p.process(make_batch([0.0], seq=[0], ne=1e17))     # the first seq sets the baseline
    seq, t, sent = 0, 0.0, 1
    for kind, n in plan:
        if kind == "huge":
            s = np.array([10**15 + seq])                   # an extra hostile reading
        elif kind == "flip":
            # the next reading with its seq garbled, then a good one (flips on CONFIRM consecutive
            # readings would be a stuck bit, read as a renumbering: test_a_confirmed_renumbering...)
            s = np.array([seq + 1 + 2**40, seq + 2])
            seq += 2
        elif kind == "low" and seq > 6000:
            s = np.array([seq - 5000])                     # an extra reading far back: refused
        else:
            if kind == "gap":
                seq += 7                                   # 7 readings never sent: lost
                sent += 7
            s = seq + 1 + np.arange(n)
            seq = int(s[-1])
        tt = t + 1e-3 * (1 + np.arange(len(s)))
        t = float(tt[-1])
        p.process(make_batch(tt, seq=s, ne=1e17))
        sent += len(s)
    assert _sent(p) == sent
