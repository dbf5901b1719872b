"""The damaged lines of one CSV replay: the first one, the skipped ones by reason, what the end says of them."""

from __future__ import annotations

__all__ = ["DamageRecord", "DamageAccess", "KEEP_SKIPPED_LINES"]

KEEP_SKIPPED_LINES = 100            # line numbers of skipped damaged lines kept for the summary
_SHOW_SKIPPED_LINES = 5             # ... and named in the end message


class DamageRecord:
    """``first`` is the first damaged line (number, reason); in "skip" ``mode`` ``skipped`` counts the
    skipped lines, each once, and ``lines`` holds the first ``KEEP_SKIPPED_LINES`` of their numbers."""

    def __init__(self, mode: str) -> None:
        self.mode = mode                               # "stop" or "skip"
        self.first: tuple[int, str] | None = None      # (line number, reason) of the first damage
        self.skipped = 0                               # damaged lines skipped (skip mode), each once
        self.lines: list[int] = []                     # their line numbers, the first KEEP_SKIPPED_LINES
        self._reasons: dict[str, int] = {}             # reason token -> skipped lines
        self._upto = 0                                 # highest line counted (a seek back reads lines again)

    def note(self, number: int, reason: str, why: str) -> None:
        """One damaged line, with its reason token (``damaged_line``, ``truncated_line``) and why."""
        if self.first is None:
            self.first = (number, why)
        if self.mode == "stop":
            return
        if number > self._upto:                   # a line read again after a seek back counts once
            self._upto = number
            self.skipped += 1
            self._reasons[reason] = self._reasons.get(reason, 0) + 1
            if len(self.lines) < KEEP_SKIPPED_LINES:
                self.lines.append(number)

    def end_message(self, end: str) -> str:
        """What the replay's end says about damage (without the file name): in stop mode where it
        stopped and why; in skip mode how many lines were skipped, which, and that they were kept."""
        if self.first is None:
            return end
        line, why = self.first
        if self.mode == "stop":
            return f"replayed up to line {line}, damaged there: {why}"
        n = self.skipped
        shown = ", ".join(str(x) for x in self.lines[:_SHOW_SKIPPED_LINES])
        more = f" (+{n - _SHOW_SKIPPED_LINES} more)" if n > _SHOW_SKIPPED_LINES else ""
        if len(self._reasons) == 1:
            (token,) = self._reasons
            how = f"rejected as {token}"
        else:
            how = "rejected (" + ", ".join(f"{k} {v}" for k, v in sorted(self._reasons.items())) + ")"
        if n == 1:
            return f"{end}; 1 damaged line skipped (line {line}: {why}), {how} and kept with the rejections"
        return (f"{end}; {n} damaged lines skipped (lines {shown}{more}; first: {why}), each {how} "
                f"and kept with the rejections")

    def summary(self) -> dict[str, object] | None:
        """The summary's ``damage`` object: ``line`` and ``reason`` of the first damaged line, ``mode``;
        in skip mode also ``skipped`` (count), ``lines`` (the first ``lines_cap`` line numbers)."""
        if self.first is None:
            return None
        out: dict[str, object] = {"line": self.first[0], "reason": self.first[1], "mode": self.mode}
        if self.mode == "skip":
            out.update(skipped=self.skipped, lines=list(self.lines), lines_cap=KEEP_SKIPPED_LINES)
        return out


class DamageAccess:
    """What a CSV source says about its damaged lines (its ``_damage`` record and ``_end_label``)."""

    _damage: DamageRecord
    _end_label: str

    @property
    def damage(self) -> tuple[int, str] | None:
        """(line number, reason) of the first damaged line; None while there is none."""
        return self._damage.first

    @property
    def skipped(self) -> int:
        """Damaged lines skipped (skip mode), each once."""
        return self._damage.skipped

    @property
    def skipped_lines(self) -> list[int]:
        """Line numbers of the skipped lines, the first ``KEEP_SKIPPED_LINES`` (csv_damage)."""
        return self._damage.lines

    def end_message(self, end: str | None = None) -> str:
        """What the replay's end says about damage (without the file name): in stop mode where it
        stopped and why; in skip mode how many lines were skipped, which, and that they were kept."""
        return self._damage.end_message(end or self._end_label)

    def damage_summary(self) -> dict[str, object] | None:
        """The summary's ``damage`` object (csv_damage.DamageRecord.summary); None without damage."""
        return self._damage.summary()
