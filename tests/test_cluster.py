"""Rendering the PDF's parts on a Dask distributed cluster (reportgen.pdf.cluster).

The reference is the local render of the same parts (render_pdf without a cluster): a
cluster build must give the same bytes. The clusters are real: a distributed.LocalCluster
(two worker processes) and a scheduler and worker started as separate processes on
127.0.0.1, as README describes. Every test that starts a cluster is slow.
"""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import threading
import time
from collections.abc import Iterator, Mapping
from datetime import datetime, timezone
from pathlib import Path

import pytest

from reportgen.errors import InputError, ReportgenError
from reportgen.pdf import cluster as cluster_module
from reportgen.pdf.cache import PartCache
from reportgen.pdf.cluster import ClusterSession, fingerprint_difference, worker_fingerprint
from reportgen.pdf.engine import render_pdf

distributed = pytest.importorskip("distributed")

REPO = Path(__file__).resolve().parent.parent
CREATED = datetime(2030, 1, 15, 9, 30, tzinfo=timezone.utc)
CSS = ("<style>@page { size: A6; margin: 10mm } body { font-family: DejaVu Sans; font-size: 9pt }"
       " h1 { bookmark-level: none } .page { break-before: page }</style>")
# a 1x1 PNG (PNG signature and chunks per ISO/IEC 15948)
PNG = bytes.fromhex(
    "89504e470d0a1a0a0000000d4948445200000001000000010806000000"
    "1f15c4890000000d4944415478da63606060f80f0001040100f5a2b5a30000000049454e44ae426082")


def document(body: str) -> str:
    return f"<html><head><title>t</title>{CSS}</head><body>{body}</body></html>"


def body(name: str, pages: int = 2, extra: str = "") -> str:
    sheets = "".join(f'<h1 class="page" id="{name}-{k}">{name} {k}</h1><p>{"text " * 200}</p>'
                     for k in range(2, pages + 1))
    return document(f'<h1 id="{name}-1" data-bookmark="{name}" data-bookmark-level="1">{name}</h1>'
                    f'<p><a href="#b-1">to b</a></p>{extra}{sheets}')


def front(page_of: Mapping[str, int], total_pages: int) -> str:
    return document(f'<h1 id="cover">Cover</h1><p>b on page {page_of["b-1"]} of {total_pages}</p>')


BODIES = [body("a"), body("b", extra='<img src="mark.png" style="width: 10mm"/>'), body("c")]


HANG_GUARD_S = 300  # far above a normal run: turns a hang into a failure, measures nothing


@pytest.fixture(autouse=True)
def hang_guard() -> Iterator[None]:
    """Fail a test that hangs (the promise under test is "never a hang") instead of blocking CI."""
    def hung(signum: int, frame: object) -> None:
        raise TimeoutError(f"cluster test still running after {HANG_GUARD_S} s: hung")

    previous = signal.signal(signal.SIGALRM, hung)
    signal.alarm(HANG_GUARD_S)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, previous)


@pytest.fixture
def project(tmp_path: Path) -> Path:
    root = tmp_path / "project"
    root.mkdir()
    (root / "mark.png").write_bytes(PNG)  # sent to the workers on request
    return root


def render(root: Path, bodies: list[str], **options: object) -> bytes:
    return render_pdf(front, bodies, root=root, title="Cluster test", created=CREATED,
                      **options)  # type: ignore[arg-type]


def _worker_environment() -> dict[str, str]:
    return {**os.environ, "PYTHONPATH": os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")])}


@pytest.fixture
def local_cluster() -> Iterator[str]:
    os.environ["PYTHONPATH"] = _worker_environment()["PYTHONPATH"]  # the workers import this tree
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None, host="127.0.0.1") as cluster:
        yield cluster.scheduler_address


def _free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


