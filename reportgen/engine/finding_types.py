"""Audit findings, the common part: the rules, a finding, the findings of a project, and the
helpers every rule module uses. Pure.

A finding names a rule (``RULES``), its severity (``error`` blocks acceptance,
``warning``, ``note``), the link it concerns (None: the whole project), the numbers its
message words (``values``; the words are the report's, ``reportgen.report.messages``)
and the evidence: the input rows and values it rests on. Each rule gives at most one
finding per link (or one per instrument or reference row for project-wide rules), so a
planted problem is reported once. Thresholds come from ``Testing.audit``
(``testing.audit`` in project.yaml) and, for the OTDR rules, ``Testing.otdr``; their
defaults and sources are listed in docs/project-format.md, "Audit findings".

The rules live by concept: results, links and instruments in
:mod:`reportgen.engine.findings` (which also runs them all, ``find_all``), the test-method
records in :mod:`reportgen.engine.findings_records`, the OTDR cross-checks in
:mod:`reportgen.engine.findings_otdr`. Every rule is registered here, in ``RULES``.
"""
from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import date, datetime
from typing import Any, Final

import numpy as np
import pandas as pd

from reportgen.model import Project, ResultFlag, Severity


@dataclass(frozen=True)
class Rule:
    id: str  # our own short name
    severity: Severity
    thresholds: tuple[str, ...] = ()  # keys of testing.audit the rule uses
    settings: tuple[str, ...] = ()  # other project.yaml keys it reads


# Every rule, in the order findings are listed within a link.
RULES: Final[tuple[Rule, ...]] = (
    Rule("calibration-overdue", Severity.ERROR),
    Rule("result-in-future", Severity.ERROR),
    Rule("result-before-work", Severity.ERROR, settings=("project.work_started",)),
    Rule("retest-order", Severity.ERROR),
    Rule("ambiguous-retest", Severity.ERROR),
    Rule("reference-method", Severity.ERROR, settings=("testing.required_reference_method",)),
    Rule("application-not-supported", Severity.ERROR),
    Rule("transceiver-too-weak", Severity.ERROR),
    Rule("inspection-failed", Severity.ERROR),
    Rule("otdr-event-loss", Severity.ERROR, settings=("testing.otdr.connection_db", "testing.otdr.splice_db")),
    Rule("otdr-reflectance", Severity.ERROR, settings=("testing.otdr.polish", "testing.otdr.reflectance_db")),
    Rule("transceiver-too-strong", Severity.WARNING),
    Rule("within-uncertainty", Severity.WARNING, settings=("testing.uncertainty_db",)),
    Rule("result-outside-period", Severity.WARNING, settings=("testing.period",)),
    Rule("direction-asymmetry", Severity.WARNING, thresholds=("asymmetry_db",)),
    Rule("implausibly-low-loss", Severity.WARNING,
         thresholds=("rayleigh_db_um4_per_km", "low_loss_connection_db"),
         settings=("testing.uncertainty_db",)),
    Rule("repeated-readings", Severity.WARNING, thresholds=("repeat_count",)),
    Rule("length-implausible", Severity.WARNING,
         thresholds=("min_length_inside_m", "min_length_outside_m")),
    Rule("length-mismatch", Severity.WARNING,
         thresholds=("length_tolerance_percent", "length_tolerance_m")),
    Rule("reference-missing", Severity.WARNING),
    Rule("reference-stale", Severity.WARNING, thresholds=("reference_max_age_h",)),
    Rule("cords-not-verified", Severity.WARNING, thresholds=("cord_check_max_db",)),
    Rule("inspection-missing", Severity.WARNING),
    Rule("otdr-negative-average", Severity.WARNING),
    Rule("otdr-lsa-differs", Severity.WARNING, settings=("testing.otdr.lsa_threshold_db",)),
    Rule("otdr-length-differs", Severity.WARNING, settings=("testing.otdr.length_tolerance_pct",)),
    Rule("otdr-connection-count", Severity.WARNING, settings=("testing.otdr.launch_cord_m", "testing.otdr.receive_cord_m")),
    Rule("otdr-splice-count", Severity.WARNING),
    Rule("otdr-il-differs", Severity.WARNING),
    Rule("calibration-unknown", Severity.NOTE),
)
RULE_BY_ID: Final[Mapping[str, Rule]] = {rule.id: rule for rule in RULES}
RULE_ORDER: Final[Mapping[str, int]] = {rule.id: at for at, rule in enumerate(RULES)}
SEVERITIES: Final[tuple[Severity, ...]] = (Severity.ERROR, Severity.WARNING, Severity.NOTE)


@dataclass(frozen=True)
class Finding:
    rule: str
    severity: Severity
    link_id: str | None  # None: the whole project
    values: Mapping[str, Any]  # the numbers and ids the message words
    evidence: tuple[Mapping[str, Any], ...] = ()  # rows: file, line and the values used

    def to_json(self, message: str) -> dict[str, Any]:
        """One element of summary.json's ``findings`` (dB values rounded as printed)."""
        return {"rule": self.rule, "severity": self.severity.value, "link_id": self.link_id,
                "message": message, "evidence": [_json_row(row) for row in self.evidence]}


