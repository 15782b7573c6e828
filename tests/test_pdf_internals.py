"""Every WeasyPrint and pikepdf internal the PDF engine relies on, one test per listed use.

reportgen/pdf/weasy.py (WeasyPrint, uses 1 to 8) and reportgen/pdf/pikepdf_access.py
(pikepdf, uses 1 and 2) list what they rely on beyond the libraries' documented API. Each
test here checks one of those uses on a tiny document and, when a new release changed
it, fails with a message naming the use, the reportgen function that depends on it and
what to look at. Run this file first when raising a bound in pyproject.toml.

Expected places and sizes come from CSS, not from our code: CSS Values and Units 4,
5.2 (1in = 96px = 25.4mm = 72pt) and CSS Color 4, 5.1 (rgb() channels 0..255).
"""
from __future__ import annotations

import gc
import io
from pathlib import Path
from typing import Any

import pikepdf
import pytest
import weasyprint
from pypdf import PdfReader
from weasyprint import HTML

from reportgen.pdf import weasy
from reportgen.pdf.fetcher import make_url_fetcher, root_url
from reportgen.pdf.pikepdf_access import add_page_copies, open_part

PX_PER_MM = 96 / 25.4       # CSS Values 4, 5.2: 1in = 96px = 25.4mm
PX_PER_PT = 96 / 72         # CSS Values 4, 5.2: 1in = 96px = 72pt
LEFT_PX, TOP_PX = 5 * PX_PER_MM, 10 * PX_PER_MM     # the @page margins below
RIGHT_PX, BOTTOM_PX = 20 * PX_PER_MM, 30 * PX_PER_MM
PAGE_PX = 100 * PX_PER_MM
TINY = """<html><head><title>tiny</title><style>
@page { size: 100mm 100mm; margin: 10mm 20mm 30mm 5mm }
body { margin: 0; font-family: DejaVu Sans; font-size: 12pt }
h1 { margin: 0; font-size: 12pt }
a.slot { display: block; width: 96px; height: 48px; color: rgb(255, 0, 0) }
#spot { margin: 0; width: 48px; height: 24px }
</style></head><body>
<a class="slot page-slot" href="#spot"></a>
<div id="spot"></div>
<h1>Heading</h1>
<p><a href="https://example.invalid/">outside</a></p>
</body></html>"""
# The link is the first block: its border box is 96 x 48 px at the page's content corner.
LINK_RECT_PX = (LEFT_PX, TOP_PX, LEFT_PX + 96, TOP_PX + 48)
# The anchor (48 x 24 px) comes right below it.
SPOT_RECT_PX = (LEFT_PX, TOP_PX + 48, LEFT_PX + 48, TOP_PX + 48 + 24)


def changed(library: str, use: str, function: str, check: str) -> str:
    version = (f"WeasyPrint {weasyprint.__version__}" if library == "weasyprint"
               else f"pikepdf {pikepdf.__version__} (qpdf {pikepdf.__libqpdf_version__})")
    module = "weasy" if library == "weasyprint" else "pikepdf_access"
    return (f"{version} changed {use}, which reportgen.pdf.{module}.{function} relies on "
            f"(listed in that module's docstring). {check}")


def source(root: Path) -> HTML:
    return HTML(string=TINY, base_url=root_url(root), url_fetcher=make_url_fetcher(root))


@pytest.fixture(scope="module")
def page(tmp_path_factory: pytest.TempPathFactory) -> Any:
    document = source(tmp_path_factory.mktemp("root")).render()
    assert len(document.pages) == 1, "the tiny document must fit one page"
    return document.pages[0]


def the_internal_link(page: Any) -> tuple[Any, ...]:
    found = [link for link in page.links if isinstance(link, tuple) and link[:1] == ("internal",)]
    assert len(found) == 1, changed(
        "weasyprint", "Page.links (no ('internal', ...) item for <a href='#spot'>)",
        "internal_links", "Check how weasyprint/anchors.py gather_anchors records links.")
    return found[0]


# WeasyPrint, use 1: Page._page_box and its used margins.

