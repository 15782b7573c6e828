"""report.pdf as an archive file: the requirements of PDF/A-3 (ISO 19005-3) checked on the
merged file, read back with pypdf, a reader independent of the pikepdf (qpdf) that wrote it.

No validator program is run: each test checks one structural requirement and is named
after the clause of ISO 19005-3 it stands for. Clause numbers and wordings marked
"verified, secondary" were read in a public list of the PDF/A-2 and -3 validation rules
that quotes the clauses (parts 2 and 3 share the numbering of these clauses); the others
are "from memory". The file is a tiny report rendered by the real engine, with an
internal link, an external link and attached files, so every kind of object the engine
writes is present.
"""
from __future__ import annotations

import io
import re
import xml.etree.ElementTree as ET
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import pytest
from pypdf import PdfReader
from pypdf.generic import (
    ArrayObject,
    ContentStream,
    DictionaryObject,
    IndirectObject,
    StreamObject,
)

from reportgen.errors import ReportgenError
from reportgen.pdf import stamp
from reportgen.pdf.archive import Attachment, read_archive, xmp_date
from reportgen.pdf.engine import render_pdf

CREATED = datetime(2030, 1, 15, 9, 30, tzinfo=timezone.utc)
TITLE = "Archive test report"
AUTHOR = "Example Installer (fictional)"
ATTACHMENTS = (
    Attachment("project/links.csv", b"link_id,fiber\nA-1,OM4\n", "text/csv", "Source",
               "input file"),
    Attachment("results.csv", b"link_id,verdict\nA-1,pass\n", "text/csv", "Data", "results"),
)
PAGE = ("<html><head><style>@page { size: A5; margin: 15mm } "
        "body { font-family: DejaVu Sans; font-size: 10pt }</style></head><body>%s</body></html>")


def front(page_of: object, total_pages: int) -> str:
    return (PAGE % '<h1>Cover</h1><p><a href="#sheet">to the sheet</a> '
                       '<a href="https://example.invalid/">outside</a></p>')


@pytest.fixture(scope="module")
def archive_pdf(tmp_path_factory: pytest.TempPathFactory) -> bytes:
    root = tmp_path_factory.mktemp("project")
    return render_pdf(front, [(PAGE % '<h2 id="sheet">Sheet</h2><p>body</p>')], root=root,
                      title=TITLE, created=CREATED, author=AUTHOR, attachments=ATTACHMENTS)


@pytest.fixture(scope="module")
def pdf(archive_pdf: bytes) -> PdfReader:
    return PdfReader(io.BytesIO(archive_pdf))


def all_objects(pdf: PdfReader) -> list[DictionaryObject]:
    """Every dictionary and stream reachable from the trailer (each indirect object once)."""
    seen: set[int] = set()
    found: list[DictionaryObject] = []
    stack: list[Any] = [pdf.trailer]
    while stack:
        obj = stack.pop()
        if isinstance(obj, IndirectObject):
            if obj.idnum in seen:
                continue
            seen.add(obj.idnum)
            obj = obj.get_object()
        if isinstance(obj, DictionaryObject):
            found.append(obj)
            stack += [obj.raw_get(key) for key in obj]
        elif isinstance(obj, ArrayObject):
            stack += list(obj.__iter__())
    return found


XMP_NAMESPACES = {  # XMP Part 1 and 2 (from memory); ISO 19005-3, 6.6.4 for pdfaid
    "pdfaid": "http://www.aiim.org/pdfa/ns/id/", "dc": "http://purl.org/dc/elements/1.1/",
    "xmp": "http://ns.adobe.com/xap/1.0/", "pdf": "http://ns.adobe.com/pdf/1.3/",
    "rdf": "http://www.w3.org/1999/02/22-rdf-syntax-ns#"}


def xmp(pdf: PdfReader, name: str) -> list[str]:
    """The texts of the XMP property ``name`` (prefix:local), element or attribute form,
    read with the standard library's XML parser; list items (rdf:li) in order."""
    data = pdf.trailer["/Root"]["/Metadata"].get_object().get_data()
    root = ET.fromstring(data.decode("utf-8").split("?>", 1)[-1].rsplit("<?xpacket", 1)[0])
    prefix, local = name.split(":")
    tag = "{%s}%s" % (XMP_NAMESPACES[prefix], local)
    found = []
    for element in root.iter():
        if tag in element.attrib:
            found.append(element.attrib[tag])
        if element.tag == tag:
            items = [item.text or "" for item in element.iter("{%s}li" % XMP_NAMESPACES["rdf"])]
            found += items or [(element.text or "").strip()]
    return found


