"""Audit findings: what an auditor checks beyond the loss limit. Pure.

``find_all`` runs every rule of ``reportgen.engine.finding_types.RULES`` (where a rule, a
finding and its severity are defined). This module holds the rules over results, links and
instruments; the test-method records are :mod:`reportgen.engine.findings_records`, the OTDR
cross-checks :mod:`reportgen.engine.findings_otdr`. Thresholds come from ``Testing.audit``
(``testing.audit`` in project.yaml); their defaults and sources are listed in
docs/project-format.md, "Audit findings".

Rules over results work on the judged results frame as a whole (grouped, not row by
row); rules over links, records and instruments loop over those (a project has few).
"""
from __future__ import annotations

from datetime import date
from typing import Any, Final

import numpy as np
import pandas as pd

from reportgen.engine.applications import ProjectApplications
from reportgen.engine.finding_types import (
    RULE_BY_ID,
    RULES,
    SEVERITIES,
    Finding,
    Findings,
    Rule,
    as_time,
    by_link,
    evidence_rows,
    has_flag,
    make_finding,
    ordered_findings,
)
from reportgen.engine.findings_otdr import otdr_findings
from reportgen.engine.findings_records import inspection_findings, reference_findings
from reportgen.engine.judge import KEY, Judgement
from reportgen.engine.otdr import OtdrAssessment
from reportgen.engine.power import PowerVerdict
from reportgen.model import (
    ApplicationVerdict,
    Plant,
    Project,
    ResultFlag,
)
from reportgen.units import TOLERANCE_DB

__all__ = ["RULES", "RULE_BY_ID", "SEVERITIES", "Finding", "Findings", "Rule",
           "FUTURE_SLACK_DAYS", "find_all", "low_loss_bound_db"]

FUTURE_SLACK_DAYS: Final = 1  # result-in-future: days after the build day still accepted (time zones)


def find_all(project: Project, judgement: Judgement,
             applications: ProjectApplications | None, *, today: date,
             otdr: OtdrAssessment | None = None) -> Findings:
    """Every rule over a judged (and assessed) project; ``today`` is the build date,
    ``otdr`` the project's OTDR assessment (``reportgen.engine.otdr.assess_otdr``; None:
    the OTDR rules do not run)."""
    audit = project.testing.audit
    frame = judgement.results
    judged = frame[frame["judged"].fillna(False).astype(bool)]
    # the latest valid measurement of each result, judged against the cabling limit or not
    # (a wavelength the limit set lacks still counts for applications): the measurement rules
    counted = frame[frame["counted"].fillna(False).astype(bool)] if "counted" in frame else judged
    found: list[Finding] = []
    found += _calibration(project, counted)
    found += _chronology(project, frame, today)
    found += _retests(frame)
    found += _reference_method(project)
    if applications is not None:
        found += _applications(project, applications)
    found += _within_uncertainty(judged)
    found += _asymmetry(counted, audit.asymmetry_db)
    found += _low_loss(project, judgement, judged)
    found += _repeated(counted, audit.repeat_count)
    found += _lengths(project, counted)
    if project.references is not None:
        found += reference_findings(project, counted)
    if project.inspections is not None:
        found += inspection_findings(project)
    if otdr is not None:
        found += otdr_findings(otdr)
    return ordered_findings(project, found)


# ------------------------------------------------------------------ instruments


