"""Lay out one HTML part with WeasyPrint and note where its anchors, links and bookmarks fell.

This is the work done in each worker process of :mod:`reportgen.pdf`. A part is
rendered on its own, so WeasyPrint cannot resolve links into other parts; they are
taken out of the part's PDF here and rebuilt over the merged file by
:mod:`reportgen.pdf.merge`, with every anchor's page and position recorded below.

This is also the only module that relies on WeasyPrint beyond its documented API,
and only in the small functions of the section "WeasyPrint internals" below. Every
such use, why we need it, and where it was checked (tests/test_pdf_internals.py has
one test per item; run it before raising the WeasyPrint bound in pyproject.toml):

1. ``Page._page_box`` (private attribute), in :func:`used_margins_px`: the page's
   layout box, read for its used right and bottom margins. The page-number stamp is
   set in the bottom margin, flush with the right one; ``Page`` itself exposes only
   its width, height and bleed. Checked on WeasyPrint 70.0.
2. The items of ``Page.links``, in :func:`internal_links`: tuples
   ``(link_type, target, rectangle, box)`` whose rectangle is ``(x1, y1, x2, y2)``
   in CSS px from the page's top-left corner (``Page``'s own docstring says
   ``(x, y, width, height)``, which is not what is stored). Read to rebuild each
   internal link over the merged file. Checked on WeasyPrint 70.0.
3. The values of ``Page.anchors``, in :func:`anchor_corners`: tuples
   ``(x1, y1, x2, y2)`` in CSS px from the top-left corner (the docstring says an
   ``(x, y)`` point). Read for the page and place of every ``id``. Checked on
   WeasyPrint 70.0.
4. The layout box of a link (the fourth item of 2), in :func:`box_tag_and_classes`
   and :func:`box_color_and_size`: ``box.element`` (the source element, with
   ``.get``), ``box.element_tag``, ``box.style["color"]`` (a colour with
   ``.to("srgb").coordinates``) and ``box.style["font_size"]`` (CSS px). A page
   slot is found by its tag and class, and its number is drawn after the merge in
   the slot's colour and size. Checked on WeasyPrint 70.0.
5. Editing ``Page.links``, ``Page.anchors`` and ``Page.bookmarks`` before
   ``Document.write_pdf`` changes what is written (undocumented: ``write_pdf`` reads
   these lists, not the layout), in :func:`drop_cross_part_marks`. A part's own
   internal links, named destinations and outline would point at wrong pages once
   the parts are merged; :mod:`reportgen.pdf.merge` rebuilds them. Checked on
   WeasyPrint 70.0.
6. What ``HTML.__init__`` sets and ``HTML.render`` reads: ``base_url``,
   ``url_fetcher``, ``media_type``, ``wrapper_element``
   (``cssselect2.ElementWrapper.from_html_root(tree, content_language=None)``) and
   ``etree_element``, in :func:`html_from_tree`. A document already parsed by
   :func:`parse_xml` is handed to WeasyPrint by setting these, so that it is not
   parsed again. Unlike ``HTML.__init__``, the base URL is not taken from a
   ``<base>`` element (our templates write none). Checked on WeasyPrint 70.0.
7. ``HTML.etree_element`` (undocumented attribute), in :func:`parsed_tree`: the
   tree WeasyPrint parsed (or the one set by 6), searched for bookmark elements
   (``data-bookmark``) and for the head's request for a structure tree
   (:func:`asks_for_tags`; the tree itself is written by the documented ``write_pdf``
   option ``pdf_tags``). Checked on WeasyPrint 70.0.
8. The sRGB ICC profile WeasyPrint ships for its own PDF/A output
   (``weasyprint/pdf/sRGB2014.icc``, package data, not API), in
   :func:`srgb_icc_profile`: the output intent of the archive file
   (:mod:`reportgen.pdf.archive`) uses it, so no profile is downloaded or copied into
   this repository. Checked on WeasyPrint 70.0.

:mod:`reportgen.pdf.fetcher` uses only WeasyPrint's documented URL fetcher API (a
subclass of ``weasyprint.urls.URLFetcher`` overriding ``fetch``).
"""

