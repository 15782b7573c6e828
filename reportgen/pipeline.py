"""The build, stage by stage: load and validate → judge → assess → render → export.

Only ``validate`` (through ``load``/``limits``) reads the project folder and only
``export`` writes anything, at the very end, so a bad input or a failed render
leaves the output folder untouched.
"""
from __future__ import annotations

import logging
import os
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from functools import partial
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

from reportgen import __version__

from reportgen.export.atomic import write_outputs
from reportgen.export.results_csv import results_csv_bytes
from reportgen.export import summary
from reportgen.export.summary import json_bytes
from reportgen.export import manifest as manifest_file
from reportgen.errors import InputError, InputProblem, ReportgenError
from reportgen.engine.applications import ProjectApplications, assess_project
from reportgen.engine.judge import Judgement, judge_project
from reportgen.engine.findings import Findings, find_all
from reportgen.engine.otdr import OtdrAssessment, assess_otdr
from reportgen.report.messages import PAGE_LABEL, archive_page_label, finding_text, reason_text
from reportgen.model import Project
from reportgen.inputs.apptable import table_version
from reportgen.inputs.project import load_project, read_files

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


def validate_only(project_dir: Path) -> Project:
    """Step 1: read and validate the project folder (raises InputError)."""
    project_dir = Path(project_dir)
    if not project_dir.is_dir():
        raise InputError([InputProblem(str(project_dir), None, None,
                                       "a project folder with project.yaml and links.csv",
                                       "no such folder")])
    log.info("Step 1: reading and validating %s", project_dir)
    return load_project(project_dir)


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
    findings = find_all(project, judgement, applications, today=today)
    return Outcome(project, judgement, applications, findings, assess_otdr(project, judgement))


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
) -> BuildResult:
    """Validate, judge, render and write every output; nothing is written on failure.

    ``jobs`` local processes render the PDF's parts (default: the cores this process
    may use), or the Dask scheduler at ``cluster`` has its workers render them. With
    ``cache``, parts rendered by an earlier build into the same output folder are
    reused (``OUT/.reportgen-cache``, :mod:`reportgen.pdf.cache`); the part cache is
    the one thing written before the outputs, each entry whole or not at all.
    ``sign_key`` (:func:`reportgen.pdf.sign.load_signing_key`) signs report.pdf.
    """
    project_dir = Path(project_dir)
    out_dir = Path(out_dir) if out_dir is not None else default_out_dir(project_dir)
    check_out_dir(project_dir, out_dir)
    project = validate_only(project_dir)
    check_out_dir_holds_no_input(project, out_dir)
    now = build_now(now)
    outcome = compute(project, now)
    results_csv = results_csv_bytes(outcome.judgement.results)
    archive = archive_of(outcome, results_csv, now=now, version=version)

    def data_outputs() -> dict[str, bytes]:
        return {
            manifest_file.RESULTS_NAME: results_csv,
            manifest_file.SUMMARY_NAME: json_bytes(
                summary_document(outcome, now, version, archive.digest)),
        }

    if report:
        outputs = render_report(outcome, now=now, version=version, progress=progress,
                                alongside=data_outputs, jobs=jobs,
                                cache_dir=out_dir if cache else None, cluster=cluster,
                                archive=archive, sign_key=sign_key)
    else:
        log.info("Step 4: no HTML/PDF report (data only)")
        outputs = data_outputs()
    log.info("Step 5: writing %s", ", ".join(outputs))
    write_outputs(out_dir, outputs)
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

    @property
    def digest(self) -> str:
        return manifest_file.digest_of(self.manifest)


def archive_of(outcome: Outcome, results_csv: bytes, *, now: datetime, version: str) -> Archive:
    """Read the project's files again and make the manifest of the build."""
    inputs = read_files(outcome.project)
    document = manifest_file.manifest_document(
        outcome.project, inputs, results_csv, version=version, now=now,
        application_table=table_version())
    return Archive(inputs, results_csv, manifest_file.manifest_bytes(document), document)


