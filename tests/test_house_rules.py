"""House rules that keep the architecture honest."""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
FORBIDDEN = ("PySide6", "pyqtgraph", "planner_gui", "shiboken6")


def _imports(path: Path) -> list[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    names: list[str] = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names += [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.append(node.module)
    return names


def test_core_never_imports_the_gui_layer():
    bad = []
    for path in sorted((REPO / "core").rglob("*.py")):
        for name in _imports(path):
            if name.split(".")[0] in FORBIDDEN:
                bad.append(f"{path.relative_to(REPO)} imports {name}")
    assert not bad, bad


def test_windowless_commands_do_not_load_qt():
    """Running the command-line commands that need no window must not import Qt."""
    code = (
        "import sys; from planner_gui import cli\n"
        "for argv in (['bins', '--coherent-ms', '1', '--max-loss-db', '1'], ['--help']):\n"
        "    try:\n        cli.main(argv)\n    except SystemExit:\n        pass\n"
        "loaded = [m for m in sys.modules if m.split('.')[0] in ('PySide6', 'pyqtgraph')]\n"
        "print('LOADED', loaded)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], cwd=REPO, capture_output=True, text=True, timeout=120)
    assert "LOADED []" in out.stdout, out.stdout + out.stderr


# Stages of the data flow, lowest first: a module may import its own stage and the stages
# below it, never one above (DEVELOPERS.md, "Layout"). ``records`` sits beside ``files``:
# both read the plan, neither is read by it.
STAGES = {"ground": 0, "orbits": 1, "sky": 2, "search": 3, "plan": 4, "records": 5, "files": 5}


def _core_targets(path: Path) -> list[tuple[str, int]]:
    """(stage imported, line) for every import of a core subpackage in ``path``."""
    rel = path.relative_to(REPO).with_suffix("").parts
    here = list(rel[:-1])
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    out = []
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = here[: len(here) - (node.level - 1)]
                mod = base + (node.module.split(".") if node.module else [])
            else:
                mod = (node.module or "").split(".")
            if len(mod) > 1 and mod[0] == "core":
                out.append((mod[1], node.lineno))
    return out


def test_core_stages_import_downward_only():
    bad = []
    for path in sorted((REPO / "core").rglob("*.py")):
        rel = path.relative_to(REPO).parts
        if len(rel) < 3 or rel[1] not in STAGES:
            continue
        me = rel[1]
        for target, line in _core_targets(path):
            if target in STAGES and target != me and STAGES[target] >= STAGES[me]:
                bad.append(f"{'/'.join(rel)}:{line} ({me}) imports core.{target}")
    assert not bad, bad