def _calibration(project: Project, judged: pd.DataFrame) -> list[Finding]:
    """Judged results made with an instrument past its due date (error, per link);
    instruments named by results without a due date (note, project-wide)."""
    found: list[Finding] = []
    due = {i.id: i.calibration_due for i in project.instruments if i.calibration_due is not None}
    flagged = judged[has_flag(judged, ResultFlag.CALIBRATION_OVERDUE)]
    if not flagged.empty:
        # one row per result and instrument it names; late where the day is after its due date
        uses = flagged.assign(_day=flagged["tested_at"].dt.normalize()).explode("instrument")
        uses = uses.assign(_due=pd.to_datetime(uses["instrument"].map(due)))
        late = dict(by_link(uses[(uses["_day"] > uses["_due"]).to_numpy()]))
        for link_id, rows in by_link(flagged, ("loss_db", "tested_at", "instrument")):
            used = late[link_id]
            instruments = tuple(sorted(set(used["instrument"])))
            found.append(make_finding("calibration-overdue", link_id, {
                "instruments": instruments,
                "due": tuple(due[name] for name in instruments),
                "results": len(rows),
                "last_use": as_time(used["_day"].max()).date(),
            }, rows.evidence))
    named = {name for ids in pd.unique(judged["instrument"]) for name in ids} \
        if not judged.empty else set()
    for instrument in project.instruments:
        if instrument.calibration_due is None and instrument.id in named:
            found.append(make_finding("calibration-unknown", None, {"instrument": instrument.id},
                                  [{"instrument": instrument.id, "calibration_due": None}]))
    return found


# ------------------------------------------------------------------ chronology


def _chronology(project: Project, frame: pd.DataFrame, today: date) -> list[Finding]:
    """Results dated after the build day and the next (error), before project.work_started (error),
    outside testing.period (warning); every row counts, judged or not."""
    if frame.empty:
        return []
    found: list[Finding] = []
    day = frame["tested_at"].dt.normalize()
    # Times are compared as written (a meter's local time) with the build day in UTC: one day
    # of slack keeps a result made today east of UTC from looking like tomorrow's.
    checks: list[tuple[str, pd.Series, dict[str, Any]]] = [
        ("result-in-future", day > pd.Timestamp(today) + pd.Timedelta(days=FUTURE_SLACK_DAYS),
         {"today": today})]
    started = project.info.work_started
    if started is not None:
        checks.append(("result-before-work", day < pd.Timestamp(started), {"started": started}))
    testing = project.testing
    if testing.period_start is not None or testing.period_end is not None:
        outside = pd.Series(False, index=frame.index)
        if testing.period_start is not None:
            outside |= day < pd.Timestamp(testing.period_start)
        if testing.period_end is not None:
            outside |= day > pd.Timestamp(testing.period_end)
        checks.append(("result-outside-period", outside,
                       {"start": testing.period_start, "end": testing.period_end}))
    for rule, mask, values in checks:
        for link_id, rows in by_link(frame[mask.fillna(False).to_numpy(dtype=bool)],
                                      ("loss_db", "tested_at")):
            found.append(make_finding(rule, link_id, {
                **values, "results": len(rows),
                "first": as_time(rows["tested_at"].min()),
                "last": as_time(rows["tested_at"].max()),
            }, rows.evidence))
    return found


def _retests(frame: pd.DataFrame) -> list[Finding]:
    """Rows of one result (link, strand, wavelength, direction):

    - ``ambiguous-retest``: two rows with the same time and different losses (which is
      the retest cannot be told; the row read last is judged);
    - ``retest-order``: in one file, a row below another of the same result is dated
      before it (a retest cannot be older than what it replaces).
    """
    if frame.empty:
        return []
    found: list[Finding] = []
    keyed = frame.assign(_order=np.arange(len(frame)))
    same_time = keyed.groupby(KEY + ["tested_at"], sort=False)["loss_db"]
    spread = same_time.transform("max") - same_time.transform("min")
    ambiguous = keyed[(spread > TOLERANCE_DB).to_numpy()]
    for link_id, rows in by_link(ambiguous, ("loss_db", "tested_at")):
        found.append(make_finding("ambiguous-retest", link_id, {
            "results": len(set(zip(rows["strand"], rows["wavelength_nm"], rows["direction"],
                                   rows["tested_at"]))),
            "low_db": float(rows["loss_db"].min()), "high_db": float(rows["loss_db"].max()),
        }, rows.evidence))
    # within a file: the running latest time of earlier rows of the same result
    in_file = keyed.sort_values(["source_file", "source_line"], kind="stable")
    by_file = KEY + ["source_file"]
    in_file = in_file.assign(_before=in_file.groupby(by_file, sort=False)["tested_at"].shift())
    before = in_file.groupby(by_file, sort=False)["_before"].cummax()
    backwards = in_file[(in_file["tested_at"] < before).to_numpy()]
    for link_id, rows in by_link(backwards, ("loss_db", "tested_at")):
        found.append(make_finding("retest-order", link_id, {
            "rows": len(rows), "file": str(rows["source_file"][0]),
            "line": int(rows["source_line"][0]),
        }, rows.evidence))
    return found


