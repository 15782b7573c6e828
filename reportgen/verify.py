"""``reportgen verify``: check a report.pdf against its embedded project, check by check.

The signature (integrity, and trust given a certificate), every embedded file against the
manifest, the printed digest, the verdicts judged again from the embedded inputs with this
reportgen, and with a project folder, its files against the embedded copies.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

from reportgen import __version__
from reportgen.errors import InputError, ReportgenError
from reportgen.export import manifest as manifest_file
from reportgen.export.results_csv import results_csv_bytes
from reportgen.inputs.project import read_files
from reportgen.pipeline import compute, validate_only

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


def _check_files(files: dict[str, bytes], entries: list[dict[str, Any]],
                 folder: dict[str, bytes] | None) -> list[Check]:
    """Every file of the manifest against its embedded copy; a file the manifest marks not
    embedded (OTDR size cap) against the project folder's copy when ``folder`` was read."""
    checks = []
    listed = {entry["path"] for entry in entries}
    for entry in entries:
        name = entry["path"]
        data = files.get(name)
        if entry.get("embedded") is False:
            checks.append(_check_not_embedded(entry, data is not None, folder))
            continue
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


def _check_not_embedded(entry: dict[str, Any], embedded: bool,
                        folder: dict[str, bytes] | None) -> Check:
    name = entry["path"]
    if embedded:
        return Check(f"embedded file {name}", False,
                     "embedded, but the manifest says it is not")
    stated = f"{entry['size']} bytes, SHA-256 {entry['sha256']}"
    if folder is None:
        return Check(f"file {name}", True,
                     f"not embedded: checked only with --project (the manifest lists {stated})")
    data = folder.get(name[len(manifest_file.INPUT_PREFIX):])
    if data is None:
        return Check(f"file {name}", False,
                     f"not embedded, and not read from the project folder (the manifest lists "
                     f"{stated})")
    if len(data) == entry["size"] and manifest_file.sha256_hex(data) == entry["sha256"]:
        return Check(f"file {name}", True,
                     f"not embedded; the project folder's copy has the manifest's {stated}")
    return Check(f"file {name}", False,
                 f"not embedded; the project folder's copy differs: {len(data)} bytes, SHA-256 "
                 f"{manifest_file.sha256_hex(data)}; the manifest lists {stated}")


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


def _check_verdicts(files: dict[str, bytes], generator: str,
                    left_out: dict[str, bytes | None]) -> list[Check]:
    """Judge the embedded inputs again with this reportgen; compare with results.csv and
    summary.json. ``left_out``: each input the manifest marks not embedded, with the project
    folder's copy when it equals the manifest's (else None: judged without it)."""
    import json
    import tempfile

    inputs = _inputs_of(files)
    inputs.update({path: data for path, data in left_out.items() if data is not None})
    absent = frozenset(path for path, data in left_out.items() if data is None)
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
            outcome = compute(validate_only(root, absent=absent))
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
        summary_links = list(json.loads(files.get(manifest_file.SUMMARY_NAME, b"{}"))["links"])
        stated = {link["link_id"]: link["verdict"] for link in summary_links}
    except (ValueError, KeyError, TypeError):
        summary_links, stated = [], {}
    judged = {link.link_id: link.verdict.value for link in outcome.judgement.links}
    wrong = [f"{link_id}: summary.json {stated.get(link_id)!r}, judged again {verdict!r}"
             for link_id, verdict in judged.items() if stated.get(link_id) != verdict]
    wrong += [f"{link_id}: in summary.json, not among the links" for link_id in stated
              if link_id not in judged]
    checks.append(Check(f"{name}: link verdicts in summary.json", not wrong,
                        f"all {len(judged)} link verdicts equal" if not wrong
                        else "; ".join(wrong[:10])))
    checks += _check_otdr(summary_links, outcome, absent, name)
    return checks


