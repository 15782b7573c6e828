"""Test-method records (references/*.csv, inspections/*.csv) and the audit settings of
project.yaml: exact messages naming file, line and field, every problem in one run, nothing
written on bad input; the demo's findings are the ones its story plants."""
from __future__ import annotations

import io
import json
from pathlib import Path

import pytest
from PIL import Image

from reportgen import cli, pipeline
from reportgen.errors import InputError
from reportgen.inputs.project import load_project
from reportgen.inputs.records import IMAGE_MAX_PX

REFERENCES = ("instrument,wavelength_nm,reference_dbm,set_at,method,cords,cord_check_db\n"
              "PM-1,850,-20.10,2030-01-15T08:00,one-cord,SRC-1,0.05\n")
INSPECTIONS = "link_id,strand,end,result,inspected_at,criteria,technician,image\n"


def problems_of(project_dir) -> list[str]:
    with pytest.raises(InputError) as caught:
        load_project(project_dir)
    return [str(problem) for problem in caught.value.problems]


def _png(width: int, height: int) -> bytes:
    out = io.BytesIO()
    Image.new("RGB", (width, height), (20, 20, 20)).save(out, format="PNG")
    return out.getvalue()


def test_valid_records_are_read(make_project):
    root = make_project({
        "references/day1.csv": REFERENCES,
        "inspections/day1.csv": INSPECTIONS
        + "L1,2,b,pass,2030-01-15T07:00,IEC 61300-3-35,A. Tester,pictures/l1.png\n",
        "pictures/l1.png": _png(1200, 800),
    })
    project = load_project(root)
    (reference,) = project.references
    assert (reference.instrument, reference.wavelength_nm, reference.cord_check_db,
            reference.source_line) == ("PM-1", 850, 0.05, 2)
    (inspection,) = project.inspections
    image = inspection.image
    # 1200 x 800 downscaled to IMAGE_MAX_PX (240) on the longer side: 240 x 160
    assert (image.width, image.height, image.mime) == (240, 160, "image/jpeg")
    assert image.data.startswith(b"\xff\xd8\xff")
    assert max(image.width, image.height) == IMAGE_MAX_PX
    assert "pictures/l1.png" in project.files_read


def test_a_large_picture_is_capped(make_project):
    """A 2000 x 1500 picture of pure noise (the worst case for JPEG, 1.4 MB as a file) keeps at
    most 240 px and 40 KB, the cap docs/project-format.md §13.2 states."""
    import os

    out = io.BytesIO()
    Image.frombytes("RGB", (2000, 1500), os.urandom(2000 * 1500 * 3)).save(
        out, format="JPEG", quality=60)
    root = make_project({"inspections/a.csv": INSPECTIONS
                         + "L1,1,a,pass,2030-01-15T07:00,,,big.jpg\n",
                         "big.jpg": out.getvalue()})
    image = load_project(root).inspections[0].image
    assert (image.width, image.height) == (240, 180)  # 2000 x 1500 scaled by 240 / 2000
    assert len(image.data) <= 40_000


def test_no_record_folders_means_no_records(make_project):
    project = load_project(make_project())
    assert project.references is None and project.inspections is None


def test_bad_reference_rows_each_get_one_message(make_project):
    root = make_project({"references/day1.csv": (
        "instrument,wavelength_nm,reference_dbm,set_at,method,cords,cord_check_db\n"
        "PM-9,850,-20.1,2030-01-15T08:00,one-cord,,\n"
        "PM-1,85x,-20.1,2030-01-15T08:00,one-cord,,\n"
        'PM-1,850,"-20,1",yesterday,four-cord,TC-9,abc\n'
        ",850,-20.1,2030-01-15T08:00,one-cord,,\n")})
    assert problems_of(root) == [
        "references/day1.csv, line 2, instrument: expected an instrument id listed under "
        "instruments in project.yaml (got 'PM-9')",
        "references/day1.csv, line 3, wavelength_nm: expected a wavelength in whole nm from "
        "600 to 1700 (got '85x')",
        "references/day1.csv, line 4, reference_dbm: expected the reference power in dBm, from "
        "-80 to 30 (write numbers with a decimal point, not a comma) (got '-20,1')",
        "references/day1.csv, line 4, set_at: expected a date and time in ISO 8601, e.g. "
        "2026-04-14T08:30 (got 'yesterday')",
        "references/day1.csv, line 4, method: expected one of one-cord, two-cord, three-cord "
        "(got 'four-cord')",
        "references/day1.csv, line 4, cords: expected test cord ids listed under instruments in "
        "project.yaml, separated by ';' (got 'TC-9')",
        "references/day1.csv, line 4, cord_check_db: expected the test cord verification "
        "reading in dB, from -1 to 10 (got 'abc')",
        "references/day1.csv, line 5, instrument: expected the id of the power meter "
        "referenced (the cell is empty)",
    ]


