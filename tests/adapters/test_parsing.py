"""The pure parsers and the line framer: formats, rejection reasons, grouping, round trips, fuzz accounting."""

from __future__ import annotations

import json
import re

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from adapters.batch import Batch, Rejection
from adapters.parsing import (KEEP_RAW, LineFramer, merge_batches, parse_binary_batch, parse_json_frame,
                              parse_json_frames, parse_text_line, parse_text_lines)
from adapters.simulated import generate
from monitor.commands.simulate import encode_binary, encode_json, encode_text

SRC = "test"
NOW = 1000.0


# ----------------------------------------------------------------------------- text lines

def test_text_line_with_time_and_seq() -> None:
    b = parse_text_line(b"t=1.25 seq=17 ne=3.1e17 Te=2.4", SRC, NOW)
    assert isinstance(b, Batch)
    assert b.t.tolist() == [1.25] and b.t_from_source
    assert b.seq.tolist() == [17]
    assert b.columns["ne"].tolist() == [3.1e17] and b.columns["Te"].tolist() == [2.4]


def test_text_line_commas_comments_and_receive_time() -> None:
    b = parse_text_line(b"ne=1e16, Te=2.0 ,p0=2  # probe 3", SRC, NOW)
    assert isinstance(b, Batch)
    assert not b.t_from_source and b.t.tolist() == [NOW] and b.seq is None
    assert set(b.columns) == {"ne", "Te", "p0"}


@pytest.mark.parametrize("line", [b"", b"   ", b"# only a comment", b" , , "])
def test_blank_and_comment_lines_are_skipped_not_rejected(line: bytes) -> None:
    p = parse_text_lines([line], SRC, NOW)
    assert p.batches == () and p.rejections == () and p.skipped == 1
    b = parse_text_line(line, SRC, NOW)
    assert isinstance(b, Batch) and len(b) == 0


@pytest.mark.parametrize("line, reason", [
    (b"ne", "malformed"),
    (b"ne=1=2", "malformed"),
    (b"=5", "malformed"),
    (b"ne=abc", "bad_value"),
    (b"ne=", "bad_value"),
    (b"ne=nan", "not_finite"),
    (b"ne=1 Te=inf", "not_finite"),
    (b"t=x ne=1", "bad_time"),
    (b"t=inf ne=1", "bad_time"),
    (b"seq=1.5 ne=1", "bad_seq"),
    (b"seq=-3 ne=1", "bad_seq"),
    (b"seq=99999999999999999999 ne=1", "bad_seq"),
    (b"ne=1 ne=2", "duplicate_key"),
    (b"3ne=1", "bad_key"),
    (b"t=1 seq=2", "no_values"),
    (b"ne=1 " + b"x" * 5000, "oversized"),
])
def test_text_line_rejections(line: bytes, reason: str) -> None:
    r = parse_text_line(line, SRC, NOW)
    assert isinstance(r, Rejection), r
    assert r.reason == reason
    assert r.raw == line[:KEEP_RAW] and r.received == NOW and r.source == SRC


def test_many_lines_become_one_batch_in_order_with_nan_for_missing_keys() -> None:
    lines = [b"t=%d seq=%d ne=%d" % (i, i, i + 100) for i in range(500)]
    lines.insert(100, b"t=100.5 seq=1000 ne=1 Te=3.0")   # a different key layout in the middle
    lines.insert(200, b"ne=bogus t=1 seq=2")             # a bad line inside a run of good ones
    lines.insert(300, b"# comment")
    p = parse_text_lines(lines, SRC, NOW)
    assert len(p.batches) == 1
    b = p.batches[0]
    assert len(b) == 501 and p.skipped == 1 and [r.reason for r in p.rejections] == ["bad_value"]
    assert b.seq[100] == 1000 and b.columns["Te"][100] == 3.0
    assert np.isnan(b.columns["Te"][:100]).all() and np.isnan(b.columns["Te"][101:]).all()
    others = np.delete(b.seq, 100)
    assert others.tolist() == list(range(500))


