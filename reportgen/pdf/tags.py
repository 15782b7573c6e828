"""Keep the structure trees of tagged parts through the merge (Tagged PDF, ISO 32000-1, 14.8).

A part rendered with WeasyPrint's ``pdf_tags`` option (:func:`reportgen.pdf.weasy.asks_for_tags`)
has its own structure tree: a ``/StructTreeRoot`` whose ``/K`` is a ``Document`` element, a
``/ParentTree`` number tree mapping each page's ``/StructParents`` key to the elements of its
marked-content ids (MCIDs), and each link annotation's ``/StructParent`` key to its element.
pypdf copies the pages but not the tree. :class:`StructureMerger` copies each part's elements
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

Objects are added through :func:`reportgen.pdf.pypdf_access.add_indirect`.
"""

from __future__ import annotations

import logging
import re
from collections import Counter
from collections.abc import Sequence
from typing import Any, Final

from pypdf import PdfReader, PdfWriter
from pypdf.generic import (
    ArrayObject,
    BooleanObject,
    ByteStringObject,
    DictionaryObject,
    IndirectObject,
    NameObject,
    NullObject,
    NumberObject,
    PdfObject,
    TextStringObject,
)

from reportgen.pdf.pypdf_access import add_indirect

LOGGER = logging.getLogger(__name__)
MARKED: Final = re.compile(rb"/([A-Za-z0-9_.]+)\s*<<\s*/MCID\s+(\d+)\s*>>\s*BDC")
ARTIFACT: Final = b"/Artifact BMC"
DROPPED_KEYS: Final = frozenset({"/P", "/Pg", "/K", "/NS", "/ID", "/A"})


def _page_contents(page: DictionaryObject) -> list[Any]:
    contents = page.get("/Contents")
    if contents is None:
        return []
    contents = contents.get_object()
    return [item.get_object() for item in contents] if isinstance(contents, ArrayObject) \
        else [contents]


def mark_artifacts(page: DictionaryObject, mcids: set[int]) -> Counter[int]:
    """Re-mark the marked content of ``mcids`` on ``page`` as artifacts; return how often
    each MCID is marked in the page's content streams afterwards."""
    seen: Counter[int] = Counter()
    for stream in _page_contents(page):
        data = stream.get_data()

        def swap(match: re.Match[bytes]) -> bytes:
            mcid = int(match.group(2))
            if mcid in mcids:
                return ARTIFACT
            seen[mcid] += 1
            return match.group(0)

        changed = MARKED.sub(swap, data)
        if changed != data:
            stream.set_data(changed)
        if getattr(stream, "decoded_self", None) is not None:
            stream.decoded_self = None  # pypdf keeps the decoded copy; the merge needs none
    return seen


def _number_tree(node: Any, found: dict[int, Any]) -> dict[int, Any]:
    node = node.get_object()
    nums = node.get("/Nums")
    if nums is not None:
        nums = nums.get_object()
        for index in range(0, len(nums) - 1, 2):
            found[int(nums[index])] = nums[index + 1]
    for kid in node.get("/Kids") or ():
        _number_tree(kid, found)
    return found


