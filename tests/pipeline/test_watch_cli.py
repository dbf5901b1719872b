"""`regime watch` as a real subprocess: headless JSON and human lines, end of file, signals, exit codes, ZeroMQ end to end."""

from __future__ import annotations

import json
import os
import selectors
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]


def regime(*args: str, timeout: float = 60) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "monitor", *args], capture_output=True, text=True,
                          timeout=timeout, cwd=ROOT)


def json_lines(text: str) -> list[dict]:
    out = [json.loads(line) for line in text.splitlines() if line.strip()]
    assert all("type" in rec for rec in out)
    return out


def test_sim_headless_json_to_the_end() -> None:
    out = regime("watch", "sim:steady?speed=max&duration=2&seed=3", "--headless", "--json")
    assert out.returncode == 0, out.stderr
    recs = json_lines(out.stdout)
    summary = recs[-1]
    assert summary["type"] == "summary"
    assert set(summary) >= {"accepted", "rejected", "lost"}
    assert summary["accepted"] == 2000 and summary["rejected"] == {} and summary["lost"] == 0
    status = [r for r in recs if r["type"] == "status"]
    assert status and status[-1]["accepted"] == 2000
    assert status[-1]["latest"]["debye_length"] > 0


def test_dropout_rejections_counted_by_reason() -> None:
    out = regime("watch", "sim:dropout?speed=max", "--headless", "--json")
    assert out.returncode == 0, out.stderr
    summary = json_lines(out.stdout)[-1]
    assert summary["accepted"] > 0
    assert sum(summary["rejected"].values()) == summary["rejected_total"] > 0


def test_duration_in_wall_time_with_human_lines() -> None:
    t0 = time.monotonic()
    out = regime("watch", "sim:steady", "--headless", "--duration", "1.5")
    took = time.monotonic() - t0
    assert out.returncode == 0, out.stderr
    lines = out.stdout.splitlines()
    assert any(line.startswith("[connected]") and "debye" in line for line in lines)
    assert "summary of sim:steady: accepted" in out.stdout
    accepted = int(out.stdout.split("summary of sim:steady: accepted ")[1].split(",")[0])
    assert 500 <= accepted <= 3000      # about 1.5 s at 1 kHz
    assert took >= 1.5


@pytest.mark.parametrize("spec", ["nosuch://x", "sim:steady?bogus=1", "sim:steady?rate=-4", "/no/such/file.csv",
                                  "sim:no-such-scenario", "tcp://192.0.2.7:5555"])
def test_bad_source_spec_exits_2(spec: str) -> None:
    out = regime("watch", spec, "--headless", "--duration", "1")
    assert out.returncode == 2, (out.stdout, out.stderr)
    assert out.stderr.strip() and "Traceback" not in out.stderr


def test_csv_file_plays_to_its_end(tmp_path: Path) -> None:
    p = tmp_path / "probe.csv"
    rows = ["t,ne,Te"] + [f"{k * 0.001:.3f},{1e17 + k * 1e13:.6g},{3.0:.3f}" for k in range(500)]
    rows[101] = "0.100,-1e17,3.0"      # refused by value
    p.write_text("\n".join(rows) + "\n", encoding="utf-8")
    out = regime("watch", str(p), "--headless", "--json")
    assert out.returncode == 0, out.stderr
    summary = json_lines(out.stdout)[-1]
    assert summary["accepted"] == 499 and summary["rejected"] == {"ne_not_positive": 1}


def test_foreign_csv_through_a_channel_map(tmp_path: Path) -> None:
    cfg = tmp_path / "probe.toml"
    cfg.write_text('[channels]\ntime_ms = { quantity = "t", unit = "ms" }\n'
                   'dens = { quantity = "ne", unit = "cm^-3" }\ntemp = { quantity = "Te", unit = "K" }\n',
                   encoding="utf-8")
    p = tmp_path / "log.csv"
    p.write_text("time_ms,dens,temp,bias\n" + "".join(f"{k},{1e11},{35000},{-40}\n" for k in range(300)),
                 encoding="utf-8")
    out = regime("watch", str(p), "--config", str(cfg), "--headless", "--json")
    assert out.returncode == 0, out.stderr
    recs = json_lines(out.stdout)
    assert recs[-1]["accepted"] == 300 and recs[-1]["unknown_keys"] == {"bias": 300}
    status = [r for r in recs if r["type"] == "status"][-1]
    assert status["latest"]["ne"] == pytest.approx(1e17)
    assert status["latest"]["Te"] == pytest.approx(35000 * 1.380649e-23 / 1.602176634e-19)  # CODATA k/e
    assert status["time"] == pytest.approx(0.299)


