"""Register files kept on the server between the dry run and the apply.

After a clean dry run the uploaded file is kept through Django's storage API (the default storage: MEDIA_ROOT on
local disk, or whatever store STORAGES["default"] names), under IMPORT_KEPT_DIR, keyed by a random token, with a
small note of who uploaded it, when, its register kind and its name. The apply names the token only; the file is
read back for its uploader alone, until it expires (IMPORT_KEEP_MINUTES), and is deleted once applied. Expired
files are deleted whenever a new one is kept.
"""
from __future__ import annotations

import json
import re
import secrets
from dataclasses import dataclass

from django.conf import settings
from django.core.files.base import ContentFile
from django.core.files.storage import default_storage
from django.utils import timezone

TOKEN = re.compile(r"^[A-Za-z0-9_-]{32}$")
NOT_KEPT = "The checked file is no longer kept on the server (it was applied, expired or never yours); upload it again."
EXPIRED = ("The checked file expired: files are kept {minutes} minutes after their dry run (setting "
           "QUENBY_IMPORT_KEEP_MINUTES); upload it again.")


class KeptUploadError(ValueError):
    """The kept file cannot be given back (one sentence for the user)."""


@dataclass
class KeptUpload:
    token: str
    kind: str
    filename: str
    content: bytes


def _names(token: str) -> tuple[str, str]:
    folder = settings.IMPORT_KEPT_DIR.strip("/")
    return f"{folder}/{token}.upload", f"{folder}/{token}.json"


def keep(user, kind: str, filename: str, content: bytes) -> str:
    """Keep `content` for `user`; returns the token that names it."""
    purge_expired()
    token = secrets.token_urlsafe(24)  # 32 characters
    data_name, note_name = _names(token)
    note = {"user": user.pk, "kind": kind, "filename": filename, "kept_at": timezone.now().isoformat()}
    default_storage.save(data_name, ContentFile(content))
    default_storage.save(note_name, ContentFile(json.dumps(note).encode("utf-8")))
    return token


def _note(token: str) -> dict | None:
    _, note_name = _names(token)
    try:
        with default_storage.open(note_name, "rb") as f:
            return json.loads(f.read().decode("utf-8"))
    except (OSError, ValueError):
        return None


def _expired(note: dict) -> bool:
    try:
        kept_at = timezone.datetime.fromisoformat(note["kept_at"])
    except (KeyError, TypeError, ValueError):
        return True
    return (timezone.now() - kept_at).total_seconds() > settings.IMPORT_KEEP_MINUTES * 60


def load(user, token: str) -> KeptUpload:
    """The file kept under `token` for `user`; KeptUploadError if there is none for them (another user's token
    is answered as an unknown one) or it expired (then it is deleted)."""
    if not isinstance(token, str) or not TOKEN.match(token):
        raise KeptUploadError(NOT_KEPT)
    note = _note(token)
    if note is None or note.get("user") != user.pk:
        raise KeptUploadError(NOT_KEPT)
    if _expired(note):
        discard(token)
        raise KeptUploadError(EXPIRED.format(minutes=settings.IMPORT_KEEP_MINUTES))
    data_name, _ = _names(token)
    try:
        with default_storage.open(data_name, "rb") as f:
            content = f.read()
    except OSError:
        raise KeptUploadError(NOT_KEPT) from None
    return KeptUpload(token=token, kind=note.get("kind", ""), filename=note.get("filename", ""), content=content)


def discard(token: str) -> None:
    if not TOKEN.match(token or ""):
        return
    for name in _names(token):
        try:
            default_storage.delete(name)
        except OSError:
            pass


def purge_expired() -> int:
    """Delete every kept file past its time; returns how many."""
    folder = settings.IMPORT_KEPT_DIR.strip("/")
    try:
        _, files = default_storage.listdir(folder)
    except (OSError, NotImplementedError):
        return 0
    purged = 0
    for name in files:
        if name.endswith(".json"):
            token = name[:-len(".json")]
            note = _note(token) if TOKEN.match(token) else None
            if note is None or _expired(note):
                discard(token)
                purged += 1
    return purged
