"""Merge rendered parts into one PDF: pages, page numbers, links, outline, metadata.

Every part was rendered on its own (see :mod:`reportgen.pdf.weasy`), with its
internal links, named destinations and outline left out. Here the pages are copied
in order with pikepdf (qpdf, C++: the parts' objects are held and copied there, not as
Python objects), then the pieces that span parts are rebuilt from the recorded
positions: a GoTo link annotation for every ``<a href="#id">`` whose target exists
somewhere in the report, an outline entry and a named destination for every bookmark
element, the "Page X of Y" stamp and the numbers of the page slots
(:mod:`reportgen.pdf.stamp`). qpdf writes the file, with object streams and a file
identifier derived from the content. pikepdf's documented API is used, except the two
behaviours listed in :mod:`reportgen.pdf.pikepdf_access` (pages added to the page tree
directly, parts dropped once copied).
"""

from __future__ import annotations

import hashlib
import io
import logging
import shutil
import tempfile
import time
import weakref
from collections.abc import Callable, Mapping, Sequence
from datetime import datetime
from pathlib import Path
from types import TracebackType
from typing import BinaryIO, Final

import pikepdf
import weasyprint
from pikepdf import Array, Dictionary, Name, Object, Pdf, Stream, String

from reportgen import __version__
from reportgen.pdf.archive import Attachment, make_archival, pdf_date, save_options
from reportgen.pdf.pikepdf_access import add_page_copies, open_part
from reportgen.pdf.stamp import Stamper, make_stamp_font
from reportgen.pdf.tags import StructureMerger
from reportgen.pdf.weasy import Anchor, PageFrame, RenderedPart

__all__ = ["Destinations", "PageCopier", "Seal", "absolute_anchors", "finish_pdf", "pdf_date",
           "slot_text"]

LOGGER = logging.getLogger(__name__)
MISSING_SLOT_TEXT: Final = "\u2013"
SLOT_CHARS: Final = "0123456789" + MISSING_SLOT_TEXT
CREATOR: Final = f"reportgen {__version__}"
Seal = Callable[[bytes, Mapping[str, tuple[int, float, float]]], bytes]
PRODUCER: Final = f"WeasyPrint {weasyprint.__version__}, pikepdf {pikepdf.__version__}"


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


class Destinations:
    """The explicit destination of each anchor (ISO 32000-1, 12.3.2.2: its page at the
    anchor's top left), made once as an indirect array that every link, outline item and
    name pointing there refers to. A long report has tens of thousands of links to a few
    thousand places; qpdf keeps each array it holds as objects of about 1 kB."""

    def __init__(self, pdf: Pdf, pages: Sequence[Dictionary],
                 anchors: dict[str, tuple[int, Anchor]]) -> None:
        self.pdf, self.pages, self.anchors = pdf, pages, anchors
        self.made: dict[str, Array] = {}

    def __contains__(self, anchor_id: str) -> bool:
        return anchor_id in self.anchors

    def __getitem__(self, anchor_id: str) -> Array:
        if anchor_id not in self.made:
            page_index, anchor = self.anchors[anchor_id]
            self.made[anchor_id] = self.pdf.make_indirect(Array([
                self.pages[page_index], Name.XYZ, round(anchor.x_pt, 2), round(anchor.y_pt, 2),
                None]))
        return self.made[anchor_id]


def add_links(pdf: Pdf, pages: Sequence[Dictionary], frames: Sequence[PageFrame],
              destinations: Destinations) -> int:
    """Add a GoTo link annotation for every internal link whose target exists; return the
    count. ``pages``: the file's pages, in order. The links share one border array (none
    drawn)."""
    added = 0
    no_border = pdf.make_indirect(Array([0, 0, 0]))
    for page, frame in zip(pages, frames):
        annotations = []
        for link in frame.links:
            if link.target not in destinations:
                continue
            annotations.append(pdf.make_indirect(Dictionary(
                Type=Name.Annot, Subtype=Name.Link,
                Rect=Array([round(value, 2) for value in link.rect_pt]),
                Border=no_border, Dest=destinations[link.target], P=page)))
        if annotations:
            existing = page.get("/Annots")
            page[Name.Annots] = Array([*(existing if existing is not None else ()),
                                       *annotations])
            added += len(annotations)
    return added


