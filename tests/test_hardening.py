"""Hardening: every bad input is refused with exact messages, never a crash; input files
leading outside the project folder are refused; the output folder is checked; large inputs.

Each case is one bad input and the exact message(s) it must give (messages are ours; the
values they quote are the inputs themselves). Regression cases found by tests/test_fuzz.py
are marked "fuzz".
"""
from __future__ import annotations

import os
import sys
from pathlib import Path

import pytest

from reportgen import pipeline
from reportgen.cli import MAX_PROBLEMS_SHOWN, main
from reportgen.errors import InputError, ReportgenError
from reportgen.inputs.project import load_project
from tests.builders import tree_digest, write_large_project
from tests.conftest import MINIMAL_PROJECT

Y = MINIMAL_PROJECT["project.yaml"]
LINKS = "link_id,end_a,end_b,fiber_type,length_m,strands\n"
RESULTS = "link_id,strand,wavelength_nm,direction,loss_db,tested_at,instrument\n"
GOOD_LINKS = LINKS + "L1,Room 1,Room 2,OM4,120,2\nL2,Room 1,Hut 3,OS2,1500,1\n"
DATE = ("an ISO 8601 date or date-time between the years 1900 and 2199, "
        "e.g. 2030-01-15 or 2030-01-15T14:05")
OUTSIDE = "a file inside the project folder; this is a symbolic link leading outside it and was not read"


def problems_of(project_dir: Path) -> list[str]:
    with pytest.raises(InputError) as caught:
        load_project(project_dir)
    return [str(problem) for problem in caught.value.problems]


# --- bad input the loader's own tests did not cover yet ------------------------------------

