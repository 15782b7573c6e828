"""Writing campaigns into the archive and asking it questions (SQL through bound parameters).

"A link's latest state" is its state in the campaign that tested it last (its own latest
result's time; the later-added campaign on a tie).
"""
from __future__ import annotations

import json
from collections import Counter
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import sqlalchemy as sa
from sqlalchemy.dialects import postgresql, sqlite

from reportgen.archive import schema as t
from reportgen.archive.campaign import Campaign, ResultRow, instruments_of
from reportgen.archive.compare import Key, LinkChange, compare_link, counted_losses
from reportgen.archive.db import Archive, ArchiveError

NO_SITE = "(no site named)"


@dataclass(frozen=True)
class Added:
    campaign_id: int
    site: str
    links: int
    results: int
    already: bool  # the same build was stored before: nothing added


def site_of(campaign: Campaign, override: str | None = None) -> str:
    site = override or campaign.project.get("site") or campaign.project.get("title")
    return str(site) if site else NO_SITE


def add_campaign(archive: Archive, campaign: Campaign, site_override: str | None = None) -> Added:
    """Store CAMPAIGN in one transaction; a campaign stored before (same digest) is left alone."""
    site = site_of(campaign, site_override)
    with archive.connect(write=True) as conn:
        archive.check_schema(conn, create=True)
        existing = conn.execute(sa.select(t.campaigns.c.id, t.sites.c.name)
                                .join(t.sites, t.sites.c.id == t.campaigns.c.site_id)
                                .where(t.campaigns.c.digest == campaign.digest)).first()
        if existing:
            return Added(existing.id, existing.name, len(campaign.links), len(campaign.rows), True)
        site_id = _get_or_create(conn, archive.backend, t.sites, {"name": site},
                                 t.sites.c.name == site)
        project = campaign.project
        campaign_id = conn.execute(t.campaigns.insert().values(
            digest=campaign.digest, site_id=site_id, title=_text(project.get("title")),
            job_number=_text(project.get("job_number")), customer=_text(project.get("customer")),
            contractor=_text(project.get("contractor")),
            limits=_text(campaign.summary.get("limits")),
            reference_method=_text(campaign.summary.get("reference_method")),
            generated_at=_text(campaign.summary.get("generated_at")),
            generator=_text(campaign.summary.get("generator")),
            tested_first=campaign.tested_first, tested_last=campaign.tested_last,
            links_total=len(campaign.links),
            links_pass=_count(campaign, "pass"), links_fail=_count(campaign, "fail"),
            links_incomplete=_count(campaign, "incomplete"),
            source=campaign.label,
        ).returning(t.campaigns.c.id)).scalar_one()
        link_refs = _link_refs(conn, archive.backend, site_id, campaign)
        last_tested: dict[str, str] = {}
        for row in campaign.rows:
            if row.tested_at and row.tested_at > last_tested.get(row.link_id, ""):
                last_tested[row.link_id] = row.tested_at
        states, apps, powers = [], [], []
        for position, (link_id, entry) in enumerate(campaign.links.items()):
            ref = link_refs[link_id]
            states.append({"campaign_id": campaign_id, "link_ref": ref, "position": position,
                           "fiber_type": _text(entry.get("fiber_type")),
                           "length_m": _number(entry.get("length_m")),
                           "verdict": entry["verdict"],
                           "worst_margin_db": _number(entry.get("worst_margin_db")),
                           "tested_last": last_tested.get(link_id)})
            apps.extend(_applications(campaign_id, ref, entry))
            power = entry.get("power")
            if isinstance(power, Mapping):
                powers.append({"campaign_id": campaign_id, "link_ref": ref,
                               "transceiver": _text(power.get("transceiver")),
                               "basis": _text(power.get("basis")),
                               "wavelength_nm": _integer(power.get("wavelength_nm")),
                               **{key: _number(power.get(key)) for key in (
                                   "rx_min_dbm", "rx_max_dbm", "low_margin_db",
                                   "high_margin_db", "attenuator_db")},
                               "verdict": _text(power.get("verdict"))})
        rows = [_result_values(campaign_id, link_refs[row.link_id], number, row)
                for number, row in enumerate(campaign.rows)]
        instruments = Counter(name for row in campaign.rows for name in instruments_of(row))
        for table, values in ((t.link_states, states), (t.application_verdicts, apps),
                              (t.power_budgets, powers), (t.results, rows)):
            if values:
                conn.execute(table.insert(), values)
        if instruments:
            conn.execute(t.instruments.insert(), [
                {"campaign_id": campaign_id, "instrument_id": name, "results": count}
                for name, count in sorted(instruments.items())])
        found = _findings(campaign_id, link_refs, campaign.summary.get("findings"))
        if found:
            conn.execute(t.findings.insert(), found)
        conn.execute(t.files.insert(), [
            {"campaign_id": campaign_id, "name": name, "sha256": digest, "size_bytes": size}
            for name, (digest, size) in sorted(campaign.files.items())])
        return Added(campaign_id, site, len(campaign.links), len(campaign.rows), False)


