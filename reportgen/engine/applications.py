"""Applications a link supports: Ethernet PMDs, Fibre Channel rates, PON loss classes.

The table ships as data (``reportgen/data/applications.yaml``), every value with its
source and status. A link is checked against an application on its fiber type [1]_:

- the fiber type must have a row in the entry (else *not specified*);
- the documented length (``Link.length_m``) must not exceed the row's maximum;
- at every test wavelength the entry needs, the worst judged loss over strands and
  directions must not exceed the maximum channel loss;
- where the row has a minimum loss (PON classes), the least judged loss over strands
  and directions must not fall below it;
- a needed wavelength without any judged result leaves the application *untested*.

Verdicts: ``not-supported`` when any check fails (every reason is listed, untested
wavelengths included), else ``untested`` when a needed wavelength has no judged result,
else ``supported``.

References
----------
.. [1] IEEE 802.3 (Ethernet PMD channel insertion loss and reach), INCITS FC-PI
   (Fibre Channel), ITU-T G.984.2 / G.987.2 / G.9807.1 (PON optical path loss
   classes); values and their status in the data file.
"""
from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from reportgen.model import (
    Application,
    ApplicationTable,
    ApplicationVerdict,
    FiberType,
    Link,
    Project,
    ReasonKind,
)
from reportgen.engine.power import (
    TOLERANCE_DB,
    LossRange,
    PowerBudget,
    assess_power,
    budget_limits_db,
    judged_loss_table,
    loss_ranges_from_table,
)
from reportgen.units import round_db, round_length_m

# Reason texts, one place to translate. Fields: application, fiber_type, wavelength_nm,
# value, limit (numbers pre-formatted).
REASON_TEXTS: dict[ReasonKind, str] = {
    ReasonKind.FIBER_TYPE: "fiber type {fiber_type} not specified for {application}",
    ReasonKind.TOO_LONG: "too long: {value} m documented, {limit} m allowed on {fiber_type}",
    ReasonKind.TOO_MUCH_LOSS: "too much loss at {wavelength_nm} nm: {value} dB measured, "
                              "{limit} dB allowed",
    ReasonKind.TOO_LITTLE_LOSS: "too little loss at {wavelength_nm} nm: {value} dB measured, "
                                "class minimum {limit} dB",
    ReasonKind.UNTESTED: "untested at {wavelength_nm} nm: no judged result",
}


if TYPE_CHECKING:
    from reportgen.engine.judge import Judgement


@dataclass(frozen=True)
class Reason:
    """Why an application is not supported (or untested) on a link."""

    kind: ReasonKind
    application: str
    fiber_type: str
    wavelength_nm: int | None = None
    value: float | None = None  # measured loss [dB] or documented length [m]
    limit: float | None = None  # the limit it was compared with, same unit

    def text(self, texts: Mapping[ReasonKind, str] = REASON_TEXTS) -> str:
        number = "{:.0f}" if self.kind is ReasonKind.TOO_LONG else "{:.2f}"
        return texts[self.kind].format(
            application=self.application, fiber_type=self.fiber_type,
            wavelength_nm=self.wavelength_nm,
            value=None if self.value is None else number.format(self.value),
            limit=None if self.limit is None else number.format(self.limit))

    def __str__(self) -> str:
        return self.text()


@dataclass(frozen=True)
class ApplicationAssessment:
    """One application on one link."""

    id: str
    verdict: ApplicationVerdict
    max_loss_db: float | None  # None when the fiber type is not specified
    worst_loss_db: float | None  # highest judged loss over the needed wavelengths
    max_length_m: float | None
    reasons: tuple[Reason, ...] = ()
    min_loss_db: float | None = None
    least_loss_db: float | None = None  # lowest judged loss over the needed wavelengths
    losses_db: Mapping[int, LossRange] = field(default_factory=dict)  # per needed wavelength

    def to_json(self) -> dict[str, Any]:
        """One element of a link's ``applications`` list in summary.json."""
        return {
            "id": self.id,
            "verdict": self.verdict.value,
            "max_loss_db": round_db(self.max_loss_db),
            "worst_loss_db": round_db(self.worst_loss_db),
            "max_length_m": round_length_m(self.max_length_m),
            "reasons": [str(reason) for reason in self.reasons],
        }


@dataclass(frozen=True)
class LinkApplications:
    """The applications listed for one link, and every one it would support."""

    link_id: str
    assessments: tuple[ApplicationAssessment, ...]  # listed in links.csv, in that order
    capable: tuple[str, ...]  # ids of every table entry supported as measured, table order
    # every table entry, table order (a tuple, or EntryAssessments worked out on reading)
    every: Sequence[ApplicationAssessment] = ()

    def to_json(self) -> dict[str, Any]:
        return {"applications": [a.to_json() for a in self.assessments],
                "capable": list(self.capable)}


