"""Every ISA-18.2 / IEC 62682 transition of one alarm, table-driven, with an injected wall clock."""

from __future__ import annotations

from typing import Any

import pytest

from alarm_helpers import FakeClock, engine, frame
from monitor.alarms.events import AlarmState as S, Priority
from monitor.alarms.states import AlarmCore
from monitor.errors import UsageError


def _core(clock: FakeClock, **kw: Any) -> AlarmCore:
    kw.setdefault("max_shelve", 100.0)
    return AlarmCore("a", "limit", "ne", Priority.HIGH, clock, **kw)


def _do(core: AlarmCore, step: tuple[Any, ...]) -> list:
    name, t, *arg = step
    if name == "raise":
        return core.set_active(True, t, 5.0, 4.0)
    if name == "return":
        return core.set_active(False, t, 3.0, None)
    if name == "ack":
        return core.acknowledge(t)
    if name == "shelve":
        return core.shelve(arg[0], t)
    if name == "unshelve":
        return core.unshelve(t)
    if name == "reset":
        return core.reset(t)
    if name == "oos":
        return core.set_out_of_service(arg[0], t)
    if name == "suppress":
        return core.set_suppressed(arg[0], t, None)
    if name == "due":
        return core.fire_due(t, strict=False)
    raise AssertionError(name)


N, U, A, RU, SH, SU, OOS = (S.NORMAL, S.UNACKNOWLEDGED, S.ACKNOWLEDGED, S.RETURNED_UNACKNOWLEDGED,
                            S.SHELVED, S.SUPPRESSED, S.OUT_OF_SERVICE)

# (case, core options, [(step, expected state after it, expected action of the last event or "-" for none)])
TABLE: list[tuple[str, dict[str, Any], list[tuple[tuple[Any, ...], S, str | None]]]] = [
    ("raise, acknowledge, return", {}, [
        (("raise", 1.0), U, None), (("ack", 2.0), A, "acknowledge"), (("return", 3.0), N, None)]),
    ("return before acknowledge", {}, [
        (("raise", 1.0), U, None), (("return", 2.0), RU, None), (("ack", 3.0), N, "acknowledge")]),
    ("re-alarm from returned_unacknowledged", {}, [
        (("raise", 1.0), U, None), (("return", 2.0), RU, None), (("raise", 3.0), U, None)]),
    ("acknowledge with nothing to acknowledge does nothing", {}, [
        (("ack", 1.0), N, "-"), (("raise", 2.0), U, None), (("ack", 3.0), A, "acknowledge"), (("ack", 4.0), A, "-")]),
    ("latched alarm stays until reset after return and acknowledge", {"latch": True}, [
        (("raise", 1.0), U, None), (("return", 2.0), U, "-"), (("reset", 3.0), U, "reset_refused"),
        (("ack", 4.0), A, "acknowledge"), (("reset", 5.0), N, "reset")]),
    ("latched reset refused while still in alarm", {"latch": True}, [
        (("raise", 1.0), U, None), (("ack", 2.0), A, "acknowledge"), (("reset", 3.0), A, "reset_refused"),
        (("return", 4.0), A, "-"), (("reset", 5.0), N, "reset")]),
    ("reset of a non-latching alarm is refused", {}, [
        (("raise", 1.0), U, None), (("reset", 2.0), U, "reset_refused")]),
    ("timed shelve ends at its time, alarm still active", {}, [
        (("raise", 1.0), U, None), (("shelve", 2.0, 10.0), SH, "shelve"), (("due", 11.9), SH, "-"),
        (("due", 12.0), U, None)]),
    ("timed shelve ends after the alarm returned", {}, [
        (("raise", 1.0), U, None), (("shelve", 2.0, 10.0), SH, "shelve"), (("return", 5.0), SH, "-"),
        (("due", 12.0), N, None)]),
    ("one-shot shelve ends when the alarm returns", {}, [
        (("raise", 1.0), U, None), (("shelve", 2.0, None), SH, "shelve"), (("return", 3.0), N, None)]),
    ("one-shot shelve is limited by the maximum", {}, [
        (("raise", 1.0), U, None), (("shelve", 2.0, None), SH, "shelve"), (("due", 102.0), U, None)]),
    ("timed shelve beyond the maximum is clamped", {}, [
        (("raise", 1.0), U, None), (("shelve", 2.0, 1e6), SH, "shelve"), (("due", 101.9), SH, "-"),
        (("due", 102.0), U, None)]),
    ("operator unshelve shows the alarm again", {}, [
        (("raise", 1.0), U, None), (("shelve", 2.0, 50.0), SH, "shelve"), (("unshelve", 3.0), U, "unshelve")]),
    ("raised while shelved, seen on unshelve", {}, [
        (("shelve", 1.0, 50.0), SH, "shelve"), (("raise", 2.0), SH, "-"), (("unshelve", 3.0), U, "unshelve")]),
    ("out of service and back", {}, [
        (("raise", 1.0), U, None), (("oos", 2.0, True), OOS, "out_of_service"), (("return", 3.0), OOS, "-"),
        (("oos", 4.0, False), N, "in_service")]),
    ("back in service while still in alarm", {}, [
        (("oos", 1.0, True), OOS, "out_of_service"), (("raise", 2.0), OOS, "-"),
        (("oos", 3.0, False), U, "in_service")]),
    ("shelving refused while out of service", {}, [
        (("oos", 1.0, True), OOS, "out_of_service"), (("shelve", 2.0, 5.0), OOS, "shelve_refused")]),
    ("suppressed by design and back", {}, [
        (("raise", 1.0), U, None), (("suppress", 2.0, True), SU, None), (("suppress", 3.0, False), N, None)]),
    ("latched alarm survives suppression", {"latch": True}, [
        (("raise", 1.0), U, None), (("suppress", 2.0, True), SU, None), (("suppress", 3.0, False), U, None)]),
    ("re-alarm of a long-standing acknowledged alarm", {"realarm_after": 5.0}, [
        (("raise", 1.0), U, None), (("ack", 2.0), A, "acknowledge"), (("due", 5.9), A, "-"),
        (("due", 6.0), U, None), (("ack", 7.0), A, "acknowledge"), (("due", 11.0), U, None)]),
]


