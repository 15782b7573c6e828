"""The size cap for OTDR trace files embedded in report.pdf (docs/project-format.md §10.5).

A trace file over the cap is listed in the manifest with its size and SHA-256 but not
embedded; ``reportgen verify`` checks it only against a project folder and names the OTDR
verdicts it cannot judge again without it. Sizes below are typed; SHA-256 values are computed
with Python's hashlib (FIPS 180-4), never taken from the code under test.
"""
from __future__ import annotations

import hashlib
import json
import shutil
from datetime import datetime, timezone
from pathlib import Path

import pytest
from pypdf import PdfReader

from builders import synth_sor
from reportgen import cli, pipeline, verify
from reportgen.errors import InputError
from reportgen.export import manifest
from reportgen.inputs.sor import write_sor

DEMO = Path(__file__).resolve().parent.parent / "demo_project"
NOW = datetime(2030, 1, 15, 9, 30, tzinfo=timezone.utc)
MB = 1_000_000  # the cap's megabyte: 10**6 bytes, as docs/project-format.md §3.7 states


def test_the_cap_leaves_out_trace_files_over_it_in_path_order() -> None:
    sizes = {"otdr/a.sor": 700_000, "otdr/b.sor": 2_500_000, "otdr/c/d.SOR": 900_000,
             "otdr/e.sor": 500_000, "otdr/events.csv": 9_000_000, "links.csv": 5_000_000,
             "results/x.sor": 3_000_000}
    # per file 2 MB: b.sor (2.5 MB) is out; in total 1.5 MB: a (0.7) + c/d (0.9) = 1.6 MB > 1.5,
    # so c/d.SOR is out and e.sor (0.7 + 0.5 = 1.2 MB) is in. Files other than otdr/**/*.sor
    # are never capped, whatever their size.
    assert manifest.left_out(sizes, 2.0, 1.5) == {"otdr/b.sor", "otdr/c/d.SOR"}
    assert manifest.left_out(sizes, 2.0, 1000.0) == {"otdr/b.sor"}
    assert manifest.left_out(sizes, 0.0, 1000.0) == {"otdr/a.sor", "otdr/b.sor", "otdr/c/d.SOR",
                                                     "otdr/e.sor"}
    # a file of exactly the cap is within it
    assert manifest.left_out({"otdr/a.sor": 2 * MB}, 2.0, 2.0) == frozenset()


def test_the_default_cap_is_2_mb_per_file_and_50_mb_in_all(make_project) -> None:
    # the defaults docs/project-format.md §3.7 states
    project = pipeline.validate_only(make_project())
    assert (project.report.otdr_file_mb, project.report.otdr_total_mb) == (2.0, 50.0)


def test_the_manifest_lists_a_left_out_file_with_size_sha256_and_embedded_false(
        make_project) -> None:
    project = pipeline.validate_only(make_project())
    inputs = {"links.csv": b"a", "otdr/big.sor": b"abc", "otdr/small.sor": b"x"}
    document = manifest.manifest_document(project, inputs, b"", version="9.9", now=NOW,
                                          application_table="t",
                                          not_embedded=frozenset({"otdr/big.sor"}))
    entries = {entry["path"]: entry for entry in document["files"]}
    # FIPS 180-2, Appendix B.1: SHA-256("abc")
    assert entries["project/otdr/big.sor"] == {
        "path": "project/otdr/big.sor", "role": "input", "size": 3, "embedded": False,
        "sha256": "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"}
    assert "embedded" not in entries["project/otdr/small.sor"]
    assert document["otdr_embed_cap"] == {"file_mb": 2.0, "total_mb": 50.0}
    # nothing left out: the manifest is as before the cap existed (no key added)
    plain = manifest.manifest_document(project, inputs, b"", version="9.9", now=NOW,
                                       application_table="t")
    assert "otdr_embed_cap" not in plain
    assert all("embedded" not in entry for entry in plain["files"])


def _yaml_with_report(make_project, report: str) -> Path:
    root = make_project()
    text = (root / "project.yaml").read_text(encoding="utf-8")
    (root / "project.yaml").write_text(text + "report:\n" + report, encoding="utf-8")
    return root


def test_the_cap_is_set_in_project_yaml(make_project) -> None:
    root = _yaml_with_report(make_project, "  embed_otdr_file_mb: 0.5\n  embed_otdr_total_mb: 0\n")
    project = pipeline.validate_only(root)
    assert (project.report.otdr_file_mb, project.report.otdr_total_mb) == (0.5, 0.0)