def assess_application(
    link: Link, application: Application, measured: Mapping[int, LossRange]
) -> ApplicationAssessment:
    """Check one application on one link against its judged losses.

    Parameters
    ----------
    link : Link
        Fiber type and documented length ``length_m``. [m]
    application : Application
        The table entry: rows per fiber type, needed test wavelengths.
    measured : mapping
        ``{wavelength_nm: LossRange}`` of the link's judged results.

    Returns
    -------
    ApplicationAssessment
        Verdict, limits, worst loss and every reason.

    References
    ----------
    .. [1] IEEE 802.3, INCITS FC-PI, ITU-T G.984.2 / G.987.2 / G.9807.1: maximum channel
       insertion loss and reach; PON classes also a minimum loss.
    """
    fiber = link.fiber_type.value
    row = application.limits_for(link.fiber_type)
    if row is None:
        return ApplicationAssessment(application.id, ApplicationVerdict.NOT_SUPPORTED, None, None,
                                     None, (Reason(ReasonKind.FIBER_TYPE, application.id, fiber),))
    reasons: list[Reason] = []
    if link.length_m > row.max_length_m + TOLERANCE_DB:
        reasons.append(Reason(ReasonKind.TOO_LONG, application.id, fiber, None,
                              link.length_m, row.max_length_m))
    losses = {wl: measured[wl] for wl in application.test_wavelengths_nm if wl in measured}
    untested = [wl for wl in application.test_wavelengths_nm if wl not in measured]
    for wl, loss in losses.items():
        if loss.worst_loss_db > row.max_loss_db + TOLERANCE_DB:
            reasons.append(Reason(ReasonKind.TOO_MUCH_LOSS, application.id, fiber, wl,
                                  loss.worst_loss_db, row.max_loss_db))
        if row.min_loss_db is not None and loss.least_loss_db < row.min_loss_db - TOLERANCE_DB:
            reasons.append(Reason(ReasonKind.TOO_LITTLE_LOSS, application.id, fiber, wl,
                                  loss.least_loss_db, row.min_loss_db))
    reasons += [Reason(ReasonKind.UNTESTED, application.id, fiber, wl) for wl in untested]
    failed = any(reason.kind is not ReasonKind.UNTESTED for reason in reasons)
    verdict = (ApplicationVerdict.NOT_SUPPORTED if failed
               else ApplicationVerdict.UNTESTED if untested
               else ApplicationVerdict.SUPPORTED)
    return ApplicationAssessment(
        application.id, verdict, row.max_loss_db,
        max((loss.worst_loss_db for loss in losses.values()), default=None),
        row.max_length_m, tuple(reasons), row.min_loss_db,
        min((loss.least_loss_db for loss in losses.values()), default=None), losses)


def assess_link_applications(
    link: Link,
    loss_ranges: Mapping[str, Mapping[int, LossRange]],
    table: ApplicationTable,
) -> LinkApplications:
    """Listed applications of one link, and the ids of all it would support as measured.

    ``loss_ranges`` is :func:`reportgen.engine.power.judged_loss_ranges` of the judged results.
    Raises KeyError for a listed id the table lacks (see :func:`validate_application_ids`).

    Only the listed applications are assessed in full (with their reasons). ``capable``
    comes from plain comparisons with the table's limits prepared once per fiber type
    (:class:`_FiberPlan`); they give ``supported`` exactly when :func:`assess_application`
    finds no reason. ``every`` holds the full assessment of each table entry, each worked
    out when first read.
    """
    plan = _table_plan(table)
    measured = loss_ranges.get(link.link_id) or {}
    listed = tuple(assess_application(link, table.entries[plan.index[application_id]], measured)
                   for application_id in link.applications)
    capable = plan.for_fiber(link.fiber_type).capable(link.length_m, measured)
    every = EntryAssessments(link, table, measured,
                             {plan.index[a.id]: a for a in listed})
    return LinkApplications(link.link_id, listed, capable, every)


