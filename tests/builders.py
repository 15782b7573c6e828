"""Helpers shared by the tests: in-memory model objects for engine tests, a large project
folder on disk, and checkers of what the tests read back (folder digests, HTML tag balance,
page numbers printed in a PDF). Test modules import helpers from here (or fixtures from
conftest.py), never from one another or from benchmarks/."""
from __future__ import annotations

import dataclasses
import hashlib
import os
import re
import xml.etree.ElementTree as ET
from datetime import datetime
from html.parser import HTMLParser
from pathlib import Path
from typing import TYPE_CHECKING

import pandas as pd
import pypdf

from reportgen.inputs.apptable import load_applications
from reportgen.model import (
    RESULT_COLUMNS,
    AuditSettings,
    Inspection,
    InspectionResult,
    LinkEnd,
    Reference,
    Contractor,
    Directions,
    FiberType,
    LimitSet,
    Link,
    Plant,
    Project,
    ProjectInfo,
    ReferenceMethod,
    Testing,
)

if TYPE_CHECKING:
    from reportgen.pdf.weasy import RenderedPart

# Coefficients for arithmetic tests: test inputs, NOT a standard's values.
TEST_LIMITS = LimitSet(
    id="test-set",
    title="Round numbers for hand-worked tests",
    source="test input",
    connection_db=0.5,
    splice_db=0.1,
    attenuation_db_per_km={
        FiberType.OM4: {850: 2.0, 1300: 1.0},
        FiberType.OS2: {1310: 0.4, 1550: 0.3},
    },
    attenuation_db_per_km_outside={FiberType.OS2: {1310: 0.2, 1550: 0.1}},
)


def make_link(link_id: str = "L1", **fields) -> Link:
    defaults = dict(end_a="A", end_b="B", fiber_type=FiberType.OM4, length_m=500.0)
    defaults.update(fields)
    return Link(link_id=link_id, **defaults)


def make_results(rows: list[dict]) -> pd.DataFrame:
    """Result rows with defaults: strand 1, direction ab, file r.csv, line = index + 2."""
    full = []
    for index, row in enumerate(rows):
        tested = row.get("tested_at", "2030-01-15")
        full.append({
            "source_file": row.get("source_file", "results/r.csv"),
            "source_line": row.get("source_line", index + 2),
            "link_id": row.get("link_id", "L1"),
            "strand": row.get("strand", 1),
            "wavelength_nm": row["wavelength_nm"],
            "direction": row.get("direction", "ab"),
            "loss_db": float(row["loss_db"]),
            "tested_at": pd.Timestamp(tested),
            "tested_at_text": tested,
            "instrument": tuple(row.get("instrument", ())),  # instrument ids
            "technician": row.get("technician", ""),
            "measured_length_m": row.get("measured_length_m", float("nan")),
            "note": row.get("note", ""),
            "source": row.get("source", f"{row.get('source_file', 'results/r.csv')}:"
                                        f"{row.get('source_line', index + 2)}"),
        })
    frame = pd.DataFrame(full, columns=list(RESULT_COLUMNS))
    return frame.astype({"strand": "int64", "wavelength_nm": "int64", "loss_db": "float64",
                         "source_line": "int64", "measured_length_m": "float64",
                         "tested_at": "datetime64[ns]"})


def make_project(links, results, *, limits=TEST_LIMITS, method=ReferenceMethod.ONE_CORD,
                 directions=Directions.BOTH, uncertainty_db=0.0, components=None,
                 instruments=(), wavelengths=None, transceivers=None, audit=None,
                 required_method=None, period=(None, None), work_started=None,
                 references=None, inspections=None) -> Project:
    """An in-memory project; ``audit`` (a dict) sets thresholds of testing.audit, ``references``
    and ``inspections`` (lists of dicts, see make_reference/make_inspection) the records."""
    testing_fields = dict(limits=limits.id, reference_method=method, directions=directions,
                          uncertainty_db=uncertainty_db, required_reference_method=required_method,
                          period_start=period[0], period_end=period[1],
                          audit=dataclasses.replace(AuditSettings(), **(audit or {})))
    if wavelengths is not None:
        testing_fields["wavelengths_nm"] = wavelengths
    return Project(
        references=None if references is None else tuple(make_reference(**r) for r in references),
        inspections=None if inspections is None else tuple(make_inspection(**i) for i in inspections),
        root=Path("."),
        info=ProjectInfo(title="T", contractor=Contractor(name="C"), work_started=work_started),
        testing=Testing(**testing_fields),
        links=tuple(links),
        results=make_results(results),
        limits=limits,
        components=components or {},
        transceivers=transceivers or {},
        instruments=tuple(instruments),
        applications=load_applications(),
    )