def test_6_1_2_header_is_pdf_1_x_followed_by_a_binary_comment(archive_pdf: bytes) -> None:
    # ISO 19005-3, 6.1.2 (verified, secondary): "%PDF-1.n" with n in 0..7, then a comment
    # line whose first four bytes are above 127.
    first, second = archive_pdf.split(b"\n")[:2]
    assert first[:7] == b"%PDF-1." and first[7:8] in b"01234567" and len(first) == 8
    # ISO 19005-3, 1 (from memory): PDF/A-3 is based on ISO 32000-1, which is PDF 1.7
    assert first == b"%PDF-1.7"
    assert second[:1] == b"%" and all(byte > 127 for byte in second[1:5])


def test_6_1_3_trailer_has_a_file_identifier_and_no_encryption(pdf: PdfReader) -> None:
    # ISO 19005-3, 6.1.3 (verified, secondary): ID in the trailer; no Encrypt key.
    identifier = pdf.trailer.get("/ID")
    assert identifier is not None and len(identifier) == 2
    assert len(getattr(identifier[0], "original_bytes", identifier[0])) > 0
    assert "/Encrypt" not in pdf.trailer
    assert not pdf.is_encrypted


def test_6_6_xmp_metadata_identifies_pdfa_3u_with_title_author_dates(pdf: PdfReader) -> None:
    # ISO 19005-3, 6.6.2.1 (catalog Metadata stream) and 6.6.4 (pdfaid:part, pdfaid:conformance)
    # (from memory); the XMP values equal the document information (6.6.2.3, from memory).
    metadata = pdf.trailer["/Root"]["/Metadata"].get_object()
    assert metadata["/Type"] == "/Metadata" and metadata["/Subtype"] == "/XML"
    assert "/Filter" not in metadata   # ISO 19005-3, 6.6.2.1 (from memory): not compressed
    info = pdf.trailer["/Info"].get_object()
    assert xmp(pdf, "pdfaid:part") == ["3"]
    assert xmp(pdf, "pdfaid:conformance") == ["U"]
    assert xmp(pdf, "dc:title") == [TITLE] and str(info["/Title"]) == TITLE
    assert xmp(pdf, "dc:creator") == [AUTHOR] and str(info["/Author"]) == AUTHOR
    assert xmp(pdf, "xmp:CreateDate") == ["2030-01-15T09:30:00Z"]
    assert str(info["/CreationDate"]) == "D:20300115093000Z"
    assert xmp(pdf, "xmp:CreatorTool") == [str(info["/Creator"])]
    # producer and modification date are in the XMP packet only, so that the signature
    # (pyHanko rewrites both) leaves Info and XMP equal; tests/test_verify.py signs and checks
    assert xmp(pdf, "pdf:Producer")[0].startswith("WeasyPrint")
    assert xmp(pdf, "xmp:ModifyDate") == ["2030-01-15T09:30:00Z"]
    assert "/Producer" not in info and "/ModDate" not in info


def test_6_2_2_output_intent_is_srgb_with_an_embedded_icc_profile(pdf: PdfReader) -> None:
    # ISO 19005-3, 6.2.2 (from memory): a GTS_PDFA1 output intent with a DestOutputProfile.
    # ICC.1:2010, 7.2 (from memory): header bytes 16-19 the colour space ("RGB "), bytes
    # 36-39 the file signature "acsp"; N = 3 components for RGB (ISO 32000-1, 8.6.5.5).
    intents = pdf.trailer["/Root"]["/OutputIntents"]
    assert len(intents) == 1
    intent = intents[0].get_object()
    assert intent["/S"] == "/GTS_PDFA1"
    assert "sRGB" in str(intent["/OutputConditionIdentifier"])
    profile = intent["/DestOutputProfile"].get_object()
    assert int(profile["/N"]) == 3
    data = profile.get_data()
    assert data[16:20] == b"RGB " and data[36:40] == b"acsp"


def _font_file(font: DictionaryObject) -> bool:
    if font.get("/Subtype") == "/Type0":
        return all(_font_file(descendant.get_object())
                   for descendant in font["/DescendantFonts"])
    descriptor = font.get("/FontDescriptor")
    return descriptor is not None and any(
        key in descriptor for key in ("/FontFile", "/FontFile2", "/FontFile3"))


