"""load_project: one bad input -> one exact message; a valid folder -> the right values."""
from __future__ import annotations

import hashlib
import math
import os
from datetime import date, datetime
from pathlib import Path

import numpy as np
import pytest

from reportgen.errors import InputError
from reportgen.model import (
    DEFAULT_ATTENUATORS_DB,
    RESULT_COLUMNS,
    Directions,
    FiberCategory,
    FiberType,
    InstrumentKind,
    LengthUnit,
    Paper,
    Plant,
    ReferenceMethod,
)
from reportgen.inputs.project import load_project
from tests.conftest import MINIMAL_PROJECT

Y = MINIMAL_PROJECT["project.yaml"]
LINKS = "link_id,end_a,end_b,fiber_type,length_m,strands\n"
RESULTS = "link_id,strand,wavelength_nm,direction,loss_db,tested_at,instrument\n"
METHODS = "one of one-cord, two-cord, three-cord"
BUILT_IN = ("a built-in limit set (iso-11801-1, iso-11801-2002, tia-568-c.3, tia-568.3-d) or a path "
            "to a limits YAML file inside the project folder")


def in_testing(text: str) -> str:
    return Y.replace("testing:\n", f"testing:\n  {text}\n")


def logo(path: str) -> str:
    return Y.replace("{name: Test Cabling}", f"{{name: Test Cabling, logo: {path}}}")


def problems_of(project_dir: Path) -> list[str]:
    with pytest.raises(InputError) as caught:
        load_project(project_dir)
    return [str(problem) for problem in caught.value.problems]