# ------------------------------------------------------------------ method


def _reference_method(project: Project) -> list[Finding]:
    """The reference method differs from the one the customer's specification requires
    (project-wide), or a reference record states another method than testing.reference_method."""
    testing = project.testing
    found: list[Finding] = []
    required = testing.required_reference_method
    if required is not None and required is not testing.reference_method:
        found.append(make_finding("reference-method", None, {
            "used": testing.reference_method.value, "required": required.value},
            [{"setting": "testing.reference_method", "value": testing.reference_method.value},
             {"setting": "testing.required_reference_method", "value": required.value}]))
    other = [r for r in project.references or () if r.method is not testing.reference_method]
    if other:
        found.append(make_finding("reference-method", None, {
            "used": ", ".join(sorted({r.method.value for r in other})),
            "required": testing.reference_method.value},
            [{"file": r.source_file, "line": r.source_line, "instrument": r.instrument,
              "method": r.method.value} for r in other]))
    return found


# ------------------------------------------------------------------ verdicts as findings


def _applications(project: Project, assessed: ProjectApplications) -> list[Finding]:
    """Listed applications the link does not support (error); transceiver power too weak or
    without a fitting attenuator (error) or too strong with one (warning)."""
    found: list[Finding] = []
    for link in project.links:
        failing = [a for a in assessed.for_link(link.link_id).assessments
                   if a.verdict is ApplicationVerdict.NOT_SUPPORTED]
        if failing:
            found.append(make_finding("application-not-supported", link.link_id, {
                "applications": tuple(a.id for a in failing), "count": len(failing)},
                [{"file": "links.csv", "line": link.line, "application": a.id,
                  "reasons": tuple(r.kind.value for r in a.reasons),
                  "worst_loss_db": a.worst_loss_db, "max_loss_db": a.max_loss_db,
                  "least_loss_db": a.least_loss_db, "min_loss_db": a.min_loss_db}
                 for a in failing]))
        power = assessed.power.get(link.link_id)
        if power is None or power.verdict is PowerVerdict.OK:
            continue
        rule = ("transceiver-too-strong" if power.verdict is PowerVerdict.TOO_STRONG
                else "transceiver-too-weak")
        found.append(make_finding(rule, link.link_id, {
            "transceiver": power.transceiver, "verdict": power.verdict.value,
            "low_margin_db": power.low_margin_db, "high_margin_db": power.high_margin_db,
            "attenuator_db": power.attenuator_db},
            [{"file": "links.csv", "line": link.line, "transceiver": power.transceiver,
              "wavelength_nm": power.wavelength_nm,
              "rx_min_dbm": power.rx_min_dbm, "rx_max_dbm": power.rx_max_dbm,
              "rx_min_average_dbm": power.rx_min_average_dbm,
              "overload_dbm": power.rx_overload_dbm}]))
    return found


def _within_uncertainty(judged: pd.DataFrame) -> list[Finding]:
    flagged = judged[has_flag(judged, ResultFlag.WITHIN_UNCERTAINTY)]
    return [make_finding("within-uncertainty", link_id, {
        "results": len(rows), "worst_margin_db": float(rows["margin_db"].min())},
        rows.evidence)
        for link_id, rows in by_link(flagged, ("loss_db", "limit_db", "margin_db"))]


