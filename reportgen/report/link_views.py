"""The view model of one link: its budgets, results, findings, inspections, OTDR strands.

Part of the report's view model (:mod:`reportgen.report.viewmodel`, which builds the whole
report's from these): plain frozen dataclasses, numbers in their units, vocabulary values
in the contract's spellings; the templates word and format them. Each link's anchor
(:func:`link_anchors`) is also the prefix of the ids its sheet and diagrams use.
"""
from __future__ import annotations

import base64
import dataclasses
import math
import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from datetime import datetime
from typing import Any

import pandas as pd

from reportgen.engine.budget import Budget, TermKind
from reportgen.engine.findings import SEVERITIES, Finding
from reportgen.engine.judge import Judgement, LinkOutcome
from reportgen.engine.otdr import OtdrAssessment, PairedEvent
from reportgen.inputs.limits import split_citation
from reportgen.model import Link, LinkVerdict, Project, ResultVerdict, Severity
from reportgen.report import messages
from reportgen.report.i18n import ENGLISH, Language


@dataclass(frozen=True)
class TermView:
    """One budget line: quantity × allowance = loss, plus the running total after it."""

    kind: str  # budget.TermKind value
    quantity: float  # km for fiber, a count otherwise
    allowance_db: float  # dB/km for fiber, dB each otherwise
    loss_db: float
    source: str
    item_id: str | None = None


@dataclass(frozen=True)
class BudgetView:
    wavelength_nm: int
    terms: tuple[TermView, ...]
    total_db: float
    required: bool


@dataclass(frozen=True)
class ResultView:
    strand: int
    wavelength_nm: int
    direction: str  # "ab" or "ba"
    loss_db: float
    limit_db: float | None
    margin_db: float | None
    verdict: str  # ResultVerdict value
    judged: bool  # the engine's judged: the latest valid measurement of its key
    flags: tuple[str, ...]  # ResultFlag values
    technician: str
    instruments: tuple[str, ...]
    tested_at: datetime
    source_file: str
    source_line: int  # line of a text file, or row of a spreadsheet's sheet
    note: str
    source_sheet: str | None = None  # the sheet, for a row imported from a spreadsheet


@dataclass(frozen=True)
class MissingView:
    strand: int
    wavelength_nm: int
    direction: str  # "ab", "ba" or "any"
    reason: str  # "not-tested" or "invalid"


@dataclass(frozen=True)
class ComponentView:
    id: str
    loss_db: float
    description: str


@dataclass(frozen=True)
class EvidenceView:
    """Where a finding's evidence comes from: a file and its lines ("" for a setting; no
    lines for a file read whole, such as an OTDR trace file)."""

    file: str
    lines: tuple[int, ...]


@dataclass(frozen=True)
class FindingView:
    finding: Finding  # the engine's finding; templates word it with finding_text()
    severity: str  # Severity value
    rule: str
    link_id: str  # "" for the whole project
    anchor: str  # the link sheet's element id, "" for the whole project
    sources: tuple[EvidenceView, ...]  # evidence rows by file, in order


@dataclass(frozen=True)
class InspectionView:
    strand: int
    end: str  # "a" or "b"
    result: str  # "pass" or "fail"
    inspected_at: datetime
    criteria: str
    technician: str
    image_uri: str  # data: URI of the downscaled picture, "" without one
    image_width: int
    image_height: int
    note: str = ""


@dataclass(frozen=True)
class InspectionSummary:
    """The strand ends of a link inspected once, passing, without picture or note."""

    count: int
    first: datetime
    last: datetime
    criteria: tuple[str, ...]


@dataclass(frozen=True)
class LinkView:
    link_id: str
    anchor: str  # element id of the link sheet's first element: "link-<slug>"
    end_a: str
    end_b: str
    fiber_type: str
    plant: str
    length_m: float
    strands: int
    connections: int
    splices: int
    components: tuple[ComponentView, ...]
    applications: tuple[str, ...]
    transceiver: str
    notes: str
    verdict: str  # LinkVerdict value
    worst_margin_db: float | None
    judged: int
    budgets: tuple[BudgetView, ...]
    results: tuple[ResultView, ...]  # judged results and not-judged ones (no cabling limit)
    set_aside: tuple[ResultView, ...]  # superseded and invalid rows
    missing: tuple[MissingView, ...]
    failing: tuple[ResultView, ...]  # judged results that fail
    otdr: tuple[OtdrStrandView, ...] = ()  # OTDR results per strand and wavelength
    findings: tuple[FindingView, ...] = ()  # audit findings of the link, errors first
    inspections: tuple[InspectionView, ...] = ()  # notable end-face inspections (see below)
    inspections_passed: InspectionSummary | None = None  # strand ends with one plain pass

    @property
    def errors(self) -> tuple[FindingView, ...]:
        return tuple(f for f in self.findings if f.severity == Severity.ERROR.value)

    @property
    def needs_action(self) -> bool:
        return self.verdict != LinkVerdict.PASS.value or bool(self.errors)