def test_lines_with_and_without_time_split_into_separate_batches() -> None:
    p = parse_text_lines([b"t=1 ne=1", b"t=2 ne=2", b"ne=3", b"ne=4", b"t=5 ne=5"], SRC, NOW)
    assert [len(b) for b in p.batches] == [2, 2, 1]
    assert [b.t_from_source for b in p.batches] == [True, False, True]
    assert p.batches[1].t.tolist() == [NOW, NOW]


# ----------------------------------------------------------------------------- JSON

def test_json_frame_fields_and_null() -> None:
    b = parse_json_frame(b'{"t": 1.25, "seq": 17, "ne": 3.1e17, "Te": 2.4, "B": null}', SRC, NOW)
    assert isinstance(b, Batch)
    assert b.seq.tolist() == [17] and b.t.tolist() == [1.25] and set(b.columns) == {"ne", "Te"}


@pytest.mark.parametrize("frame, reason", [
    (b"{", "bad_json"),
    (b"[1, 2]", "bad_json"),
    (b"\xff\xfe\x00", "bad_json"),
    (b"[" * 100_000, "bad_json"),
    (b'{"ne": NaN}', "not_finite"),
    (b'{"ne": Infinity}', "not_finite"),
    (b'{"ne": 1e999}', "not_finite"),
    (b'{"ne": "5"}', "bad_value"),
    (b'{"ne": true}', "bad_value"),
    (b'{"ne": [1]}', "bad_value"),
    (b'{"t": "now", "ne": 1}', "bad_time"),
    (b'{"seq": 1.0, "ne": 1}', "bad_seq"),
    (b'{"seq": -1, "ne": 1}', "bad_seq"),
    (b'{"seq": 5}', "no_values"),
    (b'{"a b": 1}', "bad_key"),
])
def test_json_rejections(frame: bytes, reason: str) -> None:
    r = parse_json_frame(frame, SRC, NOW)
    assert isinstance(r, Rejection), r
    assert r.reason == reason


def test_json_oversized() -> None:
    frame = json.dumps({"ne": 1.0, "pad": "x" * 2000}).encode()
    r = parse_json_frame(frame, SRC, NOW, max_frame=1000)
    assert isinstance(r, Rejection) and r.reason == "oversized"


def test_json_frames_grouped() -> None:
    frames = [json.dumps({"t": i * 1e-3, "seq": i, "ne": 5e16 + i}).encode() for i in range(1000)]
    frames[500] = json.dumps({"t": 0.5, "seq": 500, "ne": 5e16, "Te": 3.0}).encode()
    p = parse_json_frames(frames, SRC, NOW)
    assert len(p.batches) == 1 and p.readings == 1000 and p.rejections == ()
    assert p.batches[0].seq.tolist() == list(range(1000))


# ----------------------------------------------------------------------------- binary

def _hdr(**kw: object) -> bytes:
    h = {"fields": ["t", "ne", "Te"], "n": 4, "seq": 10, "dtype": "<f8"}
    h.update(kw)
    return json.dumps({k: v for k, v in h.items() if v is not ...}).encode()


def test_binary_batch_columns_and_seq() -> None:
    cols = np.arange(12, dtype="<f8").reshape(3, 4)
    b = parse_binary_batch(_hdr(), cols.tobytes(), SRC, NOW)
    assert isinstance(b, Batch)
    assert b.t.tolist() == [0, 1, 2, 3] and b.columns["ne"].tolist() == [4, 5, 6, 7]
    assert b.seq.tolist() == [10, 11, 12, 13] and b.t.dtype == np.float64


@pytest.mark.parametrize("dtype", ["<f4", ">f8", "<i4", ">i8"])
def test_binary_other_dtypes_become_float64(dtype: str) -> None:
    cols = np.arange(12).reshape(3, 4).astype(dtype)
    b = parse_binary_batch(_hdr(dtype=dtype), cols.tobytes(), SRC, NOW)
    assert isinstance(b, Batch) and b.columns["Te"].dtype == np.float64
    assert b.columns["Te"].tolist() == [8, 9, 10, 11]


def test_binary_without_time_or_seq() -> None:
    b = parse_binary_batch(_hdr(fields=["ne"], seq=...), np.ones(4).tobytes(), SRC, NOW)
    assert isinstance(b, Batch) and b.seq is None and not b.t_from_source and b.t.tolist() == [NOW] * 4