def attachments_of(archive: Archive, summary_json: bytes) -> list[Any]:
    """The files embedded in report.pdf: every input, results.csv, summary.json, manifest."""
    from reportgen.pdf.archive import Attachment

    made = [Attachment(manifest_file.INPUT_PREFIX + path, data, manifest_file.mime_type(path),
                       "Source", "input file of the project, as read")
            for path, data in archive.inputs.items()]
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

    return ArchiveView(archive.digest, signer)


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
                  cluster: str | None = None, archive: Archive | None = None,
                  sign_key: Any = None) -> dict[str, bytes]:
    """Step 4: the HTML report and the PDF rendered from the same templates.

    Returns the outputs of ``alongside()`` (made first: the PDF embeds them), then
    report.html (made by a thread while the PDF workers are busy) and report.pdf.
    ``cache_dir`` is the output folder whose part cache is used (None: render every
    part); ``archive`` is attached to the PDF, ``sign_key`` signs it.
    """
    from reportgen.pdf import engine as pdf
    from reportgen.pdf.cache import PartCache
    from reportgen.report import render

    log.info("Step 4: rendering the report")
    document = render.build_report(
        outcome.project, outcome.judgement, now=now, version=version,
        applications=outcome.applications, findings=outcome.findings, otdr=outcome.otdr,
        archive=(report_view_archive(archive, sign_key.subject if sign_key is not None else "")
                 if archive is not None else None))

    # The data files are embedded in the PDF, so they are made first (they are quick);
    # report.html is written by a thread while the PDF workers are busy.
    made = alongside() if alongside is not None else {}
    attachments = (attachments_of(archive, made[manifest_file.SUMMARY_NAME])
                   if archive is not None and manifest_file.SUMMARY_NAME in made else [])
    label = (archive_page_label(manifest_file.short_digest(archive.digest))
             if archive is not None else PAGE_LABEL)
    seal = None
    if sign_key is not None:
        from reportgen.pdf.sign import sign_pdf

        seal = partial(sign_pdf, key=sign_key)
    with ThreadPoolExecutor(max_workers=1, thread_name_prefix="reportgen-html") as thread:
        html = thread.submit(lambda: document.html.encode("utf-8"))
        pdf_bytes = pdf.render_pdf(document.front, document.bodies, root=outcome.project.root,
                                   title=outcome.project.info.title, created=now,
                                   page_label=label, progress=progress,
                                   xml_first=document.own_templates,
                                   author=outcome.project.info.contractor.name,
                                   attachments=attachments, seal=seal,
                                   workers=jobs if jobs is not None else default_jobs(),
                                   cache=(PartCache.in_output_folder(cache_dir)
                                          if cache_dir is not None else None),
                                   cluster=cluster)
        return {**made, "report.html": html.result(), "report.pdf": pdf_bytes}


# ---------------------------------------------------------------- reportgen verify

@dataclass(frozen=True)
class Check:
    """One check of ``reportgen verify``: what was checked, whether it holds, and why."""

    name: str
    ok: bool
    detail: str


_JUDGED_COLUMNS = ("loss_db", "limit_db", "margin_db", "verdict", "flags")
_ROW_KEY = ("link_id", "strand", "wavelength_nm", "direction")


def _csv_rows(data: bytes) -> list[dict[str, str]]:
    import csv
    import io

    return list(csv.DictReader(io.StringIO(data.decode("utf-8"))))


def _results_differences(embedded: bytes, rejudged: bytes) -> list[str]:
    """Each value of results.csv's judged columns that differs, named by row and column."""
    old, new = _csv_rows(embedded), _csv_rows(rejudged)
    found = []
    if len(old) != len(new):
        found.append(f"{len(old)} rows embedded, {len(new)} rows judged again")
    for number, (before, after) in enumerate(zip(old, new), start=2):  # line 1: header
        where = ", ".join(f"{key} {before.get(key, '?')}" for key in _ROW_KEY)
        for column in _JUDGED_COLUMNS + _ROW_KEY:
            if before.get(column) != after.get(column):
                found.append(f"results.csv line {number} ({where}): {column} embedded "
                             f"{before.get(column)!r}, judged again {after.get(column)!r}")
    return found


