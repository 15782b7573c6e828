"""The one comparison rule: a link's results in an earlier and a later campaign.

Used by ``reportgen compare`` (two campaigns) and ``reportgen archive history`` (each
campaign of a link against the one before it).

A result is identified by (strand, wavelength_nm, direction); only counted rows (verdict
pass or fail: not superseded, not invalid) are compared, the last one per key if a campaign
holds more. ``change_db`` = loss after - loss before, so a positive change is more loss.
A result is *degraded* when its change exceeds the threshold.
"""
from __future__ import annotations

import json
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, Final

from reportgen.archive.campaign import COUNTED_VERDICTS, Campaign
from reportgen.units import format_db, round_db

# Default threshold for "degraded" [dB]. Basis: a light source and power meter test with a
# one-cord reference is commonly stated as uncertain by about ±0.2 dB (common practice; the
# demo project states testing.uncertainty_db: 0.2). The difference of two such independent
# tests is uncertain by √2 × 0.2 ≈ 0.28 dB; a change of more than twice that (0.57 dB,
# rounded to 0.6 dB) is unlikely to be measurement scatter alone.
DEFAULT_THRESHOLD_DB: Final = 0.6

STATUSES: Final = ("same", "changed", "added", "removed")
Key = tuple[int, int, str]


@dataclass(frozen=True)
class ResultChange:
    strand: int
    wavelength_nm: int
    direction: str
    loss_before_db: float | None
    loss_after_db: float | None
    change_db: float | None  # after - before, rounded to 0.01 dB; None unless both exist
    degraded: bool

    def as_json(self) -> dict[str, Any]:
        return {"strand": self.strand, "wavelength_nm": self.wavelength_nm,
                "direction": self.direction, "loss_before_db": round_db(self.loss_before_db),
                "loss_after_db": round_db(self.loss_after_db),
                "change_db": round_db(self.change_db), "degraded": self.degraded}


@dataclass(frozen=True)
class LinkChange:
    link_id: str
    status: str  # same | changed | added | removed
    verdict_before: str | None
    verdict_after: str | None
    worst_change_db: float | None  # the largest change (most added loss) of the link's results
    degraded: bool
    results: tuple[ResultChange, ...]

    def as_json(self) -> dict[str, Any]:
        return {"link_id": self.link_id, "status": self.status,
                "verdict_before": self.verdict_before, "verdict_after": self.verdict_after,
                "worst_change_db": round_db(self.worst_change_db), "degraded": self.degraded,
                "results": [result.as_json() for result in self.results]}


def counted_losses(rows: Iterable[Any]) -> dict[Key, float]:
    """Loss per result key from rows with ``key``, ``verdict`` and ``loss_db`` (the last wins)."""
    losses: dict[Key, float] = {}
    for row in rows:
        if row.verdict in COUNTED_VERDICTS and row.loss_db is not None:
            losses[row.key] = row.loss_db
    return losses


def compare_link(link_id: str, before: Mapping[Key, float] | None,
                 after: Mapping[Key, float] | None, verdict_before: str | None,
                 verdict_after: str | None, threshold_db: float) -> LinkChange:
    """One link: ``before``/``after`` map result keys to losses; None = not in that campaign."""
    if before is None and after is None:
        raise ValueError(f"link {link_id!r} is in neither campaign")
    results = []
    for key in sorted(set(before or {}) | set(after or {})):
        old = (before or {}).get(key)
        new = (after or {}).get(key)
        change = round_db(new - old) if old is not None and new is not None else None
        results.append(ResultChange(*key, old, new, change,
                                    change is not None and change > threshold_db))
    changes = [r.change_db for r in results if r.change_db is not None]
    worst = max(changes) if changes else None
    degraded = any(r.degraded for r in results)
    if before is None:
        status = "added"
    elif after is None:
        status = "removed"
    elif (verdict_before != verdict_after or degraded
          or any(r.change_db is None for r in results)):
        status = "changed"
    else:
        status = "same"
    return LinkChange(link_id, status, verdict_before, verdict_after, worst, degraded,
                      tuple(results))


def compare_campaigns(baseline: Campaign, retest: Campaign,
                      threshold_db: float = DEFAULT_THRESHOLD_DB) -> list[LinkChange]:
    """Every link of either campaign: baseline's order first, then links only in the retest."""
    rows_before = _rows_by_link(baseline)
    rows_after = _rows_by_link(retest)
    order = list(baseline.links) + [link for link in retest.links if link not in baseline.links]
    changes = []
    for link_id in order:
        in_before = link_id in baseline.links
        in_after = link_id in retest.links
        changes.append(compare_link(
            link_id,
            counted_losses(rows_before.get(link_id, ())) if in_before else None,
            counted_losses(rows_after.get(link_id, ())) if in_after else None,
            baseline.links[link_id]["verdict"] if in_before else None,
            retest.links[link_id]["verdict"] if in_after else None,
            threshold_db))
    return changes


def _rows_by_link(campaign: Campaign) -> dict[str, list[Any]]:
    grouped: dict[str, list[Any]] = {}
    for row in campaign.rows:
        grouped.setdefault(row.link_id, []).append(row)
    return grouped


def comparison_json_bytes(document: dict[str, Any]) -> bytes:
    """compare.json as text: the head indented, one link per line (fast for large campaigns)."""
    head = {key: value for key, value in document.items() if key != "links"}
    lines = json.dumps(head, indent=2, ensure_ascii=False, allow_nan=False)[:-2]
    links = ",\n    ".join(json.dumps(link, ensure_ascii=False, allow_nan=False)
                           for link in document["links"])
    return (f"{lines},\n  \"links\": [\n    {links}\n  ]\n}}\n" if links
            else f"{lines},\n  \"links\": []\n}}\n").encode("utf-8")


def comparison_json(changes: Sequence[LinkChange], threshold_db: float,
                    baseline: str, retest: str) -> dict[str, Any]:
    """compare.json: format 1 (docs/project-format.md §15.1)."""
    totals = {status: sum(1 for c in changes if c.status == status) for status in STATUSES}
    totals["degraded"] = sum(1 for c in changes if c.degraded)
    return {"format": 1, "baseline": baseline, "retest": retest, "threshold_db": threshold_db,
            "totals": totals, "links": [change.as_json() for change in changes]}


COMPARE_CSV_COLUMNS: Final = ("link_id", "status", "verdict_before", "verdict_after", "strand",
                              "wavelength_nm", "direction", "loss_before_db", "loss_after_db",
                              "change_db", "degraded")


def comparison_csv_bytes(changes: Sequence[LinkChange]) -> bytes:
    """compare.csv: one row per link and result (a link without results: one row)."""
    import csv
    import io

    from reportgen.export.results_csv import neutralise_cell

    def db(value: float | None) -> str:
        return "" if value is None else format_db(value)

    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(COMPARE_CSV_COLUMNS)
    for change in changes:
        head = [neutralise_cell(change.link_id), change.status, change.verdict_before or "",
                change.verdict_after or ""]
        if not change.results:
            writer.writerow(head + ["", "", "", "", "", "", str(change.degraded).lower()])
        for r in change.results:
            writer.writerow(head + [r.strand, r.wavelength_nm, r.direction,
                                    db(r.loss_before_db), db(r.loss_after_db), db(r.change_db),
                                    str(r.degraded).lower()])
    return buffer.getvalue().encode("utf-8")
