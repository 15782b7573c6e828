"""The only place that relies on pikepdf (qpdf) beyond its documented API.

:mod:`reportgen.pdf.merge` copies the pages of a thousand parts or more into one file.
pikepdf's documented way, ``Pdf.pages.extend``/``insert``, counts the pages of the
target for every page added (qpdf 12, pikepdf 10: about 1 ms per page at 20,000 pages,
so minutes for a long report), and each part's ``Pdf`` would have to stay open, with
every object it parsed, until the merged file is saved. The functions below avoid both,
relying on two behaviours that pikepdf does not document:

1. :func:`add_page_copies`: a page copied with the documented ``Pdf.copy_foreign`` (which
   stops at the page tree: the copy's ``/Parent`` comes out null) and put into the
   root ``/Pages`` node's ``/Kids`` with ``/Parent`` and ``/Count`` set (ISO 32000-1,
   7.7.3.2) is a page of the file like one added by ``Pdf.pages``: qpdf reads the page
   tree when the page list is first asked for, so the merge does not ask for it
   (``Pdf.pages``) before every page is in. The file written is byte for byte the one
   ``Pdf.pages.extend`` would write. Checked on pikepdf 10.18 (qpdf 12.4).
2. :func:`open_part`: the pages copied from a part opened from a file (memory-mapped)
   stay whole after that part's ``Pdf`` is dropped (garbage-collected, not closed) and
   its file deleted: pikepdf opens every file for immediate copying (qpdf's
   ``setImmediateCopyFrom``), so qpdf copies the data of each stream it copies into the
   merged file's memory at once (about 10 kB a page of ours), and the objects it parsed
   in the part are freed (about half the memory of the merge). Checked on pikepdf 10.18
   (qpdf 12.4).

tests/test_pdf_internals.py has one test per use; run it before raising the pikepdf
bound in pyproject.toml.
"""

from __future__ import annotations

from pathlib import Path

from pikepdf import AccessMode, Array, Dictionary, Name, Pdf


def add_page_copies(pdf: Pdf, source: Pdf, *, first: bool = False) -> list[Dictionary]:
    """Copy every page of ``source`` into ``pdf``, after its pages (before them with
    ``first``); return the copies in order (use 1)."""
    tree = pdf.Root.Pages
    copies = []
    for page in source.pages:
        copy = pdf.copy_foreign(page.obj)
        copy[Name.Parent] = tree
        copies.append(copy)
    if first:
        tree[Name.Kids] = Array([*copies, *tree.Kids])
    else:
        kids = tree.Kids
        for copy in copies:
            kids.append(copy)
    tree[Name.Count] = len(tree.Kids)
    return copies


def open_part(path: Path) -> Pdf:
    """Open the part at ``path`` for copying; the caller may drop it, and delete the file,
    once its pages are copied (use 2)."""
    return Pdf.open(path, access_mode=AccessMode.mmap)
