"""Campaign comparison (reportgen.archive.compare and `reportgen compare`).

Expected changes are hand arithmetic on the losses typed here or read from the named lines
of the demo's results files (worked by hand, written beside each value).
"""
from __future__ import annotations

import csv
import json
import math
from pathlib import Path

import pytest

from reportgen import cli
from reportgen.archive.compare import DEFAULT_THRESHOLD_DB, compare_link
from tests.builders import write_build_output

REPO = Path(__file__).resolve().parent.parent
K1, K2 = (1, 850, "ab"), (1, 1300, "ab")


def test_worked_example_one_result_degraded():
    # before 1.00 / 0.80 dB, after 1.70 / 0.75 dB (invented): changes +0.70 and -0.05 dB
    # (hand arithmetic); +0.70 > 0.6 threshold, so degraded; the worst change is +0.70.
    change = compare_link("L1", {K1: 1.00, K2: 0.80}, {K1: 1.70, K2: 0.75}, "pass", "pass", 0.6)
    assert change.status == "changed"
    assert change.degraded is True
    assert change.worst_change_db == 0.70
    by_key = {(r.strand, r.wavelength_nm, r.direction): r for r in change.results}
    assert (by_key[K1].change_db, by_key[K1].degraded) == (0.70, True)
    assert (by_key[K2].change_db, by_key[K2].degraded) == (-0.05, False)


@pytest.mark.parametrize("after, degraded", [(1.60, False), (1.61, True)],
                         ids=["+0.60 at the threshold: not degraded", "+0.61: degraded"])
def test_threshold_is_exceeded_only_above_it(after, degraded):
    # 1.60 - 1.00 = 0.60 and 1.61 - 1.00 = 0.61 (hand arithmetic); the rule is "more than".
    change = compare_link("L1", {K1: 1.00}, {K1: after}, "pass", "pass", 0.6)
    assert change.degraded is degraded
    assert change.status == ("changed" if degraded else "same")


def test_added_removed_and_verdict_change():
    assert compare_link("L1", None, {K1: 1.0}, None, "pass", 0.6).status == "added"
    assert compare_link("L1", {K1: 1.0}, None, "pass", None, 0.6).status == "removed"
    # same loss (change 0.00) but the verdict changed (a new limit set, say): changed
    changed = compare_link("L1", {K1: 1.0}, {K1: 1.0}, "pass", "fail", 0.6)
    assert (changed.status, changed.degraded, changed.worst_change_db) == ("changed", False, 0.0)
    # a result measured only once: changed, with no change figure for it
    partial = compare_link("L1", {K1: 1.0}, {K1: 1.0, K2: 0.9}, "pass", "pass", 0.6)
    assert partial.status == "changed"
    assert [r.change_db for r in partial.results] == [0.0, None]


def test_default_threshold_follows_its_stated_basis():
    # Basis (common practice): each test uncertain by ±0.2 dB; the difference of two
    # independent tests by √2 × 0.2 dB; twice that, rounded to 0.1 dB.
    assert DEFAULT_THRESHOLD_DB == round(2 * math.sqrt(2) * 0.2, 1) == 0.6


