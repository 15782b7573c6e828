"""Render the PDF's parts on a Dask distributed cluster (``reportgen build --cluster``).

Only the part renders go to the cluster: loading, judging, the HTML, the part cache
and the merge stay on this machine. Each part is one Dask task,
:func:`render_task`, which calls :func:`reportgen.pdf.weasy.render_part` in a process
forked from a worker for the part
and returns the :class:`~reportgen.pdf.weasy.RenderedPart`; the bytes are those of a
local render because the worker is checked to render as this machine does.

* **Same software, same fonts.** On connecting, every worker reports its
  fingerprint (:func:`worker_fingerprint`: the versions of reportgen, WeasyPrint,
  pydyf and fontTools, a digest of the part-rendering code and of the installed
  fonts); each task reports it again with its result, so a worker that joins later
  is checked too. A worker that cannot import reportgen, or differs, stops the build
  with a message naming it and what differs.
* **Project files.** A worker does not have the project folder. Our templates put
  everything into the HTML; a project's own templates may reference files in the
  project folder. A task that needs a file it was not sent answers with the URLs it
  missed; they are read here (under the same rules as a local render:
  :mod:`reportgen.pdf.fetcher`) and the part is sent again with them, at most
  :data:`MAX_FILE_ROUNDS` times. The files travel with later parts of the build too.
* **Never a hang.** Connecting gives up after :data:`CONNECT_TIMEOUT_S`; a
  scheduler without workers for :data:`NO_WORKER_TIMEOUT_S` (at the start or during
  the build) fails the build; a part not back after :data:`PART_TIMEOUT_S` fails it.
  A worker that dies mid-part is replaced by Dask: the part is rendered again on
  another worker, and after the scheduler's ``allowed-failures`` (3 by default) dead
  workers on the same part the build fails with a message.
* **Nothing half-written.** Results only reach the merge here when whole; a failed or
  interrupted build cancels its tasks and writes no output (the pipeline writes
  the outputs only after the PDF is done).

A worker renders one part at a time (:data:`_RENDER_LOCK`): WeasyPrint is not
meant for parallel renders in the threads of one process, so start workers with
``--nthreads 1`` and as many ``--nworkers`` as cores (README, "Rendering on a cluster").
"""

from __future__ import annotations

import gc
import logging
import os
import pickle
import threading
import time
import traceback
import uuid
from collections.abc import Callable, Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Final

from reportgen.errors import ReportgenError, WorkerTraceback
from reportgen.pdf.cache import render_environment
from reportgen.pdf.fetcher import ProjectFile, RefusedURL, ShippedFilesFetcher, read_project_file
from reportgen.pdf.weasy import RenderedPart, render_part

LOGGER = logging.getLogger(__name__)

ENV_VARIABLE: Final = "REPORTGEN_CLUSTER"
CONNECT_TIMEOUT_S: Final = 10.0
NO_WORKER_TIMEOUT_S: Final = 60.0
PART_TIMEOUT_S: Final = 1800.0
POLL_S: Final = 1.0
MAX_FILE_ROUNDS: Final = 4
INSTALL_HINT: Final = "install reportgen[cluster] with the same versions and fonts on every worker"

_RENDER_LOCK = threading.Lock()


def worker_fingerprint() -> dict[str, str]:
    """What must be equal on a worker and here for its parts to be byte-identical."""
    return dict(render_environment())


def _this_worker() -> str:
    try:
        from distributed import get_worker

        return str(get_worker().address)
    except (ImportError, ValueError):
        return "?"