BAD = [
    # wrong YAML types
    pytest.param("project.yaml", "- a\n- b\n",
                 ["project.yaml: expected a YAML mapping with the sections project and testing (got 'list')"],
                 id="yaml top level is a list"),
    pytest.param("project.yaml", Y.replace("  title: Test backbone\n  contractor: {name: Test Cabling}\n",
                                           "  - title\n"),
                 ["project.yaml, project: expected a mapping with title and contractor (got \"['title']\")"],
                 id="yaml section is a list"),
    pytest.param("project.yaml", Y.replace("title: Test backbone", "title: {a: 1}"),
                 ["project.yaml, project.title: expected a non-empty text (got \"{'a': 1}\")"],
                 id="yaml title is a mapping"),
    pytest.param("project.yaml", Y.replace("  - {id: SRC-1", "  x: {id: SRC-1").replace("  - {id: PM-1", "  y: {id: PM-1"),
                 ["project.yaml, instruments: expected a list of instruments, each with id and kind "
                  "(got \"{'x': {'calibration_due': datetime.date(2030, 3, 1), 'id': 'SRC-1', 'kind': '...\")"],
                 id="yaml instruments is a mapping"),
    pytest.param("project.yaml", Y.replace("reference_method: one-cord", "reference_method: [one-cord]"),
                 ["project.yaml, testing.reference_method: expected one of one-cord, two-cord, three-cord "
                  "(got \"['one-cord']\")"], id="yaml enum is a list"),
    pytest.param("project.yaml", Y.replace("title: Test backbone", "title: 'unclosed"),
                 ["project.yaml, line 13, column 58: expected valid YAML "
                  "(got \"expected <block end>, but found '<scalar>'\")"], id="yaml unclosed quote"),
    pytest.param("project.yaml", Y.replace("  contractor:", "\tcontractor:"),
                 ["project.yaml, line 3, column 1: expected valid YAML "
                  "(got \"found character '\\\\t' that cannot start any token\")"], id="yaml tab indent"),
    pytest.param("project.yaml", Y.replace("Test backbone", "Caf\xe9").encode("latin-1"),
                 ["project.yaml, line 2: expected UTF-8 text (save the file as UTF-8) (got 'byte 0xE9')"],
                 id="yaml not UTF-8"),
    # fuzz: a date-like value that is no date was an internal ValueError of the YAML reader
    pytest.param("project.yaml", Y.replace("calibration_due: 2030-03-01", "calibration_due: 2030-02-30"),
                 ["project.yaml, instruments.SRC-1.calibration_due: expected a date YYYY-MM-DD "
                  "(got '2030-02-30')"], id="yaml impossible date"),
    # fuzz: an integer too large for a float was an internal OverflowError
    pytest.param("project.yaml", Y.replace("testing:\n", "testing:\n  uncertainty_db: " + "9" * 400 + "\n"),
                 ["project.yaml, testing.uncertainty_db: expected a number of 0 dB or more (got '"
                  + "9" * 77 + "...')"], id="yaml huge integer"),
    # fuzz: an integer of more digits than Python converts was an internal ValueError
    pytest.param("project.yaml", Y.replace("testing:\n", "testing:\n  uncertainty_db: " + "9" * 5000 + "\n"),
                 ["project.yaml, line 5, column 19: expected valid YAML (got 'Exceeds the limit (4300 digits) "
                  "for integer string conversion: value has 5000 digits; use sys.set_int_max_str_digits(...')"],
                 id="yaml integer beyond Python's digit limit"),
    # fuzz: deep nesting was an internal RecursionError
    pytest.param("project.yaml", Y + "deep: " + "[" * 600 + "]" * 600 + "\n",
                 ["project.yaml: expected valid YAML nested at most a few hundred levels deep "
                  "(got 'nesting too deep to read')"], id="yaml nested too deep"),
    # fuzz: a control character in YAML was an internal ReaderError
    pytest.param("project.yaml", Y.replace("Test backbone", "Test\x1fbackbone"),
                 ["project.yaml, line 2, column 14: expected valid YAML: printable characters, tabs and line "
                  "breaks only (got 'character U+001F')"], id="yaml control character"),
    # an alias bomb is never expanded into the message
    pytest.param("project.yaml", Y + "technicians: &a [&b [&c [&d [x, x, x], *d, *d], *c, *c], *b, *b]\n",
                 ["project.yaml, technicians: expected a list of names (got '[[[[...], [...], [...]], "
                  "[[...], [...], [...]], [[...], [...], [...]]], [[[.....')"],
                 id="yaml alias bomb"),
    # CSV layout
    pytest.param("links.csv", ",,,\n\n ,\n",
                 ["links.csv: expected a header row naming the columns (the file has only empty cells)"],
                 id="fuzz: header of empty cells was StopIteration"),
    pytest.param("results/day1.csv", "link_id;wavelength_nm;loss_db;tested_at\nL1;850;1,2;2030-01-15\n",
                 ["results/day1.csv, line 1: expected comma-separated values with a decimal point in numbers "
                  "(file looks semicolon-separated with decimal commas; export it again as comma-separated CSV)"],
                 id="results semicolon separated, decimal comma"),
    pytest.param("results/day1.csv", "link_id,wavelength_nm,loss_db,tested_at\nL1,850,1,2,2030-01-15\n",
                 ["results/day1.csv, line 2, loss_db: expected a number with a decimal point (the unquoted "
                  "comma in 1,2 splits the row into 5 cells for 4 columns; write 1.2) (got '1,2')"],
                 id="results unquoted decimal comma"),
    pytest.param("results/day1.csv", "link_id,wavelength_nm,loss_db,tested_at,Loss_dB\n"
                                     "L1,850,1.2,2030-01-15,1.3\n",
                 ["results/day1.csv, line 1, loss_db: expected each column name once (found in columns 3 and 5)"],
                 id="results duplicate column differing in case"),
    pytest.param("results/day1.csv", "link_id,wavelength,loss_db,tested_at\nL1,850,1.2,2030-01-15\n",
                 ["results/day1.csv, line 1, wavelength_nm: expected a column named wavelength_nm "
                  "(did you mean wavelength_nm instead of 'wavelength'?)"], id="results misspelt wavelength"),
    pytest.param("links.csv", GOOD_LINKS.encode() + b"L3,R\xf6om,b,OM4,1,1\n",
                 ["links.csv, line 4: expected UTF-8 text (save the file as UTF-8) (got 'byte 0xF6')"],
                 id="links not UTF-8"),
    pytest.param("links.csv", 'link_id,end_a,end_b,fiber_type,length_m\nL1,"a,b,OM4,1\n',
                 ['links.csv, line 2: expected a closing quote " for the cell opened on this line '
                  "(otherwise every line after it would be read as part of that cell)"],
                 id="quote never closed"),
    pytest.param("results/day1.csv", RESULTS + 'L1,1,850,ab,1.2,2030-01-15,"SRC-1\nL1,2,850,ab,1.2,2030-01-15,\n',
                 ['results/day1.csv, line 2: expected a closing quote " for the cell opened on this line '
                  "(otherwise every line after it would be read as part of that cell)"],
                 id="quote never closed swallows rows"),
    # numbers and ranges
    pytest.param("links.csv", LINKS + "L1,a,b,OM4,120,1e400\nL2,a,b,OS2,1500,1\n",
                 ["links.csv, line 2, strands: expected a whole number from 1 to 1000 (got '1e400')"],
                 id="fuzz: infinite strand count was an OverflowError"),
    pytest.param("links.csv", LINKS + "L1,a,b,OM4,120,1001\nL2,a,b,OS2,1500,1\n",
                 ["links.csv, line 2, strands: expected a whole number from 1 to 1000 (got '1001')"],
                 id="too many strands"),
    pytest.param("links.csv", LINKS + "L1,a,b,OM4,inf,2\nL2,a,b,OS2,1500,1\n",
                 ["links.csv, line 2, length_m: expected a length in m, greater than 0 and at most 200 km "
                  "(got 'inf')"], id="infinite length"),
    pytest.param("links.csv", LINKS + "L1,a,b,OM4,\u0661\u0662\u0660,2\nL2,a,b,OS2,1500,1\n",
                 ["links.csv, line 2, length_m: expected a length in m, greater than 0 and at most 200 km "
                  "(got '\u0661\u0662\u0660')"], id="non-ASCII digits are no number"),
    pytest.param("results/day1.csv", RESULTS + "L1,1,850,ab,-inf,2030-01-15,\n",
                 ["results/day1.csv, line 2, loss_db: expected a loss in dB, a number of at most 100 "
                  "(got '-inf')"], id="loss minus infinity"),
    pytest.param("results/day1.csv", RESULTS + "L1,1,850,ab," + "9" * 400 + ",2030-01-15,\n",
                 ["results/day1.csv, line 2, loss_db: expected a loss in dB, a number of at most 100 "
                  "(got '" + "9" * 77 + "...')"], id="loss of 400 digits, quoted short"),
    pytest.param("results/day1.csv", RESULTS + "L1,1,1e300,ab,1.2,2030-01-15,\n",
                 ["results/day1.csv, line 2, wavelength_nm: expected one of 850, 1300 for OM4 (got '1e300')"],
                 id="huge wavelength"),
    pytest.param("links.csv", LINKS + "L1,a,b,OM9,120,2\nL2,a,b,OS2,1500,1\n",
                 None, id="placeholder"),  # replaced below
    pytest.param("results/day1.csv", RESULTS + "L1,2,1300,ba,0.4,2030-02-30,\n",
                 [f"results/day1.csv, line 2, tested_at: expected {DATE} (got '2030-02-30')"],
                 id="impossible date"),
    pytest.param("results/day1.csv", RESULTS + "L1,2,1300,ba,0.4,0001-01-01T00:00+01:00,\n",
                 [f"results/day1.csv, line 2, tested_at: expected {DATE} (got '0001-01-01T00:00+01:00')"],
                 id="fuzz: date before year 1 in UTC was an OverflowError"),
    pytest.param("results/day1.csv", RESULTS + "L1,2,1300,ba,0.4,2030-01-15T24:30,\n",
                 [f"results/day1.csv, line 2, tested_at: expected {DATE} (got '2030-01-15T24:30')"],
                 id="impossible time"),
    # hostile text is quoted escaped: no terminal escape sequence or bidi override reaches stderr
    pytest.param("results/day1.csv", RESULTS + "L\x1b[2J\u202e1,1,850,ab,1.2,2030-01-15,\n",
                 ["results/day1.csv, line 2, link_id: expected a link_id defined in links.csv "
                  "(got 'L\\x1b[2J\\u202e1')"], id="control characters in a cell"),
    pytest.param("links.csv", LINKS + "L1\x1b[2J,a,b,OM4,120,2\nL2,a,b,OS2,1500,1\n",
                 ["results/day1.csv, line 2, link_id: expected a link_id defined in links.csv (got 'L1')",
                  ], id="placeholder2"),
]
BAD = [case for case in BAD if case.id not in ("placeholder", "placeholder2")]