@dataclass(frozen=True)
class OtdrStrandView:
    """One strand at one wavelength measured by OTDR (engine.otdr.StrandOtdr, for the sheet)."""

    figure_key: str  # key of its figure in the renderer's ``otdr_figures``
    strand: int
    wavelength_nm: int
    verdict: str  # "pass" or "fail"
    length_m: float | None
    documented_length_m: float
    length_tolerance_m: float
    end_to_end_loss_db: float | None
    insertion_loss_db: float | None
    pair_tolerance_m: float
    findings: tuple[str, ...]
    files: tuple[str, ...]
    events: tuple[PairedEvent, ...]  # numbered from 1 in the figure and the table


def otdr_figure_key(anchor: str, strand: int, wavelength_nm: int) -> str:
    return f"{anchor}-s{strand}-{wavelength_nm}"


def with_otdr(links: tuple[LinkView, ...], otdr: OtdrAssessment | None) -> tuple[LinkView, ...]:
    if otdr is None or not otdr.strands:
        return links
    out = []
    for view in links:
        strands = tuple(
            OtdrStrandView(otdr_figure_key(view.anchor, s.strand, s.wavelength_nm), s.strand, s.wavelength_nm,
                           s.verdict, s.length_m, s.documented_length_m, s.length_tolerance_m,
                           s.end_to_end_loss_db, s.insertion_loss_db, s.pair_tolerance_m, s.findings,
                           tuple(t.source_file for t in s.traces), s.events)
            for s in otdr.for_link(view.link_id))
        out.append(dataclasses.replace(view, otdr=strands) if strands else view)
    return tuple(out)


def slugify(text: str) -> str:
    """A lower-case ASCII slug of ``text`` for element ids ("x" when nothing is left)."""
    slug = re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-")
    return slug or "x"


def link_anchors(link_ids: Iterable[str]) -> dict[str, str]:
    """Unique, safe element ids ``link-<slug>`` per link id (``-2``, ``-3`` on clashes)."""
    anchors: dict[str, str] = {}
    used: set[str] = set()
    for link_id in link_ids:
        base = f"link-{slugify(link_id)}"
        anchor, n = base, 1
        while anchor in used:
            n += 1
            anchor = f"{base}-{n}"
        used.add(anchor)
        anchors[link_id] = anchor
    return anchors


def _float_or_none(value: Any) -> float | None:
    if value is None:
        return None
    value = float(value)
    return None if math.isnan(value) else value


def result_views(frame: pd.DataFrame) -> dict[str, list[ResultView]]:
    """Result rows grouped by link id, in input order."""
    by_link: dict[str, list[ResultView]] = {}
    if frame.empty:
        return by_link
    columns = ["link_id", "strand", "wavelength_nm", "direction", "loss_db", "limit_db",
               "margin_db", "verdict", "judged", "flags", "technician", "instrument", "tested_at",
               "source_file", "source_line", "note", "source"]
    for row in frame[columns].itertuples(index=False):
        by_link.setdefault(row.link_id, []).append(ResultView(
            strand=int(row.strand), wavelength_nm=int(row.wavelength_nm),
            direction=str(row.direction), loss_db=float(row.loss_db),
            limit_db=_float_or_none(row.limit_db), margin_db=_float_or_none(row.margin_db),
            verdict=str(row.verdict), judged=bool(row.judged), flags=tuple(row.flags), technician=_text(row.technician),
            instruments=tuple(row.instrument), tested_at=pd.Timestamp(row.tested_at).to_pydatetime(),
            source_file=str(row.source_file), source_line=int(row.source_line),
            note=_text(row.note), source_sheet=_sheet(str(row.source_file), str(row.source)),
        ))
    return by_link


def _sheet(file: str, source: str) -> str | None:
    """The sheet named in a ``source`` cell written ``file[sheet]:row``; None for ``file:line``."""
    if source.startswith(file + "[") and "]:" in source:
        return source[len(file) + 1:source.rindex("]:")]
    return None


def _text(value: Any) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return ""
    return str(value)


def _budget_view(budget: Budget, required: bool, lang: Language = ENGLISH) -> BudgetView:
    terms = tuple(TermView(t.kind.value, t.quantity, t.allowance_db, t.loss_db,
                           messages.Words(lang)["components_source"] if t.kind is TermKind.COMPONENT
                           else split_citation(t.source)[0], t.item_id) for t in budget.terms)
    return BudgetView(budget.wavelength_nm, terms, budget.total_db, required)


