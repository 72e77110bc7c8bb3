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
