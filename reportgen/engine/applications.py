"""Applications a link supports: Ethernet PMDs, Fibre Channel rates, PON loss classes.

The table ships as data (``reportgen/data/applications.yaml``), every value with its
source and status. A link is checked against an application on its fiber type [1]_:

- the fiber type must have a row in the entry (else *not specified*);
- the documented length (``Link.length_m``) must not exceed the row's maximum, where
  the row sets one (a PON class whose standard sets no reach has none);
- at every test wavelength the entry needs, the worst judged loss over strands and
  directions, plus the end allowance, must not exceed the maximum channel loss;
- where the row has a minimum loss (PON classes), the least judged loss over strands
  and directions, as measured, must not fall below it;
- a needed wavelength without any judged result leaves the application *untested*.

The end allowance (:func:`reportgen.engine.budget.end_allowance_db`) is the limit set's
connection allowance for each end connection the reference method left out of the
measured loss (two-cord one, three-cord two) [2]_: a channel in service has both. It is
added on the maximum side only, so both sides of a check are conservative.

A result at a wavelength the limit set has no attenuation for (a PON wavelength such as
1490 nm) is not judged against the cabling limit but counts here like a judged one
(``counted`` in ``Judgement.results``).

An assessment is *within uncertainty* when a compared loss lies within ``uncertainty_db``
of the limit it was compared with (either side), as for cabling results.

Verdicts: ``not-supported`` when any check fails (every reason is listed, untested
wavelengths included), else ``untested`` when a needed wavelength has no judged result,
else ``supported``.

One computation decides: :func:`check_applications` makes every comparison for every
link × table entry (× needed wavelength) at once, as arrays. A link's listed
applications with their reasons, its ``capable`` list and the links × applications
matrix are all read from its :class:`ApplicationChecks`. Reasons are kinds and numbers;
their words are the report's (``reportgen.report.messages_apps.reason_text``).

References
----------
.. [1] IEEE 802.3 (Ethernet PMD channel insertion loss and reach), INCITS FC-PI
   (Fibre Channel), ITU-T G.984.2 / G.987.2 / G.9807.1 (PON optical path loss
   classes); values and their status in the data file.
.. [2] IEC 61280-4-1 / IEC 61280-4-2: end connections inside the measured loss per
   reference method (reference-values §3).
"""
from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Final

import numpy as np
import pandas as pd

from reportgen.engine.budget import end_allowance_db
from reportgen.engine.power import (
    LossRange,
    PowerBudget,
    PowerVerdict,
    assess_power,
    budget_limits_db,
    judged_loss_table,
    loss_ranges_from_table,
)
from reportgen.model import (
    ApplicationTable,
    ApplicationVerdict,
    FiberType,
    Link,
    Project,
    ReasonKind,
)
from reportgen.units import TOLERANCE_DB, round_db, round_length_m

if TYPE_CHECKING:
    from reportgen.engine.judge import Judgement


@dataclass(frozen=True)
class Reason:
    """Why an application is not supported (or untested) on a link: a kind and its numbers."""

    kind: ReasonKind
    application: str
    fiber_type: str
    wavelength_nm: int | None = None
    value: float | None = None  # measured loss [dB] or documented length [m]
    limit: float | None = None  # the limit it was compared with, same unit
    added_db: float = 0.0  # end allowance added to the measured loss (too-much-loss only)

    @property
    def checked(self) -> float | None:
        """The loss compared with the limit: measured + end allowance (too-much-loss). [dB]"""
        return None if self.value is None else self.value + self.added_db


# Words for a reason, supplied by the report (reportgen.report.messages_apps.reason_text).
ReasonText = Callable[[Reason], str]


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
    end_allowance_db: float = 0.0  # added to worst_loss_db before the maximum check
    within_uncertainty: bool = False  # a compared loss within uncertainty_db of its limit

    @property
    def checked_loss_db(self) -> float | None:
        """The loss compared with ``max_loss_db``: worst loss + end allowance. [dB]"""
        return None if self.worst_loss_db is None else self.worst_loss_db + self.end_allowance_db

    def to_json(self, reason_text: ReasonText) -> dict[str, Any]:
        """One element of a link's ``applications`` list in summary.json."""
        return {
            "id": self.id,
            "verdict": self.verdict.value,
            "max_loss_db": round_db(self.max_loss_db),
            "worst_loss_db": round_db(self.worst_loss_db),
            "max_length_m": round_length_m(self.max_length_m),
            "reasons": [reason_text(reason) for reason in self.reasons],
            "end_allowance_db": round_db(self.end_allowance_db),
            "within_uncertainty": self.within_uncertainty,
        }


