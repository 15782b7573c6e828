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
from collections import Counter
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from datetime import date, datetime

import pandas as pd

from reportgen.engine.applications import ProjectApplications
from reportgen.engine.findings import RULES, Findings
from reportgen.engine.judge import Judgement, calibration_state
from reportgen.engine.otdr import OtdrAssessment
from reportgen.inputs.limits import describe_rows, is_unconfirmed, split_citation, status_at
from reportgen.model import AuditSettings, Instrument, LimitSet, LinkVerdict, Logo, Project
from reportgen.report.i18n import ENGLISH, Language
from reportgen.report.link_views import (
    ComponentView,
    FindingView,
    LinkView,
    build_link_view,
    finding_views,
    inspection_views,
    link_anchors,
    result_views,
    with_otdr,
)
from reportgen.report.view_apps import ApplicationsView, build_applications_view


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


def logo_data_uri(logo: Logo | None) -> str:
    """The contractor's logo (read by the inputs stage) as a ``data:`` URI; "" without one."""
    if logo is None:
        return ""
    return f"data:{logo.mime};base64,{base64.b64encode(logo.data).decode('ascii')}"


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
    rows_by_link = result_views(frame)
    anchors = link_anchors(link.link_id for link in project.links)
    outcomes = {outcome.link_id: outcome for outcome in judgement.links}
    links = tuple(build_link_view(project, judgement, link, outcomes[link.link_id],
                                  anchors[link.link_id],
                                  rows_by_link.get(link.link_id, []), lang)
                  for link in project.links)
    links = with_otdr(links, otdr)
    if findings is not None or project.inspections:
        inspections = inspection_views(project)
        links = tuple(dataclasses.replace(
            view, findings=() if findings is None else finding_views(
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
        project_findings=() if findings is None else finding_views(findings.for_link(None),
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
