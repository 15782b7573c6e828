"""Keep the structure trees of tagged parts through the merge (Tagged PDF, ISO 32000-1, 14.8).

A part rendered with WeasyPrint's ``pdf_tags`` option (:func:`reportgen.pdf.weasy.asks_for_tags`)
has its own structure tree: a ``/StructTreeRoot`` whose ``/K`` is a ``Document`` element, a
``/ParentTree`` number tree mapping each page's ``/StructParents`` key to the elements of its
marked-content ids (MCIDs), and each link annotation's ``/StructParent`` key to its element.
Copying a page (pikepdf, qpdf) copies what the page refers to, not the tree. :class:`StructureMerger` copies each part's elements
into the merged file as the part's pages are copied:

- one ``Document`` element holds the top elements of every part, front matter first, then
  the bodies in report order;
- each element's ``/Pg`` and each marked-content or object reference points at the merged
  page, each ``/P`` at the copied parent; cell ids (``/ID``, and ``/Headers`` in ``/A``) get
  the part's number in front, so they stay unique;
- every page and annotation gets a new key, and one ``/ParentTree`` holds them all;
- content a part marks but leaves out of its tree (WeasyPrint builds the page-margin boxes,
  the running header and footer, as elements it does not link to the tree) is re-marked as
  an artifact (``/Artifact BMC``) in the page's content stream, so no marked content is
  left without an element.

:meth:`StructureMerger.finish` adds the tree, ``/MarkInfo << /Marked true >>`` and ``/Lang``
only when it is whole: every part tagged, every page's MCIDs each referenced by exactly one
element of the tree, every element's page found, every figure with alternative text. Else it
adds none of them (and takes the pages' keys away) and :attr:`StructureMerger.missing` says
why: no half-tagged file claims to be tagged. Content streams are otherwise copied unchanged,
so MCIDs stay valid per page; the page stamp added later is marked as an artifact
(:mod:`reportgen.pdf.stamp`).

Objects are added with pikepdf's documented ``Pdf.make_indirect`` and ``Pdf.copy_foreign``.
"""

from __future__ import annotations

import logging
import re
from collections import Counter
from collections.abc import Sequence
from typing import Any, Final

from pikepdf import Array, Dictionary, Name, Object, Pdf, Stream, String

LOGGER = logging.getLogger(__name__)
MARKED: Final = re.compile(rb"/([A-Za-z0-9_.]+)\s*<<\s*/MCID\s+(\d+)\s*>>\s*BDC")
ARTIFACT: Final = b"/Artifact BMC"
DROPPED_KEYS: Final = frozenset({"/P", "/Pg", "/K", "/NS", "/ID", "/A"})
ObjGen = tuple[int, int]


def _page_contents(page: Dictionary) -> list[Stream]:
    contents = page.get("/Contents")
    if contents is None:
        return []
    return list(contents) if isinstance(contents, Array) else [contents]


def mark_artifacts(page: Dictionary, mcids: set[int]) -> Counter[int]:
    """Re-mark the marked content of ``mcids`` on ``page`` as artifacts; return how often
    each MCID is marked in the page's content streams afterwards."""
    seen: Counter[int] = Counter()
    for stream in _page_contents(page):
        data = stream.read_bytes()

        def swap(match: re.Match[bytes]) -> bytes:
            mcid = int(match.group(2))
            if mcid in mcids:
                return ARTIFACT
            seen[mcid] += 1
            return match.group(0)

        changed = MARKED.sub(swap, data)
        if changed != data:
            stream.write(changed)
    return seen


def _number_tree(node: Any, found: dict[int, Any]) -> dict[int, Any]:
    nums = node.get("/Nums")
    if nums is not None:
        for index in range(0, len(nums) - 1, 2):
            found[int(nums[index])] = nums[index + 1]
    for kid in node.get("/Kids") or ():
        _number_tree(kid, found)
    return found


def _objgen(value: Any) -> ObjGen | None:
    """The object number and generation of an indirect object, else None."""
    return value.objgen if isinstance(value, Object) and value.is_indirect else None


def copy_value(pdf: Pdf, value: Any) -> Any:
    """``value`` of another file, for ``pdf``: indirect objects copied with what they refer
    to (``Pdf.copy_foreign``, which copies each object of a file once), direct arrays and
    dictionaries item by item, numbers, names and strings as they are."""
    if isinstance(value, Object) and value.is_indirect:
        return pdf.copy_foreign(value)
    if isinstance(value, Array):
        return Array([copy_value(pdf, item) for item in value])
    if isinstance(value, Dictionary):
        return Dictionary({key: copy_value(pdf, item) for key, item in value.items()})
    return value


