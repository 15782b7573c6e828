"""Lay out one HTML part with WeasyPrint and note where its anchors, links and bookmarks fell.

This is the work done in each worker process of :mod:`reportgen.pdf`. A part is
rendered on its own, so WeasyPrint cannot resolve links into other parts; they are
taken out of the part's PDF here and rebuilt over the merged file by
:mod:`reportgen.pdf_merge`, with every anchor's page and position recorded below.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Final

from weasyprint import HTML

from .fetcher import make_url_fetcher, root_url

PT_PER_CSS_PX: Final = 0.75  # CSS px are 1/96 in, PDF points 1/72 in
BOOKMARK_LEVELS: Final = ("1", "2")


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
class PageFrame:
    """What the page-number stamp needs to know about one laid-out page."""

    width_pt: float
    height_pt: float
    right_margin_pt: float
    bottom_margin_pt: float
    links: tuple[InternalLink, ...]


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


def _page_frame(page: Any) -> PageFrame:
    height_pt = page.height * PT_PER_CSS_PX
    links = []
    for link_type, target, (x1, y1, x2, y2), _box in page.links:
        if link_type == "internal":
            rect_pt = (x1 * PT_PER_CSS_PX, height_pt - y2 * PT_PER_CSS_PX,
                       x2 * PT_PER_CSS_PX, height_pt - y1 * PT_PER_CSS_PX)
            links.append(InternalLink(target, rect_pt))
    box = page._page_box  # WeasyPrint 70 exposes no public accessor for used margins
    return PageFrame(
        width_pt=page.width * PT_PER_CSS_PX,
        height_pt=height_pt,
        right_margin_pt=box.margin_right * PT_PER_CSS_PX,
        bottom_margin_pt=box.margin_bottom * PT_PER_CSS_PX,
        links=tuple(links),
    )


def render_part(html: str, root: Path) -> RenderedPart:
    """Render one complete HTML document to PDF bytes plus its anchors and links.

    Resources are read only through :func:`reportgen.fetcher.make_url_fetcher`.
    Internal links, named destinations and WeasyPrint's own outline are left out of
    the part's PDF: the merged report gets them from :mod:`reportgen.pdf_merge`.
    """
    source = HTML(string=html, base_url=root_url(root), url_fetcher=make_url_fetcher(root))
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

