"""A damaged or truncated file replays up to the damage and says where (line number) and why."""

from __future__ import annotations

import json
import subprocess
from pathlib import Path

import numpy as np

from adapters.base import LinkState
from adapters.csv_file import CsvSource
from monitor.config import load_config
from monitor.recording import Recorder, RecordingOptions

from recording_helpers import REGIME, ROOT, env, frame


def _recording(tmp_path: Path, n: int = 500) -> Path:
    rec = Recorder(tmp_path / "rec", load_config(None), source_name="sim:test", options=RecordingOptions(split="none"))
    t = np.arange(n) * 0.01
    rec.on_frame(frame(t, ne=np.full(n, 5e16), Te=np.full(n, 3.0), seq=np.arange(n)))
    rec.close()
    (csv,) = (tmp_path / "rec").glob("shot-*.csv")
    return csv


def _play(path: Path, **kw: object) -> tuple[int, list, CsvSource]:
    src = CsvSource(path, chunk=4096, **kw)
    src.open()
    n, rejections = 0, []
    while True:
        p = src.poll(0.0)
        n += sum(len(b) for b in p.batches)
        rejections += p.rejections
        if p.status.state is LinkState.ENDED:
            return n, rejections, src


def _line_of(path: Path, t_text: str) -> int:
    for i, line in enumerate(path.read_text().splitlines(), start=1):
        if line.startswith(t_text + ","):
            return i
    raise AssertionError(t_text)


def test_truncated_recording_stops_at_the_cut_with_its_line(tmp_path: Path) -> None:
    csv = _recording(tmp_path)
    data = csv.read_bytes()
    csv.write_bytes(data[: len(data) - 9])            # a write cut off inside the last line
    n, rejections, src = _play(csv)
    assert n == 499
    assert len(rejections) == 1 and rejections[0].reason == "truncated_line"
    last_line = len(data[: len(data) - 9].split(b"\n"))
    assert src.damage is not None and src.damage[0] == last_line
    assert f"line {last_line}" in src.status().message and "cut off" in src.status().message


def test_garbage_mid_file_stops_there_or_is_skipped(tmp_path: Path) -> None:
    csv = _recording(tmp_path)
    where = _line_of(csv, "2.0")
    lines = csv.read_text().splitlines()
    lines[where - 1] = "2.0,200,5e16,#!garbage"
    lines[where + 5] = "2.06,206"                     # and a short line further on
    csv.write_text("\n".join(lines) + "\n")
    n, rejections, src = _play(csv)
    assert n == 200                                   # rows t = 0.00 .. 1.99
    assert [r.reason for r in rejections] == ["damaged_line"]
    assert rejections[0].raw == b"2.0,200,5e16,#!garbage" and f"line {where}" in rejections[0].detail
    assert src.damage is not None and src.damage[0] == where and "unreadable number" in src.damage[1]
    n2, rej2, src2 = _play(csv, on_damage="skip")
    assert n2 == 498 and [r.reason for r in rej2] == ["damaged_line", "damaged_line"]
    assert src2.damage[0] == where and "2 fields, expected 4" in rej2[1].detail


def test_replay_command_reports_the_damage(tmp_path: Path) -> None:
    csv = _recording(tmp_path)
    text = csv.read_text().replace("\n3.0,300,", "\n3.0,300,x", 1)
    csv.write_text(text)
    where = _line_of(csv, "3.0")
    out = subprocess.run([*REGIME, "replay", str(csv), "--headless", "--json", "--quiet"], capture_output=True,
                         text=True, timeout=120, cwd=ROOT, env=env())
    assert out.returncode == 0, out.stderr
    summary = [json.loads(x) for x in out.stdout.splitlines() if '"summary"' in x][-1]
    assert summary["accepted"] == 300
    assert summary["damage"]["line"] == where and "unreadable number" in summary["damage"]["reason"]
    assert f"line {where}" in out.stderr
    assert summary["rejected"].get("damaged_line") == 1
