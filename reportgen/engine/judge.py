"""Judging: margins, result verdicts, retests, missing results, link verdicts. Pure.

Rules (project folder format v1, "How a result is judged" [1]_):

- margin_db = limit_db − loss_db; a result passes when loss_db ≤ limit_db.
- |margin| ≤ uncertainty_db: flagged ``within-uncertainty`` (it still passes or fails).
- loss_db < −uncertainty_db: ``invalid`` (a bad reference); not judged, counts as missing.
- loss_db < 0: flagged ``negative-loss`` (a passive link cannot amplify light), whether or
  not it is invalid.
- A result at a wavelength the limit set has no attenuation for (accepted only where an
  application of the link needs it, e.g. 1490 nm for a PON class): ``not-judged``,
  flagged ``no-cabling-limit``, no limit or margin; it counts for the applications
  (``counted``) but not for the link verdict.
- Several rows for one link, strand, wavelength and direction: the latest ``tested_at``
  is judged, the others are ``superseded`` (ties: the row read last wins). When the
  latest row is invalid, that result is missing.
- A link fails if any judged result fails; else it is incomplete if a required result
  is missing or invalid; else it passes.

References
----------
.. [1] docs/project-format.md, "How a result is judged".
"""
from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import date
from functools import cached_property
from typing import Final

import numpy as np
import pandas as pd

from reportgen.engine.budget import BudgetTable, budget_frame
from reportgen.model import (
    Directions,
    FiberType,
    Instrument,
    Link,
    LinkVerdict,
    Project,
    ResultFlag,
    ResultVerdict,
    Testing,
)
from reportgen.units import TOLERANCE_DB

KEY: Final[list[str]] = ["link_id", "strand", "wavelength_nm", "direction"]
ANY_DIRECTION: Final = "any"


@dataclass(frozen=True)
class MissingResult:
    """A required result that has no judged measurement."""

    strand: int
    wavelength_nm: int
    direction: str  # "ab", "ba" or "any" (testing.directions: one)
    reason: str  # "not-tested" or "invalid" (the latest measurement was invalid)


@dataclass(frozen=True)
class LinkOutcome:
    link_id: str
    verdict: LinkVerdict
    worst_margin_db: float | None  # smallest margin among judged results; None if none
    missing: tuple[MissingResult, ...]
    judged: int  # judged results (latest valid measurement per key)
    failed: int  # judged results that fail
    within_uncertainty: int  # judged results flagged within-uncertainty


@dataclass(frozen=True)
class Judgement:
    """Everything the engine concluded about a project."""

    # project.results + limit_db, margin_db, verdict, flags (tuple of ResultFlag), judged
    results: pd.DataFrame
    budgets: pd.DataFrame  # budget.budget_frame(...): every link's budget, term by term
    links: tuple[LinkOutcome, ...]

    @cached_property
    def budget_table(self) -> BudgetTable:
        """Each link's term-by-term budgets, read from ``budgets`` when first asked for."""
        return BudgetTable(self.budgets)

    @property
    def totals(self) -> dict[str, int]:
        counts = {verdict.value: 0 for verdict in LinkVerdict}
        for outcome in self.links:
            counts[outcome.verdict.value] += 1
        return {"links": len(self.links), **counts}

    def outcome(self, link_id: str) -> LinkOutcome:
        for outcome in self.links:
            if outcome.link_id == link_id:
                return outcome
        raise KeyError(link_id)


def judge_project(project: Project) -> Judgement:
    """Judge every result of a validated project."""
    budgets = budget_frame(project.links, project.limits, project.testing.reference_method,
                           project.components)
    required = required_results(project.links, project.testing)
    results = judge_results(project.results, budgets, project.testing.uncertainty_db,
                            project.instruments, required)
    return Judgement(results, budgets, link_outcomes(project.links, results, required,
                                                     project.testing.directions))


