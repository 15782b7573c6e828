"""Turn the report's HTML parts into one PDF, rendering the parts in parallel.

One WeasyPrint render of a 2,000-page report takes about 6 minutes and 6 GB on a
2-core machine, and its time per page grows with the document. So the body parts
are rendered separately in worker processes (a fresh process per part keeps memory
flat) and merged with pypdf; what spans parts is rebuilt after the merge
(:mod:`reportgen.pdf_merge`): page numbers, links between parts, the outline.

The front matter (cover, contents, summary) shows page numbers, and its own length
shifts them, so it is rendered last, repeatedly, until its page count and every page
number it asked for are consistent. A first estimate is rendered while the workers
are busy, so usually only one more render is needed afterwards.
"""

from __future__ import annotations

import logging
import multiprocessing
import time
import traceback
from collections import deque
from collections.abc import Callable, Iterator, Mapping, Sequence
from concurrent.futures import Future, ThreadPoolExecutor
from datetime import datetime
from multiprocessing.connection import Connection, wait
from multiprocessing.process import BaseProcess
from pathlib import Path
from typing import Final

from .errors import ReportgenError
from .pdf_layout import RenderedPart, render_part
from .pdf_merge import finish_pdf, start_writer
from .pdf_stamp import check_label_text

LOGGER = logging.getLogger(__name__)

FrontMatter = Callable[[Mapping[str, int], int], str]
Progress = Callable[[int, int], None]

MAX_FRONT_RENDERS: Final = 6
PROBE_PAGE_NUMBER: Final = 999        # stands for every page number in the first estimate


class PageMap(Mapping[str, int]):
    """Page of each anchor id, as given to the front matter; records what was looked up.

    With ``fallback`` set (first estimate, before the bodies are laid out), unknown ids
    read as ``fallback`` instead of raising :class:`KeyError`.
    """

    def __init__(self, known: Mapping[str, int], fallback: int | None = None) -> None:
        self._known = dict(known)
        self._fallback = fallback
        self.used: dict[str, int] = {}

    def __getitem__(self, anchor_id: str) -> int:
        if anchor_id in self._known:
            page = self._known[anchor_id]
        elif self._fallback is not None:
            page = self._fallback
        else:
            raise KeyError(anchor_id)
        self.used[anchor_id] = page
        return page

    def __contains__(self, anchor_id: object) -> bool:
        return anchor_id in self._known

    def __iter__(self) -> Iterator[str]:
        return iter(self._known)

    def __len__(self) -> int:
        return len(self._known)


def page_numbers(parts: Sequence[RenderedPart], first_page: int = 1) -> dict[str, int]:
    """Map every anchor id in ``parts`` to its page number; the first occurrence wins."""
    numbers: dict[str, int] = {}
    page = first_page
    for part in parts:
        for anchor_id, anchor in part.anchors.items():
            numbers.setdefault(anchor_id, page + anchor.page_index)
        page += part.page_count
    return numbers


def _part_process(sender: Connection, html: str, root: str) -> None:
    """Body of a worker process: render one part, send it back (or the error), exit."""
    try:
        sender.send(("done", render_part(html, Path(root))))
    except Exception as error:  # reported by the parent, with the part's number
        sender.send(("failed", f"{type(error).__name__}: {error}", traceback.format_exc()))
    finally:
        sender.close()


def _render_bodies(bodies: Sequence[str], root: Path, workers: int,
                   on_done: Callable[[int], None]) -> list[RenderedPart]:
    """Render each body in a fresh worker process, ``workers`` at a time, in any order.

    A process per part keeps memory flat: everything WeasyPrint built is returned to
    the system when the part is done. The processes are forked from a fork server
    (started once, with WeasyPrint imported), not from this process, which may be
    running threads (the front matter estimate, a progress display). Like every
    multiprocessing program, the calling script must guard its entry point with
    ``if __name__ == "__main__":``. ``on_done(count)`` is called as each part finishes.
    """
    context = multiprocessing.get_context("forkserver")
    context.set_forkserver_preload(["reportgen.pdf"])
    waiting = deque(enumerate(bodies))
    running: dict[Connection, tuple[int, BaseProcess]] = {}
    rendered: list[RenderedPart | None] = [None] * len(bodies)
    finished = 0
    try:
        while waiting or running:
            while waiting and len(running) < workers:
                index, html = waiting.popleft()
                receiver, sender = context.Pipe(duplex=False)
                process = context.Process(target=_part_process, args=(sender, html, str(root)),
                                          name=f"reportgen-part-{index + 1}", daemon=True)
                process.start()
                sender.close()
                running[receiver] = (index, process)
            for receiver in wait(list(running)):
                index, process = running.pop(receiver)
                rendered[index] = _receive_part(receiver, index, process)
                finished += 1
                on_done(finished)
    finally:
        for receiver, (_, process) in running.items():
            process.terminate()
            process.join()
            receiver.close()
    return [part for part in rendered if part is not None]


