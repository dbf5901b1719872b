"""The derived table marks a quantity whose linear uncertainty does not hold (its nonlinear_sigma flag)."""

from __future__ import annotations

import dataclasses

import numpy as np

from monitor.model import Device
from monitor.physics import derive
from monitor.tui.app import RegimeApp
from monitor.tui.feed import FixedFeed
from monitor.tui.widgets.derived import DerivedTable
from tui_helpers import built_snapshot, text_of, wait_for


async def test_a_flagged_sigma_shows_a_mark(fixed_settings) -> None:
    # ne ±50 %, Te ±40 %: wide enough that derive() itself flags several quantities' linear sigma
    inputs = {"ne": np.array([5e16]), "Te": np.array([3.0]), "B": np.array([0.05]), "p0": np.array([1.0])}
    sig = {"ne": np.array([2.5e16]), "Te": np.array([1.2]), "B": np.array([0.0005]), "p0": np.array([0.01])}
    derived = derive(inputs, Device(length=0.3, wave_frequency=2.45e9), sig)
    flagged = sorted(k.split(":", 1)[1] for k in derived.warnings if k.startswith("nonlinear_sigma:")
                     and derived.warnings[k].any())
    assert flagged, "the inputs chosen must trip the flag"
    snap = built_snapshot()
    latest = dict(snap.latest)
    for name, arr in derived.values.items():
        s = derived.sigma.get(name)
        latest[name] = (float(arr[0]), None if s is None else float(s[0]))
    snap = dataclasses.replace(snap, latest=latest, warnings=tuple(f"nonlinear_sigma:{n}" for n in flagged))
    app = RegimeApp(FixedFeed(snap), dataclasses.replace(fixed_settings, units="SI"), run_pipeline=False)
    async with app.run_test(size=(200, 60)) as pilot:
        table = app.watch_screen.query_one(DerivedTable)
        await wait_for(pilot, lambda: "(!)" in text_of(table))
        assert text_of(table).count("(!)") >= 1
