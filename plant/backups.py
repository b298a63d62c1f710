"""Backup and restore: one archive holding every record and every file the records keep under MEDIA_ROOT.

A backup is a zip archive: `data.json` (every record, keys kept, as `dumpdata` writes it: the register,
calibrations, maintenance records, the record chain, the audit trail, accounts) and `media/<name>` for each file
a model's file field names (the maintenance photos). A backup written before archives (the plain JSON) is still
read; its files are then expected in MEDIA_ROOT already, as the old instructions had them copied by hand.

A restore is all or nothing: it goes only into a new, migrated database (no row in any of the project's tables,
no user) and an empty media folder, checks every value the models would refuse (full_clean) and every link,
then verifies the record chain (ledger.chain.verify) and refuses the backup if anything fails; the files it
wrote are then removed again. Every refusal is one sentence naming the file, the record and the field.
"""
import contextlib
import json
import os
import tempfile
import zipfile
import zlib
from collections import defaultdict
from pathlib import Path, PurePosixPath

from django.apps import apps
from django.conf import settings
from django.contrib.auth import get_user_model
from django.contrib.auth.models import Group
from django.core import serializers
from django.core.exceptions import FieldDoesNotExist, ValidationError
from django.core.files.storage import default_storage
from django.core.management import call_command
from django.core.management.color import no_style
from django.core.serializers.base import DeserializationError
from django.db import DatabaseError, connection, models, transaction
from django.test.utils import override_settings

from ledger import chain, registry

serializers.register_serializer("exact-json", "plant.exact_json")

DATA = "data.json"
MEDIA = "media/"
EXCLUDED = ["contenttypes", "auth.permission", "sessions", "admin.logentry"]
ZIP_MAGIC = b"PK\x03\x04"
MAX_REPORTED = 20  # refusals listed at most; each is a sentence of its own


class RestoreError(Exception):
    """A backup refused; the message is one sentence per problem, each naming the file."""


# Which tables are the project's ------------------------------------------------------------------------------
def project_models():
    """Every model of the project's own apps (those in this repository, not installed packages), the
    many-to-many tables and the audit-trail models included."""
    base = Path(settings.BASE_DIR).resolve()
    found = []
    for app in apps.get_app_configs():
        path = Path(app.path).resolve()
        if path.is_relative_to(base) and not {"site-packages", "dist-packages"} & set(path.parts):
            found += app.get_models(include_auto_created=True)
    return found


def rows_holding_data(model):
    """The rows of `model` a restore would not replace: all of them, except those `migrate` made that the model
    names through a `restore_replaces()` class method (ledger.models.LedgerHead)."""
    rows = model._base_manager.all()
    replaced = getattr(model, "restore_replaces", None)
    if replaced is not None:
        rows = rows.exclude(pk__in=replaced().values("pk"))
    return rows


def tables_with_rows():
    held = [m._meta.label_lower for m in project_models() if rows_holding_data(m).exists()]
    if get_user_model()._base_manager.exists():
        held.append(get_user_model()._meta.label_lower)
    return held


# Files --------------------------------------------------------------------------------------------------------
def file_fields(model):
    return [f for f in model._meta.concrete_fields if isinstance(f, models.FileField)]


def kept_files():
    """(model label, pk, field name, file name) of every file a record names, in any model."""
    for model in apps.get_models():
        fields = file_fields(model)
        for field in fields:
            for pk, name in model._base_manager.exclude(**{field.name: ""}).exclude(
                    **{f"{field.name}__isnull": True}).values_list("pk", field.attname):
                yield model._meta.label_lower, pk, field, name


def safe_name(name):
    """Whether a stored file name is a plain relative path inside MEDIA_ROOT (a hand-edited backup may try
    otherwise)."""
    if not isinstance(name, str) or not name or "\\" in name or "\x00" in name:
        return False
    path = PurePosixPath(name)
    return not path.is_absolute() and ".." not in path.parts and path.parts[0] not in ("", ".")