def required_results(links: Sequence[Link], testing: Testing) -> pd.DataFrame:
    """Every result a complete test must contain: link × strand × wavelength × direction.

    With ``directions: one`` the direction column is ``"any"``. Rows in links order, then
    strand, wavelength (as listed in ``testing``) and direction.
    """
    directions = (["ab", "ba"] if testing.directions is Directions.BOTH else [ANY_DIRECTION])
    wavelengths: dict[FiberType, list[int]] = {}
    link_ids: list[str] = []
    strands: list[int] = []
    wavelengths_nm: list[int] = []
    directions_out: list[str] = []
    for link in links:
        per_strand = wavelengths.get(link.fiber_type)
        if per_strand is None:
            per_strand = wavelengths[link.fiber_type] = list(
                testing.wavelengths_nm[link.fiber_type.category])
        width = len(per_strand) * len(directions)
        link_ids += [link.link_id] * (link.strands * width)
        for strand in range(1, link.strands + 1):
            strands += [strand] * width
            for wavelength_nm in per_strand:
                wavelengths_nm += [wavelength_nm] * len(directions)
                directions_out += directions
    return pd.DataFrame({
        "link_id": pd.Series(link_ids, dtype="str"),
        "strand": pd.Series(strands, dtype="int64"),
        "wavelength_nm": pd.Series(wavelengths_nm, dtype="int64"),
        "direction": pd.Series(directions_out, dtype="str"),
    })


def judge_results(
    results: pd.DataFrame,
    budgets: pd.DataFrame,
    uncertainty_db: float,
    instruments: Sequence[Instrument] = (),
    required: pd.DataFrame | None = None,
) -> pd.DataFrame:
    """Add limit_db, margin_db, verdict, flags, judged and counted to every result row.

    Rows keep their input order (files by name, then line).
    """
    frame = results.reset_index(drop=True).copy()
    pairs = ["link_id", "wavelength_nm"]
    frame_pairs, budget_pairs, required_pairs = _key_codes(
        [frame, budgets, required if required is not None else frame.iloc[:0]], pairs)
    frame["limit_db"] = _lookup(frame_pairs, budget_pairs,
                                budgets["limit_db"].to_numpy(dtype=float))
    frame["margin_db"] = frame["limit_db"] - frame["loss_db"]
    invalid = frame["loss_db"] < -uncertainty_db - TOLERANCE_DB
    latest_array, group_size = _latest_of_groups(
        _key_codes([frame], KEY)[0], frame["tested_at"])
    latest = pd.Series(latest_array, index=frame.index)
    no_limit = frame["limit_db"].isna()
    passed = frame["loss_db"] <= frame["limit_db"] + TOLERANCE_DB
    verdict = np.select(
        [invalid, ~latest, no_limit, passed],
        [ResultVerdict.INVALID.value, ResultVerdict.SUPERSEDED.value,
         ResultVerdict.NOT_JUDGED.value, ResultVerdict.PASS.value],
        ResultVerdict.FAIL.value,
    )
    frame["verdict"] = pd.Series(verdict, index=frame.index, dtype=object)
    frame.loc[invalid, "margin_db"] = np.nan
    frame["judged"] = latest & ~invalid & ~no_limit
    frame["counted"] = latest & ~invalid  # the losses application checks use
    flags = {
        ResultFlag.WITHIN_UNCERTAINTY: ~invalid
        & (frame["margin_db"].abs() <= uncertainty_db + TOLERANCE_DB),
        ResultFlag.NEGATIVE_LOSS: frame["loss_db"] < 0,
        ResultFlag.RETEST: latest & (group_size > 1),
        ResultFlag.CALIBRATION_OVERDUE: _calibration_overdue(frame, instruments),
        ResultFlag.NOT_REQUIRED: pd.Series(
            False if required is None else ~np.isin(frame_pairs, required_pairs),
            index=frame.index) & ~no_limit,
        ResultFlag.NO_CABLING_LIMIT: no_limit,
    }
    frame["flags"] = _flag_tuples(frame.index, flags)
    return frame


