"""Import of a foreign probe log: --map (or [channels]) maps time_ms, dens in cm^-3 and temp in K."""

from __future__ import annotations

import json
import subprocess
from pathlib import Path

import numpy as np
import pytest

from monitor.report import build_report

from recording_helpers import REGIME, ROOT, env

MAP = """
[channels]
time_ms = {quantity = "t", unit = "ms"}
dens = {quantity = "ne", unit = "cm^-3", uncertainty = "10%"}
temp = {quantity = "Te", unit = "K"}
"""
# CODATA via the SI definitions (exact): k / e = 1.380649e-23 / 1.602176634e-19 eV per K
EV_PER_K = 1.380649e-23 / 1.602176634e-19


def _probe_log(tmp_path: Path) -> Path:
    rows = ["time_ms,dens,temp,bias_V"]
    for i in range(400):                     # 2 s at 200 Hz
        rows.append(f"{5 * i},{4.0e10 + 1e8 * (i % 5)},{34815.0},{-40}")
    p = tmp_path / "probe_log.csv"
    p.write_text("\n".join(rows) + "\n")
    return p


def test_map_file_turns_foreign_columns_into_canonical_quantities(tmp_path: Path) -> None:
    log = _probe_log(tmp_path)
    mapping = tmp_path / "probe_map.toml"
    mapping.write_text(MAP)
    r = build_report(log, map_path=str(mapping))
    q = {s.name: s for s in r.quantities}
    assert r.samples == 400 and r.duration == pytest.approx(1.995)          # time_ms -> s
    assert q["ne"].min == pytest.approx(4.0e16) and q["ne"].max == pytest.approx(4.04e16)   # cm^-3 -> m^-3
    assert q["Te"].median == pytest.approx(34815.0 * EV_PER_K)               # K -> eV (about 3.0 eV)
    assert "debye_length" in q and q["debye_length"].n == 400


def test_replay_with_map_and_the_same_map_as_a_config_table(tmp_path: Path) -> None:
    log = _probe_log(tmp_path)
    mapping = tmp_path / "probe_map.toml"
    mapping.write_text(MAP)
    config = tmp_path / "probe.toml"
    config.write_text('[device]\nlength = "0.3m"\n' + MAP)
    results = []
    for extra in (["--map", str(mapping)], ["--config", str(config)]):
        out = subprocess.run([*REGIME, "replay", str(log), *extra, "--headless", "--json", "--quiet"],
                             capture_output=True, text=True, timeout=120, cwd=ROOT, env=env())
        assert out.returncode == 0, out.stderr
        records = [json.loads(x) for x in out.stdout.splitlines()]
        summary = records[-1]
        assert summary["type"] == "summary" and summary["accepted"] == 400 and summary["rejected"] == {}
        assert summary["unknown_keys"] == {"bias_V": 400}               # counted, not fatal
        assert summary["data_time_last"] == pytest.approx(1.995)
        results.append(summary["accepted"])
    assert results == [400, 400]


def test_foreign_file_without_time_column_is_a_usage_error(tmp_path: Path) -> None:
    log = _probe_log(tmp_path)
    out = subprocess.run([*REGIME, "replay", str(log), "--headless"], capture_output=True, text=True,
                         timeout=120, cwd=ROOT, env=env())
    assert out.returncode == 2 and "time_ms" in out.stderr and "quantity = \"t\"" in out.stderr
