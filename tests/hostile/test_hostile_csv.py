"""Hostile CSV files through the real CsvSource and `regime replay` (a subprocess): line ends, marks, text, limits."""

from __future__ import annotations

import json
import subprocess
import sys
import warnings
from pathlib import Path

import numpy as np
import pytest

from adapters.base import FatalSourceError, LinkState
from adapters.batch import Batch, Rejection
from adapters.csv_blocks import MAX_CSV_LINE
from adapters.csv_file import CsvSource

ROOT = Path(__file__).resolve().parents[2]


def _play(path: Path, **kw: object) -> tuple[list[Batch], list[Rejection], CsvSource]:
    src = CsvSource(path, **kw)  # type: ignore[arg-type]
    src.open()
    batches: list[Batch] = []
    rejections: list[Rejection] = []
    for _ in range(10_000):
        p = src.poll(0.0)
        batches += p.batches
        rejections += p.rejections
        if src.status().state is LinkState.ENDED:
            break
    src.close()
    return batches, rejections, src


def _n(batches: list[Batch]) -> int:
    return sum(len(b) for b in batches)


def _replay(path: Path) -> dict[str, object]:
    out = subprocess.run([sys.executable, "-m", "monitor", "replay", str(path), "--headless", "--json", "--speed", "max"],
                         cwd=ROOT, capture_output=True, text=True, timeout=60,
                         env={"PYTHONPATH": str(ROOT), "PATH": "/usr/bin:/bin"})
    summary = [json.loads(x) for x in out.stdout.splitlines() if '"summary"' in x]
    assert out.returncode == 0 and summary, (out.returncode, out.stderr[-500:])
    return summary[-1]


# point 3: an instrument that ends lines with CR only
@pytest.mark.parametrize("end", [b"\r", b"\n", b"\r\n"])
def test_cr_lf_and_crlf_line_ends_all_read(tmp_path: Path, end: bytes) -> None:
    rows = [b"%.3f,%.3e,3.0" % (i * 0.001, 1e17 + i * 1e14) for i in range(2000)]
    path = tmp_path / "feed.csv"
    path.write_bytes(end.join([b"t,ne,Te"] + rows) + end)
    batches, rejections, _ = _play(path, chunk=4096)          # small blocks: a CRLF split across reads too
    assert _n(batches) == 2000 and rejections == []
    t = np.concatenate([b.t for b in batches])
    assert np.allclose(t, np.arange(2000) * 0.001)
    if end == b"\r":
        assert _replay(path)["accepted"] == 2000


# point 4: a text column is ignored and named once, the numbers still read
def test_text_column_is_ignored_and_named(tmp_path: Path) -> None:
    path = tmp_path / "notes.csv"
    path.write_text("t,ne,Te,note\n0.0,1e17,3,ok\n0.1,1.1e17,3,fine\n0.2,1.2e17,3,arc seen\n")
    batches, rejections, src = _play(path, on_damage="skip")
    assert _n(batches) == 3 and rejections == []
    assert src.ignored_columns == ("note",) and "ignoring text column note" in src.status().message
    assert "note" not in batches[0].columns
    s = _replay(path)
    assert s["accepted"] == 3 and s["rejected_total"] == 0


def test_a_mapped_column_is_parsed_as_numbers_even_when_its_first_value_is_bad(tmp_path: Path) -> None:
    path = tmp_path / "dens.csv"
    path.write_text("t,dens,Te\n0.0,oops,3\n0.1,1.1e17,3\n")
    batches, rejections, src = _play(path, on_damage="skip", numeric=("dens",))
    assert src.ignored_columns == () and _n(batches) == 1
    assert [r.reason for r in rejections] == ["damaged_line"]


# point 5: a UTF-8 byte-order mark is skipped; invisible characters are shown escaped
def test_byte_order_mark_is_skipped_and_invisible_characters_are_shown(tmp_path: Path) -> None:
    path = tmp_path / "bom.csv"
    path.write_bytes(b"\xef\xbb\xbft,ne,Te\n0.0,1e17,3\n")
    batches, _, _ = _play(path)
    assert _n(batches) == 1
    odd = tmp_path / "odd.csv"
    odd.write_bytes("\u200bt,ne\n0,1e17\n".encode())          # a zero-width space before the t
    with pytest.raises(FatalSourceError, match=r"\\u200bt"):
        CsvSource(odd).open()


# point 7: a header naming a column twice is refused, as a text line with a key twice is
def test_duplicate_header_column_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "dup.csv"
    path.write_text("t,ne,ne\n0,-1,5e16\n")
    with pytest.raises(FatalSourceError, match="duplicate_key.*'ne'"):
        CsvSource(path).open()


# point 8: a time that is not finite or implausibly far is a damaged line with its reason, no numpy warning
def test_implausible_time_is_refused_with_its_reason_and_seq(tmp_path: Path) -> None:
    path = tmp_path / "t.csv"
    path.write_text("t,seq,ne\n0.0,0,1e17\n1e300,1,1e17\n0.2,2,1e17\ninf,3,1e17\n0.4,4,1e17\n")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        batches, rejections, _ = _play(path, on_damage="skip")
    assert _n(batches) == 3
    assert [(r.reason, r.count, r.seq_first, r.seq_last) for r in rejections] == [("bad_time", 1, 1, 1),
                                                                                ("bad_time", 1, 3, 3)]


# point 6: a file made of one enormous line is refused with a bound, quickly and in bounded memory
def test_one_enormous_data_line_is_refused_as_oversized(tmp_path: Path) -> None:
    path = tmp_path / "long.csv"
    with open(path, "wb") as fh:
        fh.write(b"t,ne\n0,1e17\n")
        fh.write(b"1" * (8 * MAX_CSV_LINE))                     # no line end for 512 KiB
        fh.write(b"\n0.2,1e17\n")
    batches, rejections, src = _play(path, on_damage="skip", chunk=65536)
    assert _n(batches) == 2
    assert [r.reason for r in rejections] == ["oversized"] and len(rejections[0].raw) <= 4096
    assert src.damage is not None and src.damage[0] == 3


def test_enormous_header_line_is_a_clear_error(tmp_path: Path) -> None:
    path = tmp_path / "head.csv"
    path.write_bytes(b"t" + b",x" * MAX_CSV_LINE + b"\n")
    with pytest.raises(FatalSourceError, match="longer than"):
        CsvSource(path).open()


# issue 10 contract: a damaged line carries the seq it shows
def test_damaged_line_carries_its_seq(tmp_path: Path) -> None:
    path = tmp_path / "d.csv"
    path.write_text("t,seq,ne\n0,10,1e17\n0.1,11,abc\n0.2,12,1e17\n")
    _, rejections, _ = _play(path, on_damage="skip")
    assert [(r.reason, r.count, r.seq_first, r.seq_last) for r in rejections] == [("damaged_line", 1, 11, 11)]