def read_until(proc: subprocess.Popen, want, deadline: float) -> list[str]:
    """Lines of proc.stdout until want(line) is true or the deadline passes."""
    sel = selectors.DefaultSelector()
    sel.register(proc.stdout, selectors.EVENT_READ)
    lines: list[str] = []
    while time.monotonic() < deadline:
        if not sel.select(timeout=0.2):
            continue
        line = proc.stdout.readline()
        if not line:
            break
        lines.append(line)
        if want(line):
            break
    return lines


@pytest.mark.parametrize("sig", [signal.SIGTERM, signal.SIGINT])
def test_signal_prints_the_summary(sig: int) -> None:
    proc = subprocess.Popen([sys.executable, "-m", "monitor", "watch", "sim:steady", "--headless", "--json"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT)
    try:
        first = read_until(proc, lambda line: '"type":"status"' in line, time.monotonic() + 30)
        assert first, "no status line within 30 s"
        proc.send_signal(sig)
        rest, err = proc.communicate(timeout=30)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == 0, err
    summary = json_lines("".join(first) + rest)[-1]
    assert summary["type"] == "summary" and summary["accepted"] > 0


def test_zeromq_end_to_end_every_reading_accounted() -> None:
    import zmq
    import adapters.zmq_stream  # noqa: F401 - fails loudly if the module is broken
    ctx = zmq.Context()
    pub = ctx.socket(zmq.XPUB)
    pub.setsockopt(zmq.LINGER, 0)
    pub.setsockopt(zmq.SNDHWM, 100_000)    # the publisher's own queue must hold the burst (else it drops)
    port = pub.bind_to_random_port("tcp://127.0.0.1")
    proc = subprocess.Popen([sys.executable, "-m", "monitor", "watch", f"tcp://127.0.0.1:{port}",
                             "--headless", "--json"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT)
    try:
        poller = zmq.Poller()
        poller.register(pub, zmq.POLLIN)
        assert poller.poll(30_000), "the subscriber never subscribed"
        pub.recv()                                     # the subscription message
        sent, skipped, negative = 0, 0, 0
        for seq in range(3000):
            if seq % 100 == 50:
                skipped += 1                           # never sent: lost by seq
                continue
            ne = -1e17 if seq % 250 == 7 else 1e17 + seq * 1e12
            negative += ne < 0
            pub.send(json.dumps({"t": 10 + seq * 1e-3, "seq": seq, "ne": ne, "Te": 2.5}).encode())
            sent += 1
        pub.send(b"ne=not-a-number seq=3000 t=13.0")    # refused by the parser
        pub.send(json.dumps({"t": 13.001, "seq": 3001, "ne": 1e17, "Te": 2.5}).encode())
        sent += 1
        want = sent - negative

        def done(line: str) -> bool:
            rec = json.loads(line)
            return rec.get("type") == "status" and rec["accepted"] >= want

        lines = read_until(proc, done, time.monotonic() + 30)
        proc.send_signal(signal.SIGTERM)
        rest, err = proc.communicate(timeout=30)
    finally:
        if proc.poll() is None:
            proc.kill()
        pub.close()
        ctx.term()
    assert proc.returncode == 0, err
    summary = json_lines("".join(lines) + rest)[-1]
    assert summary["accepted"] == want
    assert summary["rejected"].get("ne_not_positive") == negative
    assert sum(summary["rejected"].values()) == negative + 1
    # seq 3000 was refused by the parser: rejected, not lost; every seq is accounted for exactly once
    assert summary["lost"] == skipped
    assert summary["accepted"] + sum(summary["rejected"].values()) + summary["lost"] == 3002


def free_port() -> int:
    import socket
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def test_record_and_alarm_publisher_see_the_same_events(tmp_path: Path) -> None:
    import zmq
    import monitor.alarms.publisher  # noqa: F401 - fails loudly if the module is broken
    import monitor.recording  # noqa: F401 - fails loudly if the module is broken
    cfg = tmp_path / "envelope.toml"
    cfg.write_text('[device]\nlength = "30cm"\n[[limit]]\nname = "dense"\nquantity = "ne"\nhigh = 2e17\n'
                   'deadband = 0.1\npriority = "high"\n', encoding="utf-8")
    endpoint = f"tcp://127.0.0.1:{free_port()}"
    ctx = zmq.Context()
    sub = ctx.socket(zmq.SUB)
    sub.setsockopt(zmq.LINGER, 0)
    sub.setsockopt(zmq.SUBSCRIBE, b"")
    sub.connect(endpoint)                      # zmq retries until the watch binds
    rec = tmp_path / "shots"
    try:
        out = regime("watch", "sim:excursion?speed=15", "--config", str(cfg), "--headless", "--json",
                     "--record", str(rec), "--alarm-pub", endpoint, timeout=90)
        published = []
        while sub.poll(200):
            published.append(json.loads(sub.recv()))
    finally:
        sub.close()
        ctx.term()
    assert out.returncode == 0, out.stderr
    recs = json_lines(out.stdout)
    printed = [r for r in recs if r["type"] == "alarm" and r["alarm"] == "dense"]
    states = [r["state"] for r in printed if r["state"] not in ("normal", "suppressed")]
    assert states == ["unacknowledged", "returned_unacknowledged"]     # the excursion, once (deadband)
    printed = [r for r in printed if r["state"] == "unacknowledged"]
    assert 20.0 < printed[0]["time"] - recs[-1]["data_time_first"] < 27.0
    every = [(r["alarm"], r["state"], r["time"]) for r in recs if r["type"] == "alarm"]
    assert [(r["alarm"], r["state"], r["time"]) for r in published] == every
    csvs = sorted(rec.rglob("*.csv"))
    assert csvs, list(rec.rglob("*"))
    rows = sum(1 for p in csvs for line in p.read_text().splitlines() if line and not line.startswith(("#", "t")))
    assert 0 < rows <= recs[-1]["accepted"]
    journal = "".join(p.read_text() for p in rec.rglob("*.jsonl"))
    assert '"dense"' in journal


def test_serial_line_over_a_socket_url() -> None:
    import socket
    import threading
    import adapters.serial_line  # noqa: F401 - fails loudly if the module is broken
    server = socket.socket()
    server.bind(("127.0.0.1", 0))
    server.listen(1)
    port = server.getsockname()[1]
    lines = [f"t={k * 0.01:.2f} seq={k} ne={1e17 + k * 1e14:.6g} Te=3.1\r\n" for k in range(200)]
    lines[50] = "t=0.50 seq=50 ne=banana Te=3.1\r\n"
    go = threading.Event()

    def serve() -> None:
        conn, _ = server.accept()
        with conn:
            # pyserial empties the input when it opens the port: send once the watch says connected
            if go.wait(30):
                conn.sendall("".join(lines).encode())
            conn.recv(1)                       # hold the line open until the watch closes it

    threading.Thread(target=serve, daemon=True).start()
    proc = subprocess.Popen([sys.executable, "-m", "monitor", "watch", f"socket://127.0.0.1:{port}",
                             "--headless", "--json"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT)
    try:
        def done(line: str) -> bool:
            rec = json.loads(line)
            return rec.get("type") == "status" and rec["accepted"] + sum(rec["rejected"].values()) >= 200

        got = read_until(proc, lambda line: '"state":"connected"' in line, time.monotonic() + 30)
        go.set()
        got += read_until(proc, done, time.monotonic() + 30)
        proc.send_signal(signal.SIGTERM)
        rest, err = proc.communicate(timeout=30)
    finally:
        go.set()
        if proc.poll() is None:
            proc.kill()
        server.close()
    assert proc.returncode == 0, err
    summary = json_lines("".join(got) + rest)[-1]
    assert summary["accepted"] == 199
    assert sum(summary["rejected"].values()) == 1
    assert summary["lost"] == 0             # seq 50 arrived, refused: rejected, not lost


def test_without_headless_the_screen_runs_in_a_real_terminal() -> None:
    import pty
    import select
    import monitor.tui.launch  # noqa: F401 - fails loudly if the module is broken
    master, slave = pty.openpty()
    env = dict(os.environ, TERM="xterm-256color", COLUMNS="120", LINES="40")
    proc = subprocess.Popen([sys.executable, "-m", "monitor", "watch", "sim:steady"], stdin=slave, stdout=slave,
                            stderr=slave, env=env, cwd=ROOT, start_new_session=True)
    os.close(slave)
    buf = b""

    def pump(until, seconds: float) -> None:
        nonlocal buf
        deadline = time.monotonic() + seconds
        while time.monotonic() < deadline and not until():
            ready, _, _ = select.select([master], [], [], 0.2)
            if ready:
                try:
                    buf += os.read(master, 65536)
                except OSError:
                    return

    try:
        pump(lambda: b"debye" in buf.lower(), 30)
        assert b"debye" in buf.lower(), buf[-500:]
        os.write(master, b"q")
        pump(lambda: proc.poll() is not None and b"alarm events" in buf, 30)   # ends at EIO once the pty closes
        proc.wait(timeout=30)
    finally:
        if proc.poll() is None:
            proc.kill()
        os.close(master)
    assert proc.returncode == 0
    assert b"summary of sim:steady: accepted" in buf


def test_ipc_endpoint(tmp_path: Path) -> None:
    import zmq
    import adapters.zmq_stream  # noqa: F401 - fails loudly if the module is broken
    endpoint = f"ipc://{tmp_path}/feed.ipc"
    ctx = zmq.Context()
    pub = ctx.socket(zmq.XPUB)
    pub.setsockopt(zmq.LINGER, 0)
    pub.setsockopt(zmq.SNDHWM, 100_000)
    pub.bind(endpoint)
    proc = subprocess.Popen([sys.executable, "-m", "monitor", "watch", endpoint, "--headless", "--json"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT)
    try:
        assert pub.poll(30_000), "the subscriber never subscribed"
        pub.recv()
        for seq in range(500):
            pub.send(f"t={seq * 0.002:.3f} seq={seq} ne=2e17 Te=4".encode())

        def done(line: str) -> bool:
            rec = json.loads(line)
            return rec.get("type") == "status" and rec["accepted"] >= 500

        lines = read_until(proc, done, time.monotonic() + 30)
        proc.send_signal(signal.SIGINT)
        rest, err = proc.communicate(timeout=30)
    finally:
        if proc.poll() is None:
            proc.kill()
        pub.close()
        ctx.term()
    assert proc.returncode == 0, err
    summary = json_lines("".join(lines) + rest)[-1]
    assert (summary["accepted"], summary["rejected"], summary["lost"]) == (500, {}, 0)


def test_a_source_that_can_never_work_exits_3(tmp_path: Path) -> None:
    import adapters.zmq_stream  # noqa: F401 - fails loudly if the module is broken
    cfg = tmp_path / "secure.toml"
    cfg.write_text('[sources]\ncurve_server_key = "missing.key"\ncurve_client_key = "missing.key_secret"\n',
                   encoding="utf-8")
    out = regime("watch", "tcp://127.0.0.1:5999", "--config", str(cfg), "--headless", "--json", "--duration", "5")
    assert out.returncode == 3, (out.stdout, out.stderr)
    assert "source failed" in out.stderr and "missing.key" in out.stderr
    recs = json_lines(out.stdout)
    assert recs[-1]["type"] == "summary" and recs[-1]["state"] == "failed" and recs[-1]["accepted"] == 0


def test_recorder_status_in_the_lines_accounts_for_every_reading(tmp_path: Path) -> None:
    shots = tmp_path / "shots"
    out = regime("watch", "sim:excursion?speed=max&rate=200", "--headless", "--json", "--record", str(shots),
                 "--allow-remote", "--alarm-pub", "tcp://127.0.0.1:*")       # the opt-in, used on loopback
    assert out.returncode == 0, out.stderr
    recs = json_lines(out.stdout)
    status = [r for r in recs if r["type"] == "status"]
    assert status and all("recorder" in r for r in status)
    summary = recs[-1]
    rec = summary["recorder"]
    assert rec["ok"] and rec["complete"] and rec["dropped"] == 0 and rec["split"] == "discharge"
    rows = sum(1 for p in shots.rglob("shot-*.csv") for line in p.read_text().splitlines()
               if line and not line.startswith(("#", "t,")))
    assert rows == rec["rows_written"] > 0
    # the readings before and after the discharge are not recorded, and the status says how many
    assert rec["outside_shots_not_recorded"] > 0
    assert rec["rows_written"] + rec["outside_shots_not_recorded"] == summary["accepted"] == 9000
    human = regime("watch", "sim:excursion?speed=max&rate=200", "--headless", "--record", str(tmp_path / "h"))
    assert human.returncode == 0, human.stderr
    last_status = [line for line in human.stdout.splitlines() if line.startswith("[")][-1]
    assert f"recorded {rec['rows_written']:,} (outside shots: {rec['outside_shots_not_recorded']:,} not recorded)" \
        in last_status
    assert f"  recorder: shots 1, readings written {rec['rows_written']:,}" in human.stdout


def test_replay_of_several_files_says_so_in_one_line() -> None:
    out = regime("replay", "replay_data/argon_rf_excursion.csv", "replay_data/helium_microwave_cutoff.csv",
                 "--headless")
    assert out.returncode == 2
    lines = out.stderr.strip().splitlines()
    assert len(lines) == 1 and "replay takes one file" in lines[0] and "regime archive" in lines[0]


def test_a_run_that_accepted_nothing_says_why(tmp_path: Path) -> None:
    bad = tmp_path / "bad.csv"
    bad.write_text("t,ne,Te\n0,-1,3\n1,-2,3\n")
    out = regime("replay", str(bad), "--headless", "--quiet")
    assert out.returncode == 0
    assert "no reading was accepted: 2 refused, most as ne_not_positive (2)" in out.stderr
    good = regime("replay", "replay_data/argon_rf_excursion.csv", "--headless", "--quiet")
    assert "no reading was accepted" not in good.stderr