BAD_PROJECT_YAML = [
    pytest.param(Y.replace("one-cord", "4-cord"),
                 f"project.yaml, testing.reference_method: expected {METHODS} (got '4-cord')",
                 id="enum value"),
    pytest.param(Y.replace("reference_method", "referense_method"),
                 f"project.yaml, testing.reference_method: expected {METHODS} (required key is missing; "
                 "did you mean reference_method instead of 'referense_method'?)",
                 id="misspelt required key"),
    pytest.param(Y.replace("  title: Test backbone\n", ""),
                 "project.yaml, project.title: expected a non-empty text (required key is missing)",
                 id="missing title"),
    pytest.param(Y.replace("{name: Test Cabling}", "{name: }"),
                 "project.yaml, project.contractor.name: expected a non-empty text (the key has no value)",
                 id="empty contractor name"),
    pytest.param(Y.replace("  limits: tia-568.3-d\n", ""),
                 "project.yaml, testing.limits: expected a non-empty text (required key is missing)",
                 id="missing limits"),
    pytest.param(in_testing("uncertainty_db: abc"),
                 "project.yaml, testing.uncertainty_db: expected a number of 0 dB or more (got 'abc')",
                 id="wrong type"),
    pytest.param(in_testing("uncertainty_db: -0.1"),
                 "project.yaml, testing.uncertainty_db: expected a number of 0 dB or more (got '-0.1')",
                 id="negative uncertainty"),
    pytest.param(in_testing("uncertanty_db: 0.1"),
                 "project.yaml, testing.uncertanty_db: expected a key the format knows "
                 "(did you mean uncertainty_db?)",
                 id="misspelt optional key"),
    pytest.param(in_testing("units: yd"), "project.yaml, testing.units: expected one of m, ft (got 'yd')",
                 id="units"),
    pytest.param(in_testing("directions: three"),
                 "project.yaml, testing.directions: expected one of both, one (got 'three')", id="directions"),
    pytest.param(in_testing("wavelengths: {singlemode: [1310, 1383]}"),
                 "project.yaml, testing.wavelengths.singlemode: expected only wavelengths that limit set "
                 "tia-568.3-d defines for OS2: 1310, 1550 (got '1383')",
                 id="wavelength override not in limit set"),
    pytest.param(in_testing("wavelengths: {mm: [850]}"),
                 "project.yaml, testing.wavelengths.mm: expected a fiber category, one of multimode, "
                 "singlemode (got 'mm')", id="wavelength category"),
    pytest.param(in_testing("wavelengths: {multimode: []}"),
                 "project.yaml, testing.wavelengths.multimode: expected a non-empty list of wavelengths "
                 "[nm], e.g. [850, 1300] (got '[]')", id="empty wavelength list"),
    pytest.param(in_testing("wavelengths: {multimode: [850, 85]}"),
                 "project.yaml, testing.wavelengths.multimode: expected a wavelength in whole nm from "
                 "600 to 1700 (got '85')", id="wavelength out of range"),
    pytest.param(in_testing("attenuators_db: [1, -2]"),
                 "project.yaml, testing.attenuators_db: expected a number greater than 0 dB (got '-2')",
                 id="attenuator not positive"),
    pytest.param(in_testing("attenuators_db: 5"),
                 "project.yaml, testing.attenuators_db: expected a non-empty list of positive numbers [dB] "
                 "(got '5')", id="attenuators not a list"),
    pytest.param(Y.replace("loss_db: 10.5", "loss_db: 61"),
                 "project.yaml, components.split-1x8.loss_db: expected a number from 0 to 60 dB (got '61')",
                 id="component loss too high"),
    pytest.param(Y.replace("loss_db: 10.5, ", ""),
                 "project.yaml, components.split-1x8.loss_db: expected a number from 0 to 60 dB "
                 "(required key is missing)", id="component loss missing"),
    pytest.param(Y.replace("tx_max_dbm: -1.0", "tx_max_dbm: -8"),
                 "project.yaml, transceivers.sr.tx_max_dbm: expected at least tx_min_dbm (-7.3 dBm) "
                 "(got '-8')", id="tx min above max"),
    pytest.param(Y.replace("rx_overload_dbm: -1.0", "rx_overload_dbm: -12"),
                 "project.yaml, transceivers.sr.rx_overload_dbm: expected more than rx_sensitivity_dbm "
                 "(-9.9 dBm) (got '-12')", id="sensitivity above overload"),
    pytest.param(Y.replace("kind: power-meter", "kind: meter"),
                 "project.yaml, instruments.PM-1.kind: expected one of light-source, power-meter, otdr, "
                 "test-cord, other (got 'meter')", id="instrument kind"),
    pytest.param(Y.replace("id: PM-1", "id: SRC-1"),
                 "project.yaml, instruments[2].id: expected an id not used before (instruments[1] has it) "
                 "(got 'SRC-1')", id="duplicate instrument id"),
    pytest.param(Y.replace("calibration_due: 2030-03-01", "calibration_due: soon"),
                 "project.yaml, instruments.SRC-1.calibration_due: expected a date YYYY-MM-DD (got 'soon')",
                 id="calibration date"),
    pytest.param(Y.replace("limits: tia-568.3-d", "limits: tia-568.3"),
                 f"project.yaml, testing.limits: expected {BUILT_IN} (did you mean tia-568.3-d?) "
                 "(got 'tia-568.3')", id="unknown limit set"),
    pytest.param(Y.replace("limits: tia-568.3-d", "limits: ../outside.yaml"),
                 f"project.yaml, testing.limits: expected {BUILT_IN} (symbolic links are followed) "
                 "(got '../outside.yaml')", id="limit file outside the folder"),
    pytest.param(Y + "report: {paper: a3}\n",
                 "project.yaml, report.paper: expected one of a4, letter (got 'a3')", id="paper"),
    pytest.param(Y + "report: {templates: nowhere}\n",
                 "project.yaml, report.templates: expected an existing folder inside the project folder "
                 "(got 'nowhere')", id="templates folder missing"),
    pytest.param(Y + "technicians: A. Example\n",
                 "project.yaml, technicians: expected a list of names (got 'A. Example')", id="technicians"),
    pytest.param("project: {title: [x\n",
                 "project.yaml, line 2, column 1: expected valid YAML "
                 "(got \"expected ',' or ']', but got '<stream end>'\")", id="YAML syntax"),
    pytest.param(Y + "testing: {limits: tia-568.3-d, reference_method: one-cord}\n",
                 "project.yaml, line 15, testing: expected each key once in its mapping (first given on line 4)",
                 id="duplicate key"),
    pytest.param("", "project.yaml: expected a YAML mapping with the sections project and testing "
                     "(got 'an empty file')", id="empty file"),
    pytest.param(logo("../x.png"),
                 "project.yaml, project.contractor.logo: expected a path to an image inside the project "
                 "folder (symbolic links are followed) (got '../x.png')", id="logo outside"),
    pytest.param(logo("assets/none.png"),
                 "project.yaml, project.contractor.logo: expected an existing image file inside the "
                 "project folder (got 'assets/none.png')", id="logo missing"),
]


@pytest.mark.parametrize(("content", "message"), BAD_PROJECT_YAML)
def test_bad_project_yaml_is_reported_precisely(make_project, content, message):
    assert problems_of(make_project({"project.yaml": content})) == [message]