def _check_otdr(summary_links: list[Any], outcome: Any, absent: frozenset[str],
                name: str) -> list[Check]:
    """summary.json's OTDR verdicts (each link, strand and wavelength) against those judged
    again; one that used a trace file not at hand is named as not derived again."""
    import json

    from reportgen.export.summary import json_bytes, otdr_json

    if outcome.otdr is None or not any(isinstance(link, dict) and link.get("otdr")
                                       for link in summary_links):
        return []
    differ, not_derived, equal = [], [], 0
    for link in summary_links:
        link_id = link.get("link_id") if isinstance(link, dict) else None
        stated = link.get("otdr") or [] if isinstance(link, dict) else []
        again = {(item["strand"], item["wavelength_nm"]): item for item in json.loads(
            json_bytes({"otdr": otdr_json(outcome.otdr, str(link_id))}))["otdr"]}
        stated = [item for item in stated if isinstance(item, dict)] if isinstance(
            stated, list) else []
        listed = {(item.get("strand"), item.get("wavelength_nm")) for item in stated}
        for item in stated:
            key = (item.get("strand"), item.get("wavelength_nm"))
            where = f"{link_id} strand {key[0]} {key[1]} nm"
            files = item.get("files") if isinstance(item.get("files"), list) else []
            missing = sorted(set(map(str, files)) & absent)
            rejudged = again.pop(key, None)
            if missing:
                not_derived.append(f"{where} ({', '.join(missing)})")
            elif rejudged != item:
                keys = sorted(set(item) | set(rejudged or {}))
                changed = [k for k in keys if item.get(k) != (rejudged or {}).get(k)]
                differ.append(f"{where}: differs in {', '.join(changed)} when judged again "
                              f"(summary.json says verdict {item.get('verdict')!r})")
            else:
                equal += 1
        differ += [f"{link_id} strand {key[0]} {key[1]} nm: judged again, not in summary.json"
                   for key in again if key not in listed]
    checks = [Check(f"{name}: OTDR verdicts in summary.json", not differ,
                    f"all {equal} OTDR verdicts judged again, with their events, equal"
                    if not differ else "; ".join(differ[:10])
                    + (f"; ... {len(differ) - 10} more" if len(differ) > 10 else ""))]
    if not_derived:
        checks.append(Check(
            f"{name}: OTDR verdicts not judged again", False,
            f"{len(not_derived)} OTDR verdict(s) use trace files not embedded in the report; "
            "give --project with the project folder to judge them again: "
            + "; ".join(not_derived[:10])
            + (f"; ... {len(not_derived) - 10} more" if len(not_derived) > 10 else "")))
    return checks


def _read_folder(project_dir: Path) -> tuple[dict[str, bytes] | None, str]:
    """The folder's input files as a build reads them now, or None and why not."""
    try:
        return read_files(validate_only(project_dir)), ""
    except InputError as error:
        return None, "does not validate: " + "; ".join(str(problem)
                                                       for problem in error.problems[:5])


def _check_project(project_dir: Path, now_read: dict[str, bytes] | None, why: str,
                   entries: list[dict[str, Any]]) -> list[Check]:
    """The files of ``project_dir`` against the inputs the manifest lists."""
    name = f"project folder {project_dir}"
    if now_read is None:
        return [Check(name, False, why)]
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


def _left_out(entries: list[dict[str, Any]], folder: dict[str, bytes] | None
              ) -> dict[str, bytes | None]:
    """Each input the manifest marks not embedded, with the folder's copy if it is the same."""
    found: dict[str, bytes | None] = {}
    for entry in entries:
        if entry.get("embedded") is False and entry["path"].startswith(manifest_file.INPUT_PREFIX):
            path = entry["path"][len(manifest_file.INPUT_PREFIX):]
            data = (folder or {}).get(path)
            same = data is not None and manifest_file.sha256_hex(data) == entry["sha256"]
            found[path] = data if same else None
    return found


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
                                "the signer's certificate chains to the trust certificate"
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
    folder, why = _read_folder(Path(project_dir)) if project_dir is not None else (None, "")
    checks += _check_files(contents.files, entries, folder)
    checks += _check_digest(digest, contents.files, contents.page_texts)
    checks += _check_verdicts(contents.files, generator, _left_out(entries, folder))
    if project_dir is not None:
        checks += _check_project(Path(project_dir), folder, why, entries)
    return checks
