"""The recorder's files: header and metadata, numpy/pandas read them as they are, journal and rejects beside."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd

from adapters.batch import Rejection
from monitor.alarms.events import AlarmEvent, AlarmState, Priority
from monitor.config import load_config
from monitor.recording import Recorder, RecordingOptions, parse_recording
from monitor.recording.csvformat import read_info

from recording_helpers import data_rows, frame


def _record(tmp_path: Path, config_path: Path | None = None, **opts: object) -> tuple[Recorder, Path]:
    out = tmp_path / "rec"
    config = load_config(config_path)
    rec = Recorder(out, config, source_name="tcp://127.0.0.1:5555", options=RecordingOptions(**opts))
    return rec, out


def test_every_row_with_metadata_and_readable_by_numpy_and_pandas(tmp_path: Path, envelope: Path) -> None:
    rec, out = _record(tmp_path, envelope, split="none")
    t = np.arange(2000) * 1e-3 + 1000.0
    ne = np.linspace(1e16, 2e17, 2000)
    te = np.where(np.arange(2000) % 50 == 0, 3.0, np.nan)
    for a in range(0, 2000, 250):
        rec.on_frame(frame(t[a:a + 250], ne=ne[a:a + 250], Te=te[a:a + 250], seq=np.arange(a, a + 250)))
    rec.close()
    (csv,) = sorted(out.glob("shot-*.csv"))
    info = read_info(csv)
    assert info.ours and info.shot == 1 and info.source == "tcp://127.0.0.1:5555"
    assert info.units == {"t": "s", "seq": "1", "ne": "m^-3", "Te": "eV"}
    assert info.start is not None and info.start[-6] in "+-"          # ISO 8601 with a zone offset
    assert any(line.startswith("ne_high ne high=1.5e+17") for line in info.limits)
    assert info.config_toml is not None and "ne_high" in info.config_toml
    a = np.loadtxt(csv, delimiter=",", comments="#", skiprows=1)
    assert a.shape == (2000, 4)
    np.testing.assert_array_equal(a[:, 0], t)                          # shortest round-trip: exact
    np.testing.assert_array_equal(a[:, 2], ne)
    np.testing.assert_array_equal(a[:, 1], np.arange(2000))
    df = pd.read_csv(csv, comment="#")
    assert list(df.columns) == ["t", "seq", "ne", "Te"] and len(df) == 2000
    assert int(df["Te"].notna().sum()) == 40
    g = np.genfromtxt(csv, delimiter=",", comments="#", names=True)
    assert g.dtype.names == ("t", "seq", "ne", "Te") and len(g) == 2000


def test_journal_and_rejects_beside_the_file(tmp_path: Path) -> None:
    rec, out = _record(tmp_path, split="none")
    rec.on_frame(frame([1.0, 2.0], ne=[1e17, 1e17], Te=[3.0, 3.0], seq=np.array([1, 2])))
    ev = AlarmEvent(time=1.5, wall=0.0, alarm="ne_high", state=AlarmState.UNACKNOWLEDGED,
                    previous=AlarmState.NORMAL, quantity="ne", value=2e17, limit=1.5e17, priority=Priority.HIGH)
    rec.on_alarm(ev)
    rec.on_rejections([Rejection("s", "malformed", b"ne=abc", 5.0, "not a number"),
                       Rejection("s", "bad_json", b"\xff\xfe", 6.0)])
    rec.close()
    (csv,) = out.glob("shot-*.csv")
    stem = csv.name[:-4]
    journal = [json.loads(x) for x in (out / f"{stem}.alarms.jsonl").read_text().splitlines()]
    assert [(j["alarm"], j["state"], j["time"]) for j in journal] == [("ne_high", "unacknowledged", 1.5)]
    rejects = [json.loads(x) for x in (out / f"{stem}.rejects.jsonl").read_text().splitlines()]
    assert [r["reason"] for r in rejects] == ["malformed", "bad_json"]
    assert rejects[0]["raw"] == "ne=abc" and rejects[1]["raw_base64"] == "//4="
    session = list(out.glob("session-*.alarms.jsonl"))
    assert len(session) == 1 and "ne_high" in session[0].read_text()


def test_sigma_columns_only_where_a_reading_was(tmp_path: Path) -> None:
    rec, out = _record(tmp_path, split="none")
    f = frame([0.0, 0.1, 0.2], ne=[1e17, np.nan, 2e17])
    f = type(f)(source=f.source, t=f.t, values={"ne": np.array([1e17, 1e17, 2e17])},
                sigma={"ne": np.array([1e16, 1e16, 2e16])}, raw={"ne": np.array([1e17, np.nan, 2e17])})
    rec.on_frame(f)
    rec.close()
    (csv,) = out.glob("shot-*.csv")
    assert csv.read_text().splitlines()[0] == "t,seq,ne,sigma_ne"
    assert data_rows(csv) == ["0.0,nan,1e+17,1e+16", "0.1,nan,nan,nan", "0.2,nan,2e+17,2e+16"]


def test_shot_counter_continues_in_an_existing_directory(tmp_path: Path) -> None:
    for _ in range(2):
        rec, out = _record(tmp_path, split="none")
        rec.on_frame(frame([1.0], ne=[1e17]))
        rec.close()
    names = sorted(p.name for p in out.glob("shot-*.csv"))
    assert [n[:9] for n in names] == ["shot-0001", "shot-0002"]


def test_new_quantity_mid_shot_continues_in_a_second_part(tmp_path: Path) -> None:
    rec, out = _record(tmp_path, split="none")
    rec.on_frame(frame([1.0, 2.0], ne=[1e17, 1e17]))
    rec.on_frame(frame([3.0], ne=[1e17], B=[0.01]))
    rec.close()
    files = sorted(out.glob("shot-*.csv"), key=lambda p: ("-part" in p.name, p.name))
    assert len(files) == 2 and files[1].name.endswith("-part2.csv")
    assert files[1].read_text().splitlines()[0] == "t,seq,ne,B"
    assert len(data_rows(files[0])) == 2 and len(data_rows(files[1])) == 1


def test_unwritable_directory_is_loud_not_silent(tmp_path: Path, capsys) -> None:
    blocker = tmp_path / "not-a-dir"
    blocker.write_text("x")
    problems: list[str] = []
    rec = Recorder(blocker / "rec", load_config(None), source_name="s", on_problem=problems.append,
                   options=RecordingOptions(split="none"))
    rec.on_frame(frame([1.0, 2.0], ne=[1e17, 1e17]))
    status = rec.status()
    rec.close()
    assert not status.ok and "cannot" in status.message
    assert status.dropped == 2
    assert problems and "regime recorder:" in capsys.readouterr().err


def test_options_table(tmp_path: Path) -> None:
    opts = parse_recording({"pre_trigger": "500ms", "post_trigger": 3, "fsync": True, "subdirectory": "day"}, "x")
    assert (opts.pre_trigger, opts.post_trigger, opts.fsync, opts.subdirectory) == (0.5, 3.0, True, "day")
    import pytest
    from monitor.errors import ConfigError

    for bad in ({"flush_interval": 1.0}, {"bogus": 1}, {"split": "sometimes"}, {"name": "x-{start}"},
                {"pre_trigger": "-1s"}, {"fsync": "yes"}):
        with pytest.raises(ConfigError) as err:
            parse_recording(bad, "cfg.toml")
        assert "cfg.toml" in str(err.value) and "recording." in str(err.value)


def test_fsync_and_day_folders(tmp_path: Path) -> None:
    rec, out = _record(tmp_path, split="none", fsync=True, subdirectory="day", name="run{shot:03d}")
    rec.on_frame(frame([1.767e9, 1.767e9 + 1], ne=[1e17, 1e17]))     # epoch data time: 2025-12-29 UTC
    rec.close()
    files = list(out.glob("*/run*.csv"))
    assert [f.parent.name for f in files] == ["2025-12-29"] and files[0].name == "run001.csv"
    assert rec.status().ok and len(data_rows(files[0])) == 2


def test_start_check_refuses_what_cannot_be_written_and_leaves_nothing(tmp_path: Path) -> None:
    import errno

    import pytest
    from monitor.recording.files import check_writable

    blocker = tmp_path / "a-file"
    blocker.write_text("x")
    for bad in (blocker, blocker / "sub"):
        with pytest.raises(OSError) as err:
            check_writable(bad)
        assert err.value.errno == errno.ENOTDIR
    fresh = tmp_path / "new" / "deeper"
    check_writable(fresh)                              # created, parents and all
    assert fresh.is_dir() and list(fresh.iterdir()) == []   # the probe file is gone again


def test_file_deleted_mid_run_raises_the_alarm_and_counts_the_loss(tmp_path: Path) -> None:
    import shutil

    clock = iter(range(10**9))
    rec = Recorder(tmp_path / "rec", load_config(None), source_name="s",
                   options=RecordingOptions(split="none"), clock=lambda: 1000.0 + next(clock))
    rec.on_frame(frame([1.0, 2.0], ne=[1e17, 1e17]))
    assert rec.status().rows_written == 2 and rec.status().ok
    shutil.rmtree(tmp_path / "rec")                   # the operator's clean-up, during the run
    rec.on_frame(frame([3.0, 4.0, 5.0], ne=[1e17, 1e17, 1e17]))
    during = rec.status()
    rec.close()
    end = rec.status()
    # without the check the rows went into the deleted file: written, no alarm, nothing on disk
    assert not during.ok and "deleted" in during.message
    assert end.rows_written == 2 and end.dropped == 3 and not end.complete


