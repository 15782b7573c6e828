"""imports: in project.yaml: files as they come, read through the user's profiles.

The main check: one set of invented measurements written twice, once as the project format's
own CSV files (links.csv, results/*.csv) and once the way spreadsheets and meters write them
(an .xlsx link schedule with a title row, a cp1252 semicolon export with decimal commas, split
date and time, "A->B" directions and one loss column per wavelength, an .ods sheet). Both
folders must give the same verdicts and margins, row by row. Everything here is invented.
"""
from __future__ import annotations

import dataclasses
import datetime as dt
import re
import zipfile
from pathlib import Path

import openpyxl
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from reportgen.cli import main
from reportgen.engine.judge import judge_project
from reportgen.errors import InputError
from reportgen.export.results_csv import results_csv_bytes
from reportgen.inputs.project import load_project

PROJECT_YAML = """\
project:
  title: Test hall import (invented)
  contractor: {name: Example Cabling Works (invented)}
testing:
  limits: tia-568.3-d
  reference_method: one-cord
  directions: both
"""

# link_id, end_a, end_b, fiber_type, plant, length_m, strands, connections, splices
LINKS = [
    ("T-01", "Hall 1 rack A", "Hall 2 rack B", "OM4", "inside", 82.5, 2, 2, 0),
    ("T-02", "Hall 1 rack A", "Yard cabinet 3", "OS2", "outside", 1240, 1, 0, 2),
]
# link_id, strand, direction, date, time, {wavelength_nm: loss_db}
DAY1 = [
    ("T-01", 1, "ab", "2030-11-14", "09:30", {850: 1.84, 1300: 1.02}),
    ("T-01", 1, "ba", "2030-11-14", "09:34", {850: 1.79, 1300: 0.98}),
    ("T-01", 2, "ab", "2030-11-14", "09:40", {850: 3.61, 1300: 1.10}),  # fails at 850 nm
    ("T-01", 2, "ba", "2030-11-14", "09:44", {850: 1.88, 1300: 1.05}),
    ("T-02", 1, "ab", "2030-11-14", "10:05", {1310: 1.234, 1550: 1.12}),
    ("T-02", 1, "ba", "2030-11-14", "10:09", {1310: 1.25, 1550: 1.1}),
]
DAY2 = [  # a retest of T-01 strand 2 after cleaning
    ("T-01", 2, "ab", "2030-11-15", "08:15:30", {850: 1.9, 1300: 1.07}),
]
WAVELENGTHS = (850, 1300, 1310, 1550)


