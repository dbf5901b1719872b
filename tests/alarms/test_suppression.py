"""Suppression by design: regime limits stop while the discharge is off and are evaluated afresh when it is on."""

from __future__ import annotations

import numpy as np

from alarm_helpers import OFF, ON, engine, frame, summary

DT = 0.01
T = np.arange(0, 1000) * DT


def _ne(off_from: float, on_from: float) -> np.ndarray:
    return np.where((T >= off_from - 1e-9) & (T < on_from - 1e-9), OFF, ON)


def test_alarm_suppressed_while_off_and_evaluated_again_when_on() -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0, "on_delay": 0.25}])
    te = np.where(T >= 1.0, 9.0, 3.0)          # beyond the limit from t = 1 s to the end
    events = eng.process(frame(T, Te=te, ne=_ne(3.0, 6.0)))
    assert summary(events, "hot") == [
        (0.0, "suppressed", "normal"), (1.25, "normal", "unacknowledged"),
        (3.0, "unacknowledged", "suppressed"),      # discharge off: suppressed by design
        (6.0, "suppressed", "normal"),              # on again: evaluation starts afresh ...
        (6.25, "normal", "unacknowledged")]         # ... with the full on-delay
    assert eng.discharge_on


def test_no_alarm_while_off_even_far_beyond_the_limit() -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0}])
    events = eng.process(frame(T, Te=np.full(len(T), 50.0), ne=np.full(len(T), OFF)))
    assert summary(events, "hot") == []
    assert eng.state("hot").value == "suppressed" and not eng.discharge_on


def test_missing_density_holds_the_discharge_state() -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0}])
    ne = np.full(len(T), np.nan)
    ne[0] = ON
    events = eng.process(frame(T, Te=np.where(T > 5.0, 9.0, 3.0), ne=ne))
    assert summary(events, "hot")[-1][2] == "unacknowledged"
    # and a frame without any density keeps it on
    more = eng.process(frame(T + 10.0, Te=np.full(len(T), 3.0), ne=np.full(len(T), np.nan)))
    assert summary(more, "hot") == [(10.0, "unacknowledged", "returned_unacknowledged")]


def test_limit_marked_only_when_on_false_is_never_suppressed() -> None:
    eng = engine([{"name": "gas", "quantity": "p0", "high": 10.0, "only_when_on": False}])
    events = eng.process(frame(T, p0=np.where(T >= 2.0, 20.0, 1.0), ne=np.full(len(T), OFF)))
    assert summary(events, "gas") == [(2.0, "normal", "unacknowledged")]


def test_latched_alarm_still_waits_for_reset_after_an_off_period() -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0, "latch": True}])
    te = np.where((T >= 1.0) & (T < 2.0), 9.0, 3.0)
    eng.process(frame(T, Te=te, ne=_ne(3.0, 6.0)))
    assert eng.state("hot").value == "unacknowledged"


def test_predictive_warning_is_suppressed_with_its_limit() -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 50.0, "predict_within": 100.0}])
    eng.process(frame(T, Te=1.0 + T, ne=np.full(len(T), OFF)))
    assert eng.state("hot:predict").value == "suppressed"


def test_density_noise_at_the_threshold_does_not_flicker_the_suppression() -> None:
    rng = np.random.default_rng(5)
    ne = 1e15 * (1.0 + 0.03 * rng.standard_normal(len(T)))     # 3 % noise right at on_above
    ne[:100] = 1e13
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0}])
    events = summary(eng.process(frame(T, Te=np.full(len(T), 3.0), ne=ne)), "hot")
    first_on = round(float(T[np.argmax(ne >= 1e15)]), 6)
    assert events == [(first_on, "suppressed", "normal")]     # on once; off needs < 0.9 on_above


def test_discharge_delay_and_deadband_options() -> None:
    ne = np.where((T >= 1.0) & (T < 5.0), ON, OFF)
    ne[(T >= 3.0) & (T < 3.05)] = OFF                            # a 50 ms dip
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0}],
                 {"discharge_delay": "0.1 s", "discharge_deadband": 0.5})
    events = summary(eng.process(frame(T, Te=np.full(len(T), 3.0), ne=ne)), "hot")
    assert events == [(1.1, "suppressed", "normal"), (5.1, "normal", "suppressed")]
