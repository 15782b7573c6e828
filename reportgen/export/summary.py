"""summary.json: the contract's per-link verdicts plus applications and power."""
from __future__ import annotations

import json
from collections.abc import Callable, Mapping
from datetime import datetime
from typing import Any, Final

from reportgen.engine.applications import ProjectApplications
from reportgen.engine.findings import Finding, Findings
from reportgen.engine.judge import Judgement
from reportgen.engine.otdr import OtdrAssessment
from reportgen.export.manifest import MANIFEST_NAME
from reportgen.model import Project
from reportgen.units import round_db, round_length_m

SUMMARY_FORMAT: Final = 1


def summary_dict(project: Project, judgement: Judgement,
                 link_extras: Mapping[str, Mapping[str, Any]] | None = None,
                 meta: Mapping[str, Any] | None = None) -> dict[str, Any]:
    """The summary.json document: format 1 of the contract plus added keys."""
    links = []
    for outcome in judgement.links:
        entry: dict[str, Any] = {
            "link_id": outcome.link_id,
            "verdict": outcome.verdict.value,
            "worst_margin_db": round_db(outcome.worst_margin_db),
            "missing": [
                {"strand": m.strand, "wavelength_nm": m.wavelength_nm,
                 "direction": m.direction, "reason": m.reason}
                for m in outcome.missing
            ],
        }
        entry.update((link_extras or {}).get(outcome.link_id, {}))
        links.append(entry)
    document: dict[str, Any] = {"format": SUMMARY_FORMAT, "links": links,
                                "totals": judgement.totals}
    document.update(meta or {})
    return document


def json_bytes(document: Mapping[str, Any]) -> bytes:
    return (json.dumps(document, indent=2, ensure_ascii=False, allow_nan=False) + "\n").encode()


def findings_json(findings: Findings, finding_text: Callable[[Finding], str]
                  ) -> tuple[list[dict[str, Any]], dict[str, int]]:
    """summary.json's ``findings`` list and the counts added to ``totals``
    (``error_findings``, ``warning_findings``, ``note_findings``)."""
    listed = [finding.to_json(finding_text(finding)) for finding in findings.items]
    counts = {f"{severity}_findings": count for severity, count in findings.counts.items()}
    return listed, counts


def summary_document(project: Project, judgement: Judgement, applications: ProjectApplications,
                     *, now: datetime, version: str,
                     reason_text: Callable[[Any], str],
                     findings: Findings | None = None,
                     finding_text: Callable[[Finding], str] | None = None,
                     otdr: OtdrAssessment | None = None,
                     digest: str | None = None) -> dict[str, Any]:
    """summary.json: the contract's keys plus applications and power per link, the OTDR
    checks and the audit findings.

    ``reason_text`` words an application's reasons and ``finding_text`` a finding (the
    report's text catalogue, so summary.json and the report say the same).

    ``digest`` (the SHA-256 of the manifest, :mod:`reportgen.export.manifest`) is
    written as ``archive.manifest_sha256``.
    """
    link_extras = {link.link_id: {"fiber_type": link.fiber_type.value,
                                  "length_m": round_length_m(link.length_m),
                                  **applications.link_json(link.link_id, reason_text),
                                  **({"otdr": otdr_json(otdr, link.link_id)} if otdr is not None else {})}
                   for link in project.links}
    info = project.info
    meta = {
        "project": {"title": info.title, "job_number": info.job_number, "site": info.site,
                    "customer": info.customer, "contractor": info.contractor.name},
        "limits": project.limits.id,
        "reference_method": project.testing.reference_method.value,
        "generated_at": now.isoformat(),
        "generator": f"reportgen {version}",
    }
    if digest is not None:
        meta["archive"] = {"manifest": MANIFEST_NAME, "manifest_sha256": digest}
    document = summary_dict(project, judgement, link_extras, meta)
    if findings is not None and finding_text is not None:
        listed, counts = findings_json(findings, finding_text)
        document["totals"] = {**document["totals"], **counts}
        document["findings"] = listed
    return document


def otdr_json(otdr: OtdrAssessment, link_id: str) -> list[dict[str, Any]]:
    """A link's ``otdr`` key: per strand and wavelength, its events and checks ([] without OTDR)."""
    return [
        {
            "strand": strand.strand,
            "wavelength_nm": strand.wavelength_nm,
            "directions": [trace.direction.value for trace in strand.traces],
            "files": [trace.source_file for trace in strand.traces],
            "verdict": strand.verdict,
            "length_m": round_length_m(strand.length_m),
            "documented_length_m": round_length_m(strand.documented_length_m),
            "end_to_end_loss_db": round_db(strand.end_to_end_loss_db),
            "insertion_loss_db": round_db(strand.insertion_loss_db),
            "findings": list(strand.findings),
            "events": [
                {
                    "position_m": round_length_m(event.position_m),
                    "kind": event.kind.value,
                    "loss_ab_db": round_db(event.loss_ab_db),
                    "loss_ba_db": round_db(event.loss_ba_db),
                    "loss_avg_db": round_db(event.loss_avg_db),
                    "lsa_ab_db": round_db(event.lsa_ab_db),
                    "lsa_ba_db": round_db(event.lsa_ba_db),
                    "reflectance_db": round_db(event.reflectance_db),
                    "allowance_db": round_db(event.allowance_db),
                    "verdict": event.verdict,
                    "flags": list(event.flags),
                }
                for event in strand.events
            ],
        }
        for strand in otdr.for_link(link_id)
    ]
