"""`regime serve`: the operator's screen in web browsers (textual-serve), one read-only console on the run's relay per tab."""

from __future__ import annotations

import argparse
import os
import shlex
import sys
from typing import Any

from monitor.errors import UsageError

__all__ = ["register", "run", "DEFAULT_PORT", "TOKEN_ENV"]

DEFAULT_PORT = 8590
TOKEN_ENV = "REGIME_SERVE_TOKEN"
_COOKIE = "regime_token"


def register(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("source", nargs="?", help="run this SOURCE here and serve it (as `regime watch SOURCE`)")
    parser.add_argument("--relay", metavar="ENDPOINT", help="serve the run of another process's relay "
                        "(relay+tcp://HOST:PORT or relay+ipc://PATH) instead of a SOURCE")
    parser.add_argument("--config", metavar="F", help="with SOURCE: the envelope/config TOML")
    parser.add_argument("--port", type=int, default=DEFAULT_PORT, help=f"HTTP port (default {DEFAULT_PORT})")
    parser.add_argument("--allow-remote", action="store_true",
                        help=f"listen on every interface (default: 127.0.0.1 only); needs --token or ${TOKEN_ENV}")
    parser.add_argument("--token", help=f"a shared secret browsers must give once as ?token=... (default ${TOKEN_ENV})")
    parser.add_argument("--title", default=None, help="the page's title")


def _check(args: argparse.Namespace) -> str | None:
    if (args.source is None) == (args.relay is None):
        raise UsageError("give a SOURCE or --relay ENDPOINT (one of them)")
    if not 0 < args.port < 65536:
        raise UsageError(f"--port {args.port}: give 1-65535")
    token = args.token or os.environ.get(TOKEN_ENV) or None
    if args.allow_remote and not token:
        raise UsageError(f"--allow-remote needs a shared token (--token or ${TOKEN_ENV}): "
                         "a browser anywhere could otherwise watch the run")
    if token is not None and len(token) < 12:
        raise UsageError("the token must be at least 12 characters")
    return token


def run(args: argparse.Namespace) -> int:
    token = _check(args)
    try:
        from textual_serve.server import Server
    except ImportError:
        raise UsageError("regime serve needs textual-serve: pip install 'regime[serve]'") from None
    import tempfile
    import threading

    from monitor.relay.wire import console_endpoint

    stop = threading.Event()
    owner: Any = None
    thread: threading.Thread | None = None
    tmp: tempfile.TemporaryDirectory[str] | None = None
    if args.relay is not None:
        relay = "relay+" + console_endpoint(args.relay)
    else:
        from monitor.config import load_config
        from monitor.relay.owner import start_relay
        from monitor.session import Session, make_engine
        from monitor.sources import is_live, open_source

        config = load_config(args.config)
        source = open_source(args.source, config)
        session = Session(source, config, engine=make_engine(config), live=is_live(args.source))
        tmp = tempfile.TemporaryDirectory(prefix="regime-serve-")
        owner = start_relay(session, f"ipc://{tmp.name}/relay")
        relay = "relay+" + owner.endpoint
        session.open()
        thread = threading.Thread(target=session.run, kwargs={"stop": stop}, name="regime-serve-run", daemon=True)
        thread.start()
    title = args.title or f"regime serve: {args.source or args.relay}"
    command = " ".join(shlex.quote(x) for x in (sys.executable, "-m", "monitor.relay.tab", relay, "--title", title))
    host = "0.0.0.0" if args.allow_remote else "127.0.0.1"
    server = _server(Server, command, host, args.port, title, token)
    where = f"http://{'127.0.0.1' if not args.allow_remote else 'HOST'}:{args.port}/"
    print(f"regime serve: {where}{'?token=...' if token else ''} (read-only consoles of {relay})", file=sys.stderr)
    try:
        server.serve()
    finally:
        stop.set()
        if thread is not None:
            thread.join(timeout=5.0)
        if owner is not None:
            session.close()
        if tmp is not None:
            tmp.cleanup()
    return 0


def _server(base: Any, command: str, host: str, port: int, title: str, token: str | None) -> Any:
    """textual-serve's Server, asking every request for the token (``?token=`` once, then a cookie) and
    building its page's addresses from the host the browser used."""
    import hmac

    from aiohttp import web

    class RegimeServer(base):
        async def _make_app(self) -> web.Application:
            app: web.Application = await super()._make_app()
            if token is not None:
                app.middlewares.append(_check_token)
            return app

        async def handle_index(self, request: web.Request) -> Any:
            self.public_url = f"{request.scheme}://{request.host}"
            return await super().handle_index(request)

    @web.middleware
    async def _check_token(request: web.Request, handler: Any) -> Any:
        assert token is not None
        given = request.query.get("token") or request.cookies.get(_COOKIE) or ""
        if not hmac.compare_digest(given.encode(), token.encode()):
            raise web.HTTPForbidden(text="regime serve: open the address with ?token=... (the shared token)")
        response = await handler(request)
        if "token" in request.query and isinstance(response, web.Response):
            response.set_cookie(_COOKIE, token, httponly=True, samesite="Strict")
        return response

    return RegimeServer(command, host=host, port=port, title=title)