def test_weasyprint_page_box_gives_the_used_margins(page: Any) -> None:
    assert hasattr(page, "_page_box"), changed(
        "weasyprint", "Page._page_box (gone)", "used_margins_px",
        "Find where Page keeps its page box (weasyprint/document.py, Page.__init__) or a "
        "public way to read the page's used margins.")
    box = page._page_box
    assert isinstance(getattr(box, "margin_right", None), (int, float)) and isinstance(
        getattr(box, "margin_bottom", None), (int, float)), changed(
        "weasyprint", "the page box's margin_right/margin_bottom (not numbers)",
        "used_margins_px", "Check weasyprint/formatting_structure/boxes.py for the used margins.")
    # @page margin: 10mm 20mm 30mm 5mm (right 20 mm, bottom 30 mm), in CSS px
    assert weasy.used_margins_px(page) == pytest.approx((RIGHT_PX, BOTTOM_PX)), changed(
        "weasyprint", "the page box's margins (not the @page margins in CSS px)",
        "used_margins_px", "Check the unit of Box.margin_right and margin_bottom.")


# WeasyPrint, use 2: the shape of Page.links items.

def test_weasyprint_links_are_type_target_corners_box(page: Any) -> None:
    link = the_internal_link(page)
    assert len(link) == 4 and link[1] == "spot" and len(link[2]) == 4, changed(
        "weasyprint", f"the items of Page.links (expected (type, target, rect, box), got {link!r})",
        "internal_links", "Check gather_anchors in weasyprint/anchors.py.")
    # The rectangle holds two corners (x1, y1, x2, y2), not (x, y, width, height).
    assert tuple(link[2]) == pytest.approx(LINK_RECT_PX), changed(
        "weasyprint", f"the rectangle of Page.links items (expected the corners "
        f"{LINK_RECT_PX}, got {link[2]})", "internal_links",
        "Check rectangle_aabb in weasyprint/anchors.py.")
    targets = [(target, rect) for target, rect, _box in weasy.internal_links(page)]
    assert targets == [("spot", pytest.approx(LINK_RECT_PX))]


# WeasyPrint, use 3: the shape of Page.anchors values.

def test_weasyprint_anchors_are_corners(page: Any) -> None:
    assert "spot" in page.anchors, changed(
        "weasyprint", "Page.anchors (no entry for id='spot')", "anchor_corners",
        "Check gather_anchors in weasyprint/anchors.py.")
    corners = page.anchors["spot"]
    assert len(corners) == 4 and tuple(corners) == pytest.approx(SPOT_RECT_PX), changed(
        "weasyprint", f"the values of Page.anchors (expected the corners {SPOT_RECT_PX}, "
        f"got {corners!r})", "anchor_corners", "Check gather_anchors in weasyprint/anchors.py.")
    assert list(weasy.anchor_corners(page)) == [
        ("spot", pytest.approx(SPOT_RECT_PX[0]), pytest.approx(SPOT_RECT_PX[1]))]


# WeasyPrint, use 4: a link's layout box (element, tag, colour, font size).

def test_weasyprint_link_box_gives_element_tag_colour_and_size(page: Any) -> None:
    box = the_internal_link(page)[3]
    element = getattr(box, "element", None)
    assert element is not None and callable(getattr(element, "get", None)), changed(
        "weasyprint", "Box.element (missing, or not an element with .get)",
        "box_tag_and_classes", "Check weasyprint/formatting_structure/boxes.py.")
    assert getattr(box, "element_tag", None) == "a", changed(
        "weasyprint", f"Box.element_tag (expected 'a', got {getattr(box, 'element_tag', None)!r})",
        "box_tag_and_classes", "Check weasyprint/formatting_structure/boxes.py.")
    try:
        coordinates = tuple(box.style["color"].to("srgb").coordinates)
        font_size = box.style["font_size"]
    except (AttributeError, KeyError, TypeError) as error:
        pytest.fail(changed(
            "weasyprint", f"Box.style['color'].to('srgb').coordinates or Box.style['font_size'] "
            f"({type(error).__name__}: {error})", "box_color_and_size",
            "Check the computed colour and font size in weasyprint/css/computed_values.py."))
    # CSS Color 4, 5.1: rgb(255, 0, 0) is sRGB (1, 0, 0); CSS Values 4, 5.2: 12pt = 16px
    assert coordinates == pytest.approx((1.0, 0.0, 0.0)) and font_size == pytest.approx(
        12 * PX_PER_PT), changed(
        "weasyprint", f"the computed colour or font size (got {coordinates}, {font_size})",
        "box_color_and_size", "Check their units in weasyprint/css/computed_values.py.")
    assert weasy.box_tag_and_classes(box) == ("a", ["slot", "page-slot"])
    assert weasy.box_color_and_size(box) == ((1.0, 0.0, 0.0), pytest.approx(16.0))


