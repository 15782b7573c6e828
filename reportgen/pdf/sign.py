"""Sign the finished report (PAdES baseline B-B) and check the signatures of a report.

Uses pyHanko's public API only. The signature is a visible one: a frame over the box the
front matter leaves on the acceptance block (an element with id ``signature-field``,
:data:`SIGNATURE_BOX_PT` in size; ``templates/report.css`` gives it the same size), in
which the front matter writes who signs (its fonts are embedded; an unembedded standard
font in the appearance would break the archive format). The key and certificate come from a PKCS#12 file; neither the key nor
the file enters the report, only the signer's certificate, as in every PDF signature.

The signature is appended as an incremental update, so everything before it, the
PDF/A-3u file with its attachments, stays byte for byte as built. A signed report is
not byte-identical between two builds (the signature holds the signing time).

pyHanko updates the metadata in the signing revision: XMP ``pdf:Producer`` becomes its
own name, ``xmp:ModifyDate`` the signing time, and the document information gets a
``/Producer`` of the same name (it updates an Info ``/ModDate`` only if one exists).
:func:`reportgen.pdf.merge.finish_pdf` writes neither key into the document information,
so the signed file's Info still equals its XMP (PDF/A-3 6.6.2.3; tests/test_verify.py).
"""

from __future__ import annotations

import io
import logging
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Final

from reportgen.errors import ReportgenError

SIGNATURE_FIELD_ID: Final = "signature-field"   # the element's id in the front matter
SIGNATURE_FIELD_NAME: Final = "ReportSignature"  # the PDF form field's name
MM_PT: Final = 72 / 25.4
SIGNATURE_BOX_PT: Final = (80 * MM_PT, 11 * MM_PT)  # report.css: .signature-field 80mm x 11mm


@dataclass(frozen=True)
class SigningKey:
    """A loaded signer (pyHanko ``SimpleSigner``) and the name on its certificate."""

    signer: Any
    subject: str


def load_signing_key(pkcs12: bytes, password: bytes | None, shown: str) -> SigningKey:
    """Load the key and certificate of a PKCS#12 file; a wrong password is a clear error."""
    from pyhanko.sign import signers

    try:
        signer = signers.SimpleSigner.load_pkcs12_data(pkcs12, other_certs=(), passphrase=password)
    except (ValueError, TypeError) as error:
        raise ReportgenError(f"{shown}: cannot open the PKCS#12 file (wrong password, or not a "
                             f"PKCS#12 file with a key and a certificate): {error}") from None
    if signer is None or signer.signing_cert is None:
        raise ReportgenError(f"{shown}: the PKCS#12 file holds no key and certificate")
    return SigningKey(signer, _common_name(signer.signing_cert))


def _common_name(certificate: Any) -> str:
    """The certificate subject's common name, else its whole subject."""
    return str(certificate.subject.native.get("common_name")
               or certificate.subject.human_friendly)


def sign_pdf(pdf: bytes, anchors: Mapping[str, tuple[int, float, float]], *,
             key: SigningKey) -> bytes:
    """Sign ``pdf`` (PAdES B-B) with a visible signature in the signature field's box.

    ``anchors`` maps element ids to (0-based page, x, y of the top-left corner in PDF
    points); the box is placed at ``signature-field``'s, or page 1's bottom-left corner
    when the front matter has none.
    """
    from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter
    from pyhanko.sign import fields, signers
    from pyhanko.stamp import StaticStampStyle

    width, height = SIGNATURE_BOX_PT
    page, x_pt, y_pt = anchors.get(SIGNATURE_FIELD_ID, (0, 40.0, 40.0 + height))
    box = (round(x_pt), round(y_pt - height), round(x_pt + width), round(y_pt))
    # The words in the box (who signed) are part of the page, set by the front matter in
    # its own embedded fonts; the appearance draws the frame only. (pyHanko's text stamp
    # needs a font of its own, and spaced DejaVu's glyphs far apart in our trials.)
    style = StaticStampStyle(border_width=1)
    writer = IncrementalPdfFileWriter(io.BytesIO(pdf), strict=False)
    metadata = signers.PdfSignatureMetadata(
        field_name=SIGNATURE_FIELD_NAME, md_algorithm="sha256",
        subfilter=fields.SigSeedSubFilter.PADES)
    signer = signers.PdfSigner(
        metadata, key.signer, stamp_style=style,
        new_field_spec=fields.SigFieldSpec(SIGNATURE_FIELD_NAME, on_page=page, box=box))
    output = io.BytesIO()
    signer.sign_pdf(writer, output=output)
    return output.getvalue()


@dataclass(frozen=True)
class SignatureState:
    """What ``reportgen verify`` says about one signature."""

    field: str
    signer: str
    intact: bool              # the signed bytes are unchanged and the signature is valid
    covers_whole_file: bool   # nothing was added after signing
    trusted: bool | None      # None when no trust certificate was given
    detail: str


def signature_states(pdf: bytes, trust_pem: bytes | None = None) -> list[SignatureState]:
    """Check every signature of ``pdf``; with ``trust_pem``, trust only that certificate."""
    from asn1crypto import pem, x509
    from pyhanko.pdf_utils.reader import PdfFileReader
    from pyhanko.sign.validation import validate_pdf_signature
    from pyhanko.sign.validation.status import SignatureCoverageLevel
    from pyhanko_certvalidator import ValidationContext

    context = None
    if trust_pem is not None:
        try:
            der = pem.unarmor(trust_pem)[2] if pem.detect(trust_pem) else trust_pem
            roots = [x509.Certificate.load(der)]
            roots[0].native  # parse now: a bad file is bad input
        except (ValueError, TypeError) as error:
            raise ReportgenError(f"the trust certificate is not a PEM or DER X.509 "
                                 f"certificate: {error}") from None
        context = ValidationContext(trust_roots=roots, allow_fetching=False)
    if context is None:  # integrity only: no certificate is trusted, nothing is fetched
        context = ValidationContext(trust_roots=[], allow_fetching=False)
        trusting = False
    else:
        trusting = True
    reader = PdfFileReader(io.BytesIO(pdf), strict=False)
    states = []
    # pyHanko logs every certificate it cannot trust with a traceback; the outcome is
    # reported by the caller, so its log is quieted while validating.
    quiet = logging.getLogger("pyhanko")
    level = quiet.level
    quiet.setLevel(logging.CRITICAL)
    try:
        statuses = [(embedded, validate_pdf_signature(
            embedded, signer_validation_context=context, skip_diff=True))
            for embedded in reader.embedded_signatures]
    finally:
        quiet.setLevel(level)
    for embedded, status in statuses:
        whole = status.coverage == SignatureCoverageLevel.ENTIRE_FILE
        cert = status.signing_cert
        states.append(SignatureState(
            field=embedded.field_name,
            signer=_common_name(cert) if cert is not None else "?",
            intact=bool(status.intact and status.valid), covers_whole_file=whole,
            trusted=bool(status.trusted) if trusting else None,
            detail=status.summary()))
    return states