from __future__ import annotations

import logging
from importlib import resources
import xml.etree.ElementTree as ET
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Final

import cssselect2
from weasyprint import HTML

from reportgen.pdf.fetcher import ProjectURLFetcher, make_url_fetcher, root_url

LOGGER = logging.getLogger(__name__)

PT_PER_CSS_PX: Final = 0.75  # CSS px are 1/96 in, PDF points 1/72 in
BOOKMARK_LEVELS: Final = ("1", "2")
TAGGED_META: Final = "reportgen-tagged"  # <meta name="reportgen-tagged" content="yes"/>: tag the part
PAGE_SLOT_CLASS: Final = "page-slot"       # <a class="page-slot" href="#id"></a>
PAGE_SLOT_START_CLASS: Final = "slot-start"  # with it, the number is set flush left


@dataclass(frozen=True)
class Anchor:
    """An element with an ``id``: its page in the part and its top-left corner."""

    page_index: int          # 0-based, within the part
    x_pt: float              # from the left edge of the page
    y_pt: float              # from the bottom edge of the page (PDF user space)


@dataclass(frozen=True)
class InternalLink:
    """A ``<a href="#target">`` rectangle on a page, in PDF user space."""

    target: str
    rect_pt: tuple[float, float, float, float]   # x1, y1, x2, y2 from bottom-left


@dataclass(frozen=True)
class PageSlot:
    """An empty box kept for the page number of ``target``, written after the merge.

    A front matter that prints page numbers as text must be laid out again whenever
    they change. One that leaves a fixed-width slot for each number (an empty
    inline-block link of class ``page-slot``) is final after its first layout: the
    number is drawn into the slot once every page is known (:mod:`reportgen.pdf.stamp`).
    """

    target: str
    left_pt: float
    right_pt: float
    baseline_pt: float       # the bottom of an empty inline-block is the line's baseline
    size_pt: float
    rgb: tuple[float, float, float]
    flush_left: bool


@dataclass(frozen=True)
class PageFrame:
    """What the page-number stamp needs to know about one laid-out page."""

    width_pt: float
    height_pt: float
    right_margin_pt: float
    bottom_margin_pt: float
    links: tuple[InternalLink, ...]
    slots: tuple[PageSlot, ...] = ()


@dataclass(frozen=True)
class Bookmark:
    """An element with ``data-bookmark``, ``data-bookmark-level`` and ``id``."""

    anchor_id: str
    label: str
    level: int


@dataclass(frozen=True)
class RenderedPart:
    """A part's PDF bytes and the positions needed to stitch it into the report."""

    pdf: bytes
    pages: tuple[PageFrame, ...]
    anchors: dict[str, Anchor]          # first occurrence of each id
    bookmarks: tuple[Bookmark, ...]     # in document order
    # project files the render read: (file URL, digest of the bytes, None if refused)
    resources: tuple[tuple[str, str | None], ...] = ()

    @property
    def page_count(self) -> int:
        return len(self.pages)


def iter_bookmarks(root_element: Any) -> Iterator[Bookmark]:
    """Yield the bookmark elements of a parsed HTML tree in document order."""
    for element in root_element.iter():
        label = element.get("data-bookmark")
        anchor_id = element.get("id")
        level = element.get("data-bookmark-level", "1").strip()
        if label and anchor_id and level in BOOKMARK_LEVELS:
            yield Bookmark(anchor_id, " ".join(label.split()), int(level))


# WeasyPrint internals: each use is listed, with its number, in the module docstring.

def used_margins_px(page: Any) -> tuple[float, float]:
    """The used right and bottom margins of a laid-out page, in CSS px (use 1)."""
    box = page._page_box  # Page exposes no public accessor for used margins
    return box.margin_right, box.margin_bottom


