"""DEVELOPERS.md: "today" and date defaults are the date at the site (site.today(), meter.today(); the plant's
TIME_ZONE through plant/localtime.py where no site is in scope), never the server's or UTC's. Read from the source
of every view, form, table, template tag and the offline kit (and the task sync that sets a task's start date)."""
import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
APPS = ["plant", "calibration", "maintenance", "offline", "reports", "ledger", "scheduling"]


def scanned_files():
    for app in APPS:
        folder = ROOT / app
        if not folder.is_dir():
            continue
        for path in sorted(folder.rglob("*.py")):
            parts = path.relative_to(ROOT).parts
            if "migrations" in parts:
                continue
            name = path.name
            if ("views" in name or name in {"forms.py", "tables.py", "kit.py", "sync.py", "filters.py"}
                    or "templatetags" in parts):
                yield path


def _dotted(node):
    names = []
    while isinstance(node, ast.Attribute):
        names.append(node.attr)
        node = node.value
    if isinstance(node, ast.Name):
        names.append(node.id)
    return ".".join(reversed(names))


def server_today_calls(source):
    """(line, call) for each way to read today's date that ignores the site."""
    found = []
    for node in ast.walk(ast.parse(source)):
        if not isinstance(node, ast.Call):
            continue
        called = _dotted(node.func)
        # localdate(instant) converts a given instant; without one it reads the server's clock
        if called.split(".")[-1] == "localdate" and not node.args and not node.keywords:
            found.append((node.lineno, called + "()"))
        elif called in {"date.today", "dt.date.today", "datetime.date.today", "datetime.today", "dt.datetime.today"}:
            found.append((node.lineno, called + "()"))
        elif (isinstance(node.func, ast.Attribute) and node.func.attr == "date"
              and isinstance(node.func.value, ast.Call)):
            inner = _dotted(node.func.value.func)
            if inner.split(".")[-1] in {"now", "localtime", "utcnow"}:
                found.append((node.lineno, inner + "().date()"))
    return found


def test_the_scan_finds_each_way_of_reading_the_servers_date():
    source = """
import datetime as dt
from django.utils import timezone
a = timezone.localdate()
b = dt.date.today()
c = timezone.now().date()
d = timezone.localtime().date()
e = timezone.localdate(event.signed_at)   # an instant given: fine
f = site.today()                          # fine
"""
    assert [call for _, call in server_today_calls(source)] == [
        "timezone.localdate()", "dt.date.today()", "timezone.now().date()", "timezone.localtime().date()"]


def test_no_view_or_form_takes_today_from_anything_but_the_site():
    files = list(scanned_files())
    assert any(p.name == "kit.py" for p in files) and any(p.name == "views.py" for p in files)
    offenders = [f"{path.relative_to(ROOT)}:{line} {call}"
                 for path in files for line, call in server_today_calls(path.read_text(encoding="utf-8"))]
    assert offenders == [], "today's date not taken at the site:\n" + "\n".join(offenders)
