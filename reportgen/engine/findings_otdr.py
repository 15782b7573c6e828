"""Audit findings from the OTDR results. Pure; registered in
``reportgen.engine.finding_types.RULES`` and run by ``reportgen.engine.findings.find_all``.

These rules decide nothing themselves: each turns a verdict or a check that
:mod:`reportgen.engine.otdr` made into a finding, so the event table, summary.json's
``otdr`` key and the findings always agree (one rule in one place):

- ``otdr-event-loss`` (error): a judged event whose averaged loss is over its allowance
  (``PairedEvent.failed_on`` holds ``"loss"``);
- ``otdr-reflectance`` (error): a judged connection reflecting more than its limit
  (``failed_on`` holds ``"reflectance"``);
- ``otdr-negative-average``, ``otdr-lsa-differs`` (warnings): the event flags of the same names;
- ``otdr-length-differs``, ``otdr-connection-count``, ``otdr-splice-count``, ``otdr-il-differs``
  (warnings): the strand checks ``StrandOtdr.findings`` of the same names.

Each rule gives at most one finding per link, over all its strands and wavelengths. Evidence:
one row per trace (file; the first line for an event table, none for a trace file) and event,
with the values the check compared. Events are numbered from 1 per strand and wavelength, as in
the event table and the figure.
"""
from __future__ import annotations

from collections.abc import Iterator, Mapping
from typing import Any, Final

from reportgen.engine.finding_types import Finding, make_finding
from reportgen.engine.otdr import OtdrAssessment, PairedEvent, StrandOtdr

# event flags and strand checks of engine.otdr, each with its rule (the rule id is "otdr-" + name)
EVENT_FLAG_RULES: Final = ("negative-average", "lsa-differs")
STRAND_CHECK_RULES: Final = ("length-differs", "connection-count", "splice-count", "il-differs")
FAILURE_RULES: Final[Mapping[str, str]] = {"loss": "otdr-event-loss",
                                           "reflectance": "otdr-reflectance"}


def otdr_findings(otdr: OtdrAssessment) -> list[Finding]:
    """Every OTDR finding of the project, per link in the assessment's (links.csv) order."""
    found: list[Finding] = []
    links = list(dict.fromkeys(strand.link_id for strand in otdr.strands))
    for link_id in links:
        strands = otdr.for_link(link_id)
        for cause, rule in FAILURE_RULES.items():
            rows = [(strand, number, event) for strand, number, event in _events(strands)
                    if cause in event.failed_on]
            if rows:
                found.append(_event_finding(rule, link_id, rows))
        for flag in EVENT_FLAG_RULES:
            rows = [(strand, number, event) for strand, number, event in _events(strands)
                    if flag in event.flags]
            if rows:
                found.append(_event_finding(f"otdr-{flag}", link_id, rows))
        for check in STRAND_CHECK_RULES:
            flagged = [strand for strand in strands if check in strand.findings]
            if flagged:
                found.append(_strand_finding(check, link_id, flagged))
    return found


def _events(strands: tuple[StrandOtdr, ...]) -> Iterator[tuple[StrandOtdr, int, PairedEvent]]:
    for strand in strands:
        for number, event in enumerate(strand.events, start=1):
            yield strand, number, event


def _trace_rows(strand: StrandOtdr, values: Mapping[str, Any],
                one_way: Mapping[str, Any] | None = None) -> list[dict[str, Any]]:
    """One evidence row per trace of ``strand``: its file and line, the strand, wavelength and
    direction, then ``values`` (and ``one_way[direction]`` under ``loss_db``)."""
    return [{"file": trace.source_file, "line": trace.source_line, "strand": strand.strand,
             "wavelength_nm": strand.wavelength_nm, "direction": trace.direction.value,
             **values,
             **({"loss_db": one_way.get(trace.direction.value)} if one_way is not None else {})}
            for trace in strand.traces]


def _event_finding(rule: str, link_id: str,
                   rows: list[tuple[StrandOtdr, int, PairedEvent]]) -> Finding:
    evidence: list[dict[str, Any]] = []
    for strand, number, event in rows:
        values: dict[str, Any] = {"event": number, "kind": event.kind.value,
                                  "position_m": event.position_m}
        if rule == "otdr-reflectance":
            values |= {"reflectance_db": event.reflectance_db,
                       "limit_db": event.reflectance_limit_db}
        else:
            values |= {"loss_avg_db": event.loss_avg_db, "allowance_db": event.allowance_db}
        if rule == "otdr-lsa-differs":
            values |= {"lsa_ab_db": event.lsa_ab_db, "lsa_ba_db": event.lsa_ba_db,
                       "threshold_db": strand.lsa_threshold_db}
        evidence += _trace_rows(strand, values, {"ab": event.loss_ab_db, "ba": event.loss_ba_db})
    where = tuple((strand.strand, strand.wavelength_nm, number) for strand, number, _ in rows)
    first_strand, _number, first = rows[0]
    values = {"events": where, "count": len(rows)}
    if rule == "otdr-event-loss":
        worst = max(rows, key=lambda r: (r[2].loss_avg_db or 0.0) - (r[2].allowance_db or 0.0))[2]
        values |= {"loss_db": worst.loss_avg_db, "allowance_db": worst.allowance_db}
    elif rule == "otdr-reflectance":
        worst = max(rows, key=lambda r: (r[2].reflectance_db or -99.0)
                    - (r[2].reflectance_limit_db or 0.0))[2]
        values |= {"reflectance_db": worst.reflectance_db, "limit_db": worst.reflectance_limit_db}
    elif rule == "otdr-negative-average":
        values |= {"loss_db": min(r[2].loss_avg_db for r in rows if r[2].loss_avg_db is not None)}
    else:  # otdr-lsa-differs
        values |= {"threshold_db": first_strand.lsa_threshold_db}
    return make_finding(rule, link_id, values, evidence)


def _strand_finding(check: str, link_id: str, strands: list[StrandOtdr]) -> Finding:
    evidence: list[dict[str, Any]] = []
    for strand in strands:
        evidence += _trace_rows(strand, _check_values(check, strand))
    first = strands[0]
    values = {"strands": tuple((s.strand, s.wavelength_nm) for s in strands),
              "count": len(strands), **_check_values(check, first)}
    return make_finding(f"otdr-{check}", link_id, values, evidence)


def _check_values(check: str, strand: StrandOtdr) -> dict[str, Any]:
    """The numbers a strand check compared (as engine.otdr compared them)."""
    if check == "length-differs":
        return {"measured_m": strand.length_m, "documented_m": strand.documented_length_m,
                "allowed_m": strand.length_tolerance_m}
    if check == "connection-count":
        return {"found": strand.connections_found, "expected": strand.connections_expected}
    if check == "splice-count":
        return {"found": strand.splices_found, "expected": strand.splices_expected}
    return {"otdr_db": strand.end_to_end_loss_db, "insertion_loss_db": strand.insertion_loss_db,
            "threshold_db": strand.il_agreement_db}
