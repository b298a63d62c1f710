"""What the PDF renderer (weasyprint) may load: the project's own static files, read from disk, and nothing else.

A certificate is rendered from stored records, some of them typed by users. Django escapes those values,
so markup in them is shown as text; this fetcher is the second line: whatever reference reaches the
renderer (an image, a stylesheet, a font), only a file found by Django's static-files finders under
STATIC_URL of the fixed base below is read. Every other scheme (file:, http:, https: to any other host,
data:, ftp: ...) and every path outside the static files is refused before any I/O.
"""
from __future__ import annotations

import mimetypes
import posixpath
from urllib.parse import unquote, urlsplit

from django.conf import settings
from django.contrib.staticfiles import finders

# Relative references in the certificate resolve against this base; the host is reserved (RFC 2606) and
# never contacted: a matching URL is answered from the static files on disk.
BASE_URL = "https://certificate.quenby.invalid/"
_BASE = urlsplit(BASE_URL)


class RefusedFetch(ValueError):
    """A URL the certificate renderer may not load."""


def static_path(url: str) -> str | None:
    """The static file's relative path that `url` names, or None when it is not one of ours."""
    parts = urlsplit(url)
    if (parts.scheme, parts.netloc) != (_BASE.scheme, _BASE.netloc) or parts.query or parts.fragment:
        return None
    prefix = "/" + settings.STATIC_URL.strip("/") + "/"
    path = unquote(parts.path)
    if not path.startswith(prefix) or "\\" in path or "\x00" in path:
        return None
    relative = path[len(prefix):]
    normalised = posixpath.normpath(relative)
    if not relative or normalised != relative or normalised.startswith(("../", "/")) or normalised == "..":
        return None
    return relative


def static_only(url: str, *args, **kwargs) -> dict:
    """weasyprint url_fetcher: the bytes of one of the project's static files, or RefusedFetch."""
    relative = static_path(url)
    found = finders.find(relative) if relative else None
    if not found:
        raise RefusedFetch(f"The certificate renderer loads only the project's static files; refused {url[:200]!r}.")
    with open(found, "rb") as handle:
        data = handle.read()
    mime_type, _ = mimetypes.guess_type(found)
    return {"string": data, "mime_type": mime_type or "application/octet-stream", "redirected_url": url}