@pytest.mark.parametrize(("path", "content", "messages"), BAD)
def test_bad_input_exact_messages(make_project, path, content, messages):
    assert problems_of(make_project({path: content})) == messages


def test_fuzz_regression_huge_numbers_without_valid_links_give_no_warning(make_project):
    # fuzz: with links.csv unusable, 1e300 as strand or wavelength reached an int cast (RuntimeWarning)
    project_dir = make_project({
        "links.csv": LINKS + "L1,a,b,OM9,120,2\n",
        "results/day1.csv": RESULTS + "L1,1e300,850,ab,1.2,2030-01-15,\nL1,1,1e300,ab,1.2,2030-01-15,\n",
    })
    assert problems_of(project_dir) == [
        "links.csv, line 2, fiber_type: expected one of OM1, OM2, OM3, OM4, OM5, OS1, OS1a, OS2 (got 'OM9')",
        "results/day1.csv, line 2, strand: expected a strand number, a whole number from 1 to 1000 "
        "(got '1e300')",
        "results/day1.csv, line 3, wavelength_nm: expected a wavelength in whole nm from 600 to 1700 "
        "(got '1e300')",
    ]


def test_control_characters_in_names_and_fields_are_escaped(make_project):
    project_dir = make_project({
        "links.csv": LINKS + "L1,a,b,OM4,120,2\nL2,a,b,OS2,1500,1\n",
        "results/day1.csv": RESULTS + "L1,3,850,ab,1.2,2030-01-15,\n",
        "results/x\x1b[2J.csv": "link_id,wavelength_nm,loss_db,tested_at,a\x1b]0;t\x07,A\x1b]0;t\x07\n",
    })
    assert problems_of(project_dir) == [
        "results/day1.csv, line 2, strand: expected a strand from 1 to 2 for link L1 (got '3')",
        "results/x\\x1b[2J.csv, line 1, a\\x1b]0;t\\x07: expected each column name once (found in columns 5 "
        "and 6)",
    ]


