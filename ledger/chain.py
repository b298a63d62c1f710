"""Appending to the chain at signing, sealing records that were signed outside it, and verifying it.

Every function takes the app registry to read through (`models_registry`: the live apps by default, a
migration's historical apps in a migration), so that the migration that starts the chain runs the same code.
"""
import datetime as dt
from collections import defaultdict
from dataclasses import dataclass

from django.apps import apps as live_apps
from django.db import transaction
from django.utils import timezone

from ledger import canonical, content, registry
from ledger.models import HEAD

EPOCH = dt.datetime(1970, 1, 1, tzinfo=dt.timezone.utc)


def _models(models_registry):
    reg = models_registry or live_apps
    return reg, reg.get_model("ledger", "LedgerHead"), reg.get_model("ledger", "ContentLayout"), \
        reg.get_model("ledger", "LedgerEntry")


def _lock_head(Head):
    """The head, locked until the transaction ends: appends wait for each other here (one chain, no fork).

    The insert (ignored when the head exists) makes the head if there is none yet (a flushed database) and, being
    a write, takes SQLite's database write lock; the select for update takes the row lock on PostgreSQL."""
    Head._base_manager.bulk_create([Head(pk=HEAD)], ignore_conflicts=True)
    return Head._base_manager.select_for_update().get(pk=HEAD)


def _layout_row(kind, Layout, reg):
    layout = content.layout_of(kind, reg)
    row, _ = Layout._base_manager.get_or_create(digest=canonical.digest(layout),
                                                defaults={"kind": kind.name, "layout": layout})
    return row


class _Writer:
    """Builds the entries that follow the locked head and writes them with the head's new length and hash."""

    def __init__(self, Head, Entry, head, now):
        self.Head, self.Entry, self.now = Head, Entry, now
        self.length, self.last_hash = head.length, head.last_hash
        self.pending = []

    def add(self, kind_name, record_id, layout, content_hash, note=""):
        self.length += 1
        layout_digest = layout.digest if layout is not None else None
        chain = canonical.chain_hash(self.length, kind_name, record_id, layout_digest, content_hash,
                                     self.last_hash, self.now)
        self.pending.append(self.Entry(sequence=self.length, kind=kind_name, record_id=record_id, layout=layout,
                                       content_hash=content_hash, previous_hash=self.last_hash, chain_hash=chain,
                                       sealed_at=self.now, note=note))
        self.last_hash = chain

    def add_note(self, note):
        self.add(registry.NOTE, None, None, note_hash(note), note=note)

    def flush(self):
        self.Entry._base_manager.bulk_create(self.pending)
        self.pending = []
        self.Head._base_manager.filter(pk=HEAD).update(length=self.length, last_hash=self.last_hash)


def note_hash(note):
    return canonical.digest({"note": note})


def append(kind_name, record_id, models_registry=None):
    """Seal one record just signed, inside the signing transaction: its content hash, chained to the last entry."""
    kind = registry.get(kind_name)
    reg, Head, Layout, Entry = _models(models_registry)
    with transaction.atomic():
        writer = _Writer(Head, Entry, _lock_head(Head), timezone.now())
        layout = _layout_row(kind, Layout, reg)
        hashes = content.content_hashes(layout.layout, [record_id], reg)
        if record_id not in hashes:
            raise LookupError(f"{kind.name} {record_id} does not exist; nothing to seal.")
        writer.add(kind.name, record_id, layout, hashes[record_id])
        writer.flush()
        return writer.length


def _unsealed(kind, model, Entry):
    sealed = set(Entry._base_manager.filter(kind=kind.name).values_list("record_id", flat=True))
    rows = model._base_manager.filter(**kind.signed).order_by().values_list(kind.signed_at, "pk")
    return [(at is None, at or EPOCH, kind.name, pk) for at, pk in rows if pk not in sealed]


def seal_unsealed(how, models_registry=None):
    """Seal every signed record that is not in the chain, in signing order (signing time, then id), and add a
    note after them saying that they were sealed `how` ("by the migration ledger 0002") on that date, not at
    their signing. Returns how many were sealed (no note when none)."""
    reg, Head, Layout, Entry = _models(models_registry)
    with transaction.atomic():
        writer = _Writer(Head, Entry, _lock_head(Head), timezone.now())
        first = writer.length + 1
        layouts, order = {}, []
        for kind in registry.kinds().values():
            try:
                model = reg.get_model(kind.model)
            except LookupError:  # a kind whose model does not exist yet at this migration
                continue
            unsealed = _unsealed(kind, model, Entry)
            if unsealed:
                layouts[kind.name] = _layout_row(kind, Layout, reg)
                order += unsealed
        order.sort()
        for start in range(0, len(order), content.BATCH):
            batch = order[start:start + content.BATCH]
            by_kind = defaultdict(list)
            for _, _, name, pk in batch:
                by_kind[name].append(pk)
            hashes = {(name, pk): h for name, ids in by_kind.items()
                      for pk, h in content.content_hashes(layouts[name].layout, ids, reg).items()}
            for _, _, name, pk in batch:
                writer.add(name, pk, layouts[name], hashes[(name, pk)])
            writer.flush()
        if order:
            writer.add_note(f"The {len(order)} signed records before this note (entries {first}–{writer.length}) "
                            f"were sealed {how} on {writer.now:%Y-%m-%d}, not at their signing.")
            writer.flush()
        return len(order)


@dataclass(frozen=True)
class Problem:
    text: str
    kind: str | None = None  # the record's kind and id, when the problem is about one record
    record_id: int | None = None


def _title(kind_name, record_id):
    kind = registry.kinds().get(kind_name)
    return f"{(kind.title or kind.name) if kind else kind_name} {record_id}"


