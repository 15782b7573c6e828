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
- a file identifier in the trailer (6.1.3), derived from the content when the file is
  saved (:func:`save_options`);
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
tagging is optional (:mod:`reportgen.pdf.tags`).

The merged file is built and written with pikepdf (qpdf), documented API only.
:func:`read_archive` returns the embedded files and the text of each page, for
``reportgen verify``; it reads with pypdf, which extracts text (pikepdf does not).
"""

from __future__ import annotations

import io
import logging
import xml.etree.ElementTree as ET
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime, timezone
from typing import Final
from xml.sax.saxutils import escape

from pikepdf import (
    Array,
    AttachedFileSpec,
    Dictionary,
    Name,
    Object,
    ObjectStreamMode,
    Pdf,
    Stream,
    String,
)
from pypdf import PdfReader
from pypdf.errors import PdfReadError

from reportgen.errors import ReportgenError
from reportgen.pdf.weasy import srgb_icc_profile

LOGGER: Final = logging.getLogger(__name__)
PDFA_PART: Final = 3
PDF_VERSION: Final = "1.7"
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


def pdf_date(moment: datetime) -> str:
    """Format ``moment`` as a PDF date string (ISO 32000-1, 7.9.4), e.g. D:20300115093000Z."""
    text = moment.strftime("D:%Y%m%d%H%M%S")
    offset = moment.utcoffset()
    if offset is None:
        return text
    minutes = int(offset.total_seconds() // 60)
    if minutes == 0:
        return text + "Z"
    sign = "+" if minutes > 0 else "-"
    return text + f"{sign}{abs(minutes) // 60:02d}'{abs(minutes) % 60:02d}'"


def _output_intent(pdf: Pdf) -> Dictionary:
    profile = pdf.make_stream(srgb_icc_profile(), N=3)  # compressed when the file is saved
    return Dictionary(
        Type=Name.OutputIntent,
        S=Name.GTS_PDFA1,
        OutputConditionIdentifier=String(OUTPUT_CONDITION),
        Info=String(OUTPUT_CONDITION),
        DestOutputProfile=profile,
    )


def _printable_annotations(pdf: Pdf) -> None:
    for page in pdf.pages:
        annotations = page.obj.get("/Annots")
        if annotations is None:
            continue
        for annotation in annotations:
            flags = int(annotation.get("/F", 0))
            annotation[Name.F] = (flags | ANNOTATION_PRINT) & ~ANNOTATION_FORBIDDEN


def _attach(pdf: Pdf, attachments: Sequence[Attachment], modified: datetime) -> None:
    references = []
    for attachment in sorted(attachments, key=lambda item: item.name):
        spec = AttachedFileSpec(
            pdf, attachment.data, description=attachment.description,
            filename=attachment.name, mime_type=attachment.mime, mod_date=pdf_date(modified),
            relationship=Name("/" + attachment.relationship))
        pdf.attachments[attachment.name] = spec
        references.append(spec.obj)
    if references:
        pdf.Root[Name.AF] = Array(references)


def _first_visit(obj: Object, seen: set[tuple[int, int]]) -> bool:
    """Whether ``obj`` is met for the first time (an indirect object is visited once; a
    direct one, which only its container holds, every time its container is)."""
    if not obj.is_indirect:
        return True
    if obj.objgen in seen:
        return False
    seen.add(obj.objgen)
    return True


def _resources_fonts(resources: Object | None, seen: set[tuple[int, int]],
                     found: list[Object]) -> None:
    """The font dictionaries of ``resources``, and of its form XObjects, patterns and Type 3
    fonts, appended to ``found`` (each indirect object once)."""
    if not isinstance(resources, Dictionary) or not _first_visit(resources, seen):
        return   # a part's pages and forms share resource dictionaries: each is read once
    fonts = resources.get("/Font")
    if not isinstance(fonts, Dictionary) or not _first_visit(fonts, seen):
        fonts = None
    for font in (fonts.values() if fonts is not None else ()):
        if isinstance(font, Dictionary) and _first_visit(font, seen):
            found.append(font)
            _resources_fonts(font.get("/Resources"), seen, found)   # a Type 3 font's glyphs
    for key in ("/XObject", "/Pattern"):
        entries = resources.get(key)
        for item in (entries.values() if isinstance(entries, Dictionary) else ()):
            if isinstance(item, (Dictionary, Stream)) and _first_visit(item, seen):
                _resources_fonts(item.get("/Resources"), seen, found)


def fonts_without_unicode(pdf: Pdf) -> list[str]:
    """The names of the fonts used on the pages (content, form XObjects, patterns, annotation
    appearances) whose dictionary has no ``/ToUnicode`` CMap; [] when every font has one.

    A CIDFont is reached only as the descendant of a Type 0 font, whose dictionary carries
    the CMap, so it is not listed.
    """
    seen: set[tuple[int, int]] = set()
    fonts: list[Object] = []
    for page in pdf.pages:
        page = page.obj
        _resources_fonts(page.get("/Resources"), seen, fonts)
        for annotation in page.get("/Annots") or ():
            appearance = annotation.get("/AP")
            for stream in (appearance.values() if isinstance(appearance, Dictionary) else ()):
                streams = stream.values() if isinstance(stream, Dictionary) else [stream]
                for item in streams:
                    if isinstance(item, Stream):
                        _resources_fonts(item.get("/Resources"), seen, fonts)
    return sorted({str(font.get("/BaseFont", font.get("/Name", "?"))) for font in fonts
                   if "/ToUnicode" not in font})


def make_archival(pdf: Pdf, *, title: str, author: str, creator: str, producer: str,
                  created: datetime, attachments: Sequence[Attachment] = (),
                  language: str = "en") -> None:
    """Add what PDF/A-3 asks of the merged file (see the module docstring) to ``pdf``.

    Call it after the pages, links, outline and document information are in place. The
    file identifier (6.1.3) is written when the file is saved: ``Pdf.save`` with
    ``deterministic_id=True`` derives it from the content (:func:`save_options`).
    """
    lacking = fonts_without_unicode(pdf)
    if lacking:  # level B still holds; level U would need a ToUnicode CMap in each
        LOGGER.info("PDF/A-3 level B only: no ToUnicode CMap in font(s) %s", ", ".join(lacking))
    xmp = pdf.make_stream(
        xmp_packet(title=title, author=author, creator=creator, producer=producer,
                   created=created, language=language,
                   conformance=PDFA_BASIC if lacking else PDFA_UNICODE),
        Type=Name.Metadata, Subtype=Name.XML)
    root = pdf.Root
    root[Name.Metadata] = xmp
    root[Name.OutputIntents] = Array([pdf.make_indirect(_output_intent(pdf))])
    if author:
        pdf.docinfo[Name.Author] = String(author)
    _printable_annotations(pdf)
    _attach(pdf, attachments, created.astimezone(timezone.utc) if created.tzinfo else created)


def save_options(compact: bool = True) -> dict[str, object]:
    """How the archive file is saved (``Pdf.save`` keywords): a file identifier derived from
    the content, so builds stay byte-identical (6.1.3 asks for one); PDF 1.7; the XMP
    packet left as it is (never compressed, qpdf's rule); with ``compact``, objects packed
    into object streams (about a quarter smaller)."""
    return {"deterministic_id": True, "fix_metadata_version": False, "preserve_pdfa": True,
            "compress_streams": True,
            # PDF/A-3 is based on ISO 32000-1 (PDF 1.7), as are WeasyPrint's parts; qpdf
            # would otherwise write the lowest version its objects need (1.5)
            "min_version": PDF_VERSION,
            "object_stream_mode": ObjectStreamMode.generate if compact
            else ObjectStreamMode.disable}


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
        for reference in root.get("/AF", []):
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