def test_cr_only_and_mixed_line_endings_are_read(make_project):
    project_dir = make_project({
        "links.csv": GOOD_LINKS.replace("\n", "\r"),
        "results/day1.csv": RESULTS + "L1,1,850,ab,1.2,2030-01-15,\r\nL1,2,850,ab,1.3,2030-01-15,\n"
                            "L9,1,850,ab,1.2,2030-01-15,\r",
    })
    assert problems_of(project_dir) == [
        "results/day1.csv, line 4, link_id: expected a link_id defined in links.csv (got 'L9')"]


# --- inputs whose real path is outside the project folder -----------------------------------

@pytest.fixture
def outside(tmp_path: Path) -> Path:
    folder = tmp_path / "elsewhere"
    folder.mkdir()
    (folder / "stolen.csv").write_text(RESULTS + "L1,1,850,ab,1.2,2030-01-15,\n", encoding="utf-8")
    (folder / "links.csv").write_text(GOOD_LINKS, encoding="utf-8")
    (folder / "project.yaml").write_text(Y, encoding="utf-8")
    return folder


def test_results_symlink_leading_outside_is_refused_in_name_order(make_project, outside):
    project_dir = make_project({"results/b.csv": RESULTS + "L9,1,850,ab,1.2,2030-01-15,\n"})
    (project_dir / "results" / "a.csv").symlink_to(outside / "stolen.csv")
    (project_dir / "results" / "c.csv").symlink_to("/dev/zero")
    (project_dir / "results" / "d.csv").symlink_to("../links.csv")  # inside: read (and refused as results)
    (project_dir / "results" / ".hidden.csv").symlink_to(outside / "stolen.csv")  # hidden: skipped
    assert problems_of(project_dir) == [
        f"results/a.csv: expected {OUTSIDE}",
        "results/b.csv, line 2, link_id: expected a link_id defined in links.csv (got 'L9')",
        f"results/c.csv: expected {OUTSIDE}",
        "results/d.csv, line 1, wavelength_nm: expected a column named wavelength_nm",
        "results/d.csv, line 1, loss_db: expected a column named loss_db",
        "results/d.csv, line 1, tested_at: expected a column named tested_at",
    ]


def test_links_and_project_yaml_symlinks_leading_outside_are_refused(make_project, outside):
    project_dir = make_project({"project.yaml": None, "links.csv": None})
    (project_dir / "project.yaml").symlink_to(outside / "project.yaml")
    (project_dir / "links.csv").symlink_to(outside / "links.csv")
    assert problems_of(project_dir) == [f"project.yaml: expected {OUTSIDE}", f"links.csv: expected {OUTSIDE}"]


def test_results_folder_symlink_leading_outside_is_refused(make_project, outside):
    project_dir = make_project({"results/day1.csv": None})
    (project_dir / "results").symlink_to(outside)
    assert problems_of(project_dir) == [
        "results: expected a folder inside the project folder; this is a symbolic link leading outside it "
        "and was not read"]


def test_symlinks_inside_the_folder_are_followed(make_project):
    project_dir = make_project({"data/links-v2.csv": GOOD_LINKS, "links.csv": None})
    (project_dir / "links.csv").symlink_to("data/links-v2.csv")
    assert [link.link_id for link in load_project(project_dir).links] == ["L1", "L2"]


def test_project_folder_given_through_a_symlink_is_fine(make_project, tmp_path):
    project_dir = make_project()
    (tmp_path / "alias").symlink_to(project_dir)
    assert len(load_project(tmp_path / "alias").links) == 2