def fingerprint_difference(local: Mapping[str, str], remote: Mapping[str, str]) -> str | None:
    """A description of what differs between two fingerprints, or None if they are equal."""
    names = {"reportgen": "reportgen", "weasyprint": "WeasyPrint", "pydyf": "pydyf",
             "fonttools": "fontTools", "code": "reportgen's part-rendering code",
             "fonts": "installed fonts"}
    differences = []
    for key in sorted(set(local) | set(remote)):
        here, there = local.get(key), remote.get(key)
        if here != there:
            if key in ("code", "fonts"):
                differences.append(f"{names.get(key, key)} differ")
            else:
                differences.append(f"{names.get(key, key)} {there} there, {here} here")
    return "; ".join(differences) or None


@contextmanager
def _collector_paused() -> Iterator[None]:
    """No cycle collection during a render: it only walks the growing layout again and
    again (as in the local workers, :mod:`reportgen.pdf.engine`); restored after."""
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()


def render_task(html: str, root: str, xml_first: bool,
                files: dict[str, ProjectFile | None]) -> tuple[Any, ...]:
    """The Dask task: render one part on a worker; returns a tagged tuple, never raises.

    ``("done", worker, fingerprint, part)``, ``("need", worker, fingerprint, urls)``
    when project files were missing, or ``("failed", worker, fingerprint, message,
    traceback)``. The part is rendered in a child process forked for it
    (:func:`_in_child`), as a local build renders each part in a fresh process.
    """
    fingerprint = worker_fingerprint()
    worker = _this_worker()
    with _RENDER_LOCK:
        status, *payload = _in_child(_render_answer, html, root, xml_first, files)
    return (status, worker, fingerprint, *payload)


def _render_answer(html: str, root: str, xml_first: bool,
                   files: dict[str, ProjectFile | None]) -> tuple[Any, ...]:
    """Render one part here: ``("done", part)``, ``("need", urls)`` or ``("failed", message,
    traceback)``."""
    fetcher = ShippedFilesFetcher(Path(root), files)
    try:
        part = render_part(html, Path(root), xml_first=xml_first, url_fetcher=fetcher)
    except Exception as error:  # reported by the client, with the part's number
        return ("failed", f"{type(error).__name__}: {error}", traceback.format_exc())
    if fetcher.missing:
        return ("need", sorted(fetcher.missing))
    return ("done", part)


def _in_child(render: Callable[..., tuple[Any, ...]], *args: Any) -> tuple[Any, ...]:
    """``render(*args)`` in a child process forked from this worker; its answer comes back
    pickled through a pipe.

    The child exits without cleaning up, so the render's garbage (WeasyPrint's layout,
    a web of reference cycles) is returned to the system with the process instead of
    being walked by Python's cycle collector in the worker: 0.2-0.3 s of a 1.5 s part,
    measured on a run of 10 link sheets, and the worker's memory stays flat. Where there
    is no ``fork`` the part is rendered in the worker itself, the collector paused.
    """
    if not hasattr(os, "fork"):
        with _collector_paused():
            return render(*args)
    read_end, write_end = os.pipe()
    pid = os.fork()
    if pid == 0:  # the child: only this thread runs here; it never returns
        exit_status = 1
        try:
            os.close(read_end)
            gc.disable()
            answer = pickle.dumps(render(*args), protocol=pickle.HIGHEST_PROTOCOL)
            with os.fdopen(write_end, "wb") as pipe:
                pipe.write(answer)
            exit_status = 0
        finally:
            os._exit(exit_status)
    os.close(write_end)
    with os.fdopen(read_end, "rb") as pipe:
        answer = pipe.read()
    _, wait_status = os.waitpid(pid, 0)
    if not answer:
        return ("failed", f"the process rendering the part ended without a result (exit "
                          f"status {os.waitstatus_to_exitcode(wait_status)}; out of memory?)", "")
    result: tuple[Any, ...] = pickle.loads(answer)
    return result