@pytest.mark.parametrize("header, payload, reason", [
    (b"not json", b"", "bad_binary_header"),
    (b"[1]", b"", "bad_binary_header"),
    (_hdr(extra=1), b"", "bad_binary_header"),
    (_hdr(fields=[]), b"", "bad_binary_header"),
    (_hdr(fields=["t"]), b"", "bad_binary_header"),
    (_hdr(fields=["ne", "ne"]), b"", "bad_binary_header"),
    (_hdr(fields=["ne", 3]), b"", "bad_binary_header"),
    (_hdr(n=-1), b"", "bad_binary_header"),
    (_hdr(n=2.0), b"", "bad_binary_header"),
    (_hdr(seq="x"), b"", "bad_seq"),
    (_hdr(dtype="|O"), b"", "bad_dtype"),
    (_hdr(dtype="<U8"), b"", "bad_dtype"),
    (_hdr(), b"\x00" * 95, "size_mismatch"),
    (_hdr(), b"\x00" * 97, "size_mismatch"),
    (b" " * 70_000, b"", "oversized"),
])
def test_binary_rejections(header: bytes, payload: bytes, reason: str) -> None:
    r = parse_binary_batch(header, payload, SRC, NOW)
    assert isinstance(r, Rejection), r
    assert r.reason == reason


def test_binary_pickle_is_never_loaded(tmp_path) -> None:
    import pickle

    marker = tmp_path / "ran"
    payload = pickle.dumps(type("X", (), {"__reduce__": lambda self: (open, (str(marker), "w"))})())
    r = parse_binary_batch(_hdr(dtype="O", n=1, fields=["ne"]), payload, SRC, NOW)
    assert isinstance(r, Rejection) and r.reason == "bad_dtype"
    assert not marker.exists()


def test_binary_payload_over_limit() -> None:
    r = parse_binary_batch(_hdr(n=100), np.zeros(300).tobytes(), SRC, NOW, max_frame=1000)
    assert isinstance(r, Rejection) and r.reason == "oversized" and len(r.raw) <= KEEP_RAW + 1000


# ----------------------------------------------------------------------------- round trips with our encoders

@pytest.mark.parametrize("fmt", ["json", "text", "binary"])
def test_encoders_round_trip_the_simulator(fmt: str) -> None:
    src = generate("dropout", seed=3, rate=200.0, t0=9.5, t1=15.5)
    if fmt == "json":
        p = parse_json_frames(encode_json(src), SRC, NOW)
        assert p.rejections == ()
        got = merge_batches(p.batches)
    elif fmt == "text":
        p = parse_text_lines(encode_text(src), SRC, NOW)
        assert p.rejections == ()
        got = merge_batches(p.batches)
    else:
        got = [parse_binary_batch(*encode_binary(src), SRC, NOW)]
    assert len(got) == 1
    b = got[0]
    assert np.array_equal(b.seq, src.seq) and np.array_equal(b.t, src.t)
    for k in src.columns:
        assert np.array_equal(b.columns[k], src.columns[k], equal_nan=True), k


# ----------------------------------------------------------------------------- framer

def test_framer_lf_crlf_and_partial_lines() -> None:
    f = LineFramer()
    assert f.feed(b"ne=1\r\nne=2\nne") == ([b"ne=1", b"ne=2"], [])
    assert f.pending == 2
    assert f.feed(b"=3") == ([], [])
    # a CR ends the line at once (instruments that end lines with CR only); an LF right after it is its pair
    assert f.feed(b"\r") == ([b"ne=3"], [])
    assert f.feed(b"\n") == ([], [])
    assert f.feed(b"ne=4\rne=5\r\rne=6\n") == ([b"ne=4", b"ne=5", b"", b"ne=6"], [])
    assert f.flush() == b""


