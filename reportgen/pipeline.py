"""The build, stage by stage: load and validate → judge → assess → render → export.

Only ``validate`` (through ``load``/``limits``) reads the project folder and only
``export`` writes anything, at the very end, so a bad input or a failed render
leaves the output folder untouched.
"""
from __future__ import annotations

import gc
import logging
import os
import tempfile
from collections.abc import Callable, Mapping, Sequence
from concurrent.futures import Future, ThreadPoolExecutor
from contextlib import ExitStack
from dataclasses import dataclass
from functools import partial
from datetime import datetime, timezone
from pathlib import Path
from typing import TYPE_CHECKING, Any

from reportgen import __version__, interrupt

from reportgen.export.atomic import Output, write_outputs
from reportgen.export.results_csv import results_csv_bytes
from reportgen.export import summary
from reportgen.export.summary import json_bytes
from reportgen.export import manifest as manifest_file
from reportgen.errors import InputError, InputProblem, ReportgenError
from reportgen.engine.applications import ProjectApplications, assess_project
from reportgen.engine.judge import Judgement, judge_project
from reportgen.engine.findings import Findings, find_all
from reportgen.engine.otdr import OtdrAssessment, assess_otdr
from reportgen.report.messages import archive_page_label, page_label
from reportgen.report.messages_apps import reason_text
from reportgen.report.messages_findings import finding_text
from reportgen.model import Project
from reportgen.inputs.apptable import table_version
from reportgen.inputs.project import load_project, read_files

if TYPE_CHECKING:
    from reportgen.pdf.cluster import ClusterSession

log = logging.getLogger("reportgen")

Progress = Callable[[int, int], None]

# Folders of a project that hold inputs: an output folder there would be read back.
_INPUT_FOLDERS = ("results", "otdr", "assets")


@dataclass(frozen=True)
class Outcome:
    """Everything computed about a project, before anything is rendered."""

    project: Project
    judgement: Judgement
    applications: ProjectApplications  # applications and transceiver power budgets per link
    findings: Findings  # audit findings
    otdr: OtdrAssessment | None = None  # OTDR events paired, averaged and judged


@dataclass(frozen=True)
class BuildResult:
    out_dir: Path
    outcome: Outcome
    files: tuple[str, ...]


def validate_only(project_dir: Path, *, absent: frozenset[str] = frozenset()) -> Project:
    """Step 1: read and validate the project folder (raises InputError); ``absent``: OTDR
    trace files missing on purpose (``reportgen verify``, inputs.project.load_project)."""
    project_dir = Path(project_dir)
    if not project_dir.is_dir():
        raise InputError([InputProblem(str(project_dir), None, None,
                                       "a project folder with project.yaml and links.csv",
                                       "no such folder")])
    log.info("Step 1: reading and validating %s", project_dir)
    return load_project(project_dir, absent=absent)


def compute(project: Project, now: datetime | None = None) -> Outcome:
    """Steps 2 and 3: judge every result, assess applications and power budgets, then
    audit the project (``now``: the build's clock, see :func:`build_now`)."""
    log.info("Step 2: judging %d results of %d links", len(project.results), len(project.links))
    judgement = judge_project(project)
    log.info("Step 3: assessing applications, transceiver power budgets and %d OTDR traces; "
             "audit findings", len(project.otdr))
    applications = assess_project(project, judgement)
    clock = build_now(now)
    today = (clock if clock.tzinfo is None else clock.astimezone(timezone.utc)).date()
    otdr = assess_otdr(project, judgement)
    findings = find_all(project, judgement, applications, today=today, otdr=otdr)
    return Outcome(project, judgement, applications, findings, otdr)


def default_out_dir(project_dir: Path) -> Path:
    return Path(project_dir) / "report"


def check_out_dir(project_dir: Path, out_dir: Path) -> None:
    """Refuse an output folder that would overwrite or be read back as input."""
    project_real = Path(project_dir).resolve()
    out_real = Path(out_dir).resolve()
    if out_real == project_real or any(
        out_real == project_real / folder or (project_real / folder) in out_real.parents
        for folder in _INPUT_FOLDERS
    ):
        raise ReportgenError(
            f"output folder {out_dir} is the project folder or one of its input folders "
            f"({', '.join(_INPUT_FOLDERS)}); choose another with -o (default: PROJECT/report)")
    if out_real.exists() and not out_real.is_dir():
        raise ReportgenError(f"output folder {out_dir} exists and is not a folder")