def _findings(campaign_id: int, link_refs: Mapping[str, int], items: Any) -> list[dict[str, Any]]:
    """summary.json's audit findings as rows; entries without a rule or severity are skipped."""
    rows = []
    for item in items if isinstance(items, list) else []:
        if not isinstance(item, Mapping) or not isinstance(item.get("rule"), str) \
                or not isinstance(item.get("severity"), str):
            continue
        link_id = item.get("link_id")
        rows.append({"campaign_id": campaign_id,
                     "link_ref": link_refs.get(link_id) if isinstance(link_id, str) else None,
                     "rule": item["rule"], "severity": item["severity"],
                     "message": _text(item.get("message")),
                     "evidence": json.dumps(item.get("evidence"), ensure_ascii=False,
                                            sort_keys=True)})
    return rows


def _count(campaign: Campaign, verdict: str) -> int:
    return sum(1 for entry in campaign.links.values() if entry["verdict"] == verdict)


def _link_refs(conn: sa.Connection, backend: str, site_id: int,
               campaign: Campaign) -> dict[str, int]:
    """Ids of the campaign's links (made where new); links of result rows only are added too."""
    wanted = list(dict.fromkeys(list(campaign.links) + [row.link_id for row in campaign.rows]))
    refs = _known_links(conn, site_id)
    new = [link_id for link_id in wanted if link_id not in refs]
    if new:
        statement = _insert_ignoring_conflicts(backend, t.links)
        conn.execute(statement, [{"site_id": site_id, "link_id": link_id} for link_id in new])
        refs = _known_links(conn, site_id)
    return refs


def _known_links(conn: sa.Connection, site_id: int) -> dict[str, int]:
    return {row.link_id: row.id for row in conn.execute(
        sa.select(t.links.c.id, t.links.c.link_id).where(t.links.c.site_id == site_id))}


def _insert_ignoring_conflicts(backend: str, table: sa.Table) -> Any:
    dialect = postgresql if backend == "postgresql" else sqlite
    return dialect.insert(table).on_conflict_do_nothing()


def _get_or_create(conn: sa.Connection, backend: str, table: sa.Table,
                   values: Mapping[str, Any], where: Any) -> int:
    conn.execute(_insert_ignoring_conflicts(backend, table).values(**values))
    return conn.execute(sa.select(table.c.id).where(where)).scalar_one()


def _applications(campaign_id: int, ref: int, entry: Mapping[str, Any]) -> list[dict[str, Any]]:
    capable = entry.get("capable") if isinstance(entry.get("capable"), list) else []
    found: dict[str, dict[str, Any]] = {}
    for check in entry.get("applications") or []:
        if isinstance(check, Mapping) and isinstance(check.get("id"), str):
            found[check["id"]] = {"campaign_id": campaign_id, "link_ref": ref,
                                  "application": check["id"], "requested": True,
                                  "verdict": _text(check.get("verdict")),
                                  "capable": check["id"] in capable,
                                  "max_loss_db": _number(check.get("max_loss_db")),
                                  "worst_loss_db": _number(check.get("worst_loss_db"))}
    for app in capable:
        if isinstance(app, str) and app not in found:
            found[app] = {"campaign_id": campaign_id, "link_ref": ref, "application": app,
                          "requested": False, "verdict": None, "capable": True,
                          "max_loss_db": None, "worst_loss_db": None}
    return list(found.values())


def _result_values(campaign_id: int, ref: int, number: int, row: ResultRow) -> dict[str, Any]:
    return {"campaign_id": campaign_id, "link_ref": ref, "row_number": number,
            "strand": row.strand, "wavelength_nm": row.wavelength_nm,
            "direction": row.direction, "loss_db": row.loss_db, "tested_at": row.tested_at,
            "limit_db": row.limit_db, "margin_db": row.margin_db, "verdict": row.verdict,
            "flags": row.flags, "technician": row.technician, "instrument": row.instrument,
            "measured_length_m": row.measured_length_m, "note": row.note,
            "source_file": row.source_file, "source_line": row.source_line}


