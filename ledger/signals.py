"""A record was signed: sent by the one sign-off path (ledger/signed.py) inside its transaction, before the record
is sealed in the chain. Keyword arguments: record (the signed row, as stored). Sender: the record's model."""
from django.dispatch import Signal

record_signed = Signal()
