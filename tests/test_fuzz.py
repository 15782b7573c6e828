"""Property-based fuzzing of the loader and the data build through the command line.

A small valid project is mutated (files truncated, columns swapped, renamed, deleted or
duplicated, garbage lines inserted, cells replaced by random unicode, huge numbers, NaN/inf,
empty cells; byte-order marks and CRLF mixed in; YAML values and lines edited) and every run
must end either in a result or in exit status 2 with messages naming a file, never in an
internal failure; a refused build creates no output folder, and the project folder is never
modified. Runs in-process; the example counts keep the whole module to about 20 s. For a longer
hunt set REPORTGEN_FUZZ_SCALE (e.g. 20 runs twenty times as many examples).
"""
from __future__ import annotations

import contextlib
import io
import json
import os
import re
import tempfile
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from reportgen.cli import main
from tests.builders import tree_digest

BASE: dict[str, str] = {
    "project.yaml": (
        "project:\n"
        "  title: Fuzz backbone\n"
        "  site: Test site\n"
        "  contractor: {name: Test Cabling, logo: assets/logo.svg}\n"
        "testing:\n"
        "  limits: tia-568.3-d\n"
        "  reference_method: one-cord\n"
        "  directions: both\n"
        "  uncertainty_db: 0.2\n"
        "  units: m\n"
        "components:\n"
        "  split-1x8: {loss_db: 10.5, description: test splitter}\n"
        "transceivers:\n"
        "  sr: {wavelength_nm: 850, tx_min_dbm: -7.3, tx_max_dbm: -1.0,\n"
        "       rx_sensitivity_dbm: -9.9, rx_overload_dbm: -1.0}\n"
        "instruments:\n"
        "  - {id: SRC-1, kind: light-source, model: T-1, serial: '00417', calibration_due: 2030-03-01}\n"
        "  - {id: PM-1, kind: power-meter}\n"
        "technicians: [A. Example]\n"
    ),
    "assets/logo.svg": '<svg xmlns="http://www.w3.org/2000/svg" width="10" height="10"/>',
    "links.csv": (
        "link_id,end_a,end_b,fiber_type,plant,length_m,strands,connections,splices,components,"
        "applications,transceiver,notes\n"
        "L1,Room 1,Room 2,OM4,inside,120,2,1,0,,10GBASE-SR,sr,riser\n"
        "L2,Room 1,Hut 3,OS2,outside,1500,1,0,2,split-1x8,,,\n"
    ),
    "results/day1.csv": (
        "link_id,strand,wavelength_nm,direction,loss_db,tested_at,instrument,technician,length_m,note\n"
        "L1,1,850,ab,1.20,2030-01-15T09:00,SRC-1;PM-1,A. Example,121,\n"
        "L1,1,850,ba,1.25,2030-01-15T09:05,SRC-1;PM-1,A. Example,,\n"
        "L1,2,1300,ab,0.80,2030-01-15T09:10,SRC-1,A. Example,,ok\n"
        "L2,1,1310,ab,11.05,2030-01-15,SRC-1,,1502.5,\n"
        "L2,1,1550,ba,-0.3,2030-01-16T10:00+01:00,,,,retest\n"
    ),
}
CSV_FILES = ("links.csv", "results/day1.csv")
INPUT_FILES = ("project.yaml", *CSV_FILES)
# Every problem line starts with one of the files a project holds.
PROBLEM_LINE = re.compile(r"^error: (project\.yaml|links\.csv|results(/[^,:]+)?|assets/[^,:]+)[,:]")

SPECIAL_VALUES = [
    "", " ", "nan", "NaN", "inf", "-inf", "Infinity", "-0", "+0", "0", "1e308", "1e400", "-1e400",
    "9" * 30, "9" * 400, "1,5", "1.2.3", "0x1F", "1_000", "\u0661\u0662", "\u202eL1", "\u200f",
    "\x00", "L1\x00", "😀", "=1+1", "@SUM(A1)", "-2+3", '"', '""', "'", "a\nb", "\ufeff", "\r",
    "2030-02-30", "0001-01-01T00:00+01:00", "9999-12-31T23:59-23:59", "2030-01-15T25:00",
    "L1", "L2", "L9", "OM4", "OS2", "OM9", "ab", "ba", "850", "1300", "1310", "1550", "1", "2",
    "3", "1000", "1001", "SRC-1", "SRC-1;;PM-1", ";", "split-1x8", "sr", "10GBASE-SR", "outside",
]
cells = st.one_of(st.sampled_from(SPECIAL_VALUES), st.text(max_size=12),
                  st.floats(allow_nan=True, allow_infinity=True).map(repr),
                  st.integers(min_value=-10**30, max_value=10**30).map(str))