BAD_CSV = [
    pytest.param("links.csv", LINKS, "links.csv: expected at least one link row below the header",
                 id="links header only"),
    pytest.param("links.csv", "", "links.csv: expected a header row naming the columns (file is empty)",
                 id="links empty"),
    pytest.param("links.csv", "link_id,end_a,end_b,fibre_type,length_m\nL1,a,b,OM4,1\nL2,a,b,OS2,1500\n",
                 "links.csv, line 1, fiber_type: expected a column named fiber_type "
                 "(did you mean fiber_type instead of 'fibre_type'?)", id="misspelt column"),
    pytest.param("links.csv", "link_id,end_a,end_b,fiber_type\nL1,a,b,OM4\nL2,a,b,OS2\n",
                 "links.csv, line 1, length: expected a column named length, length_m or length_ft",
                 id="no length column"),
    pytest.param("links.csv", "link_id;end_a;end_b;fiber_type;length_m\nL1;a;b;OM4;1,5\n",
                 "links.csv, line 1: expected comma-separated values with a decimal point in numbers "
                 "(file looks semicolon-separated with decimal commas; export it again as comma-separated CSV)",
                 id="semicolon separated"),
    pytest.param("links.csv", "link_id,end_a,end_b,fiber_type,length_m,length_m\nL1,a,b,OM4,1,1\n"
                              "L2,a,b,OS2,1500,1500\n",
                 "links.csv, line 1, length_m: expected each column name once (found in columns 5 and 6)",
                 id="duplicate column"),
    pytest.param("links.csv", LINKS + "L1,a,b,OM9,120,1\nL2,a,b,OS2,1500,1\n",
                 "links.csv, line 2, fiber_type: expected one of OM1, OM2, OM3, OM4, OM5, OS1, OS1a, OS2 "
                 "(got 'OM9')", id="fiber type"),
    pytest.param("links.csv", LINKS + "L1,a,,OM4,120,1\nL2,a,b,OS2,1500,1\n",
                 "links.csv, line 2, end_b: expected where the link ends (room, rack, panel, port) "
                 "(the cell is empty)", id="empty end"),
    pytest.param("links.csv", LINKS + "L1,a,b,OM4,-5,2\nL2,a,b,OS2,1500,1\n",
                 "links.csv, line 2, length_m: expected a length in m, greater than 0 and at most 200 km "
                 "(got '-5')", id="negative length"),
    pytest.param("links.csv", LINKS + "L1,a,b,OM4,200001,2\nL2,a,b,OS2,1500,1\n",
                 "links.csv, line 2, length_m: expected a length in m, greater than 0 and at most 200 km "
                 "(got '200001')", id="length over 200 km"),
    pytest.param("links.csv", LINKS + 'L1,a,b,OM4,"1,5",2\nL2,a,b,OS2,1500,1\n',
                 "links.csv, line 2, length_m: expected a length in m, greater than 0 and at most 200 km "
                 "(write numbers with a decimal point, not a comma) (got '1,5')", id="decimal comma"),
    pytest.param("links.csv", LINKS + "L1,a,b,OM4,1,5,2\nL2,a,b,OS2,1500,1\n",
                 "links.csv, line 2, length_m: expected a number with a decimal point (the unquoted comma in "
                 "1,5 splits the row into 7 cells for 6 columns; write 1.5) (got '1,5')",
                 id="row split by a decimal comma"),
    pytest.param("links.csv", "length_m,link_id,end_a,end_b,fiber_type,strands,connections\n"
                              "120,L1,a,b,OM4,2,1,5\n1500,L2,a,b,OS2,1,0\n",
                 "links.csv, line 2: expected at most 7 cells, one per header column (write numbers with a "
                 "decimal point, 1.25 not 1,25, and put a text that contains a comma in double quotes) "
                 "(got '8 cells')", id="too many cells"),
    pytest.param("links.csv", LINKS + "L1,Room 1, rack 4,b,OM4,120,2\nL2,a,b,OS2,1500,1\n",
                 "links.csv, line 2: expected at most 6 cells, one per header column (write numbers with a "
                 "decimal point, 1.25 not 1,25, and put a text that contains a comma in double quotes) "
                 "(got '7 cells')", id="unquoted comma in a text"),
    pytest.param("links.csv", LINKS + "L1,a,b,OM4,120,0\nL2,a,b,OS2,1500,1\n",
                 "links.csv, line 2, strands: expected a whole number from 1 to 1000 (got '0')", id="strands"),
    pytest.param("links.csv", LINKS + "L1,a,b,OM4,120,2\nL2,a,b,OS2,1500,1\nL1,a,b,OS2,1500,1\n",
                 "links.csv, line 4, link_id: expected a link_id not used before (first used on line 2) "
                 "(got 'L1')", id="duplicate link_id"),
    pytest.param("links.csv", "link_id,end_a,end_b,fiber_type,length_m,length_ft\n"
                              "L1,a,b,OM4,120,394\nL2,a,b,OS2,1500,\n",
                 "links.csv, line 2, length_m/length_ft: expected a length in only one of these columns "
                 "(got '120 and 394')", id="two lengths"),
    pytest.param("links.csv", "link_id,end_a,end_b,fiber_type,length_m,length_ft\n"
                              "L1,a,b,OM4,,\nL2,a,b,OS2,1500,\n",
                 "links.csv, line 2, length_m/length_ft: expected a length in one of these columns "
                 "(all are empty)", id="no length"),
    pytest.param("links.csv", "link_id,end_a,end_b,fiber_type,length_m,plant\nL1,a,b,OM4,120,indoor\n"
                              "L2,a,b,OS2,1500,\n",
                 "links.csv, line 2, plant: expected one of inside, outside (got 'indoor')", id="plant"),
    pytest.param("links.csv", "link_id,end_a,end_b,fiber_type,length_m,connections\nL1,a,b,OM4,120,-1\n"
                              "L2,a,b,OS2,1500,\n",
                 "links.csv, line 2, connections: expected a whole number from 0 to 1000 (got '-1')",
                 id="connections"),
    pytest.param("links.csv", "link_id,end_a,end_b,fiber_type,length_m,components\n"
                              "L1,a,b,OM4,120,split-1x8;split-1x4\nL2,a,b,OS2,1500,\n",
                 "links.csv, line 2, components: expected ids from components in project.yaml: split-1x8 "
                 "(got 'split-1x4')", id="unknown component"),
    pytest.param("links.csv", "link_id,end_a,end_b,fiber_type,length_m,transceiver\nL1,a,b,OM4,120,lr\n"
                              "L2,a,b,OS2,1500,\n",
                 "links.csv, line 2, transceiver: expected an id from transceivers in project.yaml: sr "
                 "(got 'lr')", id="unknown transceiver"),
    pytest.param("results/day1.csv", RESULTS + "L9,1,850,ab,1.2,2030-01-15,\n",
                 "results/day1.csv, line 2, link_id: expected a link_id defined in links.csv (got 'L9')",
                 id="unknown link"),
    pytest.param("results/day1.csv", RESULTS + ",1,850,ab,1.2,2030-01-15,\n",
                 "results/day1.csv, line 2, link_id: expected a link_id from links.csv (the cell is empty)",
                 id="empty link_id"),
    pytest.param("results/day1.csv", RESULTS + "L1,3,850,ab,1.2,2030-01-15,\n",
                 "results/day1.csv, line 2, strand: expected a strand from 1 to 2 for link L1 (got '3')",
                 id="strand out of range"),
    pytest.param("results/day1.csv", RESULTS + "L1,1.5,850,ab,1.2,2030-01-15,\n",
                 "results/day1.csv, line 2, strand: expected a strand from 1 to 2 for link L1 (got '1.5')",
                 id="strand not whole"),
    pytest.param("results/day1.csv", RESULTS + "L2,1,850,ab,1.2,2030-01-15,\n",
                 "results/day1.csv, line 2, wavelength_nm: expected one of 1310, 1550 for OS2 (got '850')",
                 id="wavelength not in limit set"),
    pytest.param("results/day1.csv", RESULTS + "L1,1,,ab,1.2,2030-01-15,\n",
                 "results/day1.csv, line 2, wavelength_nm: expected one of 850, 1300 for OM4 "
                 "(the cell is empty)", id="wavelength empty"),
    pytest.param("results/day1.csv", RESULTS + "L1,1,850,xy,1.2,2030-01-15,\n",
                 "results/day1.csv, line 2, direction: expected one of ab, ba (got 'xy')", id="direction"),
    pytest.param("results/day1.csv", RESULTS + "L1,1,850,ab,abc,2030-01-15,\n",
                 "results/day1.csv, line 2, loss_db: expected a loss in dB, a number of at most 100 "
                 "(got 'abc')", id="loss not a number"),
    pytest.param("results/day1.csv", RESULTS + "L1,1,850,ab,101,2030-01-15,\n",
                 "results/day1.csv, line 2, loss_db: expected a loss in dB, a number of at most 100 "
                 "(got '101')", id="loss over 100 dB"),
    pytest.param("results/day1.csv", RESULTS + "L1,1,850,ab,nan,2030-01-15,\n",
                 "results/day1.csv, line 2, loss_db: expected a loss in dB, a number of at most 100 "
                 "(got 'nan')", id="loss not finite"),
    pytest.param("results/day1.csv", RESULTS + 'L1,1,850,ab,"1,2",2030-01-15,\n',
                 "results/day1.csv, line 2, loss_db: expected a loss in dB, a number of at most 100 "
                 "(write numbers with a decimal point, not a comma) (got '1,2')", id="loss decimal comma"),
    pytest.param("results/day1.csv", RESULTS + "L1,1,850,ab,,2030-01-15,\n",
                 "results/day1.csv, line 2, loss_db: expected a loss in dB, a number of at most 100 "
                 "(the cell is empty)", id="loss empty"),
    pytest.param("results/day1.csv", RESULTS + "L1,1,850,ab,1.2,15/01/2030,\n",
                 "results/day1.csv, line 2, tested_at: expected an ISO 8601 date or date-time between the "
                 "years 1900 and 2199, e.g. 2030-01-15 or 2030-01-15T14:05 (got '15/01/2030')",
                 id="date not ISO 8601"),
    pytest.param("results/day1.csv", RESULTS + "L1,1,850,ab,1.2,,\n",
                 "results/day1.csv, line 2, tested_at: expected an ISO 8601 date or date-time "
                 "(the cell is empty)", id="date empty"),
    pytest.param("results/day1.csv", RESULTS + "L1,1,850,ab,1.2,2030-01-15,SRC-1;OTDR-9\n",
                 "results/day1.csv, line 2, instrument: expected ids of instruments listed in project.yaml "
                 "(SRC-1, PM-1), separated by ';' (got 'OTDR-9')", id="unknown instrument"),
    pytest.param("results/day1.csv", "link_id,wavelength_nm,los_db,tested_at\nL1,850,1.2,2030-01-15\n",
                 "results/day1.csv, line 1, loss_db: expected a column named loss_db "
                 "(did you mean loss_db instead of 'los_db'?)", id="results misspelt column"),
    pytest.param("results/day1.csv", "link_id,wavelength_nm,loss_db,tested_at,length_ft\n"
                                     "L1,850,1.2,2030-01-15,0\n",
                 "results/day1.csv, line 2, length_ft: expected a measured length in ft, greater than 0 and "
                 "at most 200 km (got '0')", id="measured length"),
    pytest.param("results/day1.csv", "link_id,wavelength_nm,loss_db,tested_at,length_m,length_ft\n"
                                     "L1,850,1.2,2030-01-15,100,328\n",
                 "results/day1.csv, line 2, length_m/length_ft: expected a length in only one of these "
                 "columns (got '100 and 328')", id="two measured lengths"),
    pytest.param("results/day1.csv", b"link_id,wavelength_nm,loss_db,tested_at,note\n"
                                     b"L1,850,1.2,2030-01-15,ok\nL1,850,1.2,2030-01-15,caf\xe9\n",
                 "results/day1.csv, line 3: expected UTF-8 text (save the file as UTF-8) (got 'byte 0xE9')",
                 id="not UTF-8"),
    pytest.param("results/day1.csv", "\ufeff".encode("utf-16-le") + RESULTS.encode("utf-16-le"),
                 "results/day1.csv: expected UTF-8 text; this file is UTF-16 encoded (save it as UTF-8)",
                 id="UTF-16"),
    pytest.param("results/day1.csv", "", "results/day1.csv: expected a header row naming the columns "
                                         "(file is empty)", id="results empty file"),
]


