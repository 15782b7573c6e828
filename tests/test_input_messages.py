"""Every input file read one way, every problem in one run, one clear message per mistake.

Limit files and the application table go through the loader project.yaml uses; a
misspelt header does not hide row problems; a row split by a decimal comma gets one
message; ids are matched ignoring case where the trade writes them either way. The
expected messages are ours (typed here, not produced by the code); the values they
quote are the test inputs.
"""
from __future__ import annotations

import pytest

from reportgen.cli import main
from reportgen.errors import InputError
from reportgen.inputs.project import load_project
from tests.conftest import MINIMAL_PROJECT

Y = MINIMAL_PROJECT["project.yaml"]
OWN_LIMITS = Y.replace("limits: tia-568.3-d", "limits: own-limits.yaml")
# Coefficients below are test inputs, not a standard's values.
LIMIT_FILE = ("id: own\n"
              "title: Own limits\n"
              "source: test input\n"
              "connection_db: 0.75\n"
              "splice_db: 0.3\n"
              "attenuation_db_per_km: {OM4: {850: 3.0, 1300: 1.5}, OS2: {1310: 0.5, 1550: 0.5}}\n")


def problems_of(project_dir) -> list[str]:
    with pytest.raises(InputError) as caught:
        load_project(project_dir)
    return [str(problem) for problem in caught.value.problems]


# ------------------------------------------------------------------ limit files


def test_limit_file_with_a_repeated_key_is_refused(make_project):
    project_dir = make_project({"project.yaml": OWN_LIMITS,
                                "own-limits.yaml": LIMIT_FILE + "connection_db: 0.5\n"})
    assert problems_of(project_dir) == [
        "own-limits.yaml, line 7, connection_db: expected each key once in its mapping "
        "(first given on line 4)"]


def test_limit_file_with_a_repeated_key_check_exits_2(make_project, capsys):
    project_dir = make_project({"project.yaml": OWN_LIMITS,
                                "own-limits.yaml": LIMIT_FILE.replace(
                                    "{850: 3.0, 1300: 1.5}", "{850: 3.0, 850: 2.5}")})
    assert main(["check", str(project_dir)]) == 2
    assert capsys.readouterr().err.splitlines() == [
        "error: own-limits.yaml, line 6, 850: expected each key once in its mapping (first given on line 6)",
        "1 problem(s) found; nothing was written"]


def test_limit_file_problems_all_reported_in_one_run(make_project):
    project_dir = make_project({"project.yaml": OWN_LIMITS, "own-limits.yaml": (
        LIMIT_FILE.replace("splice_db: 0.3", "splice_db: 0,3")
        .replace("title: Own limits\n", "")
        .replace("{850: 3.0, 1300: 1.5}", "{85: 3.0, 1300: -1}")
        + "attenuation_db_per_km_outsde: {OS2: {1310: 0.4}}\n")})
    assert problems_of(project_dir) == [
        "own-limits.yaml, attenuation_db_per_km_outsde: expected a key the format knows "
        "(did you mean attenuation_db_per_km_outside?)",
        "own-limits.yaml, title: expected a non-empty text (required key is missing)",
        "own-limits.yaml, splice_db: expected a number of dB from 0 to 100 "
        "(write numbers with a decimal point, not a comma) (got '0,3')",
        "own-limits.yaml, attenuation_db_per_km.OM4: expected a wavelength in whole nm from 600 to 1700 "
        "(got '85')",
        "own-limits.yaml, attenuation_db_per_km.OM4.1300: expected a number of dB from 0 to 100 "
        "(got '-1')",
    ]


def test_limit_file_in_another_case_of_a_built_in_id(make_project):
    project = load_project(make_project({"project.yaml": Y.replace("tia-568.3-d", "TIA-568.3-D")}))
    # the standard is ANSI/TIA-568.3-D; its built-in set's id is written in lower case
    assert (project.testing.limits, project.limits.id) == ("tia-568.3-d", "tia-568.3-d")


def test_limits_command_ignores_case(capsys):
    assert main(["limits", "tia-568.3-d"]) == 0
    lower = capsys.readouterr().out
    assert main(["limits", "TIA-568.3-D"]) == 0
    upper = capsys.readouterr().out
    assert upper == lower
    assert upper.splitlines()[0].endswith("(tia-568.3-d)")


# ------------------------------------------------------------------ ids and case


def test_application_id_in_another_case_is_the_tables_id(make_project):
    project = load_project(make_project({"links.csv": (
        "link_id,end_a,end_b,fiber_type,length_m,strands,applications\n"
        "L1,Room 1,Room 2,OM4,120,2,10gbase-sr\n"
        "L2,Room 1,Hut 3,OS2,1500,1,\n")}))
    # IEEE 802.3 clause 52 writes the PMD 10GBASE-SR (common practice: capitals)
    assert project.links[0].applications == ("10GBASE-SR",)


# ------------------------------------------------------------------ one rule, one place


def test_number_patterns_and_wavelength_range_are_defined_once():
    import re
    from pathlib import Path

    import reportgen
    package = Path(reportgen.__file__).parent
    digit_patterns = {}
    range_literals = {}
    for path in sorted(package.rglob("*.py")):
        text = path.read_text(encoding="utf-8")
        name = path.relative_to(package).as_posix()
        digit_patterns[name] = len(re.findall(r"re\.compile\(r?[\"'][^\"']*\\d", text))
        range_literals[name] = len(re.findall(r"\b600\b[^\n]*\b1700\b", text))
    # NUMBER_TEXT and DECIMAL_COMMA_TEXT; WAVELENGTH_RANGE_NM and its comment
    assert {name: n for name, n in digit_patterns.items() if n} == {"inputs/checker.py": 2}
    assert {name: n for name, n in range_literals.items() if n} == {"inputs/checker.py": 2}