@dataclass
class ClusterSession:
    """A connection to a Dask scheduler for one build, and the project files sent so far."""

    address: str
    client: Any
    fingerprint: dict[str, str]
    files: dict[str, ProjectFile | None] = field(default_factory=dict)
    lock: threading.Lock = field(default_factory=threading.Lock)

    @classmethod
    def connect(cls, address: str) -> ClusterSession:
        """Connect to the scheduler at ``address`` and check its workers; clear errors, no hang."""
        try:
            from distributed import Client
        except ImportError:
            raise ReportgenError(
                "--cluster needs the Dask distributed package: pip install 'reportgen[cluster]'"
            ) from None
        try:
            client = Client(address, timeout=CONNECT_TIMEOUT_S, set_as_default=False)
        except (OSError, TimeoutError, ValueError) as error:
            raise ReportgenError(
                f"could not reach the Dask scheduler at {address} within {CONNECT_TIMEOUT_S:.0f} s "
                f"({type(error).__name__}: {error}); start one with 'dask scheduler' "
                f"or build without --cluster") from None
        session = cls(address, client, worker_fingerprint())
        try:
            # the fingerprint is a function of this module: each worker imports the
            # renderer now (WeasyPrint with it), not with its first part; a build opens
            # its session while it reads and judges the project (reportgen.pipeline.build)
            session.check_workers()
        except BaseException:
            session.close()
            raise
        return session

    def check_workers(self) -> None:
        """Wait for a worker (at most NO_WORKER_TIMEOUT_S), then compare every worker's fingerprint."""
        try:
            self.client.wait_for_workers(1, timeout=NO_WORKER_TIMEOUT_S)
        except TimeoutError:
            raise ReportgenError(
                f"the Dask scheduler at {self.address} has no worker (waited "
                f"{NO_WORKER_TIMEOUT_S:.0f} s); start workers with 'dask worker {self.address}'"
            ) from None
        answers = self.client.run(worker_fingerprint, on_error="return")
        for worker, answer in sorted(answers.items()):
            self.check_answer(worker, answer)
        LOGGER.info("cluster %s: %d workers, each with reportgen %s", self.address,
                    len(answers), self.fingerprint["reportgen"])

    def check_answer(self, worker: str, answer: Any) -> None:
        """Refuse a worker whose fingerprint differs, or that could not report one."""
        if isinstance(answer, BaseException):
            raise ReportgenError(
                f"Dask worker {worker} cannot run reportgen's part renders ({answer}); "
                f"{INSTALL_HINT}")
        difference = fingerprint_difference(self.fingerprint, answer)
        if difference is not None:
            raise ReportgenError(
                f"Dask worker {worker} would not render the same PDF as this machine "
                f"({difference}); {INSTALL_HINT}")

    def read_files(self, urls: list[str], root: Path) -> None:
        """Read project files a worker asked for, as a local render would."""
        with self.lock:
            for url in urls:
                try:
                    self.files[url] = read_project_file(url, root)
                except (RefusedURL, OSError):
                    self.files[url] = None

    def slots(self) -> ClusterSlots:
        return ClusterSlots(self)

    def close(self) -> None:
        try:
            self.client.close(timeout=CONNECT_TIMEOUT_S)
        except Exception as error:  # closing must not hide the build's own outcome
            LOGGER.debug("closing the Dask client: %s", error)


@dataclass
class _Task:
    index: int
    html: str
    root: Path
    xml_first: bool
    sent_s: float
    rounds: int = 0