def _link_budgets(project: Project, judgement: Judgement, link: Link,
                  measured_nm: Iterable[int], lang: Language = ENGLISH) -> tuple[BudgetView, ...]:
    """The engine's budgets of ``link`` at the required and the measured wavelengths."""
    required = set(project.testing.wavelengths_nm.get(link.fiber_type.category, ()))
    wanted = required | set(measured_nm)
    return tuple(_budget_view(budget, budget.wavelength_nm in required, lang)
                 for budget in judgement.budget_table.for_link(link.link_id)
                 if budget.wavelength_nm in wanted)


def _sort_key(result: ResultView) -> tuple:
    return (result.strand, result.wavelength_nm, result.direction, result.tested_at)


def build_link_view(project: Project, judgement: Judgement, link: Link, outcome: LinkOutcome,
                    anchor: str, rows: list[ResultView], lang: Language = ENGLISH) -> LinkView:
    """The view of one link: definition, budgets, results, what is missing."""
    # shown with the judged results: results at a wavelength without a cabling limit
    # (verdict not-judged), counted for the link's applications
    shown = [r for r in rows if r.judged or r.verdict == ResultVerdict.NOT_JUDGED.value]
    judged = tuple(sorted(shown, key=_sort_key))
    set_aside = tuple(sorted((r for r in rows if r not in shown), key=_sort_key))
    components = tuple(
        ComponentView(c, project.components[c].loss_db, project.components[c].description or "")
        for c in link.components if c in project.components)
    return LinkView(
        link_id=link.link_id, anchor=anchor, end_a=link.end_a, end_b=link.end_b,
        fiber_type=link.fiber_type.value, plant=link.plant.value, length_m=link.length_m,
        strands=link.strands, connections=link.connections, splices=link.splices,
        components=components, applications=link.applications,
        transceiver=link.transceiver or "", notes=link.notes or "",
        verdict=outcome.verdict.value, worst_margin_db=outcome.worst_margin_db,
        judged=outcome.judged,
        budgets=_link_budgets(project, judgement, link, {r.wavelength_nm for r in judged}, lang),
        results=judged, set_aside=set_aside,
        missing=tuple(MissingView(m.strand, m.wavelength_nm, m.direction, m.reason)
                      for m in outcome.missing),
        failing=tuple(r for r in judged if r.verdict == ResultVerdict.FAIL.value),
    )


def finding_views(findings: Iterable[Finding], anchors: Mapping[str, str]
                   ) -> tuple[FindingView, ...]:
    """Findings as the templates show them: errors first, then warnings, then notes."""
    order = {severity: at for at, severity in enumerate(SEVERITIES)}
    views = []
    for finding in sorted(findings, key=lambda f: order[f.severity]):
        by_file: dict[str, list[int]] = {}
        for row in finding.evidence:
            if row.get("file"):
                lines = by_file.setdefault(str(row["file"]), [])
                if row.get("line") is not None:  # a trace file has no lines
                    lines.append(int(row["line"]))
        views.append(FindingView(
            finding=finding, severity=finding.severity.value, rule=finding.rule,
            link_id=finding.link_id or "", anchor=anchors.get(finding.link_id or "", ""),
            sources=tuple(EvidenceView(file, tuple(sorted(set(lines))))
                          for file, lines in by_file.items())))
    return tuple(views)


def inspection_views(project: Project
                      ) -> dict[str, tuple[tuple[InspectionView, ...], InspectionSummary | None]]:
    """Per link: the inspections worth a row (a strand end with a failure, a picture, a note
    or more than one inspection) and a summary of the strand ends with one plain pass."""
    by_end: dict[tuple[str, int, str], list] = {}
    for i in sorted(project.inspections or (),
                    key=lambda i: (i.strand, i.end.value, i.inspected_at, i.source_line)):
        by_end.setdefault((i.link_id, i.strand, i.end.value), []).append(i)
    shown: dict[str, list[InspectionView]] = {}
    plain: dict[str, list] = {}
    for (link_id, _, _), items in by_end.items():
        notable = len(items) > 1 or any(i.result.value == "fail" or i.image or i.note
                                        for i in items)
        if not notable:
            plain.setdefault(link_id, []).append(items[0])
            continue
        for i in items:
            image = i.image
            shown.setdefault(link_id, []).append(InspectionView(
                strand=i.strand, end=i.end.value, result=i.result.value,
                inspected_at=i.inspected_at, criteria=i.criteria or "",
                technician=i.technician or "",
                image_uri="" if image is None else
                f"data:{image.mime};base64,{base64.b64encode(image.data).decode('ascii')}",
                image_width=0 if image is None else image.width,
                image_height=0 if image is None else image.height, note=i.note or ""))
    out = {}
    for link_id in {*shown, *plain}:
        passes = plain.get(link_id, [])
        summary = None if not passes else InspectionSummary(
            count=len(passes), first=min(i.inspected_at for i in passes),
            last=max(i.inspected_at for i in passes),
            criteria=tuple(sorted({i.criteria for i in passes if i.criteria})))
        out[link_id] = (tuple(shown.get(link_id, ())), summary)
    return out