def test_a_bad_cap_is_an_error_naming_each_key(make_project) -> None:
    root = _yaml_with_report(make_project,
                             "  embed_otdr_file_mb: -1\n  embed_otdr_total_mb: lots\n")
    with pytest.raises(InputError) as caught:
        pipeline.validate_only(root)
    fields = {(problem.file, problem.field) for problem in caught.value.problems}
    assert {("project.yaml", "report.embed_otdr_file_mb"),
            ("project.yaml", "report.embed_otdr_total_mb")} <= fields


# ------------------------------------------------ judging again without a left-out trace

OTDR_YAML = (
    "project:\n  title: Test backbone\n  contractor: {name: Test Cabling}\n"
    "testing:\n  limits: tia-568.3-d\n  reference_method: one-cord\n"
    "  otdr: {launch_cord_m: 150, receive_cord_m: 150}\n"
    "instruments:\n  - {id: SRC-1, kind: light-source}\n  - {id: PM-1, kind: power-meter}\n"
    "report:\n  embed_otdr_file_mb: 0\n"
)


def _sor(origin: str, wavelength: int) -> bytes:
    return write_sor(synth_sor([(650.0, 0.1, None)], 1800.0, cable_id="L2", fiber_id="1",
                               origin=origin, nominal_wavelength_nm=wavelength,
                               wavelength_nm=float(wavelength)))


def _files_of_data_build(root: Path, out: Path) -> tuple[dict[str, bytes], list[dict]]:
    """What report.pdf would embed: the inputs but left-out ones, results.csv, summary.json."""
    pipeline.build(root, out, now=NOW, report=False)
    project = pipeline.validate_only(root)
    outcome = pipeline.compute(project, NOW)
    results = (out / "results.csv").read_bytes()
    archive = pipeline.archive_of(outcome, results, now=NOW, version="test")
    files = {manifest.INPUT_PREFIX + path: data for path, data in archive.inputs.items()
             if path not in archive.not_embedded}
    files[manifest.RESULTS_NAME] = results
    files[manifest.SUMMARY_NAME] = (out / "summary.json").read_bytes()
    return files, archive.document["files"]


def test_verdicts_of_left_out_traces_are_named_not_judged_again(make_project,
                                                                tmp_path: Path) -> None:
    # the index names the trace files: without them the index must still be read
    root = make_project({"project.yaml": OTDR_YAML, "otdr/a.sor": _sor("Room 1", 1310),
                         "otdr/b.sor": _sor("hut 3", 1310),
                         "otdr/index.csv": "file,link_id,strand,direction\n"
                                           "a.sor,L2,1,ab\nb.sor,L2,1,ba\n"})
    files, entries = _files_of_data_build(root, tmp_path / "out")
    assert {entry["path"] for entry in entries if entry.get("embedded") is False} == {
        "project/otdr/a.sor", "project/otdr/b.sor"}
    assert "project/otdr/index.csv" in files  # only trace files are capped

    checks = verify._check_verdicts(files, "reportgen test", verify._left_out(entries, None))
    by_name = {check.name: check for check in checks}
    assert by_name["verdicts follow from the data: results.csv"].ok
    missing = by_name["verdicts follow from the data: OTDR verdicts not judged again"]
    assert not missing.ok
    assert "L2 strand 1 1310 nm (otdr/a.sor, otdr/b.sor)" in missing.detail
    assert "--project" in missing.detail

    folder = {path.relative_to(root).as_posix(): path.read_bytes()
              for path in root.rglob("*") if path.is_file()}
    checks = verify._check_verdicts(files, "reportgen test", verify._left_out(entries, folder))
    assert all(check.ok for check in checks), checks
    assert "all 1 OTDR verdicts" in {check.name: check for check in checks}[
        "verdicts follow from the data: OTDR verdicts in summary.json"].detail


def test_a_left_out_file_is_checked_against_the_folder_copy(make_project, tmp_path: Path) -> None:
    root = make_project({"project.yaml": OTDR_YAML, "otdr/a.sor": _sor("Room 1", 1310)})
    files, entries = _files_of_data_build(root, tmp_path / "out")
    (entry,) = [entry for entry in entries if entry.get("embedded") is False]
    data = (root / "otdr/a.sor").read_bytes()
    assert entry["sha256"] == hashlib.sha256(data).hexdigest()
    (alone,) = [c for c in verify._check_files(files, entries, None) if "a.sor" in c.name]
    assert alone.ok and "not embedded: checked only with --project" in alone.detail
    (same,) = [c for c in verify._check_files(files, entries, {"otdr/a.sor": data})
               if "a.sor" in c.name]
    assert same.ok and "project folder's copy has the manifest's" in same.detail
    changed = data[:-1] + bytes([data[-1] ^ 1])
    (differs,) = [c for c in verify._check_files(files, entries, {"otdr/a.sor": changed})
                  if "a.sor" in c.name]
    assert not differs.ok and "copy differs" in differs.detail
    (gone,) = [c for c in verify._check_files(files, entries, {}) if "a.sor" in c.name]
    assert not gone.ok
    (wrongly,) = [c for c in verify._check_files({**files, "project/otdr/a.sor": data},
                                                 entries, None) if "a.sor" in c.name]
    assert not wrongly.ok and "the manifest says it is not" in wrongly.detail