class StructureMerger:
    """Builds the merged file's structure tree from the trees of its parts."""

    def __init__(self, pdf: Pdf) -> None:
        self.pdf = pdf
        self.root_ref: Dictionary | None = None      # made with the first tagged part
        self.document_ref: Dictionary | None = None
        self.untagged: list[int] = []
        self.tops: dict[int, list[Dictionary]] = {}
        self.nums: list[tuple[int, Object]] = []
        self.missing: list[str] = []
        self.lang: str | None = None
        self.pages: list[Dictionary] = []
        self._next_key = 0

    def _key(self) -> int:
        self._next_key += 1
        return self._next_key - 1

    def add_part(self, order: int, source: Pdf, pages: Sequence[Dictionary]) -> None:
        """Copy the tree of ``source`` (part number ``order``: 0 the front matter, then the
        bodies), whose pages were copied as ``pages`` (page dictionaries of the merged
        file), in the same order."""
        self.pages += pages
        catalog = source.Root
        tree = catalog.get("/StructTreeRoot")
        if tree is None:
            self.untagged.append(order)
            return
        if self.root_ref is None or self.document_ref is None:
            self.root_ref = self.pdf.make_indirect(Dictionary())
            self.document_ref = self.pdf.make_indirect(Dictionary())
        if self.lang is None and catalog.get("/Lang"):
            self.lang = str(catalog["/Lang"])
        sources = [page.obj for page in source.pages]
        page_map = {source_page.objgen: target for source_page, target in zip(sources, pages)}
        annotation_map: dict[ObjGen, Dictionary] = {}
        for source_page, target in zip(sources, pages):
            before, after = source_page.get("/Annots"), target.get("/Annots")
            for old, new in zip(before if before is not None else (),
                                after if after is not None else ()):
                if old.is_indirect and new.is_indirect:
                    annotation_map[old.objgen] = new
        copy = _PartCopy(self, order, page_map, annotation_map)
        top = tree.get("/K")
        top = list(top) if isinstance(top, Array) else [top] if top is not None else []
        if len(top) == 1 and top[0].get("/S") == Name.Document:
            kids = top[0].get("/K")
            top = list(kids) if isinstance(kids, Array) else [kids] if kids is not None else []
        assert self.document_ref is not None
        self.tops[order] = [copy.element(kid, self.document_ref) for kid in top]
        numbers = _number_tree(tree["/ParentTree"], {})
        for index, (source_page, target) in enumerate(zip(sources, pages)):
            self._page(order, index, source_page, target, numbers, copy)
        for target in pages:
            for annotation in (target.get("/Annots") or ()):
                key = annotation.get("/StructParent")
                if key is None:
                    continue
                value = numbers.get(int(key))
                objgen = _objgen(value)
                new = copy.copied.get(objgen) if objgen is not None else None
                if new is None:
                    self.missing.append(f"part {order}: an annotation's element is not in the tree")
                    continue
                number = self._key()
                annotation[Name.StructParent] = number
                self.nums.append((number, new))
        self.missing += copy.missing
        for (page_id, mcid), count in copy.references.items():
            if count != 1:
                self.missing.append(f"part {order}: MCID {mcid} is referenced by {count} elements")

    def _page(self, order: int, index: int, source: Dictionary, target: Dictionary,
              numbers: dict[int, Any], copy: _PartCopy) -> None:
        key = source.get("/StructParents")
        entries = numbers.get(int(key)) if key is not None else None
        entries = entries if entries is not None else Array()
        page_id = target.objgen
        row = []
        left_out = set()
        for mcid, value in enumerate(entries):
            objgen = _objgen(value)
            new = copy.copied.get(objgen) if objgen is not None else None
            if new is None:
                left_out.add(mcid)
            row.append(new)
        marked = mark_artifacts(target, left_out)
        referenced = {mcid for (page, mcid) in copy.references if page == page_id}
        for mcid in sorted(set(marked) | referenced):
            if marked.get(mcid, 0) != 1 or mcid not in referenced:
                self.missing.append(f"part {order} page {index + 1}: MCID {mcid} is marked "
                                    f"{marked.get(mcid, 0)} time(s), "
                                    f"{'in' if mcid in referenced else 'not in'} the tree")
        number = self._key()
        target[Name.StructParents] = number
        self.nums.append((number, self.pdf.make_indirect(Array(row))))

    def finish(self, order: Sequence[int]) -> bool:
        """Add the tree to the catalog if it is whole (parts in ``order``); return whether."""
        if self.tops and self.untagged:
            self.missing.append("part(s) " + ", ".join(map(str, self.untagged))
                                + " have no structure tree")
        if self.missing or not self.tops or self.root_ref is None or self.document_ref is None:
            for page in self.pages:
                if "/StructParents" in page:
                    del page[Name.StructParents]
            if self.missing:
                LOGGER.warning("report.pdf is not tagged: %s%s", "; ".join(self.missing[:5]),
                               f" (and {len(self.missing) - 5} more)"
                               if len(self.missing) > 5 else "")
            return False
        document = self.document_ref
        document[Name.Type] = Name.StructElem
        document[Name.S] = Name.Document
        document[Name.P] = self.root_ref
        document[Name.K] = Array([ref for part in order for ref in self.tops.get(part, ())])
        nums: list[Any] = []
        for number, value in sorted(self.nums, key=lambda item: item[0]):
            nums += [number, value]
        self.root_ref[Name.Type] = Name.StructTreeRoot
        self.root_ref[Name.K] = self.document_ref
        self.root_ref[Name.ParentTree] = self.pdf.make_indirect(Dictionary(Nums=Array(nums)))
        self.root_ref[Name.ParentTreeNextKey] = self._next_key
        root = self.pdf.Root
        root[Name.StructTreeRoot] = self.root_ref
        root[Name.MarkInfo] = Dictionary(Marked=True)
        if self.lang:
            root[Name.Lang] = String(self.lang)
        return True


