"""Merge rendered parts into one PDF: pages, page numbers, links, outline, metadata.

Every part was rendered on its own (see :mod:`reportgen.pdf.weasy`), with its
internal links, named destinations and outline left out. Here the pages are copied
in order with pypdf, then the pieces that span parts are rebuilt from the recorded
positions: a GoTo link annotation for every ``<a href="#id">`` whose target exists
somewhere in the report, an outline entry and a named destination for every bookmark
element, the "Page X of Y" stamp and the numbers of the page slots
(:mod:`reportgen.pdf.stamp`).

The objects pypdf has no documented method for (link annotations, named destinations
in one sorted pass) are added through :mod:`reportgen.pdf.pypdf_access`.
"""

from __future__ import annotations

import io
import logging
import resource
import shutil
import subprocess
import tempfile
import time
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from datetime import datetime
from typing import Final

import pypdf
import weasyprint
from pypdf import PdfReader, PdfWriter
from pypdf.generic import (
    ArrayObject,
    DictionaryObject,
    Fit,
    FloatObject,
    IndirectObject,
    NameObject,
    NullObject,
    NumberObject,
    TextStringObject,
)

from reportgen import __version__
from reportgen.pdf.archive import Attachment, make_archival
from reportgen.pdf.pypdf_access import add_indirect, named_destination_array, parse_all_objects
from reportgen.pdf.stamp import Stamper, make_stamp_font
from reportgen.pdf.tags import StructureMerger
from reportgen.pdf.weasy import Anchor, PageFrame, RenderedPart

LOGGER = logging.getLogger(__name__)
QPDF_ARGS: Final = ("--object-streams=generate", "--deterministic-id")
QPDF_OK_STATUSES: Final = (0, 3)  # 3: succeeded with warnings
MISSING_SLOT_TEXT: Final = "\u2013"
SLOT_CHARS: Final = "0123456789" + MISSING_SLOT_TEXT
PARSE_AHEAD_PAGES: Final = 1000  # pages of parts parsed while waiting for an earlier part
CREATOR: Final = f"reportgen {__version__}"
Seal = Callable[[bytes, Mapping[str, tuple[int, float, float]]], bytes]
PRODUCER: Final = f"WeasyPrint {weasyprint.__version__}, pypdf {pypdf.__version__}"


def absolute_anchors(parts: Sequence[RenderedPart]) -> dict[str, tuple[int, Anchor]]:
    """Map each anchor id to its 0-based page in the merged report (first occurrence wins)."""
    found: dict[str, tuple[int, Anchor]] = {}
    offset = 0
    for part in parts:
        for name, anchor in part.anchors.items():
            found.setdefault(name, (offset + anchor.page_index, anchor))
        offset += part.page_count
    return found


def slot_text(target: str, anchors: dict[str, tuple[int, Anchor]]) -> str:
    """The page number written into a page slot: the 1-based page of ``target``.

    A target that is nowhere in the report gets a dash (the templates only make
    slots for anchors they also render, so this marks a template error visibly).
    """
    return str(anchors[target][0] + 1) if target in anchors else MISSING_SLOT_TEXT


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


def _link_annotation(link_rect_pt: tuple[float, float, float, float], page: IndirectObject,
                     anchor: Anchor) -> DictionaryObject:
    return DictionaryObject({
        NameObject("/Type"): NameObject("/Annot"),
        NameObject("/Subtype"): NameObject("/Link"),
        NameObject("/Rect"): ArrayObject([FloatObject(round(v, 2)) for v in link_rect_pt]),
        NameObject("/Border"): ArrayObject([NumberObject(0)] * 3),
        NameObject("/Dest"): ArrayObject([
            page, NameObject("/XYZ"), FloatObject(round(anchor.x_pt, 2)),
            FloatObject(round(anchor.y_pt, 2)), NullObject()]),
    })


def add_links(writer: PdfWriter, frames: Sequence[PageFrame],
              anchors: dict[str, tuple[int, Anchor]]) -> int:
    """Add a GoTo link annotation for every internal link whose target exists; return the count."""
    references = [page.indirect_reference for page in writer.pages]
    added = 0
    for page, frame in zip(writer.pages, frames):
        annotations = []
        for link in frame.links:
            if link.target not in anchors:
                continue
            target_index, anchor = anchors[link.target]
            annotation = _link_annotation(link.rect_pt, references[target_index], anchor)
            annotation[NameObject("/P")] = page.indirect_reference
            annotations.append(add_indirect(writer, annotation))
        if annotations:
            existing = page.get("/Annots")
            existing = list(existing.get_object()) if existing is not None else []
            page[NameObject("/Annots")] = ArrayObject(existing + annotations)
            added += len(annotations)
    return added


