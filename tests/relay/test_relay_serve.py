"""`regime serve` in a real headless Chromium (the system's package): the page loads, readings appear, a key reaches the app, only loopback listens."""

from __future__ import annotations

import os
import re
import shutil
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
ANSI = re.compile(rb"\x1b\[[0-9;?<>=]*[ -/]*[@-~]|\x1b[()][A-Za-z0-9]|\x1b[=>]")

pytest.importorskip("textual_serve", reason="regime serve needs the [serve] extra (textual-serve)")


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def _serve(*extra: str) -> tuple[subprocess.Popen[bytes], int]:
    port = _free_port()
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    env.pop("REGIME_SERVE_TOKEN", None)
    proc = subprocess.Popen([sys.executable, "-m", "monitor", "serve", "sim:demo?rate=100", "--port", str(port), *extra],
                            env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    deadline = time.monotonic() + 20.0
    while time.monotonic() < deadline:
        with socket.socket() as s:
            if s.connect_ex(("127.0.0.1", port)) == 0:
                return proc, port
        if proc.poll() is not None:
            break
        time.sleep(0.05)
    proc.kill()
    raise AssertionError("regime serve did not start listening")


def _stop(proc: subprocess.Popen[bytes]) -> None:
    proc.terminate()
    try:
        proc.wait(10)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait(5)


def _listening(pid: int) -> list[str]:
    """Every TCP address the process and its children listen on."""
    psutil = pytest.importorskip("psutil")
    procs = [psutil.Process(pid), *psutil.Process(pid).children(recursive=True)]
    return [c.laddr.ip for p in procs for c in p.net_connections(kind="inet") if c.status == psutil.CONN_LISTEN]


@pytest.mark.skipif(CHROMIUM is None, reason="no chromium on this machine (apt-get install chromium)")
def test_the_screen_in_a_headless_browser() -> None:
    sync_playwright = pytest.importorskip("playwright.sync_api", reason="playwright drives the browser").sync_playwright
    proc, port = _serve()
    received: list[bytes] = []

    def text(start: int = 0) -> bytes:
        return ANSI.sub(b"", b"".join(received[start:]))

    def wait_for(pattern: bytes, start: int = 0, deadline: float = 30.0) -> bool:
        end = time.monotonic() + deadline
        while time.monotonic() < end:
            if re.search(pattern, text(start)):
                return True
            page.wait_for_timeout(100)
        return False

    try:
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=CHROMIUM, headless=True,
                                        args=["--no-sandbox", "--disable-gpu", "--disable-background-networking"])
            try:
                page = browser.new_page(viewport={"width": 1400, "height": 900})
                page.on("websocket", lambda ws: ws.on(
                    "framereceived", lambda data: received.append(data if isinstance(data, bytes) else data.encode())))
                page.goto(f"http://127.0.0.1:{port}/", wait_until="domcontentloaded")
                assert "regime serve: sim:demo?rate=100" in page.content()                        # the page loaded
                assert wait_for(rb"sim:demo"), "the screen never reached the browser"
                # readings appear: the owner's electron temperature, its sigma and unit on the screen
                assert wait_for(rb"Te [^\n]{0,20}\d+\.\d+ \xc2\xb1\d+% +eV"), text()[-2000:]
                # every listening socket of serve, its owner run and the console tabs is loopback
                addresses = _listening(proc.pid)
                assert addresses and set(addresses) <= {"127.0.0.1", "::1"}, addresses
                # a key press reaches the app: ? opens the help screen
                page.locator(".xterm").first.click()
                mark = len(received)
                page.keyboard.press("?")
                assert wait_for(rb"lists every action by name", start=mark), text(mark)[-2000:]
            finally:
                browser.close()
    finally:
        _stop(proc)


def test_a_token_guards_the_page() -> None:
    proc, port = _serve("--token", "a-shared-secret-1234")
    try:
        with pytest.raises(urllib.error.HTTPError) as refused:
            urllib.request.urlopen(f"http://127.0.0.1:{port}/", timeout=10)
        assert refused.value.code == 403
        with urllib.request.urlopen(f"http://127.0.0.1:{port}/?token=a-shared-secret-1234", timeout=10) as ok:
            assert ok.status == 200 and "regime_token=" in ok.headers.get("Set-Cookie", "")
        assert set(_listening(proc.pid)) <= {"127.0.0.1", "::1"}
    finally:
        _stop(proc)


def test_serve_refuses_remote_without_a_token() -> None:
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    env.pop("REGIME_SERVE_TOKEN", None)
    out = subprocess.run([sys.executable, "-m", "monitor", "serve", "sim:demo", "--allow-remote"], env=env,
                         capture_output=True, text=True, timeout=60)
    assert out.returncode == 2 and "needs a shared token" in out.stderr
    out = subprocess.run([sys.executable, "-m", "monitor", "serve"], env=env, capture_output=True, text=True,
                         timeout=60)
    assert out.returncode == 2 and "give a SOURCE or --relay" in out.stderr


def test_serve_refusals_in_process(capsys, monkeypatch) -> None:
    from monitor.cli import main

    monkeypatch.delenv("REGIME_SERVE_TOKEN", raising=False)
    for argv, says in ((["serve", "sim:demo", "--allow-remote", "--token", "short"], "at least 12"),
                       (["serve", "--relay", "tcp://127.0.0.1:5590", "sim:demo"], "one of them"),
                       (["serve", "--relay", "serial:/dev/ttyS0"], "relay+tcp://HOST:PORT"),
                       (["serve", "sim:demo", "--port", "70000"], "1-65535")):
        assert main(argv) == 2
        assert says in capsys.readouterr().err