class StructureMerger:
    """Builds the merged file's structure tree from the trees of its parts."""

    def __init__(self, writer: PdfWriter) -> None:
        self.writer = writer
        self.root_ref: IndirectObject | None = None      # made with the first tagged part
        self.document_ref: IndirectObject | None = None
        self.untagged: list[int] = []
        self.tops: dict[int, list[IndirectObject]] = {}
        self.nums: list[tuple[int, PdfObject]] = []
        self.missing: list[str] = []
        self.lang: str | None = None
        self.pages: list[DictionaryObject] = []
        self._next_key = 0

    def _key(self) -> int:
        self._next_key += 1
        return self._next_key - 1

    def add_part(self, order: int, reader: PdfReader, pages: Sequence[DictionaryObject]) -> None:
        """Copy the tree of ``reader`` (part number ``order``: 0 the front matter, then the
        bodies), whose pages were copied as ``pages`` of the writer, in the same order."""
        self.pages += pages
        catalog = reader.trailer["/Root"].get_object()
        tree = catalog.get("/StructTreeRoot")
        if tree is None:
            self.untagged.append(order)
            return
        tree = tree.get_object()
        if self.root_ref is None or self.document_ref is None:
            self.root_ref = add_indirect(self.writer, DictionaryObject())
            self.document_ref = add_indirect(self.writer, DictionaryObject())
        if self.lang is None and catalog.get("/Lang"):
            self.lang = str(catalog["/Lang"])
        page_map = {source.indirect_reference.idnum: target.indirect_reference
                    for source, target in zip(reader.pages, pages)}
        annotation_map: dict[int, IndirectObject] = {}
        for source, target in zip(reader.pages, pages):
            before, after = source.get("/Annots"), target.get("/Annots")
            for old, new in zip(before.get_object() if before is not None else (),
                                after.get_object() if after is not None else ()):
                if isinstance(old, IndirectObject) and isinstance(new, IndirectObject):
                    annotation_map[old.idnum] = new
        copy = _PartCopy(self, order, page_map, annotation_map)
        top = tree.get("/K")
        top = top.get_object() if top is not None else ArrayObject()
        top = list(top) if isinstance(top, ArrayObject) else [top]
        if len(top) == 1 and top[0].get_object().get("/S") == "/Document":
            kids = top[0].get_object().get("/K") or ArrayObject()
            kids = kids.get_object()
            top = list(kids) if isinstance(kids, ArrayObject) else [kids]
        self.tops[order] = [copy.element(kid, self.document_ref) for kid in top]
        numbers = _number_tree(tree["/ParentTree"], {})
        for index, (source, target) in enumerate(zip(reader.pages, pages)):
            self._page(order, index, source, target, numbers, copy)
        for source, target in zip(reader.pages, pages):
            for annotation in (target.get("/Annots") or ()):
                annotation = annotation.get_object()
                key = annotation.get("/StructParent")
                if key is None:
                    continue
                value = numbers.get(int(key))
                new = copy.copied.get(value.idnum) if isinstance(value, IndirectObject) else None
                if new is None:
                    self.missing.append(f"part {order}: an annotation's element is not in the tree")
                    continue
                number = self._key()
                annotation[NameObject("/StructParent")] = NumberObject(number)
                self.nums.append((number, new))
        self.missing += copy.missing
        for (page_id, mcid), count in copy.references.items():
            if count != 1:
                self.missing.append(f"part {order}: MCID {mcid} is referenced by {count} elements")

    def _page(self, order: int, index: int, source: Any, target: DictionaryObject,
              numbers: dict[int, Any], copy: _PartCopy) -> None:
        key = source.get("/StructParents")
        entries = numbers.get(int(key)) if key is not None else None
        entries = entries.get_object() if entries is not None else ArrayObject()
        page_id = target.indirect_reference.idnum
        row = ArrayObject()
        left_out = set()
        for mcid, value in enumerate(entries):
            new = copy.copied.get(value.idnum) if isinstance(value, IndirectObject) else None
            if new is None:
                left_out.add(mcid)
            row.append(new if new is not None else NullObject())
        marked = mark_artifacts(target, left_out)
        referenced = {mcid for (page, mcid) in copy.references if page == page_id}
        for mcid in sorted(set(marked) | referenced):
            if marked.get(mcid, 0) != 1 or mcid not in referenced:
                self.missing.append(f"part {order} page {index + 1}: MCID {mcid} is marked "
                                    f"{marked.get(mcid, 0)} time(s), "
                                    f"{'in' if mcid in referenced else 'not in'} the tree")
        number = self._key()
        target[NameObject("/StructParents")] = NumberObject(number)
        self.nums.append((number, add_indirect(self.writer, row)))

    def finish(self, order: Sequence[int]) -> bool:
        """Add the tree to the catalog if it is whole (parts in ``order``); return whether."""
        if self.tops and self.untagged:
            self.missing.append("part(s) " + ", ".join(map(str, self.untagged))
                                + " have no structure tree")
        if self.missing or not self.tops or self.root_ref is None or self.document_ref is None:
            for page in self.pages:
                if "/StructParents" in page:
                    del page[NameObject("/StructParents")]
            if self.missing:
                LOGGER.warning("report.pdf is not tagged: %s%s", "; ".join(self.missing[:5]),
                               f" (and {len(self.missing) - 5} more)"
                               if len(self.missing) > 5 else "")
            return False
        document = self.document_ref.get_object()
        document.update({
            NameObject("/Type"): NameObject("/StructElem"),
            NameObject("/S"): NameObject("/Document"),
            NameObject("/P"): self.root_ref,
            NameObject("/K"): ArrayObject(ref for part in order for ref in self.tops.get(part, ())),
        })
        nums = ArrayObject()
        for number, value in sorted(self.nums, key=lambda item: item[0]):
            nums += [NumberObject(number), value]
        self.root_ref.get_object().update({
            NameObject("/Type"): NameObject("/StructTreeRoot"),
            NameObject("/K"): self.document_ref,
            NameObject("/ParentTree"): add_indirect(self.writer, DictionaryObject(
                {NameObject("/Nums"): nums})),
            NameObject("/ParentTreeNextKey"): NumberObject(self._next_key),
        })
        root = self.writer.root_object
        root[NameObject("/StructTreeRoot")] = self.root_ref
        root[NameObject("/MarkInfo")] = DictionaryObject(
            {NameObject("/Marked"): BooleanObject(True)})
        if self.lang:
            root[NameObject("/Lang")] = TextStringObject(self.lang)
        return True


