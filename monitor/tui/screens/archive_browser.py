"""The shot browser: the catalogue as a sortable, filterable table (the --where language), a detail pane, keys to open a report, replay, mark and compare."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Sequence

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.message import Message
from textual.screen import ModalScreen, Screen
from textual.widgets import DataTable, Footer, Input, Static
from monitor.archive.columns import cell_text

__all__ = ["ArchiveBrowser", "TextScreen", "Query", "SHOWN"]

# (where text, sort pairs) -> rows; raises ValueError (WhereError) with a message for a bad expression
Query = Callable[[str, Sequence[tuple[str, bool]]], list[dict[str, object]]]

SHOWN = ("shot", "file", "started", "status", "duration", "envelope_fraction", "excursions", "priority_max",
         "ne_median", "Te_median")




class TextScreen(ModalScreen[None]):
    """A page of text (a report, a comparison), closed with escape or q."""

    BINDINGS = [Binding("escape,q", "dismiss", "close")]

    def __init__(self, title: str, text: str) -> None:
        super().__init__()
        self._title, self._text = title, text

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="page"):
            yield Static(self._text, id="page-text", markup=False)
        yield Footer()

    def on_mount(self) -> None:
        self.query_one("#page", VerticalScroll).border_title = self._title


class ArchiveBrowser(Screen[None]):
    """The table of shots. ``marked`` holds the files marked for comparison; ``said`` the last message."""

    BINDINGS = [
        Binding("slash", "filter", "filter", key_display="/"),
        Binding("s", "sort", "sort by column"),
        Binding("m", "mark", "mark"),
        Binding("c", "compare", "compare marked"),
        Binding("r,enter", "report", "report"),
        Binding("p", "replay", "replay"),
        Binding("q", "app.quit", "quit"),
    ]

    @dataclass
    class Chosen(Message):
        """The operator asked for ``action`` ("report", "compare", "replay") on ``files``."""

        action: str
        files: list[str]

    def __init__(self, query: Query, *, where: str = "") -> None:
        super().__init__()
        self._query = query
        self._where = where
        self._sort: list[tuple[str, bool]] = []
        self.rows: list[dict[str, object]] = []
        self.marked: list[str] = []
        self.said = ""

    def compose(self) -> ComposeResult:
        yield Input(value=self._where, placeholder='filter, e.g. cutoff_ratio_max > 1 and alarm("ne_high")',
                    id="filter")
        with Horizontal(id="body"):
            yield DataTable(id="shots", cursor_type="row", zebra_stripes=False)
            with VerticalScroll(id="detail"):
                yield Static("", id="detail-text", markup=False)
        yield Static("", id="message", markup=False)
        yield Footer()

    def on_mount(self) -> None:
        table = self.query_one("#shots", DataTable)
        for name in SHOWN:
            table.add_column(name, key=name)
        self.query_one("#detail", VerticalScroll).border_title = "shot"
        self.reload()
        table.focus()

    # -- data ------------------------------------------------------------------------------------------
    def reload(self) -> None:
        try:
            rows = self._query(self._where, self._sort)
        except ValueError as exc:
            self.say(f"filter not applied: {exc}")
            return
        self.rows = rows
        table = self.query_one("#shots", DataTable)
        table.clear()
        for r in rows:
            file = str(r.get("file"))
            mark = "● " if file in self.marked else ""
            table.add_row(*[mark + cell_text(r.get(c)) if c == "shot" else cell_text(r.get(c)) for c in SHOWN], key=file)
        order = ", ".join(f"{c} {'desc' if d else 'asc'}" for c, d in self._sort) or "file"
        self.say(f"{len(rows)} shots" + (f" where {self._where}" if self._where else "") + f"; sorted by {order}")
        self._show_detail()

    def say(self, text: str) -> None:
        self.said = text
        self.query_one("#message", Static).update(text)

    def selected(self) -> dict[str, object] | None:
        table = self.query_one("#shots", DataTable)
        if not self.rows or table.cursor_row < 0 or table.cursor_row >= len(self.rows):
            return None
        return self.rows[table.cursor_row]

    def _show_detail(self) -> None:
        row = self.selected()
        text = "" if row is None else "\n".join(f"{k}: {cell_text(v)}" for k, v in row.items()
                                                 if v is not None and v != "")
        self.query_one("#detail-text", Static).update(text)

    # -- events ----------------------------------------------------------------------------------------
    def on_input_submitted(self, event: Input.Submitted) -> None:
        self._where = event.value.strip()
        self.reload()
        self.query_one("#shots", DataTable).focus()

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        self._show_detail()

    def on_data_table_header_selected(self, event: DataTable.HeaderSelected) -> None:
        self._sort_by(str(event.column_key.value))

    # -- actions ---------------------------------------------------------------------------------------
    def action_filter(self) -> None:
        self.query_one("#filter", Input).focus()

    def action_sort(self) -> None:
        table = self.query_one("#shots", DataTable)
        self._sort_by(SHOWN[max(0, table.cursor_column)])

    def _sort_by(self, name: str) -> None:
        """First press: ascending by ``name``; again on the same column: descending."""
        desc = bool(self._sort and self._sort[0] == (name, False))
        self._sort = [(name, desc)]
        self.reload()

    def action_mark(self) -> None:
        row = self.selected()
        if row is None:
            return
        file = str(row["file"])
        if file in self.marked:
            self.marked.remove(file)
        elif len(self.marked) >= 8:
            self.say("at most 8 shots can be compared")
            return
        else:
            self.marked.append(file)
        table = self.query_one("#shots", DataTable)
        cursor = table.cursor_row
        table.update_cell(file, "shot", ("● " if file in self.marked else "") + cell_text(row.get("shot")))
        table.move_cursor(row=min(cursor + 1, len(self.rows) - 1))
        self.say(f"{len(self.marked)} marked for comparison (c compares them)")

    def action_compare(self) -> None:
        if len(self.marked) < 2:
            self.say("mark two or more shots with m first")
            return
        self.post_message(self.Chosen("compare", list(self.marked)))

    def action_report(self) -> None:
        row = self.selected()
        if row is not None:
            self.post_message(self.Chosen("report", [str(row["file"])]))

    def action_replay(self) -> None:
        row = self.selected()
        if row is not None:
            self.post_message(self.Chosen("replay", [str(row["file"])]))
