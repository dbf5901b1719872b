"""ProbeSweepSource (file and sim:probe) yields readings batches with sigmas and rejections by reason."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from adapters.base import LinkState
from monitor.diagnostics.probe_model import scenario_plasma, scenario_sweeps
from monitor.diagnostics.probe_source import COLUMNS, ProbeSweepSource
from monitor.diagnostics.probe_spec import ProbeSpec

DEMO = Path(__file__).resolve().parents[2] / "replay_data" / "probe_sweeps.csv"
SPEC = ProbeSpec(radius=5e-5, length=5e-3)


def _drain(src: ProbeSweepSource, polls: int = 1000) -> tuple[list, list]:   # type: ignore[type-arg]
    batches, rejections = [], []
    src.open()
    for _ in range(polls):
        got = src.poll(0.05)
        batches += got.batches
        rejections += got.rejections
        if src.status().state is LinkState.ENDED:
            break
    src.close()
    return batches, rejections


def test_file_source_as_fast_as_possible() -> None:
    batches, rejections = _drain(ProbeSweepSource(DEMO, probe=SPEC, speed=None))
    seq = np.concatenate([b.seq for b in batches])
    assert sorted(r.reason for r in rejections) == ["non_monotonic_bias", "not_finite", "saturated_rail",
                                                    "too_few_points"]
    assert len(seq) + len(rejections) == 48 and len(set(seq)) == len(seq)
    for b in batches:
        assert set(COLUMNS) <= set(b.columns) and set(COLUMNS) <= set(b.sigma)
        assert np.all(np.diff(b.t) > 0)
        assert np.all((b.sigma["Te"] > 0) & (b.sigma["Te"] < 0.1 * b.columns["Te"]))
    raw = next(r for r in rejections if r.reason == "saturated_rail").raw
    assert raw.startswith(b'{"sweep": 20')


def test_sim_probe_follows_the_scenario_plasma() -> None:
    batches, rejections = _drain(ProbeSweepSource(None, probe=SPEC, speed=None, rate=50.0, duration=4.0,
                                                  epoch=0.0))
    assert rejections == []
    t = np.concatenate([b.t for b in batches])
    te = np.concatenate([b.columns["Te"] for b in batches])
    ne = np.concatenate([b.columns["ne"] for b in batches])
    assert len(t) == 200
    ne_true, te_true, _ = scenario_plasma(t)
    assert np.median(np.abs(te / te_true - 1)) < 0.03          # our own model: self-consistency only
    assert np.median(np.abs(ne / ne_true - 1)) < 0.2


def test_scenario_noise_does_not_depend_on_chunking() -> None:
    whole = scenario_sweeps(0, 150, spec=SPEC, seed=3)
    parts = [scenario_sweeps(a, b, spec=SPEC, seed=3) for a, b in ((0, 40), (40, 100), (100, 150))]
    np.testing.assert_array_equal(whole[3], np.concatenate([p[3] for p in parts]))


def test_paced_source_hands_out_sweeps_in_time() -> None:
    src = ProbeSweepSource(None, probe=SPEC, speed=1.0, rate=100.0, duration=0.3, epoch=0.0)
    batches, _ = _drain(src)
    assert sum(len(b) for b in batches) == 30
    assert src.status().message.startswith("30 sweeps")


def test_a_session_runs_the_probe_readings_through_the_pipeline() -> None:
    """The real Session and Pipeline (no mocks): accepted sweeps become readings with derived quantities,
    rejected ones are counted by reason."""
    from monitor.session import Session

    session = Session(ProbeSweepSource(DEMO, probe=SPEC, speed=None), live=False)
    session.run(duration=60.0)
    snap = session.snapshot()
    counts = snap.counts[session.name]
    assert counts.accepted == 44
    assert dict(counts.rejected) == {"non_monotonic_bias": 1, "not_finite": 1, "saturated_rail": 1,
                                     "too_few_points": 1}
    value, sigma = snap.latest["debye_length"]
    assert 1e-5 < value < 1e-3 and sigma is not None and sigma > 0
    assert snap.latest["Te"][1] is not None and snap.latest["Te"][1] > 0