def test_6_2_11_4_every_font_is_embedded_the_page_stamp_included(pdf: PdfReader) -> None:
    # ISO 19005-3, 6.2.11.4.1 (from memory): the font programs of all fonts used shall be
    # embedded. Type 3 fonts are drawn by content streams and need none.
    fonts = [obj for obj in all_objects(pdf)
             if obj.get("/Type") == "/Font" and obj.get("/Subtype") != "/Type3"]
    assert len(fonts) >= 2
    assert any("DejaVuSans" in str(font["/BaseFont"]) and font["/Subtype"] == "/TrueType"
               for font in fonts)   # the page stamp's font
    top = fonts
    assert [str(font["/BaseFont"]) for font in top if not _font_file(font)] == []


def test_6_3_2_every_annotation_is_printed_and_not_hidden(pdf: PdfReader) -> None:
    # ISO 19005-3, 6.3.2 (verified, secondary): the F key's Print flag set; Hidden,
    # Invisible, ToggleNoView and NoView clear. ISO 32000-1, 12.5.3: Invisible 1,
    # Hidden 2, Print 4, NoView 32, ToggleNoView 256.
    annotations = [annotation.get_object() for page in pdf.pages
                   for annotation in page.get("/Annots", [])]
    assert {str(annotation["/Subtype"]) for annotation in annotations} == {"/Link"}
    assert len(annotations) == 2   # the internal and the external link
    for annotation in annotations:
        flags = int(annotation["/F"])
        assert flags & 4 and not flags & (1 | 2 | 32 | 256)


def test_6_8_embedded_files_are_associated_with_mime_type_date_and_relationship(
        pdf: PdfReader) -> None:
    # ISO 19005-3, 6.8 (verified, secondary): each embedded file stream has its MIME type as
    # Subtype, each file specification an AFRelationship, and each is associated with the
    # document (catalog AF). ModDate in Params (from memory: required by 6.8).
    specs = [reference.get_object() for reference in pdf.trailer["/Root"]["/AF"]]
    associated = {str(spec["/UF"]): spec for spec in specs}
    assert set(associated) == {"project/links.csv", "results.csv"}
    assert set(pdf.attachments) == set(associated)
    expected = {"project/links.csv": ("/Source", "/text/csv"), "results.csv": ("/Data", "/text/csv")}
    for name, spec in associated.items():
        stream = spec["/EF"]["/F"].get_object()
        assert (str(spec["/AFRelationship"]), str(stream["/Subtype"])) == expected[name]
        assert str(stream["/Params"]["/ModDate"]).startswith("D:20300115093000")
        assert "/Desc" in spec
    assert pdf.attachments["results.csv"] == [ATTACHMENTS[1].data]


def test_6_5_and_6_6_no_javascript_no_launch_no_external_file_references(
        pdf: PdfReader) -> None:
    # ISO 19005-3, 6.5.1 and 6.6.1 (from memory): no JavaScript, no Launch, ImportData or
    # ResetForm actions; 6.8 (from memory): a file specification refers to an embedded file.
    forbidden_actions = {"/JavaScript", "/Launch", "/ImportData", "/ResetForm", "/GoToR"}
    for obj in all_objects(pdf):
        assert "/JS" not in obj and "/JavaScript" not in obj
        assert str(obj.get("/S", "")) not in forbidden_actions
        if obj.get("/Type") == "/Filespec":
            assert "/EF" in obj
    root = pdf.trailer["/Root"]
    assert "/AA" not in root and "/OpenAction" not in root
    assert "/JavaScript" not in root.get("/Names", {})


def test_the_file_claims_level_u_and_not_a_because_it_has_no_structure_tree(
        pdf: PdfReader) -> None:
    # ISO 19005-3, 6.7 (from memory): level A needs a tagged file; ours is untagged, so the
    # XMP must not claim A. Level U (6.2.11.7.2): every font has a ToUnicode CMap (below).
    assert "/StructTreeRoot" not in pdf.trailer["/Root"]
    assert xmp(pdf, "pdfaid:conformance") == ["U"]


def _cmap(data: bytes) -> dict[int, str]:
    """A ToUnicode CMap's code -> text, from its bfchar and bfrange blocks (ISO 32000-1,
    9.10.3, from memory; destinations are UTF-16BE)."""
    found: dict[int, str] = {}
    for block in re.findall(rb"beginbfchar(.*?)endbfchar", data, re.S):
        for code, text in re.findall(rb"<([0-9A-Fa-f]+)>\s*<([0-9A-Fa-f]*)>", block):
            found[int(code, 16)] = bytes.fromhex(text.decode()).decode("utf-16-be")
    for block in re.findall(rb"beginbfrange(.*?)endbfrange", data, re.S):
        for low, high, target in re.findall(
                rb"<([0-9A-Fa-f]+)>\s*<([0-9A-Fa-f]+)>\s*(<[0-9A-Fa-f]*>|\[[^\]]*\])", block):
            low_code, high_code = int(low, 16), int(high, 16)
            if target.startswith(b"<"):
                first = bytes.fromhex(target[1:-1].decode()).decode("utf-16-be")
                for step, code in enumerate(range(low_code, high_code + 1)):
                    found[code] = first[:-1] + chr(ord(first[-1]) + step)
            else:
                for step, text in enumerate(re.findall(rb"<([0-9A-Fa-f]*)>", target)):
                    found[low_code + step] = bytes.fromhex(text.decode()).decode("utf-16-be")
    return found


