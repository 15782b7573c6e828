"""The report's view model: engine output reshaped into plain frozen dataclasses.

Templates see only these objects (no pandas). Nothing here formats numbers or
chooses words: numbers stay floats in their units (``_db``, ``_m``, ``_nm``) and
are formatted by the template filters of :mod:`reportgen.report.render`; vocabulary
values stay the contract's spellings (``"pass"``, ``"ab"``) and are worded by the
catalogue :mod:`reportgen.report.messages`.
"""
from __future__ import annotations

import base64
import dataclasses
import math
import re
from collections import Counter
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from datetime import date, datetime
from typing import Any

import pandas as pd

from reportgen.engine.applications import ProjectApplications
from reportgen.engine.budget import Budget, TermKind
from reportgen.engine.judge import Judgement, LinkOutcome, calibration_state
from reportgen.inputs.limits import describe_rows, is_unconfirmed, split_citation, status_at
from reportgen.engine.findings import RULES, SEVERITIES, Finding, Findings
from reportgen.model import (
    AuditSettings,
    Instrument,
    LimitSet,
    Link,
    LinkVerdict,
    Logo,
    Project,
    ResultVerdict,
    Severity,
)
from reportgen.engine.otdr import OtdrAssessment, PairedEvent
from reportgen.report import messages
from reportgen.report.i18n import ENGLISH, Language
from reportgen.report.view_apps import ApplicationsView, build_applications_view



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
class ThresholdView:
    key: str  # testing.audit key
    value: float
    default: float


@dataclass(frozen=True)
class RuleView:
    id: str
    severity: str
    thresholds: tuple[ThresholdView, ...]
    settings: tuple[str, ...]
    findings: int  # findings of this rule in the project


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


def _with_otdr(links: tuple[LinkView, ...], otdr: OtdrAssessment | None) -> tuple[LinkView, ...]:
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


@dataclass(frozen=True)
class InstrumentView:
    id: str
    kind: str
    model: str
    serial: str
    calibration_due: date | None
    first_use: date | None
    last_use: date | None
    state: str  # "ok", "overdue", "unknown", "unused"
    results: int


@dataclass(frozen=True)
class TechnicianView:
    name: str
    results: int


@dataclass(frozen=True)
class LimitRowView:
    table: str
    fiber_type: str
    wavelength_nm: int
    attenuation_db_per_km: float
    source: str  # the citation with its status, as in the limit set
    citation: str = ""  # the source without its status
    status: str = ""  # the status at this wavelength ("" when the set states none)


@dataclass(frozen=True)
class InputFileView:
    """A file the report was made from (appendix): path, size, SHA-256 and rows it gave."""

    path: str
    size_bytes: int
    sha256: str
    results: int
    links: int


@dataclass(frozen=True)
class ArchiveView:
    """The report's digest (SHA-256 of the manifest of the files inside the PDF) and signer."""

    digest: str
    signer: str = ""   # who signs the PDF (name on the certificate); "" when unsigned
    not_embedded: tuple[str, ...] = ()  # input files listed but not attached (OTDR size cap)


@dataclass(frozen=True)
class ReportView:
    """Everything the templates may use, and nothing else."""

    title: str
    site: str
    customer: str
    job_number: str
    contractor_name: str
    contractor_address: str
    contractor_phone: str
    contractor_email: str
    logo_uri: str  # data: URI, or "" without a logo
    limits_id: str
    limits_title: str
    limits_source: str
    limits_origin: str
    limits_notes: tuple[str, ...]
    connection_db: float
    connection_source: str
    splice_db: float
    splice_source: str
    limit_rows: tuple[LimitRowView, ...]
    reference_method: str
    directions: str
    uncertainty_db: float
    length_unit: str
    wavelengths_nm: Mapping[str, tuple[int, ...]]
    first_test: datetime | None
    last_test: datetime | None
    totals: Mapping[str, int]
    links: tuple[LinkView, ...]
    needs_action: tuple[LinkView, ...]  # failing, then incomplete, then with error findings
    instruments: tuple[InstrumentView, ...]
    technicians: tuple[TechnicianView, ...]
    components: tuple[ComponentView, ...]
    paper: str
    generated_at: datetime
    version: str
    apps: ApplicationsView | None = None  # None when applications were not assessed
    finding_counts: Mapping[str, int] | None = None  # by severity; None: no audit was run
    project_findings: tuple[FindingView, ...] = ()  # findings of no single link
    rules: tuple[RuleView, ...] = ()  # every audit rule with its thresholds
    references_given: bool = False  # the project has a references/ folder
    inspections_given: bool = False  # the project has an inspections/ folder
    connection_citation: str = ""  # connection_source without its status
    connection_status: str = ""
    splice_citation: str = ""
    splice_status: str = ""
    # values this report uses (allowances, attenuation of the project's fiber types, rows of
    # the application table shown) whose status is "from memory"
    unconfirmed_values: int = 0
    input_files: tuple[InputFileView, ...] = ()  # every file read, by path
    archive: ArchiveView | None = None    # None when no manifest was made (e.g. golden file)
    language: str = "en"  # report.language: the HTML lang attribute, the PDF's /Lang
    tagged: bool = False                  # the PDF parts ask for a structure tree


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