def add_named_destinations(pdf: Pdf, parts: Sequence[RenderedPart],
                           destinations: Destinations) -> int:
    """Name the place of every bookmarked anchor (sections, each link sheet); return the count.

    A viewer then opens ``report.pdf#link-a-bb-07`` at that link's sheet, so other
    documents (an asset register, a ticket) can point into the archived report. The
    names go into one ``/Names`` array of the catalog's ``/Dests`` name tree, in sorted
    order (ISO 32000-1, 7.9.6: the keys of a name tree are sorted).
    """
    names = sorted({bookmark.anchor_id for part in parts for bookmark in part.bookmarks
                    if bookmark.anchor_id in destinations})
    if not names:
        return 0
    items: list[Object] = []
    for name in names:
        items += [String(name), destinations[name]]
    if "/Names" not in pdf.Root:
        pdf.Root[Name.Names] = Dictionary()
    pdf.Root.Names[Name.Dests] = pdf.make_indirect(Dictionary(Names=Array(items)))
    return len(names)


def add_outline(pdf: Pdf, parts: Sequence[RenderedPart], destinations: Destinations) -> None:
    """Add the bookmarks of all parts, in order, as a two-level outline (ISO 32000-1,
    12.3.3), every item open, and open the document with the outline shown."""
    tops: list[tuple[Dictionary, list[Dictionary]]] = []
    for part in parts:
        for bookmark in part.bookmarks:
            if bookmark.anchor_id not in destinations:
                continue
            item = pdf.make_indirect(Dictionary(
                Title=String(bookmark.label), Dest=destinations[bookmark.anchor_id]))
            if bookmark.level > 1 and tops:
                tops[-1][1].append(item)
            else:
                tops.append((item, []))
    if not tops:
        return
    outlines = pdf.make_indirect(Dictionary(Type=Name.Outlines))
    _chain(outlines, [item for item, _ in tops])
    for item, kids in tops:
        _chain(item, kids)
    outlines[Name.Count] = len(tops) + sum(len(kids) for _, kids in tops)
    pdf.Root[Name.Outlines] = outlines
    pdf.Root[Name.PageMode] = Name.UseOutlines


def _chain(parent: Dictionary, items: Sequence[Dictionary]) -> None:
    """Link ``items`` as the children of ``parent`` (open: ``/Count`` is their number)."""
    if not items:
        return
    for index, item in enumerate(items):
        item[Name.Parent] = parent
        if index > 0:
            item[Name.Prev] = items[index - 1]
        if index + 1 < len(items):
            item[Name.Next] = items[index + 1]
    parent[Name.First] = items[0]
    parent[Name.Last] = items[-1]
    if "/Type" not in parent:
        parent[Name.Count] = len(items)


