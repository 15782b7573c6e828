"""Make the merged report an archive file (PDF/A-3u, or 3b) and read such a file back.

:func:`make_archival` runs after the merge (:func:`reportgen.pdf.merge.finish_pdf`),
on the whole file, so the merged report conforms and not only the WeasyPrint parts:

- XMP metadata (ISO 19005-3, 6.6): the PDF/A identification (part 3, conformance U or B),
  title, author, creator tool and creation date of the document information dictionary,
  the producer and modification date (in XMP only: see :mod:`reportgen.pdf.sign`), all
  from the build's inputs and date (no clock);
- an sRGB output intent (6.2.3), with the ICC profile WeasyPrint ships
  (:func:`reportgen.pdf.weasy.srgb_icc_profile`);
- every annotation printable and not hidden (6.3.2);
- a file identifier in the trailer (6.1.3), derived from the content;
- associated files (6.8): each :class:`Attachment` is embedded with its MIME type,
  modification date (the build date, so two builds stay byte-identical),
  ``AFRelationship`` and a description, listed in the catalog's ``/AF`` array and
  in the ``/EmbeddedFiles`` name tree.

Fonts: WeasyPrint embeds every font it uses; the page-number stamp embeds a DejaVu
Sans subset and refuses to run without it (:mod:`reportgen.pdf.stamp`). No JavaScript,
encryption, external content or forms are written by any step.

Level: U (ISO 19005-3, 6.2.11.7.2: every font maps its character codes to Unicode)
when every font used has a ToUnicode CMap (:func:`fonts_without_unicode`; WeasyPrint
writes one for each of its fonts, the page stamp one for its font), else B, and the
names of the fonts without one are logged. Never level A: that needs a tagged PDF, and
the parts are rendered untagged (pypdf would not carry a structure tree through the
merge).

:func:`read_archive` returns the embedded files and the text of each page, for
``reportgen verify``. Only documented pypdf API is used, except the two helpers of
:mod:`reportgen.pdf.pypdf_access` named where they are called.
"""

from __future__ import annotations

import hashlib
import io
import logging
import xml.etree.ElementTree as ET
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime, timezone
from typing import Final
from xml.sax.saxutils import escape

from pypdf import PdfReader, PdfWriter
from pypdf.errors import PdfReadError
from pypdf.generic import (
    ArrayObject,
    DecodedStreamObject,
    DictionaryObject,
    NameObject,
    NumberObject,
    TextStringObject,
)

from reportgen.errors import ReportgenError
from reportgen.pdf.pypdf_access import add_indirect, set_file_identifier
from reportgen.pdf.weasy import srgb_icc_profile

LOGGER: Final = logging.getLogger(__name__)
PDFA_PART: Final = 3
PDFA_UNICODE: Final = "U"   # level U: level B, and every font maps its codes to Unicode
PDFA_BASIC: Final = "B"
OUTPUT_CONDITION: Final = "sRGB IEC61966-2.1"
RELATIONSHIPS: Final = ("Source", "Data")
PDFAID_PART: Final = "{http://www.aiim.org/pdfa/ns/id/}part"
ANNOTATION_PRINT: Final = 4          # ISO 32000-1, 12.5.3: bit 3 (Print)
ANNOTATION_FORBIDDEN: Final = 1 | 2 | 32 | 256  # Invisible, Hidden, NoView, ToggleNoView


@dataclass(frozen=True)
class Attachment:
    """A file embedded in the report as an associated file of the document."""

    name: str            # shown by PDF readers; "/" separates folders
    data: bytes
    mime: str            # e.g. "text/csv"
    relationship: str    # "Source" (an input) or "Data" (an output derived from them)
    description: str

    def __post_init__(self) -> None:
        if self.relationship not in RELATIONSHIPS:
            raise ValueError(f"relationship must be one of {RELATIONSHIPS}, "
                             f"not {self.relationship!r}")


def xmp_date(moment: datetime) -> str:
    """``moment`` as an XMP date (ISO 8601 with the offset), e.g. 2030-01-15T09:30:00Z."""
    if moment.tzinfo is None:
        return moment.strftime("%Y-%m-%dT%H:%M:%S")
    text = moment.isoformat(timespec="seconds")
    return text.removesuffix("+00:00") + "Z" if text.endswith("+00:00") else text