# WeasyPrint, use 5: Document.write_pdf writes what Page.links/anchors/bookmarks hold.

def marks(pdf: bytes) -> dict[str, object]:
    reader = PdfReader(io.BytesIO(pdf))
    annotations = [annotation.get_object() for page in reader.pages
                   for annotation in page.get("/Annots", [])]
    internal = [a for a in annotations if "/Dest" in a or (
        "/A" in a and a["/A"].get("/S") == "/GoTo")]
    external = [a for a in annotations if "/A" in a and a["/A"].get("/S") == "/URI"]
    return {"internal links": len(internal), "external links": len(external),
            "named destinations": sorted(reader.named_destinations),
            "outline": len(reader.outline)}


def test_weasyprint_writes_the_edited_page_lists(tmp_path: Path) -> None:
    document = source(tmp_path).render()
    before = marks(document.write_pdf())
    # What WeasyPrint writes by itself: the link, the anchor, the <h1>'s bookmark, the URI.
    assert before == {"internal links": 1, "external links": 1,
                      "named destinations": ["spot"], "outline": 1}, changed(
        "weasyprint", f"what write_pdf makes of a page's links, anchors and bookmarks "
        f"(got {before})", "drop_cross_part_marks", "Check weasyprint/pdf/anchors.py.")
    for page in document.pages:
        weasy.drop_cross_part_marks(page)
    after = marks(document.write_pdf())
    assert after == {"internal links": 0, "external links": 1,
                     "named destinations": [], "outline": 0}, changed(
        "weasyprint", f"whether write_pdf reads Page.links, Page.anchors and Page.bookmarks "
        f"(after emptying them it still wrote {after})", "drop_cross_part_marks",
        "Find where weasyprint/pdf/__init__.py generate_pdf takes links, anchors and the "
        "outline from, and empty that instead.")


# WeasyPrint, use 6: what HTML.__init__ sets (and HTML.render reads).

def test_weasyprint_html_sets_what_html_from_tree_sets(tmp_path: Path) -> None:
    plain = source(tmp_path)
    tree = weasy.parse_xml(TINY)
    assert tree is not None
    ours = weasy.html_from_tree(tree, base_url=root_url(tmp_path),
                                url_fetcher=plain.url_fetcher)
    assert sorted(vars(ours)) == sorted(vars(plain)), changed(
        "weasyprint", f"the attributes HTML.__init__ sets (now {sorted(vars(plain))}, "
        f"html_from_tree sets {sorted(vars(ours))})", "html_from_tree",
        "Read HTML.__init__ in weasyprint/__init__.py and set the same attributes.")
    assert (ours.base_url, ours.media_type) == (plain.base_url, plain.media_type)
    assert ours.write_pdf() == plain.write_pdf(), changed(
        "weasyprint", "what HTML.render reads from an HTML (the same tree gives other pages)",
        "html_from_tree", "Compare HTML.__init__ with html_from_tree attribute by attribute.")


# WeasyPrint, use 7: HTML.etree_element is the parsed tree.

def test_weasyprint_html_keeps_the_parsed_tree(tmp_path: Path) -> None:
    html = source(tmp_path)
    assert hasattr(html, "etree_element"), changed(
        "weasyprint", "HTML.etree_element (gone)", "parsed_tree",
        "Find where HTML keeps its parsed tree (weasyprint/__init__.py, HTML.__init__).")
    tree = weasy.parsed_tree(html)
    assert getattr(tree, "tag", None) == "html" and [
        element.get("id") for element in tree.iter() if element.get("id")] == ["spot"], changed(
        "weasyprint", "HTML.etree_element (not the document's <html> element tree)",
        "parsed_tree", "Check HTML.__init__ in weasyprint/__init__.py.")