def _write_native(root: Path, *, links: bool = True, days=(("day1", DAY1), ("day2", DAY2))) -> None:
    root.mkdir(parents=True, exist_ok=True)
    (root / "project.yaml").write_text(PROJECT_YAML, encoding="utf-8")
    if links:
        lines = ["link_id,end_a,end_b,fiber_type,plant,length_m,strands,connections,splices"]
        lines += [",".join(map(str, link)) for link in LINKS]
        (root / "links.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    (root / "results").mkdir(exist_ok=True)
    for name, day in days:
        lines = ["link_id,strand,wavelength_nm,direction,loss_db,tested_at,technician"]
        for link_id, strand, direction, date, time, losses in day:
            for wavelength, loss in losses.items():
                lines.append(f"{link_id},{strand},{wavelength},{direction},{loss},{date}T{time},"
                             "Ö. Example")
        (root / "results" / f"{name}.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")


METER_PROFILE = """\
as: results
delimiter: ";"
decimal: ","
encoding: cp1252
skip_rows: 2
columns:
  link_id: "Cable ID"
  strand: ["Fibre", "Fibre No."]
  direction: "Direction"
  tested_date: "Date"
  tested_time: "Time"
  technician: "Operator"
values:
  direction: {ab: ["A->B", "A>B"], ba: ["B->A", "B>A"]}
date_format: ["%d.%m.%Y", "%Y-%m-%d"]
wide:
  loss_db:
    "Loss 850 nm": {wavelength_nm: 850}
    "Loss 1300 nm": {wavelength_nm: 1300}
    "Loss 1310 nm": {wavelength_nm: 1310}
    "Loss 1550 nm": {wavelength_nm: 1550}
"""
SCHEDULE_PROFILE = """\
as: links
skip_rows: 1
columns:
  link_id: Link
  end_a: From
  end_b: To
  fiber_type: Fibre
  plant: Plant
  length_m: "Length (m)"
  strands: Strands
  connections: "Mated pairs"
  splices: Splices
"""
IMPORTS = """\
imports:
  - files: "schedule/links.xlsx"
    sheet: Links
    profile: profiles/schedule.yaml
  - files: "exports/*.csv"
    profile: profiles/meter.yaml
  - files: "exports/*.ods"
    profile: profiles/meter.yaml
"""
ARROWS = {"ab": "A->B", "ba": "B->A"}
HEADER = ["Cable ID", "Fibre No.", "Direction", "Date", "Time", "Operator",
          *(f"Loss {wavelength} nm" for wavelength in WAVELENGTHS), "Temperature (°C)"]


def _wide_rows(day):
    for link_id, strand, direction, date, time, losses in day:
        yield link_id, strand, direction, dt.date.fromisoformat(date), time, losses


def _write_imported(root: Path, extra: str = "") -> None:
    root.mkdir(parents=True, exist_ok=True)
    (root / "project.yaml").write_text(PROJECT_YAML + IMPORTS + extra, encoding="utf-8")
    (root / "profiles").mkdir()
    (root / "profiles" / "meter.yaml").write_text(METER_PROFILE, encoding="utf-8")
    (root / "profiles" / "schedule.yaml").write_text(SCHEDULE_PROFILE, encoding="utf-8")

    # the link schedule: a merged title row, the header, numbers as numbers, trailing blank rows
    (root / "schedule").mkdir()
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Notes"
    sheet.append(["This sheet is not read"])
    sheet = book.create_sheet("Links")
    sheet.append(["Link schedule, test hall (invented)"])
    sheet.merge_cells("A1:D1")
    sheet.append(["Link", "From", "To", "Fibre", "Plant", "Length (m)", "Strands", "Mated pairs",
                  "Splices", "Installer remark"])
    for link in LINKS:
        sheet.append([*link, "ok"])
    sheet["F3"] = "=80+2.5"  # T-01's length as a formula: read as the value the file saved
    sheet.append([" ", None, None])  # a row of blanks at the end
    book.save(root / "schedule" / "links.xlsx")
    _save_cached_value(root / "schedule" / "links.xlsx", "82.5")

    # day 1: the meter's export, cp1252, semicolons, decimal commas, dates as 14.11.2030
    (root / "exports").mkdir()
    lines = ["Export of an invented meter", "Unit;T-series", ";".join(HEADER)]
    for link_id, strand, direction, date, time, losses in _wide_rows(DAY1):
        cells = [f"{losses[w]}".replace(".", ",") if w in losses else "" for w in WAVELENGTHS]
        lines.append(";".join([link_id, str(strand), ARROWS[direction], date.strftime("%d.%m.%Y"),
                               time, "Ö. Example", *cells, "21,5"]))
    (root / "exports" / "day1.csv").write_bytes(("\r\n".join(lines) + "\r\n").encode("cp1252"))

    # day 2: the same layout saved as an .ods sheet (numbers and dates as the sheet stores them)
    rows = [["Export of an invented meter"] + [None] * (len(HEADER) - 1), [None] * len(HEADER), HEADER]
    for link_id, strand, direction, date, time, losses in _wide_rows(DAY2):
        rows.append([link_id, strand, ARROWS[direction], date, time, "Ö. Example",
                     *(losses.get(w) for w in WAVELENGTHS), 20.0])
    pd.DataFrame(rows).to_excel(root / "exports" / "day2.ods", engine="odf", header=False, index=False)


def _save_cached_value(path: Path, value: str) -> None:
    """Store ``value`` as the formula's last computed value, as a spreadsheet program saves it
    (openpyxl writes formulas without one)."""
    with zipfile.ZipFile(path) as archive:
        parts = {name: archive.read(name) for name in archive.namelist()}
    sheet = "xl/worksheets/sheet2.xml"
    # openpyxl writes the formula's empty value as <v></v>, <v/> or <v />, or leaves it out,
    # depending on the XML writer it finds installed
    formula = re.compile(rb"(<f>[^<]*</f>)(?:<v></v>|<v\s*/>)?")
    assert len(formula.findall(parts[sheet])) == 1
    parts[sheet] = formula.sub(lambda m: m.group(1) + f"<v>{value}</v>".encode(), parts[sheet])
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as archive:
        for name, data in parts.items():
            archive.writestr(name, data)


KEY = ["link_id", "strand", "wavelength_nm", "direction", "tested_at"]
COMPARED = [*KEY, "loss_db", "limit_db", "margin_db", "verdict", "flags"]


def _judged(root: Path):
    project = load_project(root)
    return project, judge_project(project)


def test_imported_files_judge_exactly_like_the_native_folder(tmp_path):
    _write_native(tmp_path / "native")
    _write_imported(tmp_path / "imported")
    native, native_judgement = _judged(tmp_path / "native")
    imported, imported_judgement = _judged(tmp_path / "imported")

    a = native_judgement.results[COMPARED].sort_values(KEY).reset_index(drop=True)
    b = imported_judgement.results[COMPARED].sort_values(KEY).reset_index(drop=True)
    assert len(a) == 2 * len(DAY1) + 2 * len(DAY2) == len(b)
    for row_a, row_b in zip(a.itertuples(index=False), b.itertuples(index=False)):
        assert row_a == row_b
    assert [(link.link_id, link.verdict) for link in native_judgement.links] == \
        [(link.link_id, link.verdict) for link in imported_judgement.links]
    # the same links; only the place they were read differs (links.csv line 2, sheet row 3)
    assert [dataclasses.replace(link, line=0) for link in native.links] == \
        [dataclasses.replace(link, line=0) for link in imported.links]
    assert [link.line for link in imported.links] == [3, 4]

    # One margin worked by hand (ANSI/TIA-568.3-D values as our limit file cites them: 0.75 dB per
    # mated connector pair, OM4 3.0 dB/km at 850 nm): T-01 has 2 mated pairs plus the 2 of a
    # one-cord reference and 82.5 m: limit 4 x 0.75 + 0.0825 x 3.0 = 3.2475 dB; 1.84 dB measured.
    first = b[(b.link_id == "T-01") & (b.strand == 1) & (b.wavelength_nm == 850) & (b.direction == "ab")]
    assert first["margin_db"].item() == pytest.approx(3.2475 - 1.84)
    # the retest rule across files: the 2030-11-15 row of day2.ods supersedes the failing one
    retested = b[(b.link_id == "T-01") & (b.strand == 2) & (b.wavelength_nm == 850) & (b.direction == "ab")]
    assert sorted(retested["verdict"]) == ["pass", "superseded"]


def test_imported_rows_name_their_file_and_row_as_evidence(tmp_path):
    _write_imported(tmp_path)
    project, judgement = _judged(tmp_path)
    sources = project.results["source"].tolist()
    # day1.csv: two lines skipped, the header on line 3, data from line 4; one line per strand
    # and direction becomes one row per filled loss column
    assert sources[:3] == ["exports/day1.csv:4", "exports/day1.csv:4", "exports/day1.csv:5"]
    assert sources[-1] == "exports/day2.ods[Sheet1]:4"
    text = results_csv_bytes(judgement.results).decode()
    assert text.splitlines()[0].endswith(",source_file,source_line,source")
    assert text.splitlines()[1].endswith(",exports/day1.csv,4,exports/day1.csv:4")
    assert project.files_read == ("exports/day1.csv", "exports/day2.ods", "profiles/meter.yaml",
                                  "profiles/schedule.yaml", "project.yaml", "schedule/links.xlsx")
    schedule, day1, day2 = project.imports
    assert (schedule.file, schedule.sheet, schedule.rows_read, schedule.link_ids) == (
        "schedule/links.xlsx", "Links", 2, ("T-01", "T-02"))
    assert schedule.unmapped == ("Installer remark",)
    assert (day1.rows_read, day1.rows_made, day1.unmapped) == (6, 12, ("Temperature (°C)",))
    assert ("loss_db", "wide: Loss 850 nm, Loss 1300 nm, Loss 1310 nm, Loss 1550 nm") in day1.mapping


def test_retest_rule_spans_native_and_imported_rows(tmp_path):
    # the native results/ folder holds day 1; the retest of day 2 comes from the .ods export
    _write_imported(tmp_path)
    yaml = PROJECT_YAML + IMPORTS.replace('  - files: "exports/*.csv"\n    profile: profiles/meter.yaml\n', "")
    _write_native(tmp_path, links=False, days=(("day1", DAY1),))
    (tmp_path / "project.yaml").write_text(yaml, encoding="utf-8")
    project, judgement = _judged(tmp_path)
    rows = judgement.results
    retest = rows[(rows.link_id == "T-01") & (rows.strand == 2) & (rows.wavelength_nm == 850)
                  & (rows.direction == "ab")]
    assert list(zip(retest["source"], retest["verdict"])) == [
        ("results/day1.csv:6", "superseded"), ("exports/day2.ods[Sheet1]:4", "pass")]


def test_import_command_shows_the_mapping_and_writes_contract_files(tmp_path, capsys):
    _write_imported(tmp_path / "imported")
    out = tmp_path / "normalised"
    assert main(["import", str(tmp_path / "imported"), "--write", str(out)]) == 0
    shown = capsys.readouterr().out
    assert "imports[2]: exports/day1.csv — profile profiles/meter.yaml, as results" in shown
    assert "6 rows read → 12 results rows" in shown
    assert "columns not mapped (ignored): Temperature (°C)" in shown
    assert sorted(path.relative_to(out).as_posix() for path in out.rglob("*.csv")) == [
        "links.csv", "results/day1.csv", "results/day2-Sheet1.csv"]
    # the written files with a plain project.yaml build to the same verdicts as the native folder
    (out / "project.yaml").write_text(PROJECT_YAML, encoding="utf-8")
    _write_native(tmp_path / "native")
    _, written = _judged(out)
    _, native = _judged(tmp_path / "native")
    compared = ["link_id", "strand", "wavelength_nm", "direction", "loss_db", "margin_db", "verdict"]
    assert written.results[compared].sort_values(compared[:4] + ["verdict"]).values.tolist() == \
        native.results[compared].sort_values(compared[:4] + ["verdict"]).values.tolist()


def _problems(root: Path) -> list[str]:
    with pytest.raises(InputError) as caught:
        load_project(root)
    return [str(problem) for problem in caught.value.problems]


def test_bad_profile_keys_get_a_did_you_mean_all_in_one_run(tmp_path):
    _write_imported(tmp_path)
    (tmp_path / "profiles" / "meter.yaml").write_text(
        METER_PROFILE.replace("delimiter:", "delimeter:").replace("  technician:", "  technican:")
        .replace("decimal: \",\"", "decimal: \";\""), encoding="utf-8")
    (tmp_path / "profiles" / "schedule.yaml").write_text(SCHEDULE_PROFILE.replace("as: links", "as: link"),
                                                         encoding="utf-8")
    assert _problems(tmp_path) == [
        "profiles/schedule.yaml, as: expected one of results, links (got 'link')",
        "profiles/meter.yaml, delimeter: expected one of the keys as, delimiter, decimal, encoding, "
        "skip_rows, header_rows, columns, values, date_format, wide, constants; did you mean delimiter?",
        "profiles/meter.yaml, decimal: expected one of \".\" or \",\" (got ';')",
        "profiles/meter.yaml, columns.technican: expected one of our fields link_id, wavelength_nm, "
        "loss_db, tested_at, strand, direction, instrument, technician, note, length, length_m, "
        "length_ft, tested_date, tested_time; did you mean technician?",
        "links.csv: expected a file links.csv in the project folder (not found)",
    ]
    # a links profile with a mistake: no "links.csv not found" beside its own problem
    (tmp_path / "profiles" / "meter.yaml").write_text(METER_PROFILE, encoding="utf-8")
    (tmp_path / "profiles" / "schedule.yaml").write_text(SCHEDULE_PROFILE.replace("  to:", "  tto:")
                                                         .replace("end_b: To", "end_bb: To"),
                                                         encoding="utf-8")
    assert _problems(tmp_path) == [
        "profiles/schedule.yaml, columns.end_bb: expected one of our fields link_id, end_a, end_b, "
        "fiber_type, length, length_m, length_ft, plant, strands, connections, splices, components, "
        "applications, transceiver, notes; did you mean end_b?",
        "profiles/schedule.yaml, columns: expected a mapping for end_b (under columns, wide or "
        "constants): a links row needs it",
    ]


def test_header_value_and_date_problems_name_the_cell(tmp_path):
    _write_imported(tmp_path)
    (tmp_path / "profiles" / "schedule.yaml").write_text(
        SCHEDULE_PROFILE.replace("Mated pairs", "Mated pair"), encoding="utf-8")
    export = tmp_path / "exports" / "day1.csv"
    text = export.read_bytes().decode("cp1252").replace("B->A", "BA", 1).replace("14.11.2030", "2030/11/14", 1)
    text = text.replace("3,61", "3,6x")
    export.write_bytes(text.encode("cp1252"))
    assert _problems(tmp_path) == [
        'schedule/links.xlsx, sheet Links, row 2, connections: expected a column headed "Mated pair" '
        '(columns.connections in profiles/schedule.yaml); closest headers present: "Mated pairs"',
        'exports/day1.csv, line 4, "Date" (tested_date): expected a date written as %d.%m.%Y or '
        "%Y-%m-%d (date_format in profiles/meter.yaml) (got '2030/11/14')",
        'exports/day1.csv, line 5, "Direction" (direction): expected one of the spellings under '
        "values.direction in profiles/meter.yaml: A->B, A>B, B->A, B>A (got 'BA')",
        'exports/day1.csv, line 6, "Loss 850 nm" (loss_db): expected a loss in dB, a number of at '
        "most 100 (got '3.6x')",
    ]


def test_imported_rows_get_the_native_checks(tmp_path):
    # an unknown link and a strand the link does not have: the messages of results/*.csv rows,
    # placed at the spreadsheet's row and header
    _write_imported(tmp_path)
    rows = [["Title"] + [None] * (len(HEADER) - 1), [None] * len(HEADER), HEADER,
            ["T-09", 1, "A->B", dt.date(2030, 11, 15), "08:00", "", 1.5, None, None, None, None],
            ["T-01", 3, "B>A", dt.date(2030, 11, 15), "08:00", "", 1.5, None, None, None, None]]
    pd.DataFrame(rows).to_excel(tmp_path / "exports" / "day2.ods", engine="odf", header=False, index=False)
    assert _problems(tmp_path) == [
        "exports/day2.ods, sheet Sheet1, row 4, \"Cable ID\" (link_id): expected a link_id defined in "
        "the links of schedule/links.xlsx (got 'T-09')",
        "exports/day2.ods, sheet Sheet1, row 5, \"Fibre No.\" (strand): expected a strand from 1 to 2 "
        "for link T-01 (got '3')",
    ]


def test_entries_need_files_and_an_existing_sheet(tmp_path):
    _write_imported(tmp_path, extra="  - files: \"nothing/*.csv\"\n    profile: profiles/meter.yaml\n"
                                    "    shet: A\n")
    (tmp_path / "project.yaml").write_text(
        (tmp_path / "project.yaml").read_text(encoding="utf-8").replace("sheet: Links", "sheet: Link"),
        encoding="utf-8")
    assert _problems(tmp_path) == [
        "project.yaml, imports[4].shet: expected one of the keys files, sheet, profile; did you mean sheet?",
        "project.yaml, imports[4].files: expected a pattern matching at least one file in the project "
        "folder (none matched) (got 'nothing/*.csv')",
        "schedule/links.xlsx, sheet: expected a sheet of this file: Notes, Links; did you mean Links? "
        "(got 'Link')",
    ]


def test_a_misspelt_imports_key_is_reported(tmp_path):
    _write_imported(tmp_path)
    yaml = (tmp_path / "project.yaml").read_text(encoding="utf-8").replace("imports:", "import:")
    (tmp_path / "project.yaml").write_text(yaml, encoding="utf-8")
    assert _problems(tmp_path) == [
        "project.yaml, import: expected a key the format knows (did you mean imports?)",
        "links.csv: expected a file links.csv in the project folder (not found)",
    ]


def test_decimal_commas_without_the_profile_saying_so_get_a_hint(tmp_path):
    _write_imported(tmp_path)
    profile = tmp_path / "profiles" / "meter.yaml"
    profile.write_text(METER_PROFILE.replace('decimal: ","\n', ""), encoding="utf-8")
    problems = _problems(tmp_path)
    assert len(problems) == 12  # every filled loss cell of day1.csv (6 lines x 2 wavelengths)
    assert problems[0] == (
        'exports/day1.csv, line 4, "Loss 850 nm" (loss_db): expected a loss in dB, a number of at most '
        '100 (for decimal commas write decimal: "," in profiles/meter.yaml) (got \'1,84\')')


def test_the_report_names_the_sheet_and_row_of_an_imported_result(tmp_path):
    from reportgen.report.messages import msg
    from reportgen.report.viewmodel import build_view

    _write_imported(tmp_path)
    project, judgement = _judged(tmp_path)
    view = build_view(project, judgement, now=dt.datetime(2030, 12, 1, tzinfo=dt.timezone.utc),
                      version="test")
    t01 = next(link for link in view.links if link.link_id == "T-01")
    places = {(r.source_file, r.source_sheet, r.source_line) for r in t01.results}
    assert ("exports/day2.ods", "Sheet1", 4) in places
    assert ("exports/day1.csv", None, 4) in places
    assert msg("source_sheet_row", file="exports/day2.ods", sheet="Sheet1", line=4) == \
        "exports/day2.ods, sheet Sheet1, row 4"


def test_tab_separated_text_with_detected_delimiter_and_constants(tmp_path):
    # no delimiter, no encoding in the profile: tabs are detected, UTF-8 with a byte-order mark
    _write_native(tmp_path, days=())
    (tmp_path / "profiles").mkdir()
    (tmp_path / "profiles" / "otdr-a.yaml").write_text(
        "as: results\ncolumns:\n  link_id: Link\n  loss_db: [\"Loss [dB]\", \"Loss (dB)\"]\n"
        "  tested_at: When\nconstants: {wavelength_nm: 1310, direction: ba}\n", encoding="utf-8")
    (tmp_path / "project.yaml").write_text(
        PROJECT_YAML + "imports:\n  - {files: \"in/*.txt\", profile: profiles/otdr-a.yaml}\n",
        encoding="utf-8")
    (tmp_path / "in").mkdir()
    (tmp_path / "in" / "a.txt").write_bytes(
        "\ufeffLink\tLoss (dB)\tWhen\nT-02\t1.3\t2030-11-16T11:00\n".encode("utf-8"))
    project = load_project(tmp_path)
    row = project.results.iloc[0]
    assert (row.link_id, row.wavelength_nm, row.direction, row.loss_db, row.source) == (
        "T-02", 1310, "ba", 1.3, "in/a.txt:2")
    (tmp_path / "in" / "a.txt").write_bytes("Link\tLoss (dB)\tWhen\nT-02\t1.3\t16.11.2030 \xe9\n"
                                            .encode("cp1252"))
    assert _problems(tmp_path) == [
        "in/a.txt, line 2: expected text in utf-8 (encoding in profiles/otdr-a.yaml) (got 'byte 0xE9')"]


def test_a_tab_delimiter_and_a_header_given_twice(tmp_path):
    _write_native(tmp_path, days=())
    (tmp_path / "profiles").mkdir()
    (tmp_path / "profiles" / "p.yaml").write_text(
        'as: results\ndelimiter: "\\t"\ncolumns: {link_id: Link, loss_db: Loss, tested_at: When}\n'
        "constants: {wavelength_nm: 1310}\n", encoding="utf-8")
    (tmp_path / "project.yaml").write_text(
        PROJECT_YAML + "imports:\n  - {files: \"in.tsv\", profile: profiles/p.yaml}\n", encoding="utf-8")
    (tmp_path / "in.tsv").write_text("Link\tLoss\tWhen\tLoss\nT-02\t1.3\t2030-11-16\t1.4\n", encoding="utf-8")
    assert _problems(tmp_path) == [
        'in.tsv, line 1, "Loss": expected a header the profile reads to appear once (found in '
        "columns 2, 4; profiles/p.yaml cannot tell which is meant)"]
    (tmp_path / "in.tsv").write_text("Link\tLoss\tWhen\tLoss 2\nT-02\t1.3\t2030-11-16\t1.4\n", encoding="utf-8")
    assert load_project(tmp_path).results["loss_db"].tolist() == [1.3]


def test_every_file_read_is_listed_with_size_checksum_and_rows(tmp_path):
    import hashlib

    _write_imported(tmp_path)
    project, _ = _judged(tmp_path)
    listed = {f.path: f for f in project.input_files}
    assert tuple(listed) == project.files_read
    export = (tmp_path / "exports" / "day1.csv").read_bytes()
    day1 = listed["exports/day1.csv"]
    # SHA-256 of the bytes (FIPS 180-4, via Python's hashlib, not our code)
    assert (day1.size_bytes, day1.sha256, day1.results, day1.links) == (
        len(export), hashlib.sha256(export).hexdigest(), 12, 0)
    assert (listed["schedule/links.xlsx"].links, listed["exports/day2.ods"].results) == (2, 2)
    assert listed["profiles/meter.yaml"].results == 0


def test_import_command_without_imports_and_refusing_an_input_folder(tmp_path, capsys):
    _write_native(tmp_path)
    assert main(["import", str(tmp_path)]) == 0
    assert "project.yaml has no imports: entries" in capsys.readouterr().out
    assert main(["import", str(tmp_path), "--write", str(tmp_path / "results" / "x")]) == 2
    assert "is the project folder or one of its input folders" in capsys.readouterr().err
    assert not (tmp_path / "results" / "x").exists()


def test_outputs_never_go_into_a_folder_holding_imported_files(tmp_path, capsys):
    _write_imported(tmp_path / "p")
    before = sorted(path.name for path in (tmp_path / "p" / "exports").iterdir())
    assert main(["build", str(tmp_path / "p"), "--data-only", "-o", str(tmp_path / "p" / "exports")]) == 2
    assert main(["import", str(tmp_path / "p"), "--write", str(tmp_path / "p" / "schedule")]) == 2
    err = capsys.readouterr().err
    assert "holds exports/day1.csv, a file the project reads" in err
    assert "holds schedule/links.xlsx, a file the project reads" in err
    assert sorted(path.name for path in (tmp_path / "p" / "exports").iterdir()) == before


def test_a_glob_over_the_whole_folder_does_not_read_the_default_output_folder(tmp_path):
    _write_imported(tmp_path)
    yaml = (tmp_path / "project.yaml").read_text(encoding="utf-8").replace('"exports/*.csv"', '"**/day1.csv"')
    (tmp_path / "project.yaml").write_text(yaml, encoding="utf-8")
    (tmp_path / "report").mkdir()
    (tmp_path / "report" / "day1.csv").write_text("not an export\n", encoding="utf-8")
    project = load_project(tmp_path)
    assert "report/day1.csv" not in project.files_read
    assert [source.file for source in project.imports] == [
        "schedule/links.xlsx", "exports/day1.csv", "exports/day2.ods"]


def test_a_spreadsheet_that_would_unpack_too_large_is_not_read(tmp_path, monkeypatch):
    from reportgen.inputs import import_grid

    _write_imported(tmp_path)
    with zipfile.ZipFile(tmp_path / "schedule" / "links.xlsx") as archive:
        unpacked = sum(member.file_size for member in archive.infolist())
    monkeypatch.setattr(import_grid, "MAX_UNPACKED_BYTES", unpacked - 1)  # one byte too many
    problems = _problems(tmp_path)
    assert problems[0].startswith("schedule/links.xlsx: expected a spreadsheet of at most ")
    assert "unpacked; this one unpacks to" in problems[0]
    assert not any(problem.startswith("schedule/links.xlsx, sheet") for problem in problems)


# Fuzzing the import route (see tests/test_fuzz.py for the native files): any profile value and
# any cell must end in a loaded project or an InputError naming a file, never in a crash.
_SCALARS = st.one_of(st.none(), st.booleans(), st.integers(-5, 10**6), st.floats(allow_nan=True),
                     st.text(max_size=12), st.lists(st.text(max_size=6), max_size=3),
                     st.dictionaries(st.text(max_size=6), st.text(max_size=6), max_size=2))


@pytest.fixture(scope="module")
def imported_template(tmp_path_factory):
    root = tmp_path_factory.mktemp("template") / "p"
    _write_imported(root)
    return root


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(key=st.sampled_from(["as", "delimiter", "decimal", "encoding", "skip_rows", "header_rows", "columns",
                            "values", "date_format", "wide", "constants", "columns.strand", "values.direction",
                            "wide.loss_db", "constants.note"]),
       value=_SCALARS, cell=st.text(max_size=10), column=st.integers(0, len(HEADER) - 1))
def test_fuzzed_profiles_and_cells_end_in_a_result_or_clear_problems(tmp_path_factory, imported_template,
                                                                    key, value, cell, column):
    import shutil

    import yaml

    root = tmp_path_factory.mktemp("fuzz") / "p"
    shutil.copytree(imported_template, root)
    profile = yaml.safe_load(METER_PROFILE)
    section, _, name = key.partition(".")
    if name:
        profile[section] = dict(profile.get(section) or {})
        profile[section][name] = value
    else:
        profile[section] = value
    (root / "profiles" / "meter.yaml").write_text(yaml.safe_dump(profile, allow_unicode=True),
                                                  encoding="utf-8")
    export = root / "exports" / "day1.csv"
    lines = export.read_bytes().decode("cp1252").split("\r\n")
    cells = lines[4].split(";")
    cells[column] = cell.replace(";", ",")
    lines[4] = ";".join(cells)
    export.write_bytes("\r\n".join(lines).encode("cp1252", errors="replace"))
    try:
        project = load_project(root)
    except InputError as error:
        assert error.problems and all(problem.file for problem in error.problems)
    else:
        assert len(project.results) > 0


def test_an_unclosed_quote_in_an_export_is_refused_at_its_line(tmp_path):
    _write_imported(tmp_path)
    export = tmp_path / "exports" / "day1.csv"
    text = export.read_bytes().decode("cp1252").replace("Ö. Example", '"Ö. Example', 1)
    export.write_bytes(text.encode("cp1252"))
    assert _problems(tmp_path) == [
        'exports/day1.csv, line 4: expected a closing quote " for the cell opened on this line '
        "(otherwise every line after it would be read as part of that cell)"]


# A header over two rows, as spreadsheets are often laid out: "Date/Time" merged over the date and
# time columns, "Loss (dB)" merged over one column per wavelength (the wavelengths, number cells,
# in the row below), the other headers merged down over both rows. Invented layout.
TWO_ROW_PROFILE = """\
as: results
skip_rows: 1
header_rows: 2
decimal: ","
columns:
  link_id: "Cable ID"
  strand: "Fibre No."
  direction: "Direction"
  tested_date: "Date/Time Date"
  tested_time: "Date/Time Time"
  technician: "Operator"
values:
  direction: {ab: ["A->B"], ba: ["B->A"]}
date_format: "%d.%m.%Y"
wide:
  loss_db:
    "Loss (dB) 850": {wavelength_nm: 850}
    "Loss (dB) 1300": {wavelength_nm: 1300}
    "Loss (dB) 1310": {wavelength_nm: 1310}
    "Loss (dB) 1550": {wavelength_nm: 1550}
"""
TWO_ROW_HEADER = [
    ["Cable ID", "Fibre No.", "Direction", "Date/Time", None, "Operator", "Loss (dB)", None, None, None,
     "Temperature (°C)"],
    [None, None, None, "Date", "Time", None, *WAVELENGTHS, None],
]
# (first row, first column, last row, last column), 0-based, of each merged range of the sheet
TWO_ROW_MERGES = [(0, 0, 0, 3), (1, 0, 2, 0), (1, 1, 2, 1), (1, 2, 2, 2), (1, 3, 1, 4), (1, 5, 2, 5),
                  (1, 6, 1, 9), (1, 10, 2, 10)]


def _two_row_sheet() -> list[list]:
    """The sheet's cells: a title row, the two header rows, then day 1 and day 2 (numbers as
    numbers, dates as dates)."""
    rows = [["Export of an invented meter"] + [None] * 10, *(list(row) for row in TWO_ROW_HEADER)]
    for link_id, strand, direction, date, time, losses in _wide_rows(DAY1 + DAY2):
        rows.append([link_id, strand, ARROWS[direction], date, time, "Ö. Example",
                     *(losses.get(w) for w in WAVELENGTHS), 21.5])
    return rows


def _write_xlsx(path: Path, rows: list[list], merges) -> None:
    from openpyxl.utils import get_column_letter

    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Sheet"
    for row in rows:
        sheet.append(row)
    for top, left, bottom, right in merges:
        sheet.merge_cells(f"{get_column_letter(left + 1)}{top + 1}:{get_column_letter(right + 1)}{bottom + 1}")
    book.save(path)


def _write_ods(path: Path, rows: list[list], merges) -> None:
    """An OpenDocument sheet with merged ranges (odfpy): the first cell of a range spans it, the
    others are covered cells."""
    from odf.opendocument import OpenDocumentSpreadsheet
    from odf.table import CoveredTableCell, Table, TableCell, TableRow
    from odf.text import P

    spans = {(top, left): (bottom - top + 1, right - left + 1) for top, left, bottom, right in merges}
    covered = {(r, c) for top, left, bottom, right in merges for r in range(top, bottom + 1)
               for c in range(left, right + 1)} - set(spans)
    document = OpenDocumentSpreadsheet()
    table = Table(name="Sheet")
    for r, row in enumerate(rows):
        element = TableRow()
        for c, value in enumerate(row):
            if (r, c) in covered:
                element.addElement(CoveredTableCell())
                continue
            span = {}
            if (r, c) in spans:
                span = {"numberrowsspanned": spans[r, c][0], "numbercolumnsspanned": spans[r, c][1]}
            if value is None:
                cell = TableCell(**span)
            elif isinstance(value, str):
                cell = TableCell(valuetype="string", **span)
            elif isinstance(value, dt.date):
                cell = TableCell(valuetype="date", datevalue=value.isoformat(), **span)
            else:
                cell = TableCell(valuetype="float", value=value, **span)
            if value is not None:
                cell.addElement(P(text=str(value)))
            element.addElement(cell)
        table.addElement(element)
    document.spreadsheet.addElement(table)
    document.save(str(path))


def _write_csv_two_rows(path: Path, rows: list[list]) -> None:
    """The same sheet as a spreadsheet program saves it as semicolon text in a decimal-comma
    locale: merged cells empty but the first, decimal commas, dates as 14.11.2030."""
    def text(value) -> str:
        if value is None:
            return ""
        if isinstance(value, dt.date):
            return value.strftime("%d.%m.%Y")
        return str(value).replace(".", ",") if isinstance(value, float) else str(value)

    path.write_text("\n".join(";".join(map(text, row)) for row in rows) + "\n", encoding="utf-8")


def _two_row_project(root: Path, suffix: str, rows: list[list] | None = None,
                     profile: str = TWO_ROW_PROFILE) -> Path:
    _write_native(root, days=())
    (root / "profiles").mkdir()
    (root / "profiles" / "meter.yaml").write_text(profile, encoding="utf-8")
    (root / "project.yaml").write_text(
        PROJECT_YAML + f'imports:\n  - {{files: "exports/meter{suffix}", profile: profiles/meter.yaml}}\n',
        encoding="utf-8")
    (root / "exports").mkdir()
    path = root / "exports" / f"meter{suffix}"
    rows = _two_row_sheet() if rows is None else rows
    if suffix == ".csv":
        _write_csv_two_rows(path, rows)
    else:
        (_write_xlsx if suffix == ".xlsx" else _write_ods)(path, rows, TWO_ROW_MERGES)
    return path


@pytest.mark.parametrize("suffix", [".xlsx", ".ods", ".csv"])
def test_a_header_over_two_rows_with_merged_cells_judges_like_the_native_folder(tmp_path, suffix):
    _write_native(tmp_path / "native")
    _two_row_project(tmp_path / "imported", suffix)
    _, native = _judged(tmp_path / "native")
    project, imported = _judged(tmp_path / "imported")
    a = native.results[COMPARED].sort_values(KEY).reset_index(drop=True)
    b = imported.results[COMPARED].sort_values(KEY).reset_index(drop=True)
    assert len(a) == 2 * len(DAY1) + 2 * len(DAY2) == len(b)
    for row_a, row_b in zip(a.itertuples(index=False), b.itertuples(index=False)):
        assert row_a == row_b
    # each column's header: the merged cell's text, carried over the columns it spans, then the
    # text below it, joined with one space
    source, = project.imports
    assert ("tested_date", "Date/Time Date") in source.mapping
    assert ("tested_time", "Date/Time Time") in source.mapping
    assert ("loss_db", "wide: Loss (dB) 850, Loss (dB) 1300, Loss (dB) 1310, Loss (dB) 1550") in source.mapping
    assert source.unmapped == ("Temperature (°C)",)
    # rows keep the file's numbering: title row 1, header rows 2 and 3, data from row 4
    place = "exports/meter.csv:" if suffix == ".csv" else f"exports/meter{suffix}[Sheet]:"
    assert project.results["source"].iloc[0] == place + "4"
    assert project.results["source"].iloc[-1] == place + str(3 + len(DAY1) + len(DAY2))


@pytest.mark.parametrize("suffix", [".xlsx", ".ods"])
def test_messages_under_a_two_row_header_name_the_joined_header(tmp_path, suffix):
    rows = _two_row_sheet()
    rows[4][7] = "x"  # line 5 (T-01 strand 1 B->A), the 1300 nm loss
    _two_row_project(tmp_path, suffix, rows)
    assert _problems(tmp_path) == [
        f'exports/meter{suffix}, sheet Sheet, row 5, "Loss (dB) 1300" (loss_db): expected a loss in dB, a '
        "number of at most 100 (got 'x')"]
    # a header written without the merged text above it: the headers present are listed as joined
    _two_row_project(tmp_path / "p2", suffix,
                     profile=TWO_ROW_PROFILE.replace('"Date/Time Time"', '"Time"'))
    assert _problems(tmp_path / "p2") == [
        f'exports/meter{suffix}, sheet Sheet, row 2, tested_time: expected a column headed "Time" '
        '(columns.tested_time in profiles/meter.yaml); headers present: "Cable ID", "Fibre No.", '
        '"Direction", "Date/Time Date", "Date/Time Time", "Operator", "Loss (dB) 850", "Loss (dB) 1300", '
        '"Loss (dB) 1310", "Loss (dB) 1550", "Temperature (°C)"']


def test_header_rows_must_be_a_small_whole_number(tmp_path):
    _two_row_project(tmp_path, ".csv", profile=TWO_ROW_PROFILE.replace("header_rows: 2", "header_rows: 0"))
    assert _problems(tmp_path) == [
        "profiles/meter.yaml, header_rows: expected a whole number of rows from 1 to 10 (got '0')"]
    # one header row (the default) on this file: line 2 alone is the header, the merged cells'
    # texts stand alone and the line below is read as data
    _two_row_project(tmp_path / "p2", ".csv", profile=TWO_ROW_PROFILE.replace("header_rows: 2\n", ""))
    problems = _problems(tmp_path / "p2")
    assert problems[:2] == [
        'exports/meter.csv, line 2, tested_date: expected a column headed "Date/Time Date" (columns.tested_date '
        'in profiles/meter.yaml); closest headers present: "Date/Time"',
        'exports/meter.csv, line 2, tested_time: expected a column headed "Date/Time Time" (columns.tested_time '
        'in profiles/meter.yaml); closest headers present: "Date/Time"']
    assert problems[2] == (
        'exports/meter.csv, line 2, loss_db: expected a column headed "Loss (dB) 850" (wide.loss_db in '
        'profiles/meter.yaml); closest headers present: "Loss (dB)"')
    assert len(problems) == 6  # and the other three wavelengths' columns


POINT_EXPECTED = ('a number with a decimal comma, e.g. 1,5, as decimal: "," in profiles/meter.yaml says '
                  "(a point is not read: in such a file it is a thousands separator or a slip)")


def test_a_point_in_a_decimal_comma_export_is_refused(tmp_path):
    # decimal: "," in the profile: 1.84 may be a slip for 1,84 and 1.000,98 holds a thousands
    # separator; neither is guessed
    _write_imported(tmp_path)
    export = tmp_path / "exports" / "day1.csv"
    lines = export.read_bytes().decode("cp1252").split("\r\n")
    lines[3] = lines[3].replace(";1,84;", ";1.84;")  # line 4, Loss 850 nm
    lines[4] = lines[4].replace(";0,98;", ";1.000,98;")  # line 5, Loss 1300 nm
    lines[5] = lines[5].replace("T-01;2;", "T-01;2.0;")  # line 6, the strand
    export.write_bytes("\r\n".join(lines).encode("cp1252"))
    assert _problems(tmp_path) == [
        f"exports/day1.csv, line 4, \"Loss 850 nm\" (loss_db): expected {POINT_EXPECTED} (got '1.84')",
        f"exports/day1.csv, line 5, \"Loss 1300 nm\" (loss_db): expected {POINT_EXPECTED} (got '1.000,98')",
        f"exports/day1.csv, line 6, \"Fibre No.\" (strand): expected {POINT_EXPECTED} (got '2.0')",
    ]


def test_decimal_comma_applies_to_text_cells_of_a_sheet_not_to_number_cells(tmp_path):
    # the .ods of day 2 under the same decimal-comma profile: number cells are numbers as stored
    # (1.9 is 1.9); a loss typed as text follows decimal: "," (1,07 is read, 1.07 is refused)
    _write_imported(tmp_path)
    rows = [["Title"] + [None] * (len(HEADER) - 1), [None] * len(HEADER), HEADER,
            ["T-01", 2, "A->B", dt.date(2030, 11, 15), "08:15:30", "", 1.9, "1,07", None, None, None]]
    pd.DataFrame(rows).to_excel(tmp_path / "exports" / "day2.ods", engine="odf", header=False, index=False)
    project = load_project(tmp_path)
    retest = project.results[project.results["source"] == "exports/day2.ods[Sheet1]:4"]
    assert retest[["wavelength_nm", "loss_db"]].values.tolist() == [[850, 1.9], [1300, 1.07]]
    rows[3][7] = "1.07"
    pd.DataFrame(rows).to_excel(tmp_path / "exports" / "day2.ods", engine="odf", header=False, index=False)
    assert _problems(tmp_path) == [
        f"exports/day2.ods, sheet Sheet1, row 4, \"Loss 1300 nm\" (loss_db): expected {POINT_EXPECTED} "
        "(got '1.07')"]


@pytest.mark.parametrize("decimal", ['decimal: "."\n', ""], ids=["point-written", "point-by-default"])
def test_a_comma_in_a_decimal_point_export_is_refused_with_the_profile_key_to_write(tmp_path, decimal):
    _write_imported(tmp_path)
    (tmp_path / "profiles" / "meter.yaml").write_text(METER_PROFILE.replace('decimal: ","\n', decimal),
                                                      encoding="utf-8")
    export = tmp_path / "exports" / "day1.csv"
    lines = export.read_bytes().decode("cp1252").split("\r\n")
    lines[3:] = [line.replace(",", ".") for line in lines[3:]]  # every number with a point
    lines[4] = lines[4].replace(";0.98;", ";0,98;")  # but one, line 5
    export.write_bytes("\r\n".join(lines).encode("cp1252"))
    assert _problems(tmp_path) == [
        'exports/day1.csv, line 5, "Loss 1300 nm" (loss_db): expected a loss in dB, a number of at most '
        '100 (for decimal commas write decimal: "," in profiles/meter.yaml) (got \'0,98\')']
