"""Judging: margins, result verdicts, retests, missing results, link verdicts. Pure.

Rules (project folder format v1, "How a result is judged" [1]_):

- margin_db = limit_db − loss_db; a result passes when loss_db ≤ limit_db.
- |margin| ≤ uncertainty_db: flagged ``within-uncertainty`` (it still passes or fails).
- loss_db < −uncertainty_db: ``invalid`` (a bad reference); not judged, counts as missing.
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
from typing import Final

import numpy as np
import pandas as pd

from .budget import budget_frame
from .model import (
    Directions,
    Instrument,
    Link,
    LinkVerdict,
    Project,
    ResultFlag,
    ResultVerdict,
    Testing,
)

# Comparisons allow for binary floating point: 2.7 must not fail a 2.7 dB limit
# because 0.75·2 + … summed to 2.6999999999999997.
TOLERANCE_DB: Final = 1e-9

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

    results: pd.DataFrame  # project.results + limit_db, margin_db, verdict, flags, judged
    budgets: pd.DataFrame  # budget.budget_frame(...)
    links: tuple[LinkOutcome, ...]

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

    With ``directions: one`` the direction column is ``"any"``.
    """
    directions = (["ab", "ba"] if testing.directions is Directions.BOTH else [ANY_DIRECTION])
    frame = pd.DataFrame({
        "link_id": [link.link_id for link in links],
        "strand": [list(range(1, link.strands + 1)) for link in links],
        "wavelength_nm": [list(testing.wavelengths_nm[link.fiber_type.category]) for link in links],
    })
    frame = frame.explode("strand").explode("wavelength_nm")
    frame = frame.merge(pd.DataFrame({"direction": directions}), how="cross")
    return frame.astype({"strand": "int64", "wavelength_nm": "int64"})[KEY].reset_index(drop=True)


def judge_results(
    results: pd.DataFrame,
    budgets: pd.DataFrame,
    uncertainty_db: float,
    instruments: Sequence[Instrument] = (),
    required: pd.DataFrame | None = None,
) -> pd.DataFrame:
    """Add limit_db, margin_db, verdict, flags and judged to every result row.

    Rows keep their input order (files by name, then line).
    """
    frame = results.reset_index(drop=True).copy()
    frame["_order"] = np.arange(len(frame))
    frame = frame.merge(budgets[["link_id", "wavelength_nm", "limit_db"]],
                        on=["link_id", "wavelength_nm"], how="left", validate="many_to_one")
    frame = frame.sort_values("_order", ignore_index=True)
    frame["margin_db"] = frame["limit_db"] - frame["loss_db"]
    invalid = frame["loss_db"] < -uncertainty_db - TOLERANCE_DB
    latest_first = frame.sort_values(["tested_at", "_order"], ascending=False, kind="stable")
    rank = latest_first.groupby(KEY, sort=False).cumcount().reindex(frame.index)
    group_size = frame.groupby(KEY, sort=False)["_order"].transform("size")
    latest = rank == 0
    passed = frame["loss_db"] <= frame["limit_db"] + TOLERANCE_DB
    verdict = np.select(
        [invalid, ~latest, passed],
        [ResultVerdict.INVALID.value, ResultVerdict.SUPERSEDED.value, ResultVerdict.PASS.value],
        ResultVerdict.FAIL.value,
    )
    frame["verdict"] = pd.Series(verdict, index=frame.index, dtype=object)
    frame.loc[invalid, "margin_db"] = np.nan
    frame["judged"] = latest & ~invalid
    flags = {
        ResultFlag.WITHIN_UNCERTAINTY: ~invalid
        & (frame["margin_db"].abs() <= uncertainty_db + TOLERANCE_DB),
        ResultFlag.NEGATIVE_LOSS: invalid,
        ResultFlag.RETEST: latest & (group_size > 1),
        ResultFlag.CALIBRATION_OVERDUE: _calibration_overdue(frame, instruments),
        ResultFlag.NOT_REQUIRED: _not_required(frame, required),
    }
    frame["flags"] = _join_flags(frame.index, flags)
    return frame.drop(columns="_order")


def _join_flags(index: pd.Index, flags: Mapping[ResultFlag, pd.Series]) -> pd.Series:
    joined = pd.Series("", index=index, dtype=object)
    for flag, mask in flags.items():
        mask = mask.fillna(False).astype(bool)
        joined[mask] = joined[mask].where(joined[mask] == "", joined[mask] + ";") + flag.value
    return joined


