"""The view model takes what the inputs stage read and reads no file itself; flags and
instrument ids travel as tuples from the results reader to the page."""
from __future__ import annotations

import base64
from datetime import datetime

from tests.conftest import MINIMAL_PROJECT
from reportgen.engine.judge import judge_project
from reportgen.inputs.project import load_project
from reportgen.report.viewmodel import build_view

NOW = datetime(2030, 2, 1, 12, 0)
# The smallest SVG document (W3C SVG 1.1, §5.1: an <svg> root in the SVG namespace).
SVG = b'<svg xmlns="http://www.w3.org/2000/svg" width="10" height="10"/>'


def test_logo_is_read_by_the_inputs_stage_and_the_view_reads_no_file(make_project):
    yaml_text = MINIMAL_PROJECT["project.yaml"].replace(
        "{name: Test Cabling}", "{name: Test Cabling, logo: assets/logo.svg}")
    root = make_project({"project.yaml": yaml_text, "assets/logo.svg": SVG})
    project = load_project(root)
    logo = project.info.contractor.logo
    assert (logo.mime, logo.data, logo.path.name) == ("image/svg+xml", SVG, "logo.svg")
    (root / "assets" / "logo.svg").unlink()  # gone before the report is made: not read again
    view = build_view(project, judge_project(project), now=NOW, version="9.9-test")
    prefix = "data:image/svg+xml;base64,"
    assert view.logo_uri.startswith(prefix)
    assert base64.b64decode(view.logo_uri[len(prefix):]) == SVG


def test_instrument_ids_and_flags_reach_the_view_as_tuples(make_project):
    root = make_project({"results/day1.csv": (
        "link_id,strand,wavelength_nm,direction,loss_db,tested_at,instrument\n"
        "L1,1,850,ab,1.20,2030-01-15T09:00, SRC-1 ; PM-1 \n"
        "L1,1,850,ab,1.10,2030-01-16T09:00,PM-1\n")})
    project = load_project(root)
    assert list(project.results["instrument"]) == [("SRC-1", "PM-1"), ("PM-1",)]
    view = build_view(project, judge_project(project), now=NOW, version="9.9-test")
    sheet = view.links[0]
    assert [r.instruments for r in sheet.results] == [("PM-1",)]
    assert [r.instruments for r in sheet.set_aside] == [("SRC-1", "PM-1")]
    # the later row of the same link, strand, wavelength and direction is a retest
    # (docs/project-format.md §6.7); the earlier one is superseded and has no flag
    assert [r.flags for r in sheet.results] == [("retest",)]
    assert [r.flags for r in sheet.set_aside] == [()]
    uses = {i.id: i.results for i in view.instruments}
    assert uses == {"SRC-1": 1, "PM-1": 2}