def _check_files(files: dict[str, bytes], entries: list[dict[str, Any]]) -> list[Check]:
    checks = []
    listed = {entry["path"] for entry in entries}
    for entry in entries:
        name = entry["path"]
        data = files.get(name)
        if data is None:
            checks.append(Check(f"embedded file {name}", False, "listed in the manifest but "
                                "not embedded"))
            continue
        actual = manifest_file.sha256_hex(data)
        if actual == entry["sha256"] and len(data) == entry["size"]:
            checks.append(Check(f"embedded file {name}", True,
                                f"{len(data)} bytes, SHA-256 as in the manifest"))
        else:
            checks.append(Check(f"embedded file {name}", False,
                                f"changed: {len(data)} bytes, SHA-256 {actual}; the manifest says "
                                f"{entry['size']} bytes, SHA-256 {entry['sha256']}"))
    extra = sorted(set(files) - listed - {manifest_file.MANIFEST_NAME, manifest_file.SUMMARY_NAME})
    if extra:
        checks.append(Check("no file outside the manifest", False,
                            "embedded but not listed: " + ", ".join(extra)))
    return checks


def _check_digest(digest: str, files: dict[str, bytes], page_texts: tuple[str, ...]) -> list[Check]:
    import json

    checks = []
    short = manifest_file.short_digest(digest)
    missing = [str(number) for number, text in enumerate(page_texts, start=1) if short not in text]
    checks.append(Check("digest on every page", not missing and bool(page_texts),
                        f"{short} on all {len(page_texts)} pages" if not missing else
                        f"{short} (SHA-256 of the embedded manifest) missing on page(s) "
                        + ", ".join(missing[:20]) + (" ..." if len(missing) > 20 else "")))
    on_cover = bool(page_texts) and digest in page_texts[0].replace("\n", "")
    checks.append(Check("digest on the cover", on_cover,
                        digest if on_cover else f"the cover does not show {digest}"))
    try:
        stated = json.loads(files.get(manifest_file.SUMMARY_NAME, b"{}"))["archive"][
            "manifest_sha256"]
    except (ValueError, KeyError, TypeError):
        stated = None
    checks.append(Check("digest in summary.json", stated == digest,
                        "equals the manifest's SHA-256" if stated == digest else
                        f"summary.json says {stated!r}, the manifest's SHA-256 is {digest}"))
    return checks


def _inputs_of(files: dict[str, bytes]) -> dict[str, bytes]:
    prefix = manifest_file.INPUT_PREFIX
    return {name[len(prefix):]: data for name, data in files.items() if name.startswith(prefix)}


def _check_verdicts(files: dict[str, bytes], generator: str) -> list[Check]:
    """Judge the embedded inputs again with this reportgen; compare with results.csv."""
    import json
    import tempfile

    inputs = _inputs_of(files)
    name = "verdicts follow from the data"
    with tempfile.TemporaryDirectory(prefix="reportgen-verify-") as folder:
        root = Path(folder)
        for path, data in inputs.items():
            target = (root / path).resolve()
            if root.resolve() not in target.parents:
                return [Check(name, False, f"embedded input {path} lies outside the project")]
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_bytes(data)
        try:
            outcome = compute(validate_only(root))
        except InputError as error:
            return [Check(name, False, "the embedded inputs do not validate with this reportgen: "
                          + "; ".join(str(problem) for problem in error.problems[:5]))]
    rejudged = results_csv_bytes(outcome.judgement.results)
    embedded = files.get(manifest_file.RESULTS_NAME, b"")
    versions = (f" (made with {generator}, judged again with reportgen {__version__})"
                if generator != f"reportgen {__version__}" else "")
    differences = _results_differences(embedded, rejudged)
    checks = [Check(f"{name}: results.csv", not differences,
                    f"every loss, limit, margin and verdict of {len(_csv_rows(rejudged))} rows "
                    f"judged again equals the embedded results.csv{versions}"
                    if not differences else "; ".join(differences[:10])
                    + (f"; ... {len(differences) - 10} more" if len(differences) > 10 else "")
                    + versions)]
    try:
        stated = {link["link_id"]: link["verdict"] for link in
                  json.loads(files.get(manifest_file.SUMMARY_NAME, b"{}"))["links"]}
    except (ValueError, KeyError, TypeError):
        stated = {}
    judged = {link.link_id: link.verdict.value for link in outcome.judgement.links}
    wrong = [f"{link_id}: summary.json {stated.get(link_id)!r}, judged again {verdict!r}"
             for link_id, verdict in judged.items() if stated.get(link_id) != verdict]
    wrong += [f"{link_id}: in summary.json, not among the links" for link_id in stated
              if link_id not in judged]
    checks.append(Check(f"{name}: link verdicts in summary.json", not wrong,
                        f"all {len(judged)} link verdicts equal" if not wrong
                        else "; ".join(wrong[:10])))
    return checks