# --- the command line: exit 2, every problem, capped list, nothing written, no traceback ----

def test_cli_bad_input_exit_2_capped_list_nothing_written(make_project, tmp_path, capsys):
    rows = "".join(f"L1,1,850,ab,x{n},2030-01-15,\n" for n in range(120))
    project_dir = make_project({"results/day1.csv": RESULTS + rows})
    before = tree_digest(project_dir)
    out = tmp_path / "out"
    assert main(["build", str(project_dir), "-o", str(out), "--data-only"]) == 2
    err = capsys.readouterr().err.splitlines()
    assert len(err) == MAX_PROBLEMS_SHOWN + 1
    assert err[0] == ("error: results/day1.csv, line 2, loss_db: expected a loss in dB, a number of at "
                      "most 100 (got 'x0')")
    assert err[-1] == "error: ... and 70 more problems (120 in all); nothing was written"
    assert "Traceback" not in "\n".join(err)
    assert not out.exists()
    assert tree_digest(project_dir) == before


def test_cli_one_problem_per_line_and_count(make_project, capsys):
    project_dir = make_project({"project.yaml": Y.replace("one-cord", "4-cord"),
                                "results/day1.csv": RESULTS + "L1,1,850,ab,1.2,15/01/2030,\n"})
    assert main(["check", str(project_dir)]) == 2
    assert capsys.readouterr().err.splitlines() == [
        "error: project.yaml, testing.reference_method: expected one of one-cord, two-cord, three-cord "
        "(got '4-cord')",
        f"error: results/day1.csv, line 2, tested_at: expected {DATE} (got '15/01/2030')",
        "2 problem(s) found; nothing was written",
    ]


def test_cli_missing_project_folder(tmp_path, capsys):
    missing = tmp_path / "nope"
    assert main(["check", str(missing)]) == 2
    assert capsys.readouterr().err.splitlines() == [
        f"error: {missing}: expected a project folder with project.yaml and links.csv (got 'no such folder')",
        "1 problem(s) found; nothing was written"]


@pytest.mark.parametrize("where", [".", "results", "results/sub", "assets", "otdr/x"])
def test_output_folder_inside_the_inputs_is_refused(make_project, capsys, where):
    project_dir = make_project()
    before = tree_digest(project_dir)
    out = project_dir / where
    assert main(["build", str(project_dir), "-o", str(out), "--data-only"]) == 2
    assert capsys.readouterr().err.strip() == (
        f"error: output folder {out} is the project folder or one of its input folders (results, otdr, "
        "assets); choose another with -o (default: PROJECT/report)")
    assert tree_digest(project_dir) == before


def test_output_folder_through_a_symlink_to_the_project_is_refused(make_project, tmp_path):
    project_dir = make_project()
    (tmp_path / "alias").symlink_to(project_dir)
    with pytest.raises(ReportgenError, match="is the project folder or one of its input folders"):
        pipeline.check_out_dir(project_dir, tmp_path / "alias")


def test_data_only_build_leaves_the_project_folder_alone(make_project, tmp_path, capsys):
    project_dir = make_project()
    before = tree_digest(project_dir)
    out = tmp_path / "out"
    assert main(["build", str(project_dir), "-o", str(out), "--data-only"]) == 0
    assert sorted(path.name for path in out.iterdir()) == ["results.csv", "summary.json"]
    assert tree_digest(project_dir) == before


# --- large input --------------------------------------------------------------------------

_OPENED: list[str] | None = None  # while a list, every file Python opens is appended to it


def _record_open(event: str, args: tuple) -> None:
    if event == "open" and _OPENED is not None and isinstance(args[0], (str, bytes, os.PathLike)):
        _OPENED.append(os.fsdecode(args[0]))


def test_one_gigabyte_results_file_is_refused_without_reading(make_project, tmp_path, capsys):
    global _OPENED
    project_dir = make_project()
    huge = project_dir / "results" / "huge.csv"
    with huge.open("wb") as handle:
        handle.truncate(2**30)  # sparse: no disk space; reading it would take a second or more
    sys.addaudithook(_record_open)  # PEP 578: open() raises an "open" event with the path
    _OPENED = []
    try:
        assert main(["build", str(project_dir), "-o", str(tmp_path / "out"), "--data-only"]) == 2
        opened = _OPENED
    finally:
        _OPENED = None
    assert (project_dir / "results" / "day1.csv").as_posix() in opened  # the hook sees reads
    assert huge.as_posix() not in opened  # refused from its size, never opened
    assert capsys.readouterr().err.splitlines()[0] == (
        "error: results/huge.csv: expected a file of at most 256 MB; this file is 1024 MB")
    assert not (tmp_path / "out").exists()