def make_reference(instrument="PM-1", wavelength_nm=850, set_at="2030-01-15T08:00",
                   method=ReferenceMethod.ONE_CORD, cords=("TC-1",), cord_check_db=0.05,
                   reference_dbm=-20.0, line=2) -> Reference:
    return Reference(instrument=instrument, wavelength_nm=wavelength_nm,
                     reference_dbm=reference_dbm, set_at=datetime.fromisoformat(set_at),
                     cords=tuple(cords), method=method, cord_check_db=cord_check_db,
                     source_file="references/r.csv", source_line=line)


def make_inspection(link_id="L1", strand=1, end="a", result="pass",
                    inspected_at="2030-01-15T07:00", line=2) -> Inspection:
    return Inspection(link_id=link_id, strand=strand, end=LinkEnd(end),
                      result=InspectionResult(result),
                      inspected_at=datetime.fromisoformat(inspected_at), criteria=None,
                      technician=None, image=None, source_file="inspections/i.csv",
                      source_line=line)


def write_large_project(root: Path, links: int) -> Path:
    """A valid project folder of ``links`` OM4 links with every required result passing:
    2 strands x 850/1300 nm x both directions = 8 results per link (12,500 links = 100,000
    results), split over two results files. Invented data, for size tests only."""
    root.mkdir(parents=True)
    (root / "project.yaml").write_text(
        "project:\n  title: Large test project\n  contractor: {name: Test Cabling}\n"
        "testing:\n  limits: tia-568.3-d\n  reference_method: one-cord\n  directions: both\n"
        "instruments:\n  - {id: SRC-1, kind: light-source}\n", encoding="utf-8")
    ids = [f"L{index:05d}" for index in range(1, links + 1)]
    (root / "links.csv").write_text(
        "link_id,end_a,end_b,fiber_type,length_m,strands\n"
        + "".join(f"{link_id},Room 1,Room 2,OM4,100,2\n" for link_id in ids), encoding="utf-8")
    (root / "results").mkdir()
    header = "link_id,strand,wavelength_nm,direction,loss_db,tested_at,instrument\n"
    for day, half in enumerate((ids[: links // 2], ids[links // 2:]), start=1):
        rows = [f"{link_id},{strand},{wavelength},{direction},1.00,2030-01-1{day}T09:00,SRC-1\n"
                for link_id in half for strand in (1, 2) for wavelength in (850, 1300)
                for direction in ("ab", "ba")]
        (root / "results" / f"day{day}.csv").write_text(header + "".join(rows), encoding="utf-8")
    return root


def tree_digest(root: Path) -> str:
    """Names, kinds, contents and modification times of everything under ``root``."""
    digest = hashlib.sha256()
    for path in sorted(root.rglob("*")):
        digest.update(path.relative_to(root).as_posix().encode() + b"\0")
        if path.is_symlink():
            digest.update(b"link:" + os.readlink(path).encode())
        elif path.is_file():
            digest.update(path.read_bytes())
            digest.update(str(path.stat().st_mtime_ns).encode())
    return digest.hexdigest()


VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source",
        "track", "wbr"}


class _TagBalance(HTMLParser):
    """Fails on a closing tag that does not match the open one (SVG self-closing allowed)."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.ids: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.ids += [value for name, value in attrs if name == "id"]
        if tag not in VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        self.ids += [value for name, value in attrs if name == "id"]

    def handle_endtag(self, tag):
        assert self.stack and self.stack[-1] == tag, f"</{tag}> closes <{self.stack[-1:]}>"
        self.stack.pop()


def well_formed(html: str) -> list[str]:
    """Parse; check tag balance; every inline SVG parses as XML. Returns the element ids."""
    parser = _TagBalance()
    parser.feed(html)
    parser.close()
    assert parser.stack == []
    for svg in re.findall(r"<svg\b.*?</svg>", html, flags=re.S):
        ET.fromstring(svg)
    return parser.ids


def printed_page_refs(reader: pypdf.PdfReader, page_index: int) -> list[tuple[str, int]]:
    """(number printed inside a link's rectangle, 1-based page the link leads to) per link.

    Text positions come from pypdf's content-stream visitor; a number counts as inside
    a link when its start point lies in the link rectangle (1 pt of slack).
    """
    runs: list[tuple[str, float, float]] = []

    def visit(text, cm, tm, font, size):
        if text.strip():
            x = tm[4] * cm[0] + tm[5] * cm[2] + cm[4]
            y = tm[4] * cm[1] + tm[5] * cm[3] + cm[5]
            runs.append((text.strip(), x, y))

    page = reader.pages[page_index]
    page.extract_text(visitor_text=visit)
    found = []
    for annotation in page.get("/Annots", []):
        annotation = annotation.get_object()
        if annotation["/Subtype"] != "/Link" or "/Dest" not in annotation:
            continue
        x1, y1, x2, y2 = (float(value) for value in annotation["/Rect"])
        inside = [text for text, x, y in runs
                  if x1 - 1 <= x <= x2 + 1 and y1 - 1 <= y <= y2 + 1 and text.isdigit()]
        if inside:
            target = reader.get_page_number(annotation["/Dest"][0].get_object()) + 1
            found.append(("".join(inside), target))
    return found

__all__ = ["TEST_LIMITS", "make_link", "make_results", "make_project", "make_reference",
           "make_inspection", "Plant",
           "write_large_project", "tree_digest", "well_formed", "printed_page_refs"]


def write_build_output(folder, links, *, site="Test site (invented)", title="Test campaign",
                       contractor="Test contractor (invented)"):
    """A build output folder (summary.json + results.csv) as ``reportgen build`` writes it.

    ``links``: (link_id, verdict, fiber_type, capable applications, result rows), each result
    row (strand, wavelength_nm, direction, loss_db, tested_at, verdict). Limit and margin
    columns are left empty: the archive stores them as read and judges nothing.
    """
    import csv as _csv
    import io as _io
    import json as _json
    from pathlib import Path as _Path

    from reportgen.export.results_csv import RESULTS_COLUMNS, neutralise_cell

    folder = _Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    # a failing link gets a worst margin of -0.5 dB (invented), the others none
    entries = [{"link_id": link_id, "verdict": verdict,
                "worst_margin_db": -0.5 if verdict == "fail" else None, "missing": [],
                "fiber_type": fiber, "length_m": 100.0, "applications": [],
                "capable": list(capable)}
               for link_id, verdict, fiber, capable, _ in links]
    totals = {"links": len(links),
              **{v: sum(1 for e in entries if e["verdict"] == v)
                 for v in ("pass", "fail", "incomplete")}}
    summary = {"format": 1, "links": entries, "totals": totals,
               "project": {"title": title, "job_number": None, "site": site,
                           "customer": None, "contractor": contractor}}
    (folder / "summary.json").write_text(_json.dumps(summary, indent=2), encoding="utf-8")
    buffer = _io.StringIO()
    writer = _csv.writer(buffer, lineterminator="\n")
    writer.writerow(RESULTS_COLUMNS)
    line = 1
    for link_id, _, _, _, rows in links:
        for strand, wavelength, direction, loss, tested_at, verdict in rows:
            line += 1
            cells = [neutralise_cell(link_id), strand, wavelength, direction, f"{loss:.2f}",
                     tested_at, "", "", verdict, "", "T. Tester", "SRC-1;OPM-1", "", "",
                     "results/day1.csv", line]
            writer.writerow(cells + [""] * (len(RESULTS_COLUMNS) - len(cells)))
    (folder / "results.csv").write_text(buffer.getvalue(), encoding="utf-8")
    return folder


# ------------------------------------------------------------ synthetic OTDR traces
# A physical model of a one-way OTDR trace, for the LSA tests, the demo's .sor files
# (benchmarks/make_otdr_demo.py) and the reading benchmark. Everything is in dB of power:
# - backscatter falls by the fiber attenuation α·x (one way; the instrument shows one-way dB);
# - a splice or connector drops the level by its loss from its position on;
# - a reflective event adds, over one pulse length, the reflected power R [dB, e.g. -14.4 for
#   a glass/air end] to the backscatter, whose level for a pulse of τ ns is the backscatter
#   coefficient B (dB for 1 ns) + 10·log10(τ); the sum is clipped at the top of the scale;
# - past the fiber end only the noise floor is left;
# - Gaussian noise of noise_db (standard deviation, dB) on every sample, from a seeded generator.


def synth_sor(events, fiber_end_m: float, *, spacing_m: float = 1.0, group_index: float = 1.4682,
              alpha_db_per_km: float = 0.35, pulse_ns: int = 100, noise_db: float = 0.02,
              seed: int = 0, start_db: float = -8.0, floor_db: float = -45.0,
              backscatter_db: float = -80.0, end_reflectance_db: float = -14.4,
              extra_m: float = 300.0, **fields):
    """A ``SorFile`` of a trace over the fiber with ``events`` (position_m, loss_db, reflectance_db
    or None); the launch at 0 and the end at ``fiber_end_m`` are added. ``fields``: SorFile fields."""
    import numpy as np

    from reportgen.inputs.sor import SorEvent, SorFile
    from reportgen.units import SPEED_OF_LIGHT_M_PER_S as c

    def one_way_100ps(x_m: float) -> int:
        return round(x_m * group_index / c / 1e-10)

    data_spacing = round(spacing_m * group_index / c / 1e-10 * 10_000)
    spacing = data_spacing * 1e-10 / 10_000 * c / group_index  # as the file will say
    count = int((fiber_end_m + extra_m) / spacing)
    x = np.arange(count) * spacing
    level = start_db - alpha_db_per_km * x / 1000.0
    for position, loss, _refl in events:
        level = level - np.where(x >= position, loss, 0.0)
    pulse_m = c * pulse_ns * 1e-9 / (2 * group_index)
    power = 10 ** (level / 10)
    bs_db = backscatter_db + 10 * np.log10(pulse_ns)
    for position, _loss, refl in [*events, (0.0, 0.0, -50.0), (fiber_end_m, 0.0, end_reflectance_db)]:
        if refl is None:
            continue
        inside = (x >= position) & (x < position + pulse_m)
        power = power + np.where(inside, 10 ** ((level + refl - bs_db) / 10), 0.0)
    power = np.where(x > fiber_end_m + pulse_m, 10 ** (floor_db / 10), power)
    rng = np.random.default_rng(seed)
    samples = np.minimum(10 * np.log10(power) + rng.normal(0.0, noise_db, count), 0.0)
    sor_events = [SorEvent(0, 0.0, -50.0, "1F9999LS")]
    for position, loss, refl in events:
        code = "1F9999LS" if refl is not None else "0F9999LS"
        sor_events.append(SorEvent(one_way_100ps(position), loss, refl if refl is not None else 0.0, code,
                                   slope_db_per_km=alpha_db_per_km))
    sor_events.append(SorEvent(one_way_100ps(fiber_end_m), 0.0, end_reflectance_db, "1E9999LS"))
    total = sum(loss for _p, loss, _r in events) + alpha_db_per_km * fiber_end_m / 1000
    values = dict(group_index=group_index, pulse_width_ns=pulse_ns, data_spacing=data_spacing,
                  backscatter_db=backscatter_db, events=tuple(sor_events), total_loss_db=round(total, 3),
                  samples_db=samples)
    values.update(fields)
    return SorFile(**values)


class RecordingSlots:
    """One slot that renders nothing: it records what the engine does, and a part sent
    comes back only when the engine blocks for it."""

    def __init__(self, events: list[str]) -> None:
        self.events = events
        self.running: list[int] = []
        self.closed = False

    def free(self) -> bool:
        return not self.running

    def busy(self) -> bool:
        return bool(self.running)

    def send(self, index: int, html: str, root: Path, xml_first: bool) -> None:
        self.events.append(f"send {index}")
        self.running.append(index)

    def prepare(self) -> None:
        pass

    def wait(self, block: bool = True) -> list[tuple[int, RenderedPart]]:
        if not block:
            return []
        index = self.running.pop()
        self.events.append(f"back {index}")
        from reportgen.pdf.weasy import RenderedPart

        return [(index, RenderedPart(b"", (), {}, ()))]

    def close(self) -> None:
        self.closed = True
