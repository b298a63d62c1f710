"""The domain math stays in plain modules that take numbers and return numbers (DEVELOPERS.md, "Rules we keep"):
each module named here imports no Django and no models, at module level or inside a function, read from the source
(ast). A new pure module is added to the list."""
import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
PURE_MODULES = [
    "calibration/conformity.py", "calibration/decision.py", "calibration/drift.py", "calibration/dcc_read.py",
    "calibration/errors.py", "calibration/intervals.py", "calibration/plausibility.py", "calibration/uncertainty.py",
    "maintenance/loop.py", "maintenance/tasks.py",
    "plant/checks.py", "plant/fit.py", "plant/materials.py", "plant/risk.py", "plant/units.py",
    "scheduling/due.py", "scheduling/drift_fleet.py",
]


def imported_modules(path):
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            yield from (alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            yield ("." * node.level) + node.module


@pytest.mark.parametrize("module", PURE_MODULES)
def test_a_pure_module_reads_no_database_and_no_django(module):
    found = [name for name in imported_modules(ROOT / module)
             if name.split(".")[0] == "django" or name.endswith("models") or ".models." in name]
    assert found == [], f"{module} imports {', '.join(found)}: keep the ORM and Django out of the math"


def test_the_list_names_files_that_exist():
    assert all((ROOT / module).is_file() for module in PURE_MODULES)
