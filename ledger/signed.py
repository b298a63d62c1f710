"""The signed record, written once: the lock on signed rows, the sign-off with its retry, and the seal.

Calibrations, countersignatures and maintenance records use it (their apps sit above the ledger). It defines
no fields: each record keeps its own `state`, `signed_by`, `signed_role` and `signed_at`, so the tables and the
content the chain hashes stay as they are. The one sign path claims the draft, lets the record check and
compute what it freezes, stores it, tells the listeners (`ledger.signals.record_signed`: the due dates follow)
and seals it in the chain last, all in one transaction.
"""
import random
import time

from django.apps import apps
from django.db import OperationalError, models, transaction
from django.utils import timezone

from ledger import chain
from ledger.signals import record_signed

DRAFT, SIGNED = "draft", "signed"


class SignedRecordError(Exception):
    """Raised on any attempt to change or delete a signed record."""


def signature_errors(record):
    """A record in the signed state names who signed it and when (sign() sets both; a restore checks them)."""
    if record.state != SIGNED:
        return {}
    missing = [name for name in ("signed_by", "signed_at") if not getattr(record, name)]
    return {name: "A signed record must say who signed it and when." for name in missing}


class LockedQuerySet(models.QuerySet):
    """Refuses bulk update/delete that would touch a signed record, and an update that would move rows into
    one (`parent`: the foreign key to the signed record, for the rows that belong to one).

    record_model: the signed record's label (its state "signed" locks it); a subclass names it and its messages."""

    signed_lookup = "state"
    parent = None
    record_model = None
    changed_message = "Signed records cannot be changed."
    deleted_message = "Signed records cannot be deleted."

    def _touches_signed(self):
        return self.filter(**{self.signed_lookup: SIGNED}).exists()

    def _moves_into_signed(self, kwargs):
        target = kwargs.get(self.parent, kwargs.get(f"{self.parent}_id")) if self.parent else None
        return target is not None and apps.get_model(self.record_model)._base_manager.filter(
            pk=getattr(target, "pk", target), state=SIGNED).exists()

    def update(self, **kwargs):
        if self._touches_signed() or self._moves_into_signed(kwargs):
            raise SignedRecordError(self.changed_message)
        return super().update(**kwargs)

    def delete(self):
        if self._touches_signed():
            raise SignedRecordError(self.deleted_message)
        return super().delete()


class AlwaysSignedQuerySet(LockedQuerySet):
    """For a record that is signed from the moment it exists: no bulk update or delete at all."""

    def _touches_signed(self):
        return True


class SignedRecord(models.Model):
    """Behaviour of a signed record; the concrete model names its ledger kind (`ledger_kind`, the kind's name)."""

    ledger_kind = None

    #: How long a sign-off keeps retrying while SQLite reports the database locked by another writer.
    SIGN_RETRY_SECONDS = 20.0

    class Meta:
        abstract = True

    # What a record says and does at sign-off (the defaults: nothing beyond the signature) ---------------------
    def not_signable(self, state, signed_by) -> SignedRecordError:
        """The refusal when the draft was no longer there to claim (`state`, `signed_by` as stored)."""
        return SignedRecordError(f"{self._meta.verbose_name.capitalize()} {self.pk} is already signed by {signed_by}.")

    def before_signature(self):
        """Check and compute what the signature freezes (on the row claimed, locked); raise to refuse."""

    def at_signature(self):
        """What is frozen with the signature once who and when are set (signed content, say)."""

    # The one sign path ----------------------------------------------------------------------------------------
    def sign(self, by, role="Technician", at=None):
        """Lock the record after checking it; one signer wins when two sign at once.

        PostgreSQL: the conditional UPDATE takes the row lock; a second signer waits for it, then finds no draft
        left and is told who signed. SQLite: a second writer may be refused at once ("database is locked", or
        "table is locked" with a shared-cache database) instead of waiting; the whole sign-off is then retried
        from the start, with a short random pause, until it runs alone, so it too ends with "already signed".
        Not retried inside a caller's transaction (its state is the caller's to roll back)."""
        deadline = time.monotonic() + self.SIGN_RETRY_SECONDS
        pause = 0.01
        while True:
            try:
                return self._sign_once(by, role, at)
            except OperationalError as exc:
                if ("locked" not in str(exc) or transaction.get_connection().in_atomic_block
                        or time.monotonic() > deadline):
                    raise
            time.sleep(pause * (0.5 + random.random()))
            pause = min(pause * 2, 0.2)

    def _sign_once(self, by, role, at):
        model = type(self)
        with transaction.atomic():
            # Claim the draft with a conditional write first: it takes the row lock (PostgreSQL) or the
            # database write lock (SQLite) before anything else is written, so a second signer waits (or, on
            # SQLite, is refused and retries), then finds nothing left to claim.
            claimed = model.objects.filter(pk=self.pk, state=DRAFT).update(signed_by=by)
            if not claimed:
                state, current = model.objects.filter(pk=self.pk).values_list("state", "signed_by").first()
                raise self.not_signable(state, current)
            fresh = model.objects.select_for_update().get(pk=self.pk)
            fresh.before_signature()
            fresh.state = SIGNED
            fresh.signed_by = by
            fresh.signed_role = role
            fresh.signed_at = at or timezone.now()
            fresh.at_signature()
            super(model, fresh).save()  # past the record's own save(), which refuses a signed row
            fresh.seal()
        # take the signed values from `fresh` rather than reading them back: a read here could itself meet a lock,
        # and a retry after a committed sign-off would wrongly report "already signed"
        for field in self._meta.concrete_fields:
            setattr(self, field.attname, getattr(fresh, field.attname))
        self._prefetched_objects_cache = {}
        return self

    def seal(self):
        """Inside the signing transaction: the listeners first (what they write is not part of the record), then
        the record chain, as stored now: keep this the last write of a sign-off."""
        record_signed.send(sender=type(self), record=self)
        chain.append(self.ledger_kind, self.pk)
