"""Deadband, on-delay, off-delay, latch and uncertainty-aware evaluation at sample resolution in data time."""

from __future__ import annotations

import numpy as np
import pytest

from alarm_helpers import engine, frame, summary

DT = 0.01
T = np.arange(0, 1000) * DT          # 10 s at 100 Hz


def _step(levels: list[tuple[float, float]]) -> np.ndarray:
    """Piecewise constant: [(from time, value), ...]."""
    v = np.zeros_like(T)
    for start, value in levels:
        v[T >= start - 1e-9] = value
    return v


def test_on_delay_raises_at_the_first_sample_after_the_delay() -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0, "on_delay": 0.5}])
    events = eng.process(frame(T, Te=_step([(0, 3.0), (2.0, 6.0), (4.0, 3.0)])))
    assert summary(events, "hot") == [(0.0, "suppressed", "normal"), (2.5, "normal", "unacknowledged"),
                                      (4.0, "unacknowledged", "returned_unacknowledged")]


def test_excursion_shorter_than_on_delay_raises_nothing() -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0, "on_delay": 0.5}])
    v = _step([(0, 3.0), (2.0, 6.0), (2.49, 3.0), (3.0, 6.0), (3.49, 3.0)])   # two runs of 0.49 s
    events = eng.process(frame(T, Te=v))
    assert summary(events, "hot") == [(0.0, "suppressed", "normal")]


def test_off_delay_holds_the_alarm_until_the_return_has_lasted() -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0, "off_delay": 0.3}])
    v = _step([(0, 3.0), (1.0, 6.0), (2.0, 3.0), (2.1, 6.0), (2.2, 3.0)])   # a 0.1 s dip back does not return
    events = eng.process(frame(T, Te=v))
    assert summary(events, "hot")[1:] == [(1.0, "normal", "unacknowledged"),
                                          (2.5, "unacknowledged", "returned_unacknowledged")]


def test_deadband_fraction_keeps_the_alarm_until_below_limit_minus_band() -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 100.0, "deadband": 0.05}])
    v = _step([(0, 90.0), (1.0, 101.0), (2.0, 97.0), (3.0, 101.0), (4.0, 96.0), (5.0, 94.9)])
    events = eng.process(frame(T, Te=v))
    assert summary(events, "hot")[1:] == [(1.0, "normal", "unacknowledged"),
                                          (5.0, "unacknowledged", "returned_unacknowledged")]
    assert events[-1].value == 94.9 and events[-1].limit == 100.0


def test_absolute_deadband_with_units_on_a_low_limit() -> None:
    eng = engine([{"name": "thin", "quantity": "ne", "low": "1e11 cm^-3", "deadband": "5e10 cm^-3",
                   "only_when_on": False}])
    v = _step([(0, 2e17), (1.0, 0.9e17), (2.0, 1.4e17), (3.0, 1.6e17)])
    events = eng.process(frame(T, ne=v))
    assert summary(events, "thin") == [(1.0, "normal", "unacknowledged"),
                                       (3.0, "unacknowledged", "returned_unacknowledged")]
    assert events[0].limit == pytest.approx(1e17)


def test_high_and_low_in_one_alarm_report_the_side_crossed() -> None:
    eng = engine([{"name": "band", "quantity": "Te", "low": 1.0, "high": 5.0}])
    v = _step([(0, 3.0), (1.0, 0.5), (2.0, 3.0), (3.0, 7.0), (4.0, 3.0)])
    events = [e for e in eng.process(frame(T, Te=v)) if e.alarm == "band" and e.time > 0]
    assert [(round(e.time, 6), e.state.value, e.limit) for e in events] == [
        (1.0, "unacknowledged", 1.0), (2.0, "returned_unacknowledged", 1.0),
        (3.0, "unacknowledged", 5.0), (4.0, "returned_unacknowledged", 5.0)]


def test_latch_holds_after_return_until_acknowledged_and_reset() -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0, "latch": True}])
    v = _step([(0, 3.0), (1.0, 6.0), (2.0, 3.0)])
    events = eng.process(frame(T[:500], Te=v[:500]))
    assert summary(events, "hot")[1:] == [(1.0, "normal", "unacknowledged")]   # the return keeps it
    (refused,) = eng.reset("hot", 5.0)
    assert refused.action == "reset_refused" and refused.state.value == "unacknowledged"
    assert "not acknowledged" in refused.message
    assert eng.acknowledge("hot", 5.1)[0].state.value == "acknowledged"
    assert eng.reset("hot", 5.2)[0].state.value == "normal"