def test_a_reference_file_without_a_required_column(make_project):
    root = make_project({"references/day1.csv": "instrument,wavelength_nm,set_at,method\n"
                                                 "PM-1,850,2030-01-15T08:00,one-cord\n"})
    assert problems_of(root) == [
        "references/day1.csv, line 1, reference_dbm: expected a column named reference_dbm"]


def test_bad_inspection_rows_and_pictures(make_project):
    root = make_project({
        "inspections/a.csv": INSPECTIONS
        + "L9,1,a,pass,2030-01-15T07:00,,,\n"
        + "L1,3,c,ok,2030-01-15,,,\n"
        + "L1,1,a,pass,2030-01-15T07:00,,,pictures/none.png\n"
        + "L1,1,b,pass,2030-01-15T07:00,,,pictures/fake.png\n"
        + "L1,1,b,pass,2030-01-15T07:00,,,pictures/notes.txt\n"
        + "L1,1,b,pass,2030-01-15T07:00,,,../outside.png\n",
        "pictures/fake.png": b"not a picture at all",
        "pictures/notes.txt": "text",
    })
    assert problems_of(root) == [
        "inspections/a.csv, line 2, link_id: expected a link_id from links.csv (got 'L9')",
        "inspections/a.csv, line 3, strand: expected a strand number from 1 to 2 (got '3')",
        "inspections/a.csv, line 3, end: expected a or b (the link end as in links.csv end_a, "
        "end_b) (got 'c')",
        "inspections/a.csv, line 3, result: expected one of pass, fail (got 'ok')",
        "inspections/a.csv, line 4, image: expected an existing picture file inside the project "
        "folder (got 'pictures/none.png')",
        "inspections/a.csv, line 5, image: expected a file whose content is a PNG image "
        "(got 'pictures/fake.png')",
        "inspections/a.csv, line 6, image: expected a picture file ending .png, .jpg or .jpeg "
        "(got 'pictures/notes.txt')",
        "inspections/a.csv, line 7, image: expected a path to a picture inside the project "
        "folder (symbolic links are followed) (got '../outside.png')",
    ]


def test_a_damaged_picture(make_project):
    root = make_project({"inspections/a.csv": INSPECTIONS
                         + "L1,1,a,pass,2030-01-15T07:00,,,p.png\n",
                         "p.png": _png(20, 20)[:40]})
    assert problems_of(root) == [
        "inspections/a.csv, line 2, image: expected a PNG image that can be decoded (the file "
        "is damaged) (got 'p.png')"]


def test_audit_settings_are_checked(make_project):
    root = make_project({"project.yaml": (
        "project:\n  title: T\n  contractor: {name: C}\n  work_started: soon\n"
        "testing:\n  limits: tia-568.3-d\n  reference_method: one-cord\n"
        "  required_reference_method: four-cord\n"
        "  period: {start: 2030-01-20, end: 2030-01-10}\n"
        "  audit: {asymmetry_db: 0, repeat_count: 2.5, reference_max_age: 12}\n"
        "instruments:\n  - {id: SRC-1, kind: light-source}\n  - {id: PM-1, kind: power-meter}\n")})
    assert problems_of(root) == [
        "project.yaml, project.work_started: expected a date YYYY-MM-DD (got 'soon')",
        "project.yaml, testing.audit.reference_max_age: expected a key the format knows (did "
        "you mean reference_max_age_h?)",
        "project.yaml, testing.audit.asymmetry_db: expected a number greater than 0 dB (got '0')",
        "project.yaml, testing.audit.repeat_count: expected a number from 3 to 1000, without "
        "decimals (got '2.5')",
        "project.yaml, testing.period.end: expected a date on or after the start (2030-01-20) "
        "(got '2030-01-10')",
        "project.yaml, testing.required_reference_method: expected one of one-cord, two-cord, "
        "three-cord (got 'four-cord')",
    ]