def check_out_dir_holds_no_input(project: Project, out_dir: Path) -> None:
    """Refuse an output folder holding a file the project reads (an imported export, say): the
    next run could read its outputs back, or overwrite evidence."""
    out_real = Path(out_dir).resolve()
    for shown in project.files_read:
        if out_real in (project.root / shown).resolve().parents:
            raise ReportgenError(
                f"output folder {out_dir} holds {shown}, a file the project reads; choose another "
                "with -o (default: PROJECT/report)")


def build_now(now: datetime | None) -> datetime:
    """The report's clock: given, else SOURCE_DATE_EPOCH (reproducible builds), else now."""
    if now is not None:
        return now
    epoch = os.environ.get("SOURCE_DATE_EPOCH", "").strip()
    if epoch.isdigit():
        return datetime.fromtimestamp(int(epoch), tz=timezone.utc)
    return datetime.now(tz=timezone.utc).replace(microsecond=0)


def build(
    project_dir: Path,
    out_dir: Path | None = None,
    *,
    now: datetime | None = None,
    version: str = __version__,
    report: bool = True,
    progress: Progress | None = None,
    jobs: int | None = None,
    cache: bool = True,
    cluster: str | None = None,
    sign_key: Any = None,
    language: str | None = None,
) -> BuildResult:
    """Validate, judge, render and write every output; nothing is written on failure.

    ``jobs`` local processes render the PDF's parts (default: the cores this process
    may use), or the Dask scheduler at ``cluster`` has its workers render them. With
    ``cache``, parts rendered by an earlier build into the same output folder are
    reused (``OUT/.reportgen-cache``, :mod:`reportgen.pdf.cache`); the part cache is
    the one thing written before the outputs, each entry whole or not at all.
    ``sign_key`` (:func:`reportgen.pdf.sign.load_signing_key`) signs report.pdf.
    ``language`` (en, de, fr, es; ``build --language``) overrides the project's
    ``report.language`` for report.html and report.pdf; results.csv and summary.json are
    the same in every language.
    """
    project_dir = Path(project_dir)
    out_dir = Path(out_dir) if out_dir is not None else default_out_dir(project_dir)
    check_out_dir(project_dir, out_dir)
    with interrupt.watching(), ExitStack() as closing:
        if report and cluster is None:
            from reportgen.pdf.forkserver import start_early

            start_early()  # the PDF workers' server imports WeasyPrint while the project loads
        connecting: Future[ClusterSession] | None = None
        if report and cluster is not None:
            from reportgen.pdf.cluster import ClusterSession

            # connected while the project loads, so that the workers load the renderer
            # while it is read and judged; closed whatever happens (after the connection
            # is made or has failed, at most the connection timeout)
            connector = closing.enter_context(
                ThreadPoolExecutor(max_workers=1, thread_name_prefix="reportgen-connect"))
            connecting = connector.submit(ClusterSession.connect, cluster)
            closing.callback(_close_session, connecting)
        project = validate_only(project_dir)
        interrupt.check()
        check_out_dir_holds_no_input(project, out_dir)
        return _build_loaded(project, out_dir, now=now, version=version, report=report,
                             progress=progress, jobs=jobs, cache=cache, cluster=connecting,
                             sign_key=sign_key, language=language)


def _close_session(connecting: Future[ClusterSession]) -> None:
    """Close the session ``connecting`` makes, once made; a failed connection has been
    reported already (or the build stopped before it asked)."""
    try:
        session = connecting.result()
    except Exception:  # raised where the build took the session, or the build stopped first
        return
    session.close()


def _build_loaded(project: Project, out_dir: Path, *, now: datetime | None, version: str,
                  report: bool, progress: Progress | None, jobs: int | None, cache: bool,
                  cluster: Future[ClusterSession] | None, sign_key: Any,
                  language: str | None) -> BuildResult:
    """:func:`build` once the project is loaded; ``cluster``: the session being opened."""
    now = build_now(now)
    outcome = compute(project, now)
    interrupt.check()
    results_csv = results_csv_bytes(outcome.judgement.results)
    archive = archive_of(outcome, results_csv, now=now, version=version)

    def data_outputs() -> dict[str, bytes]:
        return {
            manifest_file.RESULTS_NAME: results_csv,
            manifest_file.SUMMARY_NAME: json_bytes(
                summary_document(outcome, now, version, archive.digest)),
        }

    def write(outputs: Mapping[str, Output]) -> None:
        log.info("Step 5: writing %s", ", ".join(outputs))
        write_outputs(out_dir, outputs, before_replacing=interrupt.check)

    if report:
        outputs: Sequence[str] = render_report(
            outcome, now=now, version=version, progress=progress, alongside=data_outputs,
            jobs=jobs, cache_dir=out_dir if cache else None,
            cluster=cluster, archive=archive,
            sign_key=sign_key, language=language, write=write)
    else:
        log.info("Step 4: no HTML/PDF report (data only)")
        made = data_outputs()
        write(made)
        outputs = tuple(made)
    return BuildResult(out_dir, outcome, tuple(outputs))


