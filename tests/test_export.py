"""results.csv and summary.json as the contract defines them; atomic writes."""
from __future__ import annotations

import csv
import io
import json
import os

from reportgen.export import atomic, results_csv, summary
from reportgen.engine.judge import judge_project
from tests.builders import make_link, make_project


def _judged():
    rows = [
        dict(wavelength_nm=850, direction="ab", loss_db=1.0, note="=HYPERLINK(\"x\")"),
        dict(wavelength_nm=850, direction="ba", loss_db=2.4, tested_at="2030-01-15"),
        dict(wavelength_nm=850, direction="ba", loss_db=1.1, tested_at="2030-01-16",
             technician="@someone"),
        dict(wavelength_nm=1300, direction="ab", loss_db=-0.5),
    ]
    project = make_project([make_link(link_id="-L1")], [dict(r, link_id="-L1") for r in rows])
    return project, judge_project(project)


def test_results_csv_has_contract_columns_and_every_row():
    _, judgement = _judged()
    rows = list(csv.DictReader(io.StringIO(results_csv.results_csv_bytes(judgement.results).decode())))
    assert len(rows) == 4  # superseded and invalid rows included
    for column in ("link_id", "strand", "wavelength_nm", "direction", "loss_db", "tested_at",
                   "limit_db", "margin_db", "verdict", "flags"):
        assert column in rows[0]
    assert [r["verdict"] for r in rows] == ["pass", "superseded", "pass", "invalid"]
    # hand-worked: 500 m OM4 at 850 nm, test set α = 2.0, a_conn = 0.5, one-cord: 2.0 dB
    # dB values as the report prints them: exactly two decimals
    assert (rows[0]["loss_db"], rows[0]["limit_db"], rows[0]["margin_db"]) == ("1.00", "2.00", "1.00")
    assert rows[3]["margin_db"] == ""  # an invalid result has no margin


def test_results_csv_joins_flags_and_instruments_in_the_cell():
    rows = [dict(wavelength_nm=850, direction="ab", loss_db=1.0, instrument=["SRC-1", "PM-1"]),
            dict(wavelength_nm=850, direction="ab", loss_db=1.25, tested_at="2030-01-16")]
    judgement = judge_project(make_project([make_link()], rows))
    written = list(csv.DictReader(io.StringIO(
        results_csv.results_csv_bytes(judgement.results).decode())))
    assert [(r["instrument"], r["flags"]) for r in written] == [("SRC-1;PM-1", ""), ("", "retest")]
    assert written[1]["margin_db"] == "0.75"  # hand-worked: 2.00 − 1.25


def test_results_csv_rounds_lengths_to_centimetres():
    # 100 ft = 30.48 m exactly (international foot, 0.3048 m; 1959 agreement)
    rows = [dict(wavelength_nm=850, direction="ab", loss_db=1.0, measured_length_m=100 * 0.3048),
            dict(wavelength_nm=850, direction="ba", loss_db=1.0, measured_length_m=12.3456)]
    judgement = judge_project(make_project([make_link()], rows))
    written = list(csv.DictReader(io.StringIO(
        results_csv.results_csv_bytes(judgement.results).decode())))
    assert [r["measured_length_m"] for r in written] == ["30.48", "12.35"]


def test_results_csv_neutralises_formula_text_but_keeps_numbers():
    _, judgement = _judged()
    rows = list(csv.DictReader(io.StringIO(results_csv.results_csv_bytes(judgement.results).decode())))
    assert rows[0]["note"].startswith("'=")
    assert rows[0]["link_id"] == "'-L1"
    assert rows[2]["technician"] == "'@someone"
    assert rows[3]["loss_db"] == "-0.50"  # numbers get no apostrophe


def test_summary_shape_follows_the_contract():
    project, judgement = _judged()
    document = json.loads(summary.json_bytes(summary.summary_dict(project, judgement)))
    assert document["format"] == 1
    assert document["totals"] == {"links": 1, "pass": 0, "fail": 0, "incomplete": 1}
    link = document["links"][0]
    assert set(link) >= {"link_id", "verdict", "worst_margin_db", "missing"}
    assert link["verdict"] == "incomplete"
    assert link["missing"] == [
        {"strand": 1, "wavelength_nm": 1300, "direction": "ab", "reason": "invalid"},
        {"strand": 1, "wavelength_nm": 1300, "direction": "ba", "reason": "not-tested"},
    ]


def test_write_outputs_replaces_and_removes_stale_and_partial_files(tmp_path):
    out = tmp_path / "out"
    atomic.write_outputs(out, {"results.csv": b"old", "report.pdf": b"old pdf"})
    (out / f"{atomic.TEMP_PREFIX}report.pdf.abc").write_bytes(b"half")  # an interrupted build
    (out / "keep-me.txt").write_text("not ours")
    atomic.write_outputs(out, {"results.csv": b"new", "summary.json": b"{}"})
    assert sorted(os.listdir(out)) == ["keep-me.txt", "results.csv", "summary.json"]
    assert (out / "results.csv").read_bytes() == b"new"