class ClusterSlots:
    """The engine's slots (:class:`reportgen.pdf.engine.Slots`) on a Dask cluster.

    Every part is submitted at once; Dask spreads them over the workers.
    """

    def __init__(self, session: ClusterSession) -> None:
        self.session = session
        self.tasks: dict[Any, _Task] = {}
        self.no_worker_since: float | None = None
        self.arrived = threading.Event()  # set by Dask when a task of ours ends

    def free(self) -> bool:
        return True

    def busy(self) -> bool:
        return bool(self.tasks)

    def prepare(self) -> None:
        pass

    def send(self, index: int, html: str, root: Path, xml_first: bool) -> None:
        self._submit(_Task(index, html, root, xml_first, time.monotonic()))

    def _submit(self, task: _Task) -> None:
        with self.session.lock:
            files = dict(self.session.files)
        # Earlier parts first (Dask runs higher priorities first): the merge copies the
        # parts in report order, so a part that is back early but behind a later-started
        # earlier one waits, and the copy work piles up at the end.
        future = self.session.client.submit(
            render_task, task.html, str(task.root), task.xml_first, files,
            key=f"reportgen-part-{task.index + 1}-{uuid.uuid4().hex}", pure=False,
            priority=-task.index)
        self.tasks[future] = task
        future.add_done_callback(lambda _future: self.arrived.set())

    def wait(self, block: bool = True) -> list[tuple[int, RenderedPart]]:
        while True:
            if block:
                self.arrived.wait(POLL_S)
            self.arrived.clear()
            done = [future for future in self.tasks if future.done()]
            if done:
                self.no_worker_since = None
                break
            if not block:
                return []
            self._watch()
        finished = []
        for future in done:
            task = self.tasks.pop(future)
            part = self._result(future, task)
            if part is not None:
                finished.append((task.index, part))
        return finished

    def _watch(self) -> None:
        """Fail instead of waiting for ever: no worker, or a part far too long."""
        now = time.monotonic()
        workers = self.session.client.scheduler_info().get("workers", {})
        if workers:
            self.no_worker_since = None
        elif self.no_worker_since is None:
            self.no_worker_since = now
        elif now - self.no_worker_since > NO_WORKER_TIMEOUT_S:
            raise ReportgenError(
                f"the Dask scheduler at {self.session.address} has had no worker for "
                f"{NO_WORKER_TIMEOUT_S:.0f} s; {len(self.tasks)} parts were not rendered")
        for task in self.tasks.values():
            if now - task.sent_s > PART_TIMEOUT_S:
                raise ReportgenError(
                    f"body part {task.index + 1} was not back from the cluster after "
                    f"{PART_TIMEOUT_S:.0f} s")

    def _answer(self, future: Any) -> Any:
        """A finished task's answer. Its data sits on the worker that rendered it; when that
        worker dies before we fetch it, Dask renders the part again elsewhere, and with no
        worker left at all it would wait for ever: poll, and let the watch give up."""
        while True:
            try:
                return future.result(timeout=POLL_S)
            except TimeoutError:  # asyncio's and distributed's TimeoutError are this one
                self._watch()

    def _result(self, future: Any, task: _Task) -> RenderedPart | None:
        from distributed import KilledWorker

        part_name = f"body part {task.index + 1}"
        if future.status != "finished":
            error = future.exception()
            if isinstance(error, KilledWorker):
                raise ReportgenError(
                    f"rendering {part_name} on the cluster failed: the workers rendering it "
                    f"died each time (out of memory?)") from None
            raise ReportgenError(
                f"rendering {part_name} on the cluster failed ({type(error).__name__}: {error}); "
                f"{INSTALL_HINT}") from None
        status, worker, fingerprint, *payload = self._answer(future)
        self.session.check_answer(worker, fingerprint)
        if status == "failed":
            message, details = payload
            raise ReportgenError(f"rendering {part_name} of the PDF failed on worker {worker}: "
                                 f"{message}") from WorkerTraceback(details)
        if status == "need":
            (urls,) = payload
            if task.rounds >= MAX_FILE_ROUNDS:
                raise ReportgenError(f"{part_name} kept asking for more project files "
                                     f"({', '.join(urls[:5])})")
            self.session.read_files(urls, task.root)
            task.rounds += 1
            self._submit(task)
            return None
        (part,) = payload
        return part

    def close(self) -> None:
        if self.tasks:
            try:
                self.session.client.cancel(list(self.tasks))
            except Exception as error:  # the build's own error matters more
                LOGGER.debug("cancelling cluster tasks: %s", error)
            self.tasks.clear()

