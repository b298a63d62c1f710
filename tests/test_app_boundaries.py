"""Dependencies between the apps run one way (DEVELOPERS.md): an app imports only apps below it, read from the
source (every import, at module level or inside a function; migrations excluded, they are frozen history).

    ledger <- plant <- calibration <- maintenance <- scheduling <- {offline, reports} <- quenby
"""
import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
LAYERS = [{"ledger"}, {"plant"}, {"calibration"}, {"maintenance"}, {"scheduling"}, {"offline", "reports"},
          {"quenby"}]
LEVEL = {app: level for level, apps in enumerate(LAYERS) for app in apps}

# The due-date engine still sits in calibration and maintenance and is called from the models, the installations
# and the importer; it moves to the scheduling app, which listens to signals. Until then, only these imports go
# the wrong way (importing module -> imported module): none may be added, and each one removed stays removed.
SCHEDULING_EDGES_TO_MOVE = {
    ("calibration/fleet.py", "maintenance.fleet"),
    ("calibration/synthetic.py", "maintenance.synthetic"),
    ("plant/importer.py", "calibration.fleet"),
    ("plant/importer.py", "maintenance"),
    ("plant/importer.py", "maintenance.models"),
    ("plant/installations.py", "calibration.fleet"),
    ("plant/installations.py", "calibration.models"),
    ("plant/models.py", "calibration.intervals"),
    ("plant/models.py", "maintenance.fleet"),
}


def imports_across_apps():
    """(file, line, importing app, imported module) for each import of another app's module."""
    found = []
    for app in LEVEL:
        folder = ROOT / app
        if not folder.is_dir():
            continue
        for path in sorted(folder.rglob("*.py")):
            relative = path.relative_to(ROOT)
            if "migrations" in relative.parts:
                continue
            for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
                if isinstance(node, ast.Import):
                    modules = [alias.name for alias in node.names]
                elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
                    modules = [node.module]
                else:
                    continue
                for module in modules:
                    top = module.split(".")[0]
                    if top in LEVEL and top != app:
                        found.append((relative.as_posix(), node.lineno, app, module))
    return found


def test_no_app_imports_an_app_above_it_or_beside_it():
    wrong_way = [f"{file}:{line} ({app}) imports {module}" for file, line, app, module in imports_across_apps()
                 if LEVEL[module.split(".")[0]] >= LEVEL[app] and (file, module) not in SCHEDULING_EDGES_TO_MOVE]
    assert wrong_way == [], "imports against the dependency order:\n" + "\n".join(wrong_way)


def test_no_two_apps_import_each_other_beyond_the_scheduling_edges():
    pairs = {(app, module.split(".")[0]) for file, _, app, module in imports_across_apps()
             if (file, module) not in SCHEDULING_EDGES_TO_MOVE}
    both_ways = sorted((a, b) for a, b in pairs if (b, a) in pairs and a < b)
    assert both_ways == []


def test_the_scan_sees_imports_inside_functions():
    # reports imports maintenance only inside functions (maintenance.fleet in the review): the scan must see those
    assert any(app == "reports" and module.startswith("maintenance") for _, _, app, module in imports_across_apps())