@dataclass(frozen=True)
class _EntryCheck:
    """The comparisons of one table entry on one fiber type, limits widened by the tolerance."""

    id: str
    wavelengths_nm: tuple[int, ...]
    length_limit_m: float  # max_length_m + TOLERANCE_DB
    loss_limit_db: float  # max_loss_db + TOLERANCE_DB
    least_limit_db: float | None  # min_loss_db − TOLERANCE_DB; None without a minimum

    def verdict(self, length_m: float, measured: Mapping[int, LossRange]) -> ApplicationVerdict:
        """The verdict of :func:`assess_application`, without building its reasons."""
        failed = length_m > self.length_limit_m
        untested = False
        for wl in self.wavelengths_nm:
            loss = measured.get(wl)
            if loss is None:
                untested = True
            elif loss.worst_loss_db > self.loss_limit_db or (
                    self.least_limit_db is not None and loss.least_loss_db < self.least_limit_db):
                failed = True
        return (ApplicationVerdict.NOT_SUPPORTED if failed
                else ApplicationVerdict.UNTESTED if untested
                else ApplicationVerdict.SUPPORTED)


@dataclass(frozen=True)
class _FiberPlan:
    """The table entries that specify one fiber type, in table order."""

    checks: tuple[_EntryCheck, ...]

    def capable(self, length_m: float, measured: Mapping[int, LossRange]) -> tuple[str, ...]:
        """Ids of the entries with no reason against them (see :func:`assess_application`).

        Every comparison is the negation of the one that gives a reason there, so the
        verdicts agree also for values that compare false both ways.
        """
        if not measured:
            return ()
        losses = {wl: (loss.worst_loss_db, loss.least_loss_db) for wl, loss in measured.items()}
        capable = []
        for check in self.checks:
            if length_m > check.length_limit_m:
                continue
            for wl in check.wavelengths_nm:
                loss = losses.get(wl)
                if (loss is None or loss[0] > check.loss_limit_db
                        or (check.least_limit_db is not None and loss[1] < check.least_limit_db)):
                    break
            else:
                capable.append(check.id)
        return tuple(capable)


class _TablePlan:
    """Position of every id and the :class:`_FiberPlan` of every fiber type of one table."""

    def __init__(self, table: ApplicationTable) -> None:
        self.table = table
        self.index: dict[str, int] = {}
        for position, entry in enumerate(table.entries):
            self.index.setdefault(entry.id, position)
        self._fibers: dict[FiberType, _FiberPlan] = {}
        self._by_position: dict[FiberType, tuple[_EntryCheck | None, ...]] = {}

    def by_position(self, fiber_type: FiberType) -> tuple[_EntryCheck | None, ...]:
        """The check of every table entry on ``fiber_type``; None where it is not specified."""
        found = self._by_position.get(fiber_type)
        if found is None:
            checks = {check.id: check for check in self.for_fiber(fiber_type).checks}
            found = self._by_position[fiber_type] = tuple(
                checks.get(entry.id) for entry in self.table.entries)
        return found

    def for_fiber(self, fiber_type: FiberType) -> _FiberPlan:
        plan = self._fibers.get(fiber_type)
        if plan is None:
            checks = []
            for entry in self.table.entries:
                row = entry.limits_for(fiber_type)
                if row is not None:
                    checks.append(_EntryCheck(
                        entry.id, entry.test_wavelengths_nm,
                        row.max_length_m + TOLERANCE_DB, row.max_loss_db + TOLERANCE_DB,
                        None if row.min_loss_db is None else row.min_loss_db - TOLERANCE_DB))
            plan = self._fibers[fiber_type] = _FiberPlan(tuple(checks))
        return plan


_LAST_PLAN: list[_TablePlan] = []


def _table_plan(table: ApplicationTable) -> _TablePlan:
    """The plan of ``table``, kept for the table used last (tables are immutable)."""
    if not _LAST_PLAN or _LAST_PLAN[0].table is not table:
        _LAST_PLAN[:] = [_TablePlan(table)]
    return _LAST_PLAN[0]


