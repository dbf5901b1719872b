"""The screen's muted palette: greys for normal, colour only for abnormal states (always beside a word or glyph)."""

from __future__ import annotations

from rich.style import Style

__all__ = ["NORMAL", "DIM", "FAINT", "LABEL", "STRONG", "CAUTION", "ALERT", "OK_MARK", "GUIDE_A", "GUIDE_B", "GUIDE_C", "BOX", "BLINK", "LOUD", "STALE"]

NORMAL = Style(color="#c8c8c0")
DIM = Style(color="#8a8a84")
FAINT = Style(color="#5e605c")
LABEL = Style(color="#a4a69e")
STRONG = Style(color="#ecece4", bold=True)
# Abnormal only: amber for a caution (advisory, stale, returned), brick red for an alert.
CAUTION = Style(color="#d7a24a", bold=True)
ALERT = Style(color="#e06c5a", bold=True)
OK_MARK = Style(color="#9fb49a")
# Map guides: three quiet hues that stay in the background.
GUIDE_A = Style(color="#6f8596")   # constant Debye length
GUIDE_B = Style(color="#8a7f96")   # constant particles per Debye sphere
GUIDE_C = Style(color="#96896f")   # cutoff density
BOX = Style(color="#a0a89a")       # the envelope's box
BLINK = Style(reverse=True)        # flashing phase of an unacknowledged alarm (toggled)
LOUD = Style(reverse=True)         # steady emphasis of a stale or broken source (never toggled)
STALE = Style(color="#8a8a84", strike=True)   # a value that is no longer live: dimmed and struck, its age in words beside it