def xmp_packet(*, title: str, author: str, creator: str, producer: str,
               created: datetime, conformance: str = PDFA_BASIC, language: str = "en") -> bytes:
    """The XMP metadata packet: PDF/A identification, Dublin Core title/creator/language,
    dates."""
    date = xmp_date(created)
    author_line = (f"<dc:creator><rdf:Seq><rdf:li>{escape(author)}</rdf:li></rdf:Seq>"
                   "</dc:creator>\n" if author else "")
    text = (
        '<?xpacket begin="\ufeff" id="W5M0MpCehiHzreSzNTczkc9d"?>\n'
        '<x:xmpmeta xmlns:x="adobe:ns:meta/">\n'
        '<rdf:RDF xmlns:rdf="http://www.w3.org/1999/02/22-rdf-syntax-ns#">\n'
        '<rdf:Description rdf:about=""'
        ' xmlns:pdfaid="http://www.aiim.org/pdfa/ns/id/"'
        ' xmlns:dc="http://purl.org/dc/elements/1.1/"'
        ' xmlns:xmp="http://ns.adobe.com/xap/1.0/"'
        ' xmlns:pdf="http://ns.adobe.com/pdf/1.3/">\n'
        f"<pdfaid:part>{PDFA_PART}</pdfaid:part>\n"
        f"<pdfaid:conformance>{conformance}</pdfaid:conformance>\n"
        "<dc:format>application/pdf</dc:format>\n"
        f'<dc:title><rdf:Alt><rdf:li xml:lang="x-default">{escape(title)}</rdf:li>'
        "</rdf:Alt></dc:title>\n"
        f"{author_line}"
        f"<dc:language><rdf:Bag><rdf:li>{escape(language)}</rdf:li></rdf:Bag></dc:language>\n"
        f"<xmp:CreateDate>{date}</xmp:CreateDate>\n"
        f"<xmp:ModifyDate>{date}</xmp:ModifyDate>\n"
        f"<xmp:MetadataDate>{date}</xmp:MetadataDate>\n"
        f"<xmp:CreatorTool>{escape(creator)}</xmp:CreatorTool>\n"
        f"<pdf:Producer>{escape(producer)}</pdf:Producer>\n"
        "</rdf:Description>\n</rdf:RDF>\n</x:xmpmeta>\n"
        '<?xpacket end="w"?>'
    )
    return text.encode("utf-8")


def _output_intent(writer: PdfWriter) -> DictionaryObject:
    profile = DecodedStreamObject()
    profile.set_data(srgb_icc_profile())
    profile = profile.flate_encode()
    profile[NameObject("/N")] = NumberObject(3)
    return DictionaryObject({
        NameObject("/Type"): NameObject("/OutputIntent"),
        NameObject("/S"): NameObject("/GTS_PDFA1"),
        NameObject("/OutputConditionIdentifier"): TextStringObject(OUTPUT_CONDITION),
        NameObject("/Info"): TextStringObject(OUTPUT_CONDITION),
        NameObject("/DestOutputProfile"): add_indirect(writer, profile),
    })


def _printable_annotations(writer: PdfWriter) -> None:
    for page in writer.pages:
        annotations = page.get("/Annots")
        if annotations is None:
            continue
        for reference in annotations.get_object():
            annotation = reference.get_object()
            flags = int(annotation.get("/F", 0))
            annotation[NameObject("/F")] = NumberObject(
                (flags | ANNOTATION_PRINT) & ~ANNOTATION_FORBIDDEN)


def _attach(writer: PdfWriter, attachments: Sequence[Attachment], modified: datetime) -> None:
    references = []
    for attachment in sorted(attachments, key=lambda item: item.name):
        embedded = writer.add_attachment(attachment.name, attachment.data)
        embedded.subtype = NameObject("/" + attachment.mime)
        embedded.alternative_name = TextStringObject(attachment.name)
        embedded.description = TextStringObject(attachment.description)
        embedded.associated_file_relationship = NameObject("/" + attachment.relationship)
        embedded.modification_date = modified
        embedded.size = NumberObject(len(attachment.data))
        references.append(embedded.pdf_object.indirect_reference)
    if references:
        writer.root_object[NameObject("/AF")] = ArrayObject(references)


def _resources_fonts(resources: object, seen: set[int], found: list[DictionaryObject]) -> None:
    """The font dictionaries of ``resources``, and of its form XObjects, patterns and Type 3
    fonts, appended to ``found`` (each object once)."""
    resources = resources.get_object() if resources is not None else None
    if not isinstance(resources, DictionaryObject):
        return
    fonts = resources.get("/Font")
    for font in (fonts.get_object().values() if fonts is not None else ()):
        font = font.get_object()
        if id(font) in seen or not isinstance(font, DictionaryObject):
            continue
        seen.add(id(font))
        found.append(font)
        _resources_fonts(font.get("/Resources"), seen, found)   # a Type 3 font's glyphs
    for key in ("/XObject", "/Pattern"):
        entries = resources.get(key)
        for item in (entries.get_object().values() if entries is not None else ()):
            item = item.get_object()
            if id(item) not in seen and isinstance(item, DictionaryObject):
                seen.add(id(item))
                _resources_fonts(item.get("/Resources"), seen, found)