def write_imported(project: Project, out_dir: Path) -> tuple[str, ...]:
    """``reportgen import --write``: the imported links as links.csv and each imported results
    file as results/NAME.csv in ``out_dir`` (each file atomically; other files left alone)."""
    from reportgen.export.atomic import write_files
    from reportgen.export.contract_csv import links_csv_bytes, results_rows_csv_bytes

    out_dir = Path(out_dir)
    links = {link.link_id: link for link in project.links}
    imported_links = [links[link_id] for source in project.imports if source.kind == "links"
                      for link_id in source.link_ids]
    results: dict[str, bytes] = {}
    for source in project.imports:
        if source.kind != "results":
            continue
        prefix = f"{source.file}[{source.sheet}]:" if source.sheet is not None else f"{source.file}:"
        rows = project.results[project.results["source"].str.startswith(prefix)]
        stem = Path(source.file).stem + (f"-{source.sheet}" if source.sheet is not None else "")
        name = f"{stem}.csv"
        if name in results:
            name = f"{stem}-{source.entry}.csv"
        results[name] = results_rows_csv_bytes(rows)
    written = []
    if imported_links:
        write_files(out_dir, {"links.csv": links_csv_bytes(imported_links)})
        written.append("links.csv")
    if results:
        write_files(out_dir / "results", results)
        written += [f"results/{name}" for name in results]
    return tuple(written)


def summary_document(outcome: Outcome, now: datetime, version: str,
                     digest: str | None = None) -> dict[str, Any]:
    """summary.json of a computed project (export.summary.summary_document)."""
    return summary.summary_document(outcome.project, outcome.judgement, outcome.applications,
                                    now=now, version=version, reason_text=reason_text,
                                    findings=outcome.findings, finding_text=finding_text,
                                    otdr=outcome.otdr, digest=digest)


@dataclass(frozen=True)
class Archive:
    """The manifest of a build, its digest and the input files it lists (by path)."""

    inputs: dict[str, bytes]
    results_csv: bytes
    manifest: bytes
    document: dict[str, Any]
    not_embedded: frozenset[str] = frozenset()  # inputs listed but not embedded (size cap)

    @property
    def digest(self) -> str:
        return manifest_file.digest_of(self.manifest)


def archive_of(outcome: Outcome, results_csv: bytes, *, now: datetime, version: str) -> Archive:
    """Read the project's files again and make the manifest of the build."""
    inputs = read_files(outcome.project)
    options = outcome.project.report
    not_embedded = manifest_file.left_out({path: len(data) for path, data in inputs.items()},
                                          options.otdr_file_mb, options.otdr_total_mb)
    document = manifest_file.manifest_document(
        outcome.project, inputs, results_csv, version=version, now=now,
        application_table=table_version(), not_embedded=not_embedded)
    return Archive(inputs, results_csv, manifest_file.manifest_bytes(document), document,
                   not_embedded)


def attachments_of(archive: Archive, summary_json: bytes) -> list[Any]:
    """The files embedded in report.pdf: every input (but those over the OTDR size cap),
    results.csv, summary.json, manifest."""
    from reportgen.pdf.archive import Attachment

    made = [Attachment(manifest_file.INPUT_PREFIX + path, data, manifest_file.mime_type(path),
                       "Source", "input file of the project, as read")
            for path, data in archive.inputs.items() if path not in archive.not_embedded]
    made += [
        Attachment(manifest_file.RESULTS_NAME, archive.results_csv, "text/csv", "Data",
                   "every result with its limit, margin and verdict"),
        Attachment(manifest_file.SUMMARY_NAME, summary_json, "application/json", "Data",
                   "verdict of every link, totals and the report's digest"),
        Attachment(manifest_file.MANIFEST_NAME, archive.manifest, "application/json", "Data",
                   "size and SHA-256 of every file above; its SHA-256 is the report's digest"),
    ]
    return made


