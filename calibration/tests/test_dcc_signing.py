"""Enveloped XML signatures on our DCCs (W3C XML Signature through signxml), with a throwaway key made here."""
import datetime as dt

import pytest
from cryptography import x509
from cryptography.hazmat.primitives import hashes, serialization
from cryptography.hazmat.primitives.asymmetric import ec, rsa
from cryptography.x509.oid import NameOID

from calibration import dcc_schema, dcc_sign
from reports import certificate
from tests.helpers import assert_matches_content, at, enter, needs_schema, sign

pytestmark = [pytest.mark.django_db, pytest.mark.small_world("certificate")]


def throwaway(kind="rsa"):
    """(key PEM, self-signed certificate PEM), valid from yesterday for 30 days."""
    key = rsa.generate_private_key(public_exponent=65537, key_size=2048) if kind == "rsa" \
        else ec.generate_private_key(ec.SECP256R1())
    name = x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, "Test laboratory (throwaway)")])
    now = dt.datetime.now(dt.timezone.utc)
    cert = (x509.CertificateBuilder().subject_name(name).issuer_name(name).public_key(key.public_key())
            .serial_number(x509.random_serial_number()).not_valid_before(now - dt.timedelta(days=1))
            .not_valid_after(now + dt.timedelta(days=30))
            .add_extension(x509.BasicConstraints(ca=False, path_length=None), critical=True)
            .add_extension(x509.KeyUsage(digital_signature=True, content_commitment=True, key_encipherment=False,
                                         data_encipherment=False, key_agreement=False, key_cert_sign=False,
                                         crl_sign=False, encipher_only=False, decipher_only=False), critical=True)
            .sign(key, hashes.SHA256()))
    key_pem = key.private_bytes(serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8,
                                serialization.NoEncryption())
    return key_pem, cert.public_bytes(serialization.Encoding.PEM)


@pytest.fixture
def signed(client, device, standard, monkeypatch):  # noqa: F811
    return sign(client, enter(client, device, standard), at(dt.date(2026, 11, 23)), monkeypatch)


@pytest.mark.parametrize("kind", ["rsa", "ec"])
def test_signature_holds_and_a_changed_byte_breaks_it(signed, kind):
    key_pem, cert_pem = throwaway(kind)
    unsigned = certificate.certificate_xml(signed)
    signed_xml = dcc_sign.sign(unsigned, key_pem, cert_pem)
    verdict = dcc_sign.verify(signed_xml)
    assert verdict.present and verdict.holds, verdict.reason
    assert "Test laboratory (throwaway)" in verdict.subject
    assert dcc_sign.verify(signed_xml, cert_pem).holds
    # one byte of a value changed: the digest of the signed document no longer matches
    value = f"<si:value>{signed.content_as_signed()['points']['as_found'][0]['error']!r}</si:value>".encode()
    assert value in signed_xml
    tampered = signed_xml.replace(value, value.replace(b"<si:value>", b"<si:value>1"), 1)
    broken = dcc_sign.verify(tampered)
    assert broken.present and not broken.holds
    assert "changed after signing" in broken.sentence()
    # another key's certificate does not verify it either
    _, other_cert = throwaway(kind)
    assert not dcc_sign.verify(signed_xml, other_cert).holds
    # the unsigned document says it carries no signature
    assert dcc_sign.verify(unsigned).sentence() == "The file carries no XML signature."


@needs_schema
def test_signed_dcc_stays_schema_valid_and_reads_back(signed):
    key_pem, cert_pem = throwaway()
    signed_xml = dcc_sign.sign(certificate.certificate_xml(signed), key_pem, cert_pem)
    assert dcc_schema.errors(dcc_schema.parse_untrusted(signed_xml)) == []
    assert_matches_content(signed_xml, signed.content_as_signed())


def test_configured_key_signs_the_download_and_the_page_says_so(client, signed, settings, tmp_path):  # noqa: F811
    page = client.get(f"/calibrations/{signed.pk}/").content.decode()
    assert "issued unsigned" in page
    assert b"Signature" not in client.get(f"/calibrations/{signed.pk}/certificate.xml").content
    key_pem, cert_pem = throwaway()
    (tmp_path / "key.pem").write_bytes(key_pem)
    (tmp_path / "cert.pem").write_bytes(cert_pem)
    settings.DCC_KEY, settings.DCC_CERT = str(tmp_path / "key.pem"), str(tmp_path / "cert.pem")
    xml = client.get(f"/calibrations/{signed.pk}/certificate.xml").content
    assert dcc_sign.verify(xml, cert_pem).holds
    page = client.get(f"/calibrations/{signed.pk}/").content.decode()
    assert "carries the laboratory's XML signature" in page and "issued unsigned" not in page


@needs_schema
def test_the_shared_example_signature_holds_at_its_signing_time():
    """The published example is signed (XAdES, ECDSA) with a certificate that has since expired: the signature is
    checked at the signing time it states, and any change to the signed content breaks it."""
    data = (dcc_schema.schema_dir() / "example-temperature-signed.xml").read_bytes()
    verdict = dcc_sign.verify(data)
    assert verdict.holds, verdict.reason
    assert verdict.signed_at.startswith("2023-03-27")
    assert not dcc_sign.verify(data.replace(b"306.248", b"306.249")).holds


def test_a_configured_key_that_cannot_be_read_is_a_clear_refusal_not_an_unsigned_file(client, signed, settings,  # noqa: F811
                                                                                       tmp_path):
    settings.DCC_KEY, settings.DCC_CERT = str(tmp_path / "missing-key.pem"), str(tmp_path / "missing-cert.pem")
    response = client.get(f"/calibrations/{signed.pk}/certificate.xml")
    assert response.status_code == 503
    assert "cannot be read" in response.content.decode() and "QUENBY_DCC_KEY" in response.content.decode()
    (tmp_path / "missing-key.pem").write_bytes(b"not a key")
    (tmp_path / "missing-cert.pem").write_bytes(throwaway()[1])
    response = client.get(f"/calibrations/{signed.pk}/certificate.xml")
    assert response.status_code == 503 and "could not be signed" in response.content.decode()
