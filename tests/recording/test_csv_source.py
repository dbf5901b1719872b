"""CsvSource: plain CSV with no config, chunked streaming, speed in data time, pause/step/seek, --from/--to."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from adapters.base import LinkState
from adapters.csv_file import CsvSource


class FakeClock:
    def __init__(self) -> None:
        self.now = 100.0

    def __call__(self) -> float:
        return self.now


def _write(path: Path, n: int = 1000, dt: float = 0.01) -> Path:
    t = np.arange(n) * dt
    lines = ["t,ne,Te,probe_bias"] + [f"{float(x)!r},{1e16 * (1 + i % 7)!r},2.5,-30.0" for i, x in enumerate(t)]
    path.write_text("\n".join(lines) + "\n")
    return path


def _drain(src: CsvSource, limit: int = 100000) -> tuple[np.ndarray, list]:
    ts, batches = [], []
    for _ in range(limit):
        p = src.poll(0.0)
        for b in p.batches:
            ts.append(b.t)
            batches.append(b)
        if p.status is not None and p.status.state is LinkState.ENDED:
            break
    return (np.concatenate(ts) if ts else np.empty(0)), batches


def test_canonical_columns_need_no_config_and_others_pass_as_raw_keys(tmp_path: Path) -> None:
    src = CsvSource(_write(tmp_path / "plain.csv"))
    src.open()
    t, batches = _drain(src)
    assert len(t) == 1000 and np.all(np.diff(t) > 0)
    b = batches[0]
    assert set(b.columns) == {"ne", "Te", "probe_bias"} and b.seq is None and b.t_from_source
    assert src.name == "plain.csv" and src.status().state is LinkState.ENDED


def test_small_chunks_stream_with_bounded_memory(tmp_path: Path) -> None:
    path = _write(tmp_path / "big.csv", n=20000)
    src = CsvSource(path, chunk=8192)
    src.open()
    biggest = 0
    total = 0
    while True:
        p = src.poll(0.0)
        biggest = max(biggest, src._rows.nbytes)
        total += sum(len(b) for b in p.batches)
        if p.status.state is LinkState.ENDED:
            break
    assert total == 20000
    assert biggest < 8192 * 8          # a parsed block never holds more than about a chunk's worth of lines
    assert len(src._index) > 20        # and the file was read in many blocks


def test_speed_follows_data_time(tmp_path: Path) -> None:
    clock = FakeClock()
    src = CsvSource(_write(tmp_path / "s.csv"), speed=2.0, clock=clock)
    src.open()
    first = src.poll(0.0)
    assert len(first.batches) == 1 and first.batches[0].t[-1] == 0.0      # only t=0 is due at once
    clock.now += 1.0                                                      # 1 s wall = 2 s data at x2
    got = np.concatenate([b.t for b in src.poll(0.0).batches])
    assert got[0] == 0.01 and abs(got[-1] - 2.0) < 1e-9
    src.set_speed(10.0)
    clock.now += 0.5                                                      # 0.5 s wall = 5 s data at x10
    got = np.concatenate([b.t for b in src.poll(0.0).batches])
    assert abs(got[-1] - 7.0) < 1e-9
    assert src.position()[3] == 10.0


def test_pause_step_seek_and_position(tmp_path: Path) -> None:
    clock = FakeClock()
    src = CsvSource(_write(tmp_path / "p.csv"), speed=1.0, clock=clock, step_seconds=0.05)
    src.open()
    assert src.position() == (0.0, 0.0, 9.99, 1.0, False)
    src.poll(0.0)
    src.pause()
    clock.now += 5.0
    assert src.poll(0.0).batches == []                                    # paused: nothing flows
    src.step()
    stepped = src.poll(0.0).batches[0].t
    assert stepped[0] == 0.01 and abs(stepped[-1] - 0.05) < 1e-9          # one step of 0.05 s data time
    assert src.poll(0.0).batches == [] and src.position()[4] is True
    assert src.seek(7.5) == "forward"
    assert src.position()[0] == 7.5 and src.catching_up                   # at the target at once
    skipped, _ = _drain_now(src)                                           # paused, and no wall time passes
    np.testing.assert_allclose(skipped, np.arange(6, 750) * 0.01)          # the stretch 0.06 .. 7.49 s, at once
    assert src.poll(0.0).batches == [] and src.position()[0] == 7.5 and src.position()[4] is True
    assert not src.catching_up
    src.resume()
    got = src.poll(0.0).batches[0].t
    assert abs(got[0] - 7.5) < 1e-9 and len(got) == 1                      # pacing resumes at 7.5 (1x, no wall time)
    assert src.seek(1.0) == "back"                                         # back again: no stretch is played
    got = src.poll(0.0).batches[0].t
    assert abs(got[0] - 1.0) < 1e-9 and abs(src.position()[0] - 1.0) < 1e-9


def _drain_now(src: CsvSource) -> tuple[np.ndarray, int]:
    """Every batch the source releases without any wall time passing; and how many polls that took."""
    ts, polls = [], 0
    while True:
        p = src.poll(0.0)
        polls += 1
        if not p.batches:
            return (np.concatenate(ts) if ts else np.empty(0)), polls
        ts.extend(b.t for b in p.batches)


def test_forward_seek_releases_the_stretch_in_bounded_batches_then_paces(tmp_path: Path) -> None:
    clock = FakeClock()
    src = CsvSource(_write(tmp_path / "f.csv", n=5000), speed=1.0, clock=clock, chunk=8192, batch_rows=300)
    src.open()
    assert len(src.poll(0.0).batches[0].t) == 1                            # t = 0 only, at 1x
    assert src.seek(40.0) == "forward"
    skipped, polls = _drain_now(src)
    # 0.01 .. 39.99 s at once, none twice, none lost; then 1x from 40.0, whose row is due at once
    np.testing.assert_allclose(skipped, np.arange(1, 4001) * 0.01)
    assert polls >= 4000 // 300                                            # batch_rows bounds every batch
    clock.now += 0.5
    got = np.concatenate([b.t for b in src.poll(0.0).batches])
    assert abs(got[0] - 40.01) < 1e-9 and abs(got[-1] - 40.5) < 1e-9
    assert src.seek(src.position()[0] + 2.0) == "forward"                 # the seek key pressed twice, before
    assert src.seek(src.position()[0] + 2.0) == "forward"                 # the stretch was played: 4 s on
    np.testing.assert_allclose(_drain_now(src)[0], np.arange(4051, 4451) * 0.01)   # 40.51 .. 44.5
    assert src.seek(src.position()[0] + 0.001) == "forward"               # inside the gap to the next row
    assert _drain_now(src)[0].size == 0
    assert src.seek(1e9) == "forward"                                      # past the end: all of it, then ended
    rest, _ = _drain_now(src)
    assert abs(rest[0] - 44.51) < 1e-9 and abs(rest[-1] - 49.99) < 1e-9
    assert src.poll(0.0).status.state is LinkState.ENDED


def test_seek_back_keeps_the_block_index_sorted(tmp_path: Path) -> None:
    src = CsvSource(_write(tmp_path / "i.csv", n=5000), chunk=8192)
    src.open()
    _drain(src)
    blocks = list(src._index)
    for target in (10.0, 2.0, 30.0, 0.0):
        assert src.seek(target) == "back"
        t, _ = _drain(src)
        assert abs(t[0] - target) < 1e-9 and abs(t[-1] - 49.99) < 1e-9
    assert src._index == blocks                                            # read again, indexed once


def test_from_and_to(tmp_path: Path) -> None:
    src = CsvSource(_write(tmp_path / "ft.csv"), start=2.0, stop=3.0)
    src.open()
    t, _ = _drain(src)
    assert abs(t[0] - 2.0) < 1e-9 and abs(t[-1] - 3.0) < 1e-9 and len(t) == 101
    assert src.position()[1] == 2.0 and src.position()[2] == 3.0


def test_empty_fields_are_missing_values_and_time_scale(tmp_path: Path) -> None:
    path = tmp_path / "gaps.csv"
    path.write_text("# a comment before the header\ntime_ms,dens\n0,1.0\n10,\n20,3.0\n")
    src = CsvSource(path, time_column="time_ms", time_scale=1e-3)
    src.open()
    t, batches = _drain(src)
    np.testing.assert_allclose(t, [0.0, 0.01, 0.02])
    col = np.concatenate([b.columns["dens"] for b in batches])
    assert col[0] == 1.0 and np.isnan(col[1]) and col[2] == 3.0


def test_position_before_open_is_none_not_an_error(tmp_path) -> None:
    # the screen asks for the position while the session's thread may still be opening the file
    from adapters.csv_file import CsvSource

    path = tmp_path / "s.csv"
    path.write_text("t,ne,Te\n0.0,5e16,3.0\n0.1,5e16,3.0\n")
    src = CsvSource(path, speed=1.0)
    assert src.position() is None and src.first_time is None and src.end_time is None
    src.open()
    try:
        assert src.position()[1] == 0.0 and src.first_time == 0.0
    finally:
        src.close()