@pytest.mark.parametrize(("path", "content", "message"), BAD_CSV)
def test_bad_csv_is_reported_precisely(make_project, path, content, message):
    assert problems_of(make_project({path: content})) == [message]


def test_trailing_empty_cells_are_harmless(make_project):
    project = load_project(make_project({"links.csv": LINKS + "L1,a,b,OM4,120,2,\nL2,a,b,OS2,1500,1,,\n"}))
    assert [(link.link_id, link.length_m, link.strands) for link in project.links] == [
        ("L1", 120.0, 2), ("L2", 1500.0, 1)]


def test_fiber_type_the_limit_set_does_not_cover(make_project):
    project_dir = make_project({"project.yaml": Y.replace("tia-568.3-d", "iso-11801-2002")})
    assert problems_of(project_dir) == [
        "links.csv, line 2, fiber_type: expected a fiber type that limit set iso-11801-2002 covers: "
        "OM1, OM2, OM3, OS1 (got 'OM4')",
        "links.csv, line 3, fiber_type: expected a fiber type that limit set iso-11801-2002 covers: "
        "OM1, OM2, OM3, OS1 (got 'OS2')",
    ]


def test_missing_files(make_project):
    assert problems_of(make_project({"project.yaml": None, "links.csv": None})) == [
        "project.yaml: expected a file project.yaml in the project folder (not found)",
        "links.csv: expected a file links.csv in the project folder (not found)",
    ]


