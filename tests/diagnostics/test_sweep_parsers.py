"""The sweep parsers of adapters/sweeps.py: plain bytes in, SweepBlocks or Rejections out, never an exception."""

from __future__ import annotations

import json

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from adapters.batch import Rejection
from adapters.sweeps import (SweepBlock, encode_sweep_binary, parse_sweep_binary, parse_sweep_csv,
                             parse_sweep_json, parse_sweep_line)

CSV = b"""# a comment
extra,I,V,t,sweep
x,-1e-6,-10,0.00,0
x,-0.5e-6,-5,0.01,0
x,2e-6,0,0.02,0
x,-1e-6,-10,0.10,1
x,-0.4e-6,-5,0.11,1
x,3e-6,0,0.12,1
x,1,2,0.2,2
x,1,2,0.3,2
"""


def test_csv_groups_rows_into_sweeps_ignoring_extra_columns_and_order() -> None:
    blocks, rej = parse_sweep_csv(CSV, "f", 0.0)
    assert rej == []
    three = next(b for b in blocks if b.V.shape[1] == 3)
    assert list(three.sweep) == [0, 1]
    np.testing.assert_allclose(three.V[1], [-10, -5, 0])
    np.testing.assert_allclose(three.I[0], [-1e-6, -0.5e-6, 2e-6])
    np.testing.assert_allclose(three.t, [0.01, 0.11])            # middle of first and last point
    two = next(b for b in blocks if b.V.shape[1] == 2)
    assert list(two.sweep) == [2]


def test_csv_damage_is_refused_by_reason_and_the_rest_kept() -> None:
    data = CSV + b"x,oops,1,0.4,3\nx,1,1,0.5,0\n"                 # an unreadable row; sweep 0 comes back
    blocks, rej = parse_sweep_csv(data, "f", 0.0)
    reasons = sorted(r.reason for r in rej)
    assert reasons == ["duplicate_sweep", "malformed"]
    assert sum(len(b) for b in blocks) == 3                       # sweeps 0, 1, 2 (the bad row is refused whole)
    missing = parse_sweep_csv(b"sweep,t,V\n1,2,3\n", "f", 0.0)
    assert missing[0] == [] and missing[1][0].reason == "malformed" and "I" in missing[1][0].detail


def test_json_frame_and_its_refusals() -> None:
    ok = parse_sweep_json(b'{"sweep": 4, "t": 1.5, "V": [1, 2, 3], "I": [0.1, 0.2, 0.3]}', "z", 9.0)
    assert isinstance(ok, SweepBlock) and list(ok.sweep) == [4] and ok.t[0] == 1.5
    cases = {b'{"V": [1, 2], "I": [1]}': "length_mismatch", b"{not json": "bad_json",
             b'{"V": [1, NaN], "I": [1, 2]}': "bad_json", b'{"V": [1, "a"], "I": [1, 2]}': "malformed",
             b'{"I": [1]}': "malformed", b'{"V": [1], "I": [1], "sweep": 1.5}': "malformed"}
    for frame, reason in cases.items():
        got = parse_sweep_json(frame, "z", 9.0)
        assert isinstance(got, Rejection) and got.reason == reason, (frame, got)
        assert got.raw == frame
    no_time = parse_sweep_json(b'{"V": [1, 2], "I": [1, 2]}', "z", 9.0)
    assert isinstance(no_time, SweepBlock) and no_time.t[0] == 9.0      # receive time stands in


def test_text_line() -> None:
    got = parse_sweep_line(b"sweep=7 t=2.5 V=-1,0,1 I=-1e-6,0,1e-5  # note", "s", 0.0)
    assert isinstance(got, SweepBlock) and list(got.sweep) == [7]
    np.testing.assert_allclose(got.I[0], [-1e-6, 0, 1e-5])
    for line, reason in ((b"sweep=7 V=1,2 I=1", "length_mismatch"), (b"V=1,2", "malformed"),
                         (b"V=1,x I=1,2", "malformed"), (b"foo=1 V=1 I=1", "malformed")):
        r = parse_sweep_line(line, "s", 0.0)
        assert isinstance(r, Rejection) and r.reason == reason, (line, r)