def _text(value: Any) -> str | None:
    return None if value is None else str(value)


def _number(value: Any) -> float | None:
    return float(value) if isinstance(value, (int, float)) and not isinstance(value, bool) \
        else None


def _integer(value: Any) -> int | None:
    return value if isinstance(value, int) and not isinstance(value, bool) else None


# ---------------------------------------------------------------- questions

def list_campaigns(archive: Archive) -> list[dict[str, Any]]:
    c = t.campaigns
    with archive.connect(write=False) as conn:
        if not archive.check_schema(conn, create=False):
            return []
        query = (sa.select(c.c.id, t.sites.c.name.label("site"), c.c.title, c.c.job_number,
                           c.c.contractor, c.c.tested_first, c.c.tested_last, c.c.links_total,
                           c.c.links_pass, c.c.links_fail, c.c.links_incomplete, c.c.source)
                 .join(t.sites, t.sites.c.id == c.c.site_id)
                 .order_by(t.sites.c.name, c.c.tested_last, c.c.id))
        return [dict(row._mapping) for row in conn.execute(query)]


def _latest_states() -> Any:
    """Subquery: each link's state in the campaign that tested it last."""
    s = t.link_states
    rank = sa.func.row_number().over(
        partition_by=s.c.link_ref,
        order_by=(sa.func.coalesce(s.c.tested_last, "").desc(), s.c.campaign_id.desc()))
    ranked = sa.select(s, rank.label("rank")).subquery("ranked")
    return sa.select(ranked).where(ranked.c.rank == 1).subquery("latest")


def latest_links(archive: Archive, *, site: str | None = None, fiber: str | None = None,
                 supports: str | None = None, verdict: str | None = None,
                 tested_before: str | None = None) -> list[dict[str, Any]]:
    """Each link's latest state, filtered; ``tested_before`` is ISO text (date or date-time)."""
    latest = _latest_states()
    query = (sa.select(t.sites.c.name.label("site"), t.links.c.link_id,
                       latest.c.fiber_type, latest.c.length_m, latest.c.verdict,
                       latest.c.worst_margin_db, latest.c.tested_last,
                       t.campaigns.c.title.label("campaign"), t.campaigns.c.contractor,
                       latest.c.campaign_id, latest.c.link_ref)
             .select_from(latest)
             .join(t.links, t.links.c.id == latest.c.link_ref)
             .join(t.sites, t.sites.c.id == t.links.c.site_id)
             .join(t.campaigns, t.campaigns.c.id == latest.c.campaign_id))
    if site:
        pattern = "%" + site.lower().replace("\\", "\\\\").replace("%", "\\%") \
            .replace("_", "\\_") + "%"
        query = query.where(sa.func.lower(t.sites.c.name).like(pattern, escape="\\"))
    if fiber:
        query = query.where(sa.func.lower(latest.c.fiber_type) == fiber.lower())
    if verdict:
        query = query.where(latest.c.verdict == verdict)
    if tested_before:
        query = query.where(latest.c.tested_last < tested_before)
    if supports:
        a = t.application_verdicts
        query = query.where(sa.exists().where(
            a.c.campaign_id == latest.c.campaign_id, a.c.link_ref == latest.c.link_ref,
            a.c.application == supports, a.c.capable.is_(True)))
    query = query.order_by(t.sites.c.name, t.links.c.link_id)
    with archive.connect(write=False) as conn:
        if not archive.check_schema(conn, create=False):
            return []
        rows = [dict(row._mapping) for row in conn.execute(query)]
        if rows:
            capable = _capable_sets(conn, {(r["campaign_id"], r["link_ref"]) for r in rows},
                                    supports)
            for row in rows:
                row["capable"] = capable.get((row["campaign_id"], row["link_ref"]), [])
    for row in rows:
        del row["campaign_id"], row["link_ref"]
    return rows


def _capable_sets(conn: sa.Connection, pairs: set[tuple[int, int]],
                  only: str | None) -> dict[tuple[int, int], list[str]]:
    a = t.application_verdicts
    campaigns = sorted({campaign for campaign, _ in pairs})
    query = sa.select(a.c.campaign_id, a.c.link_ref, a.c.application) \
        .where(a.c.capable.is_(True), a.c.campaign_id.in_(campaigns)).order_by(a.c.id)
    if only:
        query = query.where(a.c.application == only)
    found: dict[tuple[int, int], list[str]] = {}
    for row in conn.execute(query):
        if (row.campaign_id, row.link_ref) in pairs:
            found.setdefault((row.campaign_id, row.link_ref), []).append(row.application)
    return found