def _split(text: str) -> list[str]:
    return text.split("\n")


def _csv_rows(text: str) -> list[list[str]]:
    return [line.split(",") for line in _split(text)]


def _join(rows: list[list[str]]) -> str:
    return "\n".join(",".join(row) for row in rows)


@st.composite
def csv_mutation(draw, text: str) -> str:
    """One structural or cell-level change to CSV text."""
    rows = _csv_rows(text)
    width = len(rows[0])
    kind = draw(st.sampled_from(["cell", "cell", "cell", "swap", "rename", "delete", "duplicate",
                                 "insert", "crlf", "bom", "truncate", "empty_row", "quote"]))
    if kind == "cell":
        row = draw(st.integers(0, len(rows) - 1))
        column = draw(st.integers(0, max(len(rows[row]) - 1, 0)))
        if rows[row]:
            rows[row][column] = draw(cells)
    elif kind == "swap":
        a, b = draw(st.integers(0, width - 1)), draw(st.integers(0, width - 1))
        rows[0][a], rows[0][b] = rows[0][b], rows[0][a]
    elif kind == "rename":
        column = draw(st.integers(0, width - 1))
        rows[0][column] = draw(st.one_of(cells, st.sampled_from(
            [rows[0][column].upper(), rows[0][column][:-1], f" {rows[0][column]} ", "length", "Length_FT"])))
    elif kind == "delete":
        column = draw(st.integers(0, width - 1))
        rows = [row[:column] + row[column + 1:] for row in rows]
    elif kind == "duplicate":
        column = draw(st.integers(0, width - 1))
        rows = [row + row[column:column + 1] for row in rows]
    elif kind == "insert":
        at = draw(st.integers(0, len(rows)))
        garbage = draw(st.one_of(st.text(max_size=40), st.lists(cells, max_size=width + 2).map(",".join)))
        rows.insert(at, [garbage])
    elif kind == "empty_row":
        rows.insert(draw(st.integers(1, len(rows))), [""] * width)
    elif kind == "quote":
        row = draw(st.integers(0, len(rows) - 1))
        rows[row][0] = '"' + rows[row][0]
    text = _join(rows)
    if kind == "crlf":
        text = "".join(line + draw(st.sampled_from(["\n", "\r\n", "\r"]))
                       for line in _split(text))
    elif kind == "bom":
        text = "\ufeff" + text
    elif kind == "truncate":
        text = text[:draw(st.integers(0, len(text)))]
    return text


YAML_VALUES = [
    "", "~", "[]", "{}", "[1, 2]", "{a: 1}", "yes", "no", ".nan", ".inf", "-.inf", "1e400",
    "9" * 400, "0x10", "0o17", "2030-02-30", "2030-01-01 10:00:00", "'quoted'", '"\\u202e rtl"',
    "!!binary aGVsbG8=", "!!python/object:os.system x", "&a [*a]", "*undefined", "'unclosed",
    "[unclosed", "{a: 1, a: 2}", "|\n  block", "- x", "a: b: c", "\t", "😀", "<script>", "=1+1",
    "../outside.yaml", "/etc/passwd", "assets/logo.svg", "assets/missing.png", "tia-568.3-d",
    "iso-11801-1", "one-cord", "two-cord", "both", "one", "ft", "m", "0", "-1", "0.2", "850",
]


@st.composite
def yaml_mutation(draw, text: str) -> str:
    """One change to YAML text: a value replaced, a line deleted, duplicated or re-indented,
    garbage inserted, or the file truncated."""
    lines = _split(text)
    kind = draw(st.sampled_from(["value", "value", "value", "delete", "duplicate", "indent",
                                 "insert", "truncate", "crlf", "bom"]))
    at = draw(st.integers(0, len(lines) - 1))
    if kind == "value":
        line = lines[at]
        if ":" in line:
            key, _, _ = line.partition(":")
            lines[at] = f"{key}: {draw(st.one_of(st.sampled_from(YAML_VALUES), st.text(max_size=10)))}"
    elif kind == "delete":
        del lines[at]
    elif kind == "duplicate":
        lines.insert(at, lines[at])
    elif kind == "indent":
        lines[at] = draw(st.sampled_from(["", " ", "    ", "\t"])) + lines[at].lstrip()
    elif kind == "insert":
        lines.insert(at, draw(st.text(max_size=30)))
    text = "\n".join(lines)
    if kind == "truncate":
        text = text[:draw(st.integers(0, len(text)))]
    elif kind == "crlf":
        text = text.replace("\n", "\r\n")
    elif kind == "bom":
        text = "\ufeff" + text
    return text