def _original(string: Any) -> bytes:
    """The bytes of a string as written in the file (pypdf decodes text strings)."""
    return string.original_bytes if hasattr(string, "original_bytes") else bytes(string)


def _shown_texts(pdf: PdfReader) -> list[tuple[int, str, list[int], dict[int, str]]]:
    """Every string shown (Tj, TJ) on the pages and in their form XObjects: (page, font
    name, character codes, the font's ToUnicode map)."""
    shown: list[tuple[int, str, list[int], dict[int, str]]] = []
    maps: dict[int, dict[int, str]] = {}

    def walk(content: Any, resources: Any, number: int) -> None:
        resources = resources.get_object() if resources is not None else {}
        fonts = resources.get("/Font", {})
        forms = resources.get("/XObject", {})
        font_ref = None
        stream = content if isinstance(content, ContentStream) else ContentStream(content, pdf)
        for operands, operator in stream.operations:
            name = operator.decode("latin-1")
            if name == "Tf":
                font_ref = fonts.raw_get(operands[0]) if operands[0] in fonts else None
            elif name == "Do":
                form = forms[operands[0]].get_object() if operands[0] in forms else None
                if form is not None and form.get("/Subtype") == "/Form":
                    walk(form, form.get("/Resources"), number)
            elif name in ("Tj", "TJ") and font_ref is not None:
                font = font_ref.get_object()
                if font_ref.idnum not in maps:
                    maps[font_ref.idnum] = _cmap(font["/ToUnicode"].get_object().get_data())
                width = 2 if font["/Subtype"] == "/Type0" else 1  # Identity-H: 2-byte codes
                strings = [operands[0]] if name == "Tj" else [
                    item for item in operands[0] if isinstance(item, (str, bytes))]
                for string in strings:
                    raw = _original(string)
                    codes = [int.from_bytes(raw[i:i + width], "big")
                             for i in range(0, len(raw), width)]
                    shown.append((number, str(font["/BaseFont"]), codes, maps[font_ref.idnum]))

    for number, page in enumerate(pdf.pages, start=1):
        walk(page.get_contents(), page.get("/Resources"), number)   # all its streams, in order
    return shown


def test_6_2_11_7_2_every_font_has_a_tounicode_cmap_the_page_stamp_included(
        pdf: PdfReader) -> None:
    # ISO 19005-3, 6.2.11.7.2 (from memory): for level U, each font dictionary includes a
    # ToUnicode CMap (a CIDFont's is on its Type 0 parent, ISO 32000-1, 9.10.2).
    fonts = [obj for obj in all_objects(pdf)
             if obj.get("/Type") == "/Font" and obj.get("/Subtype") != "/CIDFontType2"]
    assert any(font["/Subtype"] == "/TrueType" for font in fonts)   # the page stamp's
    assert [str(font["/BaseFont"]) for font in fonts if "/ToUnicode" not in font] == []


def test_6_2_11_7_2_every_code_shown_maps_to_unicode(pdf: PdfReader) -> None:
    # ISO 19005-3, 6.2.11.7.2 (from memory): every character code used maps to a Unicode
    # value, and none to U+0000, U+FEFF or U+FFFE.
    shown = _shown_texts(pdf)
    assert len(shown) > 10
    bad = [(page, font, code, table.get(code)) for page, font, codes, table in shown
           for code in codes if table.get(code) in (None, "\x00", "\ufeff", "\ufffe")]
    assert bad == []


def test_a_font_without_tounicode_leaves_the_claim_at_level_b() -> None:
    # ISO 19005-3, 6.2.11.7.2 (from memory): one font without a Unicode map and the file
    # may claim level B only, never U.
    import pikepdf  # builds the input: the library the merge writes with

    from reportgen.pdf.archive import fonts_without_unicode, make_archival, save_options

    made = pikepdf.Pdf.new()
    made.add_blank_page(page_size=(200, 200))
    font = pikepdf.Dictionary(Type=pikepdf.Name.Font, Subtype=pikepdf.Name.TrueType,
                              BaseFont=pikepdf.Name("/NoMapFont"))
    made.pages[0].obj[pikepdf.Name.Resources] = pikepdf.Dictionary(
        Font=pikepdf.Dictionary(F1=font))
    assert fonts_without_unicode(made) == ["/NoMapFont"]
    make_archival(made, title="t", author="a", creator="c", producer="p", created=CREATED)
    buffer = io.BytesIO()
    made.save(buffer, **save_options())
    assert xmp(PdfReader(io.BytesIO(buffer.getvalue())), "pdfaid:conformance") == ["B"]