@pytest.fixture
def separate_processes() -> Iterator[tuple[str, list[subprocess.Popen[bytes]]]]:
    """A scheduler and two workers (no nanny: a killed worker stays dead), each its own process."""
    port = _free_port()
    address = f"tcp://127.0.0.1:{port}"
    env = _worker_environment()
    started = [subprocess.Popen([sys.executable, "-m", "distributed.cli.dask_scheduler",
                                 "--host", "127.0.0.1", "--port", str(port), "--no-dashboard"],
                                env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)]
    for _ in range(2):
        started.append(subprocess.Popen(
            [sys.executable, "-m", "distributed.cli.dask_worker", address, "--nthreads", "1",
             "--no-nanny", "--no-dashboard", "--host", "127.0.0.1"],
            env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL))
    try:
        with distributed.Client(address, timeout=60) as client:
            client.wait_for_workers(2, timeout=60)
        yield address, started[1:]
    finally:
        for process in reversed(started):
            process.terminate()
        for process in started:
            try:
                process.wait(timeout=20)
            except subprocess.TimeoutExpired:
                process.kill()
                process.wait()


@pytest.mark.slow
def test_a_local_cluster_gives_the_bytes_of_a_local_build(project: Path, local_cluster: str) -> None:
    local = render(project, BODIES, workers=2)
    assert render(project, BODIES, cluster=local_cluster) == local


@pytest.mark.slow
def test_cluster_parts_go_into_the_cache_and_a_local_rebuild_uses_them(
        project: Path, local_cluster: str, tmp_path: Path) -> None:
    out = tmp_path / "out"
    on_cluster = render(project, BODIES, cluster=local_cluster,
                        cache=PartCache.in_output_folder(out))
    cache = PartCache.in_output_folder(out)
    assert render(project, BODIES, cache=cache) == on_cluster
    assert cache.stats.hits == 5 and cache.stats.misses == 0


@pytest.mark.slow
def test_separate_scheduler_and_worker_processes_survive_a_killed_worker(
        project: Path, separate_processes: tuple[str, list[subprocess.Popen[bytes]]]) -> None:
    address, workers = separate_processes
    bodies = [body(f"p{index}", pages=4) for index in range(6)] + [body("b")]
    local = render(project, bodies, workers=2)
    killed: list[int] = []

    def kill_one_worker(done: int, total: int) -> None:
        if done == 1 and not killed:  # parts are still running and waiting on both workers
            workers[0].send_signal(signal.SIGKILL)
            killed.append(workers[0].pid)

    assert render(project, bodies, cluster=address, progress=kill_one_worker) == local
    assert killed and workers[0].wait(timeout=10) == -signal.SIGKILL


@pytest.mark.slow
def test_no_worker_left_fails_the_build_instead_of_waiting(
        project: Path, separate_processes: tuple[str, list[subprocess.Popen[bytes]]],
        monkeypatch: pytest.MonkeyPatch) -> None:
    address, workers = separate_processes
    monkeypatch.setattr(cluster_module, "NO_WORKER_TIMEOUT_S", 3.0)
    bodies = [body(f"p{index}", pages=4) for index in range(4)] + [body("b")]

    def kill_all(done: int, total: int) -> None:
        if done == 1:
            for worker in workers:
                worker.send_signal(signal.SIGKILL)

    with pytest.raises(ReportgenError, match="no worker for 3 s"):
        render(project, bodies, cluster=address, progress=kill_all)


@pytest.mark.slow
def test_an_unreachable_scheduler_is_a_clear_error_within_the_timeout(project: Path) -> None:
    address = f"tcp://127.0.0.1:{_free_port()}"  # nothing listens there
    started = time.monotonic()
    with pytest.raises(ReportgenError, match="could not reach the Dask scheduler"):
        render(project, BODIES, cluster=address)
    # stated bound: CONNECT_TIMEOUT_S, plus slack for a busy machine (not a timing assertion
    # of speed: it proves the call returned instead of hanging)
    assert time.monotonic() - started < cluster_module.CONNECT_TIMEOUT_S * 6


