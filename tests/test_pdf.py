"""The PDF engine: merge order, page numbers, anchors, outline, links, determinism.

Checks read the finished PDF with pypdf (an independent reader of ISO 32000 files):
page texts, the outline, link annotations and their destination pages.
"""

from __future__ import annotations

import base64
import io
import multiprocessing
from collections.abc import Mapping
from datetime import datetime, timedelta, timezone
from pathlib import Path

import pypdf
import pytest

from reportgen.errors import ReportgenError
from reportgen.pdf.engine import PageMap, _receive_part, _settle_front, render_pdf
from reportgen.pdf.weasy import render_part
from reportgen.pdf.merge import pdf_date
from tests.builders import printed_page_refs

CREATED = datetime(2030, 1, 15, 9, 30, tzinfo=timezone.utc)
CSS = """<style>
@page { size: A5; margin: 15mm 15mm 15mm 15mm }
body { font-family: DejaVu Sans; font-size: 10pt }
h1, h2 { bookmark-level: none }
.page { break-before: page }
</style>"""


def document(body: str, title: str = "part") -> str:
    return f"<html><head><title>{title}</title>{CSS}</head><body>{body}</body></html>"


def pages(name: str, count: int, level: int = 2, extra: str = "") -> str:
    """``count`` pages headed "name-k" (with that id); the first is a bookmark."""
    html = []
    for k in range(1, count + 1):
        bookmark = (f' data-bookmark="Bookmark {name}" data-bookmark-level="{level}"'
                    if k == 1 else "")
        new_page = ' class="page"' if k > 1 else ""
        html.append(f'<h2{new_page} id="{name}-{k}"{bookmark}>{name}-{k}</h2>{extra}')
    return "".join(html)


BODIES = [
    document(pages("alpha", 2) + '<p><a href="#beta-2">to beta-2</a></p>'),
    document('<h1 id="links" data-bookmark="Links" data-bookmark-level="1">Links</h1>'
             + pages("beta", 2)),
]


def toc_front(page_of: Mapping[str, int], total_pages: int) -> str:
    rows = "".join(f'<p><a href="#{anchor}">{anchor}</a> on page {page_of[anchor]}</p>'
                   for anchor in ("alpha-1", "beta-2"))
    return document(f'<h1 id="cover" data-bookmark="Cover" data-bookmark-level="1">Cover</h1>'
                    f"<p>{total_pages} pages</p>{rows}")


def read(pdf: bytes) -> pypdf.PdfReader:
    return pypdf.PdfReader(io.BytesIO(pdf))


def texts(reader: pypdf.PdfReader) -> list[str]:
    return [page.extract_text() for page in reader.pages]


@pytest.fixture(scope="module")
def report_pdf(tmp_path_factory: pytest.TempPathFactory) -> bytes:
    root = tmp_path_factory.mktemp("project")
    return render_pdf(toc_front, BODIES, root=root, title="Test report", created=CREATED)


def test_pages_follow_front_then_bodies_in_order(report_pdf: bytes) -> None:
    page_texts = texts(read(report_pdf))
    assert len(page_texts) == 5  # cover (1) + alpha (2) + beta (2)
    markers = ["Cover", "alpha-1", "alpha-2", "beta-1", "beta-2"]
    for text, marker in zip(page_texts, markers):
        assert marker in text


def test_every_page_is_stamped_with_its_number_and_the_total(report_pdf: bytes) -> None:
    for number, text in enumerate(texts(read(report_pdf)), start=1):
        assert f"Page {number} of 5" in text


def test_front_matter_gets_the_absolute_page_of_anchors_in_other_parts(
        report_pdf: bytes) -> None:
    cover = texts(read(report_pdf))[0]
    assert "5 pages" in cover
    assert "alpha-1 on page 2" in cover
    assert "beta-2 on page 5" in cover


def test_outline_lists_bookmarks_in_order_nested_by_level(report_pdf: bytes) -> None:
    reader = read(report_pdf)
    outline = reader.outline
    top = [item for item in outline if not isinstance(item, list)]
    assert [item.title for item in top] == ["Cover", "Links"]
    # pypdf lists an item's children as the list that follows it
    assert [item.title for item in outline[1]] == ["Bookmark alpha"]
    assert [item.title for item in outline[3]] == ["Bookmark beta"]
    targets = {item.title: reader.get_destination_page_number(item)
               for item in [*top, *outline[1], *outline[3]]}
    assert targets == {"Cover": 0, "Bookmark alpha": 1, "Links": 3, "Bookmark beta": 3}


def link_targets(reader: pypdf.PdfReader, page_index: int) -> list[int]:
    found = []
    for annotation in reader.pages[page_index].get("/Annots", []):
        annotation = annotation.get_object()
        if annotation["/Subtype"] == "/Link" and "/Dest" in annotation:
            found.append(reader.get_page_number(annotation["/Dest"][0].get_object()))
    return found


def test_links_across_parts_become_goto_annotations_to_the_right_page(
        report_pdf: bytes) -> None:
    reader = read(report_pdf)
    assert link_targets(reader, 0) == [1, 4]  # front → alpha-1 (page 2), beta-2 (page 5)
    assert link_targets(reader, 2) == [4]     # alpha part → beta-2 in the next part


