"""Enveloped XML signatures on DCCs (W3C XML Signature 1.1, through the signxml package).

Our own DCCs are signed when the laboratory's key and X.509 certificate are configured as PEM files (settings
DCC_KEY and DCC_CERT, from QUENBY_DCC_KEY and QUENBY_DCC_CERT); otherwise they are issued unsigned and the results
page says so. The signature covers the whole document (enveloped-signature transform, exclusive C14N, SHA-256) and
sits as the last child of the root, where the DCC 3.2.0 schema puts ds:Signature.

``verify`` checks a signed document against the certificate it carries (or one given): whether the signed data
is unchanged and the signature value matches that certificate's key. Whether that certificate belongs to whom it
names (its chain to a trusted authority) is not checked here; the page says so.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from django.conf import settings
from lxml import etree

DS_NS = "http://www.w3.org/2000/09/xmldsig#"


class SigningNotConfigured(RuntimeError):
    pass


def configured() -> bool:
    """Whether both PEM paths are set (the files are read when signing; a missing file is an error then)."""
    return bool(getattr(settings, "DCC_KEY", "") and getattr(settings, "DCC_CERT", ""))


def _algorithm(key_pem: bytes):
    from cryptography.hazmat.primitives.asymmetric import ec
    from cryptography.hazmat.primitives.serialization import load_pem_private_key
    from signxml import SignatureMethod

    key = load_pem_private_key(key_pem, password=None)
    return SignatureMethod.ECDSA_SHA256 if isinstance(key, ec.EllipticCurvePrivateKey) else SignatureMethod.RSA_SHA256


def sign(xml: bytes, key_pem: bytes, cert_pem: bytes) -> bytes:
    """`xml` with an enveloped signature made with `key_pem`, carrying `cert_pem` in its KeyInfo."""
    from signxml import CanonicalizationMethod, DigestAlgorithm, XMLSigner, methods

    root = etree.fromstring(xml, etree.XMLParser(resolve_entities=False, no_network=True, remove_blank_text=True))
    signer = XMLSigner(method=methods.enveloped, signature_algorithm=_algorithm(key_pem),
                       digest_algorithm=DigestAlgorithm.SHA256,
                       c14n_algorithm=CanonicalizationMethod.EXCLUSIVE_XML_CANONICALIZATION_1_0)
    signer.namespaces = {"ds": DS_NS}
    signed = signer.sign(root, key=key_pem, cert=cert_pem)
    return etree.tostring(signed, xml_declaration=True, encoding="UTF-8")


class SigningFailed(RuntimeError):
    """The configured key or certificate cannot be read or used; the message says which and why."""


def sign_if_configured(xml: bytes) -> bytes:
    """`xml` signed with the configured key, or as it is when none is configured; SigningFailed when the configured
    files cannot be read or used (never an unsigned file in place of a signed one)."""
    if not configured():
        return xml
    try:
        key_pem = Path(settings.DCC_KEY).read_bytes()
        cert_pem = Path(settings.DCC_CERT).read_bytes()
    except OSError as exc:
        raise SigningFailed(f"The DCC signing key or certificate cannot be read ({exc.strerror}: {exc.filename}); "
                            "check QUENBY_DCC_KEY and QUENBY_DCC_CERT. No DCC is issued until it can be signed.") from None
    try:
        return sign(xml, key_pem, cert_pem)
    except (ValueError, TypeError) as exc:
        raise SigningFailed(f"The DCC could not be signed with the configured key and certificate ({exc}); check "
                            "that QUENBY_DCC_KEY is an unencrypted PEM private key and QUENBY_DCC_CERT its "
                            "certificate.") from None


@dataclass
class Verdict:
    present: bool
    holds: bool = False
    subject: str = ""
    issuer: str = ""
    reason: str = ""
    signed_at: str = ""      # the signing time the signature states (XAdES SigningTime), when it has one
    valid_until: str = ""    # the end of the signing certificate's validity

    def sentence(self) -> str:
        if not self.present:
            return "The file carries no XML signature."
        if self.holds:
            when = (f" It was checked at its stated signing time {self.signed_at}, within the certificate's validity "
                    f"(until {self.valid_until})." if self.signed_at else "")
            return (f"Its XML signature holds: the signed content is unchanged and matches the certificate it carries "
                    f"(subject {self.subject}; issued by {self.issuer}).{when} Whether that certificate is "
                    "trustworthy (its chain to a known authority) is not checked here.")
        return f"Its XML signature does not hold: {self.reason}"


XADES_NS = "http://uri.etsi.org/01903/v1.3.2#"


def embedded_certificate(root) -> bytes | None:
    """The first X.509 certificate in the signature's KeyInfo, as PEM, or None."""
    found = root.find(f".//{{{DS_NS}}}Signature/{{{DS_NS}}}KeyInfo//{{{DS_NS}}}X509Certificate")
    if found is None or not (found.text or "").strip():
        return None
    body = "".join(found.text.split())
    lines = [body[i:i + 64] for i in range(0, len(body), 64)]
    return ("-----BEGIN CERTIFICATE-----\n" + "\n".join(lines) + "\n-----END CERTIFICATE-----\n").encode()