@dataclass(frozen=True)
class HistoryEntry:
    campaign_id: int
    title: str | None
    contractor: str | None
    tested_last: str | None
    verdict: str
    change: LinkChange  # against the campaign before (the first: against nothing)


def link_history(archive: Archive, site: str, link_id: str,
                 threshold_db: float) -> list[HistoryEntry]:
    """Every campaign's state of SITE's LINK_ID, oldest first, each compared with the one
    before it by the comparison rule of ``reportgen compare``.

    SITE is the site's whole name, or text found (any case) in exactly one site's name
    among the sites holding LINK_ID."""
    s, r, c = t.link_states, t.results, t.campaigns
    with archive.connect(write=False) as conn:
        if not archive.check_schema(conn, create=False):
            return []
        found = conn.execute(sa.select(t.links.c.id, t.sites.c.name)
                             .join(t.sites, t.sites.c.id == t.links.c.site_id)
                             .where(t.links.c.link_id == link_id)).all()
        exact = [row.id for row in found if row.name == site]
        near = [row.id for row in found if site.lower() in row.name.lower()]
        if exact or len(near) == 1:
            ref = (exact or near)[0]
        elif len(near) > 1:
            raise ArchiveError(f"site {site!r}: matches more than one site holding link "
                               f"{link_id!r}; give the whole site name")
        else:
            return []
        states = conn.execute(
            sa.select(s.c.campaign_id, s.c.verdict, s.c.tested_last, c.c.title, c.c.contractor)
            .join(c, c.c.id == s.c.campaign_id).where(s.c.link_ref == ref)
            .order_by(sa.func.coalesce(s.c.tested_last, ""), s.c.campaign_id)).all()
        rows = conn.execute(sa.select(r.c.campaign_id, r.c.strand, r.c.wavelength_nm,
                                      r.c.direction, r.c.loss_db, r.c.verdict)
                            .where(r.c.link_ref == ref).order_by(r.c.campaign_id,
                                                                 r.c.row_number)).all()
    by_campaign: dict[int, list[Any]] = {}
    for row in rows:
        by_campaign.setdefault(row.campaign_id, []).append(_KeyedRow(row))
    history = []
    before: Mapping[Key, float] | None = None
    verdict_before = None
    for state in states:
        after = counted_losses(by_campaign.get(state.campaign_id, []))
        history.append(HistoryEntry(state.campaign_id, state.title, state.contractor,
                                    state.tested_last, state.verdict,
                                    compare_link(link_id, before, after, verdict_before,
                                                 state.verdict, threshold_db)))
        before, verdict_before = after, state.verdict
    return history


class _KeyedRow:
    __slots__ = ("key", "verdict", "loss_db")

    def __init__(self, row: Any) -> None:
        self.key = (row.strand, row.wavelength_nm, row.direction)
        self.verdict = row.verdict
        self.loss_db = row.loss_db


def sites_with_link(archive: Archive, link_id: str) -> list[str]:
    with archive.connect(write=False) as conn:
        if not archive.check_schema(conn, create=False):
            return []
        return list(conn.execute(sa.select(t.sites.c.name)
                                 .join(t.links, t.links.c.site_id == t.sites.c.id)
                                 .where(t.links.c.link_id == link_id)
                                 .order_by(t.sites.c.name)).scalars())


