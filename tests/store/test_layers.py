"""Where things live: the demo's look into the audit goes through the store; the
fleet summary (commands/open_ui) and the fleet view's launcher (tui/launch) depend
one way only."""

from __future__ import annotations

import ast
from pathlib import Path

from logbook.model import Machine
from logbook.store import Store

PACKAGE = Path(__file__).resolve().parents[2] / "logbook"


def _imports(path: Path) -> set[str]:
    """Every module a file imports, at the top or inside a function (Python's own ast)."""
    names: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.Import):
            names.update(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            names.add(node.module)
            names.update(f"{node.module}.{a.name}" for a in node.names)
    return names


def test_writers_names_everyone_who_wrote_but_the_one_left_out(tmp_path):
    with Store(tmp_path / "w.db", user="demo") as s:
        assert s.writers() == [] and s.writers(besides="demo") == []
        s.add_machines([Machine("K-1", "Yard")])
    with Store(tmp_path / "w.db", user="Ana Ruiz") as s:
        s.add_machines([Machine("K-2", "Yard")])
        assert s.writers() == ["Ana Ruiz", "demo"]
        assert s.writers(besides="demo") == ["Ana Ruiz"]
        assert s.writers(besides="Ana Ruiz") == ["demo"]


def test_no_sql_in_the_demo_command():
    text = (PACKAGE / "commands" / "demo.py").read_text()
    assert "SELECT" not in text.upper() and ".db.query" not in text and "execute(" not in text


def test_summary_and_launcher_depend_one_way():
    summary = _imports(PACKAGE / "commands" / "open_ui.py")
    launcher = _imports(PACKAGE / "tui" / "launch.py")
    assert not any(name.startswith("logbook.tui") for name in summary), summary
    assert "logbook.commands.open_ui" in launcher  # the fallback: the one direction kept