class _PartCopy:
    """The elements of one part copied into the writer (source object number -> copy)."""

    def __init__(self, merger: StructureMerger, order: int, page_map: dict[int, IndirectObject],
                 annotation_map: dict[int, IndirectObject]) -> None:
        self.writer = merger.writer
        self.order = order
        self.page_map = page_map
        self.annotation_map = annotation_map
        self.copied: dict[int, IndirectObject] = {}
        self.references: Counter[tuple[int, int]] = Counter()  # (page object, MCID)
        self.missing: list[str] = []

    def _id(self, value: Any) -> ByteStringObject:
        raw = value.get_original_bytes() if hasattr(value, "get_original_bytes") else bytes(value)
        return ByteStringObject(f"p{self.order}-".encode() + raw)

    def _page(self, value: Any) -> IndirectObject | None:
        page = self.page_map.get(value.idnum) if isinstance(value, IndirectObject) else None
        if page is None:
            self.missing.append(f"part {self.order}: an element's page is not in the report")
        return page

    def element(self, source: Any, parent: IndirectObject) -> IndirectObject:
        obj = source.get_object()
        new = DictionaryObject()
        reference = add_indirect(self.writer, new)
        if isinstance(source, IndirectObject):
            self.copied[source.idnum] = reference
        new[NameObject("/P")] = parent
        page = None
        if "/Pg" in obj:
            page = self._page(obj.raw_get("/Pg"))
            if page is not None:
                new[NameObject("/Pg")] = page
        for key, value in obj.items():
            if key in DROPPED_KEYS:
                continue
            new[NameObject(key)] = value.get_object().clone(self.writer)
        if "/ID" in obj:
            new[NameObject("/ID")] = self._id(obj["/ID"].get_object())
        if "/A" in obj:
            new[NameObject("/A")] = self._attributes(obj["/A"].get_object())
        if obj.get("/S") == "/Figure" and not obj.get("/Alt") and not obj.get("/ActualText"):
            self.missing.append(f"part {self.order}: a figure without alternative text")
        kids = obj.raw_get("/K") if "/K" in obj else None
        if kids is not None:
            kids = kids.get_object()
            items = list(kids) if isinstance(kids, ArrayObject) else [kids]
            new[NameObject("/K")] = ArrayObject(
                kid for kid in (self._kid(item, reference, page) for item in items)
                if kid is not None)
        return reference

    def _attributes(self, value: Any) -> PdfObject:
        if isinstance(value, ArrayObject):
            return ArrayObject(self._attributes(item.get_object()) for item in value)
        copied = value.clone(self.writer)
        if isinstance(copied, DictionaryObject) and "/Headers" in copied:
            copied[NameObject("/Headers")] = ArrayObject(
                self._id(item.get_object()) for item in value["/Headers"])
        return copied

    def _kid(self, item: Any, parent: IndirectObject, page: IndirectObject | None
             ) -> PdfObject | None:
        obj = item.get_object()
        if isinstance(obj, int) and not isinstance(obj, bool):
            if page is None:
                self.missing.append(f"part {self.order}: an MCID without a page")
                return None
            self.references[(page.idnum, int(obj))] += 1
            return NumberObject(int(obj))
        if not isinstance(obj, DictionaryObject):
            self.missing.append(f"part {self.order}: an element kid of unknown kind")
            return None
        kind = obj.get("/Type")
        if kind == "/MCR":
            own = self._page(obj.raw_get("/Pg")) if "/Pg" in obj else page
            if own is None or "/Stm" in obj:
                self.missing.append(f"part {self.order}: a marked-content reference not on a page")
                return None
            self.references[(own.idnum, int(obj["/MCID"]))] += 1
            return DictionaryObject({NameObject("/Type"): NameObject("/MCR"),
                                     NameObject("/Pg"): own,
                                     NameObject("/MCID"): NumberObject(int(obj["/MCID"]))})
        if kind == "/OBJR":
            target = obj.raw_get("/Obj") if "/Obj" in obj else None
            annotation = (self.annotation_map.get(target.idnum)
                          if isinstance(target, IndirectObject) else None)
            if annotation is None:
                return None  # an internal link the part left out; the merge adds its own
            own = self._page(obj.raw_get("/Pg")) if "/Pg" in obj else page
            reference = DictionaryObject({NameObject("/Type"): NameObject("/OBJR"),
                                          NameObject("/Obj"): annotation})
            if own is not None:
                reference[NameObject("/Pg")] = own
            return reference
        return self.element(item, parent)
