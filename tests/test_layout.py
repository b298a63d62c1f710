"""The suite's own layout: tests beside their apps, fixtures in the root conftest.py, and no test module that
imports another (shared helpers are in tests/helpers.py)."""
import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def suite_files():
    return sorted(p for p in ROOT.glob("**/test_*.py") if ".venv" not in p.parts and "node_modules" not in p.parts)


def imported_modules(path):
    for node in ast.walk(ast.parse(path.read_text(), filename=str(path))):
        if isinstance(node, ast.Import):
            yield from (alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            yield node.module
            yield from (f"{node.module}.{alias.name}" for alias in node.names)


def test_no_test_module_imports_another_or_a_conftest():
    files = suite_files()
    assert len(files) > 40, files  # the walk found the suite
    offending = sorted({(str(path.relative_to(ROOT)), name) for path in files for name in imported_modules(path)
                        if name.rsplit(".", 1)[-1].startswith("test_") or name.rsplit(".", 1)[-1] == "conftest"})
    assert offending == [], offending


def test_only_the_root_has_a_conftest():
    conftests = sorted(str(p.relative_to(ROOT)) for p in ROOT.glob("**/conftest.py") if ".venv" not in p.parts)
    assert conftests == ["conftest.py"]