# ------------------------------------------------------------------ plausibility


def _asymmetry(judged: pd.DataFrame, threshold_db: float) -> list[Finding]:
    """|A→B − B→A| of one strand and wavelength above ``threshold_db`` (judged results)."""
    pair_key = ["link_id", "strand", "wavelength_nm"]
    ab = judged[judged["direction"] == "ab"]
    ba = judged[judged["direction"] == "ba"]
    if ab.empty or ba.empty:
        return []
    pairs = ab.merge(ba, on=pair_key, suffixes=("_ab", "_ba"))
    pairs["difference_db"] = (pairs["loss_db_ab"] - pairs["loss_db_ba"]).abs()
    over = pairs[pairs["difference_db"] > threshold_db + TOLERANCE_DB]
    found = []
    for link_id, rows in by_link(over):
        evidence = [{"file": a_file, "line": int(a_line), "line_ba": int(b_line),
                     "file_ba": b_file, "strand": int(strand), "wavelength_nm": int(wl),
                     "loss_ab_db": float(a), "loss_ba_db": float(b), "difference_db": float(d)}
                    for a_file, a_line, b_file, b_line, strand, wl, a, b, d in zip(*(
                        rows[name] for name in (
                            "source_file_ab", "source_line_ab", "source_file_ba",
                            "source_line_ba", "strand", "wavelength_nm", "loss_db_ab",
                            "loss_db_ba", "difference_db")))]
        found.append(make_finding("direction-asymmetry", link_id, {
            "pairs": len(rows), "worst_db": float(rows["difference_db"].max()),
            "threshold_db": threshold_db}, evidence))
    return found


def low_loss_bound_db(length_km: np.ndarray | float, wavelength_nm: np.ndarray | int,
                      connections: np.ndarray | int, rayleigh_db_um4_per_km: float,
                      connection_db: float) -> np.ndarray | float:
    """The least loss a link can plausibly show [dB]: Rayleigh scattering of its fiber,
    ``rayleigh / λ[µm]⁴`` per km, plus ``connection_db`` per mated connection in the
    measurement (end connections of the reference method and those between the ends)."""
    wavelength_um = np.asarray(wavelength_nm, dtype=float) / 1000.0
    return (rayleigh_db_um4_per_km / wavelength_um ** 4 * length_km
            + connections * connection_db)


def _low_loss(project: Project, judgement: Judgement, judged: pd.DataFrame) -> list[Finding]:
    """Judged results below :func:`low_loss_bound_db` by more than the uncertainty:
    a wrong reference, or a meter referenced through the link."""
    if judged.empty:
        return []
    audit = project.testing.audit
    budgets = judgement.budgets[["link_id", "wavelength_nm", "length_km", "end_connections",
                                 "connections"]]
    rows = judged.merge(budgets, on=["link_id", "wavelength_nm"], how="left")
    rows.index = judged.index
    bound = low_loss_bound_db(rows["length_km"].to_numpy(float), rows["wavelength_nm"].to_numpy(),
                              (rows["end_connections"] + rows["connections"]).to_numpy(float),
                              audit.rayleigh_db_um4_per_km, audit.low_loss_connection_db)
    rows["bound_db"] = bound
    low = rows[(rows["loss_db"] < rows["bound_db"] - project.testing.uncertainty_db
                - TOLERANCE_DB).to_numpy()]
    return [make_finding("implausibly-low-loss", link_id, {
        "results": len(group), "least_loss_db": float(group["loss_db"].min()),
        "bound_db": float(group["bound_db"][group["loss_db"].argmin()])},
        group.evidence) for link_id, group in by_link(low, ("loss_db", "bound_db"))]


