"""The kinds of signed record the ledger seals, registered by the apps that own them.

The ledger imports none of those apps: each registers its kinds from its AppConfig.ready() (calibration,
maintenance), naming its models by label, so that the ledger can read them through a migration's historical
models as well as through the live ones. Dependencies run one way: the apps depend on the ledger.
"""
from dataclasses import dataclass, field

#: the reserved kind of the ledger's own entries, notes that say how records were sealed when not at their signing
NOTE = "note"


@dataclass(frozen=True)
class Kind:
    """One kind of signed record.

    name: the kind's name in the chain ("calibration");
    title: what messages call one ("maintenance record"); blank: the name;
    model: the record's model label ("calibration.CalibrationEvent");
    signed: field lookups that select the signed records ({"state": "signed"}; empty: every row is signed);
    signed_at: the field holding the signing time (signing order: this, then the primary key);
    parts: reverse relations whose rows belong to the record's content (the points of a calibration, the
           photos of a maintenance record), by their accessor name on the record;
    renamed: (former name, name now) of each field of the record renamed since records were sealed: the layout kept
             with an entry names the field as it was hashed, and the content keeps that name, read from the field
             as it is called now, so that records sealed before a rename keep their hashes.
    A record's content is every concrete field of it and of each part, and its many-to-many links; a file
    field's bytes are hashed with it (ledger.content)."""

    name: str
    model: str
    title: str = ""
    signed: dict = field(default_factory=dict)
    signed_at: str = "signed_at"
    parts: tuple = ()
    renamed: tuple = ()


_kinds: dict[str, Kind] = {}


def register(kind):
    if kind.name == NOTE:
        raise ValueError(f"{NOTE!r} is the ledger's own kind.")
    known = _kinds.get(kind.name)
    if known is not None and known != kind:
        raise ValueError(f"Another ledger kind is already registered as {kind.name!r}.")
    _kinds[kind.name] = kind


def kinds():
    """The registered kinds, by name."""
    return dict(_kinds)


def get(name):
    return _kinds[name]


def renamed_fields(model_label):
    """{former name: name now} of the fields of the model labelled `model_label` (any case) that were renamed."""
    label = model_label.lower()
    return {old: new for kind in _kinds.values() if kind.model.lower() == label for old, new in kind.renamed}
