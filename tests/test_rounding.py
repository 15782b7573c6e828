"""One rounding rule: every dB number report.html prints equals its counterpart in
results.csv (as text) and summary.json (as the same number), for the demo project.

This is a consistency check between two outputs of one build (issue: "a test proves every
number printed in the report equals its counterpart in results.csv/summary.json as
text"); the rule itself (two decimals, correct rounding) is checked against Python's
decimal module in test_units.py.
"""
from __future__ import annotations

import csv
import io
import json
import re
from collections import Counter
from datetime import datetime, timezone
from decimal import Decimal
from html.parser import HTMLParser
from pathlib import Path

import pytest

from reportgen import pipeline
from reportgen.export.results_csv import results_csv_bytes
from reportgen.export.summary import json_bytes
from reportgen.report.render import build_report
from reportgen.report.link_views import link_anchors

DEMO = Path(__file__).resolve().parent.parent / "demo_project"
NOW = datetime(2030, 2, 1, 12, 0, tzinfo=timezone.utc)
DASH = "\u2014"  # printed where there is no value (messages.TEXT["no_margin"])
TWO_DECIMALS = re.compile(r"-?\d+\.\d\d")


class _Tables(HTMLParser):
    """Rows (cell texts) of the tables of report.html, by link sheet and table class."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.sheet: str | None = None  # anchor of the link sheet being read
        self.tables: list[tuple[str | None, str]] = []  # (sheet, class) of open tables
        self.rows: dict[tuple[str | None, str], list[list[str]]] = {}
        self.cell: list[str] | None = None
        self.row: list[str] | None = None
        self.worst: dict[str, str] = {}  # sheet anchor -> text of its worst-margin line
        self.in_worst: str | None = None
        self.depth = 0  # open <section> elements inside the current sheet

    def handle_starttag(self, tag, attrs):
        attributes = dict(attrs)
        classes = (attributes.get("class") or "").split()
        if tag == "section":
            if "sheet" in classes:
                self.sheet, self.depth = attributes["id"], 0
            elif self.sheet is not None:
                self.depth += 1
        elif tag == "table":
            self.tables.append((self.sheet, " ".join(c for c in classes if c != "grid")))
        elif tag == "tr" and self.tables:
            self.row = []
        elif tag == "td" and self.row is not None:
            self.cell = []
        elif tag == "div" and "sheet-worst" in classes:
            self.in_worst = self.sheet
            self.worst[self.sheet] = ""
        elif tag == "br" and self.cell is not None:
            self.cell.append(" ")

    def handle_endtag(self, tag):
        if tag == "section" and self.sheet is not None:
            if self.depth == 0:
                self.sheet = None
            else:
                self.depth -= 1
        elif tag == "table" and self.tables:
            self.tables.pop()
        elif tag == "td" and self.cell is not None and self.row is not None:
            self.row.append(" ".join("".join(self.cell).split()))
            self.cell = None
        elif tag == "tr" and self.row is not None:
            if self.row:
                self.rows.setdefault(self.tables[-1], []).append(self.row)
            self.row = None
        elif tag == "div" and self.in_worst is not None:
            self.in_worst = None

    def handle_data(self, data):
        if self.cell is not None:
            self.cell.append(data)
        if self.in_worst is not None:
            self.worst[self.in_worst] += data


@pytest.fixture(scope="module")
def demo():
    """report.html, results.csv rows and summary.json of the demo, made as ``build`` makes them."""
    project = pipeline.validate_only(DEMO)
    outcome = pipeline.compute(project)
    document = build_report(project, outcome.judgement, now=NOW, version="9.9-test",
                            applications=outcome.applications)
    tables = _Tables()
    tables.feed(document.html)
    rows = list(csv.DictReader(io.StringIO(results_csv_bytes(outcome.judgement.results).decode())))
    summary = json.loads(json_bytes(pipeline.summary_document(outcome, NOW, "9.9-test")))
    anchors = link_anchors(link.link_id for link in project.links)
    return tables, rows, summary, anchors


def _same_number(printed: str, written: float | None) -> bool:
    """A number printed with two decimals equals a summary.json number (None: a dash)."""
    if written is None:
        return printed == DASH
    return TWO_DECIMALS.fullmatch(printed) is not None and Decimal(printed) == Decimal(repr(written))


def test_every_result_row_prints_the_dB_texts_of_results_csv(demo):
    tables, rows, _, anchors = demo
    assert len(tables.worst) == len(anchors) == 30  # every link sheet was read (demo: 30 links)
    for link_id, anchor in anchors.items():
        mine = [r for r in rows if r["link_id"] == link_id]
        # a result without a cabling limit (not-judged) prints a dash for limit and margin
        judged = Counter((r["strand"], r["wavelength_nm"], r["loss_db"], r["limit_db"] or "\u2014",
                          r["margin_db"] or "\u2014") for r in mine
                         if r["verdict"] in ("pass", "fail", "not-judged"))
        printed = Counter((c[0], c[1], c[3], c[4], c[5])
                          for c in tables.rows.get((anchor, "results"), []))
        assert printed == judged, link_id
        set_aside = Counter((r["strand"], r["wavelength_nm"], r["loss_db"])
                            for r in mine if r["verdict"] in ("invalid", "superseded"))
        printed_aside = Counter((c[0], c[1], c[3]) for c in tables.rows.get((anchor, "set-aside"), []))
        assert printed_aside == set_aside, link_id
    # every dB cell of results.csv has exactly two decimals (or is empty: no margin)
    for row in rows:
        for column in ("loss_db", "limit_db", "margin_db"):
            assert TWO_DECIMALS.fullmatch(row[column]) or (
                row[column] == "" and (column == "margin_db" or row["verdict"] == "not-judged"))


def test_worst_margin_per_link_is_the_summary_number(demo):
    tables, _, summary, anchors = demo
    register = {row[0]: row[5] for row in tables.rows[(None, "register-table")]}
    for link in summary["links"]:
        worst = link["worst_margin_db"]
        assert _same_number(register[link["link_id"]], worst), link["link_id"]
        sheet_text = tables.worst[anchors[link["link_id"]]].split()
        assert _same_number(sheet_text[-2], worst), link["link_id"]  # "... 0.59 dB"


def test_application_losses_and_power_are_the_summary_numbers(demo):
    tables, _, summary, anchors = demo
    power_list = {row[0]: row for row in tables.rows.get((None, "power-list"), [])}
    checked = 0
    for link in summary["links"]:
        printed = tables.rows.get((anchors[link["link_id"]], "apps"), [])
        assert [row[0] for row in printed] == [a["id"] for a in link["applications"]]
        for row, written in zip(printed, link["applications"]):
            assert _same_number(row[3].split()[-1], written["max_loss_db"])  # "min to max" or max
            assert _same_number(row[4].split()[0], written["worst_loss_db"])
            checked += 1
        power = link["power"]
        if power is not None:
            row = power_list[link["link_id"]]
            low, high = row[3].split(" to ")
            assert _same_number(low, power["rx_min_dbm"]) and _same_number(high, power["rx_max_dbm"])
            assert _same_number(row[4], power["low_margin_db"])
            assert _same_number(row[5], power["high_margin_db"])
            assert _same_number(row[6], power["attenuator_db"])
            checked += 1
    assert checked > 30  # the demo lists applications and transceivers on most links