class PageCopier:
    """Copies the pages of body parts into a new file in report order.

    Parts may be offered in any order (as the workers finish them or the part cache
    has them); each is copied as soon as every part before it has been, so most of the
    copying is done while later parts are still rendering. The copy order is the report
    order whatever the arrival order: it numbers the objects of the merged file (qpdf
    packs them into object streams in that order), so it keeps a rebuild
    byte-identical to a full build.

    Each part is written to a file in a temporary folder and opened from there when its
    turn comes: qpdf (C++), not Python, parses the objects its pages use and copies them,
    with their streams' data; the part is then dropped and its file deleted
    (:mod:`reportgen.pdf.pikepdf_access`). A part waiting for an earlier one waits as that
    file, so its bytes need not be kept. :meth:`close` (or leaving the ``with`` block)
    removes the folder. The folder is in the system's temporary directory (``TMPDIR``)
    and holds the parts that wait (about 10 kB a page).
    """

    def __init__(self) -> None:
        self.pdf = Pdf.new()
        self.structure = StructureMerger(self.pdf)  # the parts' structure trees, if tagged
        self.copied = 0                    # parts copied so far: 0 .. copied-1
        self.pages: list[Dictionary] = []  # the merged file's pages, in order
        self._folder = Path(tempfile.mkdtemp(prefix="reportgen-merge-"))
        # removed by close(), or when the copier is collected or the interpreter exits
        self._remove_folder = weakref.finalize(self, shutil.rmtree, self._folder, True)
        self._waiting: set[int] = set()
        self._identical = IdenticalResources()

    def __enter__(self) -> PageCopier:
        return self

    def __exit__(self, kind: type[BaseException] | None, error: BaseException | None,
                 trace: TracebackType | None) -> None:
        self.close()

    def _file(self, index: int) -> Path:
        return self._folder / f"part-{index:06d}.pdf"

    def offer(self, index: int, part: RenderedPart) -> None:
        """Take ``part`` (body ``index``, 0-based); copy every part now due. Its bytes are
        written to a file here, so the caller may drop them."""
        self._file(index).write_bytes(part.pdf)
        self._waiting.add(index)
        while self.copied in self._waiting:
            self._waiting.remove(self.copied)
            self._copy(self._file(self.copied), self.copied + 1)  # part 0: the front matter
            self.copied += 1

    @property
    def objects_shared(self) -> int:
        """How many references now point at an earlier identical object."""
        return self._identical.merged

    def _copy(self, path: Path, order: int) -> None:
        source = open_part(path)
        pages = add_page_copies(self.pdf, source, first=order == 0)
        if order == 0:
            self.pages[:0] = pages
        else:
            self.pages += pages
        self._identical.merge(pages)
        self.structure.add_part(order, source, pages)
        del source  # the copies hold what they need (use 2): the file can go (on a
        try:        # memory-backed TMPDIR it is memory); else it goes with the folder
            path.unlink()
        except OSError:
            pass

    def add_front(self, front: RenderedPart) -> None:
        """Put the pages of ``front`` (part 0) before the bodies."""
        path = self._folder / "front.pdf"
        path.write_bytes(front.pdf)
        self._copy(path, 0)

    def save(self, into: BinaryIO, **options: object) -> None:
        """Write the merged file into ``into`` (``options``:
        :func:`reportgen.pdf.archive.save_options`)."""
        self.pdf.save(into, **options)

    def close(self) -> None:
        self.pdf.close()
        self._remove_folder()


