"""Predictive warning from the fitted slope, checked against an analytic ramp."""

from __future__ import annotations

import numpy as np
import pytest

from alarm_helpers import engine, frame

DT = 0.01


def _run(te: np.ndarray, t: np.ndarray, limit: dict, **opts: float) -> list:
    eng = engine([{"name": "hot", "quantity": "Te", **limit}], {"predict_step": 0.1, "predict_window": 1.0, **opts})
    return eng.process(frame(t, Te=te))


def test_rising_ramp_warns_horizon_ahead_with_the_analytic_crossing_time() -> None:
    # Te = 1 + 0.5 t eV reaches high = 6 eV at T = (6 - 1) / 0.5 = 10 s; horizon 3 s -> warn at t = 7 s
    t = np.arange(0, 1500) * DT
    events = _run(1.0 + 0.5 * t, t, {"high": 6.0, "predict_within": 3.0})
    pred = [e for e in events if e.alarm == "hot:predict" and e.time > 0]
    assert pred[0].state.value == "unacknowledged" and pred[0].kind == "predictive"
    assert 7.0 - 1e-9 <= pred[0].time <= 7.1 + 1e-9          # first grid point with time-to-limit <= 3 s
    assert pred[0].predicted_time == pytest.approx(10.0, abs=1e-6)
    assert pred[0].priority.value == "advisory"
    # once the fit reaches the limit the warning returns and the limit alarm takes over
    assert pred[1].state.value == "returned_unacknowledged" and pred[1].time == pytest.approx(10.0, abs=0.11)
    raised = [e for e in events if e.alarm == "hot" and e.state.value == "unacknowledged"]
    assert raised[0].time == pytest.approx(10.01, abs=1e-9)


def test_falling_ramp_warns_before_the_low_limit() -> None:
    # Te = 9 - 2 t reaches low = 3 at T = 3 s; horizon 1 s -> warn at about 2 s, predicted 3 s
    t = np.arange(0, 400) * DT
    events = _run(9.0 - 2.0 * t, t, {"low": 3.0, "predict_within": 1.0})
    warn = next(e for e in events if e.alarm == "hot:predict" and e.state.value == "unacknowledged")
    assert 2.0 - 1e-9 <= warn.time <= 2.1 + 1e-9
    assert warn.predicted_time == pytest.approx(3.0, abs=1e-6) and warn.limit == 3.0


def test_flat_or_receding_signal_never_warns() -> None:
    t = np.arange(0, 1000) * DT
    events = _run(5.0 - 0.1 * t, t, {"high": 6.0, "predict_within": 100.0})
    assert not [e for e in events if e.alarm == "hot:predict" and e.state.value == "unacknowledged"]


def test_warning_returns_when_the_ramp_turns_back() -> None:
    # rises at 0.5/s until t = 5 (Te = 3.5), then falls: the 1 s fit turns negative soon after t = 5.5
    t = np.arange(0, 1000) * DT
    te = np.where(t < 5.0, 1.0 + 0.5 * t, 3.5 - 0.5 * (t - 5.0))
    events = [e for e in _run(te, t, {"high": 6.0, "predict_within": 10.0}) if e.alarm == "hot:predict"]
    states = [(e.state.value, round(e.time, 6)) for e in events if e.time > 0]
    assert states[0][0] == "unacknowledged" and states[0][1] <= 1.1
    assert states[1][0] == "returned_unacknowledged" and 5.0 < states[1][1] <= 5.6
    assert events[-2].predicted_time is not None


def test_noisy_ramp_predicts_within_the_noise() -> None:
    rng = np.random.default_rng(7)
    t = np.arange(0, 1500) * DT
    te = 1.0 + 0.5 * t + rng.normal(0, 0.02, len(t))
    warn = next(e for e in _run(te, t, {"high": 6.0, "predict_within": 3.0})
                if e.alarm == "hot:predict" and e.state.value == "unacknowledged")
    assert warn.predicted_time == pytest.approx(10.0, abs=0.3)
    assert 6.5 <= warn.time <= 7.5
