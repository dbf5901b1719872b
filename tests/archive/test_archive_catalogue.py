"""The catalogue: incremental re-runs, damaged and in-progress files, versions per config, CSV export, a kill -9 mid-build."""

from __future__ import annotations

import csv
import io
import os
import signal
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest
from make_shots import ROOT, settle, write_shot

from monitor.archive import build as build_mod
from monitor.archive import catalogue
from monitor.archive.build import build
from monitor.archive.where import parse_where


def _rows(folder: Path, version: int | None = None) -> dict[str, dict[str, object]]:
    db = catalogue.open_readonly(folder)
    try:
        v = catalogue.latest_version(db) if version is None else version
        assert v is not None
        return {str(r["file"]): r for r in catalogue.select(db, v)}
    finally:
        db.close()


def test_a_rerun_on_an_unchanged_archive_reads_nothing(shots: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    first = build(shots)
    assert (first.total, first.read, first.unchanged) == (6, 6, 0)
    before = _rows(shots)
    calls: list[str] = []
    real = build_mod.summarise
    monkeypatch.setattr(build_mod, "summarise", lambda p, c=None: calls.append(p) or real(p, c))
    again = build(shots)
    assert (again.read, again.unchanged, calls) == (0, 6, [])
    assert _rows(shots) == before                 # same rows, build stamps too: nothing rewritten
    write_shot(shots / "day2", 9, seconds=5.0, rate=500.0)        # one new
    (shots / "day2" / "shot-0001.csv").unlink()                   # one gone
    with open(shots / "day2" / "shot-0002.csv", "a") as fh:       # one changed (a row appended)
        fh.write("1798768805.0,2500,1e17,nan,nan,2e16,nan,nan\n")
    settle(shots)
    third = build(shots)
    assert (third.read, third.unchanged, third.removed) == (2, 4, 1)
    assert sorted(os.path.basename(p) for p in calls) == ["shot-0002.csv", "shot-0009.csv"]
    rows = _rows(shots)
    assert "day2/shot-0001.csv" not in rows and rows["day2/shot-0009.csv"]["shot"] == 9
    assert rows["day2/shot-0002.csv"]["accepted"] == int(before["day2/shot-0002.csv"]["accepted"] or 0) + 1


def test_a_damaged_file_is_catalogued_with_its_damage(shots: Path) -> None:
    bad = shots / "day2" / "shot-0003.csv"
    text = bad.read_text().splitlines(keepends=True)
    bad.write_text("".join(text[:400] + ["1798772410.0,oops,not-a-number\n"] + text[400:]))
    (shots / "empty.csv").write_text("")
    settle(shots)
    result = build(shots)
    assert result.total == 7 and result.damaged == 2
    rows = _rows(shots)
    assert rows["day2/shot-0003.csv"]["status"] == "damaged"
    assert "line 401" in str(rows["day2/shot-0003.csv"]["damage"])
    before = sum(1 for line in text[1:400] if not line.startswith("#"))     # the data rows before it
    assert rows["day2/shot-0003.csv"]["accepted"] == before > 300
    assert rows["empty.csv"]["status"] == "unreadable" and "header" in str(rows["empty.csv"]["damage"])
    assert rows["argon_rf_excursion.csv"]["status"] == "ok"


def test_a_file_being_recorded_is_listed_in_progress_then_summarised(shots: Path) -> None:
    write_shot(shots, 7, seconds=2.0, rate=500.0)                 # just written: mtime now
    build(shots)
    row = _rows(shots)["shot-0007.csv"]
    assert row["status"] == "in_progress" and row["shot"] == 7 and row["accepted"] is None
    assert row["started"] == "2027-01-01T07:00:00.000000+00:00"
    settle(shots)
    result = build(shots)
    assert result.read == 1 and _rows(shots)["shot-0007.csv"]["status"] == "ok"


def test_another_config_is_a_new_version_and_the_old_one_stays(shots: Path) -> None:
    v1 = build(shots).version
    old = _rows(shots, v1)
    v2 = build(shots, config_path=str(ROOT / "replay_data" / "helium_microwave_envelope.toml")).version
    assert v2 != v1
    new = _rows(shots, v2)
    assert _rows(shots, v1) == old
    assert new["argon_rf_excursion.csv"]["config_fingerprint"] != old["argon_rf_excursion.csv"]["config_fingerprint"]
    assert "over_cutoff" not in str(old["argon_rf_excursion.csv"]["alarm_names"])
    db = catalogue.open_readonly(shots)
    try:
        assert [v.number for v in catalogue.versions(db)] == [v1, v2]
        hits = catalogue.select(db, v2, parse_where('alarm("over_cutoff")'), columns=["file"])
    finally:
        db.close()
    assert {"argon_rf_excursion.csv", "helium_microwave_cutoff.csv"} <= {str(r["file"]) for r in hits}
    assert build(shots, config_path=str(ROOT / "replay_data" / "helium_microwave_envelope.toml")).read == 0


def test_csv_export_reads_back(shots: Path) -> None:
    build(shots)
    db = catalogue.open_readonly(shots)
    try:
        rows = catalogue.select(db, 1, parse_where("shot between 2 and 3"), [("shot", True)])
    finally:
        db.close()
    out = io.StringIO()
    catalogue.export_csv(rows, out)
    back = list(csv.DictReader(io.StringIO(out.getvalue())))
    assert [r["file"] for r in back] == ["day2/shot-0003.csv", "day2/shot-0002.csv"]
    assert float(back[0]["ne_median"]) == rows[0]["ne_median"]


_CHILD = """
import sys, time
sys.path.insert(0, {root!r})
from monitor.archive.build import build
def progress(done, total, readings):
    print("ROW", done, flush=True)
    time.sleep(60)          # held here until the parent kills the process
build({folder!r}, progress=progress)
"""


def test_kill_9_during_a_build_leaves_the_previous_catalogue(shots: Path) -> None:
    build(shots)
    before = _rows(shots)
    for n in range(20, 23):
        write_shot(shots / "day3", n, seconds=5.0, rate=500.0)
    settle(shots)
    child = subprocess.Popen([sys.executable, "-c", _CHILD.format(root=str(ROOT), folder=str(shots))],
                             stdout=subprocess.PIPE, text=True, cwd=ROOT)
    try:
        assert child.stdout is not None
        assert child.stdout.readline().startswith("ROW 1")       # mid-build: one new row in the copy
        temps = list(shots.glob(".regime-catalogue-*.tmp"))
        assert temps, "the build writes into a temporary copy"
        os.kill(child.pid, signal.SIGKILL)
        assert child.wait(timeout=30) == -signal.SIGKILL
    finally:
        if child.poll() is None:
            child.kill()
            child.wait()
    db = catalogue.open_readonly(shots)
    try:
        assert db.execute("PRAGMA integrity_check").fetchone() == ("ok",)
    finally:
        db.close()
    assert _rows(shots) == before
    result = build(shots)
    assert result.read == 3 and not list(shots.glob(".regime-catalogue-*.tmp"))


def test_a_second_build_at_the_same_time_is_refused(shots: Path) -> None:
    import fcntl

    with open(shots / ".regime-catalogue.lock", "a+b") as lock:
        fcntl.flock(lock.fileno(), fcntl.LOCK_EX)
        with pytest.raises(catalogue.CatalogueBusy):
            build(shots)


def test_the_readonly_connection_cannot_write(shots: Path) -> None:
    build(shots)
    db = catalogue.open_readonly(shots)
    try:
        with pytest.raises(sqlite3.OperationalError, match="readonly"):
            db.execute("DELETE FROM shots")
    finally:
        db.close()
