"""Time the serial merge of the PDF parts without rendering them: page copy and finishing.

Usage (from the repository root)::

    python -m reportgen build PROJECT -o OUT               # any build fills OUT/.reportgen-cache
    python benchmarks/bench_merge.py OUT/.reportgen-cache --times 4

The parts are taken from the part cache of an earlier build (``OUT/.reportgen-cache``,
:mod:`reportgen.pdf.cache`) and each is merged ``--times`` times, so a 500-link build's
parts stand for a 2,000-link report (same pages, links and bookmarks per page; anchors
repeated in later copies are ignored by the merge, as in any report). It times what the
build does after the parts are rendered, in the build's own functions: copying each
part's pages into one file (:class:`reportgen.pdf.merge.PageCopier`, pikepdf), then each
step of :func:`reportgen.pdf.merge.finish_pdf` (page stamps, links and outline, the
archive file's metadata, the qpdf write), and the peak memory of this process (the
parts' bytes, held by this script, included). No render, no network.

With ``--distinct-anchors`` every copy's anchors, link targets and bookmarks get a suffix of
their own, so that a copy's links point into that copy, as in a report that many times
larger (without it, anchors repeated in later copies are ignored: far fewer links, outline
items and names than a real report of that size).
"""

from __future__ import annotations

import argparse
import logging
import resource
import sys
import tempfile
import time
from dataclasses import replace
from datetime import datetime, timezone
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from reportgen.pdf import merge  # noqa: E402
from reportgen.pdf.cache import ENTRY_SUFFIX, decode_entry  # noqa: E402
from reportgen.pdf.engine import _cycle_collector_paused  # noqa: E402
from reportgen.pdf.weasy import RenderedPart  # noqa: E402


def distinct(part: RenderedPart, copy: int) -> RenderedPart:
    """``part`` with its anchors, link targets and bookmarks suffixed with ``copy``."""
    if copy == 0:
        return part
    suffix = f"~{copy}"
    pages = tuple(replace(frame, links=tuple(replace(link, target=link.target + suffix)
                                             for link in frame.links))
                  for frame in part.pages)
    return replace(part, pages=pages,
                   anchors={name + suffix: anchor for name, anchor in part.anchors.items()},
                   bookmarks=tuple(replace(bookmark, anchor_id=bookmark.anchor_id + suffix)
                                   for bookmark in part.bookmarks))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("cache", type=Path, help="a part cache folder (OUT/.reportgen-cache)")
    parser.add_argument("--times", type=int, default=1, help="merge each part this many times")
    parser.add_argument("--distinct-anchors", action="store_true",
                        help="each copy's links point into that copy (see above)")
    args = parser.parse_args()
    entries = sorted(args.cache.glob(f"*{ENTRY_SUFFIX}"))
    parts = [decode_entry(path.name[:-len(ENTRY_SUFFIX)], path.read_bytes()) for path in entries]
    parts.sort(key=lambda part: -part.page_count)  # the front: a short one, at the end
    front = parts[-1]
    bodies = [distinct(part, copy) if args.distinct_anchors else part
              for copy in range(args.times) for part in parts[:-1]]
    pages = front.page_count + sum(part.page_count for part in bodies)
    logging.basicConfig(level=logging.WARNING, format="%(message)s")
    logging.getLogger("reportgen.pdf.merge").setLevel(logging.DEBUG)
    with _cycle_collector_paused():
        started, started_cpu = time.perf_counter(), time.process_time()
        with merge.PageCopier() as copier, tempfile.TemporaryFile() as pdf:
            for index, part in enumerate(bodies):
                copier.offer(index, part)
            copied = time.perf_counter()
            copy_cpu = time.process_time()
            merge.finish_pdf(copier, front, bodies, title="Merge benchmark",
                             page_label="Page {page} of {pages}",
                             created=datetime(2030, 1, 1, tzinfo=timezone.utc), into=pdf)
            finished = time.perf_counter()
            size_b = pdf.tell()
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"{pages} pages from {len(bodies) + 1} parts: page copy {copied - started:.2f} s "
          f"({copy_cpu - started_cpu:.2f} s CPU, "
          f"{1000 * (copied - started) / pages:.1f} ms/page), finishing "
          f"{finished - copied:.2f} s ({1000 * (finished - copied) / pages:.1f} ms/page); "
          f"{size_b / 1e6:.1f} MB; peak memory of this process {peak_mb:.0f} MB")


if __name__ == "__main__":
    main()