def _repeated(judged: pd.DataFrame, count: int) -> list[Finding]:
    """Readings identical to the last digit (0.01 dB) beyond what measurement spread makes
    likely: ``count`` or more judged results of one link and wavelength with the same loss,
    or a run of ``count`` or more consecutive results of one technician with the same loss."""
    if judged.empty:
        return []
    found: list[Finding] = []
    hundredths = np.round(judged["loss_db"].to_numpy(float) * 100).astype(np.int64)
    keyed = judged.assign(_value=hundredths)
    sizes = keyed.groupby(["link_id", "wavelength_nm", "_value"], sort=False)["_value"] \
        .transform("size")
    repeated = keyed[(sizes >= count).to_numpy()]
    flagged: set[str] = set()
    for link_id, rows in by_link(repeated, ("loss_db", "tested_at", "technician")):
        flagged.add(link_id)
        found.append(make_finding("repeated-readings", link_id, {
            "results": len(rows), "loss_db": float(rows["loss_db"][0]), "count": count,
            "technician": None}, rows.evidence))
    worked = keyed[keyed["technician"].fillna("").astype(str).str.strip() != ""]
    if worked.empty:
        return found
    ordered = worked.sort_values(["technician", "tested_at"], kind="stable")
    change = ((ordered["technician"] != ordered["technician"].shift())
              | (ordered["_value"] != ordered["_value"].shift()))
    run = change.cumsum()
    run_size = run.map(run.value_counts())
    for _, rows in ordered[(run_size >= count).to_numpy()].groupby(run[run_size >= count],
                                                                   sort=True):
        links = list(dict.fromkeys(rows["link_id"]))
        if len(links) == 1 and links[0] in flagged:
            continue  # already reported for the link
        found.append(make_finding("repeated-readings", links[0] if len(links) == 1 else None, {
            "results": len(rows), "loss_db": float(rows["loss_db"].iloc[0]), "count": count,
            "technician": str(rows["technician"].iloc[0])},
            evidence_rows(rows, ("link_id", "loss_db", "tested_at", "technician"))))
    return found


def _lengths(project: Project, judged: pd.DataFrame) -> list[Finding]:
    """A documented length implausibly short for the plant (e.g. km written as m), and
    measured lengths off the documented one by more than the tolerance."""
    audit = project.testing.audit
    found: list[Finding] = []
    for link in project.links:
        minimum = (audit.min_length_outside_m if link.plant is Plant.OUTSIDE
                   else audit.min_length_inside_m)
        if link.length_m < minimum - TOLERANCE_DB:
            found.append(make_finding("length-implausible", link.link_id, {
                "length_m": link.length_m, "minimum_m": minimum, "plant": link.plant.value},
                [{"file": "links.csv", "line": link.line, "length_m": link.length_m,
                  "plant": link.plant.value, "fiber_type": link.fiber_type.value}]))
    measured = judged[judged["measured_length_m"].notna()]
    if measured.empty:
        return found
    documented = pd.Series({link.link_id: link.length_m for link in project.links})
    rows = measured.assign(documented_m=measured["link_id"].map(documented).to_numpy())
    rows["difference_m"] = (rows["measured_length_m"] - rows["documented_m"]).abs()
    allowed = (rows["documented_m"] * audit.length_tolerance_percent / 100.0
               + audit.length_tolerance_m)
    off = rows[(rows["difference_m"] > allowed + 1e-6).to_numpy()]
    for link_id, group in by_link(off, ("measured_length_m", "documented_m")):
        worst = group["difference_m"].argmax()
        documented = float(group["documented_m"][worst])
        found.append(make_finding("length-mismatch", link_id, {
            "measured_m": float(group["measured_length_m"][worst]),
            "documented_m": documented,
            "difference_m": float(group["difference_m"][worst]),
            "allowed_m": documented * audit.length_tolerance_percent / 100.0
            + audit.length_tolerance_m,
            "results": len(group)}, group.evidence))
    return found
