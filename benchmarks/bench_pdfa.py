"""Time what the archive file adds to a build: manifest, embedding, PDF/A, signing.

Usage (from the repository root)::

    python benchmarks/bench_pdfa.py [--links 2000] [--pages 2100]

Makes a synthetic project (benchmarks/make_synthetic.py), loads and judges it, then times:

1. reading the project's files again and making the manifest (``pipeline.archive_of``);
2. finishing a merged PDF of ``--pages`` pages without and with the archive step
   (``make_archival``: XMP, output intent, attachments), each written by qpdf (pikepdf)
   with object streams as a build does. The pages are copies of the demo report's pages, so no WeasyPrint
   render is needed; the attachments are the synthetic project's files and outputs;
3. signing the result (PAdES B-B, a key made here).

The overhead is compared with the wall time of the 2,000-link build in benchmarks/README.md.
Timings are printed, never asserted.
"""
from __future__ import annotations

import argparse
import io
import sys
import tempfile
import time
from datetime import datetime, timezone
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
sys.path.insert(0, str(Path(__file__).resolve().parent))

import pikepdf  # noqa: E402

from make_synthetic import make_project  # noqa: E402
from reportgen import pipeline  # noqa: E402
from reportgen.export.results_csv import results_csv_bytes  # noqa: E402
from reportgen.export.summary import json_bytes  # noqa: E402
from reportgen.pdf.archive import make_archival, save_options  # noqa: E402

NOW = datetime(2030, 1, 15, 9, 30, tzinfo=timezone.utc)
DEMO_PDF_HINT = "build the demo first: reportgen build demo_project -o /tmp/demo-report"


def finished(demo: Path, count: int, attachments: list | None) -> bytes:
    pdf = pikepdf.Pdf.new()
    sources = []
    while len(pdf.pages) < count:   # a fresh copy of the demo per round: distinct objects
        sources.append(pikepdf.open(demo))
        pdf.pages.extend(sources[-1].pages[:count - len(pdf.pages)])
    if attachments is not None:
        make_archival(pdf, title="t", author="a", creator="c", producer="p", created=NOW,
                      attachments=attachments)
    buffer = io.BytesIO()
    pdf.save(buffer, **save_options())
    return buffer.getvalue()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--links", type=int, default=2000)
    parser.add_argument("--pages", type=int, default=2100)
    parser.add_argument("--demo-pdf", type=Path, default=Path("/tmp/demo-report/report.pdf"))
    args = parser.parse_args()
    if not args.demo_pdf.is_file():
        sys.exit(f"{args.demo_pdf} not found; {DEMO_PDF_HINT}")
    with tempfile.TemporaryDirectory() as folder:
        root = make_project(Path(folder) / "project", args.links)
        outcome = pipeline.compute(pipeline.validate_only(root))
        results = results_csv_bytes(outcome.judgement.results)
        started = time.perf_counter()
        archive = pipeline.archive_of(outcome, results, now=NOW, version="bench")
        summary = json_bytes(pipeline.summary_document(outcome, NOW, "bench", archive.digest))
        attachments = pipeline.attachments_of(archive, summary)
        manifest_s = time.perf_counter() - started
        size = sum(len(a.data) for a in attachments)
        print(f"manifest of {len(archive.inputs)} inputs + outputs ({size / 1e6:.1f} MB "
              f"attached): {manifest_s:.2f} s")
        started = time.perf_counter()
        plain = finished(args.demo_pdf, args.pages, None)
        plain_s = time.perf_counter() - started
        started = time.perf_counter()
        archived = finished(args.demo_pdf, args.pages, attachments)
        archived_s = time.perf_counter() - started
        print(f"finish {args.pages} pages: plain {plain_s:.1f} s ({len(plain) / 1e6:.1f} MB), "
              f"archive {archived_s:.1f} s ({len(archived) / 1e6:.1f} MB): "
              f"+{archived_s - plain_s:.1f} s")
        from tests.test_verify import _key_and_certificate  # key made as in the tests
        from reportgen.pdf.sign import load_signing_key, sign_pdf
        p12, _ = _key_and_certificate(Path(folder), "Bench Signer", b"pw")
        key = load_signing_key(p12.read_bytes(), b"pw", str(p12))
        started = time.perf_counter()
        sign_pdf(archived, {}, key=key)
        sign_s = time.perf_counter() - started
        print(f"sign: {sign_s:.1f} s")
        total = manifest_s + (archived_s - plain_s) + sign_s
        print(f"added by the archive file and signing: {total:.1f} s "
              f"(the 2,000-link build takes about 440 s: {total / 440 * 100:.1f} %)")


if __name__ == "__main__":
    main()
