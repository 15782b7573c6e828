"""Turn the report's HTML parts into one PDF, rendering the parts in parallel.

One WeasyPrint render of our 2,000-link report takes about 18 minutes and 12 GB on
a 2-core machine (benchmarks/README.md), and its memory grows with the document. So the body parts
are rendered separately in worker processes (a fresh process per part keeps memory
flat) and merged with pikepdf (qpdf); what spans parts is rebuilt after the merge
(:mod:`reportgen.pdf.merge`): page numbers, links between parts, the outline.

The front matter (cover, contents, summary) shows page numbers. Ours leaves a slot of
fixed width for each (see :class:`reportgen.pdf.weasy.PageSlot`), so its layout does
not depend on them: it is rendered once, while the workers are busy, and the numbers
are written into the slots after the merge. A front matter that prints the numbers
as text (a project's own templates may) is rendered again after the bodies, until
its page count and every page number it asked for are consistent.
"""

from __future__ import annotations

import gc
import io
import logging
import time
import traceback
from collections import deque
from collections.abc import Callable, Iterator, Mapping, Sequence
from concurrent.futures import Future, ThreadPoolExecutor
from contextlib import contextmanager
from dataclasses import dataclass, replace
from datetime import datetime
from functools import partial
from multiprocessing.connection import Connection, wait
from multiprocessing.process import BaseProcess
from pathlib import Path
from typing import TYPE_CHECKING, Any, BinaryIO, Final, Protocol

from reportgen import interrupt
from reportgen.errors import ReportgenError, WorkerTraceback
from reportgen.pdf.archive import Attachment
from reportgen.pdf.cache import PartCache, part_key
from reportgen.pdf.forkserver import worker_context
from reportgen.pdf.weasy import RenderedPart, render_part
from reportgen.pdf.merge import PageCopier, Seal, finish_pdf
from reportgen.pdf.stamp import check_label_text

if TYPE_CHECKING:
    from reportgen.pdf.cluster import ClusterSession

LOGGER = logging.getLogger(__name__)

FrontMatter = Callable[[Mapping[str, int], int], str]
Progress = Callable[[int, int], None]

MAX_FRONT_RENDERS: Final = 6
# Parts looked up ahead in the part cache while every slot is busy, at most this many
# of them not found there and held (their HTML) until a slot frees: a rebuild finds its
# cached parts while the changed ones render, a full build keeps a few documents ready.
LOOKAHEAD_PARTS: Final = 8
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


def _part_process(jobs: Connection, results: Connection) -> None:
    """Body of a worker process: wait for one part, render it, send it back (or the error).

    The process is started before its part is known (see :class:`_Workers`); it ends
    without a word if the job pipe closes first. It renders one part and exits, and
    the system takes back all its memory then, so Python's cycle collector is switched
    off: it would only walk the growing layout over and over (a quarter of the render
    time, for no memory saved, measured on 40-sheet parts).
    """
    gc.freeze()
    gc.disable()
    try:
        try:
            html, root, xml_first = jobs.recv()
        except EOFError:
            return
        finally:
            jobs.close()
        results.send(("done", render_part(html, Path(root), xml_first=xml_first)))
    except Exception as error:  # reported by the parent, with the part's number
        results.send(("failed", f"{type(error).__name__}: {error}", traceback.format_exc()))
    finally:
        results.close()


@dataclass
class _Worker:
    process: BaseProcess
    jobs: Connection        # this end sends the part
    results: Connection     # this end receives the rendered part


class _Workers:
    """Worker processes forked from a fork server, with one kept ready in advance.

    Starting a process through the fork server takes up to a second on a busy machine;
    a worker started while the others render is waiting when a slot frees.
    """

    def __init__(self) -> None:
        self.context = worker_context()
        self.spare: _Worker | None = None
        self.serial = 0

    def start(self) -> _Worker:
        self.serial += 1
        job_receiver, job_sender = self.context.Pipe(duplex=False)
        result_receiver, result_sender = self.context.Pipe(duplex=False)
        process = self.context.Process(target=_part_process, args=(job_receiver, result_sender),
                                       name=f"reportgen-part-{self.serial}", daemon=True)
        process.start()
        job_receiver.close()
        result_sender.close()
        return _Worker(process, job_sender, result_receiver)

    def take(self) -> _Worker:
        worker, self.spare = self.spare or self.start(), None
        return worker

    def prepare(self) -> None:
        if self.spare is None:
            self.spare = self.start()

    def close(self) -> None:
        if self.spare is not None:
            self.spare.jobs.close()      # it ends without rendering anything
            self.spare.process.join()
            self.spare.results.close()
            self.spare = None