def _names(cert_pem: bytes):
    from cryptography import x509

    cert = x509.load_pem_x509_certificate(cert_pem)
    return cert.subject.rfc4514_string(), cert.issuer.rfc4514_string(), cert.not_valid_after_utc


def _signing_time(signature):
    """The signing time the signature itself states (XAdES SignedSignatureProperties/SigningTime), or None; it is
    covered by the signature, so it counts only when the signature holds."""
    import datetime as dt

    found = signature.find(f".//{{{XADES_NS}}}SigningTime")
    if found is None or not (found.text or "").strip():
        return None
    try:
        return dt.datetime.fromisoformat(found.text.strip().replace("Z", "+00:00"))
    except ValueError:
        return None


def verify(xml: bytes, cert_pem: bytes | None = None) -> Verdict:
    """Whether the enveloped signature of `xml` holds, against `cert_pem` or the certificate the document carries.

    Checked at the signing time the signature states (XAdES), when it states one, else now: a certificate that has
    expired since the signing does not undo a signature made while it was valid. A signature with XAdES signed
    properties has two references (the document and the properties); every reference is checked."""
    from signxml import SignatureConfiguration, XMLVerifier
    from signxml.exceptions import InvalidInput, SignXMLException

    parser = etree.XMLParser(resolve_entities=False, no_network=True, load_dtd=False)
    try:
        root = etree.fromstring(xml, parser)
    except etree.XMLSyntaxError as exc:
        return Verdict(present=False, reason=f"not well-formed XML ({exc.msg})")
    signatures = root.findall(f"{{{DS_NS}}}Signature")
    if not signatures:
        return Verdict(present=False)
    cert_pem = cert_pem or embedded_certificate(root)
    if cert_pem is None:
        return Verdict(present=True, reason="it carries no certificate to check it against.")
    try:
        subject, issuer, not_after = _names(cert_pem)
    except ValueError as exc:
        return Verdict(present=True, reason=f"the certificate it carries cannot be read ({exc}).")
    references = len(signatures[0].findall(f"{{{DS_NS}}}SignedInfo/{{{DS_NS}}}Reference"))
    signed_at = _signing_time(signatures[0])
    config = SignatureConfiguration(location="./", expect_references=max(references, 1),
                                    verification_time=signed_at)
    facts = {"subject": subject, "issuer": issuer, "valid_until": not_after.isoformat(),
             "signed_at": signed_at.isoformat() if signed_at else ""}
    try:
        XMLVerifier().verify(xml, x509_cert=cert_pem.decode(), parser=parser, expect_config=config)
    except (InvalidInput, SignXMLException, ValueError) as exc:
        reason = " ".join(str(exc).split()) or type(exc).__name__
        return Verdict(present=True, reason=f"{reason.rstrip('.')}. The file was changed after signing, or was "
                       "signed with another key.", **facts)
    return Verdict(present=True, holds=True, **facts)