def internal_links(page: Any) -> Iterator[tuple[str, tuple[float, float, float, float], Any]]:
    """Yield ``(target, (x1, y1, x2, y2), box)`` for each internal link of a page (use 2).

    The rectangle is in CSS px from the page's top-left corner; ``box`` is the link's
    layout box (read only through :func:`box_tag_and_classes` and
    :func:`box_color_and_size`).
    """
    for link_type, target, (x1, y1, x2, y2), box in page.links:
        if link_type == "internal":
            yield target, (x1, y1, x2, y2), box


def anchor_corners(page: Any) -> Iterator[tuple[str, float, float]]:
    """Yield ``(name, x, y)``, the top-left corner of each anchor of a page in CSS px (use 3)."""
    for name, (x1, y1, _x2, _y2) in page.anchors.items():
        yield name, x1, y1


def box_tag_and_classes(box: Any) -> tuple[str | None, list[str]]:
    """The tag of a layout box's source element and its classes (use 4)."""
    element = getattr(box, "element", None)
    classes = (element.get("class") or "").split() if element is not None else []
    return getattr(box, "element_tag", None), classes


def box_color_and_size(box: Any) -> tuple[tuple[float, float, float], float]:
    """A box's text colour as sRGB components in 0..1 and its font size in CSS px (use 4)."""
    red, green, blue = (min(max(float(value or 0), 0.0), 1.0)
                        for value in box.style["color"].to("srgb").coordinates)
    return (red, green, blue), box.style["font_size"]


def drop_cross_part_marks(page: Any) -> None:
    """Leave a page's internal links, anchors and bookmarks out of its PDF (use 5).

    External links and attachments stay.
    """
    page.links = [link for link in page.links if link[0] != "internal"]
    page.anchors = {}
    page.bookmarks = []


class _ParsedHTML(HTML):
    """A WeasyPrint document from an element tree already parsed (use 6)."""

    def __init__(self, root_element: Any, *, base_url: str, url_fetcher: Any) -> None:
        self.base_url = base_url
        self.url_fetcher = url_fetcher
        self.media_type = "print"
        self.wrapper_element = cssselect2.ElementWrapper.from_html_root(
            root_element, content_language=None)
        self.etree_element = self.wrapper_element.etree_element


def html_from_tree(root_element: Any, *, base_url: str, url_fetcher: Any) -> HTML:
    """A WeasyPrint document from a tree parsed by :func:`parse_xml` (use 6).

    Sets what ``HTML.__init__`` sets after its own parsing; the tests compare its
    pages with those of ``HTML(string=...)``.
    """
    return _ParsedHTML(root_element, base_url=base_url, url_fetcher=url_fetcher)


def parsed_tree(source: HTML) -> Any:
    """The element tree of a WeasyPrint document (use 7)."""
    return source.etree_element


def srgb_icc_profile() -> bytes:
    """The bytes of the sRGB ICC profile shipped inside WeasyPrint (use 8)."""
    return resources.files("weasyprint").joinpath("pdf", "sRGB2014.icc").read_bytes()


# What this module makes of them.

def _page_slot(target: str, rect_pt: tuple[float, float, float, float],
               box: Any) -> PageSlot | None:
    tag, classes = box_tag_and_classes(box)
    if PAGE_SLOT_CLASS not in classes or tag != "a":
        return None
    rgb, font_size_px = box_color_and_size(box)
    return PageSlot(target, rect_pt[0], rect_pt[2], rect_pt[1],
                    font_size_px * PT_PER_CSS_PX, rgb, PAGE_SLOT_START_CLASS in classes)