@dataclass(frozen=True)
class LinkApplications:
    """The applications listed for one link, and every one it would support."""

    link_id: str
    assessments: tuple[ApplicationAssessment, ...]  # listed in links.csv, in that order
    capable: tuple[str, ...]  # ids of every table entry supported as measured, table order

    def to_json(self, reason_text: ReasonText) -> dict[str, Any]:
        return {"applications": [a.to_json(reason_text) for a in self.assessments],
                "capable": list(self.capable)}


# Verdict codes of ApplicationChecks.verdict_codes: the position in this tuple.
VERDICTS: Final[tuple[ApplicationVerdict, ...]] = (
    ApplicationVerdict.SUPPORTED, ApplicationVerdict.UNTESTED, ApplicationVerdict.NOT_SUPPORTED)
_SUPPORTED, _UNTESTED, _NOT_SUPPORTED = range(3)


@dataclass(frozen=True, eq=False)
class ApplicationChecks:
    """Every comparison of every link (L) with every table entry (E), as arrays.

    Wavelength axes (W) are :attr:`wavelengths_nm`, the test wavelengths some entry
    needs. Limits are NaN where an entry does not specify the link's fiber type (and
    ``min_loss_db`` also where the entry has no minimum); losses are NaN where the link
    has no judged result at that wavelength.
    """

    table: ApplicationTable
    links: tuple[Link, ...]
    wavelengths_nm: tuple[int, ...]
    measured: np.ndarray  # (L, W) bool: a judged result at that wavelength
    worst_loss_db: np.ndarray  # (L, W) highest judged loss over strands and directions
    least_loss_db: np.ndarray  # (L, W) lowest judged loss
    max_length_m: np.ndarray  # (L, E)
    max_loss_db: np.ndarray  # (L, E)
    min_loss_db: np.ndarray  # (L, E)
    specified: np.ndarray  # (L, E) bool: the entry has a row for the link's fiber type
    too_long: np.ndarray  # (L, E) bool
    too_much_loss: np.ndarray  # (L, E, W) bool
    too_little_loss: np.ndarray  # (L, E, W) bool
    untested: np.ndarray  # (L, E, W) bool: needed, no judged result
    verdict_codes: np.ndarray  # (L, E) index into VERDICTS
    within_uncertainty: np.ndarray  # (L, E) bool: a compared loss within uncertainty_db
    end_allowance_db: float = 0.0  # added to the worst loss on the maximum side

    def verdict(self, link_at: int, entry_at: int) -> ApplicationVerdict:
        return VERDICTS[int(self.verdict_codes[link_at, entry_at])]

    def capable(self) -> list[tuple[str, ...]]:
        """Ids of the supported entries of every link, table order; equal lists share a tuple."""
        ids = self.table.ids
        supported = self.verdict_codes == _SUPPORTED
        packed = np.packbits(supported, axis=1, bitorder="little")
        outcomes: dict[bytes, tuple[str, ...]] = {}
        capable = []
        for key, row in zip((bytes(row) for row in packed), supported):
            found = outcomes.get(key)
            if found is None:
                found = outcomes[key] = tuple(i for i, fits in zip(ids, row.tolist()) if fits)
            capable.append(found)
        return capable

    def assessment(self, link_at: int, entry_at: int) -> ApplicationAssessment:
        """The verdict of one link and entry with the limits, losses and every reason."""
        link, entry = self.links[link_at], self.table.entries[entry_at]
        fiber = link.fiber_type.value
        verdict = self.verdict(link_at, entry_at)
        if not self.specified[link_at, entry_at]:
            return ApplicationAssessment(entry.id, verdict, None, None, None,
                                         (Reason(ReasonKind.FIBER_TYPE, entry.id, fiber),))
        max_length_m = _float(self.max_length_m[link_at, entry_at])
        max_loss_db = float(self.max_loss_db[link_at, entry_at])
        min_loss_db = _float(self.min_loss_db[link_at, entry_at])
        reasons: list[Reason] = []
        if self.too_long[link_at, entry_at]:
            reasons.append(Reason(ReasonKind.TOO_LONG, entry.id, fiber, None,
                                  link.length_m, max_length_m))
        column = {wl: at for at, wl in enumerate(self.wavelengths_nm)}
        needed = [(wl, column[wl]) for wl in dict.fromkeys(entry.test_wavelengths_nm)]
        worst, least, untested = [], [], []
        for wl, at in needed:
            if not self.measured[link_at, at]:
                untested.append(Reason(ReasonKind.UNTESTED, entry.id, fiber, wl))
                continue
            worst_db = float(self.worst_loss_db[link_at, at])
            least_db = float(self.least_loss_db[link_at, at])
            worst.append(worst_db)
            least.append(least_db)
            if self.too_much_loss[link_at, entry_at, at]:
                reasons.append(Reason(ReasonKind.TOO_MUCH_LOSS, entry.id, fiber, wl,
                                      worst_db, max_loss_db, self.end_allowance_db))
            if self.too_little_loss[link_at, entry_at, at]:
                reasons.append(Reason(ReasonKind.TOO_LITTLE_LOSS, entry.id, fiber, wl,
                                      least_db, min_loss_db))
        return ApplicationAssessment(
            entry.id, verdict, max_loss_db, max(worst, default=None), max_length_m,
            tuple(reasons + untested), min_loss_db, min(least, default=None),
            self.end_allowance_db, bool(self.within_uncertainty[link_at, entry_at]))