@pytest.mark.slow
def test_twenty_megabyte_results_file_loads(make_project):
    row = "L1,{strand},850,{direction},1.25,2030-01-15T09:{minute:02d},SRC-1;PM-1,A. Example,{note}\n"
    note = "x" * 200
    header = RESULTS.replace("instrument\n", "instrument,technician,note\n")
    lines = [row.format(strand=1 + n % 2, direction="ab" if n % 3 else "ba", minute=n % 60, note=note)
             for n in range(90_000)]
    content = header + "".join(lines)
    assert len(content) > 20 * 2**20
    project = load_project(make_project({"results/day1.csv": content}))
    assert len(project.results) == 90_000


@pytest.mark.slow
def test_one_hundred_thousand_results_validate(tmp_path):
    project_dir = write_large_project(tmp_path / "big", links=12_500)
    project = pipeline.validate_only(project_dir)
    assert (len(project.links), len(project.results)) == (12_500, 100_000)


# --- hostile content end to end: text stays text, resources stay inside the folder ----------

HOSTILE = {
    "script": "<script>alert(1)</script>",
    "attribute": '"><img src=x onerror=alert(1)>',
    "template": "{{ 7*7 }}{% if true %}T{% endif %}",
    "style": "</style><style>body{display:none}</style>",
    "cdata": "]]><x>",
}
RTL = "\u202eevil\u202c\u200f"


def _png(width: int, height: int) -> bytes:
    """A valid grey PNG (PNG specification, ISO/IEC 15948: signature, IHDR, IDAT, IEND)."""
    import struct
    import zlib

    def chunk(kind: bytes, data: bytes) -> bytes:
        return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data))

    raw = b"".join(b"\x00" + b"\x80" * width for _ in range(height))
    return (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", width, height, 8, 0, 0, 0, 0))
            + chunk(b"IDAT", zlib.compress(raw)) + chunk(b"IEND", b""))


def _hostile_project(root: Path, outside_png: Path, web_url: str) -> None:
    import csv
    import io
    from datetime import date

    import yaml

    h = HOSTILE
    project = {
        "project": {"title": f"Title {h['script']} {h['template']} {RTL}", "site": h["attribute"],
                    "customer": h["style"], "job_number": h["cdata"],
                    "contractor": {"name": f"Crew {h['attribute']}", "address": h["script"],
                                   "email": "x@example.invalid", "logo": "assets/logo.svg"}},
        "testing": {"limits": "tia-568.3-d", "reference_method": "one-cord", "directions": "one"},
        "components": {"split-1x8": {"loss_db": 10.5, "description": h["script"]}},
        "instruments": [{"id": "SRC-1", "kind": "light-source", "model": h["attribute"],
                         "serial": h["template"], "calibration_due": date(2030, 3, 1),
                         "description": h["style"]}],
        "technicians": [h["script"], h["attribute"]],
    }
    root.mkdir(parents=True)
    (root / "project.yaml").write_text(yaml.safe_dump(project, allow_unicode=True), encoding="utf-8")
    links = io.StringIO()
    writer = csv.writer(links, lineterminator="\n")
    writer.writerow(["link_id", "end_a", "end_b", "fiber_type", "length_m", "notes"])
    ids = [f"{name[0].upper()}{text}" for name, text in h.items()]
    for link_id, (name, text) in zip(ids, h.items()):
        writer.writerow([link_id, f"A {text}", f"B {RTL}", "OM4", "90", f"note {text}"])
    (root / "links.csv").write_text(links.getvalue(), encoding="utf-8")
    results = io.StringIO()
    writer = csv.writer(results, lineterminator="\n")
    writer.writerow(["link_id", "wavelength_nm", "loss_db", "tested_at", "instrument", "technician", "note"])
    for link_id, text in zip(ids, h.values()):
        for wavelength in (850, 1300):
            writer.writerow([link_id, wavelength, "0.9", "2030-01-15", "SRC-1", text, f"=cmd|{text}"])
    (root / "results").mkdir()
    (root / "results" / "day1.csv").write_text(results.getvalue(), encoding="utf-8")
    (root / "assets").mkdir()
    (root / "assets" / "leak.png").symlink_to(outside_png)
    inside = (root / "assets" / "leak.png").resolve()
    assert inside == outside_png  # the symlink leads outside
    # An SVG logo that tries every way out: an outside file by file: URL and through a symlink in
    # the folder, the web (image, feImage, stylesheet import), and a script (inert in a PDF).
    (root / "assets" / "logo.svg").write_text(
        '<svg xmlns="http://www.w3.org/2000/svg" xmlns:xlink="http://www.w3.org/1999/xlink" '
        'width="120" height="40" viewBox="0 0 120 40">'
        f'<style>@import url("{web_url}style.css");</style>'
        '<script>alert(1)</script>'
        f'<image x="0" y="0" width="20" height="20" href="{outside_png.as_uri()}"/>'
        f'<image x="20" y="0" width="20" height="20" xlink:href="{(root / "assets" / "leak.png").as_uri()}"/>'
        '<image x="40" y="0" width="20" height="20" href="file:///etc/passwd"/>'
        f'<image x="60" y="0" width="20" height="20" href="{web_url}logo.png"/>'
        f'<filter id="f"><feImage href="{web_url}filter.png"/></filter>'
        '<rect x="80" y="0" width="20" height="20" fill="#234" filter="url(#f)"/>'
        '</svg>', encoding="utf-8")