def test_every_problem_of_every_file_in_one_run_and_nothing_written(make_project, tmp_path):
    root = make_project({
        "references/day1.csv": REFERENCES + "PM-9,850,-20.1,2030-01-15T08:00,one-cord,,\n",
        "inspections/a.csv": INSPECTIONS + "L9,1,a,pass,2030-01-15T07:00,,,\n",
        "results/day1.csv": "link_id,strand,wavelength_nm,direction,loss_db,tested_at\n"
                            "L7,1,850,ab,1.0,2030-01-15\n",
    })
    problems = problems_of(root)
    assert [p.split(",")[0] for p in problems] == [
        "results/day1.csv", "references/day1.csv", "inspections/a.csv"]
    out = tmp_path / "out"
    assert cli.main(["build", str(root), "-o", str(out), "--data-only"]) == 2
    assert not out.exists()


# ------------------------------------------------------------------ outputs


def test_check_exits_1_on_an_error_finding_and_summary_lists_findings(make_project, tmp_path,
                                                                      capsys):
    # every link passes; SRC-1's calibration ran out on 2030-01-10, before the 2030-01-15
    # tests: an error finding on both links
    root = make_project({"project.yaml": (
        "project:\n  title: T\n  contractor: {name: C}\n"
        "testing:\n  limits: tia-568.3-d\n  reference_method: one-cord\n  directions: one\n"
        "  wavelengths: {multimode: [850], singlemode: [1310]}\n"
        "instruments:\n  - {id: SRC-1, kind: light-source, calibration_due: 2030-01-10}\n"
        "  - {id: PM-1, kind: power-meter, calibration_due: 2031-01-10}\n"),
        "links.csv": "link_id,end_a,end_b,fiber_type,length_m,strands\n"
                     "L1,Room 1,Room 2,OM4,120,1\n",
        "results/day1.csv": "link_id,strand,wavelength_nm,direction,loss_db,tested_at,instrument\n"
                            "L1,1,850,ab,1.20,2030-01-15T09:00,SRC-1;PM-1\n"})
    assert cli.main(["check", str(root)]) == 1
    printed = capsys.readouterr().out
    assert "1 links: 1 pass, 0 fail, 0 incomplete" in printed
    assert "calibration-overdue" in printed and "Audit findings: 1 error" in printed
    out = tmp_path / "out"
    assert cli.main(["build", str(root), "-o", str(out), "--data-only"]) == 0
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert summary["totals"] == {"links": 1, "pass": 1, "fail": 0, "incomplete": 0,
                                 "error_findings": 1, "warning_findings": 0, "note_findings": 0}
    (finding,) = summary["findings"]
    assert finding == {
        "rule": "calibration-overdue", "severity": "error", "link_id": "L1",
        "message": "Used after its calibration due date: SRC-1 (due 2030-01-10), for 1 result "
                   "(last use 2030-01-15).",
        "evidence": [{"file": "results/day1.csv", "line": 2, "strand": 1, "wavelength_nm": 850,
                      "direction": "ab", "loss_db": 1.2, "tested_at": "2030-01-15T09:00:00",
                      "instrument": ["SRC-1", "PM-1"]}]}
    header = (out / "results.csv").read_text(encoding="utf-8").splitlines()[0]
    assert "finding" not in header  # findings are not results


DEMO = Path(__file__).resolve().parent.parent / "demo_project"