def test_scripted_ramp_through_a_limit_gives_exactly_the_standard_sequence() -> None:
    # Te rises at 1 eV/s to 8 eV at t = 8 s, then falls at 1 eV/s. high = 5 eV is exceeded
    # (strictly) from the sample at 5.01 s; on_delay 0.2 s -> raised at 5.21 s. Acknowledged at 6 s.
    # The return needs Te < 5 - 5% = 4.75 eV: 16 - t < 4.75 from the sample at 11.26 s; off_delay
    # 0.1 s -> returns at 11.36 s, and being acknowledged it goes straight to normal.
    t = np.arange(0, 2000) * DT
    v = np.minimum(t, 8.0) - np.maximum(t - 8.0, 0.0)
    eng = engine([{"name": "ramp", "quantity": "Te", "high": 5.0, "deadband": 0.05, "on_delay": 0.2,
                   "off_delay": 0.1}])
    first = eng.process(frame(t[:600], Te=v[:600]))
    ack = eng.acknowledge("ramp", 6.0)
    rest = eng.process(frame(t[600:], Te=v[600:]))
    assert summary(first + ack + rest, "ramp") == [
        (0.0, "suppressed", "normal"), (5.21, "normal", "unacknowledged"),
        (6.0, "unacknowledged", "acknowledged"), (11.36, "acknowledged", "normal")]


def test_invalid_and_missing_samples_are_not_evaluated() -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0, "on_delay": 0.05}])
    v = _step([(0, 3.0), (1.0, 9.0), (1.5, 3.0)])
    valid = ~((T >= 1.0) & (T < 1.5))
    assert summary(eng.process(frame(T, Te=v, valid=valid)), "hot") == [(0.0, "suppressed", "normal")]
    v2 = v.copy()
    v2[(T >= 1.0) & (T < 1.5)] = np.nan
    eng2 = engine([{"name": "hot", "quantity": "Te", "high": 5.0}])
    assert summary(eng2.process(frame(T, Te=v2)), "hot") == [(0.0, "suppressed", "normal")]


def test_invalid_samples_neither_break_nor_extend_a_run() -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0, "on_delay": 0.5}])
    v = _step([(0, 3.0), (1.0, 9.0)])
    valid = ~((T >= 1.2) & (T < 1.3))      # a short stretch of bad samples inside the excursion
    events = eng.process(frame(T, Te=v, valid=valid))
    assert summary(events, "hot")[1:] == [(1.5, "normal", "unacknowledged")]


@pytest.mark.parametrize("mode, value, sigma, raised", [
    ("certain", 10.3, 0.1, True),     # 10.3 - 2*0.1 = 10.1 > 10
    ("certain", 10.1, 0.1, False),    # 10.1 - 0.2 = 9.9: could be noise
    ("possible", 9.85, 0.1, True),    # 9.85 + 0.2 crosses
    ("possible", 9.7, 0.1, False),
    ("none", 10.1, 5.0, True),
    ("certain", 10.1, np.nan, True),  # unknown sigma: plain threshold
])
def test_uncertainty_modes(mode: str, value: float, sigma: float, raised: bool) -> None:
    eng = engine([{"name": "u", "quantity": "Te", "high": 10.0, "uncertainty": mode, "k": 2}])
    events = eng.process(frame([0.0, 1.0], Te=[5.0, value], sigma={"Te": [0.1, sigma]}))
    assert (eng.state("u").value == "unacknowledged") is raised, events


def test_certain_mode_returns_only_when_clear_by_k_sigma_too() -> None:
    # in certain mode the effective value is value - k sigma on both raise and return
    eng = engine([{"name": "u", "quantity": "Te", "high": 10.0, "uncertainty": "certain", "k": 1}])
    eng.process(frame([0.0, 1.0, 2.0], Te=[5.0, 12.0, 10.5], sigma={"Te": [0.1, 0.5, 1.0]}))
    assert eng.state("u").value == "returned_unacknowledged"   # 10.5 - 1.0 < 10


def test_re_alarm_of_a_standing_alarm_in_data_time() -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0, "realarm_after": 2.0}])
    events = eng.process(frame(T[:200], Te=np.where(T[:200] >= 1.0, 9.0, 3.0)))
    assert summary(events, "hot")[1:] == [(1.0, "normal", "unacknowledged")]
    eng.acknowledge("hot", 1.5)
    events = eng.process(frame(T[200:700], Te=np.full(500, 9.0)))        # still in alarm until 7 s
    realarms = [(round(e.time, 6), e.previous.value, e.state.value, e.message) for e in events if e.alarm == "hot"]
    assert realarms == [(3.0, "acknowledged", "unacknowledged", "re-alarm"),
                        (5.0, "unacknowledged", "unacknowledged", "re-alarm")]


def test_engine_from_the_full_config_loader(tmp_path) -> None:
    from monitor.alarms.engine import AlarmEngine
    from monitor.config import load_config

    path = tmp_path / "c.toml"
    path.write_text('[discharge]\non_above = "1e10 cm^-3"\n[sources]\nstale_after = 0.5\n'
                    '[alarms]\nmax_shelve = "10 s"\n[[limit]]\nname = "hot"\nquantity = "Te"\nhigh = "5 eV"\n')
    eng = AlarmEngine.from_config(load_config(path))
    assert eng.on_above == pytest.approx(1e16) and eng.stale_after == 0.5 and eng.options.max_shelve == 10.0
    eng.process(frame([0.0, 1.0], Te=[3.0, 9.0]))
    (ev,) = eng.shelve("hot", 60.0, 1.0)
    assert ev.state.value == "shelved" and "maximum is 10 s" in ev.message