class _LocalSlots:
    """Renders parts in fresh local worker processes, ``capacity`` at a time."""

    def __init__(self, capacity: int) -> None:
        self.capacity = capacity
        self.pool = _Workers()
        self.running: dict[Connection, tuple[int, BaseProcess]] = {}

    def free(self) -> bool:
        return len(self.running) < self.capacity

    def busy(self) -> bool:
        return bool(self.running)

    def send(self, index: int, html: str, root: Path, xml_first: bool) -> None:
        worker = self.pool.take()
        worker.jobs.send((html, str(root), xml_first))
        worker.jobs.close()
        self.running[worker.results] = (index, worker.process)

    def prepare(self) -> None:
        self.pool.prepare()

    def wait(self, block: bool = True) -> list[tuple[int, RenderedPart]]:
        finished = []
        for receiver in wait(list(self.running), None if block else 0):
            index, process = self.running.pop(receiver)
            finished.append((index, _receive_part(receiver, index, process)))
        return finished

    def close(self) -> None:
        for receiver, (_, process) in self.running.items():
            process.terminate()
            process.join()
            receiver.close()
        self.running.clear()
        self.pool.close()


class Slots(Protocol):
    """Where parts are rendered: local processes (:class:`_LocalSlots`) or a cluster
    (:class:`reportgen.pdf.cluster.ClusterSlots`)."""

    def free(self) -> bool: ...
    def busy(self) -> bool: ...
    def send(self, index: int, html: str, root: Path, xml_first: bool) -> None: ...
    def prepare(self) -> None: ...
    def wait(self, block: bool = True) -> list[tuple[int, RenderedPart]]: ...
    def close(self) -> None: ...


@dataclass(frozen=True)
class RenderPlan:
    """Where the parts of one PDF are rendered and kept: local processes or a cluster,
    and the part cache (None: render every part)."""

    workers: int = 2
    cache: PartCache | None = None
    cluster: ClusterSession | None = None

    def slots(self, workers: int | None = None) -> Slots:
        if self.cluster is not None:
            return self.cluster.slots()
        return _LocalSlots(self.workers if workers is None else workers)


