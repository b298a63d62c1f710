"""What a signed record's hash covers, read from the database in batches.

A layout names the fields hashed for a kind: every concrete field of the record, its many-to-many links, and
every concrete field of each of its parts (ledger.registry.Kind.parts). It is worked out from the models when a
record is sealed and kept with the entry (ledger.models.ContentLayout), so a field added to a model later is
covered from the next signing on, while the records sealed before it keep the hash of the fields they had.

`models` is the app registry to read through: the live one, or a migration's historical apps.
"""
import hashlib
from collections import defaultdict

from django.apps import apps as live_apps
from django.core.exceptions import FieldDoesNotExist
from django.db import models

from ledger import canonical, registry

BATCH = 500


def layout_of(kind, models_registry=None):
    """The layout of `kind` as its models stand now."""
    registry = models_registry or live_apps
    model = registry.get_model(kind.model)
    parts = {}
    for accessor in kind.parts:
        relation = model._meta.get_field(accessor)
        parts[accessor] = {"model": relation.related_model._meta.label_lower, "link": relation.field.name,
                           "fields": sorted(f.name for f in relation.related_model._meta.concrete_fields)}
    return {"model": model._meta.label_lower,
            "fields": sorted(f.name for f in model._meta.concrete_fields),
            "many_to_many": sorted(f.name for f in model._meta.many_to_many),
            "parts": parts}


def _columns(model, names):
    """(name, attname, converter) of each named field, the name as the layout states it (a field renamed since is
    read under its name now, ledger.registry.Kind.renamed); FieldDoesNotExist names one the model no longer has."""
    renamed = None
    out = []
    for name in names:
        try:
            field = model._meta.get_field(name)
        except FieldDoesNotExist:
            if renamed is None:
                renamed = registry.renamed_fields(model._meta.label_lower)
            if name not in renamed:
                raise
            field = model._meta.get_field(renamed[name])
        out.append((name, field.attname, converter(field)))
    return out


def file_sha256(storage, name):
    try:
        with storage.open(name, "rb") as handle:
            sha = hashlib.sha256()
            for chunk in iter(lambda: handle.read(1 << 20), b""):
                sha.update(chunk)
            return sha.hexdigest()
    except OSError:
        return None  # a missing file is stated as missing, so that a file lost after sealing is noticed


def _none_or(convert):
    return lambda value: None if value is None else convert(value)


def converter(field):
    """The function that gives a column's value as the hash sees it, by the field's type: a float column read
    back as an int is still a float, a file field is its name and the SHA-256 of its bytes."""
    if isinstance(field, models.FileField):
        return lambda name: {"name": name, "sha256": file_sha256(field.storage, name)} if name else None
    if isinstance(field, models.JSONField):
        return _none_or(canonical.json_value)
    if field.is_relation:
        field = field.target_field
    if isinstance(field, models.FloatField):
        return _none_or(lambda value: canonical.number(float(value)))
    if isinstance(field, models.BooleanField):
        return _none_or(bool)
    if isinstance(field, (models.IntegerField, models.AutoField)):
        return _none_or(int)
    return canonical.scalar


def _rows(model, columns, **lookups):
    attnames = [attname for _, attname, _ in columns]
    for row in model._base_manager.filter(**lookups).order_by("pk").values_list(*attnames):
        yield {name: convert(value) for (name, _, convert), value in zip(columns, row)}


def contents(layout, ids, models_registry=None):
    """{record id: canonical content} of the records of `ids` that exist, under `layout` (one read per part)."""
    registry = models_registry or live_apps
    model = registry.get_model(layout["model"])
    columns = _columns(model, layout["fields"])
    pk_name = model._meta.pk.name
    out = {}
    for row in _rows(model, columns, pk__in=ids):
        out[row[pk_name]] = {"fields": row, "many_to_many": {}, "parts": {}}
    found = list(out)
    for name in layout["many_to_many"]:
        through = model._meta.get_field(name).remote_field.through
        source = next(f for f in through._meta.concrete_fields if f.is_relation and f.related_model is model)
        target = next(f for f in through._meta.concrete_fields if f.is_relation and f is not source)
        convert = converter(target)
        links = defaultdict(list)
        for record_id, other in through._base_manager.filter(**{f"{source.attname}__in": found}).values_list(
                source.attname, target.attname):
            links[record_id].append(convert(other))
        for record_id, content in out.items():
            content["many_to_many"][name] = sorted(links.get(record_id, []), key=canonical.dumps)
    for accessor, part in layout["parts"].items():
        part_model = registry.get_model(part["model"])
        link = part_model._meta.get_field(part["link"])
        part_columns = _columns(part_model, part["fields"])
        rows = defaultdict(list)
        for row in _rows(part_model, part_columns, **{f"{link.attname}__in": found}):
            rows[row[part["link"]]].append(row)
        for record_id, content in out.items():
            content["parts"][accessor] = rows.get(record_id, [])
    return out


def content_hashes(layout, ids, models_registry=None):
    """{record id: SHA-256 of its canonical content} of the records of `ids` that exist."""
    return {record_id: canonical.digest(content)
            for record_id, content in contents(layout, ids, models_registry).items()}
