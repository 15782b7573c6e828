"""Stage 4, pdf: HTML parts to one PDF. Worker processes, merge, page stamps, links.

Takes finished HTML documents (it knows nothing of links or verdicts) and returns the
bytes of report.pdf: an archive file (PDF/A-3u, :mod:`reportgen.pdf.archive`) with the
files it is given attached, signed on request (:mod:`reportgen.pdf.sign`). :mod:`reportgen.pdf.weasy` is the only module that touches
WeasyPrint's internals and :mod:`reportgen.pdf.pikepdf_access` the only one that relies on
pikepdf (qpdf, which builds and writes the merged file) beyond its documented API; each
lists what it uses (tests/test_pdf_internals.py checks every item).

May import: ``reportgen.errors``, ``reportgen.interrupt``, ``reportgen.__version__`` and modules
of this package.
"""
