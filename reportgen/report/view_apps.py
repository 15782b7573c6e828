"""The view of the applications and transceiver power: per-link blocks, one matrix of links ×
applications per fiber type, the power list and the application rules used (the appendix).

Plain frozen dataclasses, as in :mod:`reportgen.report.viewmodel`, which builds the rest of the
report's view and calls :func:`build_applications_view`.
"""
from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Final

from reportgen.engine.applications import ProjectApplications
from reportgen.engine.budget import left_out_end_connections
from reportgen.engine.power import PowerBudget
from reportgen.inputs.apptable import describe_rows as describe_application_rows
from reportgen.model import Link, Project
from reportgen.report.i18n import ENGLISH, Language
from reportgen.report.messages_apps import reason_text

# Up to this many links the applications matrix and power list sit in the front matter,
# after the link register; above it they form their own part before the appendix (the
# front matter is re-rendered until its page numbers settle, so it must stay short).
FRONT_MATRIX_MAX_LINKS: Final = 60
# Power verdicts in the order the project list shows them: what needs action first.
POWER_ORDER: Final[Mapping[str, int]] = {"too-weak": 0, "no-fit": 1, "too-strong": 2, "ok": 3}
POWER_LIST_ALL_MAX: Final = 60  # above this many links with a transceiver, list only problems


@dataclass(frozen=True)
class ApplicationView:
    """One application listed for a link, with the limits it was checked against."""

    id: str
    verdict: str  # ApplicationVerdict value
    wavelengths_nm: tuple[int, ...]  # test wavelengths the application needs
    max_loss_db: float | None  # None: fiber type not specified for the application
    min_loss_db: float | None  # PON classes only
    worst_loss_db: float | None  # highest judged loss at the needed wavelengths
    least_loss_db: float | None
    max_length_m: float | None
    reasons: tuple[str, ...]  # messages_apps.reason_text of each reason, in the report's language
    end_allowance_db: float = 0.0  # added to worst_loss_db before the maximum check
    checked_loss_db: float | None = None  # worst_loss_db + end_allowance_db
    within_uncertainty: bool = False  # a compared loss within uncertainty_db of its limit


@dataclass(frozen=True)
class PowerView:
    """The received power window of a link with its transceiver, and the transceiver's words."""

    budget: PowerBudget
    description: str  # the transceiver's description in project.yaml ("" when none)


@dataclass(frozen=True)
class TransceiverDifference:
    """A listed application whose channel loss is not the transceiver's window."""

    application: str
    max_loss_db: float
    window_db: float  # lowest launch power − receive minimum


@dataclass(frozen=True)
class LinkApplicationsView:
    applications: tuple[ApplicationView, ...]  # listed in links.csv, in that order
    capable: tuple[str, ...]  # every application supported as measured, table order
    power: PowerView | None
    end_allowance_db: float = 0.0  # added on maximum-side checks (reference method)
    left_out_ends: int = 0  # end connections the reference method leaves out
    differences: tuple[TransceiverDifference, ...] = ()


@dataclass(frozen=True)
class MatrixCell:
    verdict: str  # ApplicationVerdict value
    listed: bool  # links.csv names the application for the link


@dataclass(frozen=True)
class MatrixRow:
    link_id: str
    anchor: str
    cells: tuple[MatrixCell, ...]


@dataclass(frozen=True)
class MatrixGroup:
    """Links of one fiber type × the applications some of them list or would support."""

    fiber_type: str
    columns: tuple[str, ...]
    rows: tuple[MatrixRow, ...]
    continued: bool = False  # a later slice of a group split over PDF parts
    page_start: bool = False  # begins a planned page (reportgen.report.matrix_pages)


@dataclass(frozen=True)
class PowerRow:
    link_id: str
    anchor: str
    power: PowerView


@dataclass(frozen=True)
class ApplicationRuleRow:
    """One row of the application table as used in the report (applications.describe_rows)."""

    id: str
    family: str
    fiber_types: str
    test_wavelengths_nm: str
    max_length_m: float | None  # None: the standard sets no reach
    min_loss_db: float | None
    max_loss_db: float
    source: str
    status: str


@dataclass(frozen=True)
class ApplicationsView:
    """Applications and power budgets for the link sheets, the matrix and the appendix."""

    by_anchor: Mapping[str, LinkApplicationsView]  # link sheet anchor -> its block
    groups: tuple[MatrixGroup, ...]
    power_rows: tuple[PowerRow, ...]  # problems first (POWER_ORDER), then links.csv order
    power_ok_unlisted: int  # links whose power is ok, left out of a long list
    rule_rows: tuple[ApplicationRuleRow, ...]  # applications shown, rows of fiber types in use
    family_sources: tuple[tuple[str, str], ...]
    attenuators_db: tuple[float, ...]
    in_front: bool  # matrix in the front matter (small project), else a part of its own