def test_the_page_stamp_reads_back_through_its_tounicode_cmap(pdf: PdfReader) -> None:
    # the render's page label is "Page {page} of {pages}" (render_pdf's default); the tiny
    # report has a cover and a sheet: 2 pages.
    for number in (1, 2):
        texts = ["".join(table[code] for code in codes)
                 for page, font, codes, table in _shown_texts(pdf)
                 if page == number and "DejaVuSans" in font and "+" in font]
        assert f"Page {number} of 2" in texts


def test_two_renders_with_attachments_are_byte_identical(archive_pdf: bytes,
                                                         tmp_path: Path) -> None:
    again = render_pdf(front, [(PAGE % '<h2 id="sheet">Sheet</h2><p>body</p>')],
                       root=tmp_path, title=TITLE, created=CREATED, author=AUTHOR,
                       attachments=ATTACHMENTS)
    assert again == archive_pdf


def test_read_archive_returns_the_files_relationships_and_page_texts(archive_pdf: bytes) -> None:
    contents = read_archive(archive_pdf)
    assert contents.files == {a.name: a.data for a in ATTACHMENTS}
    assert contents.relationships == {"project/links.csv": "Source", "results.csv": "Data"}
    assert contents.pdfa_part == "3"
    assert "Cover" in contents.page_texts[0] and "Page 2 of 2" in contents.page_texts[1]


def test_read_archive_refuses_what_is_not_a_pdf() -> None:
    with pytest.raises(ReportgenError, match="not a readable PDF"):
        read_archive(b"project_id,name\nthis is a CSV file\n")


def test_without_dejavu_sans_the_stamp_stops_with_the_package_to_install(
        monkeypatch: pytest.MonkeyPatch) -> None:
    # An unembedded standard font would break ISO 19005-3, 6.2.11.4.1: no fallback.
    monkeypatch.setattr(stamp, "find_dejavu_sans", lambda: None)
    import pikepdf
    with pytest.raises(ReportgenError, match="fonts-dejavu-core"):
        stamp.make_stamp_font(pikepdf.Pdf.new(), ["Page 1 of 1"])


@pytest.mark.parametrize(("moment", "expected"), [
    # ISO 8601 extended format with a UTC designator or offset (XMP Part 1, 8.2.1.6 Date,
    # from memory)
    (datetime(2030, 1, 15, 9, 30, tzinfo=timezone.utc), "2030-01-15T09:30:00Z"),
    (datetime(2030, 1, 15, 9, 30), "2030-01-15T09:30:00"),
])
def test_xmp_date(moment: datetime, expected: str) -> None:
    assert xmp_date(moment) == expected


def test_attachment_relationship_is_source_or_data() -> None:
    with pytest.raises(ValueError, match="relationship"):
        Attachment("x.csv", b"", "text/csv", "Alternative", "x")


@pytest.mark.parametrize("xmp", [
    # RDF 1.1 XML Syntax, 2.2 (property elements) and 2.5 (property attributes), from memory:
    # the same property written as an element or as an attribute of rdf:Description.
    b'<?xpacket begin="" id="W5M0MpCehiHzreSzNTczkc9d"?><x:xmpmeta xmlns:x="adobe:ns:meta/">'
    b'<rdf:RDF xmlns:rdf="http://www.w3.org/1999/02/22-rdf-syntax-ns#"><rdf:Description '
    b'xmlns:pdfaid="http://www.aiim.org/pdfa/ns/id/"><pdfaid:part>3</pdfaid:part>'
    b'</rdf:Description></rdf:RDF></x:xmpmeta><?xpacket end="w"?>',
    b'<x:xmpmeta xmlns:x="adobe:ns:meta/"><rdf:RDF '
    b'xmlns:rdf="http://www.w3.org/1999/02/22-rdf-syntax-ns#"><rdf:Description '
    b'xmlns:pdfaid="http://www.aiim.org/pdfa/ns/id/" pdfaid:part="3"/></rdf:RDF></x:xmpmeta>',
])
def test_pdfa_part_is_read_in_element_and_attribute_form(xmp: bytes) -> None:
    from reportgen.pdf.archive import pdfa_part
    assert pdfa_part(xmp) == "3"