def _check_project(project_dir: Path, entries: list[dict[str, Any]]) -> list[Check]:
    """The files of ``project_dir`` against the inputs the manifest lists."""
    name = f"project folder {project_dir}"
    try:
        project = validate_only(project_dir)
        now_read = read_files(project)
    except InputError as error:
        return [Check(name, False, "does not validate: "
                      + "; ".join(str(problem) for problem in error.problems[:5]))]
    listed = {entry["path"][len(manifest_file.INPUT_PREFIX):]: entry for entry in entries
              if entry["path"].startswith(manifest_file.INPUT_PREFIX)}
    differences = []
    for path, data in sorted(now_read.items()):
        entry = listed.get(path)
        if entry is None:
            differences.append(f"{path} is read now but is not in the report")
        elif manifest_file.sha256_hex(data) != entry["sha256"]:
            differences.append(f"{path} differs from the copy in the report")
    differences += [f"{path} is in the report but not read from the folder now"
                    for path in sorted(set(listed) - set(now_read))]
    return [Check(name, not differences,
                  f"all {len(now_read)} input files equal the copies in the report"
                  if not differences else "; ".join(differences))]


def _check_signatures(data: bytes, trust_pem: bytes | None) -> list[Check]:
    from reportgen.pdf.sign import signature_states

    states = signature_states(data, trust_pem)
    if not states:
        return [Check("signature", trust_pem is None,
                      "the report is not signed" + (" (a trust certificate was given)"
                                                    if trust_pem is not None else ""))]
    checks = []
    for state in states:
        checks.append(Check(
            f"signature {state.field}: integrity", state.intact and state.covers_whole_file,
            f"signed by {state.signer}; the signed bytes are unchanged and nothing was added "
            "after signing" if state.intact and state.covers_whole_file else
            f"signed by {state.signer}; " + ("the file was changed after signing (bytes "
                                               "outside the signed range were added)"
                                               if state.intact else
                                               "the signed bytes were changed or the signature "
                                               "is invalid")))
        if state.trusted is not None:
            checks.append(Check(f"signature {state.field}: trust", state.trusted,
                                f"the signer's certificate chains to the trust certificate"
                                if state.trusted else
                                f"the signer's certificate ({state.signer}) does not chain to "
                                "the trust certificate given"))
    return checks


def verify_report(pdf_path: Path, project_dir: Path | None = None,
                  trust: Path | None = None) -> list[Check]:
    """Every check of ``reportgen verify``, in order (raises ReportgenError on a bad file)."""
    import json

    from reportgen.pdf.archive import read_archive

    pdf_path = Path(pdf_path)
    try:
        data = pdf_path.read_bytes()
    except OSError as error:
        raise ReportgenError(f"{pdf_path}: cannot read ({error.strerror})") from None
    if not data.startswith(b"%PDF-"):
        raise ReportgenError(f"{pdf_path}: not a PDF file (it does not start with %PDF-)")
    contents = read_archive(data)
    manifest = contents.files.get(manifest_file.MANIFEST_NAME)
    if manifest is None:
        raise ReportgenError(f"{pdf_path}: no {manifest_file.MANIFEST_NAME} inside; not a "
                             "report made by reportgen with its project inside")
    try:
        document = json.loads(manifest)
        entries = list(document["files"])
        generator = str(document.get("generator", "?"))
    except (ValueError, KeyError, TypeError) as error:
        raise ReportgenError(f"{pdf_path}: {manifest_file.MANIFEST_NAME} is not a manifest "
                             f"reportgen can read ({error})") from None
    digest = manifest_file.digest_of(manifest)
    trust_pem = None
    if trust is not None:
        try:
            trust_pem = Path(trust).read_bytes()
        except OSError as error:
            raise ReportgenError(f"{trust}: cannot read ({error.strerror})") from None
    checks = _check_signatures(data, trust_pem)
    checks += [Check("archive format", contents.pdfa_part == "3",
                    "PDF/A-3 identification in the XMP metadata" if contents.pdfa_part == "3"
                    else "no PDF/A-3 identification in the XMP metadata")]
    checks += _check_files(contents.files, entries)
    checks += _check_digest(digest, contents.files, contents.page_texts)
    checks += _check_verdicts(contents.files, generator)
    if project_dir is not None:
        checks += _check_project(Path(project_dir), entries)
    return checks
