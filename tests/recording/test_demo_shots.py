"""The invented demo shots: small, readable as they are, and replaying to the journal recorded beside them."""

from __future__ import annotations

import json
import subprocess
from pathlib import Path

import numpy as np
import pytest

from monitor.config import load_config
from monitor.recording.csvformat import read_info

from recording_helpers import REGIME, ROOT, env

DATA = ROOT / "replay_data"
SHOTS = {"argon_rf_excursion": "argon_rf_envelope.toml", "helium_microwave_cutoff": "helium_microwave_envelope.toml"}


@pytest.mark.parametrize("name", sorted(SHOTS))
def test_demo_shot_is_small_self_describing_and_replays_to_its_journal(name: str) -> None:
    csv = DATA / f"{name}.csv"
    assert csv.stat().st_size < 1_000_000
    info = read_info(csv)
    assert info.ours and info.source == f"demo:{name}" and info.config_toml
    assert len(load_config(DATA / SHOTS[name]).limits) >= 3
    a = np.loadtxt(csv, delimiter=",", comments="#", skiprows=1)
    assert a.shape[0] > 3000 and np.all(np.diff(a[:, 0]) > 0)
    journal = [json.loads(x) for x in (DATA / f"{name}.alarms.jsonl").read_text().splitlines()]
    assert any(j["state"] == "unacknowledged" for j in journal)
    out = subprocess.run([*REGIME, "replay", str(csv), "--headless", "--json", "--quiet"], capture_output=True,
                         text=True, timeout=120, cwd=ROOT, env=env())
    assert out.returncode == 0, out.stderr
    replayed = [json.loads(x) for x in out.stdout.splitlines() if x.startswith('{"type":"alarm"')]
    key = lambda e: (e["alarm"], e["state"], e["time"])      # noqa: E731
    assert [key(e) for e in replayed] == [key(j) for j in journal]
