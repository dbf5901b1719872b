"""The shot browser under the Textual pilot: filter with the --where language, sort, detail pane, report, mark and compare, replay."""

from __future__ import annotations

from pathlib import Path

from textual.widgets import DataTable, Input, Static

from monitor.archive.build import build
from monitor.tui.archive_app import ArchiveApp
from monitor.tui.screens.archive_browser import TextScreen


def _files(app: ArchiveApp) -> list[str]:
    return [str(r["file"]) for r in app.browser.rows]


async def test_filter_sort_detail_report_and_compare(shots: Path) -> None:
    version = build(shots).version
    app = ArchiveApp(shots, version)
    async with app.run_test(size=(160, 40)) as pilot:
        await pilot.pause()
        table = app.browser.query_one("#shots", DataTable)
        assert table.row_count == 6 and app.browser.said.startswith("6 shots")
        detail = str(app.browser.query_one("#detail-text", Static).render())
        assert "file: argon_rf_excursion.csv" in detail and "ne_median:" in detail
        await pilot.press("slash")
        assert isinstance(app.focused, Input)
        await pilot.press(*"shot between 2 and 3", "enter")
        assert _files(app) == ["day2/shot-0002.csv", "day2/shot-0003.csv"]
        app.browser.query_one("#filter", Input).value = "shot >"
        await pilot.press("slash", "enter")
        assert "filter not applied" in app.browser.said and "column 7" in app.browser.said
        assert len(_files(app)) == 2                                     # the last good filter stays
        app.browser.query_one("#filter", Input).value = ""
        await pilot.press("slash", "enter", "s", "s")                    # sort by shot: up, then down
        assert [r["shot"] for r in app.browser.rows] == [4, 3, 2, 1, 1, 1]
        assert "sorted by shot desc" in app.browser.said
        await pilot.press("m", "m", "c")                                 # mark shots 4 and 3, compare
        await pilot.pause()
        assert app.browser.marked == ["day2/shot-0004.csv", "day2/shot-0003.csv"]
        assert isinstance(app.screen, TextScreen)
        page = str(app.screen.query_one("#page-text", Static).render())
        assert "shot-0004.csv" in page and "envelope_fraction" in page
        await pilot.press("escape", "r")
        await pilot.pause()
        assert isinstance(app.screen, TextScreen)
        assert "# Report: shot 2" in str(app.screen.query_one("#page-text", Static).render())
        await pilot.press("escape", "p")
        await pilot.pause()
    assert app.return_value == ("replay", str(shots / "day2" / "shot-0002.csv"))