class _Listener:
    """A local web server that counts the requests it gets (there must be none)."""

    def __enter__(self) -> _Listener:
        import http.server
        import threading

        hits: list[str] = []

        class Handler(http.server.BaseHTTPRequestHandler):
            def do_GET(self) -> None:  # noqa: N802 (http.server's name)
                hits.append(self.path)
                self.send_response(404)
                self.end_headers()

            def log_message(self, *args: object) -> None:
                pass

        self.hits = hits
        self.server = http.server.ThreadingHTTPServer(("127.0.0.1", 0), Handler)
        self.url = f"http://127.0.0.1:{self.server.server_address[1]}/"
        self.thread = threading.Thread(target=self.server.serve_forever, daemon=True)
        self.thread.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self.server.shutdown()
        self.server.server_close()
        self.thread.join()


@pytest.mark.slow
def test_hostile_text_and_logo_end_to_end(tmp_path):
    import csv
    import html.parser
    import io
    import subprocess
    import sys

    from pypdf import PdfReader

    outside_png = tmp_path / "outside.png"
    outside_png.write_bytes(_png(7, 13))  # a size no image of the report has
    project_dir = tmp_path / "project"
    out = tmp_path / "out"
    with _Listener() as web:
        _hostile_project(project_dir, outside_png, web.url)
        before = tree_digest(project_dir)
        done = subprocess.run([sys.executable, "-m", "reportgen", "build", str(project_dir), "-o", str(out)],
                              capture_output=True, text=True, timeout=600,
                              cwd=Path(__file__).resolve().parent.parent)
        assert done.returncode == 0, done.stderr
        assert web.hits == []  # nothing was fetched from the network
    assert tree_digest(project_dir) == before

    # HTML: no element or attribute from the inputs; every hostile text is there as text.
    class Collect(html.parser.HTMLParser):
        def __init__(self) -> None:
            super().__init__(convert_charrefs=True)
            self.tags: list[tuple[str, dict[str, str | None]]] = []
            self.text: list[str] = []
            self.style: list[str] = []
            self._in_style = False

        def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
            self.tags.append((tag, dict(attrs)))
            self._in_style = tag == "style"

        def handle_endtag(self, tag: str) -> None:
            self._in_style = False

        def handle_data(self, data: str) -> None:
            (self.style if self._in_style else self.text).append(data)

    page = (out / "report.html").read_text(encoding="utf-8")
    parsed = Collect()
    parsed.feed(page)
    tags = {tag for tag, _ in parsed.tags}
    assert "script" not in tags and "x" not in tags and "iframe" not in tags and "object" not in tags
    assert not [(tag, name) for tag, attrs in parsed.tags for name in attrs if name.lower().startswith("on")]
    sources = [attrs.get("src") or "" for tag, attrs in parsed.tags if tag == "img"]
    assert sources and all(source.startswith("data:image/") for source in sources)
    links = [attrs.get("href") or "" for tag, attrs in parsed.tags if tag in ("a", "link")]
    assert all(href.startswith(("#", "mailto:")) for href in links), links
    assert not any("display:none" in style for style in parsed.style)
    text = "".join(parsed.text)
    for hostile in HOSTILE.values():
        assert hostile in text, hostile
    assert "{{ 7*7 }}{% if true %}T{% endif %}" in text  # shown as typed, never evaluated
    assert "\u202eevil" in text

    # PDF: the same texts, literally; no attachment but the archive copies of the project's
    # own files and outputs (none from a hostile <link rel=attachment>); the outside image
    # was never embedded.
    reader = PdfReader(out / "report.pdf")
    pdf_text = "".join("".join(p.extract_text().split()) for p in reader.pages)
    for name in ("script", "attribute", "template", "style"):
        assert "".join(HOSTILE[name].split()) in pdf_text, name
    outputs = {"manifest.json", "results.csv", "summary.json"}
    attached = dict(reader.attachments)
    assert outputs <= set(attached)
    for name in set(attached) - outputs:
        assert name.startswith("project/"), name
        assert attached[name] == [(project_dir / name.removeprefix("project/")).read_bytes()]
    sizes = {(int(image.image.width), int(image.image.height))
             for p in reader.pages for image in p.images}
    assert (7, 13) not in sizes
    assert b"/JavaScript" not in (out / "report.pdf").read_bytes()

    # results.csv: text cells that a spreadsheet would run are neutralised.
    rows = list(csv.DictReader(io.StringIO((out / "results.csv").read_text(encoding="utf-8"))))
    assert rows and all(row["note"].startswith("'=cmd|") for row in rows)