def test_problems_from_a_project_limit_file_are_collected(make_project):
    project_dir = make_project({
        "project.yaml": Y.replace("limits: tia-568.3-d", "limits: my-limits.yaml"),
        "my-limits.yaml": "id: x\ntitle: t\nsource: s\nconnection_db: 0.75\nsplice_db: abc\n"
                          "attenuation_db_per_km: {OM4: {850: 3.0}}\n",
    })
    assert problems_of(project_dir) == [
        "my-limits.yaml, splice_db: expected a number of dB from 0 to 100 (got 'abc')"]


def test_project_limit_file_is_used(make_project):
    # Coefficients are test inputs, not a standard's values.
    project_dir = make_project({
        "project.yaml": Y.replace("limits: tia-568.3-d", "limits: limits/own.yaml"),
        "limits/own.yaml": "id: own\ntitle: t\nsource: s\nconnection_db: 0.5\nsplice_db: 0.1\n"
                           "attenuation_db_per_km: {OM4: {850: 2.0, 1300: 1.0}, OS2: {1310: 0.4, 1550: 0.3}}\n",
    })
    project = load_project(project_dir)
    assert (project.limits.id, project.limits.origin, project.testing.limits) == (
        "own", "limits/own.yaml", "limits/own.yaml")


def test_every_problem_is_collected_in_file_order(make_project):
    project_dir = make_project({
        "project.yaml": Y.replace("one-cord", "4-cord"),
        "links.csv": LINKS + "L1,a,b,OM9,120,2\nL2,a,b,OS2,1500,1\nL3,a,b,OM4,x,1\n",
        "results/a.csv": RESULTS + "L2,1,850,ab,1.2,2030-01-15,\n",
        "results/b.csv": RESULTS + "L9,1,850,ab,1.2,2030-01-15,\nL2,1,1310,up,x,2030-01-15,\n",
    })
    assert problems_of(project_dir) == [
        f"project.yaml, testing.reference_method: expected {METHODS} (got '4-cord')",
        "links.csv, line 2, fiber_type: expected one of OM1, OM2, OM3, OM4, OM5, OS1, OS1a, OS2 (got 'OM9')",
        "links.csv, line 4, length_m: expected a length in m, greater than 0 and at most 200 km (got 'x')",
        "results/a.csv, line 2, wavelength_nm: expected one of 1310, 1550 for OS2 (got '850')",
        "results/b.csv, line 2, link_id: expected a link_id defined in links.csv (got 'L9')",
        "results/b.csv, line 3, direction: expected one of ab, ba (got 'up')",
        "results/b.csv, line 3, loss_db: expected a loss in dB, a number of at most 100 (got 'x')",
    ]  # results/day1.csv names L1: defined in links.csv (on a bad row), so not reported again


