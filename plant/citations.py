"""What a signed record points at stays as it was: it is neither deleted nor re-pointed while a signed record
cites it.

One mechanism for every protected kind (reference standards, devices, positions, areas, sites, fluids,
maintenance tasks, duty periods, installations, users). Each kind is declared once (`protect`: how it is named,
what to do instead, which of its links are frozen) and each app declares which of its signed records cite it
(`cite`). Every path asks the same question, `refusals(objects)`:

* a model's delete() and its queryset's delete() (`ProtectedWhileCited`, `CitedQuerySet`);
* a change of a frozen link: save() refuses it, full_clean() reports it at the field (forms, the admin, the
  register import), the queryset's update() refuses it;
* the Django admin's delete page, its bulk delete action and inline deletions (plant/admin.py), which show the
  sentence instead of deleting (never a 500);
* users, whose model we do not own: every link from a signed record to a user is a PROTECT foreign key, so
  Django itself refuses the delete (ProtectedError); the admin says why in our words.

A refusal is one sentence naming the object, what cites it and what to do instead, e.g. "Reference standard
RS-07 is cited by 216 signed calibrations; withdraw it from use instead."
"""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from typing import Callable

from django.apps import apps
from django.core.exceptions import NON_FIELD_ERRORS, ValidationError
from django.db import models
from django.db.models import Count, OuterRef, Subquery, Value
from django.db.models.functions import Coalesce


class CitedRecordError(models.ProtectedError):
    """Refused: signed records cite the object(s). A ProtectedError, so that code handling Django's own
    refusal of a protected delete handles this one too; str() is the sentence(s)."""

    def __init__(self, sentences, objects):
        self.sentences = list(sentences)
        super().__init__(" ".join(self.sentences), set(objects))

    def __str__(self):
        return " ".join(self.sentences)


class Refusal(str):
    """A refusal sentence in the admin's list of protected objects; the admin's delete templates tell it from
    Django's own entries by `is_refusal`, and offer the kind's alternative action (e.g. withdraw) for `pk`."""

    is_refusal = True

    def __new__(cls, text, obj=None, instead=None):
        made = super().__new__(cls, text)
        made.pk = getattr(obj, "pk", None)
        made.instead = instead  # (admin action name, button label) or None
        return made


def plural(n, noun):
    """'1 signed calibration', '216 signed calibrations' (`noun` is (singular, plural))."""
    return f"{n} {noun[0] if n == 1 else noun[1]}"


def joined(parts):
    parts = list(parts)
    return parts[0] if len(parts) == 1 else ", ".join(parts[:-1]) + " and " + parts[-1]


@dataclass(frozen=True)
class Citation:
    """Signed records of one model that cite objects of a protected kind by a lookup path (a foreign key, a
    many-to-many link, or a path through them: "position__area")."""

    record: str  # "calibration.CalibrationEvent"
    lookup: str  # from the record to the cited object
    verb: str  # "is cited by", "performed"
    noun: tuple  # ("signed calibration", "signed calibrations")
    signed: dict = field(default_factory=dict)  # which rows of `record` are signed ({} : every row)

    def counts(self, protected_model, pks) -> dict:
        records = apps.get_model(self.record)._base_manager.filter(**self.signed, **{f"{self.lookup}__in": pks})
        return dict(records.order_by().values_list(self.lookup).annotate(n=Count("pk", distinct=True)))


@dataclass(frozen=True)
class Coverage:
    """Signed records of a device (`meter`) dated (`performed_on`) within a period of its history (a duty period,
    an installation): the period says where and on what the device served on those dates."""

    record: str
    verb: str
    noun: tuple
    device_field: str  # the period's foreign key to the device
    signed: dict = field(default_factory=dict)

    def counts(self, protected_model, pks) -> dict:
        # until is inclusive (the certificate reads the duty of the day a device was removed as still served)
        covered = (apps.get_model(self.record)._base_manager.filter(**self.signed)
                   .filter(device=OuterRef(self.device_field), performed_on__gte=OuterRef("since"),
                           performed_on__lte=Coalesce(OuterRef("until"), Value(dt.date.max, models.DateField())))
                   .order_by().values("device").annotate(n=Count("pk")).values("n"))
        rows = (protected_model._base_manager.filter(pk__in=pks)
                .annotate(n=Coalesce(Subquery(covered), 0)).values_list("pk", "n"))
        return {pk: n for pk, n in rows if n}


@dataclass
class Kind:
    label: Callable  # obj -> "Reference standard RS-07"
    instead: str  # what to do instead of deleting, as the end of the sentence
    frozen: tuple = ()  # links that cannot change while cited
    action: tuple | None = None  # (admin action, button label) offered instead of delete
    citations: list = field(default_factory=list)


_KINDS: dict[str, Kind] = {}


def _key(model) -> str:
    return model if isinstance(model, str) else model._meta.label_lower


