"""The layer rules of DEVELOPERS.md section 2 ("Package layout and layer rules"): dependency direction and no
package cycles, checked on the source text and in fresh interpreters."""

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


def _monitor_imports(path: Path) -> set[str]:
    """The monitor modules ``path`` imports, anywhere in the file (a lazy import inside a function is a
    dependency too), except under ``if TYPE_CHECKING:`` (annotations only)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    typing_only = {id(sub) for node in ast.walk(tree)
                   if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test)
                   for sub in ast.walk(node)}
    names: set[str] = set()
    for node in ast.walk(tree):
        if id(node) in typing_only:
            continue
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.add(node.module)
    return {n for n in names if n.startswith("monitor.")}


def _unit(path_or_module: str) -> str:
    """A subpackage of monitor/ (alarms, pipeline, tui, ...) or a top-level module (session, config, ...)."""
    return path_or_module.split(".")[1]


def _package_graph() -> dict[str, set[str]]:
    graph: dict[str, set[str]] = {}
    base = ROOT / "monitor"
    for path in base.rglob("*.py"):
        rel = path.relative_to(base).with_suffix("")
        unit = rel.parts[0]
        if unit in ("__init__", "__main__"):
            continue
        for module in _monitor_imports(path):
            other = _unit(module)
            if other != unit and ((base / other).is_dir() or (base / f"{other}.py").exists()):
                graph.setdefault(unit, set()).add(other)
    return graph


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """The strongly connected components of more than one unit (Tarjan's algorithm)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    found: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        for w in graph.get(v, ()):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                found.append(sorted(comp))

    for v in list(graph):
        if v not in index:
            visit(v)
    return found


def test_no_cycle_between_the_parts_of_monitor() -> None:
    graph = _package_graph()
    assert {"alarms", "pipeline", "session"} <= set(graph), "the import graph is missing its main parts"
    assert _cycles(graph) == []


def test_the_cycle_check_finds_a_cycle() -> None:
    # the check itself can fail: a made-up graph with a cycle through three parts is found
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]


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