def test_the_demo_gives_exactly_the_findings_its_story_plants():
    """The demo's planted problems (README "Demo project" and demo_project/links.csv notes):
    listed applications the measured loss or length does not allow, the weak and the strong
    optic, a result within the uncertainty, and the spare meter OPM-2 used on the PON branch
    the day after its calibration ran out. Its references and inspections are complete."""
    outcome = pipeline.compute(load_project(DEMO))
    found = sorted((f.rule, f.severity.value, f.link_id or "") for f in outcome.findings.items)
    planted_errors = {("application-not-supported", "A-BB-09"),
                      ("application-not-supported", "A-BB-10"),
                      ("application-not-supported", "A-BB-11"),
                      ("transceiver-too-weak", "A-BB-11")} | {
        ("calibration-overdue", f"PON-0{n}") for n in range(1, 7)}
    planted_warnings = {("transceiver-too-strong", "CB-02"), ("within-uncertainty", "A-BB-10")}
    assert {(rule, link) for rule, severity, link in found if severity == "error"} == \
        planted_errors
    assert {(rule, link) for rule, severity, link in found if severity == "warning"} == \
        planted_warnings
    assert outcome.project.references and outcome.project.inspections


def test_findings_show_on_cover_action_list_sheet_and_appendix():
    """A passing link measured with a meter past its calibration: the cover counts the error
    and does not call the work ready, the action list and the sheet name it, the appendix
    lists the rules."""
    from datetime import date, datetime

    from reportgen.engine.applications import assess_project
    from reportgen.engine.findings import find_all
    from reportgen.engine.judge import judge_project
    from reportgen.model import Instrument, InstrumentKind
    from reportgen.report import messages
    from reportgen.report.render import build_report
    from tests.builders import make_link, make_project

    meter = Instrument("PM-1", InstrumentKind.POWER_METER, calibration_due=date(2030, 1, 10))
    project = make_project(
        [make_link("L1")],
        [dict(wavelength_nm=w, direction=d, loss_db=1.0, instrument=("PM-1",))
         for w in (850, 1300) for d in ("ab", "ba")], instruments=(meter,))
    judgement = judge_project(project)
    applications = assess_project(project, judgement)
    findings = find_all(project, judgement, applications, today=date(2030, 2, 1))
    html = build_report(project, judgement, now=datetime(2030, 2, 1), version="t",
                        applications=applications, findings=findings).html
    cover, rest = html.split('id="needs-action"', 1)
    action, rest = rest.split('id="register"', 1)
    sheet = rest.split('id="link-l1"', 1)[1].split("</section>", 1)[0]
    message = ("Used after its calibration due date: PM-1 (due 2030-01-10), for 4 results "
               "(last use 2030-01-15).")
    assert "findings-tally" in cover and messages.msg("overall_errors_too", errors=1) not in cover
    assert messages.Words().plural("overall_blocked", 1, links=1, errors=1) in cover
    assert messages.Words().plural("overall_all_pass", 1, links=1) not in cover
    assert message in action and 'href="#link-l1"' in action
    assert message in sheet and "results/r.csv line 2, 3, 4, 5" in sheet
    assert 'id="appx-audit"' in html and html.count('class="code">calibration-overdue<') == 1


def test_link_sheet_lists_notable_inspections_and_counts_plain_passes():
    """Strand 1 end B failed and was cleaned: both rows shown; the other three strand ends
    passed once: counted in one line."""
    from datetime import datetime

    from reportgen.engine.judge import judge_project
    from reportgen.report.viewmodel import build_view
    from tests.builders import make_link, make_project

    inspections = [dict(strand=s, end=e) for s in (1, 2) for e in ("a", "b")] + [
        dict(strand=1, end="b", result="fail", inspected_at="2030-01-15T06:00")]
    project = make_project([make_link("L1", strands=2)],
                           [dict(wavelength_nm=850, loss_db=1.0)], inspections=inspections)
    view = build_view(project, judge_project(project), now=datetime(2030, 2, 1), version="t")
    (link,) = view.links
    assert [(i.strand, i.end, i.result) for i in link.inspections] == [
        (1, "b", "fail"), (1, "b", "pass")]
    assert link.inspections_passed.count == 3