def test_oversized_file_is_refused_before_reading(make_project):
    project_dir = make_project()
    with (project_dir / "results" / "huge.csv").open("wb") as handle:
        handle.truncate(300 * 2**20)  # sparse: takes no disk space, never read
    assert problems_of(project_dir) == [
        "results/huge.csv: expected a file of at most 256 MB; this file is 300 MB"]


def test_logo_checks(make_project):
    project_dir = make_project({
        "project.yaml": logo("assets/logo.gif"),
        "assets/logo.gif": "GIF89a",
    })
    assert problems_of(project_dir) == [
        "project.yaml, project.contractor.logo: expected an image file ending .svg, .png, .jpg or .jpeg "
        "(got 'assets/logo.gif')"]
    fake = make_project({"project.yaml": logo("assets/logo.png"), "assets/logo.png": "not a png"})
    assert problems_of(fake) == [
        "project.yaml, project.contractor.logo: expected a file whose content is a PNG image "
        "(got 'assets/logo.png')"]
    big = make_project({"project.yaml": logo("assets/big.svg"),
                        "assets/big.svg": "<svg>" + " " * (3 * 2**20) + "</svg>"})
    assert problems_of(big) == [
        "project.yaml, project.contractor.logo: expected an image of at most 2 MB; this one is 4 MB "
        "(got 'assets/big.svg')"]


def test_logo_symlink_leading_outside_is_refused(make_project, tmp_path):
    outside = tmp_path / "elsewhere.svg"
    outside.write_text("<svg/>", encoding="utf-8")
    project_dir = make_project({"project.yaml": logo("assets/logo.svg")})
    (project_dir / "assets").mkdir()
    os.symlink(outside, project_dir / "assets" / "logo.svg")
    assert problems_of(project_dir) == [
        "project.yaml, project.contractor.logo: expected a path to an image inside the project folder "
        "(symbolic links are followed) (got 'assets/logo.svg')"]


def test_minimal_project_loads_with_defaults(make_project):
    project = load_project(make_project())
    assert project.info.title == "Test backbone"
    assert project.info.contractor.name == "Test Cabling"
    testing = project.testing
    assert testing.limits == "tia-568.3-d" and project.limits.id == "tia-568.3-d"
    assert testing.reference_method is ReferenceMethod.ONE_CORD
    assert testing.directions is Directions.BOTH  # project format v1: default both
    assert testing.uncertainty_db == 0.0
    assert testing.units is LengthUnit.M
    assert testing.attenuators_db == DEFAULT_ATTENUATORS_DB
    assert project.report.paper is Paper.A4 and project.report.templates is None
    first, second = project.links
    assert (first.link_id, first.fiber_type, first.length_m, first.strands, first.plant, first.line) == (
        "L1", FiberType.OM4, 120.0, 2, Plant.INSIDE, 2)
    assert (second.connections, second.splices, second.components, second.transceiver) == (0, 0, (), None)
    source, meter = project.instruments
    # serial '00417' stays text as written; an unquoted 00417 would be a YAML 1.1 octal number
    assert (source.kind, source.serial, source.calibration_due) == (
        InstrumentKind.LIGHT_SOURCE, "00417", date(2030, 3, 1))
    assert meter.kind is InstrumentKind.POWER_METER
    assert project.components["split-1x8"].loss_db == 10.5
    assert project.transceivers["sr"].rx_min_average_dbm == -9.9
    assert project.result_files == ("results/day1.csv",)