def logo_data_uri(logo: Logo | None) -> str:
    """The contractor's logo (read by the inputs stage) as a ``data:`` URI; "" without one."""
    if logo is None:
        return ""
    return f"data:{logo.mime};base64,{base64.b64encode(logo.data).decode('ascii')}"


def _float_or_none(value: Any) -> float | None:
    if value is None:
        return None
    value = float(value)
    return None if math.isnan(value) else value


def _result_views(frame: pd.DataFrame) -> dict[str, list[ResultView]]:
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


def _instrument_views(instruments: Iterable[Instrument], frame: pd.DataFrame) -> tuple[InstrumentView, ...]:
    uses: dict[str, list[datetime]] = {}
    if not frame.empty:
        for ids, tested_at in zip(frame["instrument"], frame["tested_at"]):
            for inst in ids:
                uses.setdefault(inst, []).append(pd.Timestamp(tested_at).to_pydatetime())
    views = []
    for inst in instruments:
        used = uses.get(inst.id, [])
        first = min(used).date() if used else None
        last = max(used).date() if used else None
        state = calibration_state(inst, first, last) if used else "unused"
        views.append(InstrumentView(inst.id, inst.kind.value, inst.model or "", inst.serial or "",
                                    inst.calibration_due, first, last, state, len(used)))
    return tuple(views)


def _technician_views(listed: Iterable[str], frame: pd.DataFrame) -> tuple[TechnicianView, ...]:
    counts: Counter[str] = Counter()
    if not frame.empty:
        counts.update(t for t in frame["technician"].fillna("").astype(str) if t.strip())
    names = list(dict.fromkeys([*listed, *sorted(counts)]))
    return tuple(TechnicianView(name, counts.get(name, 0)) for name in names)


