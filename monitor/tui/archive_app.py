"""The shot browser app: wires the browser screen to the catalogue (read-only) and opens reports and comparisons."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Sequence

from textual.app import App

from monitor.tui.screens.archive_browser import ArchiveBrowser, Query, TextScreen

__all__ = ["ArchiveApp", "run_browser", "query_for"]

CSS = """
Screen { background: #1d1f1e; color: #c8c8c0; }
#filter { border: tall #4a4e4b; background: #2a2d2b; }
#body { height: 1fr; }
#shots { width: 3fr; }
#detail { width: 1fr; min-width: 30; border-top: solid #4a4e4b; border-title-color: #a4a69e; padding: 0 1; }
#message { height: 1; background: #2a2d2b; padding: 0 1; }
#page { border-top: solid #4a4e4b; border-title-color: #a4a69e; padding: 0 1; background: #1d1f1e; }
"""


def query_for(directory: str | os.PathLike[str], version: int) -> Query:
    """A browser query over the catalogue of ``directory`` (a fresh read-only connection per query)."""
    from monitor.archive import catalogue
    from monitor.archive.where import parse_where

    def query(where: str, sort: Sequence[tuple[str, bool]]) -> list[dict[str, object]]:
        condition = parse_where(where) if where else None
        db = catalogue.open_readonly(directory)
        try:
            return [dict(r) for r in catalogue.select(db, version, condition, sort)]
        finally:
            db.close()

    return query


class ArchiveApp(App[tuple[str, str] | None]):
    """The browser. Exits with ("replay", path) when the operator asks to replay a shot (the command runs it)."""

    CSS = CSS
    TITLE = "regime archive"

    def __init__(self, directory: str | os.PathLike[str], version: int, where: str = "",
                 config_path: str | None = None) -> None:
        super().__init__()
        self.directory = Path(directory)
        self.config_path = config_path
        self.browser = ArchiveBrowser(query_for(directory, version), where=where)

    def on_mount(self) -> None:
        self.sub_title = str(self.directory)
        self.push_screen(self.browser)

    def on_archive_browser_chosen(self, event: ArchiveBrowser.Chosen) -> None:
        paths = [str(self.directory / f) for f in event.files]
        if event.action == "replay":
            self.exit(("replay", paths[0]))
        elif event.action == "report":
            self._report(paths[0])
        elif event.action == "compare":
            self._compare(paths)

    def _report(self, path: str) -> None:
        from monitor.report import build_report, to_markdown

        try:
            text = to_markdown(build_report(path, config_path=self.config_path))
        except Exception as exc:        # a file that cannot be reported is a message, never a crash
            self.browser.say(f"{os.path.basename(path)}: no report: {exc}")
            return
        self.push_screen(TextScreen(f"report: {os.path.basename(path)}", text))

    def _compare(self, paths: list[str]) -> None:
        from monitor.archive.compare import compare, differences

        try:
            shots = compare(paths, self.config_path)
        except Exception as exc:
            self.browser.say(f"no comparison: {exc}")
            return
        labels = [s.label for s in shots]
        width = max(12, *(len(x) for x in labels))
        lines = [f"{'':<22}" + "  ".join(x.ljust(width) for x in labels)]
        for entry in differences(shots):
            values = entry["values"]
            assert isinstance(values, list)
            cells = ["-" if v is None else (f"{v:.4g}" if isinstance(v, float) else str(v)) for v in values]
            lines.append(f"{entry['name']:<22}" + "  ".join(c.ljust(width) for c in cells))
        self.push_screen(TextScreen(f"compare: {len(paths)} shots", "\n".join(lines)))


def run_browser(directory: str | os.PathLike[str], version: int, where: str = "",
                config_path: str | None = None) -> tuple[str, str] | None:
    """Run the browser on this terminal; what the operator asked for on leaving (a replay), or None."""
    return ArchiveApp(directory, version, where, config_path).run()