def _float(value: float) -> float | None:
    return None if np.isnan(value) else float(value)


def check_applications(
    links: Sequence[Link],
    losses: pd.DataFrame,
    table: ApplicationTable,
    end_allowance_db: float = 0.0,
    uncertainty_db: float = 0.0,
) -> ApplicationChecks:
    """Check every link against every entry of the application table, all at once.

    The one place that decides ``supported`` / ``not-supported`` / ``untested`` and why.

    Parameters
    ----------
    links : sequence of Link
        Fiber type and documented length ``length_m``. [m]
    losses : pandas.DataFrame
        :func:`reportgen.engine.power.judged_loss_table` of the judged results: worst and
        least judged loss [dB] per link and wavelength.
    table : ApplicationTable
        The application table (``Project.applications``).
    end_allowance_db : float
        :func:`reportgen.engine.budget.end_allowance_db`: added to the worst loss before
        the maximum channel loss check [2]_. [dB]
    uncertainty_db : float
        ``testing.uncertainty_db``: a compared loss this close to its limit marks the
        assessment within uncertainty. [dB]

    Returns
    -------
    ApplicationChecks
        The comparisons and verdicts of every link × entry.

    References
    ----------
    .. [1] IEEE 802.3, INCITS FC-PI, ITU-T G.984.2 / G.987.2 / G.9807.1: maximum channel
       insertion loss and reach; PON classes also a minimum loss.
    """
    links = tuple(links)
    entries = table.entries
    wavelengths_nm = tuple(sorted({wl for entry in entries for wl in entry.test_wavelengths_nm}))

    # Judged losses as links × wavelengths (a repeated link id reads the same losses).
    link_codes, link_ids = pd.factorize(pd.Index([link.link_id for link in links], dtype=object))
    rows = pd.Index(link_ids).get_indexer(losses["link_id"].astype(object))
    columns = pd.Index(wavelengths_nm, dtype="int64").get_indexer(
        losses["wavelength_nm"].astype("int64"))
    known = (rows >= 0) & (columns >= 0)
    at = rows[known], columns[known]
    by_id = (len(link_ids), len(wavelengths_nm))
    measured = np.zeros(by_id, dtype=bool)
    worst_db = np.full(by_id, np.nan)
    least_db = np.full(by_id, np.nan)
    measured[at] = True
    worst_db[at] = losses["worst_loss_db"].to_numpy(dtype=float)[known]
    least_db[at] = losses["least_loss_db"].to_numpy(dtype=float)[known]
    measured, worst_db, least_db = measured[link_codes], worst_db[link_codes], least_db[link_codes]

    # The table's limits per fiber type × entry, then per link × entry.
    fibers = list(FiberType)
    limits = np.full((len(fibers), len(entries), 3), np.nan)  # max length, max loss, min loss
    for f, fiber_type in enumerate(fibers):
        for e, entry in enumerate(entries):
            row = entry.limits_for(fiber_type)
            if row is not None:
                limits[f, e] = (np.nan if row.max_length_m is None else row.max_length_m,
                                row.max_loss_db,
                                np.nan if row.min_loss_db is None else row.min_loss_db)
    needs = np.zeros((len(entries), len(wavelengths_nm)), dtype=bool)
    for e, entry in enumerate(entries):
        needs[e, [wavelengths_nm.index(wl) for wl in entry.test_wavelengths_nm]] = True
    by_link = limits[np.array([fibers.index(link.fiber_type) for link in links], dtype=np.intp)]
    max_length_m, max_loss_db, min_loss_db = by_link[..., 0], by_link[..., 1], by_link[..., 2]
    length_m = np.array([link.length_m for link in links], dtype=float)

    # The checks [1]; comparisons with NaN are false.
    specified = ~np.isnan(max_loss_db)
    too_long = length_m[:, None] > max_length_m + TOLERANCE_DB
    needed = specified[:, :, None] & needs[None, :, :]
    judged = needed & measured[:, None, :]
    untested = needed & ~measured[:, None, :]
    checked_db = worst_db + end_allowance_db  # [2]: the maximum side only
    too_much_loss = judged & (checked_db[:, None, :] > (max_loss_db + TOLERANCE_DB)[:, :, None])
    too_little_loss = judged & (least_db[:, None, :] < (min_loss_db - TOLERANCE_DB)[:, :, None])
    near = uncertainty_db + TOLERANCE_DB
    with np.errstate(invalid="ignore"):
        within = judged & (
            (np.abs(checked_db[:, None, :] - max_loss_db[:, :, None]) <= near)
            | (np.abs(least_db[:, None, :] - min_loss_db[:, :, None]) <= near))
    failed = ~specified | too_long | (too_much_loss | too_little_loss).any(axis=2)
    verdict_codes = np.where(failed, _NOT_SUPPORTED,
                             np.where(untested.any(axis=2), _UNTESTED, _SUPPORTED)).astype(np.int8)
    return ApplicationChecks(
        table=table, links=links, wavelengths_nm=wavelengths_nm, measured=measured,
        worst_loss_db=worst_db, least_loss_db=least_db, max_length_m=max_length_m,
        max_loss_db=max_loss_db, min_loss_db=min_loss_db, specified=specified,
        too_long=too_long, too_much_loss=too_much_loss, too_little_loss=too_little_loss,
        untested=untested, verdict_codes=verdict_codes, within_uncertainty=within.any(axis=2),
        end_allowance_db=float(end_allowance_db))