def _key_codes(frames: Sequence[pd.DataFrame], key: Sequence[str]) -> list[np.ndarray]:
    """One integer per row for the values of the ``key`` columns, comparable across frames.

    Rows of any of ``frames`` get the same code exactly when their key values are equal
    (as for a merge on ``key``); -1 where a key value is missing. Works for empty frames
    whatever their column types.
    """
    sizes = [len(frame) for frame in frames]
    combined = np.zeros(sum(sizes), dtype=np.int64)
    missing = np.zeros(sum(sizes), dtype=bool)
    for column in key:
        parts = [frame[column] for frame in frames if len(frame)]
        if not parts:
            break
        codes, uniques = pd.factorize(pd.concat(parts, ignore_index=True))
        missing |= codes < 0
        combined = combined * max(len(uniques), 1) + np.maximum(codes, 0)
        if combined.size and combined.max() > 2**40:  # keep far from overflowing int64
            combined = pd.factorize(combined)[0].astype(np.int64)
    combined[missing] = -1
    return np.split(combined, np.cumsum(sizes)[:-1])


def _lookup(codes: np.ndarray, table_codes: np.ndarray, values: np.ndarray) -> np.ndarray:
    """``values`` of the ``table_codes`` row matching each of ``codes``; NaN where none.

    Like a left merge with ``validate="many_to_one"``: the table's keys must be unique.
    """
    index = pd.Index(table_codes)
    if not index.is_unique:
        raise pd.errors.MergeError(
            "Merge keys are not unique in right dataset; not a many-to-one merge")
    at = index.get_indexer(codes)
    found = np.full(len(codes), np.nan)
    found[at >= 0] = values[at[at >= 0]]
    return found