class IdenticalResources:
    """Makes the pages refer to one copy of each image, font program and ToUnicode map
    that several parts embed with the same bytes and dictionary (a project's logo on
    every page, a font subset two parts happen to share: link sheets often use the same
    characters), and the forms of a part to one copy of each resource dictionary
    (WeasyPrint gives every form of a part its own copy of the same one). Copying a part
    copies all of its objects, so without this the merged file would hold them once per
    part or form; a copy nothing refers to any more is not written.

    Only these objects are compared (in the pages' resources, their form XObjects' and
    Type 3 fonts'), each hashed once, so the cost follows the resources, not the objects
    of the file.
    """

    FONT_FILES: Final = ("/FontFile", "/FontFile2", "/FontFile3")

    def __init__(self) -> None:
        self.first: dict[bytes, Object] = {}       # digest -> the stream kept
        self.digests: dict[tuple[int, int], bytes] = {}
        self.visited: set[tuple[int, int]] = set()
        self.merged = 0

    def merge(self, pages: Sequence[Dictionary]) -> None:
        """Share what ``pages`` (one part's) hold that earlier pages hold too."""
        self._part_resources: dict[bytes, Dictionary] = {}
        for page in pages:
            self._resources(page.get("/Resources"))

    def _share_resources(self, form: Object) -> None:
        """Point ``form`` at the first resource dictionary of its part with the same
        entries (WeasyPrint gives each form of a part its own copy of the same one)."""
        resources = form.get("/Resources")
        if not isinstance(resources, Dictionary) or not resources.is_indirect:
            return
        kept = self._part_resources.setdefault(resources.unparse(resolved=True), resources)
        if kept.objgen != resources.objgen:
            form[Name.Resources] = kept
            self.merged += 1

    def _first_visit(self, obj: Object) -> bool:
        if not obj.is_indirect:
            return True
        if obj.objgen in self.visited:
            return False
        self.visited.add(obj.objgen)
        return True

    def _resources(self, resources: Object | None) -> None:
        if not isinstance(resources, Dictionary) or not self._first_visit(resources):
            return
        xobjects = resources.get("/XObject")
        for key, xobject in (list(xobjects.items()) if isinstance(xobjects, Dictionary) else ()):
            if not isinstance(xobject, Stream):
                continue
            subtype = xobject.get("/Subtype")
            if subtype == Name.Form and self._first_visit(xobject):
                self._share_resources(xobject)
                self._resources(xobject.get("/Resources"))
            elif subtype == Name.Image:
                self._replace(xobjects, key)
        fonts = resources.get("/Font")
        if isinstance(fonts, Dictionary) and self._first_visit(fonts):
            for font in fonts.values():
                if isinstance(font, Dictionary) and self._first_visit(font):
                    self._font(font)

    def _font(self, font: Dictionary) -> None:
        if isinstance(font.get("/ToUnicode"), Stream):
            self._replace(font, "/ToUnicode")
        for descendant in font.get("/DescendantFonts") or ():
            if isinstance(descendant, Dictionary) and self._first_visit(descendant):
                self._font(descendant)
        descriptor = font.get("/FontDescriptor")
        if isinstance(descriptor, Dictionary) and self._first_visit(descriptor):
            for key in self.FONT_FILES:
                if isinstance(descriptor.get(key), Stream):
                    self._replace(descriptor, key)
        self._resources(font.get("/Resources"))   # a Type 3 font's glyphs

    def _replace(self, holder: Dictionary, key: str) -> None:
        """Point ``holder[key]`` (a stream) at the first copy of the same stream."""
        stream = holder[key]
        kept = self._kept(stream)
        if kept.objgen != stream.objgen:
            holder[Name(key)] = kept
            self.merged += 1

    def _kept(self, stream: Object) -> Object:
        return self.first.setdefault(self._digest(stream), stream)

    def _digest(self, obj: Object) -> bytes:
        """A digest of ``obj`` and what it refers to (an image's soft mask, colour space),
        each indirect object digested once; equal for copies of one object."""
        indirect = isinstance(obj, Object) and obj.is_indirect
        if indirect and obj.objgen in self.digests:
            return self.digests[obj.objgen]
        hasher = hashlib.sha256()
        if isinstance(obj, Stream):
            hasher.update(b"stream" + self._digest(obj.stream_dict))
            hasher.update(obj.read_raw_bytes())
        elif isinstance(obj, Dictionary):
            for key in sorted(obj.keys()):
                hasher.update(key.encode() + self._digest(obj[key]))
        elif isinstance(obj, Array):
            for item in obj:
                hasher.update(b"[" + self._digest(item))
        else:
            hasher.update(obj.unparse() if isinstance(obj, Object) else repr(obj).encode())
        digest = hasher.digest()
        if indirect:
            self.digests[obj.objgen] = digest
        return digest