def test_unknown_link_id_gets_a_did_you_mean(make_project):
    links = ("link_id,end_a,end_b,fiber_type,length_m,strands\n"
             "A-BB-01,Room 1,Room 2,OM4,120,2\n"
             "A-BB-02,Room 1,Room 3,OM4,90,2\n")
    results = ("link_id,strand,wavelength_nm,direction,loss_db,tested_at,instrument\n"
               "a-bb-01,1,850,ab,1.20,2030-01-15,\n"
               "A-BB-1,1,850,ab,1.20,2030-01-15,\n"
               "C-DD-77,1,850,ab,1.20,2030-01-15,\n")
    assert problems_of(make_project({"links.csv": links, "results/day1.csv": results})) == [
        "results/day1.csv, line 2, link_id: expected a link_id defined in links.csv "
        "(did you mean A-BB-01?) (got 'a-bb-01')",
        "results/day1.csv, line 3, link_id: expected a link_id defined in links.csv "
        "(did you mean A-BB-01?) (got 'A-BB-1')",
        "results/day1.csv, line 4, link_id: expected a link_id defined in links.csv (got 'C-DD-77')",
    ]


# ------------------------------------------------------------------ a bad header hides nothing


def test_misspelt_results_header_does_not_hide_row_problems(make_project):
    results = ("link_id,strand,wavelenght_nm,direction,loss_db,tested_at,instrument\n"
               "L1,1,850,ab,1.20,2030-01-15T09:00,SRC-1\n"
               "L1,1,850,ba,1.25,2030-01-15T09:05,SRC-1\n"
               "L1,2,850,ab,1.10,2030-01-15T09:10,SRC-1\n"
               "L1,2,850,ba,1.15,2030-01-15T09:15,SRC-1\n"
               "L2,1,1310,ab,0.60,2030-01-15T10:00,SRC-1\n"
               'L2,1,1310,ba,"0,87",2030-01-15T10:05,SRC-1\n')
    assert problems_of(make_project({"results/day1.csv": results})) == [
        "results/day1.csv, line 1, wavelength_nm: expected a column named wavelength_nm "
        "(did you mean wavelength_nm instead of 'wavelenght_nm'?)",
        "results/day1.csv, line 7, loss_db: expected a loss in dB, a number of at most 100 "
        "(write numbers with a decimal point, not a comma) (got '0,87')",
    ]


def test_misspelt_links_header_does_not_hide_row_problems(make_project):
    links = ("link_id,end_a,end_b,fibre_type,length_m,strands\n"
             "L1,Room 1,Room 2,OM4,120,2\n"
             "L2,Room 1,Hut 3,OS2,-1500,1\n")
    assert problems_of(make_project({"links.csv": links})) == [
        "links.csv, line 1, fiber_type: expected a column named fiber_type "
        "(did you mean fiber_type instead of 'fibre_type'?)",
        "links.csv, line 3, length_m: expected a length in m, greater than 0 and at most 200 km "
        "(got '-1500')",
    ]


def test_results_missing_every_required_column_but_one(make_project):
    results = "link_id,lambda,attenuation,date\nL9,850,1.2,2030-01-15\n"
    assert problems_of(make_project({"results/day1.csv": results})) == [
        "results/day1.csv, line 1, wavelength_nm: expected a column named wavelength_nm",
        "results/day1.csv, line 1, loss_db: expected a column named loss_db",
        "results/day1.csv, line 1, tested_at: expected a column named tested_at",
        "results/day1.csv, line 2, link_id: expected a link_id defined in links.csv (got 'L9')",
    ]


# ------------------------------------------------------------------ a row split by a decimal comma


def test_row_split_by_an_unquoted_decimal_comma_gets_one_message(make_project):
    results = ("link_id,strand,wavelength_nm,direction,loss_db,tested_at,instrument\n"
               "L1,1,850,ab,1.20,2030-01-15T09:00,SRC-1\n"
               "L2,1,1310,ab,0,87,2030-01-15T10:00,SRC-1\n")
    assert problems_of(make_project({"results/day1.csv": results})) == [
        "results/day1.csv, line 3, loss_db: expected a number with a decimal point (the unquoted comma "
        "in 0,87 splits the row into 8 cells for 7 columns; write 0.87) (got '0,87')"]


def test_row_split_twice_by_decimal_commas_names_both_fields(make_project):
    results = ("link_id,wavelength_nm,loss_db,tested_at,length_m\n"
               "L1,850,1,25,2030-01-15,119,5\n")
    assert problems_of(make_project({"results/day1.csv": results})) == [
        "results/day1.csv, line 2, loss_db: expected a number with a decimal point (the unquoted comma "
        "in 1,25 splits the row into 7 cells for 5 columns; write 1.25) (got '1,25')",
        "results/day1.csv, line 2, length_m: expected a number with a decimal point (the unquoted comma "
        "in 119,5 splits the row into 7 cells for 5 columns; write 119.5) (got '119,5')"]


def test_row_split_where_the_cell_is_unknown_gets_one_message(make_project):
    # loss 1,2 with length 3, or loss 1 with length 2,3: the row cannot tell, so only its width is reported
    results = "link_id,wavelength_nm,loss_db,length_m,tested_at\nL1,850,1,2,3,2030-01-15\n"
    assert problems_of(make_project({"results/day1.csv": results})) == [
        "results/day1.csv, line 2: expected at most 5 cells, one per header column (write numbers with a "
        "decimal point, 1.25 not 1,25, and put a text that contains a comma in double quotes) "
        "(got '6 cells')"]
