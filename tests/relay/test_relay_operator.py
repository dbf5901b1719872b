"""Operator actions from consoles over a real request channel: applied once by the owner's one engine, journaled with the console's identity, refusals with reasons."""

from __future__ import annotations

import json

import zmq

from monitor.relay.console import RelayConsole
from monitor.relay.feed import RelayFeed
from monitor.relay.owner import start_relay
from monitor.relay.requests import OperatorClient
from monitor.operator import Acknowledge, Seek
from tests.relay.relay_helpers import demo_session, until

OPERATORS = {"key-bench": "bench-2"}


def _owner(tmp_path, name="relay"):
    session = demo_session(duration=30.0, rate=500.0)      # ends with ne_high and over_cutoff unacknowledged
    owner = start_relay(session, f"ipc://{tmp_path}/{name}", operators=OPERATORS, journal=tmp_path / "ops.jsonl",
                        interval=0.2)
    session.open()
    session.run()
    return session, owner


def _console(owner):
    console = RelayConsole(f"relay+{owner.endpoint}")
    console.open()
    assert until(lambda: console.snapshot() is not None, [console])
    return console


def _state(session, alarm):
    return next(v.state.value for v in session.engine.views() if v.alarm == alarm)


def test_an_action_is_applied_once_and_journaled_with_the_consoles_identity(tmp_path):
    session, owner = _owner(tmp_path)
    console = _console(owner)
    other = _console(owner)
    client = OperatorClient(console.requests, token="key-bench", name="office-3")
    try:
        assert _state(session, "ne_high") == "unacknowledged"
        reply = client.request("acknowledge", "ne_high", run=console.run, request_id="req-1")
        assert reply.applied and reply.by == "bench-2" and not reply.repeat
        assert _state(session, "ne_high") == "acknowledged"
        # the same request again (a lost answer, a retry): the same answer, not applied again
        again = client.request("acknowledge", "ne_high", run=console.run, request_id="req-1")
        assert again.applied and again.repeat
        acks = [e for e in session.recent_events if e.alarm == "ne_high" and e.action == "acknowledge"]
        assert len(acks) == 1
        lines = [json.loads(x) for x in (tmp_path / "ops.jsonl").read_text().splitlines()]
        assert len(lines) == 1
        assert lines[0]["by"] == "bench-2" and lines[0]["console"] == "office-3" and lines[0]["result"] == "applied"
        assert lines[0]["id"] == "req-1" and lines[0]["events"][0]["action"] == "acknowledge"
        # every console sees the owner's new state and who acted
        for c in (console, other):
            assert until(lambda c=c: any(v.alarm == "ne_high" and v.state.value == "acknowledged"
                                         for v in c.alarms()), [c])
            assert until(lambda c=c: any(a.get("by") == "bench-2" for a in c.actions), [c])
    finally:
        client.close()
        console.close()
        other.close()
        session.close()


def test_refused_actions_say_why(tmp_path):
    session, owner = _owner(tmp_path)
    console = _console(owner)
    stranger = OperatorClient(console.requests, token="guessed", name="x")
    client = OperatorClient(console.requests, token="key-bench", name="office-3")
    try:
        r = stranger.request("acknowledge", "ne_high", run=console.run)
        assert not r.applied and "not authorised" in r.reason
        r = client.request("acknowledge", "no_such_alarm", run=console.run)
        assert not r.applied and "unknown alarm 'no_such_alarm'" in r.reason
        r = client.request("reset", "over_cutoff", run=console.run)        # latched, not returned: the engine says no
        assert not r.applied and r.reason and r.events and r.events[0]["action"] == "reset_refused"
        r = client.request("acknowledge", "ne_high", run="an-older-run")
        assert not r.applied and "the run changed" in r.reason
        r = client.request("out_of_service", "ne_high", run=console.run)
        assert not r.applied and "unknown command" in r.reason
        assert _state(session, "ne_high") == "unacknowledged"            # nothing refused changed the engine
        # a hostile peer: not JSON, then a request without an id; the owner answers and goes on
        raw = zmq.Context.instance().socket(zmq.DEALER)
        raw.connect(console.requests)
        raw.send(b"\xff\x00garbage")
        assert raw.poll(5000) and "not a JSON object" in json.loads(raw.recv())["reason"]
        raw.send(json.dumps({"token": "key-bench", "command": "acknowledge", "run": console.run}).encode())
        assert raw.poll(5000) and "no id" in json.loads(raw.recv())["reason"]
        raw.close(0)
        r = client.request("acknowledge", "ne_high", run=console.run)
        assert r.applied
        # a read-only console's screen refuses before asking
        feed = RelayFeed(console)
        assert "read-only" in feed.act(Acknowledge("ne_high"))
        assert "not available on a relay console" in feed.act(Seek(3.0))
        lines = [json.loads(x) for x in (tmp_path / "ops.jsonl").read_text().splitlines()]
        assert [x["result"] for x in lines] == ["refused"] * 7 + ["applied"]
        assert lines[0]["by"] is None and lines[1]["by"] == "bench-2"
    finally:
        stranger.close()
        client.close()
        console.close()
        session.close()


def test_an_action_in_flight_across_an_owner_restart_is_refused_not_applied_twice(tmp_path):
    session, owner = _owner(tmp_path)
    console = _console(owner)
    client = OperatorClient(console.requests, token="key-bench", name="office-3")
    try:
        first = client.request("acknowledge", "ne_high", run=console.run, request_id="req-7")
        assert first.applied
        old_run = console.run
        session.close()
        # the owner comes back at the same address; the console's retry of req-7 (the answer lost) arrives
        session2, owner2 = _owner(tmp_path)
        try:
            assert owner2.publisher.run != old_run
            retry = client.request("acknowledge", "ne_high", run=old_run, request_id="req-7")
            assert not retry.applied and "the run changed" in retry.reason
            assert _state(session2, "ne_high") == "unacknowledged"
            assert not any(e.action == "acknowledge" for e in session2.recent_events)
            # the console, once it has seen the new run, acts on it
            assert until(lambda: console.run == owner2.publisher.run, [console])
            assert client.request("acknowledge", "ne_high", run=console.run).applied
        finally:
            session2.close()
    finally:
        client.close()
        console.close()


def test_the_screen_on_a_relay_sends_an_acknowledgement_to_the_owner(tmp_path):
    import asyncio

    from monitor.tui.app import RegimeApp
    from monitor.tui.launch import settings_for

    session, owner = _owner(tmp_path)
    console = RelayConsole(f"relay+{owner.endpoint}")
    feed = RelayFeed(console, token="key-bench", name="pilot")

    async def drive() -> None:
        app = RegimeApp(feed, settings_for(session.config, title="regime console"))
        async with app.run_test(size=(120, 40)) as pilot:
            for _ in range(200):
                await pilot.pause(0.02)
                if app.watch_screen.last is not None and app.watch_screen.last.alarms:
                    break
            snap = app.watch_screen.last
            assert snap is not None and snap.latest == session.snapshot().latest
            assert snap.counts[session.name].accepted == 15000
            await pilot.press("A")                      # acknowledge all, sent to the owner
            for _ in range(200):
                await pilot.pause(0.02)
                if _state(session, "ne_high") == "acknowledged":
                    break
            assert _state(session, "ne_high") == "acknowledged"
            assert _state(session, "over_cutoff") == "acknowledged"
            await pilot.press("q")

    try:
        asyncio.run(drive())
    finally:
        session.close()
