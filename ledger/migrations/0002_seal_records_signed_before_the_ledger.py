"""Seal the records signed before the ledger existed, in signing order (signing time, then id), and say so in the
chain: a note after them states that they were sealed by this migration on its date, not at their signing. On a
database with no signed records it only starts the chain (the head's start date)."""
from django.db import migrations


def seal(apps, schema_editor):
    from ledger import chain

    chain.seal_unsealed("by the migration ledger 0002", models_registry=apps)


def unseal(apps, schema_editor):
    for name in ("LedgerEntry", "ContentLayout", "LedgerHead", "VerificationRun"):
        apps.get_model("ledger", name)._base_manager.all().delete()


class Migration(migrations.Migration):
    dependencies = [
        ("ledger", "0001_record_chain"),
        # after the signed content is frozen into the older records, so that their seal covers it too
        ("calibration", "0011_merge_signed_content_and_standard_links"),
        ("maintenance", "0003_review_indexes"),
    ]

    operations = [migrations.RunPython(seal, unseal)]
