"""Dependencies between the apps run one way (DEVELOPERS.md): an app imports only apps below it, read from the
source (every import, at module level or inside a function; migrations and the apps' test folders excluded).

    ledger <- plant <- calibration <- maintenance <- scheduling <- {offline, reports} <- quenby
"""
import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
LAYERS = [{"ledger"}, {"plant"}, {"calibration"}, {"maintenance"}, {"scheduling"}, {"offline", "reports"},
          {"quenby"}]
LEVEL = {app: level for level, apps in enumerate(LAYERS) for app in apps}

def imports_across_apps():
    """(file, line, importing app, imported module) for each import of another app's module."""
    found = []
    for app in LEVEL:
        folder = ROOT / app
        if not folder.is_dir():
            continue
        for path in sorted(folder.rglob("*.py")):
            relative = path.relative_to(ROOT)
            if {"migrations", "tests"} & set(relative.parts):  # frozen history; tests may read any app
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
                 if LEVEL[module.split(".")[0]] >= LEVEL[app]]
    assert wrong_way == [], "imports against the dependency order:\n" + "\n".join(wrong_way)


def test_no_two_apps_import_each_other():
    pairs = {(app, module.split(".")[0]) for file, _, app, module in imports_across_apps()}
    both_ways = sorted((a, b) for a, b in pairs if (b, a) in pairs and a < b)
    assert both_ways == []


def test_the_scan_sees_imports_inside_functions():
    # reports imports maintenance only inside functions (the maintenance review): the scan must see those
    assert any(app == "reports" and module.startswith("maintenance") for _, _, app, module in imports_across_apps())