def test_results_frame_has_the_model_columns_and_dtypes(make_project):
    results = load_project(make_project()).results
    assert tuple(results.columns) == RESULT_COLUMNS
    assert {name: str(results[name].dtype) for name in results.columns} == {
        "source_file": "str", "source_line": "int64", "link_id": "str", "strand": "int64",
        "wavelength_nm": "int64", "direction": "str", "loss_db": "float64",
        "tested_at": "datetime64[ns]", "tested_at_text": "str", "instrument": "object",
        "technician": "str", "measured_length_m": "float64", "note": "str", "source": "str",
    }
    row = results.iloc[0]
    assert (row.source_file, row.source_line, row.link_id, row.strand, row.wavelength_nm) == (
        "results/day1.csv", 2, "L1", 1, 850)
    assert (row.direction, row.loss_db, row.instrument, row.technician, row.note) == (
        "ab", 1.2, ("SRC-1", "PM-1"), "", "")
    assert row.tested_at == datetime(2030, 1, 15, 9, 0) and row.tested_at_text == "2030-01-15T09:00"
    assert math.isnan(row.measured_length_m)


def test_ft_lengths_convert_to_metres(make_project):
    project_dir = make_project({
        "project.yaml": in_testing("units: ft"),
        "links.csv": "link_id,end_a,end_b,fiber_type,length,strands\nL1,a,b,OM4,100,2\nL2,a,b,OS2,5000,1\n",
        "results/day1.csv": "link_id,wavelength_nm,loss_db,tested_at,length_ft,length_m\n"
                            "L1,850,1.2,2030-01-15,100,\nL2,1310,1.0,2030-01-15,,1524\n",
    })
    project = load_project(project_dir)
    # 1 ft = 0.3048 m: international foot, exact by definition (1959 international yard and pound
    # agreement), so 100 ft = 30.48 m and 5000 ft = 1524 m.
    assert project.links[0].length_m == pytest.approx(30.48, abs=1e-12)
    assert project.links[1].length_m == pytest.approx(1524.0, abs=1e-9)
    assert project.results["measured_length_m"].tolist() == pytest.approx([30.48, 1524.0])


def test_bom_crlf_blanks_case_insensitive_headers_and_unknown_columns(make_project):
    project_dir = make_project({
        "links.csv": "\ufeff Link_ID ,END_A,End_B , Fiber_Type,LENGTH_M,Strands,Colour\r\n"
                     "  L1 , Room 1 ,Room 2, om4 , 120 , 2 ,blue\r\n"
                     "L2,Room 1,Hut 3,os2,1500,1,\r\n\r\n",
        "results/day1.csv": "\ufeffLink_Id,Wavelength_NM,Loss_dB,Tested_At,Comment\r\n"
                            " L1 , 850 , 1.20 , 2030-01-15 ,anything\r\n",
    })
    project = load_project(project_dir)
    assert [(link.link_id, link.end_a, link.fiber_type) for link in project.links] == [
        ("L1", "Room 1", FiberType.OM4), ("L2", "Room 1", FiberType.OS2)]
    row = project.results.iloc[0]
    assert (row.link_id, row.wavelength_nm, row.loss_db, row.strand, row.direction) == ("L1", 850, 1.2, 1, "ab")
    assert row.tested_at == datetime(2030, 1, 15)


def test_results_header_only_gives_zero_results(make_project):
    project = load_project(make_project({"results/day1.csv": RESULTS}))
    assert len(project.results) == 0 and tuple(project.results.columns) == RESULT_COLUMNS
    assert str(project.results["tested_at"].dtype) == "datetime64[ns]"


def test_files_sorted_and_others_ignored(make_project):
    project_dir = make_project({
        "results/b.csv": RESULTS + "L2,1,1550,ba,0.9,2030-01-16,\n",
        "results/a.csv": RESULTS + "L1,2,1300,ab,0.8,2030-01-16,\n",
        "results/notes.txt": "not a results file",
        "results/.hidden.csv": "garbage",
        "report/results.csv": "garbage from an earlier build",
    })
    project = load_project(project_dir)
    assert project.result_files == ("results/a.csv", "results/b.csv", "results/day1.csv")
    assert project.results["source_file"].tolist() == [
        "results/a.csv", "results/b.csv", "results/day1.csv", "results/day1.csv"]