def finish_pdf(copier: PageCopier, front: RenderedPart, bodies: Sequence[RenderedPart], *,
               title: str, page_label: str, created: datetime, compact: bool = True,
               author: str = "", attachments: Sequence[Attachment] = (),
               seal: Seal | None = None, language: str = "en", into: BinaryIO) -> None:
    """Put the front matter before the bodies copied by ``copier``, finish, and write the
    file into ``into`` (a file: the finished PDF is not held in memory, unless signed).

    The structure trees of the bodies (the copier's) get the front matter's, and the
    whole tree is kept only when every part is tagged and the tree is whole
    (:mod:`reportgen.pdf.tags`).

    Adds the page-number stamps, links, outline and metadata, then makes the merged
    file PDF/A-3u with ``attachments`` embedded (:func:`reportgen.pdf.archive.make_archival`);
    with ``compact``, objects are packed into object streams when it is saved.
    ``seal(pdf, places)``, given, signs the finished file (:mod:`reportgen.pdf.sign`);
    ``places`` maps each element id to (0-based page, x, y of its top-left corner in points).
    ``language`` is written as the document catalog's /Lang (PDF 1.4+, read by screen readers).
    """
    clock = _StepClock()
    pdf, structure = copier.pdf, copier.structure
    copier.add_front(front)
    parts = [front, *bodies]
    frames = [frame for part in parts for frame in part.pages]
    total = len(frames)
    texts = [page_label.format(page=number, pages=total) for number in range(1, total + 1)]
    anchors = absolute_anchors(parts)
    slot_texts = [[(slot, slot_text(slot.target, anchors)) for slot in frame.slots]
                  for frame in frames]
    stamper = Stamper(pdf, make_stamp_font(pdf, [*texts, SLOT_CHARS]))
    pages = copier.pages
    for page, text, frame, slots in zip(pages, texts, frames, slot_texts):
        stamper.stamp(page, text, frame, slots)
    clock.step("front matter and page stamps")
    destinations = Destinations(pdf, pages, anchors)
    add_links(pdf, pages, frames, destinations)
    add_outline(pdf, parts, destinations)
    add_named_destinations(pdf, parts, destinations)
    structure.finish(range(len(parts)))
    # The document information holds no /Producer and no /ModDate (the XMP packet does):
    # pyHanko, signing, sets the XMP producer to its own name and the Info /Producer to
    # ours followed by its name, and writes the signing time into each date separately;
    # without the two keys in Info, Info and XMP still agree after signing (PDF/A-3 6.6.2.3).
    pdf.docinfo = pdf.make_indirect(Dictionary(
        Title=String(title), Creator=String(CREATOR), CreationDate=String(pdf_date(created))))
    pdf.Root[Name.Lang] = String(language)
    clock.step("links, outline, names, structure")
    make_archival(pdf, title=title, author=author, creator=CREATOR, producer=PRODUCER,
                  created=created, attachments=attachments, language=language)
    clock.step("archive file (PDF/A, attachments)")
    if seal is None:
        copier.save(into, **save_options(compact))
        clock.step("qpdf write")
    else:
        unsigned = io.BytesIO()
        copier.save(unsigned, **save_options(compact))
        clock.step("qpdf write")
        into.write(seal(unsigned.getvalue(), {name: (page, anchor.x_pt, anchor.y_pt)
                                             for name, (page, anchor) in anchors.items()}))
        clock.step("signing")
    LOGGER.debug("finishing the PDF (%d pages, %d identical objects shared): %s", total,
                 copier.objects_shared, clock)


class _StepClock:
    """Wall and CPU time of each named step, for the debug log (benchmarks/bench_merge.py
    prints it)."""

    def __init__(self) -> None:
        self.last = self._now()
        self.steps: list[tuple[str, float, float]] = []

    @staticmethod
    def _now() -> tuple[float, float]:
        return time.perf_counter(), time.process_time()

    def step(self, name: str) -> None:
        now = self._now()
        self.steps.append((name, now[0] - self.last[0], now[1] - self.last[1]))
        self.last = now

    def __str__(self) -> str:
        return ", ".join(f"{name} {wall:.2f} s ({cpu:.2f} s CPU)" for name, wall, cpu in self.steps)