# Backup -------------------------------------------------------------------------------------------------------
def write_backup(path, warn=lambda text: None):
    """Write the archive to `path` (through a temporary file, so that a failed backup leaves no half archive).
    Returns (bytes of data, files). A file a record names that is missing on disk is reported through `warn` and
    left out: the restore then names that record."""
    path = Path(path)
    files = 0
    with tempfile.TemporaryDirectory() as scratch:
        data = Path(scratch) / DATA
        call_command("dumpdata", format="exact-json", natural_foreign=True, exclude=EXCLUDED, indent=1,
                     output=str(data), verbosity=0)
        size = data.stat().st_size
        partial = path.with_name(path.name + ".part")
        with zipfile.ZipFile(partial, "w", compression=zipfile.ZIP_DEFLATED) as archive:
            archive.write(data, DATA)
            for label, pk, field, name in kept_files():
                try:
                    with field.storage.open(name, "rb") as handle:
                        archive.writestr(MEDIA + name, handle.read(), compress_type=zipfile.ZIP_STORED)
                    files += 1
                except OSError:
                    warn(f"The file {name} of {label} {pk} (field {field.name}) is missing from MEDIA_ROOT; "
                         "the backup is written without it.")
        os.replace(partial, path)
    return size, files


# Restore ------------------------------------------------------------------------------------------------------
def _read(path):
    """(rows, archive or None) of a backup, or RestoreError with the reason in one sentence."""
    path = Path(path)
    try:
        with open(path, "rb") as handle:
            head = handle.read(4)
    except FileNotFoundError:
        raise RestoreError(f"{path}: there is no such file.")
    except OSError as exc:
        raise RestoreError(f"{path} cannot be read ({exc.strerror or exc}).")
    archive = None
    if head == ZIP_MAGIC:
        try:
            archive = zipfile.ZipFile(path)
            raw = archive.read(DATA)
        except KeyError:
            raise RestoreError(f"{path} is an archive but not a backup: it holds no {DATA}.")
        except (zipfile.BadZipFile, zlib.error, EOFError, OSError) as exc:
            raise RestoreError(f"{path} is damaged or cut short: the archive cannot be read ({exc}).")
    else:
        raw = path.read_bytes()
    try:
        rows = json.loads(raw.decode("utf-8"))
    except UnicodeDecodeError:
        raise RestoreError(f"{path} is not a backup: its data is not UTF-8 text.")
    except json.JSONDecodeError as exc:
        raise RestoreError(f"{path} is damaged or cut short: its data stops being valid JSON at line {exc.lineno}, "
                           f"column {exc.colno} ({exc.msg}).")
    if not isinstance(rows, list) or not all(isinstance(r, dict) and isinstance(r.get("fields"), dict)
                                             and isinstance(r.get("model"), str) for r in rows):
        raise RestoreError(f"{path} is not a backup: its data is not a list of records.")
    return rows, archive


def _where(path, label, pk, field=None):
    return f"{path}: record {label} {pk}" + (f", field {field}" if field else "")


def _precheck(path, row):
    """The model of a row and a refusal for a value its field cannot hold (before it reaches the database)."""
    label, pk = row["model"], row.get("pk")
    try:
        model = apps.get_model(label)
    except (LookupError, ValueError):
        raise RestoreError(f"{path}: record {label} {pk} is of a model this version does not have.")
    for name, value in row["fields"].items():
        try:
            field = model._meta.get_field(name)
        except FieldDoesNotExist:
            raise RestoreError(f"{_where(path, label, pk, name)}: the model has no such field.")
        if field.is_relation or not field.concrete:
            continue
        if value is None and not field.null:
            raise RestoreError(f"{_where(path, label, pk, name)}: a value is required.")
        try:
            value = field.to_python(value)
        except ValidationError as exc:
            raise RestoreError(f"{_where(path, label, pk, name)}: {' '.join(exc.messages)}")
        if getattr(field, "max_length", None) and isinstance(value, str) and len(value) > field.max_length:
            raise RestoreError(f"{_where(path, label, pk, name)}: longer than {field.max_length} characters.")
    return model


