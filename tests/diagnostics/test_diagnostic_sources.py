"""The raw diagnostics reach every command through open_source: a sweep file or sim:probe with a [probe]
table, an [interferometer] table or sim:interferometer, and a relay+ spec refused outside `regime watch`."""

from __future__ import annotations

from pathlib import Path

import pytest

from monitor.config import load_config
from monitor.errors import UsageError
from monitor.session import Session, make_engine
from monitor.sources import open_source

DATA = Path(__file__).resolve().parents[2] / "replay_data"


def _drain(spec: str, config_path: Path | None = None) -> dict:
    config = load_config(str(config_path) if config_path else None)
    source = open_source(spec, config)
    s = Session(source, config, engine=make_engine(config), live=False)
    s.open()
    while s.step(0.0):
        pass
    s.close()
    return s.summary()


def test_sim_interferometer_is_analysed_into_density_readings() -> None:
    summary = _drain("sim:interferometer?speed=max")
    # no outside reference: the simulator's own 5 s at 1 kHz
    assert summary["accepted"] == 5000 and summary["rejected_total"] == 0
    assert summary["unknown_keys"] == {}             # I/Q and fringe flags travel as auxiliary columns
    assert "fringe" in (summary["message"] or "")


def test_the_interferometer_demo_file_with_its_config() -> None:
    summary = _drain(str(DATA / "interferometer_iq.csv"), DATA / "interferometer_demo.toml")
    assert summary["accepted"] > 0 and summary["lost"] == 0 and summary["unknown_keys"] == {}


def test_sim_probe_and_the_sweep_demo_file() -> None:
    summary = _drain("sim:probe?rate=200&points=300&duration=1&speed=max")
    assert summary["accepted"] == 200 and summary["unknown_keys"] == {}
    demo = _drain(str(DATA / "probe_sweeps.csv"), DATA / "probe_sweeps.toml")
    # no outside reference: the demo file holds 48 sweeps, 4 of them damaged on purpose
    assert demo["accepted"] + demo["rejected_total"] == 48 and demo["rejected_total"] == 4


def test_a_relay_spec_is_a_console_not_a_source() -> None:
    with pytest.raises(UsageError, match="console"):
        open_source("relay+tcp://127.0.0.1:5999")
    with pytest.raises(UsageError, match="unknown parameter 'loop'"):
        open_source("sim:probe?loop=1")
