"""`manage.py import_register FILE [--kind meters|fluids] [--dry-run]`: the import page's code path from the
command line — row errors one per line, a non-zero exit on errors, nothing saved."""
import io

import pytest
from django.core.management import CommandError, call_command

from plant import importer
from plant.models import Fluid, Device, Position, Site
from tests.helpers import row

pytestmark = [pytest.mark.django_db, pytest.mark.small_world("import")]


def write_csv(path, rows, columns=importer.METER_COLUMNS):
    lines = [",".join(columns)] + [",".join(r.get(c, "") for c in columns) for r in rows]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return str(path)


def run(*args):
    out, err = io.StringIO(), io.StringIO()
    call_command("import_register", *args, stdout=out, stderr=err)
    return out.getvalue(), err.getvalue()


def test_dry_run_checks_and_saves_nothing(plant, tmp_path):
    path = write_csv(tmp_path / "register.csv", [row("NEW-1", 0), row("NEW-2", 1), row("FT-1", 1, serial="X")])
    out, _ = run(path, "--dry-run")
    assert "register.csv (meters): 2 to create, 1 to change, 0 unchanged. Dry run: nothing was saved." in out
    assert "creates site South" in out
    assert not Position.objects.filter(tag__startswith="NEW-").exists() and not Site.objects.filter(name="South")


def test_apply_saves_every_row(plant, tmp_path, django_user_model):
    django_user_model.objects.create_user("loader")
    path = write_csv(tmp_path / "register.csv", [row("NEW-1", 0), row("NEW-2", 1)])
    out, _ = run(path, "--user", "loader")
    assert "Imported register.csv (meters): 2 created, 0 changed, 0 unchanged." in out
    assert Device.objects.filter(position__tag__in=["NEW-1", "NEW-2"], status="in_service").count() == 2
    audit = Device.history.filter(id=Device.objects.get(position__tag="NEW-1").pk)
    assert audit.exists() and {h.history_user.username for h in audit} == {"loader"}


@pytest.mark.parametrize("dry_run", [True, False])
def test_row_errors_one_per_line_non_zero_exit_nothing_saved(plant, tmp_path, dry_run):
    path = write_csv(tmp_path / "register.csv", [
        row("NEW-1", 0), row("NEW-2", 0, fluid="Mercury"), row("NEW-3", 0, internal_diameter_mm="fifty")])
    err = io.StringIO()
    with pytest.raises(CommandError, match=r"register.csv: 2 problem\(s\) on 2 row\(s\); nothing was saved."):
        call_command("import_register", path, *(["--dry-run"] if dry_run else []), stdout=io.StringIO(), stderr=err)
    assert err.getvalue().splitlines() == [
        'row 3, column fluid: Unknown fluid "Mercury". Import it on the fluids register first.',
        "row 4, column internal_diameter_mm: Enter a number.",
    ]
    assert not Position.objects.filter(tag__startswith="NEW-").exists()


def test_fluids_kind(plant, tmp_path):
    path = write_csv(tmp_path / "fluids.csv", [{"name": "Glycol 30 %", "phase": "liquid", "density_kg_m3": "1040"}],
                     columns=importer.FLUID_COLUMNS)
    out, _ = run(path, "--kind", "fluids")
    assert "1 created" in out and Fluid.objects.get(name="Glycol 30 %").density_kg_m3 == 1040


def test_unreadable_file_and_unknown_user_are_one_sentence(plant, tmp_path):
    bad = tmp_path / "register.ods"
    bad.write_bytes(b"x")
    with pytest.raises(CommandError, match=r"Unsupported file type \(.ods\)"):
        run(str(bad))
    with pytest.raises(CommandError, match="No such file"):
        run(str(tmp_path / "missing.csv"))
    good = write_csv(tmp_path / "register.csv", [row("NEW-1", 0)])
    with pytest.raises(CommandError, match="No user named nobody"):
        run(good, "--user", "nobody")