def _page_frame(page: Any) -> PageFrame:
    height_pt = page.height * PT_PER_CSS_PX
    links = []
    slots = []
    for target, (x1, y1, x2, y2), link_box in internal_links(page):
        rect_pt = (x1 * PT_PER_CSS_PX, height_pt - y2 * PT_PER_CSS_PX,
                   x2 * PT_PER_CSS_PX, height_pt - y1 * PT_PER_CSS_PX)
        links.append(InternalLink(target, rect_pt))
        slot = _page_slot(target, rect_pt, link_box)
        if slot is not None:
            slots.append(slot)
    right_margin_px, bottom_margin_px = used_margins_px(page)
    return PageFrame(
        width_pt=page.width * PT_PER_CSS_PX,
        height_pt=height_pt,
        right_margin_pt=right_margin_px * PT_PER_CSS_PX,
        bottom_margin_pt=bottom_margin_px * PT_PER_CSS_PX,
        links=tuple(links),
        slots=tuple(slots),
    )


def parse_xml(html: str) -> Any | None:
    """The element tree of ``html`` read as XML, or None when it is not well-formed XML.

    WeasyPrint parses with tinyhtml5, a complete HTML5 parser written in Python that
    takes about a sixth of a part's render time. Our own templates write HTML that is
    also well-formed XML (void elements closed with ``/>``, explicit ``<tbody>``, no
    named entities) and whose XML tree is the tree an HTML5 parser builds (checked by
    the tests), so it can be read with the standard library's C XML parser instead.
    """
    try:
        return ET.fromstring(html)
    except ET.ParseError as error:
        LOGGER.debug("part is not well-formed XML (%s); parsing it as HTML", error)
        return None


def asks_for_tags(tree: Any) -> bool:
    """Whether the document's head holds ``<meta name="reportgen-tagged" content="yes"/>``."""
    for element in tree.iter():
        tag = element.tag.rsplit("}", 1)[-1] if isinstance(element.tag, str) else ""
        if tag == "meta" and element.get("name") == TAGGED_META:
            return element.get("content") == "yes"
        if tag == "body":
            return False
    return False


def render_part(html: str, root: Path, *, xml_first: bool = False,
                url_fetcher: ProjectURLFetcher | None = None) -> RenderedPart:
    """Render one complete HTML document to PDF bytes plus its anchors and links.

    Resources are read only through :func:`reportgen.pdf.fetcher.make_url_fetcher`
    (or ``url_fetcher``, one of its kind, on a cluster worker); the files read are
    listed in :attr:`RenderedPart.resources`.
    Internal links, named destinations and WeasyPrint's own outline are left out of
    the part's PDF: the merged report gets them from :mod:`reportgen.pdf.merge`. A part
    whose head asks for it (:func:`asks_for_tags`) is rendered with its structure tree.
    With ``xml_first`` (our own templates), the document is read by :func:`parse_xml`
    when it is well-formed XML; otherwise WeasyPrint parses it as HTML. The pages
    are the same either way.
    """
    base_url = root_url(root)
    if url_fetcher is None:
        url_fetcher = make_url_fetcher(root)
    tree = parse_xml(html) if xml_first else None
    source = (HTML(string=html, base_url=base_url, url_fetcher=url_fetcher) if tree is None
              else html_from_tree(tree, base_url=base_url, url_fetcher=url_fetcher))
    document = source.render()
    frames = []
    anchors: dict[str, Anchor] = {}
    for page_index, page in enumerate(document.pages):
        frames.append(_page_frame(page))
        height_pt = page.height * PT_PER_CSS_PX
        for name, x1, y1 in anchor_corners(page):
            if name not in anchors:
                anchors[name] = Anchor(page_index, x1 * PT_PER_CSS_PX,
                                       height_pt - y1 * PT_PER_CSS_PX)
        drop_cross_part_marks(page)
    # WeasyPrint's documented option pdf_tags writes a structure tree (Tagged PDF); the
    # part asks for it in its head, so the request travels with the HTML (and its cache key)
    pdf = document.write_pdf(pdf_tags=asks_for_tags(parsed_tree(source)))
    return RenderedPart(pdf, tuple(frames), anchors,
                        tuple(iter_bookmarks(parsed_tree(source))),
                        tuple(sorted(url_fetcher.reads.items())))

