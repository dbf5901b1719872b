"""Dependency direction of the layers (STYLE.md): checked on the source text and in fresh interpreters."""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    names: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(alias.name.split(".")[0] for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.add(node.module.split(".")[0])
    return names


def test_adapters_never_import_monitor() -> None:
    offenders = [p.name for p in (ROOT / "adapters").rglob("*.py") if "monitor" in _imports(p)]
    assert offenders == []


def test_physics_alarms_and_config_never_import_textual() -> None:
    paths = list((ROOT / "monitor" / "physics").rglob("*.py")) + list((ROOT / "monitor" / "alarms").rglob("*.py"))
    paths += [ROOT / "monitor" / name for name in ("config.py", "units.py", "quantities.py", "model.py")]
    paths = [p for p in paths if p.exists()]
    assert paths, "the layers to check are missing"
    offenders = [str(p.relative_to(ROOT)) for p in paths if "textual" in _imports(p)]
    assert offenders == []


def test_plasmapy_is_never_imported_by_the_tool() -> None:
    paths = list((ROOT / "monitor").rglob("*.py")) + list((ROOT / "adapters").rglob("*.py"))
    offenders = [str(p.relative_to(ROOT)) for p in paths if "plasmapy" in _imports(p) or "astropy" in _imports(p)]
    assert offenders == []


def test_calc_path_imports_nothing_heavy() -> None:
    code = (
        "import sys\n"
        "from monitor.cli import main\n"
        "rc = main(['calc', 'ne=1e17', 'Te=3'])\n"
        "heavy = sorted(m for m in ('textual', 'scipy', 'zmq', 'plasmapy', 'astropy', 'serial') if m in sys.modules)\n"
        "print('HEAVY', heavy)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60, cwd=ROOT)
    assert out.returncode == 0, out.stderr
    assert "HEAVY []" in out.stdout