def test_timezone_aware_times_become_naive_utc(make_project):
    project_dir = make_project({"results/day1.csv": RESULTS + "L1,1,850,ab,-0.3,2030-01-15T10:00+02:00,\n"})
    row = load_project(project_dir).results.iloc[0]
    # ISO 8601 offset +02:00: 10:00 local is 08:00 UTC (Python datetime.astimezone)
    assert row.tested_at == datetime(2030, 1, 15, 8, 0)
    assert row.tested_at_text == "2030-01-15T10:00+02:00"
    assert row.loss_db == -0.3  # negative loss is not an input error: the engine flags it invalid


def test_wavelength_override_and_options(make_project):
    project_dir = make_project({"project.yaml": in_testing(
        "wavelengths: {singlemode: [1550]}\n  attenuators_db: [5, 10]\n  directions: one\n"
        "  uncertainty_db: 0.2") + "technicians: [A. Example, 42]\nreport: {paper: Letter, templates: tpl}\n",
        "tpl/.keep": ""})
    project = load_project(project_dir)
    assert project.testing.wavelengths_nm == {FiberCategory.MULTIMODE: (850, 1300),
                                              FiberCategory.SINGLEMODE: (1550,)}
    assert project.testing.attenuators_db == (5.0, 10.0)
    assert project.testing.directions is Directions.ONE and project.testing.uncertainty_db == 0.2
    assert project.technicians == ("A. Example", "42")
    assert project.report.paper is Paper.LETTER
    assert project.report.templates == (project_dir / "tpl").resolve()


def test_multi_line_cells_keep_physical_line_numbers(make_project):
    project_dir = make_project({"results/day1.csv": RESULTS.replace("instrument", "note") +
                                'L1,1,850,ab,1.2,2030-01-15,"first\nsecond"\nL9,1,850,ab,1.2,2030-01-15,\n'})
    assert problems_of(project_dir) == [
        "results/day1.csv, line 4, link_id: expected a link_id defined in links.csv (got 'L9')"]


def _tree_hash(root: Path) -> str:
    digest = hashlib.sha256()
    for path in sorted(root.rglob("*")):
        digest.update(path.relative_to(root).as_posix().encode())
        if path.is_file():
            digest.update(path.read_bytes())
            digest.update(str(path.stat().st_mtime_ns).encode())
    return digest.hexdigest()


def test_project_folder_is_not_modified(make_project):
    good = make_project()
    before = _tree_hash(good)
    load_project(good)
    assert _tree_hash(good) == before
    bad = make_project({"links.csv": LINKS + "L1,a,b,OM9,1,1\n"})
    before = _tree_hash(bad)
    problems_of(bad)
    assert _tree_hash(bad) == before


def test_folder_that_does_not_exist(tmp_path):
    missing = tmp_path / "nope"
    assert problems_of(missing) == [f"{missing.as_posix()}: expected an existing project folder"]


def test_results_loss_values_are_exact_floats(make_project):
    project_dir = make_project({"results/day2.csv": RESULTS + "L1,2,1300,BA,0.35,2030-01-15,PM-1\n"})
    results = load_project(project_dir).results
    assert results["loss_db"].to_numpy().tolist() == [1.2, 1.05, 0.35]
    assert results["direction"].tolist() == ["ab", "ab", "ba"]
    assert results["strand"].to_numpy().dtype == np.int64


def test_files_read_lists_every_project_file_the_inputs_stage_opened():
    from reportgen.inputs.project import load_project as load
    project = load(Path(__file__).resolve().parent.parent / "demo_project")
    traces = tuple(f"otdr/{link}-s1-{wl}-{d}.sor" for link in ("CB-01", "CB-03", "CB-07")
                   for wl in (1310, 1550) for d in ("ab", "ba"))
    assert project.files_read == (
        "assets/logo.svg", "exports/retests-2026-04-16.csv", "inspections/end-faces.csv",
        "inspections/images/a-bb-03-s1-b-day1.png", "inspections/images/a-bb-03-s1-b-day2.png",
        "inspections/images/cb-01-s1-a.png", "inspections/images/cb-01-s1-b.png",
        "links.csv", *traces, "profiles/handheld-meter.yaml", "project.yaml",
        "references/references.csv", "results/day1-building-a.csv",
        "results/day2-campus.csv", "results/day3-pon-1490.csv")


def test_a_limit_file_name_too_long_for_the_file_system_is_a_clear_problem(make_project):
    # found by tests/test_fuzz.py: a 400-character name made stat() raise "File name too long"
    yaml = ("project:\n  title: T\n  contractor: {name: C}\n"
            f"testing:\n  limits: {'9' * 400}\n  reference_method: one-cord\n")
    with pytest.raises(InputError) as caught:
        load_project(make_project({"project.yaml": yaml}))
    assert ("project.yaml", "testing.limits") in [(p.file, p.field) for p in caught.value.problems]