@pytest.mark.parametrize("case, options, steps", TABLE, ids=[row[0] for row in TABLE])
def test_transition_table(case: str, options: dict[str, Any], steps: list) -> None:
    clock = FakeClock()
    core = _core(clock, **options)
    assert core.state == N
    for step, expected, action in steps:
        before = core.state
        events = _do(core, step)
        assert core.state == expected, f"{case}: after {step} expected {expected}, got {core.state}"
        if action == "-":
            assert events == [], f"{case}: {step} should emit nothing, got {events}"
            continue
        assert events, f"{case}: {step} emitted nothing"
        last = events[-1]
        assert last.action == action
        assert last.state == expected and events[0].previous == before
        assert last.alarm == "a" and last.priority == Priority.HIGH and last.quantity == "ne"
        assert last.wall >= 1000.0          # from the injected clock, never the data time
        if step[0] != "due":
            assert last.time == step[1]


def test_re_alarm_event_says_so_and_counts_as_activation() -> None:
    core = _core(FakeClock(), realarm_after=5.0)
    core.set_active(True, 0.0, 5.0, 4.0)
    events = core.fire_due(5.0, strict=False)
    assert [(e.previous, e.state, e.message, e.time) for e in events] == [(U, U, "re-alarm", 5.0)]
    assert core.activations == 2


def test_wall_time_only_from_the_clock_and_data_time_kept() -> None:
    clock = FakeClock()
    core = _core(clock)
    (e1,) = core.set_active(True, 12.5, 5.0, 4.0)
    (e2,) = core.acknowledge(13.0)
    assert (e1.time, e1.wall, e2.time, e2.wall) == (12.5, 1000.0, 13.0, 1001.0)
    d = e1.to_json()
    assert d["type"] == "alarm" and d["state"] == "unacknowledged" and d["previous"] == "normal"
    assert d["priority"] == "high" and d["value"] == 5.0 and d["limit"] == 4.0


def test_engine_actions_by_id_and_acknowledge_all() -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0}, {"name": "cold", "quantity": "Te", "low": 1.0,
                                                                   "only_when_on": False}])
    events = eng.process(frame([0.0, 1.0, 2.0], Te=[3.0, 0.5, 9.0]))
    assert (0.0, "suppressed", "normal") in [(e.time, e.previous.value, e.state.value) for e in events]
    assert eng.state("hot") == U and eng.state("cold") == RU
    acked = eng.acknowledge(None, 3.0)
    assert sorted((e.alarm, e.state.value) for e in acked) == [("cold", "normal"), ("hot", "acknowledged")]
    assert all(e.action == "acknowledge" and e.time == 3.0 for e in acked)
    with pytest.raises(UsageError, match="unknown alarm"):
        eng.acknowledge("nope", 3.0)
    assert eng.shelve("hot", 10.0, 4.0)[0].state == SH
    views = {v.alarm: v for v in eng.views()}
    assert views["hot"].shelved_until == 14.0 and views["hot"].state == SH
    assert {"probe:stale", "probe:quality"} <= set(views)
    assert eng.set_out_of_service("cold", True, 5.0)[0].state == OOS


def test_views_show_every_alarm_with_its_limit_before_any_data() -> None:
    eng = engine([{"name": "band", "quantity": "Te", "low": 1.0, "high": 5.0, "predict_within": 3.0,
                   "description": "electrons too hot or too cold"}])
    views = {v.alarm: v for v in eng.views()}
    assert set(views) == {"band", "band:predict"}
    assert views["band"].state == SU and views["band"].limit == 5.0 and views["band"].kind == "limit"
    assert views["band"].description == "electrons too hot or too cold"
    assert views["band:predict"].kind == "predictive" and views["band:predict"].priority == Priority.ADVISORY
    eng.process(frame([0.0], Te=[3.0]))
    views = {v.alarm: v for v in eng.views()}
    assert views["band"].state == N and views["band"].since == 0.0
    assert views["probe:stale"].limit == 2.0 and views["probe:quality"].limit == 0.2