def _load(path, rows):
    """Save every row as it is (no save() of ours, no signals' side effects: raw), then the links that named rows
    further on. Returns the models loaded."""
    loaded, deferred = set(), []
    for row in rows:
        model = _precheck(path, row)
        label, pk = row["model"], row.get("pk")
        try:
            for obj in serializers.deserialize("python", [row], handle_forward_references=True):
                obj.save()
                if obj.deferred_fields:
                    deferred.append((label, pk, obj))
        except DeserializationError as exc:
            cause = exc.__cause__ or exc
            messages = cause.messages if isinstance(cause, ValidationError) else [str(cause)]
            raise RestoreError(f"{_where(path, label, pk)}: {' '.join(messages)}")
        except DatabaseError as exc:
            raise RestoreError(f"{_where(path, label, pk)}: the database refused it ({str(exc).strip()}).")
        loaded.add(model)
        loaded.update(f.remote_field.through for f in model._meta.many_to_many)
    for label, pk, obj in deferred:
        try:
            obj.save_deferred_fields()
        except (DeserializationError, DatabaseError, ValueError) as exc:
            raise RestoreError(f"{_where(path, label, pk)}: it names a record the backup does not hold ({exc}).")
    return loaded


def _check_links(path, loaded):
    """Every foreign key of every loaded row names a row that exists (one query per link field)."""
    for model in loaded:
        for field in model._meta.concrete_fields:
            if not field.is_relation or field.many_to_many:
                continue
            target = field.related_model
            # ordered by the key alone: a default ordering through the link would join it and hide the orphans
            named = (model._base_manager.order_by("pk").exclude(**{f"{field.attname}__isnull": True})
                     .exclude(**{f"{field.attname}__in": target._base_manager.order_by()
                                 .values(field.target_field.attname)}))
            bad = named.values_list("pk", field.attname).first()
            if bad is not None:
                raise RestoreError(f"{_where(path, model._meta.label_lower, bad[0], field.name)}: it names "
                                   f"{target._meta.label_lower} {bad[1]}, which the backup does not hold.")
    try:
        connection.check_constraints()
    except DatabaseError as exc:
        raise RestoreError(f"{path}: the restored records do not hold together ({str(exc).strip()}).")


def _clean_all(path, loaded):
    """full_clean of every restored row of the project's models, read back from the database (so that a model's
    own checks may look at the rows it refers to); uniqueness is the database's, foreign keys were checked in
    bulk. Installed packages' rows (accounts, login records) are held to the database's constraints only."""
    refusals = []
    ours = set(project_models())
    for model in sorted(loaded & ours, key=lambda m: m._meta.label_lower):
        links = [f.name for f in model._meta.concrete_fields if f.is_relation]
        nullable = [f for f in model._meta.concrete_fields if f.null and not f.is_relation]
        for obj in model._base_manager.order_by("pk").iterator(chunk_size=2000):
            # a null where the column allows one is what the model itself writes (a draft's verdict not yet
            # computed), whatever the field's `blank` says to forms
            unset = [f.name for f in nullable if getattr(obj, f.attname) is None]
            try:
                obj.full_clean(exclude=links + unset, validate_unique=False, validate_constraints=False)
            except ValidationError as exc:
                for field, messages in exc.message_dict.items():
                    where = _where(path, model._meta.label_lower, obj.pk, None if field == "__all__" else field)
                    refusals.append(f"{where}: {' '.join(messages)}")
            if len(refusals) >= MAX_REPORTED:
                break
        if len(refusals) >= MAX_REPORTED:
            break
    if refusals:
        raise RestoreError("\n".join(refusals))