LOGO_CASES = [
    pytest.param("../outside.svg", None,
                 "error: project.yaml, project.contractor.logo: expected a path to an image inside the project "
                 "folder (symbolic links are followed) (got '../outside.svg')", id="outside"),
    pytest.param("assets/link.svg", "symlink",
                 "error: project.yaml, project.contractor.logo: expected a path to an image inside the project "
                 "folder (symbolic links are followed) (got 'assets/link.svg')", id="symlink outside"),
    pytest.param("assets/big.png", b"\x89PNG\r\n\x1a\n" + b"\0" * (2 * 2**20),
                 "error: project.yaml, project.contractor.logo: expected an image of at most 2 MB; this one is "
                 "3 MB (got 'assets/big.png')", id="too large"),
    pytest.param("assets/logo.png", b"<html>not an image</html>",
                 "error: project.yaml, project.contractor.logo: expected a file whose content is a PNG image "
                 "(got 'assets/logo.png')", id="not an image"),
    pytest.param("assets/logo.pdf", b"%PDF-1.4",
                 "error: project.yaml, project.contractor.logo: expected an image file ending .svg, .png, .jpg "
                 "or .jpeg (got 'assets/logo.pdf')", id="kind not accepted"),
    pytest.param("/etc/passwd", None,
                 "error: project.yaml, project.contractor.logo: expected a path to an image inside the project "
                 "folder (symbolic links are followed) (got '/etc/passwd')", id="absolute path outside"),
]


@pytest.mark.parametrize(("logo", "content", "message"), LOGO_CASES)
def test_bad_logo_is_refused(make_project, tmp_path, capsys, logo, content, message):
    (tmp_path / "outside.svg").write_text("<svg/>", encoding="utf-8")
    project_dir = make_project({"project.yaml": Y.replace("{name: Test Cabling}",
                                                          f"{{name: Test Cabling, logo: '{logo}'}}")})
    if content == "symlink":
        (project_dir / "assets").mkdir()
        (project_dir / logo).symlink_to(tmp_path / "outside.svg")
    elif content is not None:
        (project_dir / logo).parent.mkdir(parents=True, exist_ok=True)
        (project_dir / logo).write_bytes(content)
    out = tmp_path / "out"
    assert main(["build", str(project_dir), "-o", str(out)]) == 2
    assert capsys.readouterr().err.splitlines() == [message, "1 problem(s) found; nothing was written"]
    assert not out.exists()


def test_templates_folder_with_a_symlink_leading_outside_is_refused(make_project, tmp_path):
    (tmp_path / "secret.html").write_text("secret", encoding="utf-8")
    project_dir = make_project({"project.yaml": Y + "report: {templates: tpl}\n", "tpl/partials/.keep": ""})
    (project_dir / "tpl" / "partials" / "link.html.j2").symlink_to(tmp_path / "secret.html")
    assert problems_of(project_dir) == [
        "project.yaml, report.templates: expected template files inside the project folder; "
        "tpl/partials/link.html.j2 is a symbolic link leading outside it (got 'tpl')"]


def test_project_templates_cannot_reach_python_internals(make_project):
    import jinja2

    from reportgen.report import render

    project_dir = make_project({"tpl/probe.html.j2": "{{ cycler.__init__.__globals__['os'].getcwd() }}"})
    env = render.make_environment((project_dir / "tpl").resolve())
    with pytest.raises((jinja2.exceptions.SecurityError, jinja2.exceptions.UndefinedError)):
        env.get_template("probe.html.j2").render()
