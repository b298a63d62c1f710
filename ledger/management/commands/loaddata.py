"""Django's loaddata, then the signed records the fixtures brought that are not in the record chain are sealed.

loaddata writes rows as they are (it never signs), so the demo fixtures' signed calibrations and maintenance
records would otherwise be "signed but not in the chain". They are sealed in signing order after loading, in the
same transaction, and a note in the chain says that they were sealed on loading those fixtures, not at their
signing. Records the chain already holds are left to the verification (a fixture that overwrote one is found
by `manage.py verify_records`). `restore` loads with Django's own loaddata and verifies instead of sealing.
"""
from django.core.management.commands import loaddata
from django.db import DEFAULT_DB_ALIAS, connections, transaction
from django.db.migrations.executor import MigrationExecutor

from ledger import chain


def fully_migrated(using):
    """Whether every migration is applied: a test that loads rows into an older schema has no chain to seal in."""
    executor = MigrationExecutor(connections[using])
    return not executor.migration_plan(executor.loader.graph.leaf_nodes())


class Command(loaddata.Command):
    help = loaddata.Command.help + (" Signed records the fixtures bring that are not in the record chain are then "
                                    "sealed, with a note in the chain saying so.")

    def handle(self, *fixture_labels, **options):
        using = options["database"]
        with transaction.atomic(using=using):
            super().handle(*fixture_labels, **options)
            if using != DEFAULT_DB_ALIAS or not fully_migrated(using):
                return
            sealed = chain.seal_unsealed(f"on loading {', '.join(fixture_labels)}")
        if sealed and options["verbosity"] >= 1:
            self.stdout.write(f"Sealed {sealed} signed records in the record chain.")
