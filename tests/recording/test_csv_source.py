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
    src.seek(7.5)
    src.resume()
    got = src.poll(0.0).batches[0].t
    assert abs(got[0] - 7.5) < 1e-9
    src.seek(1.0)                                                          # back again
    got = src.poll(0.0).batches[0].t
    assert abs(got[0] - 1.0) < 1e-9 and abs(src.position()[0] - 1.0) < 1e-9


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
