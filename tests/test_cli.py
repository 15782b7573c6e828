"""End to end: the command line on the demo project and on bad input."""
from __future__ import annotations

import csv
import hashlib
import json
import logging
import os
import subprocess
import sys
from datetime import datetime, timezone
from pathlib import Path

import pypdf
import pytest

from reportgen import __version__

from reportgen import cli, pipeline
from reportgen.pdf.engine import render_pdf
from tests.builders import printed_page_refs

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "demo_project"


def _digest(folder: Path) -> str:
    sha = hashlib.sha256()
    for path in sorted(folder.rglob("*")):
        sha.update(str(path.relative_to(folder)).encode())
        if path.is_file():
            sha.update(path.read_bytes())
    return sha.hexdigest()


@pytest.fixture(scope="module")
def demo_build(tmp_path_factory):
    """The demo project built once for this module (the real PDF)."""
    out = tmp_path_factory.mktemp("demo") / "out"
    before = _digest(DEMO)
    assert cli.main(["build", str(DEMO), "-o", str(out)]) == 0
    assert _digest(DEMO) == before  # the project folder is never modified
    return out


@pytest.mark.slow
def test_demo_build_writes_the_four_outputs(demo_build):
    # besides the four outputs only the hidden cache of rendered PDF parts (documented)
    assert sorted(p.name for p in demo_build.iterdir()) == [
        ".reportgen-cache", "report.html", "report.pdf", "results.csv", "summary.json"]
    assert (demo_build / ".reportgen-cache").is_dir()