def _latest_of_groups(groups: np.ndarray, tested_at: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """Which row of each group is the latest, and the size of every row's group.

    Latest: the latest ``tested_at`` (a time before none), ties to the row read last.
    Rows without a group (code -1) are never latest and count as a group of 0.
    """
    count = len(groups)
    time_codes = pd.factorize(tested_at, sort=True)[0]  # -1: no time
    order = np.lexsort((np.arange(count), time_codes, time_codes >= 0, groups))
    in_order = groups[order]
    last = np.ones(count, dtype=bool)
    last[:-1] = in_order[:-1] != in_order[1:]
    latest = np.zeros(count, dtype=bool)
    latest[order[last]] = True
    has_group = groups >= 0
    latest &= has_group
    sizes = np.bincount(groups[has_group], minlength=1)
    return latest, np.where(has_group, sizes[np.maximum(groups, 0)], 0)


def _flag_tuples(index: pd.Index, flags: Mapping[ResultFlag, pd.Series]) -> pd.Series:
    """Each row's flags as a tuple of :class:`ResultFlag`, in the order of ``flags``.

    The masks are packed into one bit code per row; the tuple is built once per
    distinct code (a project has few), not per row.
    """
    order = tuple(flags)
    codes = np.zeros(len(index), dtype=np.int64)
    for bit, mask in enumerate(flags.values()):
        chosen = mask.fillna(False).astype(bool).to_numpy()
        codes |= chosen.astype(np.int64) << bit
    positions, distinct = pd.factorize(codes)
    tuples = np.empty(len(distinct), dtype=object)
    for at, code in enumerate(distinct.tolist()):
        tuples[at] = tuple(flag for bit, flag in enumerate(order) if code >> bit & 1)
    return pd.Series(tuples[positions], index=index, dtype=object)


def _calibration_overdue(frame: pd.DataFrame, instruments: Sequence[Instrument]) -> pd.Series:
    """True where an instrument named on the row was used after its calibration due date.

    A row is late when its test day is after the earliest due date among the instruments
    it names, worked out once per distinct ``instrument`` tuple (a project has few).
    """
    due = {i.id: pd.Timestamp(i.calibration_due) for i in instruments
           if i.calibration_due is not None}
    overdue = pd.Series(False, index=frame.index)
    if not due or frame.empty:
        return overdue
    codes, named = pd.factorize(frame["instrument"])
    earliest = []
    for ids in named:
        dates = [due[name] for name in ids if name in due]
        earliest.append(min(dates) if dates else pd.NaT)
    earliest_due = pd.Series(pd.to_datetime(pd.Series(earliest, dtype=object)).to_numpy()[codes],
                             index=frame.index)
    # Used on the due date itself is still in calibration; any later day is not.
    tested_day = frame["tested_at"].dt.normalize()
    return (tested_day > earliest_due).fillna(False).astype(bool)


def link_outcomes(
    links: Sequence[Link],
    judged_results: pd.DataFrame,
    required: pd.DataFrame,
    directions: Directions,
) -> tuple[LinkOutcome, ...]:
    """Link verdicts, worst margins and missing results, in links.csv order."""
    frame = judged_results
    judged_rows = frame["judged"].fillna(False).to_numpy(dtype=bool)
    invalid_rows = (frame["verdict"] == ResultVerdict.INVALID.value).to_numpy(dtype=bool)
    keys = frame[KEY]
    if directions is not Directions.BOTH:
        keys = keys.assign(direction=ANY_DIRECTION)
    frame_keys, required_keys = _key_codes([keys, required], KEY)
    lacking = ~np.isin(required_keys, frame_keys[judged_rows])
    missing = required.loc[lacking, KEY].assign(reason=np.where(
        np.isin(required_keys[lacking], frame_keys[invalid_rows]), "invalid", "not-tested"))
    missing_by_link: dict[str, list[MissingResult]] = {}
    for link_id, strand, wavelength_nm, direction, reason in missing.sort_values(KEY)[
            KEY + ["reason"]].itertuples(index=False, name=None):
        missing_by_link.setdefault(link_id, []).append(
            MissingResult(int(strand), int(wavelength_nm), str(direction), reason))
    position, worst, judged, failed, within = _link_stats(frame[judged_rows])
    fail, incomplete, passing = LinkVerdict.FAIL, LinkVerdict.INCOMPLETE, LinkVerdict.PASS
    outcomes = []
    for link in links:
        at = position.get(link.link_id)
        link_missing = tuple(missing_by_link.get(link.link_id, ()))
        link_failed = failed[at] if at is not None else 0
        outcomes.append(LinkOutcome(
            link_id=link.link_id,
            verdict=fail if link_failed else incomplete if link_missing else passing,
            worst_margin_db=worst[at] if at is not None else None,
            missing=link_missing,
            judged=judged[at] if at is not None else 0,
            failed=link_failed,
            within_uncertainty=within[at] if at is not None else 0,
        ))
    return tuple(outcomes)


def _link_stats(
    judged: pd.DataFrame,
) -> tuple[dict[str, int], list[float], list[int], list[int], list[int]]:
    """Per link_id of the judged rows: worst (smallest) margin, judged, failed, within-uncertainty.

    Returns the position of each link_id in the four lists that follow. The worst margin
    skips missing margins (NaN when a link has none).
    """
    links, link_ids = pd.factorize(judged["link_id"])
    known = links >= 0
    links = links[known]
    count = len(link_ids)
    margins = judged["margin_db"].to_numpy(dtype=float)[known]
    failed = (judged["verdict"] == ResultVerdict.FAIL.value).to_numpy(dtype=bool)[known]
    flag_codes, flag_tuples = pd.factorize(judged["flags"])  # few distinct tuples
    within_tuple = np.array([ResultFlag.WITHIN_UNCERTAINTY in flags
                             for flags in flag_tuples] + [False], dtype=bool)
    within = within_tuple[flag_codes][known]
    worst = np.full(count, np.nan)
    np.fmin.at(worst, links, margins)
    return (dict(zip(link_ids.tolist(), range(count))), worst.tolist(),
            np.bincount(links, minlength=count).tolist(),
            np.bincount(links[failed], minlength=count).tolist(),
            np.bincount(links[within], minlength=count).tolist())


def calibration_state(instrument: Instrument, first_use: date | None, last_use: date | None) -> str:
    """'ok', 'overdue' (used after its due date) or 'unknown' (no due date given)."""
    if instrument.calibration_due is None:
        return "unknown"
    if last_use is not None and last_use > instrument.calibration_due:
        return "overdue"
    return "ok"