class _PartCopy:
    """The elements of one part copied into the merged file (source object -> copy)."""

    def __init__(self, merger: StructureMerger, order: int, page_map: dict[ObjGen, Dictionary],
                 annotation_map: dict[ObjGen, Dictionary]) -> None:
        self.pdf = merger.pdf
        self.order = order
        self.page_map = page_map
        self.annotation_map = annotation_map
        self.copied: dict[ObjGen, Dictionary] = {}
        self.references: Counter[tuple[ObjGen, int]] = Counter()  # (page object, MCID)
        self.missing: list[str] = []

    def _id(self, value: Any) -> String:
        return String(f"p{self.order}-".encode() + bytes(value))

    def _page(self, value: Any) -> Dictionary | None:
        objgen = _objgen(value)
        page = self.page_map.get(objgen) if objgen is not None else None
        if page is None:
            self.missing.append(f"part {self.order}: an element's page is not in the report")
        return page

    def element(self, source: Any, parent: Dictionary) -> Dictionary:
        new = self.pdf.make_indirect(Dictionary())
        if source.is_indirect:
            self.copied[source.objgen] = new
        new[Name.P] = parent
        page = None
        if "/Pg" in source:
            page = self._page(source["/Pg"])
            if page is not None:
                new[Name.Pg] = page
        for key, value in source.items():
            if key in DROPPED_KEYS:
                continue
            new[Name(key)] = copy_value(self.pdf, value)
        if "/ID" in source:
            new[Name.ID] = self._id(source["/ID"])
        if "/A" in source:
            new[Name.A] = self._attributes(source["/A"])
        if source.get("/S") == Name.Figure and not source.get("/Alt") \
                and not source.get("/ActualText"):
            self.missing.append(f"part {self.order}: a figure without alternative text")
        kids = source.get("/K")
        if kids is not None:
            items = list(kids) if isinstance(kids, Array) else [kids]
            new[Name.K] = Array([
                kid for kid in (self._kid(item, new, page) for item in items)
                if kid is not None])
        return new

    def _attributes(self, value: Any) -> Any:
        if isinstance(value, Array):
            return Array([self._attributes(item) for item in value])
        copied = copy_value(self.pdf, value)
        if isinstance(copied, Dictionary) and "/Headers" in copied:
            copied[Name.Headers] = Array([self._id(item) for item in value["/Headers"]])
        return copied

    def _kid(self, item: Any, parent: Dictionary, page: Dictionary | None) -> Any:
        if isinstance(item, int) and not isinstance(item, bool):
            if page is None:
                self.missing.append(f"part {self.order}: an MCID without a page")
                return None
            self.references[(page.objgen, int(item))] += 1
            return int(item)
        if not isinstance(item, Dictionary):
            self.missing.append(f"part {self.order}: an element kid of unknown kind")
            return None
        kind = item.get("/Type")
        if kind == Name.MCR:
            own = self._page(item["/Pg"]) if "/Pg" in item else page
            if own is None or "/Stm" in item:
                self.missing.append(f"part {self.order}: a marked-content reference not on a page")
                return None
            self.references[(own.objgen, int(item["/MCID"]))] += 1
            return Dictionary(Type=Name.MCR, Pg=own, MCID=int(item["/MCID"]))
        if kind == Name.OBJR:
            objgen = _objgen(item.get("/Obj"))
            annotation = self.annotation_map.get(objgen) if objgen is not None else None
            if annotation is None:
                return None  # an internal link the part left out; the merge adds its own
            own = self._page(item["/Pg"]) if "/Pg" in item else page
            reference = Dictionary(Type=Name.OBJR, Obj=annotation)
            if own is not None:
                reference[Name.Pg] = own
            return reference
        return self.element(item, parent)
