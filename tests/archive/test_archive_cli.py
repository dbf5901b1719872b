"""`regime archive` and `regime compare` as a user runs them: real subprocesses, exit codes, JSON, CSV and figures."""

from __future__ import annotations

import csv
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest
from make_shots import ROOT

PNG = b"\x89PNG\r\n\x1a\n"


def main(capsys: pytest.CaptureFixture[str], *args: str) -> tuple[int, str, str]:
    """The command line in this process (monitor.cli.main): exit code, stdout, stderr."""
    from monitor.cli import main as cli_main

    rc = cli_main(list(args))
    out, err = capsys.readouterr()
    return rc, out, err


def regime(*args: str, cwd: Path = ROOT) -> subprocess.CompletedProcess[str]:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    return subprocess.run([sys.executable, "-m", "monitor", *args], capture_output=True, text=True, timeout=120,
                          cwd=cwd, env=env, stdin=subprocess.DEVNULL)


def test_archive_builds_filters_sorts_and_exports(shots: Path, tmp_path: Path) -> None:
    out = regime("archive", str(shots), "--json", "--workers", "2", "--where", "shot >= 2 and shot <= 4",
                 "--sort", "shot:desc", "--limit", "2", "--csv", str(shots / "export.csv"))
    assert out.returncode == 0, out.stderr
    rows = [json.loads(line) for line in out.stdout.splitlines()]
    assert [r["shot"] for r in rows] == [4, 3]
    assert "6 recordings (6 read" in out.stderr and "\r" not in out.stderr      # no bar when not a terminal
    with open(shots / "export.csv", encoding="utf-8") as fh:
        assert [int(r["shot"]) for r in csv.DictReader(fh)] == [4, 3]
    again = regime("archive", str(shots), "--quiet", "--table")      # the export is never catalogued
    assert again.returncode == 0 and again.stderr == ""
    assert len(again.stdout.splitlines()) == 1 + 6 and "export.csv" not in again.stdout
    plot = tmp_path / "trend.png"
    drawn = regime("archive", str(shots), "--no-update", "--trend", "envelope_fraction,ne_median",
                   "--plot", str(plot), "--quiet")
    assert drawn.returncode == 0, drawn.stderr
    assert plot.read_bytes()[:8] == PNG


def test_archive_usage_errors_exit_2(shots: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    bad_config = tmp_path / "bad.toml"
    bad_config.write_text("[[limit]]\nname = 1\n")
    for args, words in ((["--where", "shot >"], "--where: at column 7"),
                        (["--where", "nosuch = 1"], "no column 'nosuch'"),
                        (["--sort", "nosuch"], "--sort: no column"),
                        (["--config", str(bad_config)], str(bad_config)),
                        (["--trend", "shot"], "--trend and --plot go together"),
                        (["--no-update"], "no catalogue")):
        rc, _, err = main(capsys, "archive", str(shots), *args)
        assert rc == 2, (args, err)
        assert words in err
    assert main(capsys, "archive", str(tmp_path / "nowhere"))[0] == 2


def test_compare_two_shots_by_number_and_file(shots: Path, tmp_path: Path,
                                              capsys: pytest.CaptureFixture[str]) -> None:
    assert main(capsys, "archive", str(shots), "--quiet", "--json", "--workers", "1")[0] == 0
    plot = tmp_path / "overlay.png"
    rc, out, err = main(capsys, "compare", "3", str(shots / "day2" / "shot-0004.csv"), "--archive", str(shots),
                        "--json", "--plot", str(plot))
    assert rc == 0, err
    result = json.loads(out)
    table = {e["name"]: e for e in result["table"]}
    assert table["shot"]["values"] == [3, 4] and table["shot"]["change"] == [0.0, 1.0]
    assert table["ne_max"]["values"][1] > table["ne_max"]["values"][0]        # the bump grows with the shot
    assert plot.read_bytes()[:8] == PNG
    rc, _, err = main(capsys, "compare", "1", "--archive", str(shots))
    assert rc == 2 and "give the file" in err
    rc, _, err = main(capsys, "compare", *["3"] * 9, "--archive", str(shots))
    assert rc == 2 and "at most 8" in err


def test_the_bar_is_drawn_only_on_a_terminal_without_quiet() -> None:
    import io
    import pty
    import select

    from monitor.archive.progress import ProgressBar, wanted

    master, slave = pty.openpty()
    with os.fdopen(slave, "w") as tty, os.fdopen(master, "rb", buffering=0) as screen:
        assert wanted(False, tty) and not wanted(True, tty)
        assert not wanted(False, io.StringIO())
        with ProgressBar(tty) as bar:
            bar(1, 4, 30000)
            bar(2, 4, 60000)
            bar.refresh()
            tty.flush()
            drawn = ""
            while "readings/s" not in drawn or "2/4" not in drawn:     # the pty hands it over in pieces
                ready, _, _ = select.select([screen], [], [], 10.0)
                if not ready:
                    break
                drawn += screen.read(4096).decode("utf-8", "replace")
    assert "2/4" in drawn and "readings/s" in drawn