def test_framer_overlong_line_rejected_once_and_skipped_to_its_end() -> None:
    f = LineFramer(max_line=10)
    lines, over = f.feed(b"ok=1\n" + b"x" * 25)
    assert lines == [b"ok=1"] and len(over) == 1
    assert f.feed(b"y" * 100) == ([], [])
    assert f.feed(b"zz\nnext=2\n") == ([b"next=2"], [])
    assert f.discarded_bytes == 25 + 100 + 2
    lines, over = f.feed(b"w" * 11 + b"\n")
    assert lines == [] and over == [b"w" * 11]


# ----------------------------------------------------------------------------- fuzz: nothing raises, everything accounted

_lineish = st.one_of(
    st.binary(max_size=200),
    st.lists(st.sampled_from([b"ne=", b"Te=", b"t=", b"seq=", b"1", b"-2.5e16", b"nan", b"inf", b" ", b",", b"#",
                              b"=", b"x", b"\xff", b"\r", b"17", b"1_0", b"0x1"]), max_size=20).map(b"".join),
)


@settings(max_examples=3000)
@given(st.lists(_lineish, max_size=8))
def test_fuzz_text_lines_accounting(lines: list[bytes]) -> None:
    lines = [ln.replace(b"\n", b" ") for ln in lines]
    p = parse_text_lines(lines, SRC, NOW)
    assert p.readings + len(p.rejections) + p.skipped == len(lines)
    for b in p.batches:
        for col in b.columns.values():
            assert col.dtype == np.float64 and len(col) == len(b)
        assert np.isfinite(b.t).all()


_jsonish = st.one_of(
    st.binary(max_size=200),
    st.recursive(st.none() | st.booleans() | st.floats() | st.integers() | st.text(max_size=5),
                 lambda c: st.lists(c, max_size=3) | st.dictionaries(st.sampled_from(["t", "seq", "ne", "Te", "a b", ""]), c,
                                                                     max_size=4), max_leaves=8)
    .map(lambda o: json.dumps(o).encode()),
)


@settings(max_examples=3000)
@given(st.lists(_jsonish, max_size=6))
def test_fuzz_json_frames_accounting(frames: list[bytes]) -> None:
    p = parse_json_frames(frames, SRC, NOW)
    assert p.readings + len(p.rejections) == len(frames)


@settings(max_examples=2000)
@given(st.one_of(st.binary(max_size=120),
                 st.fixed_dictionaries({"fields": st.lists(st.sampled_from(["t", "ne", "Te", "seq", ""]), max_size=4),
                                        "n": st.integers(-2, 5), "seq": st.none() | st.integers(-1, 3),
                                        "dtype": st.sampled_from(["<f8", "<f4", "|O", "<i4", "bogus"])})
                 .map(lambda h: json.dumps(h).encode())),
       st.binary(max_size=160))
def test_fuzz_binary_never_raises(header: bytes, payload: bytes) -> None:
    r = parse_binary_batch(header, payload, SRC, NOW)
    assert isinstance(r, (Batch, Rejection))
    if isinstance(r, Batch):
        assert all(c.dtype == np.float64 for c in r.columns.values())


@settings(max_examples=3000)
@given(st.lists(st.binary(max_size=60) | st.sampled_from([b"\n", b"\r\n", b"\r", b"ne=1\n", b"ne=2\r"]), max_size=12),
       st.integers(4, 40))
def test_fuzz_framer_every_line_end_accounted(chunks: list[bytes], max_line: int) -> None:
    f = LineFramer(max_line=max_line)
    lines: list[bytes] = []
    over: list[bytes] = []
    for c in chunks:
        got, bad = f.feed(c)
        lines += got
        over += bad
    data = b"".join(chunks)
    assert all(len(ln) <= max_line for ln in lines)
    assert all(b"\n" not in ln and b"\r" not in ln for ln in lines)
    # each line end (LF, CR or CRLF) ends exactly one line: delivered, or refused as oversized
    # (refused lines may still be open)
    ended_over = len(over) - (1 if f.discarding else 0)
    ends = re.findall(rb"\r\n|\r|\n", data)
    assert len(lines) + ended_over == len(ends)
    # what was delivered is exactly the short lines of the stream
    expected = re.split(rb"\r\n|\r|\n", data)[:-1]
    assert lines == [p for p in expected if len(p) <= max_line]