class EntryAssessments(Sequence[ApplicationAssessment]):
    """:func:`assess_application` of one link for every table entry, in table order.

    Behaves as a tuple of :class:`ApplicationAssessment` (indexing, iteration, ``len``,
    equality with tuples); each element is worked out when first read and then kept.
    """

    __slots__ = ("_link", "_table", "_entries", "_measured", "_done")

    def __init__(self, link: Link, table: ApplicationTable, measured: Mapping[int, LossRange],
                 known: Mapping[int, ApplicationAssessment] | None = None) -> None:
        self._link = link
        self._table = table
        self._entries = table.entries
        self._measured = measured
        self._done: list[ApplicationAssessment | None] = [None] * len(table.entries)
        if known:
            for position, assessment in known.items():
                self._done[position] = assessment

    def __len__(self) -> int:
        return len(self._entries)

    def verdict(self, index: int) -> ApplicationVerdict:
        """``self[index].verdict``, without building the assessment when not yet read."""
        position = range(len(self._entries))[index]
        done = self._done[position]
        if done is not None:
            return done.verdict
        check = _table_plan(self._table).by_position(self._link.fiber_type)[position]
        if check is None:
            return ApplicationVerdict.NOT_SUPPORTED
        return check.verdict(self._link.length_m, self._measured)

    def __getitem__(self, index):  # type: ignore[override]
        if isinstance(index, slice):
            return tuple(self)[index]
        position = range(len(self._entries))[index]  # IndexError as a tuple's
        done = self._done[position]
        if done is None:
            done = self._done[position] = assess_application(
                self._link, self._entries[position], self._measured)
        return done

    def __iter__(self):
        return (self[position] for position in range(len(self._entries)))

    def __eq__(self, other: object) -> bool:
        if isinstance(other, (EntryAssessments, tuple)):
            return tuple(self) == tuple(other)
        return NotImplemented

    def __hash__(self) -> int:
        return hash(tuple(self))

    def __repr__(self) -> str:
        return repr(tuple(self))

    def __reduce__(self):
        return tuple, (tuple(self),)


# ------------------------------------------------------------------ project


@dataclass(frozen=True)
class ProjectApplications:
    """Applications and power budgets of every link, in links.csv order."""

    links: tuple[LinkApplications, ...]
    power: Mapping[str, PowerBudget | None]  # link_id -> budget (None: no transceiver)
    table: ApplicationTable

    def for_link(self, link_id: str) -> LinkApplications:
        index = self.__dict__.get("_by_link_id")
        if index is None:  # built on first use: summary.json asks once per link
            index = {}
            for link in self.links:
                index.setdefault(link.link_id, link)  # the first of a repeated id, as before
            object.__setattr__(self, "_by_link_id", index)
        return index[link_id]

    def link_json(self, link_id: str) -> dict[str, Any]:
        """``applications``, ``capable`` and ``power`` of one link for summary.json."""
        power = self.power.get(link_id)
        return {**self.for_link(link_id).to_json(),
                "power": None if power is None else power.to_json()}

    def matrix(self, application_ids: Sequence[str] | None = None) -> dict[str, Any]:
        """Links × applications as plain data (see :func:`application_matrix`)."""
        return application_matrix(self, application_ids)


def assess_project(project: Project, judgement: Judgement) -> ProjectApplications:
    """Applications and transceiver power budgets of every link of a judged project.

    ``judgement`` is :class:`reportgen.engine.judge.Judgement` (its ``results`` and ``budgets``).
    Gives the same as :func:`assess_link_applications` on every link; ``capable`` is
    worked out for all links at once (:func:`capable_by_link`).
    """
    table = project.applications
    plan = _table_plan(table)
    losses = judged_loss_table(judgement.results)
    ranges = loss_ranges_from_table(losses)
    links = project.links
    capable = capable_by_link(links, losses, table)
    assessed = []
    for link, link_capable in zip(links, capable):
        measured = ranges.get(link.link_id) or {}
        if link.applications:
            listed = tuple(assess_application(link, table.entries[plan.index[application_id]],
                                              measured)
                           for application_id in link.applications)
            every = EntryAssessments(link, table, measured,
                                     {plan.index[a.id]: a for a in listed})
        else:
            listed = ()
            every = EntryAssessments(link, table, measured)
        assessed.append(LinkApplications(link.link_id, listed, link_capable, every))
    power: dict[str, PowerBudget | None] = dict.fromkeys(link.link_id for link in links)
    fitted = [link for link in links if link.transceiver]
    if fitted:
        limits = budget_limits_db(judgement.budgets)
        attenuators_db = project.testing.attenuators_db
        for link in fitted:
            power[link.link_id] = assess_power(
                link, project.transceivers[link.transceiver], ranges, limits, attenuators_db)
    return ProjectApplications(tuple(assessed), power, table)