def _first_positions(table: ApplicationTable) -> dict[str, int]:
    position: dict[str, int] = {}
    for at, application_id in enumerate(table.ids):
        position.setdefault(application_id, at)
    return position


def link_applications(checks: ApplicationChecks) -> tuple[LinkApplications, ...]:
    """Listed applications (with reasons) and ``capable`` of every link, read from ``checks``.

    Raises KeyError for a listed id the table lacks (see
    :func:`reportgen.inputs.apptable.validate_application_ids`).
    """
    position = _first_positions(checks.table)
    return tuple(
        LinkApplications(link.link_id, tuple(checks.assessment(link_at, position[i])
                                             for i in link.applications), capable)
        for link_at, (link, capable) in enumerate(zip(checks.links, checks.capable())))


def assess_link_applications(
    link: Link,
    measured: Mapping[int, LossRange],
    table: ApplicationTable,
    end_allowance_db: float = 0.0,
    uncertainty_db: float = 0.0,
) -> LinkApplications:
    """:func:`check_applications` of one link, given its judged losses by wavelength."""
    rows = sorted(measured.items())
    losses = pd.DataFrame({"link_id": [link.link_id] * len(rows),
                           "wavelength_nm": [wl for wl, _ in rows],
                           "worst_loss_db": [r.worst_loss_db for _, r in rows],
                           "least_loss_db": [r.least_loss_db for _, r in rows]})
    [found] = link_applications(check_applications([link], losses, table, end_allowance_db,
                                                   uncertainty_db))
    return found


# ------------------------------------------------------------------ project