def verify(models_registry=None):
    """Every problem of the chain and of the records it seals, in chain order, then the unsealed records:
    a record whose stored content no longer matches its hash, a broken link, an altered or missing entry, a
    signed record missing from the chain and an entry whose record is gone. Empty: intact."""
    reg, Head, Layout, Entry = _models(models_registry)
    problems = []
    layouts = {row.pk: row for row in Layout._base_manager.all()}
    for row in layouts.values():
        if canonical.digest(row.layout) != row.digest:
            problems.append(Problem(f"Content layout {row.pk} ({row.kind}) was altered: it no longer matches its "
                                    "digest."))
    expected, previous, kinds = 1, canonical.GENESIS, registry.kinds()
    entries = Entry._base_manager.order_by("sequence").values_list(
        "sequence", "kind", "record_id", "layout_id", "content_hash", "previous_hash", "chain_hash", "sealed_at",
        "note")
    for sequence, kind, record_id, layout_id, content_hash, previous_hash, chain_hash, sealed_at, note in \
            entries.iterator(chunk_size=2000):
        what = "a note" if kind == registry.NOTE else _title(kind, record_id)
        if sequence != expected:  # ordered by the key: only a gap is possible
            problems.append(Problem(f"Entries {expected}–{sequence - 1} are missing from the chain."))
        if previous_hash != previous:
            problems.append(Problem(f"Broken link at entry {sequence} ({what}): it does not follow the entry "
                                    "before it.", kind, record_id))
        layout = layouts.get(layout_id)
        if kind == registry.NOTE:
            if note_hash(note) != content_hash:
                problems.append(Problem(f"Entry {sequence} (a note) was altered: its text no longer matches its "
                                        "hash."))
        elif kind not in kinds:
            problems.append(Problem(f"Entry {sequence} names {kind!r}, which is not a kind of signed record.",
                                    kind, record_id))
        elif layout is None:
            problems.append(Problem(f"Entry {sequence} ({what}) names no content layout.", kind, record_id))
        if canonical.chain_hash(sequence, kind, record_id, layout.digest if layout else None, content_hash,
                                previous_hash, sealed_at) != chain_hash:
            problems.append(Problem(f"Entry {sequence} ({what}) was altered: its chain hash no longer matches "
                                    "what it states.", kind, record_id))
        expected, previous = sequence + 1, chain_hash
    last = expected - 1
    head = Head._base_manager.filter(pk=HEAD).first()
    if head is None:
        if last:
            problems.append(Problem("The chain's head is missing."))
    elif head.length != last or head.last_hash != previous:
        problems.append(Problem(f"The chain ends at entry {last}, but its head records {head.length} entries "
                                "ending otherwise: entries were cut from its end, or the head was altered."))
    for kind in kinds.values():
        problems += _check_records(kind, reg, Entry, layouts)
    return problems


def _check_records(kind, reg, Entry, layouts):
    """The content of every record of `kind` against its entry, and the signed records with no entry."""
    problems = []
    model = reg.get_model(kind.model)
    sealed = set()
    rows = Entry._base_manager.filter(kind=kind.name).order_by("record_id").values_list(
        "record_id", "content_hash", "layout_id", "sequence")
    batch = []

    def check(batch):
        by_layout = defaultdict(list)
        for row in batch:
            if row[2] in layouts:
                by_layout[row[2]].append(row)
        for layout_id, rows_ in by_layout.items():
            try:
                hashes = content.content_hashes(layouts[layout_id].layout, [r[0] for r in rows_], reg)
            except (LookupError, KeyError) as exc:  # FieldDoesNotExist is a LookupError
                problems.append(Problem(f"Content layout {layout_id} ({kind.name}) names something the models no "
                                        f"longer have ({exc}): its records cannot be checked."))
                continue
            for record_id, stored, _, sequence in rows_:
                if record_id not in hashes:
                    problems.append(Problem(f"{_title(kind.name, record_id)} is gone: entry {sequence} seals a "
                                            "record that no longer exists.", kind.name, record_id))
                elif hashes[record_id] != stored:
                    problems.append(Problem(f"{_title(kind.name, record_id)} no longer matches what was signed "
                                            f"(entry {sequence}).", kind.name, record_id))

    for row in rows.iterator(chunk_size=2000):
        sealed.add(row[0])
        batch.append(row)
        if len(batch) == content.BATCH:
            check(batch)
            batch = []
    check(batch)
    signed = model._base_manager.filter(**kind.signed).order_by("pk").values_list("pk", flat=True)
    for pk in signed.iterator(chunk_size=5000):
        if pk not in sealed:
            problems.append(Problem(f"{_title(kind.name, pk)} is signed but not in the chain.", kind.name, pk))
    return problems


def records_named(problems):
    return len({(p.kind, p.record_id) for p in problems if p.record_id is not None})


def verify_and_record(models_registry=None):
    """verify(), recorded as a VerificationRun; returns (problems, run)."""
    reg, *_ = _models(models_registry)
    problems = verify(reg)
    run = reg.get_model("ledger", "VerificationRun")._base_manager.create(
        at=timezone.now(), ok=not problems, records_named=records_named(problems), problems=[p.text for p in problems])
    return problems, run


def head_summary(models_registry=None):
    """Where the chain started and how long it is, in words."""
    _, Head, _, Entry = _models(models_registry)
    head = Head._base_manager.filter(pk=HEAD).first()
    if head is None:
        return "no chain yet (nothing signed)"
    notes = Entry._base_manager.filter(kind=registry.NOTE).count()
    return (f"{head.length} entries since {head.started_at:%Y-%m-%d}"
            + (f", {notes} of them notes on records sealed after their signing" if notes else ""))
