"""Checking a DCC against the official schema files, offline, and parsing uploaded XML safely.

The schema files (DCC 3.2.0, D-SI 2.1.0, the W3C XML-signature schema; PTB's LGPL-3 and W3C licences) are not
part of the project: they are looked for in ``../shared/dcc-schema`` relative to the
project root, or where the environment variable ``QUENBY_DCC_SCHEMA_DIR`` points. The DCC schema
imports the other two by their web addresses; ``schema()`` maps those namespaces to the local files and lets
xmlschema load local files only, so validating never touches the network.

Uploaded XML is parsed with no DTD, no entities and no network (``parse_untrusted``): a document declaring a DTD
or an entity is refused before anything else reads it (defusedxml), then lxml parses it with entity resolution and
network access off.
"""
from __future__ import annotations

import os
from functools import lru_cache
from pathlib import Path

from django.conf import settings

DCC_XSD, DSI_XSD, DS_XSD = "dcc_3_2_0.xsd", "dsi_2_1_0.xsd", "ds_0_1.xsd"
ENV = "QUENBY_DCC_SCHEMA_DIR"
MAX_BYTES = 5 * 1024 * 1024  # a DCC of a flow standard is tens of kilobytes; 5 MB leaves room for an attached PDF


class SchemaMissing(RuntimeError):
    """The schema files are not where they are looked for."""


class InvalidDcc(ValueError):
    """An XML document that is not a valid DCC; the message gives the location and the reason in one sentence."""


def schema_dir() -> Path:
    """Where the schema files are: $QUENBY_DCC_SCHEMA_DIR, else ../shared/dcc-schema from the project root."""
    configured = os.environ.get(ENV) or getattr(settings, "DCC_SCHEMA_DIR", None)
    return Path(configured) if configured else Path(settings.BASE_DIR).parent / "shared" / "dcc-schema"


def schema_available() -> bool:
    folder = schema_dir()
    return all((folder / name).is_file() for name in (DCC_XSD, DSI_XSD, DS_XSD))


@lru_cache(maxsize=4)
def _schema(folder: str):
    import xmlschema

    base = Path(folder)
    return xmlschema.XMLSchema(str(base / DCC_XSD), allow="local",
                               locations=[("https://ptb.de/si", str(base / DSI_XSD)),
                                          ("http://www.w3.org/2000/09/xmldsig#", str(base / DS_XSD))])


def schema():
    """The DCC 3.2.0 schema with its imports mapped to the local files (loaded once per folder)."""
    if not schema_available():
        raise SchemaMissing(f"The DCC schema files ({DCC_XSD}, {DSI_XSD}, {DS_XSD}) are not in {schema_dir()}; "
                            f"set {ENV} to the folder that holds them.")
    return _schema(str(schema_dir()))


def parse_untrusted(data: bytes):
    """The root element (lxml) of uploaded XML; InvalidDcc when it is not well-formed, declares a DTD or entities,
    or is too large. No file or network access happens while parsing."""
    import defusedxml.ElementTree as safe_et
    from defusedxml import DefusedXmlException
    from lxml import etree

    if len(data) > MAX_BYTES:
        raise InvalidDcc(f"The file is {len(data) / 1e6:.1f} MB; a DCC up to {MAX_BYTES // 1024 // 1024} MB is read.")
    try:
        safe_et.fromstring(data, forbid_dtd=True, forbid_entities=True, forbid_external=True)
    except DefusedXmlException as exc:
        raise InvalidDcc(f"The file declares a DTD or entities ({type(exc).__name__}), which are refused: a DCC "
                         "needs neither.") from None
    except safe_et.ParseError as exc:
        line, column = getattr(exc, "position", (None, None))
        raise InvalidDcc(f"Line {line}, column {column}: the file is not well-formed XML ({_reason(exc)}).") from None
    parser = etree.XMLParser(resolve_entities=False, no_network=True, load_dtd=False, dtd_validation=False,
                             huge_tree=False, remove_blank_text=False)
    try:
        return etree.fromstring(data, parser)
    except etree.XMLSyntaxError as exc:  # pragma: no cover - defusedxml parses the same documents
        raise InvalidDcc(f"Line {exc.lineno}: the file is not well-formed XML ({exc.msg}).") from None


def _reason(exc) -> str:
    text = str(exc).split(":")[0]
    return text.strip() or "syntax error"


def errors(root) -> list[str]:
    """Each schema error as one sentence: where (line and path) and why; empty when the document is valid."""
    found = []
    for error in schema().iter_errors(root):
        line = getattr(error.elem, "sourceline", None) if error.elem is not None else None
        where = f"Line {line}, " if line else ""
        path = error.path or "/"
        reason = " ".join((error.reason or "does not match the schema").split()).rstrip(".")
        found.append(f"{where}{path}: {reason}.")
        if len(found) >= 20:
            break
    return found


def validate(root) -> None:
    """InvalidDcc with the first error's location and reason (and how many more) when `root` is not a valid DCC."""
    found = errors(root)
    if found:
        more = f" ({len(found) - 1} more error{'s' if len(found) > 2 else ''} after this one.)" if len(found) > 1 else ""
        raise InvalidDcc(found[0] + more)