def _calibration_overdue(frame: pd.DataFrame, instruments: Sequence[Instrument]) -> pd.Series:
    """True where an instrument named on the row was used after its calibration due date."""
    due = {i.id: i.calibration_due for i in instruments if i.calibration_due is not None}
    overdue = pd.Series(False, index=frame.index)
    if not due or frame.empty:
        return overdue
    used = frame["instrument"].fillna("").astype(str).str.split(";").explode().str.strip()
    due_ts = used.map({k: pd.Timestamp(v) for k, v in due.items()})
    # Used on the due date itself is still in calibration; any later day is not.
    tested_day = frame["tested_at"].dt.normalize().reindex(used.index)
    late = (tested_day > due_ts).fillna(False).astype(bool)
    return late.groupby(level=0).any().reindex(frame.index, fill_value=False)


def _not_required(frame: pd.DataFrame, required: pd.DataFrame | None) -> pd.Series:
    if required is None or frame.empty:
        return pd.Series(False, index=frame.index)
    needed = required[["link_id", "wavelength_nm"]].drop_duplicates()
    needed = needed.assign(_needed=True)
    merged = frame[["link_id", "wavelength_nm"]].merge(needed, how="left",
                                                       on=["link_id", "wavelength_nm"])
    return ~merged["_needed"].fillna(False).astype(bool).set_axis(frame.index)


def link_outcomes(
    links: Sequence[Link],
    judged_results: pd.DataFrame,
    required: pd.DataFrame,
    directions: Directions,
) -> tuple[LinkOutcome, ...]:
    """Link verdicts, worst margins and missing results, in links.csv order."""
    frame = judged_results
    judged = frame[frame["judged"]]
    latest_invalid = frame[(frame["verdict"] == ResultVerdict.INVALID.value)]
    if directions is not Directions.BOTH:
        judged = judged.assign(direction=ANY_DIRECTION)
        latest_invalid = latest_invalid.assign(direction=ANY_DIRECTION)
    have = judged[KEY].drop_duplicates().assign(_have=True)
    missing = required.merge(have, on=KEY, how="left")
    missing = missing[missing["_have"].isna()].drop(columns="_have")
    invalid_keys = latest_invalid[KEY].drop_duplicates().assign(_invalid=True)
    missing = missing.merge(invalid_keys, on=KEY, how="left")
    missing["reason"] = np.where(missing["_invalid"].fillna(False).astype(bool),
                                 "invalid", "not-tested")
    stats = judged.groupby("link_id").agg(
        worst_margin_db=("margin_db", "min"),
        judged=("margin_db", "size"),
        failed=("verdict", lambda v: int((v == ResultVerdict.FAIL.value).sum())),
        within=("flags", lambda f: int(f.str.contains(ResultFlag.WITHIN_UNCERTAINTY.value).sum())),
    )
    missing_by_link = {
        link_id: tuple(MissingResult(int(r.strand), int(r.wavelength_nm), str(r.direction), r.reason)
                       for r in group.itertuples(index=False))
        for link_id, group in missing.sort_values(KEY).groupby("link_id", sort=False)
    }
    outcomes = []
    for link in links:
        row = stats.loc[link.link_id] if link.link_id in stats.index else None
        link_missing = missing_by_link.get(link.link_id, ())
        failed = int(row["failed"]) if row is not None else 0
        if failed:
            verdict = LinkVerdict.FAIL
        elif link_missing:
            verdict = LinkVerdict.INCOMPLETE
        else:
            verdict = LinkVerdict.PASS
        outcomes.append(LinkOutcome(
            link_id=link.link_id,
            verdict=verdict,
            worst_margin_db=float(row["worst_margin_db"]) if row is not None else None,
            missing=link_missing,
            judged=int(row["judged"]) if row is not None else 0,
            failed=failed,
            within_uncertainty=int(row["within"]) if row is not None else 0,
        ))
    return tuple(outcomes)


def calibration_state(instrument: Instrument, first_use: date | None, last_use: date | None) -> str:
    """'ok', 'overdue' (used after its due date) or 'unknown' (no due date given)."""
    if instrument.calibration_due is None:
        return "unknown"
    if last_use is not None and last_use > instrument.calibration_due:
        return "overdue"
    return "ok"