def test_demo_compare_writes_the_binding_shape(tmp_path, capsys):
    out = tmp_path / "cmp"
    out.mkdir()
    (out / "summary.json").write_text("{}", encoding="utf-8")  # someone else's file stays
    (out / "compare.pdf").write_text("stale", encoding="utf-8")  # an earlier run's PDF goes
    status = cli.main(["compare", str(REPO / "demo_project"), str(REPO / "demo_project_retest"),
                       "-o", str(out), "--no-pdf"])
    assert status == 0, capsys.readouterr().err
    assert sorted(p.name for p in out.iterdir()) == ["compare.csv", "compare.html",
                                                     "compare.json", "summary.json"]
    document = json.loads((out / "compare.json").read_text(encoding="utf-8"))
    assert document["format"] == 1
    links = {entry["link_id"]: entry for entry in document["links"]}
    for entry in document["links"]:
        assert set(entry) == {"link_id", "status", "verdict_before", "verdict_after",
                              "worst_change_db", "degraded", "results"}
    # A-BB-02 strand 3, 850 nm: ab 1.02 -> 1.78 dB (demo_project/results/day1-building-a.csv
    # line 26, demo_project_retest/results/2031-05-20.csv line 26): +0.76 dB, the largest.
    assert links["A-BB-02"]["worst_change_db"] == 0.76
    assert (links["A-BB-02"]["status"], links["A-BB-02"]["degraded"]) == ("changed", True)
    # A-BB-07 failed at handover (demo README: one failing link) and was re-terminated:
    # strand 2, 850 nm ab 2.46 -> 1.10 dB (line 94 / line 38): -1.36 dB.
    bb07 = {(r["strand"], r["wavelength_nm"], r["direction"]): r
            for r in links["A-BB-07"]["results"]}
    assert bb07[(2, 850, "ab")]["change_db"] == -1.36
    assert (links["A-BB-07"]["verdict_before"], links["A-BB-07"]["verdict_after"]) == \
        ("fail", "pass")
    assert links["A-BB-12"]["status"] == "added"  # only in the re-test's links.csv
    assert links["CB-01"]["status"] == "removed"  # not re-tested
    with (out / "compare.csv").open(encoding="utf-8", newline="") as handle:
        rows = list(csv.DictReader(handle))
    row = next(r for r in rows if r["link_id"] == "A-BB-02" and r["strand"] == "3"
               and r["wavelength_nm"] == "850" and r["direction"] == "ab")
    assert (row["loss_before_db"], row["loss_after_db"], row["change_db"]) == \
        ("1.02", "1.78", "0.76")
    html = (out / "compare.html").read_text(encoding="utf-8")
    assert "A-BB-02" in html and "Never look into a fiber end" in html


def test_build_folders_and_hostile_ids_compare_as_text(tmp_path, capsys):
    hostile = "L'1\"; DROP TABLE links;--<b>"
    rows = [(1, 850, "ab", 1.00, "2026-01-05T10:00", "pass")]
    before = write_build_output(tmp_path / "a", [(hostile, "pass", "OM4", [], rows)])
    after = write_build_output(tmp_path / "b", [(hostile, "pass", "OM4", [],
                                                 [(1, 850, "ab", 1.05, "2031-01-05T10:00",
                                                   "pass")])])
    assert cli.main(["compare", str(before), str(after), "-o", str(tmp_path / "o"),
                     "--no-pdf"]) == 0
    document = json.loads((tmp_path / "o" / "compare.json").read_text(encoding="utf-8"))
    assert document["links"][0]["link_id"] == hostile
    assert document["links"][0]["worst_change_db"] == 0.05  # 1.05 - 1.00, hand arithmetic
    html = (tmp_path / "o" / "compare.html").read_text(encoding="utf-8")
    assert "<b>" not in html and "&lt;b&gt;" in html


def test_missing_folder_is_one_clear_error_and_nothing_written(tmp_path, capsys):
    out = tmp_path / "out"
    status = cli.main(["compare", str(tmp_path / "nope"), str(REPO / "demo_project"),
                       "-o", str(out), "--no-pdf"])
    err = capsys.readouterr().err
    assert status == 2
    assert "nope" in err and "expected a build output folder" in err
    assert not out.exists()


def test_damaged_results_csv_names_file_line_and_field(tmp_path, capsys):
    folder = write_build_output(tmp_path / "a", [("L1", "pass", "OM4", [],
                                                  [(1, 850, "ab", 1.0, "2026-01-05T10:00",
                                                    "pass")])])
    text = (folder / "results.csv").read_text(encoding="utf-8").replace(",1.00,", ",1.0x,")
    (folder / "results.csv").write_text(text, encoding="utf-8")
    assert cli.main(["compare", str(folder), str(folder), "-o", str(tmp_path / "o"),
                     "--no-pdf"]) == 2
    err = capsys.readouterr().err
    assert "results.csv, line 2, loss_db: expected a number (got '1.0x')" in err
    assert not (tmp_path / "o").exists()


@pytest.mark.slow
def test_compare_pdf_is_written_and_reads_as_the_html(tmp_path, capsys):
    from pypdf import PdfReader

    out = tmp_path / "cmp"
    status = cli.main(["compare", str(REPO / "demo_project"), str(REPO / "demo_project_retest"),
                       "-o", str(out)])
    assert status == 0, capsys.readouterr().err
    text = " ".join(page.extract_text() for page in PdfReader(out / "compare.pdf").pages)
    # A-BB-02 strand 3, 850 nm ab: 1.02 -> 1.78 dB, +0.76 (see the test above)
    assert "A-BB-02" in text and "+0.76" in text and "Never look into a fiber end" in text