def add_named_destinations(writer: PdfWriter, parts: Sequence[RenderedPart],
                           anchors: dict[str, tuple[int, Anchor]]) -> int:
    """Name the place of every bookmarked anchor (sections, each link sheet); return the count.

    A viewer then opens ``report.pdf#link-a-bb-07`` at that link's sheet, so other
    documents (an asset register, a ticket) can point into the archived report.
    """
    names = sorted({bookmark.anchor_id for part in parts for bookmark in part.bookmarks
                    if bookmark.anchor_id in anchors})
    if not names:
        return 0
    tree = named_destination_array(writer)  # the name tree's array: keys in sorted order
    pages = writer.pages
    for name in names:
        page_index, anchor = anchors[name]
        tree.extend([TextStringObject(name), ArrayObject([
            pages[page_index].indirect_reference, NameObject("/XYZ"),
            FloatObject(round(anchor.x_pt, 2)), FloatObject(round(anchor.y_pt, 2)),
            NullObject()])])
    return len(names)


def add_outline(writer: PdfWriter, parts: Sequence[RenderedPart],
                anchors: dict[str, tuple[int, Anchor]]) -> None:
    """Add the bookmarks of all parts, in order, as a two-level outline."""
    parent = None
    for part in parts:
        for bookmark in part.bookmarks:
            if bookmark.anchor_id not in anchors:
                continue
            page_index, anchor = anchors[bookmark.anchor_id]
            item = writer.add_outline_item(
                title=bookmark.label, page_number=page_index,
                parent=parent if bookmark.level > 1 else None,
                fit=Fit.xyz(left=round(anchor.x_pt, 2), top=round(anchor.y_pt, 2)))
            if bookmark.level == 1:
                parent = item
    if parts and any(part.bookmarks for part in parts):
        writer.page_mode = "/UseOutlines"


class PageCopier:
    """Copies the pages of body parts into a new writer in report order.

    Parts may be offered in any order (as the workers finish them or the part cache
    has them); each is copied as soon as every part before it has been, so most of the
    copying is done while later parts are still rendering. The copy order is the report
    order whatever the arrival order: it numbers the objects of the merged file, so it
    keeps a rebuild byte-identical to a full build.

    A part that must wait for an earlier one is parsed at once (:func:`parsed_reader`),
    which is most of the cost of copying it, so that only the cheap copy is left when
    its turn comes: in a rebuild, the parts from the cache are parsed while the changed
    ones render. At most :data:`PARSE_AHEAD_PAGES` pages wait parsed, which bounds the
    memory they hold; later ones wait as bytes.
    """

    def __init__(self) -> None:
        self.writer = PdfWriter()
        self.structure = StructureMerger(self.writer)  # the parts' structure trees, if tagged
        self.copied = 0                    # parts copied so far: 0 .. copied-1
        self._waiting: dict[int, RenderedPart] = {}
        self._parsed: dict[int, PdfReader] = {}
        self._parsed_pages = 0

    def offer(self, index: int, part: RenderedPart) -> None:
        self._waiting[index] = part
        while self.copied in self._waiting:
            part = self._waiting.pop(self.copied)
            reader = self._parsed.pop(self.copied, None)
            if reader is not None:
                self._parsed_pages -= part.page_count
            else:
                reader = PdfReader(io.BytesIO(part.pdf))
            pages = [self.writer.add_page(page) for page in reader.pages]
            self.structure.add_part(self.copied + 1, reader, pages)  # part 0: front matter
            self.copied += 1
        if index in self._waiting and self._parsed_pages + part.page_count <= PARSE_AHEAD_PAGES:
            self._parsed[index] = parsed_reader(part.pdf)
            self._parsed_pages += part.page_count


def parsed_reader(pdf: bytes) -> PdfReader:
    """A reader of ``pdf`` with every object already parsed (pypdf keeps parsed objects,
    so copying pages from it later does not parse them again)."""
    reader = PdfReader(io.BytesIO(pdf))
    parse_all_objects(reader)
    return reader


