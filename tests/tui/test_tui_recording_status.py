"""The sources panel shows the recorder: what it writes, readings outside shots not recorded, dropped; a failing write is loud."""

from __future__ import annotations

import dataclasses
from pathlib import Path

from monitor.recording import RecorderStatus
from monitor.tui.app import RegimeApp
from monitor.tui.feed import FixedFeed
from monitor.tui.widgets.sources import SourcesPanel

from tui_helpers import built_snapshot, demo_config, step_until, text_of, wait_for


def status(**kw: object) -> RecorderStatus:
    base = dict(ok=True, message="recording shots/shot-0002.csv", file="shots/shot-0002.csv", shots=2,
                rows_written=4500, rows_idle=300, dropped=0, errors=0, split="discharge")
    base.update(kw)
    return RecorderStatus(**base)  # type: ignore[arg-type]


def _app(fixed_settings, recorder: RecorderStatus | None) -> RegimeApp:
    return RegimeApp(FixedFeed(dataclasses.replace(built_snapshot(), recorder=recorder)), fixed_settings,
                     run_pipeline=False)


async def test_recorder_line_fits_80_columns_with_what_is_not_recorded(fixed_settings) -> None:
    app = _app(fixed_settings, status())
    async with app.run_test(size=(80, 24)) as pilot:
        panel = app.watch_screen.query_one(SourcesPanel)
        await wait_for(pilot, lambda: "recorder" in text_of(panel))
        lines = text_of(panel).splitlines()
        line = next(x for x in lines if "recorder" in x)
        # the counts fit in 80 columns; the file name is what a narrow screen cuts
        assert line.startswith("● recorder  written 4,500  outside shots: 300 not recorded  dropped 0")
        assert panel.region.height >= 3 and "sim:steady" in text_of(panel)    # the source line is still there
        assert not panel.has_class("-trouble")


async def test_every_reading_recorded_says_nothing_about_shots(fixed_settings) -> None:
    app = _app(fixed_settings, status(split="none", rows_idle=0, file=None))
    async with app.run_test(size=(80, 24)) as pilot:
        panel = app.watch_screen.query_one(SourcesPanel)
        await wait_for(pilot, lambda: "recorder" in text_of(panel))
        assert text_of(panel).count("◌ recorder  written 4,500  dropped 0") == 1
        assert "outside shots" not in text_of(panel)


async def test_failing_write_is_loud_in_words_and_the_panel(fixed_settings) -> None:
    failing = status(ok=False, message="cannot write shots/shot-0002.csv: [Errno 28] No space left on device",
                     dropped=12, errors=3)
    app = _app(fixed_settings, failing)
    async with app.run_test(size=(160, 50)) as pilot:
        panel = app.watch_screen.query_one(SourcesPanel)
        await wait_for(pilot, lambda: "WRITE FAILING" in text_of(panel))
        text = text_of(panel)
        assert "✖ recorder WRITE FAILING  written 4,500  outside shots: 300 not recorded  dropped 12" in text
        assert "No space left on device" in text
        assert panel.has_class("-trouble")
    app = _app(fixed_settings, status(dropped=5))                 # writes work again, but readings were lost
    async with app.run_test(size=(80, 24)) as pilot:
        panel = app.watch_screen.query_one(SourcesPanel)
        await wait_for(pilot, lambda: "dropped 5" in text_of(panel))
        assert panel.has_class("-trouble")
    app = _app(fixed_settings, None)                              # no recorder, no line
    async with app.run_test(size=(80, 24)) as pilot:
        panel = app.watch_screen.query_one(SourcesPanel)
        await wait_for(pilot, lambda: "sim:steady" in text_of(panel))
        assert "recorder" not in text_of(panel)


async def test_a_real_recorder_behind_a_real_session(tmp_path: Path, fixed_settings) -> None:
    from monitor.outputs import build_outputs
    from monitor.session import Session, make_engine
    from monitor.sources import open_source

    config = demo_config()
    outputs = build_outputs(config, source_name="sim:demo", record=str(tmp_path / "shots"))
    session = Session(open_source("sim:demo?seed=3&speed=max&loop=0", config), config, outputs.sinks,
                      engine=make_engine(config), live=True, recorder=outputs.recorder)
    try:
        step_until(session, lambda: outputs.recorder_status().rows_written > 0)
        snap = session.snapshot()
        assert snap.recorder == outputs.recorder_status()       # the session fills it from its recorder
        app = RegimeApp(FixedFeed(snap), fixed_settings, run_pipeline=False)
        async with app.run_test(size=(160, 50)) as pilot:
            panel = app.watch_screen.query_one(SourcesPanel)
            await wait_for(pilot, lambda: "recorder" in text_of(panel))
            assert f"written {snap.recorder.rows_written:,}" in text_of(panel)
            assert Path(snap.recorder.file).name in text_of(panel)
    finally:
        session.close()
