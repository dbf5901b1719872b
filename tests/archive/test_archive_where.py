"""The --where language: what it accepts and refuses, and a fuzz (hypothesis) that it never runs anything but a read-only query."""

from __future__ import annotations

import re
import sqlite3
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from monitor.archive import catalogue
from monitor.archive.build import build
from monitor.archive.columns import COLUMN_NAMES
from monitor.archive.where import ALARM_SQL, WhereError, parse_where


@pytest.mark.parametrize("text, sql, params", [
    ("cutoff_ratio_max > 1 and duration > 10", '(("cutoff_ratio_max" > ?) AND ("duration" > ?))', (1.0, 10.0)),
    ("not shot = 3 or shot != 4", '((NOT ("shot" = ?)) OR ("shot" != ?))', (3.0, 4.0)),
    ("shot between 2 and 5", '("shot" BETWEEN ? AND ?)', (2.0, 5.0)),
    ("shot NOT BETWEEN -1 AND 1e3", '("shot" NOT BETWEEN ? AND ?)', (-1.0, 1000.0)),
    ('alarm("ne_high")', ALARM_SQL, ("ne_high",)),
    ("started >= 2026-11-30", '("started" >= ?)', ("2026-11-30",)),
    ("started < 2026-11-30T12:00+01:00", '("started" < ?)', ("2026-11-30T11:00:00.000000+00:00",)),
    ("damage is not null and (status = 'ok' or status = \"damaged\")",
     '(("damage" IS NOT NULL) AND (("status" = ?) OR ("status" = ?)))', ("ok", "damaged")),
])
def test_accepted_expressions(text: str, sql: str, params: tuple[object, ...]) -> None:
    cond = parse_where(text)
    assert (cond.sql, cond.params) == (sql, params)


@pytest.mark.parametrize("text, where", [
    ("", "empty"), ("shot >", "column 7"), ("nosuch > 1", "no column 'nosuch'"), ("shot > 1 shot", "column 10"),
    ("shot = 1; DROP TABLE shots", "column 9: cannot read"), ("alarm(ne_high)", "alarm name in quotes"),
    ("started > 2026-13-45", "not a date"), ("(shot > 1", "')'"), ("shot not = 1", "'between' after 'not'"),
    ("'x' = 1 --", "column 9"),
])
def test_refused_expressions_say_where(text: str, where: str) -> None:
    with pytest.raises(WhereError, match=re.escape(where)):
        parse_where(text)


def test_queries_on_a_real_catalogue(shots: Path) -> None:
    build(shots)
    db = catalogue.open_readonly(shots)
    try:
        def files(text: str) -> set[str]:
            return {str(r["file"]) for r in catalogue.select(db, 1, parse_where(text), columns=["file"])}

        assert files('alarm("over_cutoff")') == {"helium_microwave_cutoff.csv"}
        assert files("cutoff_ratio_max > 1 and duration > 10") == {"helium_microwave_cutoff.csv"}
        assert files("started >= 2027-01-01") == {f"day2/shot-000{n}.csv" for n in range(1, 5)}
        assert files("started < 2026-01-02 and not alarm(\"ne_high\")") == {"helium_microwave_cutoff.csv"}
        assert files("shot between 2 and 3") == {"day2/shot-0002.csv", "day2/shot-0003.csv"}
        assert files("priority_max = 'urgent' or priority_rank = 2") == {
            "helium_microwave_cutoff.csv", "argon_rf_excursion.csv"} | files("alarm(\"ne_high\")")
    finally:
        db.close()


_WORDS = list(COLUMN_NAMES[:12]) + ["and", "or", "not", "between", "is", "null", "alarm", "(", ")", "=", "<", ">=",
                                    "!=", "1", "-2.5e3", "'ok'", '"x"', "2026-11-30", ";", "--", "DROP", "TABLE",
                                    "shots", "/*", "*/", "'", '"', "UNION", "SELECT", "ATTACH", "x'00'", "?", ","]
_READ_ONLY = {sqlite3.SQLITE_SELECT, sqlite3.SQLITE_READ, sqlite3.SQLITE_FUNCTION}


@pytest.fixture(scope="module")
def fuzz_db(tmp_path_factory: pytest.TempPathFactory) -> Path:
    import shutil

    from make_shots import DEMO, settle

    folder = tmp_path_factory.mktemp("fuzz")
    for f in DEMO.glob("argon*"):
        if f.suffix in (".csv", ".jsonl"):
            shutil.copy(f, folder / f.name)
    settle(folder)
    build(folder)
    return folder


@settings(max_examples=300)
@given(st.one_of(st.text(max_size=80), st.lists(st.sampled_from(_WORDS), max_size=14).map(" ".join)))
def test_fuzz_only_read_only_queries_run(fuzz_db: Path, text: str) -> None:
    try:
        cond = parse_where(text)
    except WhereError:
        return
    # the SQL is made of quoted whitelisted names, keywords, operators and placeholders only
    leftover = re.sub(r'"[a-z_A-Z]+"|\?|\b(AND|OR|NOT|BETWEEN|IS|NULL)\b|[()=<>!]', " ", cond.sql.replace(ALARM_SQL, "?"))
    assert leftover.strip() == "", cond.sql
    assert all(q.strip('"') in COLUMN_NAMES for q in re.findall(r'"[^"]*"', cond.sql))
    db = catalogue.open_readonly(fuzz_db)
    actions: list[int] = []

    def authorizer(action: int, *args: object) -> int:
        actions.append(action)
        return sqlite3.SQLITE_OK if action in _READ_ONLY else sqlite3.SQLITE_DENY

    db.set_authorizer(authorizer)
    try:
        catalogue.select(db, 1, cond, limit=3)
    finally:
        db.close()
    assert actions and set(actions) <= _READ_ONLY
