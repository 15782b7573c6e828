"""Audit findings over the test-method records: references (``references/``) and end-face
inspections (``inspections/``). Pure; registered in ``reportgen.engine.finding_types.RULES``
and run by ``reportgen.engine.findings.find_all`` when the folder exists.
"""
from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import pandas as pd

from reportgen.engine.finding_types import Finding, by_link, make_finding
from reportgen.model import InspectionResult, InstrumentKind, LinkEnd, Project
from reportgen.units import TOLERANCE_DB


def _meter_rows(project: Project, judged: pd.DataFrame) -> pd.DataFrame:
    """One row per judged result and power meter it names (``meter``: "" when it names none)."""
    meters = {i.id for i in project.instruments if i.kind is InstrumentKind.POWER_METER}
    codes, named = pd.factorize(judged["instrument"])
    per_tuple = [tuple(name for name in ids if name in meters) or ("",) for ids in named]
    lists = pd.Series([per_tuple[code] for code in codes], index=judged.index, dtype=object)
    return judged.assign(meter=lists).explode("meter")


def reference_findings(project: Project, judged: pd.DataFrame) -> list[Finding]:
    """Each judged result is tied to the latest reference of its meter and wavelength set
    at or before it: none (warning), older than reference_max_age_h (warning). Test cords of
    a reference in use not verified or above cord_check_max_db (warning, per reference)."""
    if judged.empty:
        return []
    audit = project.testing.audit
    refs = pd.DataFrame([{
        "meter": r.instrument, "wavelength_nm": r.wavelength_nm,
        "set_at": pd.Timestamp(r.set_at), "ref_at": pd.Timestamp(r.set_at), "ref": at}
        for at, r in enumerate(project.references or ())],
        columns=["meter", "wavelength_nm", "set_at", "ref_at", "ref"])
    rows = _meter_rows(project, judged).reset_index(names="_row")
    rows = rows[rows["tested_at"].notna()].sort_values("tested_at", kind="stable")
    rows = rows.astype({"meter": object, "wavelength_nm": "int64",
                        "tested_at": "datetime64[ns]"})
    refs = refs.astype({"meter": object, "wavelength_nm": "int64", "set_at": "datetime64[ns]",
                        "ref_at": "datetime64[ns]", "ref": "int64"}).sort_values("set_at")
    tied = pd.merge_asof(rows, refs.rename(columns={"set_at": "tested_at"}), on="tested_at",
                         by=["meter", "wavelength_nm"], direction="backward")
    tied = tied.sort_values(["_row"], kind="stable")
    found: list[Finding] = []
    missing = tied[tied["ref"].isna()]
    for link_id, group in by_link(missing, ("loss_db", "tested_at", "meter")):
        found.append(make_finding("reference-missing", link_id, {
            "results": len(set(group["_row"])),
            "meters": tuple(sorted({m for m in group["meter"] if m})),
        }, group.evidence))
    tied = tied.assign(
        reference_age_h=(tied["tested_at"] - tied["ref_at"]).dt.total_seconds() / 3600.0)
    stale = tied[(tied["reference_age_h"] > audit.reference_max_age_h + 1e-9).to_numpy()]
    for link_id, group in by_link(stale, ("loss_db", "tested_at", "meter", "reference_age_h")):
        found.append(make_finding("reference-stale", link_id, {
            "results": len(set(group["_row"])), "age_h": float(group["reference_age_h"].max()),
            "max_age_h": audit.reference_max_age_h}, group.evidence))
    used = sorted({int(ref) for ref in tied["ref"].dropna()})
    for at in used:
        reference = project.references[at]
        check = reference.cord_check_db
        if check is not None and check <= audit.cord_check_max_db + TOLERANCE_DB:
            continue
        results = int(tied.loc[tied["ref"] == at, "_row"].nunique())
        found.append(make_finding("cords-not-verified", None, {
            "instrument": reference.instrument, "wavelength_nm": reference.wavelength_nm,
            "set_at": reference.set_at, "cord_check_db": check,
            "max_db": audit.cord_check_max_db, "results": results,
            "cords": reference.cords},
            [{"file": reference.source_file, "line": reference.source_line,
              "instrument": reference.instrument, "cords": reference.cords,
              "cord_check_db": check}]))
    return found


def inspection_findings(project: Project) -> list[Finding]:
    """Every strand at both link ends needs a passing end-face inspection: the latest one
    failed (error) or there is none (warning)."""
    latest: dict[tuple[str, int, LinkEnd], Any] = {}
    for inspection in sorted(project.inspections or (),
                             key=lambda i: (i.inspected_at, i.source_file, i.source_line)):
        latest[(inspection.link_id, inspection.strand, inspection.end)] = inspection
    found: list[Finding] = []
    for link in project.links:
        failed, missing = [], []
        for strand in range(1, link.strands + 1):
            for end in LinkEnd:
                last = latest.get((link.link_id, strand, end))
                if last is None:
                    missing.append({"strand": strand, "end": end.value})
                elif last.result is InspectionResult.FAIL:
                    failed.append({"file": last.source_file, "line": last.source_line,
                                   "strand": strand, "end": end.value,
                                   "inspected_at": last.inspected_at,
                                   "result": last.result.value})
        if failed:
            found.append(make_finding("inspection-failed", link.link_id, {
                "ends": _ends_text(failed), "count": len(failed)}, failed))
        if missing:
            found.append(make_finding("inspection-missing", link.link_id, {
                "ends": _ends_text(missing), "count": len(missing)}, missing))
    return found


def _ends_text(rows: Sequence[Mapping[str, Any]]) -> tuple[tuple[int, str], ...]:
    """(strand, end) pairs of the rows."""
    return tuple((row["strand"], row["end"]) for row in rows)
