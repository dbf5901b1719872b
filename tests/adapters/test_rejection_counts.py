"""Every refused input says how many readings it stands for and which seq numbers it covered (plain bytes)."""

from __future__ import annotations

import json

import numpy as np
import pytest

from adapters.batch import Batch, Rejection
from adapters.framing import MAX_FRAME, binary_span, seq_in_text
from adapters.parsing import parse_binary_batch, parse_json_frames, parse_text_lines

SRC, NOW = "test", 1000.0


def _one(r: Batch | Rejection) -> Rejection:
    assert isinstance(r, Rejection), r
    return r


def _fields(r: Rejection) -> tuple[str, int, int | None, int | None]:
    return r.reason, r.count, r.seq_first, r.seq_last


@pytest.mark.parametrize("line, expect", [
    (b"seq=7 ne=abc", ("bad_value", 1, 7, 7)),
    (b"seq=8 ne=nan", ("not_finite", 1, 8, 8)),
    (b"t=1e300 seq=9 ne=1", ("bad_time", 1, 9, 9)),
    (b"seq=10 ne=1 ne=2", ("duplicate_key", 1, 10, 10)),
    (b"seq=11 ne", ("malformed", 1, 11, 11)),
    (b"seq=-3 ne=1", ("bad_seq", 1, None, None)),
    (b"seq=1.5 ne=1", ("bad_seq", 1, None, None)),
    (b"ne=abc", ("bad_value", 1, None, None)),
    (b"ne=abc # seq=4", ("bad_value", 1, None, None)),       # a comment shows no seq
])
def test_text_line_counts_one_with_its_seq(line: bytes, expect: tuple) -> None:
    p = parse_text_lines([b"seq=1 ne=1", line, b"seq=99 ne=2"], SRC, NOW)
    assert p.readings == 2
    assert [_fields(r) for r in p.rejections] == [expect]


@pytest.mark.parametrize("frame, expect", [
    (b'{"seq": 7, "ne": "x"}', ("bad_value", 1, 7, 7)),
    (b'{"seq": 8, "ne": NaN}', ("not_finite", 1, 8, 8)),
    (b'{"seq": 9, "t": 1e300, "ne": 1}', ("bad_time", 1, 9, 9)),
    (b'{"seq": 10, "ne": -1, "ne": 5e16}', ("duplicate_key", 1, 10, 10)),
    (b'{"seq": 11, "ne": ', ("bad_json", 1, 11, 11)),
    (b'{"seq": -2, "ne": 1}', ("bad_seq", 1, None, None)),
    (b'{"seq": 1.0e3, "ne": 1}', ("bad_seq", 1, None, None)),
    (b'[1, 2]', ("bad_json", 1, None, None)),
])
def test_json_frame_counts_one_with_its_seq(frame: bytes, expect: tuple) -> None:
    p = parse_json_frames([b'{"seq": 1, "ne": 1}', frame], SRC, NOW)
    assert p.readings == 1
    assert [_fields(r) for r in p.rejections] == [expect]


def test_json_duplicate_key_refused_like_the_text_form() -> None:
    # point 7: the last value used to win silently
    (r,) = parse_json_frames([b'{"ne": -1, "ne": 5e16}'], SRC, NOW).rejections
    (t,) = parse_text_lines([b"ne=-1 ne=5e16"], SRC, NOW).rejections
    assert r.reason == t.reason == "duplicate_key"
    assert parse_json_frames([b'{"ne": 1, "Te": {"a": 1, "a": 2}}'], SRC, NOW).rejections[0].reason == "duplicate_key"


def _hdr(**h: object) -> bytes:
    return json.dumps(h).encode()


def test_binary_size_mismatch_counts_what_its_payload_held() -> None:
    payload = np.zeros(2 * 10 + 1, "<f8").tobytes()[:-3]       # 10 readings of 2 fields and a scrap of one more
    r = _one(parse_binary_batch(_hdr(fields=["t", "ne"], n=50, seq=100), payload, SRC, NOW))
    assert _fields(r) == ("size_mismatch", 11, 100, 110)        # rounded up, seq range from the header


def test_binary_payload_longer_than_n_counts_n() -> None:
    payload = np.zeros(2 * 20, "<f8").tobytes()
    r = _one(parse_binary_batch(_hdr(fields=["t", "ne"], n=5, seq=0), payload, SRC, NOW))
    assert _fields(r) == ("size_mismatch", 5, 0, 4)


