"""The only place that relies on pypdf beyond its documented API.

:mod:`reportgen.pdf.merge` and :mod:`reportgen.pdf.stamp` build PDF objects that
pypdf's documented methods do not make for us (link annotations with our own
rectangles, a subset font, page-number content streams, named destinations in sorted
order). They reach the writer's object table through the functions below, never
directly, so that a pypdf release that changes one of these can be fixed here.

Every use, why we need it, and where it was checked (tests/test_pdf_internals.py has
one test per use; run it before raising the pypdf bound in pyproject.toml):

1. ``PdfWriter._add_object(obj)`` (private), in :func:`add_indirect`. Appends ``obj``
   to the writer's object table and returns an :class:`~pypdf.generic.IndirectObject`
   that resolves to it in this writer (an object already in this writer gets its
   existing reference). pypdf has no public way to add a free-standing object: its
   public methods add pages, outline items and annotations of its own design only.
   Used for the link annotations (merge.add_links), the stamp font's file stream,
   descriptor and font dictionary (stamp), the shared ``q``
   stream and each page's stamp stream (stamp.Stamper). Checked on pypdf 7.1.1.
2. ``PdfWriter.get_named_dest_root()`` (public name, undocumented behaviour), in
   :func:`named_destination_array`. Returns the live ``/Names`` array of the
   catalog's ``/Dests`` name tree, creating the tree if missing, so that extending
   the array adds named destinations. merge.add_named_destinations appends all names
   in sorted order in one pass (the public ``add_named_destination`` inserts one name
   at a time by a linear search, and makes a GoTo action per name that we do not
   want). Checked on pypdf 7.1.1.
3. ``PdfWriter._ID`` (private attribute), in :func:`set_file_identifier`. The
   trailer's ``/ID`` pair, which PDF/A requires (ISO 19005-3, 6.1.3) and which pypdf
   writes only when the attribute is set (it sets it itself only when encrypting).
   Ours is derived from the content, so builds stay byte-identical (qpdf's
   ``--deterministic-id`` replaces it by its own, also derived from the content, when
   the file is repacked). Used by archive.make_archival. Checked on pypdf 7.1.1.
4. ``PdfReader.xref`` and ``PdfReader.xref_objStm`` (public names, undocumented), in
   :func:`parse_all_objects`. The numbers of the objects in a file (direct, and inside
   object streams); getting each once with the documented ``PdfReader.get_object``
   parses it, and pypdf keeps what it parsed, so pages copied from that reader later
   are not parsed again (merge.PageCopier parses a part while an earlier one renders).
   Checked on pypdf 7.1.1.

Everything else the pdf package does with pypdf uses documented API: ``PdfReader``
(``trailer``, ``pages``), ``PdfWriter.add_page``/``insert_page`` (and the page they
return)/``add_outline_item``/``add_metadata``/``metadata``/``root_object``/
``compress_identical_objects``/``write``, ``page_mode``, ``indirect_reference`` and
the objects of :mod:`pypdf.generic` (``DictionaryObject.raw_get``, ``clone``,
``get_data``/``set_data`` of a content stream, used by :mod:`reportgen.pdf.tags`).
"""

from __future__ import annotations

from pypdf import PdfReader, PdfWriter
from pypdf.generic import ArrayObject, ByteStringObject, IndirectObject, PdfObject


def add_indirect(writer: PdfWriter, obj: PdfObject) -> IndirectObject:
    """Add ``obj`` to ``writer`` as an indirect object and return its reference (use 1)."""
    return writer._add_object(obj)


def named_destination_array(writer: PdfWriter) -> ArrayObject:
    """The writer's array of named destinations (name, destination, ...), live (use 2).

    Items appended to it are written as named destinations; the names must be kept
    in sorted order (ISO 32000-1, 7.9.6: the keys of a name tree are sorted).
    """
    return writer.get_named_dest_root()


def set_file_identifier(writer: PdfWriter, identifier: bytes) -> None:
    """Write ``identifier`` as both halves of the trailer's ``/ID`` (use 3)."""
    writer._ID = ArrayObject([ByteStringObject(identifier), ByteStringObject(identifier)])


def parse_all_objects(reader: PdfReader) -> None:
    """Parse every object of ``reader``'s file now; pypdf keeps them parsed (use 4)."""
    for number in list(reader.xref_objStm):
        reader.get_object(number)
    for generation, entries in reader.xref.items():
        for number in entries:
            reader.get_object(IndirectObject(number, generation, reader))