def _run(argv: list[str]) -> tuple[int, str]:
    err = io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
        status = main(argv)
    return status, err.getvalue()


def _assert_refusal_is_clear(stderr: str) -> None:
    assert "internal failure" not in stderr and "Traceback" not in stderr, stderr
    problem_lines = [line for line in stderr.splitlines() if line.startswith("error: ")]
    assert problem_lines, stderr
    assert any(PROBLEM_LINE.match(line) for line in problem_lines), stderr


def check_and_build(files: dict[str, str | bytes]) -> None:
    """Write the project, run check and a data-only build, assert the contract of each run."""
    with tempfile.TemporaryDirectory() as temp:
        root = Path(temp) / "project"
        for name, content in files.items():
            path = root / name
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_bytes(content.encode("utf-8", "surrogatepass") if isinstance(content, str)
                             else content)
        before = tree_digest(root)

        status, stderr = _run(["check", str(root)])
        assert status in (0, 1, 2), stderr
        if status == 2:
            _assert_refusal_is_clear(stderr)
        else:
            assert "internal failure" not in stderr, stderr

        out = Path(temp) / "out"
        status, stderr = _run(["build", str(root), "-o", str(out), "--data-only"])
        assert status in (0, 2), stderr
        if status == 2:
            _assert_refusal_is_clear(stderr)
            assert not out.exists()
        else:
            assert sorted(path.name for path in out.iterdir()) == ["results.csv", "summary.json"]
            json.loads((out / "summary.json").read_text(encoding="utf-8"))
        assert tree_digest(root) == before


SCALE = max(1, int(os.environ.get("REPORTGEN_FUZZ_SCALE", "1")))


def fuzz(examples: int) -> settings:
    return settings(max_examples=examples * SCALE, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow])


def test_base_project_builds():
    """The unmutated project must be accepted: the mutations start from a valid project."""
    with tempfile.TemporaryDirectory() as temp:
        root = Path(temp) / "project"
        for name, content in BASE.items():
            path = root / name
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_text(content, encoding="utf-8")
        # directions: both and 2 strands: L1 needs 8 results (has 3), L2 needs 1310 and
        # 1550 nm both ways (has 2, one of them a negative loss, invalid): both incomplete,
        # so check exits 1 (the exit status of check, README "Usage").
        assert _run(["check", str(root)]) == (1, "")
        out = Path(temp) / "out"
        assert _run(["build", str(root), "-o", str(out), "--data-only"]) == (0, "")
        summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
        # Audit findings: one note, power meter PM-1 named by the results has no calibration
        # due date (docs/project-format.md, "Audit findings").
        assert summary["totals"] == {"links": 2, "pass": 0, "fail": 0, "incomplete": 2,
                                     "error_findings": 0, "warning_findings": 0,
                                     "note_findings": 1}


@fuzz(50)
@given(data=st.data())
def test_mutated_csv_files(data):
    files = dict(BASE)
    for _ in range(data.draw(st.integers(1, 3), label="mutations")):
        name = data.draw(st.sampled_from(CSV_FILES), label="file")
        files[name] = data.draw(csv_mutation(files[name]), label=name)
    check_and_build(files)


@fuzz(50)
@given(data=st.data())
def test_mutated_project_yaml(data):
    files = dict(BASE)
    for _ in range(data.draw(st.integers(1, 3), label="mutations")):
        files["project.yaml"] = data.draw(yaml_mutation(files["project.yaml"]), label="project.yaml")
    check_and_build(files)


@fuzz(30)
@given(name=st.sampled_from(INPUT_FILES), data=st.binary(max_size=300),
       keep=st.floats(min_value=0, max_value=1))
def test_random_bytes_and_truncation(name, data, keep):
    files: dict[str, str | bytes] = dict(BASE)
    original = BASE[name].encode("utf-8")
    files[name] = original[:int(len(original) * keep)] + data
    check_and_build(files)


@fuzz(20)
@given(name=st.sampled_from(CSV_FILES), text=st.text(max_size=200))
def test_random_unicode_appended(name, text):
    files = dict(BASE)
    files[name] = BASE[name] + text
    check_and_build(files)