@pytest.mark.slow
def test_demo_summary_matches_results_csv(demo_build):
    summary = json.loads((demo_build / "summary.json").read_text(encoding="utf-8"))
    with (demo_build / "results.csv").open(encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    assert summary["format"] == 1
    assert summary["totals"]["links"] == len(summary["links"]) == 30
    # The demo is built to show one failing and one incomplete link (demo_project/README
    # of the scenario: A-BB-07 fails, CB-05 misses 1550 nm on strand 2).
    verdicts = {link["link_id"]: link["verdict"] for link in summary["links"]}
    assert verdicts["A-BB-07"] == "fail"
    assert verdicts["CB-05"] == "incomplete"
    # audit findings the demo plants (README "Audit findings"; each listed in
    # tests/test_records.py::test_the_demo_gives_exactly_the_findings_its_story_plants)
    assert summary["totals"] == {"links": 30, "pass": 28, "fail": 1, "incomplete": 1,
                                 "error_findings": 10, "warning_findings": 2, "note_findings": 0}
    assert len(summary["findings"]) == 12
    # worst margin = smallest margin of the judged rows of that link in results.csv
    for link in summary["links"]:
        judged = [float(r["margin_db"]) for r in rows
                  if r["link_id"] == link["link_id"] and r["verdict"] in ("pass", "fail")]
        assert link["worst_margin_db"] == (min(judged) if judged else None)
    # not-judged: the PON links' 1490 nm results (no cabling limit, counted for PON-B+/C+)
    assert {r["verdict"] for r in rows} == {"pass", "fail", "superseded", "invalid", "not-judged"}


@pytest.mark.slow
def test_demo_pdf_and_html_name_every_link_and_verdict(demo_build):
    summary = json.loads((demo_build / "summary.json").read_text(encoding="utf-8"))
    html = (demo_build / "report.html").read_text(encoding="utf-8")
    reader = pypdf.PdfReader(demo_build / "report.pdf")
    text = "\n".join(page.extract_text() or "" for page in reader.pages)
    assert len(reader.pages) >= len(summary["links"])  # at least a page per link
    for link in summary["links"]:
        assert link["link_id"] in html and link["link_id"] in text
    for verdict in ("pass", "fail", "incomplete"):
        assert verdict in html and verdict in text
    assert f"Page 1 of {len(reader.pages)}" in (reader.pages[0].extract_text() or "")


@pytest.mark.slow
def test_demo_front_page_numbers_are_the_pages_their_links_lead_to(demo_build):
    reader = pypdf.PdfReader(demo_build / "report.pdf")
    summary = json.loads((demo_build / "summary.json").read_text(encoding="utf-8"))
    texts = [page.extract_text() or "" for page in reader.pages]
    first_sheet = next(index for index, text in enumerate(texts) if "LINK SHEET" in text)
    refs = [ref for index in range(first_sheet) for ref in printed_page_refs(reader, index)]
    assert len(refs) >= len(summary["links"])  # the register has one per link
    for printed, target in refs:
        assert printed == str(target)
    sheet_pages = {link["link_id"]: next(number for number, text in enumerate(texts, 1)
                                         if f"LINK SHEET\n{link['link_id']}\n" in text)
                   for link in summary["links"]}
    assert set(sheet_pages.values()) <= {target for _, target in refs}


def test_check_exit_status_reflects_link_verdicts(make_project, capsys):
    # The minimal project has missing results: incomplete links -> exit 1.
    assert cli.main(["check", str(make_project())]) == 1
    assert "incomplete" in capsys.readouterr().out


def test_check_exit_0_when_every_link_passes(make_project, capsys):
    rows = "".join(f"L1,{s},{w},{d},1.0,2030-01-15\n" for s in (1, 2) for w in (850, 1300)
                   for d in ("ab", "ba"))
    rows += "".join(f"L2,1,{w},{d},1.5,2030-01-15\n" for w in (1310, 1550) for d in ("ab", "ba"))
    project = make_project({"results/day1.csv":
                            "link_id,strand,wavelength_nm,direction,loss_db,tested_at\n" + rows})
    assert cli.main(["check", str(project)]) == 0
    assert "2 links: 2 pass, 0 fail, 0 incomplete" in capsys.readouterr().out


def test_bad_input_exits_2_and_writes_nothing(make_project, tmp_path, capsys):
    project = make_project({"results/day1.csv": "link_id,wavelength_nm,loss_db,tested_at\n"
                                                "NOPE,850,1.2,2030-01-15\n"})
    out = tmp_path / "out"
    assert cli.main(["build", str(project), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert "results/day1.csv, line 2, link_id:" in err
    assert "Traceback" not in err
    assert not out.exists()


def test_output_folder_inside_results_is_refused(make_project, capsys):
    project = make_project()
    assert cli.main(["build", str(project), "-o", str(project / "results")]) == 2
    assert "input folders" in capsys.readouterr().err


def test_data_only_build_and_default_output_folder(make_project):
    project = make_project()
    assert cli.main(["build", str(project), "--data-only"]) == 0
    assert sorted(p.name for p in (project / "report").iterdir()) == ["results.csv",
                                                                      "summary.json"]
    # a second build reads the project again, ignoring its own report/ folder
    assert cli.main(["build", str(project), "--data-only"]) == 0


def test_data_only_build_removes_an_earlier_report_beside_it(make_project, tmp_path):
    """README "Usage": --data-only removes report.html/report.pdf of an earlier build in the
    output folder, so no stale report sits beside the new data; other files stay."""
    out = tmp_path / "out"
    out.mkdir()
    for name in ("report.html", "report.pdf", "notes.txt"):
        (out / name).write_text("from an earlier build", encoding="utf-8")
    assert cli.main(["build", str(make_project()), "-o", str(out), "--data-only"]) == 0
    assert sorted(p.name for p in out.iterdir()) == ["notes.txt", "results.csv", "summary.json"]


@pytest.fixture
def restore_logging():
    """main() configures logging for the whole process (as a command line run does)."""
    yield
    cli._configure_logging(cli._Settings())


STEPS = ["Step 1: reading and validating", "Step 2: judging", "Step 3: assessing",
         "Step 4: no HTML/PDF report", "Step 5: writing"]


@pytest.mark.parametrize("where", ["before", "after"])
def test_verbose_before_or_after_the_command_shows_our_steps_once_in_order(
        make_project, tmp_path, capsys, restore_logging, where):
    build = ["build", str(make_project()), "-o", str(tmp_path / "out"), "--data-only"]
    argv = ["-v", *build] if where == "before" else [*build, "-v"]
    assert cli.main(argv) == 0
    lines = capsys.readouterr().err.splitlines()
    assert len(lines) == len(STEPS)
    assert all(line.startswith(step) for line, step in zip(lines, STEPS))
    # the libraries' own log lines (WeasyPrint's progress, fontTools' subsetting) stay out
    logging.getLogger("weasyprint.progress").info("Step 2 - Fetching and parsing CSS")
    logging.getLogger("fontTools.subset").info("maxp pruned")
    assert capsys.readouterr().err == ""


def test_debug_also_shows_the_libraries_log_lines(make_project, capsys, restore_logging):
    assert cli.main(["check", "--debug", str(make_project())]) == 1
    assert capsys.readouterr().err.startswith("Step 1: reading and validating")
    logging.getLogger("fontTools.subset").info("maxp pruned")
    assert capsys.readouterr().err == "maxp pruned\n"


@pytest.mark.parametrize("debug", [False, True])
def test_a_failing_pdf_worker_is_one_line_or_with_debug_its_traceback(
        make_project, tmp_path, capsys, monkeypatch, restore_logging, debug):
    def failing_report(outcome, **kwargs):
        # a body part that is not a document: the worker process raises TypeError
        return {"report.pdf": render_pdf(lambda page_of, total: "<p>front</p>", [None],
                                         root=tmp_path, title="t",
                                         created=datetime(2030, 1, 1, tzinfo=timezone.utc))}

    monkeypatch.setattr(pipeline, "render_report", failing_report)
    out = tmp_path / "out"
    argv = ["build", str(make_project()), "-o", str(out), *(["--debug"] if debug else [])]
    assert cli.main(argv) == 2
    lines = capsys.readouterr().err.splitlines()
    error_lines = [line for line in lines if line.startswith("error: ")]
    assert len(error_lines) == 1
    assert error_lines[0].startswith("error: rendering body part 1 of the PDF failed: TypeError")
    assert not out.exists()
    if debug:
        # the worker's own traceback, down to the frame that raised in the worker process
        assert "in _part_process" in "\n".join(lines) and lines[-1] == error_lines[0]
    else:
        assert lines == error_lines
        assert lines[0].endswith("(run with --debug for the traceback)")


def test_help_lists_every_command_with_its_whole_description(capsys):
    assert cli.main(["--help"]) == 0
    listing = " ".join(capsys.readouterr().out.split())
    for name, command in cli.cli.commands.items():
        description = " ".join(command.help.split("\n\n")[0].split())
        assert f"{name} {description}" in listing


def test_limits_and_applications_listings(capsys):
    assert cli.main(["limits"]) == 0
    out = capsys.readouterr().out
    assert "tia-568.3-d" in out and "iso-11801-1" in out
    assert cli.main(["limits", "iso-11801-1"]) == 0
    shown = capsys.readouterr().out
    assert "OS2" in shown
    # ISO/IEC 11801-1 is a design budget; ISO/IEC 14763-3's test limits are not held
    assert "design budget" in " ".join(shown.split()) and "14763-3" in shown
    assert cli.main(["limits", "nope"]) == 2
    assert "no built-in limit set 'nope'" in capsys.readouterr().err
    assert cli.main(["applications"]) == 0
    assert "10GBASE-SR" in capsys.readouterr().out


def test_version_help_and_usage_errors(capsys):
    assert cli.main(["--version"]) == 0
    assert __version__ in capsys.readouterr().out
    assert cli.main(["--help"]) == 0
    assert "Examples" in capsys.readouterr().out
    assert cli.main(["bogus"]) == 2
    assert cli.main(["check"]) == 2


@pytest.mark.slow
def test_installed_package_runs_from_another_folder(tmp_path):
    """The wheel ships templates, data and the compiled catalogues: run the installed package
    outside the checkout, in German."""
    probe = subprocess.run([sys.executable, "-c", "import reportgen, sys; print(reportgen.__file__)"],
                           cwd=tmp_path, capture_output=True, text=True)
    location = probe.stdout.strip()
    if probe.returncode != 0 or Path(location).resolve().parent == ROOT / "reportgen":
        pytest.skip("reportgen is not installed outside the checkout (run pip install . first)")
    out = tmp_path / "out"
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    done = subprocess.run([sys.executable, "-m", "reportgen", "build", str(DEMO), "-o", str(out),
                           "--language", "de"],
                          cwd=tmp_path, capture_output=True, text=True, env=env)
    assert done.returncode == 0, done.stderr
    assert (out / "report.pdf").stat().st_size > 10_000
    # the installed package reads its compiled German catalogue (the wheel carries no .po)
    assert '<html lang="de">' in (out / "report.html").read_text(encoding="utf-8")
    assert "Streckenverzeichnis" in (out / "report.html").read_text(encoding="utf-8")