def _files_of(path, rows, archive):
    """{file name: (label, pk, field)} of every file the rows name; each must be in the archive (a plain-JSON
    backup: in MEDIA_ROOT already)."""
    wanted = {}
    members = set(archive.namelist()) if archive is not None else set()
    for row in rows:
        model = apps.get_model(row["model"])
        for field in file_fields(model):
            name = row["fields"].get(field.name)
            if not name:
                continue
            where = _where(path, row["model"], row.get("pk"), field.name)
            if not safe_name(name):
                raise RestoreError(f"{where}: the file name {name!r} is not a plain path inside the media folder.")
            if archive is not None:
                if MEDIA + name not in members:
                    raise RestoreError(f"{where}: the file {name} is not in the backup.")
                if default_storage.exists(name):
                    raise RestoreError(f"{where}: the file {name} is already in the media folder "
                                       f"({settings.MEDIA_ROOT}); restore only into an empty one.")
            elif not default_storage.exists(name):
                raise RestoreError(f"{where}: the file {name} is neither in this backup (written before backups "
                                   f"carried files) nor in the media folder ({settings.MEDIA_ROOT}).")
            wanted[name] = where
    return wanted


class _Written:
    """The files and folders a restore made, removed again if it is refused."""

    def __init__(self):
        self.files, self.folders = [], []

    def write(self, name, data):
        target = Path(default_storage.path(name))
        missing = []
        folder = target.parent
        while not folder.exists():
            missing.append(folder)
            folder = folder.parent
        for folder in reversed(missing):
            folder.mkdir()
            self.folders.append(folder)
        with open(target, "xb") as handle:
            self.files.append(target)
            handle.write(data)

    def remove(self):
        for target in self.files:
            target.unlink(missing_ok=True)
        for folder in reversed(self.folders):
            try:
                folder.rmdir()
            except OSError:
                pass


def restore(path):
    """Restore the backup at `path`; returns the number of records. RestoreError (nothing restored) otherwise."""
    held = tables_with_rows()
    if held:
        raise RestoreError(f"The database is not empty (it holds rows in {', '.join(held[:8])}"
                           f"{' and more' if len(held) > 8 else ''}): restore only into a new, migrated database.")
    rows, archive = _read(path)
    with archive or contextlib.nullcontext():
        return _restore(path, rows, archive)


def _restore(path, rows, archive):
    has_chain = any(r["model"] == "ledger.ledgerhead" for r in rows)
    if archive is not None and not has_chain:
        raise RestoreError(f"{path} holds no record chain (ledger.ledgerhead): its signed records cannot be "
                           "verified, so it is refused.")
    written = _Written()
    try:
        for name, where in _files_of(path, rows, archive).items():
            if archive is not None:
                try:
                    written.write(name, archive.read(MEDIA + name))
                except (zipfile.BadZipFile, zlib.error, EOFError) as exc:
                    raise RestoreError(f"{where}: the file {name} is damaged in the backup ({exc}).")
        # The backup carries the audit trail itself; recording the restore's own writes (the many-to-many links
        # are set through the ORM) would add history rows that never happened.
        with transaction.atomic(), override_settings(SIMPLE_HISTORY_ENABLED=False):
            # the role groups and the empty chain head made by migrate are replaced by the backed-up ones
            Group.objects.all().delete()
            for model in project_models():
                if hasattr(model, "restore_replaces"):
                    model.restore_replaces().delete()
            with connection.constraint_checks_disabled():
                loaded = _load(path, rows)
            _reset_sequences(loaded)
            _check_links(path, loaded)
            _clean_all(path, loaded)
            if not has_chain:  # a plain-JSON backup from before the chain: sealed now, and the chain says so
                chain.seal_unsealed(f"on restoring {Path(path).name}, a backup written before the record chain")
            problems, _ = chain.verify_and_record()
            if problems:
                raise RestoreError("\n".join(_named(path, p) for p in problems[:MAX_REPORTED]))
    except BaseException:
        written.remove()
        raise
    return len(rows)


def _named(path, problem):
    """A verification problem as a refusal: the file, the record's model and key, then what is wrong."""
    kind = registry.kinds().get(problem.kind)
    if kind is None or problem.record_id is None:
        return f"{path}: {problem.text}"
    return f"{_where(path, kind.model.lower(), problem.record_id)}: {problem.text}"


def _reset_sequences(loaded):
    statements = connection.ops.sequence_reset_sql(no_style(), list(loaded))
    if statements:
        with connection.cursor() as cursor:
            for sql in statements:
                cursor.execute(sql)