def first_and_latest_losses(archive: Archive) -> list[dict[str, Any]]:
    """For links tested in more than one campaign: counted losses of the first and the latest
    campaign, for 'worst changes since built'."""
    s, r = t.link_states, t.results
    with archive.connect(write=False) as conn:
        if not archive.check_schema(conn, create=False):
            return []
        states = conn.execute(
            sa.select(s.c.link_ref, s.c.campaign_id, s.c.verdict, t.links.c.link_id,
                      t.sites.c.name.label("site"))
            .join(t.links, t.links.c.id == s.c.link_ref)
            .join(t.sites, t.sites.c.id == t.links.c.site_id)
            .order_by(s.c.link_ref, sa.func.coalesce(s.c.tested_last, ""), s.c.campaign_id)).all()
        ends: dict[int, list[Any]] = {}
        for state in states:
            ends.setdefault(state.link_ref, []).append(state)
        pairs = {ref: (seq[0], seq[-1]) for ref, seq in ends.items() if len(seq) > 1}
        if not pairs:
            return []
        wanted = {(state.campaign_id, ref) for ref, ends_ in pairs.items() for state in ends_}
        rows: dict[tuple[int, int], list[Any]] = {}
        for row in conn.execute(sa.select(r.c.campaign_id, r.c.link_ref, r.c.strand,
                                          r.c.wavelength_nm, r.c.direction, r.c.loss_db,
                                          r.c.verdict)
                                .where(r.c.link_ref.in_(sorted(pairs)))
                                .order_by(r.c.row_number)):
            if (row.campaign_id, row.link_ref) in wanted:
                rows.setdefault((row.campaign_id, row.link_ref), []).append(_KeyedRow(row))
    return [{"site": first.site, "link_id": first.link_id, "first": first, "latest": latest,
             "before": counted_losses(rows.get((first.campaign_id, ref), [])),
             "after": counted_losses(rows.get((latest.campaign_id, ref), []))}
            for ref, (first, latest) in pairs.items()]



@dataclass(frozen=True)
class RetestRecord:
    """How one contractor's handed-over links fared when tested again later."""

    contractor: str
    retests: int  # (link, later campaign) pairs: a link this contractor's campaign tested last
    failed: int  # ... whose next campaign's verdict is fail
    degraded: int  # ... with a result worse by more than the threshold (compare_link)

    @property
    def failed_or_degraded(self) -> int:
        return self.failed + self.degraded - self.both

    both: int = 0  # pairs counted in failed and in degraded

    def as_json(self) -> dict[str, Any]:
        return {"contractor": self.contractor, "retests": self.retests, "failed": self.failed,
                "degraded": self.degraded, "failed_or_degraded": self.failed_or_degraded}


def retest_records(archive: Archive, threshold_db: float) -> list[RetestRecord]:
    """Per contractor: how often a link it tested failed or degraded at the next campaign.

    Each link's campaigns are taken oldest first; every pair of consecutive campaigns is
    compared by the comparison rule of ``reportgen compare`` (:func:`compare_link`) and
    counted for the contractor of the earlier one (who handed the link over). Sorted by
    the share of pairs that failed or degraded, highest first.
    """
    s, r, c = t.link_states, t.results, t.campaigns
    with archive.connect(write=False) as conn:
        if not archive.check_schema(conn, create=False):
            return []
        states = conn.execute(
            sa.select(s.c.link_ref, s.c.campaign_id, s.c.verdict, c.c.contractor,
                      t.links.c.link_id)
            .join(c, c.c.id == s.c.campaign_id)
            .join(t.links, t.links.c.id == s.c.link_ref)
            .order_by(s.c.link_ref, sa.func.coalesce(s.c.tested_last, ""), s.c.campaign_id)).all()
        rows = conn.execute(sa.select(r.c.campaign_id, r.c.link_ref, r.c.strand, r.c.wavelength_nm,
                                      r.c.direction, r.c.loss_db, r.c.verdict)
                            .order_by(r.c.campaign_id, r.c.row_number)).all()
    by_pair: dict[tuple[int, int], list[Any]] = {}
    for row in rows:
        by_pair.setdefault((row.campaign_id, row.link_ref), []).append(_KeyedRow(row))
    sequences: dict[int, list[Any]] = {}
    for state in states:
        sequences.setdefault(state.link_ref, []).append(state)
    counts: dict[str, list[int]] = {}
    for ref, sequence in sequences.items():
        for earlier, later in zip(sequence, sequence[1:]):
            change = compare_link(
                earlier.link_id, counted_losses(by_pair.get((earlier.campaign_id, ref), [])),
                counted_losses(by_pair.get((later.campaign_id, ref), [])),
                earlier.verdict, later.verdict, threshold_db)
            failed = later.verdict == "fail"
            tally = counts.setdefault(earlier.contractor or "(contractor not recorded)",
                                      [0, 0, 0, 0])
            tally[0] += 1
            tally[1] += failed
            tally[2] += change.degraded
            tally[3] += failed and change.degraded
    records = [RetestRecord(name, *tally[:3], both=tally[3]) for name, tally in counts.items()]
    return sorted(records, key=lambda rec: (-rec.failed_or_degraded / rec.retests, rec.contractor))
