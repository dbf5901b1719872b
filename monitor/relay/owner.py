"""The owner's side in one call: the relay publisher and, when operators are named, the alarm authority, closed with the session."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Mapping

from monitor.relay.authority import OperatorAuthority
from monitor.relay.curve import RelayCurve
from monitor.relay.publisher import RelayPublisher

if TYPE_CHECKING:
    from monitor.session import Session

__all__ = ["RelayOwner", "start_relay", "load_operator_keys"]


def load_operator_keys(path: str | Path) -> dict[str, str]:
    """The operators a relay accepts actions from: one ``IDENTITY KEY`` pair a line (``#`` comments),
    identity without spaces, key at least 12 characters; key -> identity. UsageError for anything else."""
    from monitor.errors import UsageError
    try:
        text = Path(path).read_text(encoding="utf-8")
    except OSError as exc:
        raise UsageError(f"operator keys {path}: {exc.strerror or exc}") from None
    keys: dict[str, str] = {}
    for number, line in enumerate(text.splitlines(), 1):
        words = line.split("#", 1)[0].split()
        if not words:
            continue
        if len(words) != 2 or len(words[1]) < 12:
            raise UsageError(f"operator keys {path}:{number}: write IDENTITY KEY (a key of 12 or more characters)")
        if words[1] in keys:
            raise UsageError(f"operator keys {path}:{number}: this key is given to {keys[words[1]]} already")
        keys[words[1]] = words[0]
    return keys


class RelayOwner:
    """The relay of one session: ``publisher`` and ``authority`` (None without operators)."""

    def __init__(self, publisher: RelayPublisher, authority: OperatorAuthority | None) -> None:
        self.publisher = publisher
        self.authority = authority

    @property
    def endpoint(self) -> str:
        return self.publisher.endpoint

    def close(self) -> None:
        """Stop taking requests, then send what is queued and a last state (idempotent)."""
        if self.authority is not None:
            self.authority.close()
        self.publisher.close()


def start_relay(session: Session, endpoint: str, *, allow_remote: bool = False,
                operators: Mapping[str, str] | None = None, journal: str | Path | None = None,
                interval: float = 1.0, shot: str | None = None, curve: RelayCurve | None = None) -> RelayOwner:
    """Relay ``session`` at ``endpoint``; with ``operators`` (key -> identity) consoles may send actions.
    ``curve`` (the owner's secret key file, a directory of the consoles' public keys) admits only those
    consoles, on the relay and the request channel alike. Attach before the run starts; the session's
    close closes the relay."""
    publisher = RelayPublisher(session, endpoint, allow_remote=allow_remote, interval=interval, shot=shot,
                               requests=bool(operators), curve=curve)
    authority = None
    if operators:
        try:
            authority = OperatorAuthority(session, publisher, operators, journal=journal)
        except Exception:
            publisher.close()
            raise
    owner = RelayOwner(publisher, authority)
    session.add_sink(owner)
    return owner
