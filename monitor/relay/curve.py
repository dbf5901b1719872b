"""CURVE for the relay (zmq.auth key files, as for ZeroMQ sources): the owner as server with the consoles' public keys, a console as client."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from monitor.errors import UsageError

__all__ = ["RelayCurve", "ConsoleCurve", "server_socket_keys", "client_socket_keys", "start_authenticator"]

RelayCurve = tuple[str | Path, str | Path]      # (the owner's secret key file, directory of consoles' public keys)
ConsoleCurve = tuple[str | Path, str | Path]    # (the owner's public key file, the console's secret key file)


def _load(path: str | Path, *, secret: bool) -> tuple[bytes, bytes | None]:
    import zmq
    import zmq.auth
    if not zmq.has("curve"):
        raise UsageError("this libzmq has no CURVE support")
    try:
        public, private = zmq.auth.load_certificate(str(path))
    except (OSError, ValueError) as exc:
        raise UsageError(f"CURVE key file {path}: {exc}") from None
    if secret and private is None:
        raise UsageError(f"CURVE key file {path}: holds no secret key (give the .key_secret file)")
    return public, private


def server_socket_keys(sock: Any, secret_file: str | Path) -> None:
    """Make ``sock`` a CURVE server with the owner's key pair."""
    public, private = _load(secret_file, secret=True)
    sock.curve_server = True
    sock.curve_publickey = public
    sock.curve_secretkey = private


def client_socket_keys(sock: Any, curve: ConsoleCurve) -> None:
    """Make ``sock`` a CURVE client of the owner whose public key is in ``curve[0]``."""
    server_public, _ = _load(curve[0], secret=False)
    public, private = _load(curve[1], secret=True)
    sock.curve_serverkey = server_public
    sock.curve_publickey = public
    sock.curve_secretkey = private


def start_authenticator(context: Any, clients: str | Path) -> Any:
    """A ZAP handler on ``context`` admitting the consoles whose public keys are in the directory ``clients``."""
    from zmq.auth.thread import ThreadAuthenticator
    if not Path(clients).is_dir():
        raise UsageError(f"CURVE consoles' keys: {clients} is not a directory of public key files")
    auth = ThreadAuthenticator(context)
    auth.start()
    auth.configure_curve(domain="*", location=str(clients))
    return auth
