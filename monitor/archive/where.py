"""The `--where` language: a small expression parser that yields a parameterised SQL condition over whitelisted columns.

Grammar (case-insensitive keywords)::

    expr    := and_ ("or" and_)*
    and_    := not_ ("and" not_)*
    not_    := "not" not_ | atom
    atom    := "(" expr ")" | "alarm" "(" STRING ")" | operand tail
    tail    := OP operand | ["not"] "between" operand "and" operand | "is" ["not"] "null"
    operand := COLUMN | NUMBER | STRING | DATE | "-" NUMBER
    OP      := "=" | "==" | "!=" | "<>" | "<" | "<=" | ">" | ">="

A COLUMN must be one of the catalogue's columns; every literal becomes a bound parameter; the SQL text
is made only of quoted whitelisted names, these operators, parentheses and ``?``.
"""

from __future__ import annotations

import datetime as _dt
import re
from dataclasses import dataclass

from monitor.archive.columns import COLUMN_NAMES, column

__all__ = ["WhereError", "Condition", "parse_where", "ALARM_SQL"]

Param = str | float | int

ALARM_SQL = ('EXISTS (SELECT 1 FROM alarms AS a WHERE a.version = shots.version AND a.file = shots.file '
             'AND a.name = ?)')
_OPS = {"=": "=", "==": "=", "!=": "!=", "<>": "!=", "<": "<", "<=": "<=", ">": ">", ">=": ">="}
_KEYWORDS = {"and", "or", "not", "between", "is", "null", "alarm"}
_MAX_DEPTH = 50
_MAX_TEXT = 2000

_TOKEN = re.compile(r"""
    (?P<space>\s+)
  | (?P<date>\d{4}-\d{2}-\d{2}(?:[T ]\d{2}:\d{2}(?::\d{2}(?:\.\d+)?)?(?:Z|[+-]\d{2}:\d{2})?)?)(?![\w.])
  | (?P<number>(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)(?![\w.])
  | (?P<string>"[^"\\]*"|'[^'\\]*')
  | (?P<name>[A-Za-z_][A-Za-z0-9_]*)
  | (?P<op><=|>=|==|!=|<>|<|>|=)
  | (?P<punct>[(),-])
""", re.VERBOSE)


class WhereError(ValueError):
    """An expression the language does not accept (the message says where and what was expected)."""


@dataclass(frozen=True)
class Condition:
    """A SQL condition (text built from whitelisted parts only) and its bound parameters."""

    sql: str
    params: tuple[Param, ...]


@dataclass(frozen=True)
class _Tok:
    kind: str
    text: str
    pos: int


def _tokens(text: str) -> list[_Tok]:
    out: list[_Tok] = []
    pos = 0
    while pos < len(text):
        m = _TOKEN.match(text, pos)
        if m is None:
            raise WhereError(f"at column {pos + 1}: cannot read {text[pos:pos + 12]!r}")
        kind = m.lastgroup or ""
        if kind != "space":
            word = m.group()
            if kind == "name" and word.lower() in _KEYWORDS:
                kind, word = "kw", word.lower()
            out.append(_Tok(kind, word, pos))
        pos = m.end()
    out.append(_Tok("end", "", len(text)))
    return out


