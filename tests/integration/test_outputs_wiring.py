"""The optional outputs of a run reach their targets: command hooks from [alarms.hooks] run on a raised
alarm in a real `regime watch` process, and a replay never records again from an old shot's config."""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap
from pathlib import Path

ENVELOPE = """
[device]
length = 0.3
[discharge]
on_above = 1e15
[[limit]]
name = "ne-high"
quantity = "ne"
high = 2.0e17
priority = "urgent"
description = "density above the band"
[alarms.hooks]
urgent = [{python}, "-c", "import sys, pathlib; pathlib.Path(sys.argv[1]).open('a').write(sys.argv[2] + ' ' + sys.argv[3] + chr(10))", "{marker}", "{{alarm}}", "{{state}}"]
"""


def _watch(config: Path, *extra: str) -> list[dict]:
    cmd = [sys.executable, "-m", "monitor", "watch", "sim:excursion?speed=max&rate=200", "--headless", "--json",
           "--config", str(config), *extra]
    out = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    return [json.loads(line) for line in out.stdout.splitlines() if line.startswith("{")]


def test_hook_runs_on_the_excursion_alarm(tmp_path: Path) -> None:
    marker = tmp_path / "hook.log"
    config = tmp_path / "envelope.toml"
    config.write_text(textwrap.dedent(ENVELOPE.format(python=json.dumps(sys.executable), marker=marker)))
    lines = _watch(config)
    raised = [x for x in lines if x["type"] == "alarm" and x["alarm"] == "ne-high" and x["state"] == "unacknowledged"]
    assert raised, "the excursion past 2e17 m^-3 raised no alarm"
    # the hook runs in a worker thread; the process waits for it on close
    assert marker.exists(), "the urgent hook did not run"
    assert "ne-high unacknowledged" in marker.read_text()


def test_replay_does_not_record_from_the_recorded_config(tmp_path: Path) -> None:
    config = tmp_path / "envelope.toml"
    shots = tmp_path / "shots"
    config.write_text(textwrap.dedent(f"""
        [device]
        length = 0.3
        [recording]
        directory = {json.dumps(str(shots))}
    """))
    _watch(config)
    recorded = sorted(p for p in shots.rglob("*.csv") if "reject" not in p.name)
    assert recorded, "watch with [recording] directory wrote no shot"
    before = sorted(shots.rglob("*"))
    out = subprocess.run([sys.executable, "-m", "monitor", "replay", str(recorded[0]), "--headless", "--json",
                          "--speed", "max"], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert sorted(shots.rglob("*")) == before
