"""The ledger: an append-only hash chain over the signed records of the registered kinds (ledger.registry).

Each entry holds the SHA-256 of one signed record's canonical content (ledger.content) and a chain hash over
the entry and the previous entry's chain hash (ledger.canonical.chain_hash), in signing order. The head is one
row: taken for update by every append, it serialises appends (one chain, no fork), and it keeps the chain's
length and last hash, so that entries cut from the end of the chain are noticed too.
"""
from django.db import models
from django.utils import timezone

from ledger import canonical

HEAD = 1  # the head's primary key: there is one chain


class LedgerRowError(Exception):
    """Raised on any attempt to change or delete an entry of the chain."""


class AppendOnlyQuerySet(models.QuerySet):
    def update(self, **kwargs):
        raise LedgerRowError("Ledger entries cannot be changed.")

    def delete(self):
        raise LedgerRowError("Ledger entries cannot be deleted.")


class LedgerHead(models.Model):
    id = models.PositiveSmallIntegerField(primary_key=True, default=HEAD)
    started_at = models.DateTimeField("chain started", default=timezone.now)
    length = models.PositiveBigIntegerField(default=0)
    last_hash = models.CharField(max_length=64, default=canonical.GENESIS)

    def __str__(self):
        return f"record chain started {self.started_at:%Y-%m-%d}, {self.length} entries"

    @classmethod
    def restore_replaces(cls):
        """The rows `migrate` made that a restore replaces with the backup's (plant restore): an empty head."""
        return cls._base_manager.filter(length=0)


class ContentLayout(models.Model):
    """The fields one or more entries hashed (ledger.content.layout_of); its digest enters their chain hashes."""

    kind = models.CharField(max_length=40)
    digest = models.CharField(max_length=64, unique=True)
    layout = models.JSONField()

    def __str__(self):
        return f"{self.kind} layout {self.digest[:12]}"

    @property
    def stated_digest(self):
        """The digest of the layout as stored now (differs from `digest` if the row was altered)."""
        return canonical.digest(self.layout)


class LedgerEntry(models.Model):
    sequence = models.PositiveBigIntegerField(primary_key=True)
    kind = models.CharField(max_length=40)
    # blank for a note (ledger.registry.NOTE)
    record_id = models.BigIntegerField(null=True, blank=True)
    layout = models.ForeignKey(ContentLayout, null=True, blank=True, on_delete=models.PROTECT, related_name="+")
    content_hash = models.CharField(max_length=64)
    previous_hash = models.CharField(max_length=64)
    chain_hash = models.CharField(max_length=64, unique=True)
    sealed_at = models.DateTimeField()
    # a note's text: which records before it were sealed, when and how, if not at their signing
    note = models.TextField(blank=True)

    objects = AppendOnlyQuerySet.as_manager()

    class Meta:
        ordering = ["sequence"]
        verbose_name_plural = "ledger entries"
        constraints = [models.UniqueConstraint(fields=["kind", "record_id"], condition=models.Q(record_id__isnull=False),
                                               name="ledger_one_entry_per_record")]

    def __str__(self):
        return f"entry {self.sequence}: {self.kind} {self.record_id or ''}".rstrip()

    def save(self, *args, **kwargs):
        if not self._state.adding:
            raise LedgerRowError(f"Ledger entry {self.sequence} cannot be changed.")
        kwargs["force_insert"] = True
        super().save(*args, **kwargs)

    def delete(self, *args, **kwargs):
        raise LedgerRowError(f"Ledger entry {self.sequence} cannot be deleted.")


class VerificationRun(models.Model):
    """One run of the verification (manage.py verify_records, or a restore's)."""

    at = models.DateTimeField(default=timezone.now)
    ok = models.BooleanField()
    # how many records (kind and id) the problems name, and every problem as a sentence
    records_named = models.PositiveIntegerField(default=0)
    problems = models.JSONField(default=list, blank=True)

    class Meta:
        ordering = ["-at", "-id"]
        get_latest_by = ["at", "id"]

    def __str__(self):
        return f"verification {self.at:%Y-%m-%d %H:%M}: {'intact' if self.ok else f'{len(self.problems)} problems'}"
