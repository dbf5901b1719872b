"""`regime demo`: the bundled envelope matches the demo scenario, and --headless runs one loop for automation."""

from __future__ import annotations

import json
import subprocess
import sys

from adapters.scenarios import NE_EXCURSION, NE_STEADY, TE_EXCURSION, TE_STEADY
from monitor.commands.demo import envelope_path
from monitor.config import load_config


def test_envelope_is_package_data_and_boxes_the_steady_state() -> None:
    config = load_config(envelope_path())
    by_name = {lim.name: lim for lim in config.limits}
    ne_high = by_name["ne_high"].high
    assert NE_STEADY < ne_high < NE_EXCURSION
    assert by_name["ne_low"].low < NE_STEADY
    assert by_name["Te_band"].low < min(TE_EXCURSION, TE_STEADY) and by_name["Te_band"].high > max(TE_EXCURSION, TE_STEADY)
    assert config.device.wave_frequency == 2.45e9 and config.device.length == 0.3


def test_headless_json_run_raises_the_excursion_alarm_and_loses_nothing() -> None:
    out = subprocess.run([sys.executable, "-m", "monitor", "demo", "--headless", "--json", "--speed", "max"],
                         capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    records = [json.loads(line) for line in out.stdout.splitlines() if line.startswith("{")]
    alarms = [r for r in records if r["type"] == "alarm"]
    assert any(r["alarm"] == "ne_high" and r["state"] == "unacknowledged" for r in alarms)
    assert any(r["alarm"] == "over_cutoff" and r["state"] == "unacknowledged" for r in alarms)
    summary = records[-1]
    assert summary["type"] == "summary"
    assert summary["accepted"] == 60_000 and summary["lost"] == 0 and summary["rejected_total"] == 0


def test_json_without_headless_is_bad_usage() -> None:
    out = subprocess.run([sys.executable, "-m", "monitor", "demo", "--json"], capture_output=True, text=True,
                         timeout=60)
    assert out.returncode == 2 and "--json needs --headless" in out.stderr


async def test_screen_quits_by_itself_after_the_duration() -> None:
    # what `regime demo --duration S` gives the screen: settings_for(..., quit_after=S)
    import time

    from monitor.tui.launch import make_app, settings_for
    from tui_helpers import demo_config, demo_session, wait_for
    config = demo_config()
    session, tap = demo_session("sim:demo?seed=3&speed=1&loop=1", config=config)
    app = make_app(session, tap, settings_for(config, title="regime demo", bell=False, quit_after=0.5))
    started = time.monotonic()
    try:
        async with app.run_test(size=(100, 30)) as pilot:
            await wait_for(pilot, lambda: app.return_code is not None, timeout=90.0)   # no key pressed
        assert app.return_code == 0 and app.stop.is_set()
        assert time.monotonic() - started >= 0.5             # not before the duration
    finally:
        session.close()