def capable_by_link(
    links: Sequence[Link], losses: pd.DataFrame, table: ApplicationTable
) -> list[tuple[str, ...]]:
    """``capable`` of every link (see :func:`assess_link_applications`), in links order.

    Array comparisons of a links × wavelengths table of worst and least judged loss with
    each entry's limits for the links' fiber type; an entry is capable when its length,
    maximum loss and minimum loss comparisons give no reason and every needed wavelength
    has a judged result. Links with the same outcome share one tuple.

    Parameters
    ----------
    links : sequence of Link
        Fiber type and documented length ``length_m``. [m]
    losses : pandas.DataFrame
        :func:`reportgen.engine.power.judged_loss_table` of the judged results.
    table : ApplicationTable
        The application table (``Project.applications``).

    References
    ----------
    .. [1] IEEE 802.3, INCITS FC-PI, ITU-T G.984.2 / G.987.2 / G.9807.1: maximum channel
       insertion loss and reach; PON classes also a minimum loss.
    """
    plan = _table_plan(table)
    link_ids = pd.Index([link.link_id for link in links])
    if not link_ids.is_unique:  # not after validation; keep the per-link meaning anyway
        ranges = loss_ranges_from_table(losses)
        return [plan.for_fiber(link.fiber_type).capable(link.length_m,
                                                        ranges.get(link.link_id) or {})
                for link in links]
    rows = link_ids.get_indexer(losses["link_id"].astype(object))
    known = rows >= 0
    rows = rows[known]
    wavelengths_nm = sorted({int(wl) for wl in losses["wavelength_nm"].tolist()})
    column = {wl: at for at, wl in enumerate(wavelengths_nm)}
    columns = np.searchsorted(wavelengths_nm, losses["wavelength_nm"].to_numpy()[known])
    shape = (len(links), len(wavelengths_nm))
    present = np.zeros(shape, dtype=bool)
    worst_db = np.zeros(shape)
    least_db = np.zeros(shape)
    present[rows, columns] = True
    worst_db[rows, columns] = losses["worst_loss_db"].to_numpy(dtype=float)[known]
    least_db[rows, columns] = losses["least_loss_db"].to_numpy(dtype=float)[known]
    length_m = np.array([link.length_m for link in links], dtype=float)

    capable: list[tuple[str, ...]] = [()] * len(links)
    by_fiber: dict[FiberType, list[int]] = {}
    for at, link in enumerate(links):
        by_fiber.setdefault(link.fiber_type, []).append(at)
    for fiber_type, members in by_fiber.items():
        checks = plan.for_fiber(fiber_type).checks
        if not checks or not wavelengths_nm:
            continue
        at = np.array(members)
        ok = np.empty((len(at), len(checks)), dtype=bool)
        for index, check in enumerate(checks):
            # The negation of each comparison that gives a reason in assess_application.
            fits = ~(length_m[at] > check.length_limit_m)
            for wl in check.wavelengths_nm:
                if wl not in column:
                    fits[:] = False
                    break
                col = column[wl]
                fits &= present[at, col] & ~(worst_db[at, col] > check.loss_limit_db)
                if check.least_limit_db is not None:
                    fits &= ~(least_db[at, col] < check.least_limit_db)
            ok[:, index] = fits
        # One tuple per distinct outcome: each row of `ok` as the bits of a Python int.
        codes = [int.from_bytes(row, "little") for row in np.packbits(ok, axis=1,
                                                                      bitorder="little")]
        outcomes: dict[int, tuple[str, ...]] = {}
        for link_at, code, fits in zip(members, codes, ok):
            found = outcomes.get(code)
            if found is None:
                found = outcomes[code] = tuple(
                    check.id for check, fit in zip(checks, fits.tolist()) if fit)
            capable[link_at] = found
    return capable


def application_matrix(
    assessed: ProjectApplications, application_ids: Sequence[str] | None = None
) -> dict[str, Any]:
    """Links × applications as plain data for the report.

    Columns are ``application_ids`` when given, else every application that some link
    lists or would support, in table order. Returns::

        {"applications": [id, ...],
         "links": [{"link_id": ..., "cells": [{"id", "verdict", "listed"}, ...]}, ...]}

    ``verdict`` is ``supported``, ``not-supported`` or ``untested`` for every cell;
    ``listed`` is true where links.csv names the application for that link.
    """
    if application_ids is None:
        wanted = {a.id for link in assessed.links for a in link.assessments}
        wanted |= {application_id for link in assessed.links for application_id in link.capable}
        application_ids = [i for i in assessed.table.ids if i in wanted]
    position = {}
    for index, application_id in enumerate(assessed.table.ids):
        position.setdefault(application_id, index)
    columns = [(application_id, position[application_id]) for application_id in application_ids]
    rows = []
    for link in assessed.links:
        listed = {a.id for a in link.assessments}
        rows.append({"link_id": link.link_id, "cells": [
            {"id": i, "verdict": _verdict(link.every, at).value, "listed": i in listed}
            for i, at in columns]})
    return {"applications": list(application_ids), "links": rows}


def _verdict(every: Sequence[ApplicationAssessment], position: int) -> ApplicationVerdict:
    if isinstance(every, EntryAssessments):
        return every.verdict(position)
    return every[position].verdict