def test_links_to_one_place_share_one_destination_and_one_border(report_pdf: bytes) -> None:
    # 5 kB of qpdf's memory a link with its own arrays, 2.7 kB sharing them (measured,
    # 60,000 links): a long report links to a few thousand places tens of thousands of times
    import pikepdf

    with pikepdf.open(io.BytesIO(report_pdf)) as pdf:
        links = [annotation for page in pdf.pages for annotation in page.get("/Annots", [])
                 if annotation.get("/Subtype") == "/Link" and "/Dest" in annotation]
        to_beta = [link for link in links if link.Dest[0].objgen == pdf.pages[4].objgen]
        assert len(to_beta) == 2                       # from the front and from alpha's part
        assert len({link.Dest.objgen for link in to_beta}) == 1 and to_beta[0].Dest.is_indirect
        assert len({link.Border.objgen for link in links}) == 1 and links[0].Border.is_indirect
        assert list(links[0].Border) == [0, 0, 0]      # no border drawn


SLOT_CSS = "<style>a.page-slot { display: inline-block; width: 2.6em; height: 0.7em }</style>"


def test_page_slots_get_the_page_of_their_target_and_the_front_is_laid_out_once(
        tmp_path: Path) -> None:
    calls = []

    def slot_front(page_of: Mapping[str, int], total_pages: int) -> str:
        calls.append(total_pages)
        rows = "".join(f'<p style="text-align: right">{anchor} '
                       f'<a class="page-slot" href="#{anchor}"></a></p>'
                       for anchor in ("alpha-1", "beta-2", "cover"))
        return document(SLOT_CSS + '<h1 id="cover" data-bookmark="Cover" '
                        f'data-bookmark-level="1">Cover</h1>{rows}'
                        '<p>left <a class="page-slot slot-start" href="#beta-1"></a></p>')

    pdf = render_pdf(slot_front, BODIES, root=tmp_path, title="t", created=CREATED)
    reader = read(pdf)
    assert len(calls) == 1  # no page number was looked up: nothing to lay out again
    # front 1 page, alpha 2 pages, beta 2 pages: alpha-1 on 2, beta-1 on 4, beta-2 on 5
    assert printed_page_refs(reader, 0) == [("2", 2), ("5", 5), ("1", 1), ("4", 4)]


def test_page_slots_in_body_parts_point_across_parts(tmp_path: Path) -> None:
    bodies = [document(SLOT_CSS + pages("alpha", 2)
                       + '<p>see <a class="page-slot" href="#beta-2"></a></p>'),
              document(SLOT_CSS + pages("beta", 2)
                       + '<p>back <a class="page-slot" href="#alpha-1"></a></p>')]
    reader = read(render_pdf(cover_only, bodies, root=tmp_path, title="t", created=CREATED))
    # cover 1 page, alpha 2, beta 2: the slots on pages 3 and 5 name pages 5 and 2
    assert printed_page_refs(reader, 2) == [("5", 5)]
    assert printed_page_refs(reader, 4) == [("2", 2)]


def test_a_slot_whose_target_is_missing_shows_a_dash(tmp_path: Path) -> None:
    def front(page_of: Mapping[str, int], total_pages: int) -> str:
        return document(SLOT_CSS + '<p>gone <a class="page-slot" href="#nowhere"></a></p>')

    reader = read(render_pdf(front, BODIES, root=tmp_path, title="t", created=CREATED))
    assert texts(reader)[0].split() == ["gone", "\u2013", "Page", "1", "of", "5"]


def test_bookmarked_anchors_are_named_destinations(report_pdf: bytes) -> None:
    reader = read(report_pdf)
    named = {name: reader.get_destination_page_number(destination)
             for name, destination in reader.named_destinations.items()}
    # the bookmarks of toc_front and BODIES: cover, alpha-1, links, beta-1 (0-based pages)
    assert named == {"cover": 0, "alpha-1": 1, "links": 3, "beta-1": 3}


def test_metadata_comes_from_the_inputs(report_pdf: bytes) -> None:
    metadata = read(report_pdf).metadata
    assert metadata.title == "Test report"
    assert metadata["/CreationDate"] == "D:20300115093000Z"
    assert metadata.creator.startswith("reportgen ")


def test_same_input_gives_identical_bytes(report_pdf: bytes, tmp_path: Path) -> None:
    again = render_pdf(toc_front, BODIES, root=tmp_path, title="Test report", created=CREATED)
    assert again == report_pdf


def test_front_matter_is_rendered_again_when_its_length_moves_the_numbers(
        tmp_path: Path) -> None:
    bodies = [render_part(body, tmp_path) for body in BODIES]
    calls: list[tuple[dict[str, int], int]] = []

    def two_page_front(page_of: Mapping[str, int], total_pages: int) -> str:
        calls.append(({"beta-2": page_of["beta-2"]}, total_pages))
        return document(f"<p>beta-2 on page {page_of['beta-2']} of {total_pages}</p>"
                        '<p class="page">second front page</p>')

    front = _settle_front(two_page_front, bodies, tmp_path, estimate=None)
    # assumed 1 front page first: beta-2 on page 5 of 5; then 2 front pages: 6 of 6
    assert calls == [({"beta-2": 5}, 5), ({"beta-2": 6}, 6)]
    assert front.page_count == 2
    assert "beta-2 on page 6 of 6" in texts(read(front.pdf))[0]