def _finding_views(findings: Iterable[Finding], anchors: Mapping[str, str]
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


def _inspection_views(project: Project
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


def _rule_views(audit: AuditSettings, findings: Findings) -> tuple[RuleView, ...]:
    defaults = AuditSettings()
    counts = Counter(f.rule for f in findings.items)
    return tuple(RuleView(
        id=rule.id, severity=rule.severity.value,
        thresholds=tuple(ThresholdView(key, getattr(audit, key), getattr(defaults, key))
                         for key in rule.thresholds),
        settings=rule.settings, findings=counts.get(rule.id, 0)) for rule in RULES)


def build_view(project: Project, judgement: Judgement, *, now: datetime, version: str,
               assessed: ProjectApplications | None = None,
               findings: Findings | None = None,
               otdr: OtdrAssessment | None = None,
               archive: ArchiveView | None = None,
               lang: Language = ENGLISH) -> ReportView:
    """The whole report's view model from a validated project and its judgement.

    ``lang`` is the report's language: the view model holds data, except the few words
    made from data (an application's reasons, a component's source), written in it.

    ``assessed`` (applications.assess_project) adds the applications and power budgets.
    """
    info, testing, limits = project.info, project.testing, project.limits
    frame = judgement.results
    rows_by_link = _result_views(frame)
    anchors = link_anchors(link.link_id for link in project.links)
    outcomes = {outcome.link_id: outcome for outcome in judgement.links}
    links = tuple(build_link_view(project, judgement, link, outcomes[link.link_id],
                                  anchors[link.link_id],
                                  rows_by_link.get(link.link_id, []), lang)
                  for link in project.links)
    links = _with_otdr(links, otdr)
    if findings is not None or project.inspections:
        inspections = _inspection_views(project)
        links = tuple(dataclasses.replace(
            view, findings=() if findings is None else _finding_views(
                findings.for_link(view.link_id), anchors),
            inspections=inspections.get(view.link_id, ((), None))[0],
            inspections_passed=inspections.get(view.link_id, ((), None))[1]) for view in links)
    needs_action = (tuple(v for v in links if v.verdict == LinkVerdict.FAIL.value)
                    + tuple(v for v in links if v.verdict == LinkVerdict.INCOMPLETE.value)
                    + tuple(v for v in links if v.verdict == LinkVerdict.PASS.value
                            and v.needs_action))
    tested = frame["tested_at"].dropna() if not frame.empty else pd.Series([], dtype=object)
    components = tuple(ComponentView(c.id, c.loss_db, c.description or "")
                       for c in project.components.values())
    limit_rows = _limit_rows(limits)
    connection = split_citation(limits.source_for("connection_db"))
    splice = split_citation(limits.source_for("splice_db"))
    apps = None if assessed is None else build_applications_view(project, assessed, anchors, lang)
    fibers = {link.fiber_type.value for link in project.links}
    used = [connection[1], splice[1]] + [row.status for row in limit_rows
                                         if row.fiber_type in fibers]
    used += [row.status for row in apps.rule_rows] if apps is not None else []
    unconfirmed = sum(1 for status in used if is_unconfirmed(status))
    return ReportView(
        title=info.title, site=info.site or "", customer=info.customer or "",
        job_number=info.job_number or "", contractor_name=info.contractor.name,
        contractor_address=info.contractor.address or "",
        contractor_phone=info.contractor.phone or "",
        contractor_email=info.contractor.email or "",
        logo_uri=logo_data_uri(info.contractor.logo),
        limits_id=limits.id, limits_title=limits.title, limits_source=limits.source,
        limits_origin=limits.origin, limits_notes=limits.notes,
        connection_db=limits.connection_db, connection_source=limits.source_for("connection_db"),
        splice_db=limits.splice_db, splice_source=limits.source_for("splice_db"),
        limit_rows=limit_rows,
        connection_citation=connection[0], connection_status=connection[1],
        splice_citation=splice[0], splice_status=splice[1],
        unconfirmed_values=unconfirmed,
        reference_method=testing.reference_method.value, directions=testing.directions.value,
        uncertainty_db=testing.uncertainty_db, length_unit=testing.units.value,
        wavelengths_nm={k.value: tuple(v) for k, v in testing.wavelengths_nm.items()},
        first_test=pd.Timestamp(tested.min()).to_pydatetime() if len(tested) else None,
        last_test=pd.Timestamp(tested.max()).to_pydatetime() if len(tested) else None,
        totals=judgement.totals, links=links, needs_action=needs_action,
        instruments=_instrument_views(project.instruments, frame),
        technicians=_technician_views(project.technicians, frame),
        components=components, paper=project.report.paper.value,
        generated_at=now, version=version,
        apps=apps,
        finding_counts=None if findings is None else findings.counts,
        project_findings=() if findings is None else _finding_views(findings.for_link(None),
                                                                    anchors),
        rules=() if findings is None else _rule_views(project.testing.audit, findings),
        references_given=project.references is not None,
        inspections_given=project.inspections is not None,
        input_files=tuple(InputFileView(path=f.path, size_bytes=f.size_bytes, sha256=f.sha256,
                                        results=f.results, links=f.links) for f in project.input_files),
        archive=archive, language=lang.code,
        tagged=project.report.tagged,
    )


def _limit_rows(limits: LimitSet) -> tuple[LimitRowView, ...]:
    rows = []
    for row in describe_rows(limits):
        citation, status = split_citation(row["source"])
        rows.append(LimitRowView(**row, citation=citation,
                                 status=status_at(status, row["wavelength_nm"])))
    return tuple(rows)