def test_binary_round_trip_and_refusals() -> None:
    rng = np.random.default_rng(1)
    block = SweepBlock("b", np.array([10, 11, 12]), np.array([0.1, 0.2, 0.3]), rng.normal(size=(3, 50)),
                       rng.normal(size=(3, 50)))
    for dtype in ("<f8", ">f4"):
        header, payload = encode_sweep_binary(block, dtype)
        got = parse_sweep_binary(header, payload, "b", 0.0)
        assert isinstance(got, SweepBlock)
        assert list(got.sweep) == [10, 11, 12]
        np.testing.assert_allclose(got.I, block.I, rtol=1e-6 if dtype == ">f4" else 0)
    header, payload = encode_sweep_binary(block)
    h = json.loads(header)
    bad = {"size_mismatch": (header, payload[:-8]), "bad_binary_header": (b"{", payload),
           "bad_dtype": (json.dumps({**h, "dtype": "<i4"}).encode(), payload)}
    for reason, (hd, pl) in bad.items():
        r = parse_sweep_binary(hd, pl, "b", 0.0)
        assert isinstance(r, Rejection) and r.reason == reason
    wrong_t = json.dumps({**h, "t": [1.0]}).encode()
    assert isinstance(parse_sweep_binary(wrong_t, payload, "b", 0.0), Rejection)


@settings(max_examples=150)
@given(st.binary(max_size=400))
def test_parsers_never_raise_on_arbitrary_bytes(data: bytes) -> None:
    blocks, rej = parse_sweep_csv(b"sweep,t,V,I\n" + data, "f", 0.0)
    assert all(isinstance(b, SweepBlock) for b in blocks) and all(isinstance(r, Rejection) for r in rej)
    for fn in (parse_sweep_json, parse_sweep_line):
        assert isinstance(fn(data, "f", 0.0), (SweepBlock, Rejection))
    assert isinstance(parse_sweep_binary(data[:40], data[40:], "f", 0.0), (SweepBlock, Rejection))


@settings(max_examples=60)
@given(st.lists(st.tuples(st.integers(0, 5), st.floats(-1e3, 1e3), st.floats(-1.0, 1.0)), max_size=60))
def test_csv_keeps_every_row_in_a_sweep_or_a_rejection(rows: list[tuple[int, float, float]]) -> None:
    text = "sweep,t,V,I\n" + "".join(f"{s},{i},{v!r},{c!r}\n" for i, (s, v, c) in enumerate(rows))
    blocks, rej = parse_sweep_csv(text.encode(), "f", 0.0)
    kept = sum(b.V.size for b in blocks)
    refused_rows = sum(int(r.detail.split("(")[1].split()[0]) for r in rej if r.reason == "duplicate_sweep")
    assert kept + refused_rows == len(rows)


def test_the_three_file_formats_give_the_same_analysis(tmp_path) -> None:   # type: ignore[no-untyped-def]
    """The demo CSV rewritten as JSON lines and as text lines: identical results sweep by sweep."""
    import json as _json
    from pathlib import Path

    from monitor.diagnostics.probe_file import analyse_file
    from monitor.diagnostics.probe_model import SCENARIO_PROBE

    demo = Path(__file__).resolve().parents[2] / "replay_data" / "probe_sweeps.csv"
    base = analyse_file(demo, SCENARIO_PROBE)
    block, res = base.blocks[0], base.results[0]
    rows = [k for k in range(len(block)) if np.isfinite(block.I[k]).all()]   # JSON refuses NaN (bad_json)
    jl = "\n".join(_json.dumps({"sweep": int(block.sweep[k]), "t": float(block.t[k]), "V": block.V[k].tolist(),
                                "I": block.I[k].tolist()}) for k in rows)
    tl = "\n".join(f"sweep={int(block.sweep[k])} t={float(block.t[k])!r} V={','.join(map(repr, block.V[k].tolist()))} "
                   f"I={','.join(map(repr, block.I[k].tolist()))}" for k in rows)
    for name, text in (("s.jsonl", jl), ("s.txt", tl)):
        (tmp_path / name).write_text("# sweeps\n" + text + "\n")
        got = analyse_file(tmp_path / name, SCENARIO_PROBE)
        assert got.rejections == ()
        np.testing.assert_array_equal(got.results[0].sweep, res.sweep[rows])
        np.testing.assert_array_equal(got.results[0].quality, res.quality[rows])
        np.testing.assert_allclose(got.results[0]["Te"], res["Te"][rows], rtol=1e-12)