@dataclass(frozen=True)
class ProjectApplications:
    """Applications and power budgets of every link, in links.csv order."""

    links: tuple[LinkApplications, ...]
    power: Mapping[str, PowerBudget | None]  # link_id -> budget (None: no transceiver)
    table: ApplicationTable
    checks: ApplicationChecks

    def for_link(self, link_id: str) -> LinkApplications:
        index = self.__dict__.get("_by_link_id")
        if index is None:  # built on first use: summary.json asks once per link
            index = {}
            for link in self.links:
                index.setdefault(link.link_id, link)  # the first of a repeated id, as before
            object.__setattr__(self, "_by_link_id", index)
        return index[link_id]

    def transceiver_differences(self, link_id: str) -> tuple[tuple[str, float, float], ...]:
        """Listed applications whose verdict disagrees with the link's transceiver window.

        ``(application id, max channel loss, window)`` [dB] for each listed application
        checked at the wavelength the power budget used whose maximum channel loss is not the
        optic's window (lowest launch power − receive minimum) and whose verdict says the
        opposite of the power verdict on the weak side: supported while the optic is too weak,
        or not supported for loss while the optic receives enough. The transceiver window
        decides whether the optic works (its power verdict).
        """
        power = self.power.get(link_id)
        if power is None:
            return ()
        found = []
        for assessment in self.for_link(link_id).assessments:
            if assessment.max_loss_db is None:
                continue
            if power.wavelength_nm not in self.table.get(assessment.id).test_wavelengths_nm:
                continue
            if abs(assessment.max_loss_db - power.window_db) <= TOLERANCE_DB:
                continue
            too_weak = power.verdict is PowerVerdict.TOO_WEAK
            supported = assessment.verdict is ApplicationVerdict.SUPPORTED
            over_loss = any(r.kind is ReasonKind.TOO_MUCH_LOSS for r in assessment.reasons)
            if (supported and too_weak) or (over_loss and not too_weak):
                found.append((assessment.id, assessment.max_loss_db, power.window_db))
        return tuple(found)

    def link_json(self, link_id: str, reason_text: ReasonText) -> dict[str, Any]:
        """``applications``, ``capable`` and ``power`` of one link for summary.json."""
        power = self.power.get(link_id)
        return {**self.for_link(link_id).to_json(reason_text),
                "power": None if power is None else power.to_json()}

    def matrix(self, application_ids: Sequence[str] | None = None) -> dict[str, Any]:
        """Links × applications as plain data (see :func:`application_matrix`)."""
        return application_matrix(self, application_ids)


def assess_project(project: Project, judgement: Judgement) -> ProjectApplications:
    """Applications and transceiver power budgets of every link of a judged project.

    ``judgement`` is :class:`reportgen.engine.judge.Judgement` (its ``results`` and ``budgets``).
    """
    losses = judged_loss_table(judgement.results)
    allowance_db = end_allowance_db(project.testing.reference_method, project.limits)
    checks = check_applications(project.links, losses, project.applications, allowance_db,
                                project.testing.uncertainty_db)
    links = project.links
    power: dict[str, PowerBudget | None] = dict.fromkeys(link.link_id for link in links)
    fitted = [link for link in links if link.transceiver]
    if fitted:
        ranges = loss_ranges_from_table(losses)
        limits = budget_limits_db(judgement.budgets)
        attenuators_db = project.testing.attenuators_db
        for link in fitted:
            power[link.link_id] = assess_power(
                link, project.transceivers[link.transceiver], ranges, limits, attenuators_db,
                allowance_db)
    return ProjectApplications(link_applications(checks), power, project.applications, checks)


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
    position = _first_positions(assessed.table)
    at = np.array([position[i] for i in application_ids], dtype=np.intp)
    words = np.array([verdict.value for verdict in VERDICTS], dtype=object)
    verdicts = words[assessed.checks.verdict_codes[:, at]].tolist() if len(at) else \
        [[] for _ in assessed.links]
    rows = []
    for link, link_verdicts in zip(assessed.links, verdicts):
        listed = {a.id for a in link.assessments}
        rows.append({"link_id": link.link_id, "cells": [
            {"id": i, "verdict": verdict, "listed": i in listed}
            for i, verdict in zip(application_ids, link_verdicts)]})
    return {"applications": list(application_ids), "links": rows}