def _receive_part(receiver: Connection, index: int, process: BaseProcess) -> RenderedPart:
    try:
        status, *payload = receiver.recv()
    except EOFError:
        process.join()
        raise ReportgenError(
            f"the process rendering body part {index + 1} ended without a result "
            f"(exit status {process.exitcode}; out of memory?)") from None
    finally:
        receiver.close()
    process.join()
    if status == "failed":
        message, details = payload
        LOGGER.debug("body part %d failed:\n%s", index + 1, details)
        raise ReportgenError(f"rendering body part {index + 1} of the PDF failed: {message}")
    return payload[0]


def _probe_front(front: FrontMatter, root: Path) -> RenderedPart:
    """Render the front matter once with placeholder page numbers, to learn its length.

    Rendered in its own process, so that its memory is returned when it is done.
    """
    return _render_isolated(front(PageMap({}, PROBE_PAGE_NUMBER), PROBE_PAGE_NUMBER), root)


def _render_isolated(html: str, root: Path) -> RenderedPart:
    """Render one document in a worker process (this one stays free for other work)."""
    return _render_bodies([html], root, 1, lambda finished: None)[0]


def _settle_front(front: FrontMatter, bodies: Sequence[RenderedPart], root: Path,
                  estimate: RenderedPart | None,
                  render: Callable[[str, Path], RenderedPart] = render_part) -> RenderedPart:
    """Render the front matter until its length and the numbers it used are consistent."""
    body_pages = sum(part.page_count for part in bodies)
    front_pages = estimate.page_count if estimate else 1
    front_numbers = page_numbers([estimate]) if estimate else {}
    for attempt in range(1, MAX_FRONT_RENDERS + 1):
        known = {**page_numbers(bodies, front_pages + 1), **front_numbers}
        asked = PageMap(known)
        part = render(front(asked, front_pages + body_pages), root)
        actual = {**page_numbers(bodies, part.page_count + 1), **page_numbers([part])}
        LOGGER.debug("front matter render %d: %d pages (assumed %d)",
                     attempt, part.page_count, front_pages)
        if part.page_count == front_pages and all(
                actual.get(anchor_id) == page for anchor_id, page in asked.used.items()):
            return part
        front_pages, front_numbers = part.page_count, page_numbers([part])
    raise ReportgenError(
        f"the front matter's page numbers did not settle after {MAX_FRONT_RENDERS} renders "
        f"(last length {front_pages} pages)")


def render_pdf(front: FrontMatter, bodies: Sequence[str], *, root: Path, title: str,
               page_label: str = "Page {page} of {pages}", created: datetime,
               workers: int = 2, progress: Progress | None = None) -> bytes:
    """Render the front matter and body parts into one PDF and return its bytes.

    Parameters
    ----------
    front
        ``front(page_of, total_pages)`` returns the front matter as a complete HTML
        document, given the 1-based page of every anchor id and the page count.
    bodies
        Complete HTML documents, in report order, after the front matter.
    root
        Project folder: the only place (with ``data:`` URIs) resources are read from.
    title, created
        Document title and creation date written to the PDF's metadata.
    page_label
        Stamped at the bottom right of every page, with ``{page}`` and ``{pages}``.
    workers
        Worker processes rendering the bodies.
    progress
        Called as ``progress(done_parts, total_parts)``; the parts are the bodies
        plus one last step (front matter and assembly).
    """
    if workers < 1:
        raise ValueError(f"workers must be at least 1 (got {workers})")
    check_label_text([page_label.format(page=0, pages=0)])  # fail before the long work
    total_steps = len(bodies) + 1

    def report(done: int) -> None:
        if progress is not None:
            progress(done, total_steps)

    report(0)
    started_s = time.perf_counter()
    with ThreadPoolExecutor(max_workers=1) as thread:
        estimate: Future[RenderedPart] = thread.submit(_probe_front, front, root)
        body_parts = _render_bodies(bodies, root, workers, report) if bodies else []
        first_front = estimate.result()
        bodies_done_s = time.perf_counter()
        # the front matter settles in a worker while this process copies the body pages
        settled: Future[RenderedPart] = thread.submit(
            _settle_front, front, body_parts, root, first_front, _render_isolated)
        writer = start_writer(body_parts)
        front_part = settled.result()
    front_done_s = time.perf_counter()
    pdf = finish_pdf(writer, front_part, body_parts, title=title, page_label=page_label,
                     created=created)
    LOGGER.info("PDF: bodies and first front estimate %.1f s, front matter and page copy "
                "%.1f s, finishing %.1f s", bodies_done_s - started_s,
                front_done_s - bodies_done_s, time.perf_counter() - front_done_s)
    report(total_steps)
    return pdf
