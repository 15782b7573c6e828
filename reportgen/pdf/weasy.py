"""Lay out one HTML part with WeasyPrint and note where its anchors, links and bookmarks fell.

This is the work done in each worker process of :mod:`reportgen.pdf`. A part is
rendered on its own, so WeasyPrint cannot resolve links into other parts; they are
taken out of the part's PDF here and rebuilt over the merged file by
:mod:`reportgen.pdf.merge`, with every anchor's page and position recorded below.
"""

from __future__ import annotations

import logging
import xml.etree.ElementTree as ET
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Final

import cssselect2
from weasyprint import HTML

from reportgen.pdf.fetcher import make_url_fetcher, root_url

LOGGER = logging.getLogger(__name__)

PT_PER_CSS_PX: Final = 0.75  # CSS px are 1/96 in, PDF points 1/72 in
BOOKMARK_LEVELS: Final = ("1", "2")
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


def _page_slot(target: str, rect_pt: tuple[float, float, float, float],
               box: Any) -> PageSlot | None:
    element = getattr(box, "element", None)
    classes = (element.get("class") or "").split() if element is not None else []
    if PAGE_SLOT_CLASS not in classes or getattr(box, "element_tag", None) != "a":
        return None
    red, green, blue = (min(max(float(value or 0), 0.0), 1.0)
                        for value in box.style["color"].to("srgb").coordinates)
    return PageSlot(target, rect_pt[0], rect_pt[2], rect_pt[1],
                    box.style["font_size"] * PT_PER_CSS_PX, (red, green, blue),
                    PAGE_SLOT_START_CLASS in classes)


def _page_frame(page: Any) -> PageFrame:
    height_pt = page.height * PT_PER_CSS_PX
    links = []
    slots = []
    for link_type, target, (x1, y1, x2, y2), link_box in page.links:
        if link_type == "internal":
            rect_pt = (x1 * PT_PER_CSS_PX, height_pt - y2 * PT_PER_CSS_PX,
                       x2 * PT_PER_CSS_PX, height_pt - y1 * PT_PER_CSS_PX)
            links.append(InternalLink(target, rect_pt))
            slot = _page_slot(target, rect_pt, link_box)
            if slot is not None:
                slots.append(slot)
    box = page._page_box  # WeasyPrint 70 exposes no public accessor for used margins
    return PageFrame(
        width_pt=page.width * PT_PER_CSS_PX,
        height_pt=height_pt,
        right_margin_pt=box.margin_right * PT_PER_CSS_PX,
        bottom_margin_pt=box.margin_bottom * PT_PER_CSS_PX,
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


class _ParsedHTML(HTML):
    """A WeasyPrint document from an element tree already parsed (see :func:`parse_xml`).

    Sets what ``HTML.__init__`` sets after its own parsing (WeasyPrint 70; the tests
    compare its pages with those of the plain route).
    """

    def __init__(self, root_element: Any, *, base_url: str, url_fetcher: Any) -> None:
        self.base_url = base_url
        self.url_fetcher = url_fetcher
        self.media_type = "print"
        self.wrapper_element = cssselect2.ElementWrapper.from_html_root(
            root_element, content_language=None)
        self.etree_element = self.wrapper_element.etree_element


def render_part(html: str, root: Path, *, xml_first: bool = False) -> RenderedPart:
    """Render one complete HTML document to PDF bytes plus its anchors and links.

    Resources are read only through :func:`reportgen.pdf.fetcher.make_url_fetcher`.
    Internal links, named destinations and WeasyPrint's own outline are left out of
    the part's PDF: the merged report gets them from :mod:`reportgen.pdf.merge`.
    With ``xml_first`` (our own templates), the document is read by :func:`parse_xml`
    when it is well-formed XML; otherwise WeasyPrint parses it as HTML. The pages
    are the same either way.
    """
    base_url, url_fetcher = root_url(root), make_url_fetcher(root)
    tree = parse_xml(html) if xml_first else None
    source = (HTML(string=html, base_url=base_url, url_fetcher=url_fetcher) if tree is None
              else _ParsedHTML(tree, base_url=base_url, url_fetcher=url_fetcher))
    document = source.render()
    frames = []
    anchors: dict[str, Anchor] = {}
    for page_index, page in enumerate(document.pages):
        frames.append(_page_frame(page))
        height_pt = page.height * PT_PER_CSS_PX
        for name, (x1, y1, _x2, _y2) in page.anchors.items():
            if name not in anchors:
                anchors[name] = Anchor(page_index, x1 * PT_PER_CSS_PX,
                                       height_pt - y1 * PT_PER_CSS_PX)
        page.links = [link for link in page.links if link[0] != "internal"]
        page.anchors = {}
        page.bookmarks = []
    pdf = document.write_pdf()
    return RenderedPart(pdf, tuple(frames), anchors,
                        tuple(iter_bookmarks(source.etree_element)))

