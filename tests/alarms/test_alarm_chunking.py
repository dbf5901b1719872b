"""Property: the same samples give the same journal however they are cut into frames."""

from __future__ import annotations

from typing import Any

import numpy as np
from hypothesis import example, given, settings, strategies as st

from alarm_helpers import OFF, ON, engine, frame
from monitor.alarms.events import AlarmEvent
from monitor.model import Frame

LIMITS: list[dict[str, Any]] = [
    {"name": "te-high", "quantity": "Te", "high": 5.0, "deadband": 0.1, "on_delay": 0.07, "off_delay": 0.05,
     "predict_within": 0.5, "realarm_after": 1.5},
    {"name": "te-band", "quantity": "Te", "low": 1.0, "high": 6.0, "latch": True},
    {"name": "te-sure", "quantity": "Te", "high": 4.5, "uncertainty": "certain", "k": 2},
    {"name": "te-maybe", "quantity": "Te", "low": 2.0, "uncertainty": "possible", "k": 1, "on_delay": 0.03},
    {"name": "ne-low", "quantity": "ne", "low": 5e16, "deadband_absolute": 1e16, "off_delay": 0.2,
     "only_when_on": False},
    {"name": "dl", "quantity": "debye_length", "high": "50um", "deadband": 0.05, "on_delay": 0.02,
     "predict_within": 0.3},
]
OPTIONS = {"quality_window": 0.2, "quality_min_samples": 5, "predict_step": 0.05, "predict_window": 0.3}


def _scenario(seed: int, n: int) -> Frame:
    rng = np.random.default_rng(seed)
    dt = rng.choice([0.005, 0.01])
    t = np.cumsum(np.full(n, dt))
    gap_at = int(rng.integers(n // 4, 3 * n // 4))
    t[gap_at:] += 3.0                                            # stale gap (stale_after = 2 s)
    te = 3.5 + np.cumsum(rng.normal(0, 0.12, n))
    te = 3.5 + 3.0 * np.tanh((te - 3.5) / 3.0)
    ne = np.exp(np.log(1e17) + np.cumsum(rng.normal(0, 0.05, n)))
    off = rng.random(n) < 0.004
    ne = np.where(np.cumsum(off) % 3 == 1, OFF, ne)             # a few discharge-off stretches
    ne[rng.random(n) < 0.02] = np.nan
    valid = ~((np.cumsum(rng.random(n) < 0.01) % 4) == 3)      # blocks of invalid samples
    dl = 7434.0 * np.sqrt(np.abs(te) / np.where(np.isfinite(ne), ne, 1e17))   # Debye length, NRL Plasma Formulary
    sigma = np.abs(rng.normal(0.2, 0.1, n))
    return frame(t, Te=te, ne=ne, debye_length=dl, valid=valid, sigma={"Te": sigma})


def _cut(f: Frame, cuts: list[int]) -> list[Frame]:
    bounds = [0, *sorted(set(c for c in cuts if 0 < c < len(f))), len(f)]
    out = []
    for a, b in zip(bounds[:-1], bounds[1:]):
        out.append(Frame(source=f.source, t=f.t[a:b], values={k: v[a:b] for k, v in f.values.items()},
                         sigma={k: v[a:b] for k, v in f.sigma.items()}, valid=f.valid[a:b]))
    return out


def _journal(frames: list[Frame]) -> list[dict[str, Any]]:
    eng = engine(LIMITS, OPTIONS, stale_after=2.0)
    eng.shelve("te-sure", 4.0, 0.0)
    eng.shelve("te-band", None, 0.0)
    events: list[AlarmEvent] = []
    for f in frames:
        events += eng.process(f)
    return [{k: v for k, v in e.to_json().items() if k != "wall"} for e in events]


@settings(max_examples=60)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(300, 1500),
       cuts=st.lists(st.integers(1, 1499), min_size=1, max_size=40))
@example(seed=4073343227, n=485, cuts=[287])   # a cut at a stale gap just after the discharge came back on
def test_same_journal_whatever_the_chunking(seed: int, n: int, cuts: list[int]) -> None:
    f = _scenario(seed, n)
    whole = _journal([f])
    assert _journal(_cut(f, cuts)) == whole
    if n <= 400:
        assert _journal(_cut(f, list(range(1, n)))) == whole      # one sample per frame


def test_the_scenario_exercises_the_engine() -> None:
    # guard: the property above must compare journals with real content
    journal = _journal([_scenario(3, 1500)])
    kinds = {(e["kind"], e["state"]) for e in journal}
    assert ("limit", "unacknowledged") in kinds and ("stale", "unacknowledged") in kinds
    assert ("limit", "suppressed") in kinds and ("quality", "unacknowledged") in kinds
    assert len(journal) > 20


@settings(max_examples=60)
@given(data=st.data())
def test_odd_frames_never_raise(data) -> None:
    """Unsorted or repeated times, NaN/inf values, negative sigma, empty frames: events, never an exception."""
    n = data.draw(st.integers(0, 60))
    floats = st.floats(allow_nan=True, allow_infinity=True, width=64)
    t = np.array(data.draw(st.lists(st.floats(-1e3, 1e3), min_size=n, max_size=n)), dtype=np.float64)
    te = np.array(data.draw(st.lists(floats, min_size=n, max_size=n)), dtype=np.float64)
    ne = np.array(data.draw(st.lists(st.sampled_from([1e17, 1e13, np.nan, -1.0, np.inf]), min_size=n, max_size=n)))
    sig = np.array(data.draw(st.lists(floats, min_size=n, max_size=n)), dtype=np.float64)
    valid = np.array(data.draw(st.lists(st.booleans(), min_size=n, max_size=n)), dtype=bool)
    eng = engine(LIMITS, OPTIONS, stale_after=0.5)
    f = frame(t, Te=te, ne=ne, debye_length=np.abs(te) * 1e-5, valid=valid, sigma={"Te": sig})
    events = eng.process(f)
    events += eng.tick(float(np.nanmax(t)) + 5.0 if n else 5.0, "probe")
    for e in events:
        assert e.to_json()["type"] == "alarm"
    assert len(eng.views()) >= len(LIMITS)


def test_a_frame_larger_than_the_internal_block_gives_the_same_journal() -> None:
    from monitor.alarms import engine as engine_module

    n = engine_module._BLOCK * 2 + 777
    f = _scenario(11, n)
    whole = _journal([f])                       # evaluated internally in blocks
    assert whole == _journal(_cut(f, list(range(1000, n, 1000))))
    assert len(whole) > 20