def test_binary_oversized_counts_its_payload_without_an_untrusted_seq() -> None:
    payload = b"\0" * (64 * 8 + 8)
    r = _one(parse_binary_batch(_hdr(fields=["ne"], n=65, seq=7), payload, SRC, NOW, max_frame=64 * 8))
    assert _fields(r) == ("oversized", 1, 7, 7)          # n beyond what a frame can hold: one, at its seq
    r = _one(parse_binary_batch(_hdr(fields=["ne"], n=60, seq=7), payload, SRC, NOW, max_frame=64 * 8))
    assert _fields(r) == ("oversized", 60, 7, 66)


def test_binary_unreadable_header_counts_one_without_seq() -> None:
    assert _fields(_one(parse_binary_batch(b"{nope", b"\0" * 800, SRC, NOW))) == ("bad_binary_header", 1, None, None)
    assert _fields(_one(parse_binary_batch(_hdr(n=3, seq=1), b"\0" * 24, SRC, NOW))) == \
        ("bad_binary_header", 1, None, None)            # not a header at all: nothing in it is trusted
    r = _one(parse_binary_batch(_hdr(fields=["ne"], n=3, seq=1, dtype="|O"), b"\0" * 24, SRC, NOW))
    assert _fields(r) == ("bad_dtype", 3, 1, 3)         # a dtype not ours: its n, still trusted


def test_binary_claiming_more_than_a_frame_holds_counts_its_payload() -> None:
    r = _one(parse_binary_batch(_hdr(fields=["ne"], n=10**12, seq=5), b"\0" * 80, SRC, NOW))
    assert _fields(r) == ("size_mismatch", 1, 5, 5)     # its n cannot be trusted: one, at its seq


def test_binary_bad_time_refuses_the_batch_whole_with_its_range() -> None:
    payload = np.array([[0.0, 1e300, 2.0], [1.0, 1.0, 1.0]], "<f8").tobytes()
    r = _one(parse_binary_batch(_hdr(fields=["t", "ne"], n=3, seq=40), payload, SRC, NOW))
    assert _fields(r) == ("bad_time", 3, 40, 42)


def test_binary_span_rule() -> None:
    assert binary_span(None, 100) == (1, None)
    assert binary_span({"fields": ["ne"], "n": 0, "seq": 3}, 0) == (1, (3, 3))      # no reading in it: one, at its seq
    assert binary_span({"fields": ["ne"], "n": 0, "seq": 3}, 80) == (1, (3, 3))
    assert binary_span({"fields": ["ne"], "n": "5", "seq": 3}, 80) == (1, (3, 3))   # no n to trust: one
    assert binary_span({"fields": ["t", "ne"], "n": 4, "seq": 3, "dtype": "<f4"}, 33) == (4, (3, 6))
    assert binary_span({"fields": ["ne"], "n": MAX_FRAME // 8, "seq": 0}, 16) == (2, (0, 1))   # what the payload held
    assert binary_span({"fields": ["ne"], "n": MAX_FRAME // 8 + 1, "seq": 0}, 16) == (1, (0, 0))
    assert binary_span({"fields": ["ne"], "n": 4, "seq": 2**63 - 2}, 32) == (4, None)


def test_seq_in_text() -> None:
    assert seq_in_text(b"t=1 seq=5 ne=x") == 5 and seq_in_text(b"seq=5,ne=1") == 5
    assert seq_in_text(b'{"ne": 1, "seq" : 12}') == 12
    assert seq_in_text(b"xseq=5 ne=1") is None and seq_in_text(b"seq=5x") is None
    assert seq_in_text(b"seq=99999999999999999999 ne=1") is None
    assert seq_in_text(b'{"seq": 5.5}') is None


def test_json_reading_over_its_bound_is_oversized_before_it_is_decoded() -> None:
    from adapters.framing import MAX_JSON

    big = b'{"seq": 3, "ne": [' + b"1.5," * (MAX_JSON // 4) + b"1]}"
    (r,) = parse_json_frames([big], SRC, NOW).rejections
    assert _fields(r) == ("oversized", 1, 3, 3) and len(r.raw) <= 4096