# WeasyPrint, use 8: the sRGB ICC profile shipped as package data.

def test_weasyprint_ships_an_srgb_icc_profile() -> None:
    # ICC.1:2010, 7.2 (from memory): bytes 12-15 the device class ("mntr" for a display
    # profile), 16-19 the data colour space ("RGB "), 36-39 the signature "acsp".
    try:
        data = weasy.srgb_icc_profile()
    except (FileNotFoundError, ModuleNotFoundError):
        data = b""
    assert data[36:40] == b"acsp" and data[16:20] == b"RGB " and data[12:16] == b"mntr", changed(
        "weasyprint", "weasyprint/pdf/sRGB2014.icc (gone or not an RGB display profile)",
        "srgb_icc_profile", "Find the ICC profile WeasyPrint uses for its PDF/A output "
        "(weasyprint/pdf/pdfa.py).")


# pikepdf, use 1: pages put into the page tree directly are the file's pages.

def _parts(folder: Path) -> list[Path]:
    """Three small parts (WeasyPrint packs objects in object streams), as files."""
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    for number, count in enumerate((2, 1, 3)):
        pages = "".join(f"<p style='break-before: page'>part {number} page {page}</p>"
                        for page in range(count))
        path = folder / f"part-{number}.pdf"
        path.write_bytes(HTML(string=pages, base_url=str(folder)).write_pdf())
        paths.append(path)
    return paths


def _saved(pdf: pikepdf.Pdf) -> bytes:
    buffer = io.BytesIO()
    pdf.save(buffer, deterministic_id=True,
             object_stream_mode=pikepdf.ObjectStreamMode.generate)
    return buffer.getvalue()


def test_pikepdf_pages_added_to_the_tree_are_the_files_pages(tmp_path: Path) -> None:
    first, second, front = _parts(tmp_path)
    documented = pikepdf.Pdf.new()
    opened = [pikepdf.open(path) for path in (first, second, front)]
    documented.pages.extend(opened[0].pages)
    documented.pages.extend(opened[1].pages)
    for index, page in enumerate(opened[2].pages):
        documented.pages.insert(index, page)
    ours = pikepdf.Pdf.new()
    sources = [pikepdf.open(path) for path in (first, second, front)]
    copies = add_page_copies(ours, sources[0]) + add_page_copies(ours, sources[1])
    copies = add_page_copies(ours, sources[2], first=True) + copies
    assert [page.obj.objgen for page in ours.pages] == [copy.objgen for copy in copies], \
        changed("pikepdf", "the page list (pages put into /Kids are not listed, or out of "
                "order)", "add_page_copies", "Check when QPDF::getAllPages reads the page tree "
                "(qpdf's QPDF_pages.cc) and whether pikepdf asks for it on Pdf.new().")
    assert _saved(ours) == _saved(documented), changed(
        "pikepdf", "the file written (pages copied with copy_foreign into /Kids differ from "
        "Pdf.pages.extend)", "add_page_copies",
        "Compare Pdf.copy_foreign of a page with PageList.extend (pikepdf's pagelist.cpp).")


# pikepdf, use 2: a part may be dropped, and its file deleted, once its pages are copied.

def test_pikepdf_copies_outlive_the_dropped_part(tmp_path: Path) -> None:
    def merged(keep: bool) -> bytes:
        pdf = pikepdf.Pdf.new()
        kept = []
        for path in _parts(tmp_path / ("kept" if keep else "dropped")):
            source = open_part(path)
            add_page_copies(pdf, source)
            if keep:
                kept.append(source)
            else:
                del source
                gc.collect()   # the part is gone, and then its file
                path.unlink()
        return _saved(pdf)

    assert merged(keep=False) == merged(keep=True), changed(
        "pikepdf", "the copied streams of a part that was dropped and its file deleted (not "
        "written the same)", "open_part", "Check how qpdf copies foreign stream data "
        "(QPDF::copyStreamData: the data is copied at once when the source was opened with "
        "setImmediateCopyFrom, as pikepdf does) and what pikepdf's Pdf does when it is "
        "garbage-collected.")