@dataclass(frozen=True)
class Findings:
    """Every finding of a project: project-wide first, then by link in links.csv order."""

    items: tuple[Finding, ...]
    _by_link: Mapping[str | None, tuple[Finding, ...]] = field(default_factory=dict, repr=False)

    @property
    def counts(self) -> dict[str, int]:
        counts = {severity.value: 0 for severity in SEVERITIES}
        for finding in self.items:
            counts[finding.severity.value] += 1
        return counts

    @property
    def has_errors(self) -> bool:
        return any(f.severity is Severity.ERROR for f in self.items)

    def for_link(self, link_id: str | None) -> tuple[Finding, ...]:
        return self._by_link.get(link_id, ())


def _json_row(row: Mapping[str, Any]) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for key, value in row.items():
        if isinstance(value, float):
            value = round(value, 2) if key.endswith("_db") or key.endswith("_m") else value
            value = None if value != value else value
        elif isinstance(value, (datetime, date, pd.Timestamp)):
            value = value.isoformat()
        elif isinstance(value, tuple):
            value = list(value)
        elif isinstance(value, np.generic):
            value = value.item()
        out[key] = value
    return out


def ordered_findings(project: Project, found: list[Finding]) -> Findings:
    position = {link.link_id: at for at, link in enumerate(project.links)}
    items = tuple(sorted(found, key=lambda f: (
        -1 if f.link_id is None else position.get(f.link_id, len(position)),
        RULE_ORDER[f.rule])))
    by_link: dict[str | None, list[Finding]] = {}
    for finding in items:
        by_link.setdefault(finding.link_id, []).append(finding)
    return Findings(items, {k: tuple(v) for k, v in by_link.items()})


def make_finding(rule: str, link_id: str | None, values: Mapping[str, Any],
             evidence: Iterable[Mapping[str, Any]] = ()) -> Finding:
    return Finding(rule, RULE_BY_ID[rule].severity, link_id, dict(values), tuple(evidence))


def evidence_rows(frame: pd.DataFrame, columns: Sequence[str] = ("loss_db",)) -> list[dict[str, Any]]:
    """Evidence rows: file, line, key and the named columns of every row of ``frame``
    (one pass over the frame)."""
    wanted = ["source_file", "source_line", "strand", "wavelength_nm", "direction", *columns]
    wanted = list(dict.fromkeys(wanted))
    times = "tested_at" in wanted
    rows = []
    for values in frame[wanted].itertuples(index=False, name=None):
        row = dict(zip(wanted, values))
        file, line = row.pop("source_file"), int(row.pop("source_line"))
        row["strand"], row["wavelength_nm"] = int(row["strand"]), int(row["wavelength_nm"])
        if times:
            row["tested_at"] = pd.Timestamp(row["tested_at"]).to_pydatetime()
        rows.append({"file": file, "line": line, **row})
    return rows


def has_flag(frame: pd.DataFrame, flag: ResultFlag) -> np.ndarray:
    """Rows whose flags hold ``flag``, worked out once per distinct flags tuple (few)."""
    codes, tuples = pd.factorize(frame["flags"])
    has = np.array([flag in flags for flags in tuples] + [False], dtype=bool)
    return has[codes]


class Group:
    """The rows of one link in a frame: columns as NumPy arrays (``group["loss_db"]``) and
    the evidence rows, both cut from arrays made once for the whole frame."""

    def __init__(self, columns: dict[str, np.ndarray], positions: np.ndarray,
                 evidence: list[dict[str, Any]]) -> None:
        self._columns = columns
        self._positions = positions
        self.evidence = evidence

    def __len__(self) -> int:
        return len(self._positions)

    def __getitem__(self, column: str) -> np.ndarray:
        return self._columns[column][self._positions]


def by_link(frame: pd.DataFrame, evidence: Sequence[str] | None = None
             ) -> Iterable[tuple[str, Group]]:
    """Rows of ``frame`` grouped by link, in order of first appearance, each with its
    evidence rows (``evidence_rows`` of ``evidence`` columns; none when None)."""
    if frame.empty:
        return []
    codes, link_ids = pd.factorize(frame["link_id"])
    order = np.argsort(codes, kind="stable")
    bounds = np.flatnonzero(np.diff(codes[order])) + 1
    columns = {name: frame[name].to_numpy() for name in frame.columns}
    rows = evidence_rows(frame, evidence) if evidence is not None else None
    groups = []
    for at, positions in enumerate(np.split(order, bounds)):
        picked = [rows[p] for p in positions] if rows is not None else []
        groups.append((str(link_ids[at]), Group(columns, positions, picked)))
    return groups


def as_time(value: Any) -> datetime:
    return pd.Timestamp(value).to_pydatetime()
