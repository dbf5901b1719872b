"""A headless console run on a relay (what `regime watch relay+...` runs) and the owner's operator key file."""

from __future__ import annotations

import io
import json

import pytest

from monitor.errors import UsageError
from monitor.relay.owner import load_operator_keys, start_relay
from monitor.relay.run import run_console
from tests.relay.relay_helpers import accepted, demo_session


def test_a_headless_console_prints_the_owners_run_and_its_summary(tmp_path):
    session = demo_session(duration=30.0, rate=500.0)
    owner = start_relay(session, f"ipc://{tmp_path}/relay", interval=0.2)
    session.open()
    session.run()           # ended: the console's first state says so, and the console stops
    out = io.StringIO()
    try:
        code = run_console(f"relay+{owner.endpoint}", headless=True, as_json=True, duration=20.0, out=out)
    finally:
        session.close()
    assert code == 0
    records = [json.loads(x) for x in out.getvalue().splitlines()]
    summary = records[-1]
    assert summary["type"] == "summary" and summary["accepted"] == accepted(session) == 15000
    assert summary["source"] == session.name
    assert sorted(summary["alarms_active"]) == sorted(session.summary()["alarms_active"])
    assert summary["relay"]["runs"] == 1 and summary["relay"]["missed"] == 0
    assert any(r["type"] == "status" for r in records)
    # the recent alarm events of the owner came with the first state
    assert [r["alarm"] for r in records if r["type"] == "alarm"] == [e.alarm for e in session.recent_events], records[:3]


def test_operator_keys_file(tmp_path):
    good = tmp_path / "keys"
    good.write_text("# who  key\nbench-2  k3y-for-the-bench\noffice-3 another-long-key  # the office\n")
    assert load_operator_keys(good) == {"k3y-for-the-bench": "bench-2", "another-long-key": "office-3"}
    for text, says in (("bench short\n", "12 or more"), ("a b c\n", "IDENTITY KEY"),
                       ("a k3y-for-the-bench\nb k3y-for-the-bench\n", "given to a already")):
        bad = tmp_path / "bad"
        bad.write_text(text)
        with pytest.raises(UsageError, match=says):
            load_operator_keys(bad)
    with pytest.raises(UsageError, match="operator keys"):
        load_operator_keys(tmp_path / "missing")