def _render_bodies(bodies: Sequence[str], root: Path, workers: int,
                   on_done: Callable[[int], None], xml_first: bool,
                   on_part: Callable[[int, RenderedPart], None] | None = None,
                   plan: RenderPlan | None = None) -> list[RenderedPart]:
    """Render each body in a fresh worker process, ``workers`` at a time, in any order.

    A process per part keeps memory flat: everything WeasyPrint built is returned to
    the system when the part is done. The processes are forked from a fork server
    (started once, with WeasyPrint imported), not from this process, which may be
    running threads (the front matter estimate, a progress display). Like every
    multiprocessing program, the calling script must guard its entry point with
    ``if __name__ == "__main__":``. ``on_done(count)`` is called as each part finishes,
    ``on_part(index, part)`` with each part, while the others are still rendering; it
    takes the part's PDF bytes (the parts returned then have none, ``pdf == b""``).
    ``bodies[index]`` is read only when the part is about to be sent, so ``bodies``
    may produce its documents on demand.

    With ``plan.cache``, a part found in the part cache is not rendered (it counts as
    finished at once) and each rendered part is stored; with ``plan.cluster``, parts
    are rendered on the cluster instead of local processes.
    """
    plan = plan or RenderPlan(workers)
    cache = plan.cache
    slots = plan.slots(workers)
    waiting = deque(range(len(bodies)))
    ready: deque[tuple[int, str, str | None]] = deque()  # (index, HTML, cache key): to send
    rendered: list[RenderedPart | None] = [None] * len(bodies)
    keys: dict[int, str] = {}
    done = 0

    def finished(index: int, part: RenderedPart) -> None:
        nonlocal done
        rendered[index] = part
        arrived.append(index)
        done += 1
        on_done(done)

    def look_up_next() -> None:
        """Take the next waiting part: finished at once when the cache has it, else ready."""
        index = waiting.popleft()
        html = bodies[index]
        key = part = None
        if cache is not None:
            key = part_key(html, root, xml_first)
            part = cache.get(key, root)
        if part is not None:
            finished(index, part)
        else:
            ready.append((index, html, key))

    def take_arrivals(block: bool) -> None:
        for index, part in slots.wait(block):
            if cache is not None:
                cache.put(keys.pop(index), part)
            finished(index, part)

    arrived: list[int] = []
    try:
        while waiting or ready or slots.busy():
            interrupt.check()  # a Ctrl-C whose exception was lost or held back
            while slots.free() and (ready or waiting):
                if not ready:
                    look_up_next()
                    continue
                index, html, key = ready.popleft()
                if key is not None:
                    keys[index] = key
                slots.send(index, html, root, xml_first)
            _hand_over(arrived, rendered, on_part)
            if waiting and len(ready) < LOOKAHEAD_PARTS:
                # every slot busy: look the next part up meanwhile (a lazy sequence
                # renders its document now), and a spare worker is started for it
                look_up_next()
                if ready:
                    slots.prepare()
                if slots.busy():
                    take_arrivals(block=False)
            elif slots.busy():
                take_arrivals(block=True)
        _hand_over(arrived, rendered, on_part)
    finally:
        slots.close()
    return [part for part in rendered if part is not None]


def _hand_over(arrived: list[int], rendered: list[RenderedPart | None],
               on_part: Callable[[int, RenderedPart], None] | None) -> None:
    """Give each arrived part to ``on_part``, which takes its PDF bytes: the part kept
    for the caller has none (its pages, anchors and bookmarks are all the merge needs
    later), so a long report's parts are not all held in memory."""
    for index in arrived:
        part = rendered[index]
        if on_part is not None and part is not None:
            on_part(index, part)
            rendered[index] = replace(part, pdf=b"")
    arrived.clear()


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
        raise ReportgenError(f"rendering body part {index + 1} of the PDF failed: {message}"
                             ) from WorkerTraceback(details)
    return payload[0]


def _probe_front(front: FrontMatter, root: Path, xml_first: bool,
                 plan: RenderPlan | None = None) -> tuple[RenderedPart, bool]:
    """Render the front matter once with placeholder page numbers, to learn its length.

    Rendered in its own process, so that its memory is returned when it is done.
    Returns the part and whether the front matter looked up any page number. One
    that did not (it leaves page slots instead) is final as rendered here.
    """
    page_map = PageMap({}, PROBE_PAGE_NUMBER)
    html = front(page_map, PROBE_PAGE_NUMBER)
    return _render_isolated(html, root, xml_first=xml_first, plan=plan), bool(page_map.used)


def _render_isolated(html: str, root: Path, *, xml_first: bool = False,
                     plan: RenderPlan | None = None) -> RenderedPart:
    """Render one document in a worker process (this one stays free for other work)."""
    return _render_bodies([html], root, 1, lambda finished: None, xml_first, plan=plan)[0]


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


@contextmanager
def _cycle_collector_paused() -> Iterator[None]:
    """Pause Python's cycle collector while the pages are copied and merged.

    Merging builds millions of small objects that stay alive until the file is
    written; each collection walks all of them again, which made the copy about twice
    as slow (500-sheet report, measured). The previous setting is restored after.
    """
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()


def render_pdf(front: FrontMatter, bodies: Sequence[str], **options: Any) -> bytes:
    """:func:`write_pdf` into memory: the PDF's bytes (the same ``options``, but ``into``)."""
    into = io.BytesIO()
    write_pdf(front, bodies, into=into, **options)
    return into.getvalue()