def fonts_without_unicode(writer: PdfWriter) -> list[str]:
    """The names of the fonts used on the pages (content, form XObjects, patterns, annotation
    appearances) whose dictionary has no ``/ToUnicode`` CMap; [] when every font has one.

    A CIDFont is reached only as the descendant of a Type 0 font, whose dictionary carries
    the CMap, so it is not listed.
    """
    seen: set[int] = set()
    fonts: list[DictionaryObject] = []
    for page in writer.pages:
        _resources_fonts(page.get("/Resources"), seen, fonts)
        for annotation in page.get("/Annots") or ():
            appearance = annotation.get_object().get("/AP")
            for stream in (appearance.get_object().values() if appearance is not None else ()):
                stream = stream.get_object()
                streams = stream.values() if not hasattr(stream, "get_data") else [stream]
                for item in streams:
                    _resources_fonts(item.get_object().get("/Resources"), seen, fonts)
    return sorted({str(font.get("/BaseFont", font.get("/Name", "?"))) for font in fonts
                   if "/ToUnicode" not in font})


def make_archival(writer: PdfWriter, *, title: str, author: str, creator: str, producer: str,
                  created: datetime, attachments: Sequence[Attachment] = (),
                  language: str = "en") -> None:
    """Add what PDF/A-3 asks of the merged file (see the module docstring) to ``writer``.

    Call it after the pages, links, outline and document information are in place.
    """
    lacking = fonts_without_unicode(writer)
    if lacking:  # level B still holds; level U would need a ToUnicode CMap in each
        LOGGER.info("PDF/A-3 level B only: no ToUnicode CMap in font(s) %s", ", ".join(lacking))
    xmp = DecodedStreamObject()
    xmp.set_data(xmp_packet(title=title, author=author, creator=creator, producer=producer,
                            created=created, language=language,
                            conformance=PDFA_BASIC if lacking else PDFA_UNICODE))
    xmp[NameObject("/Type")] = NameObject("/Metadata")
    xmp[NameObject("/Subtype")] = NameObject("/XML")
    root = writer.root_object
    root[NameObject("/Metadata")] = add_indirect(writer, xmp)
    root[NameObject("/OutputIntents")] = ArrayObject([add_indirect(writer, _output_intent(writer))])
    if author:
        writer.add_metadata({"/Author": TextStringObject(author)})
    _printable_annotations(writer)
    _attach(writer, attachments, created.astimezone(timezone.utc) if created.tzinfo else created)
    identity = hashlib.sha256()
    for part in (title, author, xmp_date(created), str(len(writer.pages))):
        identity.update(part.encode("utf-8") + b"\0")
    for attachment in sorted(attachments, key=lambda item: item.name):
        identity.update(attachment.name.encode("utf-8") + hashlib.sha256(attachment.data).digest())
    set_file_identifier(writer, identity.digest()[:16])


@dataclass(frozen=True)
class ArchiveContents:
    """What ``reportgen verify`` reads from a report: embedded files and page texts."""

    files: dict[str, bytes]
    relationships: dict[str, str]
    page_texts: tuple[str, ...]
    pdfa_part: str | None


def pdfa_part(xmp: bytes) -> str | None:
    """The ``pdfaid:part`` of an XMP packet, as an element or an attribute, or None.

    Both forms are valid XMP; pyHanko rewrites ours in the attribute form when it signs.
    """
    try:
        root = ET.fromstring(xmp.decode("utf-8", "replace").split("?>", 1)[-1]
                             .rsplit("<?xpacket", 1)[0])
    except ET.ParseError:
        return None
    for element in root.iter():
        if element.tag == PDFAID_PART and element.text:
            return element.text.strip()
        if PDFAID_PART in element.attrib:
            return element.attrib[PDFAID_PART].strip()
    return None


def read_archive(pdf: bytes) -> ArchiveContents:
    """Read the embedded files (by name) and the text of every page of ``pdf``.

    Raises :class:`~reportgen.errors.ReportgenError` when ``pdf`` is not a readable PDF.
    """
    try:
        reader = PdfReader(io.BytesIO(pdf), strict=False)
        files: dict[str, bytes] = {}
        relationships: dict[str, str] = {}
        for name, contents in reader.attachments.items():
            files[name] = contents[0]
        root = reader.trailer["/Root"].get_object()
        for reference in root.get("/AF", ArrayObject()):
            spec = reference.get_object()
            name = str(spec.get("/UF", spec.get("/F", "")))
            relationships[name] = str(spec.get("/AFRelationship", "")).lstrip("/")
        texts = tuple(page.extract_text() or "" for page in reader.pages)
        part = None
        metadata = reader.xmp_metadata
        if metadata is not None:
            part = pdfa_part(metadata.stream.get_data())
    except (PdfReadError, ValueError, KeyError, OSError) as error:
        raise ReportgenError(f"not a readable PDF file: {error}") from error
    return ArchiveContents(files, relationships, texts, part)
