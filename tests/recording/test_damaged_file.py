"""A damaged file replays up to the damage and says where and why; skipped, it names the lines, each counted once."""

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


def _skip_file(tmp_path: Path, short_t: str = "2.06") -> tuple[Path, int, int]:
    """A 500-row recording (seq 0..499) with a bad number at t = 2.0 and a short line at ``short_t``."""
    csv = _recording(tmp_path)
    bad, short = _line_of(csv, "2.0"), _line_of(csv, short_t)
    lines = csv.read_text().splitlines()
    lines[bad - 1] = "2.0,200,5e16,#!garbage"
    lines[short - 1] = f"{short_t},{round(float(short_t) * 100)}"
    csv.write_text("\n".join(lines) + "\n")
    return csv, bad, short


def test_replay_skip_names_every_skipped_line_and_says_they_were_kept(tmp_path: Path) -> None:
    csv, bad, short = _skip_file(tmp_path)
    out = subprocess.run([*REGIME, "replay", str(csv), "--headless", "--json", "--quiet", "--on-damage", "skip"],
                         capture_output=True, text=True, timeout=120, cwd=ROOT, env=env())
    assert out.returncode == 0, out.stderr
    records = [json.loads(x) for x in out.stdout.splitlines() if x.startswith("{")]
    summary = [r for r in records if r.get("type") == "summary"][-1]
    expected = (f"{csv.name}: end of file; 2 damaged lines skipped (lines {bad}, {short}; first: unreadable "
                f"number '#!garbage' in column Te), each rejected as damaged_line and kept with the rejections")
    assert summary["message"] == expected
    assert out.stderr.strip().splitlines()[-1] == f"regime replay: {csv}: {expected.split(': ', 1)[1]}"
    assert "replayed up to line" not in out.stdout + out.stderr       # it went past the damage
    assert summary["damage"] == {"line": bad, "reason": "unreadable number '#!garbage' in column Te",
                                 "mode": "skip", "skipped": 2, "lines": [bad, short], "lines_cap": 100}
    assert summary["accepted"] == 498 and summary["rejected"] == {"damaged_line": 2}
    assert summary["lost"] == 0                                        # the two seq gaps are the rejected rows
    assert summary["data_time_last"] == 4.99


def test_skip_status_during_the_run_counts_the_skipped_lines(tmp_path: Path) -> None:
    csv, bad, short = _skip_file(tmp_path, "4.0")                 # 4 kB blocks: the two are in different blocks
    src = CsvSource(csv, chunk=4096, on_damage="skip")
    src.open()
    seen: list[str] = []
    while True:
        p = src.poll(0.0)
        if not seen or seen[-1] != p.status.message:
            seen.append(p.status.message)
        if p.status.state is LinkState.ENDED:
            break
    assert (f"{csv.name}: damaged at line {bad} (unreadable number '#!garbage' in column Te); skipping, "
            f"1 skipped so far") in seen
    assert f"{csv.name}: damaged at line {short} (2 fields, expected 4); skipping, 2 skipped so far" in seen
    assert src.skipped == 2 and src.skipped_lines == [bad, short]


def test_skip_many_damaged_lines_are_counted_and_capped(tmp_path: Path) -> None:
    csv = _recording(tmp_path)
    lines = csv.read_text().splitlines()
    first = _line_of(csv, "0.0")
    damaged = [first + 2 * k for k in range(120)]                  # every other row of the first 240
    for number in damaged:
        lines[number - 1] = lines[number - 1] + ",x"                # one field too many
    csv.write_text("\n".join(lines) + "\n")
    n, rejections, src = _play(csv, on_damage="skip")
    assert n == 380 and len(rejections) == 120
    summary = src.damage_summary()
    assert summary is not None and summary["skipped"] == 120 and summary["lines"] == damaged[:100]
    assert summary["lines_cap"] == 100 and summary["mode"] == "skip"
    shown = ", ".join(str(x) for x in damaged[:5])
    assert (f"120 damaged lines skipped (lines {shown} (+115 more); first: 5 fields, expected 4), each rejected "
            f"as damaged_line and kept with the rejections") in src.status().message


def _skip_through_a_session(csv: Path) -> tuple[CsvSource, dict]:
    """Replay ``csv`` with --on-damage skip through a real Session; the source and its summary."""
    from monitor.session import Session

    src = CsvSource(csv, chunk=4096, on_damage="skip")
    session = Session(src, load_config(None), [], live=False)
    session.open()
    try:
        session.run()
        return src, session.summary()
    finally:
        session.close()


def test_skip_counts_each_reading_once_through_the_session(tmp_path: Path) -> None:
    csv, bad, short = _skip_file(tmp_path)
    lines = csv.read_text().splitlines()
    mid = _line_of(csv, "3.5")
    lines[mid - 1] = "3.5,350,5e16"                                # a third one, in another block
    csv.write_text("\n".join(lines) + "\n")
    src, summary = _skip_through_a_session(csv)
    rows = sum(1 for ln in lines[1:] if ln and not ln.startswith("#"))
    assert rows == 500
    assert summary["accepted"] == 497 and summary["rejected"] == {"damaged_line": 3} and summary["lost"] == 0
    assert summary["accepted"] + summary["rejected_total"] + summary["lost"] == rows
    assert src.skipped == 3 and src.skipped_lines == [bad, short, mid]


def test_skip_lines_read_again_after_a_seek_back_count_once(tmp_path: Path) -> None:
    csv, bad, short = _skip_file(tmp_path)
    n, rejections, src = _play(csv, on_damage="skip")
    assert src.seek(0.0) == "back"
    while src.poll(0.0).status.state is not LinkState.ENDED:
        pass
    assert src.skipped == 2 and src.skipped_lines == [bad, short]
    assert "2 damaged lines skipped" in src.status().message


def test_replay_stop_mode_still_says_where_it_stopped(tmp_path: Path) -> None:
    csv, bad, short = _skip_file(tmp_path)
    out = subprocess.run([*REGIME, "replay", str(csv), "--headless", "--json", "--quiet"], capture_output=True,
                         text=True, timeout=120, cwd=ROOT, env=env())
    assert out.returncode == 0, out.stderr
    summary = [json.loads(x) for x in out.stdout.splitlines() if '"summary"' in x][-1]
    why = "unreadable number '#!garbage' in column Te"
    assert summary["message"] == f"{csv.name}: replayed up to line {bad}, damaged there: {why}"
    last = out.stderr.strip().splitlines()[-1]
    assert last == f"regime replay: {csv}: replayed up to line {bad}, damaged there: {why}"
    assert summary["damage"]["line"] == bad and summary["damage"]["reason"] == why
    assert summary["accepted"] == 200 and summary["rejected"] == {"damaged_line": 1} and summary["lost"] == 0


def test_a_line_missing_a_field_in_the_middle_does_not_lend_another_column_as_its_seq(tmp_path: Path) -> None:
    # its t field lost: the seq column then holds the ne value; trusting it would count the line
    # twice (rejected, and lost by the gap at its real seq)
    csv = _recording(tmp_path)
    mid = _line_of(csv, "3.5")
    lines = csv.read_text().splitlines()
    fields = lines[mid - 1].split(",")
    lines[mid - 1] = ",".join(fields[1:])                           # drop t: every column shifts left
    csv.write_text("\n".join(lines) + "\n")
    _src, summary = _skip_through_a_session(csv)
    assert summary["rejected"] == {"damaged_line": 1}
    assert summary["accepted"] + summary["rejected_total"] + summary["lost"] == 500