def report_view_archive(archive: Archive, signer: str = "") -> Any:
    """The digest and signer the report prints (cover, acceptance block, appendix)."""
    from reportgen.report.viewmodel import ArchiveView

    return ArchiveView(archive.digest, signer, tuple(sorted(archive.not_embedded)))


def default_jobs() -> int:
    """Worker processes for the PDF parts: the cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on every system
        return max(1, os.cpu_count() or 1)


def render_report(outcome: Outcome, *, now: datetime, version: str,
                  progress: Progress | None = None,
                  alongside: Callable[[], dict[str, bytes]] | None = None,
                  jobs: int | None = None, cache_dir: Path | None = None,
                  cluster: str | ClusterSession | Future[ClusterSession] | None = None,
                  archive: Archive | None = None,
                  sign_key: Any = None, language: str | None = None,
                  write: Callable[[Mapping[str, Output]], None]) -> tuple[str, ...]:
    """Step 4: the HTML report and the PDF rendered from the same templates.

    Hands ``write`` (step 5) the outputs of ``alongside()`` (made first: the PDF embeds
    them), then report.html (made by a thread while the PDF workers are busy) and
    report.pdf, and returns their names.
    ``cache_dir`` is the output folder whose part cache is used (None: render every
    part); ``cluster``: a scheduler's address or a session (opened, or being opened);
    ``archive`` is attached to the PDF, ``sign_key`` signs it; ``language`` overrides the
    project's report.language.
    """
    from reportgen.pdf import engine as pdf
    from reportgen.pdf.cache import PartCache
    from reportgen.report import render

    log.info("Step 4: rendering the report")
    lang = render.language_of(outcome.project, language)
    document = render.build_report(
        outcome.project, outcome.judgement, now=now, version=version,
        applications=outcome.applications, findings=outcome.findings, otdr=outcome.otdr,
        archive=(report_view_archive(archive, sign_key.subject if sign_key is not None else "")
                 if archive is not None else None), language=lang.code)

    # The data files are embedded in the PDF, so they are made first (they are quick);
    # report.html is written by a thread while the PDF workers are busy.
    made = alongside() if alongside is not None else {}
    attachments = (attachments_of(archive, made[manifest_file.SUMMARY_NAME])
                   if archive is not None and manifest_file.SUMMARY_NAME in made else [])
    label = (archive_page_label(manifest_file.short_digest(archive.digest), lang)
             if archive is not None else page_label(lang))
    seal = None
    if sign_key is not None:
        from reportgen.pdf.sign import sign_pdf

        seal = partial(sign_pdf, key=sign_key)
    # report.html and report.pdf go to temporary files (deleted when closed), not into
    # memory: report.html is 13 kB a link (held as one text it took 1.7 GB at 20,000
    # links), report.pdf about 10 kB a page.
    with tempfile.TemporaryFile(prefix="reportgen-html-") as html_file, \
            tempfile.TemporaryFile(prefix="reportgen-pdf-") as pdf_file, \
            ThreadPoolExecutor(max_workers=1, thread_name_prefix="reportgen-html") as thread:
        html = thread.submit(document.write_html, html_file)

        def release() -> None:
            """Once every page is rendered: wait for report.html, then drop the documents
            (the view model and its drawings) before the PDF is finished. The engine
            pauses the cycle collector, and much of the view model is held in cycles: one
            collection frees it (at 20,000 links about 100 MB, in a second or two)."""
            nonlocal document
            html.result()
            del document
            gc.collect()

        if isinstance(cluster, Future):  # being opened: needed from here on
            cluster = cluster.result()
        pdf.write_pdf(document.front, document.bodies, into=pdf_file,
                      root=outcome.project.root, title=outcome.project.info.title, created=now,
                      page_label=label, language=lang.code, progress=progress,
                      xml_first=document.own_templates,
                      author=outcome.project.info.contractor.name,
                      attachments=attachments, seal=seal,
                      workers=jobs if jobs is not None else default_jobs(),
                      cache=(PartCache.in_output_folder(cache_dir)
                             if cache_dir is not None else None),
                      cluster=cluster, release=release)
        html.result()
        outputs: dict[str, Output] = {**made, "report.html": html_file, "report.pdf": pdf_file}
        write(outputs)
    return tuple(outputs)