# ------------------------------------------------ the demo with a cap, as a PDF

@pytest.fixture(scope="module")
def capped_demo(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path]:
    """The demo with a 3000-byte cap per trace file: its 2604-byte files are embedded, the
    3383- and 6788-byte ones (links CB-03 and CB-07) are not."""
    base = tmp_path_factory.mktemp("capped")
    project = base / "project"
    shutil.copytree(DEMO, project)
    yaml = project / "project.yaml"
    text = yaml.read_text(encoding="utf-8")
    assert "\n  paper: a4\n" in text
    yaml.write_text(text.replace("\n  paper: a4\n", "\n  paper: a4\n  embed_otdr_file_mb: 0.003\n"),
                    encoding="utf-8")
    pipeline.build(project, base / "out", now=NOW)
    return project, base / "out"


@pytest.mark.slow
def test_capped_demo_embeds_only_trace_files_within_the_cap(capped_demo) -> None:
    project, out = capped_demo
    attachments = PdfReader(out / "report.pdf").attachments
    names = set(attachments)
    listed = json.loads(attachments["manifest.json"][0])["files"]
    traces = sorted(p.relative_to(project).as_posix() for p in (project / "otdr").glob("*.sor"))
    small = [p for p in traces if (project / p).stat().st_size <= 3000]
    big = [p for p in traces if (project / p).stat().st_size > 3000]
    assert small and big
    assert all("project/" + p in names for p in small)
    assert not any("project/" + p in names for p in big)
    entries = {entry["path"]: entry for entry in listed}
    for p in big:
        data = (project / p).read_bytes()
        assert entries["project/" + p]["embedded"] is False
        assert entries["project/" + p]["sha256"] == hashlib.sha256(data).hexdigest()
    text = "".join(page.extract_text() for page in PdfReader(out / "report.pdf").pages[-6:])
    assert "Not attached, being over the size cap" in text.replace("\n", " ")


@pytest.mark.slow
def test_verify_of_the_capped_demo_names_what_it_could_not_judge_again(
        capped_demo, capsys: pytest.CaptureFixture[str]) -> None:
    project, out = capped_demo
    assert cli.main(["verify", str(out / "report.pdf")]) == 1
    text = capsys.readouterr().out
    assert "ok    file project/otdr/CB-03-s1-1310-ab.sor: not embedded: checked only with --project" in text
    assert text.count("FAIL") == 1
    assert "FAIL  verdicts follow from the data: OTDR verdicts not judged again" in text
    assert "CB-07 strand 1 1550 nm" in text
    assert "ok    verdicts follow from the data: results.csv" in text

    assert cli.main(["verify", str(out / "report.pdf"), "--project", str(project)]) == 0
    text = capsys.readouterr().out
    assert "FAIL" not in text
    assert "not embedded; the project folder's copy has the manifest's" in text
    assert "all 6 OTDR verdicts judged again" in text  # the demo: CB-01, CB-03, CB-07 x 2 wavelengths


def test_a_changed_otdr_verdict_in_summary_json_is_named(make_project, tmp_path: Path) -> None:
    root = make_project({"project.yaml": OTDR_YAML.replace("embed_otdr_file_mb: 0",
                                                           "embed_otdr_file_mb: 2"),
                         "otdr/a.sor": _sor("Room 1", 1310), "otdr/b.sor": _sor("hut 3", 1310),
                         "otdr/index.csv": "file,link_id,strand,direction\n"
                                           "a.sor,L2,1,ab\nb.sor,L2,1,ba\n"})
    files, entries = _files_of_data_build(root, tmp_path / "out")
    assert all(entry.get("embedded", True) for entry in entries)  # within the cap
    summary = json.loads(files[manifest.SUMMARY_NAME])
    (strand,) = [link for link in summary["links"] if link["link_id"] == "L2"][0]["otdr"]
    strand["verdict"] = "fail" if strand["verdict"] == "pass" else "pass"
    files[manifest.SUMMARY_NAME] = json.dumps(summary).encode()
    checks = {check.name: check for check in
              verify._check_verdicts(files, "reportgen test", verify._left_out(entries, None))}
    changed = checks["verdicts follow from the data: OTDR verdicts in summary.json"]
    assert not changed.ok
    assert changed.detail.startswith("L2 strand 1 1310 nm: differs in verdict when judged again")