def test_a_worker_with_other_versions_or_fonts_is_refused() -> None:
    here = worker_fingerprint()
    assert fingerprint_difference(here, dict(here)) is None
    other = {**here, "weasyprint": "1.0", "fonts": "0" * 64}
    assert fingerprint_difference(here, other) == (
        f"installed fonts differ; WeasyPrint 1.0 there, {here['weasyprint']} here")
    session = ClusterSession("tcp://example.invalid:8786", client=None, fingerprint=here)
    with pytest.raises(ReportgenError, match="would not render the same PDF"):
        session.check_answer("tcp://10.0.0.9:40000", other)
    with pytest.raises(ReportgenError, match="cannot run reportgen's part renders"):
        session.check_answer("tcp://10.0.0.9:40000",
                             ModuleNotFoundError("No module named 'reportgen'"))


def test_a_build_connects_to_its_cluster_while_loading_and_closes_the_session(
        monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    # The session is opened while the project is read and judged (a thread), so that
    # the workers load the renderer meanwhile; the build closes it whatever happens:
    # a judging error, an input error found while it connected.
    from reportgen import pipeline

    events: list[str] = []
    connected = threading.Event()
    loading = threading.Event()

    class FakeSession:
        address = "tcp://127.0.0.1:1"

        def close(self) -> None:
            events.append("close")

    def connect(address: str) -> FakeSession:
        assert loading.wait(10), "the project was not loading while the session connected"
        events.append(f"connect {address}")
        connected.set()
        return FakeSession()

    real_validate = pipeline.validate_only

    def validate_only(project_dir: Path) -> object:
        loading.set()
        return real_validate(project_dir)

    def compute(*args: object, **kwargs: object) -> None:
        events.append("judge")
        raise RuntimeError("stop here")

    monkeypatch.setattr(ClusterSession, "connect", staticmethod(connect))
    monkeypatch.setattr(pipeline, "validate_only", validate_only)
    monkeypatch.setattr(pipeline, "compute", compute)
    fixture = Path(__file__).parent / "fixtures" / "small_project"
    with pytest.raises(RuntimeError, match="stop here"):
        pipeline.build(fixture, tmp_path / "out", cluster="tcp://127.0.0.1:1")
    assert sorted(events[:2]) == ["connect tcp://127.0.0.1:1", "judge"]
    assert events[2:] == ["close"]

    events.clear()
    loading.clear()

    def invalid(project_dir: Path) -> object:
        loading.set()
        raise InputError([])

    monkeypatch.setattr(pipeline, "validate_only", invalid)
    with pytest.raises(InputError):
        pipeline.build(fixture, tmp_path / "out", cluster="tcp://127.0.0.1:1")
    assert events == ["connect tcp://127.0.0.1:1", "close"]

    events.clear()
    monkeypatch.setattr(pipeline, "validate_only", validate_only)
    with pytest.raises(RuntimeError, match="stop here"):
        pipeline.build(fixture, tmp_path / "out", cluster="tcp://127.0.0.1:1", report=False)
    assert events == ["judge"]  # a data-only build needs no cluster


@pytest.mark.skipif(not hasattr(os, "fork"), reason="parts are forked only where fork exists")
def test_a_worker_renders_each_part_in_a_child_process_and_reports_one_that_dies() -> None:
    # The render's garbage leaves with the child (no cycle collection in the worker);
    # a child that dies or cannot send its answer becomes a "failed" answer, not a hang.
    status, pid = cluster_module._in_child(lambda: ("done", os.getpid()))
    assert status == "done" and pid != os.getpid()
    status, message, details = cluster_module._in_child(lambda: os._exit(9))
    assert status == "failed" and "exit status 9" in message and details == ""
    status, message, _ = cluster_module._in_child(lambda: ("done", threading.Lock()))
    assert status == "failed" and "exit status 1" in message  # a lock cannot be pickled