def _power_view(project: Project, budget: PowerBudget) -> PowerView:
    transceiver = project.transceivers.get(budget.transceiver)
    return PowerView(budget, (transceiver.description or "") if transceiver else "")


def _matrix_groups(project: Project, assessed: ProjectApplications,
                   anchors: Mapping[str, str]) -> tuple[MatrixGroup, ...]:
    """One matrix per fiber type (first-seen order): its links × the applications that
    run on that fiber type and that some of its links list or would support."""
    table = assessed.table
    by_type: dict[str, list[Link]] = {}
    for link in project.links:
        by_type.setdefault(link.fiber_type.value, []).append(link)
    groups = []
    for fiber_type, links in by_type.items():
        ids = {link.link_id for link in links}
        fiber = links[0].fiber_type
        wanted: set[str] = set()
        for link in links:
            found = assessed.for_link(link.link_id)
            wanted |= {a.id for a in found.assessments}
            wanted |= {i for i in found.capable if table.get(i).limits_for(fiber) is not None}
        columns = [i for i in table.ids if i in wanted]
        matrix = assessed.matrix(columns)
        rows = tuple(
            MatrixRow(row["link_id"], anchors[row["link_id"]],
                      tuple(MatrixCell(c["verdict"], c["listed"]) for c in row["cells"]))
            for row in matrix["links"] if row["link_id"] in ids)
        groups.append(MatrixGroup(fiber_type, tuple(columns), rows))
    return tuple(groups)


def build_applications_view(project: Project, assessed: ProjectApplications,
                            anchors: Mapping[str, str], lang: Language = ENGLISH) -> ApplicationsView:
    """Per-link blocks, the matrix groups, the power list and the rules used."""
    table = assessed.table
    by_anchor: dict[str, LinkApplicationsView] = {}
    power_rows: list[PowerRow] = []
    for link in project.links:
        found = assessed.for_link(link.link_id)
        budget = assessed.power.get(link.link_id)
        power = _power_view(project, budget) if budget is not None else None
        by_anchor[anchors[link.link_id]] = LinkApplicationsView(
            applications=tuple(ApplicationView(
                id=a.id, verdict=a.verdict.value,
                wavelengths_nm=table.get(a.id).test_wavelengths_nm,
                max_loss_db=a.max_loss_db, min_loss_db=a.min_loss_db,
                worst_loss_db=a.worst_loss_db, least_loss_db=a.least_loss_db,
                max_length_m=a.max_length_m,
                reasons=tuple(reason_text(r, lang) for r in a.reasons),
                end_allowance_db=a.end_allowance_db, checked_loss_db=a.checked_loss_db,
                within_uncertainty=a.within_uncertainty)
                for a in found.assessments),
            capable=found.capable, power=power,
            end_allowance_db=assessed.checks.end_allowance_db,
            left_out_ends=left_out_end_connections(project.testing.reference_method),
            differences=tuple(TransceiverDifference(*d)
                              for d in assessed.transceiver_differences(link.link_id)))
        if power is not None:
            power_rows.append(PowerRow(link.link_id, anchors[link.link_id], power))
    power_rows.sort(key=lambda row: POWER_ORDER.get(row.power.budget.verdict, len(POWER_ORDER)))
    power_ok_unlisted = 0
    if len(power_rows) > POWER_LIST_ALL_MAX:
        listed = [row for row in power_rows if row.power.budget.verdict != "ok"]
        power_ok_unlisted = len(power_rows) - len(listed)
        power_rows = listed
    groups = _matrix_groups(project, assessed, anchors)
    shown = {i for group in groups for i in group.columns}
    present = {link.fiber_type.value for link in project.links}
    rule_rows = tuple(ApplicationRuleRow(
        id=row["id"], family=row["family"], fiber_types=row["fiber_types"],
        test_wavelengths_nm=row["test_wavelengths_nm"], max_length_m=row["max_length_m"],
        min_loss_db=row["min_loss_db"], max_loss_db=row["max_loss_db"], source=row["source"],
        status=row["status"]) for row in describe_application_rows(table)
        if row["id"] in shown and present & set(row["fiber_types"].split(", ")))
    families = {row.family for row in rule_rows}
    return ApplicationsView(
        by_anchor=by_anchor, groups=groups, power_rows=tuple(power_rows),
        power_ok_unlisted=power_ok_unlisted, rule_rows=rule_rows,
        family_sources=tuple((k, v) for k, v in table.sources.items() if k in families),
        attenuators_db=tuple(project.testing.attenuators_db),
        in_front=len(project.links) <= FRONT_MATRIX_MAX_LINKS,
    )