def protect(model, *, label, instead, frozen=(), action=None):
    """Declare a protected kind (model or "app.Model")."""
    _KINDS[_key(model).lower()] = Kind(label=label, instead=instead, frozen=tuple(frozen), action=action)


def cite(model, citation):
    """Declare that signed records cite objects of the protected kind `model` (declared with `protect`)."""
    kind = _KINDS[_key(model).lower()]
    if citation not in kind.citations:
        kind.citations.append(citation)


def kind_of(model) -> Kind | None:
    return _KINDS.get(_key(model).lower())


def _citing(kind, model, pks) -> dict:
    """{pk: [phrases]} for the objects among `pks` that signed records cite; phrases grouped by verb."""
    by_object: dict = {}
    for citation in kind.citations:
        for pk, n in citation.counts(model, pks).items():
            by_object.setdefault(pk, {}).setdefault(citation.verb, []).append(plural(n, citation.noun))
    return {pk: [f"{verb} {joined(counts)}" for verb, counts in verbs.items()] for pk, verbs in by_object.items()}


def refusals(objects, ending=None) -> list[Refusal]:
    """One sentence for each of `objects` (instances of one model, or a queryset) that signed records cite;
    empty when none is cited (or the model is not a protected kind). One query per kind of citing record.
    The sentence ends with what to do instead of deleting, or with `ending`."""
    if isinstance(objects, models.QuerySet):
        model, found = objects.model, None
    else:
        found = [obj for obj in objects if obj.pk is not None]
        if not found:
            return []
        model = type(found[0])
    kind = kind_of(model)
    if kind is None or not kind.citations:
        return []
    citing = _citing(kind, model, objects.values("pk") if found is None else [obj.pk for obj in found])
    if not citing:
        return []
    if found is None:
        found = list(model._base_manager.filter(pk__in=citing))
    return [Refusal(f"{kind.label(obj)} {joined(citing[obj.pk])}; {ending or kind.instead}.", obj, kind.action)
            for obj in sorted(found, key=lambda o: o.pk) if obj.pk in citing]


def refuse_if_cited(objects):
    found = refusals(objects)
    if found:
        raise CitedRecordError(found, [])


def _links(model, names) -> str:
    return joined([str(model._meta.get_field(name).verbose_name) for name in names])


def repointing(instance) -> dict:
    """{field name: sentence} for each frozen link of `instance` changed from what is stored while signed
    records cite it (empty for a new object or an uncited one)."""
    kind = kind_of(type(instance))
    if kind is None or not kind.frozen or instance.pk is None:
        return {}
    columns = [type(instance)._meta.get_field(name).attname for name in kind.frozen]
    stored = type(instance)._base_manager.filter(pk=instance.pk).values(*columns).first()
    if stored is None:
        return {}
    changed = [name for name, column in zip(kind.frozen, columns) if stored[column] != getattr(instance, column)]
    if not changed:
        return {}
    found = refusals([instance], ending=f"its {_links(type(instance), changed)} cannot be changed")
    return {name: str(found[0]) for name in changed} if found else {}


class CitedQuerySet(models.QuerySet):
    """delete() refuses objects that signed records cite; update() refuses a change of a frozen link of them."""

    def delete(self):
        refuse_if_cited(self)
        return super().delete()

    delete.alters_data = True
    delete.queryset_only = True

    def update(self, **kwargs):
        kind = kind_of(self.model)
        if kind is not None:
            changed = [name for name in kind.frozen
                       if name in kwargs or self.model._meta.get_field(name).attname in kwargs]
            cited = refusals(self, ending=f"its {_links(self.model, changed)} cannot be changed") if changed else []
            if cited:
                raise CitedRecordError(cited, [])
        return super().update(**kwargs)

    update.alters_data = True


class ProtectedWhileCited:
    """Model mixin: delete() refuses while signed records cite the object; a frozen link cannot change then
    (full_clean() reports it at the field, save() refuses it). Use with `CitedQuerySet.as_manager()`."""

    def full_clean(self, exclude=None, validate_unique=True, validate_constraints=True):
        errors = {}
        try:
            super().full_clean(exclude=exclude, validate_unique=validate_unique,
                               validate_constraints=validate_constraints)
        except ValidationError as exc:
            errors = exc.update_error_dict(errors)
        for name, sentence in repointing(self).items():
            # a form without the field shows it above the form (a ModelForm refuses errors on fields it lacks)
            errors.setdefault(NON_FIELD_ERRORS if exclude and name in exclude else name, []).append(sentence)
        if errors:
            raise ValidationError(errors)

    def save(self, *args, **kwargs):
        changed = repointing(self)
        if changed:
            raise CitedRecordError(sorted(set(changed.values())), [self])
        super().save(*args, **kwargs)

    def delete(self, *args, **kwargs):
        refuse_if_cited([self])
        return super().delete(*args, **kwargs)