def write_pdf(front: FrontMatter, bodies: Sequence[str], *, into: BinaryIO, root: Path,
              title: str, page_label: str = "Page {page} of {pages}", created: datetime,
              workers: int = 2, progress: Progress | None = None,
              xml_first: bool = False, cache: PartCache | None = None,
              cluster: str | ClusterSession | None = None, author: str = "",
              attachments: Sequence[Attachment] = (), seal: Seal | None = None,
              language: str = "en", release: Callable[[], None] | None = None) -> None:
    """Render the front matter and body parts into one PDF, written into ``into``.

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
    language
        The document's language (BCP 47 code, e.g. ``de``), written as the catalog's /Lang.
    workers
        Worker processes rendering the bodies (``reportgen build --jobs``).
    progress
        Called as ``progress(done_parts, total_parts)``; the parts are the bodies
        plus one last step (front matter and assembly). A part taken from the cache
        counts as done when it is found, a part rendered locally or on a cluster when
        it arrives.
    cache
        The part cache (:mod:`reportgen.pdf.cache`): parts found there are not
        rendered, rendered parts are stored, and entries this build did not use are
        removed once the PDF is done. None renders every part.
    cluster
        Address of a Dask scheduler (``tcp://host:8786``), or a session with one the
        caller opened: the parts are rendered by its workers (:mod:`reportgen.pdf.cluster`);
        the merge stays here.
    xml_first
        The documents come from our own templates, which write well-formed XML:
        read them with the standard library's XML parser, falling back to
        WeasyPrint's HTML parser for any that is not (see
        :func:`reportgen.pdf.weasy.parse_xml`).
    author, attachments
        The archive file's author and embedded files (:mod:`reportgen.pdf.archive`).
    seal
        Signs the finished file (see :func:`reportgen.pdf.merge.finish_pdf`).
    release
        Called once every page is rendered, before the file is finished (the merge's
        largest step): the caller drops what it no longer needs, such as the report's
        documents; ``front`` and ``bodies`` are not read after it.
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
    with _cluster_session(cluster) as session:
        plan = RenderPlan(workers, cache, session)
        with _cycle_collector_paused(), ThreadPoolExecutor(max_workers=1) as thread:
            estimate: Future[tuple[RenderedPart, bool]] = thread.submit(
                _probe_front, front, root, xml_first, plan)
            # copies each body's pages while the later ones render
            with PageCopier() as copier:
                body_parts = (_render_bodies(bodies, root, workers, report, xml_first,
                                             copier.offer, plan)
                              if bodies else [])
                first_front, asked_numbers = estimate.result()
                bodies_done_s = time.perf_counter()
                front_part = first_front
                if asked_numbers:
                    front_part = _settle_front(front, body_parts, root, first_front,
                                               partial(_render_isolated, xml_first=xml_first,
                                                       plan=plan))
                front_done_s = time.perf_counter()
                del front, bodies  # this function's references: ``release`` frees the rest
                if release is not None:
                    release()
                finish_pdf(copier, front_part, body_parts, title=title,
                           page_label=page_label, created=created, author=author,
                           language=language, attachments=attachments, seal=seal, into=into)
    LOGGER.info("PDF: bodies and front matter %.1f s, front matter again %.1f s, "
                "finishing %.1f s", bodies_done_s - started_s,
                front_done_s - bodies_done_s, time.perf_counter() - front_done_s)
    if cache is not None:
        stats = cache.stats
        LOGGER.info("PDF parts: %d from the cache, %d rendered %s (%d cache entries ignored)",
                    stats.hits, stats.misses + stats.ignored,
                    f"on the cluster at {session.address}" if session is not None
                    else f"by {workers} local processes",
                    stats.ignored)
        cache.prune()
    report(total_steps)


@contextmanager
def _cluster_session(cluster: str | ClusterSession | None) -> Iterator[ClusterSession | None]:
    """A connection to the Dask scheduler at ``cluster`` for one build, or None; a session
    the caller opened (and closes) is used as it is."""
    if cluster is None or not isinstance(cluster, str):
        yield cluster
        return
    from reportgen.pdf.cluster import ClusterSession

    session = ClusterSession.connect(cluster)
    try:
        yield session
    finally:
        session.close()
