"""A source is in exactly one state at a time, and the screen's snapshot and the headless lines say the same."""

from __future__ import annotations

import numpy as np

from monitor.config import parse_config
from monitor.headless import status_record
from monitor.session import Session, make_engine
from pipeline_helpers import ListSource, make_batch


def test_a_connected_source_whose_data_stopped_is_stale_and_both_views_say_so() -> None:
    # no outside reference: stale_after 2 s and 2.5 s of silence are this test's own inputs
    config = parse_config({"sources": {"stale_after": 2.0}}, None)
    wall = [1000.0]
    src = ListSource([make_batch(np.arange(100) * 1e-3, ne=1e17, Te=3.0)], end=False)
    s = Session(src, config, engine=make_engine(config), live=True, wall=lambda: wall[0])
    s.open()
    s.step(0.0)
    snap = s.snapshot()
    assert snap.source_states == {"probe": "connected"} and status_record(snap)["state"] == "connected"
    wall[0] += 2.5
    s.step(0.0)
    snap = s.snapshot()
    assert snap.sources["probe"].state.value == "connected"            # the link itself is up
    assert snap.source_states == {"probe": "stale"}                     # but its data stopped
    assert status_record(snap)["state"] == "stale"
    # the data come back: connected again, in both
    src.script.append(make_batch(2.6 + np.arange(10) * 1e-3, ne=1e17, Te=3.0))
    s.step(0.0)
    snap = s.snapshot()
    assert snap.source_states == {"probe": "connected"} and status_record(snap)["state"] == "connected"