def finish_pdf(writer: PdfWriter, front: RenderedPart, bodies: Sequence[RenderedPart], *,
               title: str, page_label: str, created: datetime, compact: bool = True,
               author: str = "", attachments: Sequence[Attachment] = (),
               seal: Seal | None = None, structure: StructureMerger | None = None,
               language: str = "en") -> bytes:
    """Put the front matter before the bodies in ``writer``, finish it, return the bytes.

    ``structure``: the structure trees of the bodies copied into ``writer`` (the
    :class:`PageCopier`'s); the front matter's is added here, and the whole tree is kept
    only when every part is tagged and the tree is whole (:mod:`reportgen.pdf.tags`).

    Adds the page-number stamps, links, outline and metadata, then makes the merged
    file PDF/A-3u with ``attachments`` embedded (:func:`reportgen.pdf.archive.make_archival`);
    with ``compact``, merges identical objects and repacks with qpdf when installed.
    ``seal(pdf, places)``, given, signs the finished file (:mod:`reportgen.pdf.sign`);
    ``places`` maps each element id to (0-based page, x, y of its top-left corner in points).
    ``language`` is written as the document catalog's /Lang (PDF 1.4+, read by screen readers).
    """
    clock = _StepClock()
    if structure is None:
        structure = StructureMerger(writer)
    reader = PdfReader(io.BytesIO(front.pdf))
    structure.add_part(0, reader, [writer.insert_page(page, index)
                                   for index, page in enumerate(reader.pages)])
    parts = [front, *bodies]
    frames = [frame for part in parts for frame in part.pages]
    total = len(frames)
    texts = [page_label.format(page=number, pages=total) for number in range(1, total + 1)]
    anchors = absolute_anchors(parts)
    slot_texts = [[(slot, slot_text(slot.target, anchors)) for slot in frame.slots]
                  for frame in frames]
    stamper = Stamper(writer, make_stamp_font(writer, [*texts, SLOT_CHARS]))
    for page, text, frame, slots in zip(writer.pages, texts, frames, slot_texts):
        stamper.stamp(page, text, frame, slots)
    clock.step("front matter and page stamps")
    add_links(writer, frames, anchors)
    add_outline(writer, parts, anchors)
    add_named_destinations(writer, parts, anchors)
    structure.finish(range(len(parts)))
    # The document information holds no /Producer and no /ModDate (the XMP packet does):
    # pyHanko, signing, sets the XMP producer to its own name and the Info /Producer to
    # ours followed by its name, and writes the signing time into each date separately;
    # without the two keys in Info, Info and XMP still agree after signing (PDF/A-3 6.6.2.3).
    writer.metadata = {"/Title": TextStringObject(title), "/Creator": CREATOR,
                       "/CreationDate": pdf_date(created)}
    writer.root_object[NameObject("/Lang")] = TextStringObject(language)
    clock.step("links, outline, names, structure")
    make_archival(writer, title=title, author=author, creator=CREATOR, producer=PRODUCER,
                  created=created, attachments=attachments, language=language)
    clock.step("archive file (PDF/A, attachments)")
    if compact:
        writer.compress_identical_objects()
        clock.step("identical objects merged")
    buffer = io.BytesIO()
    writer.write(buffer)
    clock.step("pypdf write")
    pdf = repack_with_qpdf(buffer.getvalue()) if compact else buffer.getvalue()
    clock.step("qpdf repack")
    if seal is not None:
        pdf = seal(pdf, {name: (page, anchor.x_pt, anchor.y_pt)
                         for name, (page, anchor) in anchors.items()})
        clock.step("signing")
    LOGGER.debug("finishing the PDF (%d pages): %s", total, clock)
    return pdf


class _StepClock:
    """Wall and CPU time (this process and its children: qpdf) of each named step, for
    the debug log (benchmarks/bench_merge.py prints it)."""

    def __init__(self) -> None:
        self.last = self._now()
        self.steps: list[tuple[str, float, float]] = []

    @staticmethod
    def _now() -> tuple[float, float]:
        children = resource.getrusage(resource.RUSAGE_CHILDREN)
        return time.perf_counter(), time.process_time() + children.ru_utime + children.ru_stime

    def step(self, name: str) -> None:
        now = self._now()
        self.steps.append((name, now[0] - self.last[0], now[1] - self.last[1]))
        self.last = now

    def __str__(self) -> str:
        return ", ".join(f"{name} {wall:.2f} s ({cpu:.2f} s CPU)" for name, wall, cpu in self.steps)


def repack_with_qpdf(pdf: bytes) -> bytes:
    """Pack objects into object streams with qpdf if it is installed (about a quarter smaller).

    ``--deterministic-id`` derives the file identifier from the content, so the output
    stays reproducible. Without qpdf, or if it fails, ``pdf`` is returned unchanged.
    """
    qpdf = shutil.which("qpdf")
    if qpdf is None:
        return pdf
    with tempfile.TemporaryDirectory(prefix="reportgen-") as folder:
        source, target = Path(folder, "merged.pdf"), Path(folder, "packed.pdf")
        source.write_bytes(pdf)
        done = subprocess.run([qpdf, *QPDF_ARGS, str(source), str(target)],
                              capture_output=True, text=True, check=False)
        if done.returncode not in QPDF_OK_STATUSES or not target.is_file():
            LOGGER.warning("qpdf could not repack the PDF (kept as is): %s",
                           done.stderr.strip()[:500])
            return pdf
        return target.read_bytes()
