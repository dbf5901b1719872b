"""`regime demo`: the bundled envelope matches the demo scenario, and --headless runs one loop for automation."""

from __future__ import annotations

import json
import subprocess
import sys

from monitor.commands.demo import envelope_path
from monitor.config import load_config


def test_envelope_is_package_data_and_boxes_the_steady_state() -> None:
    config = load_config(envelope_path())
    by_name = {lim.name: lim for lim in config.limits}
    # adapters/scenarios.py: steady ne 5.0e16 m^-3, Te 3.0 eV; excursion ne 3.0e17 m^-3, Te 2.2 eV
    ne_high = by_name["ne_high"].high
    assert 5.0e16 < ne_high < 3.0e17
    assert by_name["ne_low"].low < 5.0e16
    assert by_name["Te_band"].low < 2.2 and by_name["Te_band"].high > 3.0
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
