"""`regime replay --from/--to`: seconds from the file's first reading, @T for an absolute data time, and a
window that selects no readings is said on stderr with exit 2 (real `regime` subprocesses)."""

from __future__ import annotations

import json
import subprocess
from pathlib import Path

import pytest

from monitor.errors import UsageError
from monitor.recording.replaying import WindowTime, open_file, parse_window_time

from recording_helpers import REGIME, ROOT, env

SHOT = ROOT / "replay_data" / "argon_rf_excursion.csv"     # a recorded shot: epoch data times, 200 Hz, 30 s
T0 = 1767261600.0                                        # its first reading (2026-01-01T10:00:00Z)


def _replay(*args: str, file: Path = SHOT) -> tuple[int, list[dict], str]:
    out = subprocess.run([*REGIME, "replay", str(file), "--headless", "--json", "--quiet", *args],
                         capture_output=True, text=True, timeout=120, cwd=ROOT, env=env())
    return out.returncode, [json.loads(line) for line in out.stdout.splitlines()], out.stderr


def _window(records: list[dict]) -> tuple[int, float, float, list[tuple[str, str, float]]]:
    summary = records[-1]
    assert summary["type"] == "summary"
    alarms = [(r["alarm"], r["state"], r["time"]) for r in records if r["type"] == "alarm"]
    return summary["accepted"], summary["data_time_first"], summary["data_time_last"], alarms


def test_from_and_to_count_from_the_first_reading_of_a_recorded_shot() -> None:
    rc, records, err = _replay("--from", "10", "--to", "20")
    assert rc == 0, err
    accepted, first, last, alarms = _window(records)
    assert (first, last) == (T0 + 10.0, T0 + 20.0)
    assert accepted == 2001                                 # 10 s at 200 Hz, both ends included
    # the excursion's ne_high raise (14.505 s in the shot's own journal) falls inside the window
    journal = [json.loads(line) for line in SHOT.with_name(SHOT.stem + ".alarms.jsonl").read_text().splitlines()]
    raised = [(d["alarm"], d["state"], d["time"]) for d in journal if d["state"] == "unacknowledged"]
    inside = [e for e in raised if T0 + 10 <= e[2] <= T0 + 20]
    assert len(inside) == 2 and all(e in alarms for e in inside)     # ne_high and debye_short


def test_absolute_times_with_at_give_the_same_window() -> None:
    _, relative, _ = _replay("--from", "10", "--to", "20")
    rc, absolute, err = _replay("--from", f"@{T0 + 10:.1f}", "--to", f"@{T0 + 20:.1f}")
    assert rc == 0, err
    # 2026-01-01T10:00:10Z is 1767261610 s after the POSIX epoch (20454 days of 86400 s + 36010 s; common practice)
    rc, iso, err = _replay("--from", "@2026-01-01T10:00:10Z", "--to", "@2026-01-01T10:00:20+00:00")
    assert rc == 0, err
    assert _window(relative)[:3] == _window(absolute)[:3] == _window(iso)[:3] == (2001, T0 + 10.0, T0 + 20.0)


def test_a_window_outside_the_file_is_refused_before_the_replay() -> None:
    rc, records, err = _replay("--from", "40", "--to", "50")
    assert rc == 2 and records == []
    assert "selects no readings" in err and "0 to 30 s" in err and "@T" in err
    rc, records, err = _replay("--to", f"@{T0 - 1:.1f}")            # an absolute end before the shot
    assert rc == 2 and "selects no readings" in err


def test_a_window_in_a_gap_of_the_data_says_so_and_exits_2(tmp_path: Path) -> None:
    gappy = tmp_path / "gappy.csv"
    gappy.write_text("t,ne,Te\n" + "".join(f"{t!r},5e16,3.0\n" for t in (100.0, 100.5, 101.0, 109.0, 109.5)))
    rc, records, err = _replay("--from", "2", "--to", "8", file=gappy)   # 102 .. 108 s: nothing there
    assert rc == 2
    assert records[-1]["accepted"] == 0
    assert "--from 2 --to 8 selects no readings" in err
    rc, records, err = _replay("--from", "1", "--to", "9.2", file=gappy)
    assert rc == 0 and _window(records)[:3] == (2, 101.0, 109.0)


def test_bad_window_values_exit_2_with_the_accepted_forms() -> None:
    for args in (("--from", "20", "--to", "10"), ("--from", "soon"), ("--from", "-3"), ("--to", "@nan")):
        rc, records, err = _replay(*args)
        assert rc == 2 and records == [], args
        assert "--from" in err or "--to" in err


def test_parse_window_time_forms() -> None:
    assert parse_window_time("10", "--from") == WindowTime(10.0, False, "10")
    assert parse_window_time(" @1767261610.5", "--from") == WindowTime(1767261610.5, True, "@1767261610.5")
    # ISO 8601 with an offset: +01:00 is one hour ahead of UTC (ISO 8601)
    assert parse_window_time("@2026-01-01T11:00:10+01:00", "--to").seconds == T0 + 10.0
    assert parse_window_time("2.5", "--to").resolve(T0) == T0 + 2.5
    assert parse_window_time("@5", "--to").resolve(T0) == 5.0
    for bad in ("", "@", "ten", "inf", "2026-01-01T10:00:10Z"):      # a clock time needs the @
        with pytest.raises(UsageError):
            parse_window_time(bad, "--from")


def test_relative_window_on_a_mapped_time_column(tmp_path: Path) -> None:
    probe = tmp_path / "probe.csv"
    probe.write_text("time_ms,dens\n" + "".join(f"{1000 + 10 * i},{1e10 + i}\n" for i in range(300)))
    mapping = tmp_path / "map.toml"
    mapping.write_text('[channels]\ntime_ms = {quantity = "t", unit = "ms"}\ndens = {quantity = "ne", unit = "cm^-3"}\n')
    opened = open_file(probe, map_path=str(mapping), start=parse_window_time("0.5", "--from"),
                       stop=parse_window_time("1", "--to"))
    try:
        pos = opened.source.position()
        assert abs(pos[1] - 1.5) < 1e-12 and abs(pos[2] - 2.0) < 1e-12   # 1000 ms + 0.5 s, + 1 s
    finally:
        opened.source.close()


def test_a_window_on_a_file_whose_clock_restarts_is_refused_with_the_reason(tmp_path) -> None:
    # a probe controller rebooted mid-file: its time starts again near 0 (a counted clock restart)
    import sys

    import numpy as np

    t = list(1767261600.0 + np.arange(300) * 0.01) + list(np.arange(300) * 0.01)
    path = tmp_path / "rebooted.csv"
    path.write_text("t,ne,Te\n" + "".join(f"{x:.2f},5e16,3.0\n" for x in t))
    out = subprocess.run([sys.executable, "-m", "monitor", "replay", str(path), "--headless", "--from", "1",
                          "--to", "2"], capture_output=True, text=True, timeout=60)
    assert out.returncode == 2
    assert "clock goes back" in out.stderr and "replay it whole" in out.stderr