class _Parser:
    def __init__(self, text: str) -> None:
        self.toks = _tokens(text)
        self.i = 0
        self.params: list[Param] = []
        self.depth = 0

    @property
    def tok(self) -> _Tok:
        return self.toks[self.i]

    def take(self, kind: str, text: str | None = None) -> _Tok | None:
        t = self.tok
        if t.kind == kind and (text is None or t.text == text):
            self.i += 1
            return t
        return None

    def expect(self, kind: str, text: str | None, what: str) -> _Tok:
        got = self.take(kind, text)
        if got is None:
            t = self.tok
            seen = "the end" if t.kind == "end" else repr(t.text)
            raise WhereError(f"at column {t.pos + 1}: expected {what}, found {seen}")
        return got

    def expr(self) -> str:
        self.depth += 1
        if self.depth > _MAX_DEPTH:
            raise WhereError(f"nested more than {_MAX_DEPTH} deep")
        parts = [self.and_()]
        while self.take("kw", "or"):
            parts.append(self.and_())
        self.depth -= 1
        return parts[0] if len(parts) == 1 else "(" + " OR ".join(parts) + ")"

    def and_(self) -> str:
        parts = [self.not_()]
        while self.take("kw", "and"):
            parts.append(self.not_())
        return parts[0] if len(parts) == 1 else "(" + " AND ".join(parts) + ")"

    def not_(self) -> str:
        if self.take("kw", "not"):
            self.depth += 1
            if self.depth > _MAX_DEPTH:
                raise WhereError(f"nested more than {_MAX_DEPTH} deep")
            inner = self.not_()
            self.depth -= 1
            return f"(NOT {inner})"
        return self.atom()

    def atom(self) -> str:
        if self.take("punct", "("):
            inner = self.expr()
            self.expect("punct", ")", "')'")
            return inner
        if self.take("kw", "alarm"):
            self.expect("punct", "(", "'(' after alarm")
            name = self.expect("string", None, 'an alarm name in quotes, e.g. alarm("ne_high")')
            self.expect("punct", ")", "')'")
            self.params.append(name.text[1:-1])
            return ALARM_SQL
        left = self.operand()
        if self.take("kw", "is"):
            negate = self.take("kw", "not") is not None
            self.expect("kw", "null", "null")
            return f"({left} IS {'NOT ' if negate else ''}NULL)"
        negate = self.take("kw", "not") is not None
        if self.take("kw", "between"):
            low = self.operand()
            self.expect("kw", "and", "'and' in 'between A and B'")
            high = self.operand()
            return f"({left} {'NOT ' if negate else ''}BETWEEN {low} AND {high})"
        if negate:
            raise WhereError(f"at column {self.tok.pos + 1}: expected 'between' after 'not'")
        op = self.expect("op", None, "a comparison (=, !=, <, <=, >, >=), 'between' or 'is null'")
        right = self.operand()
        return f"({left} {_OPS[op.text]} {right})"

    def operand(self) -> str:
        t = self.tok
        if self.take("name"):
            col = column(t.text)
            if col is None:
                near = [c for c in COLUMN_NAMES if c.startswith(t.text[:3])][:6]
                hint = f"; did you mean {', '.join(near)}?" if near else "; `regime archive DIR --columns` lists them"
                raise WhereError(f"at column {t.pos + 1}: no column {t.text!r}{hint}")
            return '"' + col.name + '"'
        if self.take("number"):
            self.params.append(float(t.text))
            return "?"
        if self.take("punct", "-"):
            n = self.expect("number", None, "a number after '-'")
            self.params.append(-float(n.text))
            return "?"
        if self.take("string"):
            self.params.append(t.text[1:-1])
            return "?"
        if self.take("date"):
            self.params.append(_utc_text(t))
            return "?"
        seen = "the end" if t.kind == "end" else repr(t.text)
        raise WhereError(f"at column {t.pos + 1}: expected a column name, a number, a date or a quoted text, "
                         f"found {seen}")


def _utc_text(t: _Tok) -> str:
    """A date as ``started`` holds it: a day alone as YYYY-MM-DD (its start, UTC); a time as UTC ISO 8601
    to the microsecond (without an offset it is UTC)."""
    try:
        when = _dt.datetime.fromisoformat(t.text.replace(" ", "T").replace("Z", "+00:00"))
    except ValueError:
        raise WhereError(f"at column {t.pos + 1}: {t.text!r} is not a date") from None
    if len(t.text) == 10:
        return when.date().isoformat()
    if when.tzinfo is None:
        when = when.replace(tzinfo=_dt.timezone.utc)
    return when.astimezone(_dt.timezone.utc).isoformat(timespec="microseconds")


def parse_where(text: str) -> Condition:
    """``text`` as a Condition; WhereError with the column and what was expected when it does not parse.
    Dates (2026-11-30, 2026-11-30T12:00, with an optional offset) compare as ISO text with ``started`` (UTC)."""
    if len(text) > _MAX_TEXT:
        raise WhereError(f"longer than {_MAX_TEXT} characters")
    p = _Parser(text)
    if p.tok.kind == "end":
        raise WhereError("empty expression")
    sql = p.expr()
    if p.tok.kind != "end":
        raise WhereError(f"at column {p.tok.pos + 1}: unexpected {p.tok.text!r} (missing 'and' or 'or'?)")
    return Condition(sql, tuple(p.params))