def test_page_map_records_lookups_and_placeholder_only_when_asked() -> None:
    exact = PageMap({"a": 3})
    assert exact.get("a") == 3 and exact.get("zz") is None
    assert exact.used == {"a": 3}
    with pytest.raises(KeyError):
        exact["zz"]
    estimate = PageMap({}, fallback=999)
    assert estimate["anything"] == 999 and "anything" not in estimate


def test_progress_counts_parts_up_to_the_total(tmp_path: Path) -> None:
    seen: list[tuple[int, int]] = []
    render_pdf(toc_front, BODIES, root=tmp_path, title="t", created=CREATED,
               progress=lambda done, total: seen.append((done, total)))
    assert seen == [(0, 3), (1, 3), (2, 3), (3, 3)]


def cover_only(page_of: Mapping[str, int], total_pages: int) -> str:
    return document("<h1>Cover</h1>")


def test_page_label_is_formatted_per_page(tmp_path: Path) -> None:
    pdf = render_pdf(cover_only, BODIES[:1], root=tmp_path, title="t", created=CREATED,
                     page_label="Seite {page}/{pages}", workers=1)
    assert "Seite 3/3" in texts(read(pdf))[2]


def test_page_label_outside_winansi_is_refused(tmp_path: Path) -> None:
    with pytest.raises(ValueError, match="not supported by the page-number stamp"):
        render_pdf(cover_only, BODIES[:1], root=tmp_path, title="t", created=CREATED,
                   page_label="頁 {page}")


@pytest.mark.parametrize(("moment", "expected"), [
    (datetime(2030, 1, 15, 9, 30), "D:20300115093000"),
    (datetime(2030, 1, 15, 9, 30, tzinfo=timezone(timedelta(hours=-5))),
     "D:20300115093000-05'00'"),
], ids=["naive: no zone", "ISO 32000-1 7.9.4: offset HH'mm'"])
def test_pdf_date_format(moment: datetime, expected: str) -> None:
    assert pdf_date(moment) == expected


def _png(colour: tuple[int, int, int]) -> str:
    from PIL import Image
    buffer = io.BytesIO()
    Image.new("RGB", (8, 8), colour).save(buffer, format="PNG")
    return "data:image/png;base64," + base64.b64encode(buffer.getvalue()).decode("ascii")


def _image_objects(reader: pypdf.PdfReader) -> list[int]:
    """The object numbers of the image XObjects the pages use (directly or in forms)."""
    found: set[int] = set()

    def walk(resources: object, seen: set[int]) -> None:
        resources = resources.get_object() if resources is not None else None
        for reference in (resources or {}).get("/XObject", {}).values():
            if reference.idnum in seen:
                continue
            seen.add(reference.idnum)
            xobject = reference.get_object()
            if xobject.get("/Subtype") == "/Image":
                found.add(reference.idnum)
            else:
                walk(xobject.get("/Resources"), seen)

    for page in reader.pages:
        walk(page.get("/Resources"), set())
    return sorted(found)


def test_an_image_in_every_part_is_embedded_once_in_object_streams(tmp_path: Path) -> None:
    logo, other = _png((0, 90, 160)), _png((200, 30, 30))
    bodies = [document(f'<p>part {n}</p><img src="{logo}" alt="logo">'
                       + (f'<img src="{other}" alt="other">' if n == 2 else ""))
              for n in (1, 2, 3)]
    pdf = render_pdf(cover_only, bodies, root=tmp_path, title="t", created=CREATED)
    reader = read(pdf)
    # the same PNG in three parts: one image object; the other PNG: a second one
    assert len(_image_objects(reader)) == 2
    # ISO 32000-1, 7.5.7: objects packed in object streams (/Type /ObjStm)
    assert b"/ObjStm" in pdf
    assert "Page 4 of 4" in texts(reader)[3]


def test_a_worker_that_dies_without_a_result_fails_the_build_with_a_message() -> None:
    context = multiprocessing.get_context("forkserver")
    receiver, sender = context.Pipe(duplex=False)
    process = context.Process(target=int)  # ends at once and sends nothing
    process.start()
    sender.close()
    with pytest.raises(ReportgenError, match="body part 3 ended without a result"):
        _receive_part(receiver, 2, process)


@pytest.mark.parametrize("enabled", [True, False])
def test_render_pdf_leaves_the_cycle_collector_as_it_found_it(
        tmp_path: Path, enabled: bool) -> None:
    import gc
    was = gc.isenabled()
    (gc.enable if enabled else gc.disable)()
    try:
        render_pdf(cover_only, BODIES[:1], root=tmp_path, title="t", created=CREATED)
        assert gc.isenabled() is enabled
    finally:
        (gc.enable if was else gc.disable)()
