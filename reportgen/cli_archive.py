"""Command line of the archive and of campaign comparison: ``reportgen archive ...`` and
``reportgen compare``. Registered on the main group by reportgen/cli.py (``register``)."""
from __future__ import annotations

import csv
import io
import json
from collections.abc import Callable, Sequence
from datetime import date, datetime
from pathlib import Path
from typing import Any

import click
from rich.console import Console
from rich.table import Table

from reportgen import __version__
from reportgen.errors import ReportgenError

DB_OPTION = click.option("--db", "db_url", metavar="URL",
                         help="Archive database: sqlite:///FILE, postgresql+psycopg://USER@HOST/DB "
                              "or a file path (default: $REPORTGEN_DB, else "
                              "reportgen-archive.sqlite here).")
COMPARE_OUTPUTS = ("compare.html", "compare.pdf", "compare.csv", "compare.json")
PDF_OPTION = click.option("--no-pdf", is_flag=True,
                          help="Write the HTML without its PDF (faster for large campaigns).")
THRESHOLD_HELP = ("Flag a result as degraded when its loss rose by more than this [dB] "
                  "(default 0.6: twice the uncertainty of the difference of two tests each "
                  "uncertain by ±0.2 dB).")


def _out() -> Console:
    return Console(highlight=False, soft_wrap=True)


def _archive(db_url: str | None, *, create: bool = False):  # type: ignore[no-untyped-def]
    from reportgen.archive.db import Archive, resolve_url

    return Archive(resolve_url(db_url), create=create)


def _threshold() -> Any:
    from reportgen.archive.compare import DEFAULT_THRESHOLD_DB

    return click.option("--threshold", "threshold_db", type=click.FloatRange(min=0),
                        default=DEFAULT_THRESHOLD_DB, show_default=True, metavar="DB",
                        help=THRESHOLD_HELP)


@click.group()
def archive() -> None:
    """Keep many campaigns in one database and ask questions across them."""


@archive.command()
@click.argument("paths", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("--site", help="Site name to file the campaign under (default: project.site of "
                             "its summary.json, else its title).")
@DB_OPTION
def add(paths: Sequence[Path], site: str | None, db_url: str | None) -> None:
    """Add builds, each in one transaction: output folders (summary.json + results.csv) or
    report.pdf files, which carry both inside.

    The same build added again is recognised by the digest of its two files and stored once,
    whether it came as its folder or as its report.pdf.
    """
    from reportgen.archive.campaign import read_build
    from reportgen.archive.store import add_campaign

    campaigns = [read_build(path) for path in paths]  # all checked before any write
    store = _archive(db_url, create=True)
    for campaign in campaigns:
        added = add_campaign(store, campaign, site)
        if added.already:
            _out().print(f"{campaign.label}: already in the archive (campaign {added.campaign_id}"
                         f", site {added.site}); nothing added", markup=False)
        else:
            _out().print(f"{campaign.label}: added as campaign {added.campaign_id} at site "
                         f"{added.site}: {added.links} links, {added.results} results",
                         markup=False)


@archive.command()
@DB_OPTION
def upgrade(db_url: str | None) -> None:
    """Create the archive's tables, or bring an older archive to this version's schema."""
    store = _archive(db_url, create=True)
    before, after = store.upgrade()
    _out().print(f"{store.name}: schema version {before} -> {after}"
                 if before != after else f"{store.name}: schema version {after}, up to date",
                 markup=False)


@archive.command(name="list")
@DB_OPTION
@click.option("--format", "fmt", type=click.Choice(["table", "csv", "json"]), default="table",
              show_default=True)
def list_(db_url: str | None, fmt: str) -> None:
    """List the campaigns: site, campaign, contractor, test dates, link totals."""
    from reportgen.archive.store import list_campaigns

    rows = list_campaigns(_archive(db_url))
    _emit(rows, fmt, ["id", "site", "title", "contractor", "tested_first", "tested_last",
                      "links_total", "links_pass", "links_fail", "links_incomplete"],
          "No campaigns in the archive yet.")


@archive.command()
@DB_OPTION
@click.option("--site", help="Sites whose name contains this text (any case).")
@click.option("--fiber", help="Fiber type, e.g. OM4 or OS2.")
@click.option("--supports", metavar="APP", help="Links able to carry this application "
                                                "(an id of 'reportgen applications').")
@click.option("--verdict", type=click.Choice(["pass", "fail", "incomplete"]))
@click.option("--tested-before", type=click.DateTime(["%Y-%m-%d"]), metavar="YYYY-MM-DD",
              help="Links whose latest test is before this date.")
@click.option("--format", "fmt", type=click.Choice(["table", "csv", "json"]), default="table",
              show_default=True)
def links(db_url: str | None, site: str | None, fiber: str | None, supports: str | None,
          verdict: str | None, tested_before: datetime | None, fmt: str) -> None:
    """Each link's latest state (the campaign that tested it last), filtered."""
    from reportgen.archive.store import latest_links

    rows = latest_links(_archive(db_url), site=site, fiber=fiber, supports=supports,
                        verdict=verdict, tested_before=tested_before.date().isoformat()
                        if tested_before else None)
    for row in rows:
        row["capable"] = ";".join(row["capable"]) if fmt != "json" else row["capable"]
    _emit(rows, fmt, ["site", "link_id", "fiber_type", "length_m", "verdict", "worst_margin_db",
                      "tested_last", "campaign", "contractor", "capable"],
          "No link matches.")


@archive.command()
@click.argument("site")
@click.argument("link_id")
@DB_OPTION
@_threshold()
@click.option("--format", "fmt", type=click.Choice(["table", "json"]), default="table",
              show_default=True)
def history(site: str, link_id: str, db_url: str | None, threshold_db: float, fmt: str) -> None:
    """Every campaign's results for LINK_ID at SITE, oldest first, with the change in loss."""
    from reportgen.archive.html import _db, _signed_db
    from reportgen.archive.store import link_history, sites_with_link

    store = _archive(db_url)
    entries = link_history(store, site, link_id, threshold_db)
    if not entries:
        sites = sites_with_link(store, link_id)
        hint = f"; it is known at: {'; '.join(sites)}" if sites else ""
        raise ReportgenError(f"link {link_id!r} at site {site!r}: not in the archive{hint}")
    if fmt == "json":
        click.echo(json.dumps({"format": 1, "site": site, "link_id": link_id,
                               "threshold_db": threshold_db,
                               "campaigns": [{"campaign_id": e.campaign_id, "title": e.title,
                                              "contractor": e.contractor,
                                              "tested_last": e.tested_last, "verdict": e.verdict,
                                              **{k: v for k, v in e.change.as_json().items()
                                                 if k != "link_id"}}
                                             for e in entries]},
                              indent=2, ensure_ascii=False))
        return
    console = _out()
    for entry in entries:
        change = entry.change
        console.print(f"campaign {entry.campaign_id}: {entry.title or '-'} "
                      f"({entry.contractor or '-'}), last tested {entry.tested_last or '-'}, "
                      f"verdict {entry.verdict}"
                      + ("" if change.status == "added" else
                         f"; largest change {_signed_db(change.worst_change_db)} dB"
                         + (" DEGRADED" if change.degraded else "")), markup=False)
        table = Table(show_header=True, header_style="bold")
        for column in ("strand", "nm", "dir", "loss dB", "change dB"):
            table.add_column(column, justify="right")
        for r in change.results:
            if r.loss_after_db is None:
                continue
            table.add_row(str(r.strand), str(r.wavelength_nm), r.direction, _db(r.loss_after_db),
                          "" if r.change_db is None else _signed_db(r.change_db)
                          + (" worse" if r.degraded else ""))
        console.print(table)


@archive.command()
@DB_OPTION
@_threshold()
@click.option("--format", "fmt", type=click.Choice(["table", "csv", "json"]), default="table",
              show_default=True)
def retests(db_url: str | None, threshold_db: float, fmt: str) -> None:
    """Per contractor: how the links it handed over fared at the next campaign.

    Every link tested in more than one campaign gives one pair per campaign after the first;
    the pair counts for the contractor of the earlier campaign. A pair failed when the later
    campaign's verdict is fail, and degraded when a result is worse by more than the threshold
    (the comparison of 'reportgen compare'). Highest share of failed or degraded first.
    """
    from reportgen.archive.store import retest_records

    records = retest_records(_archive(db_url), threshold_db)
    rows = [record.as_json() for record in records]
    if fmt == "json":
        click.echo(json.dumps({"format": 1, "threshold_db": threshold_db, "contractors": rows},
                              indent=2, ensure_ascii=False))
        return
    if fmt == "csv":
        buffer = io.StringIO()
        writer = csv.DictWriter(buffer, fieldnames=list(RETEST_COLUMNS), lineterminator="\n")
        writer.writeheader()
        writer.writerows(rows)
        click.echo(buffer.getvalue(), nl=False)
        return
    if not rows:
        _out().print("No link of the archive was tested in more than one campaign.")
        return
    table = Table(show_header=True, header_style="bold")
    for column in RETEST_COLUMNS:
        table.add_column(column.replace("_", " "), justify="left" if column == "contractor"
                         else "right")
    for row in rows:
        table.add_row(*(str(row[column]) for column in RETEST_COLUMNS))
    _out().print(table)


RETEST_COLUMNS = ("contractor", "retests", "failed", "degraded", "failed_or_degraded")


def parse_age(text: str, today: date) -> date:
    """'5y', '18m' or '90d' before TODAY."""
    cleaned = text.strip().lower()
    number, unit = cleaned[:-1].strip(), cleaned[-1:]
    if unit not in ("y", "m", "d") or not number.isascii() or not number.isdigit():
        raise click.BadParameter(f"expected a number and y, m or d, e.g. 5y, 18m, 90d "
                                 f"(got {text!r})")
    amount = int(number)
    if unit == "d":
        return date.fromordinal(today.toordinal() - amount)
    months = today.year * 12 + today.month - 1 - (amount * 12 if unit == "y" else amount)
    year, month = divmod(months, 12)
    month += 1
    for day in (today.day, 30, 29, 28):
        try:
            return date(year, month, day)
        except ValueError:
            continue
    raise AssertionError("unreachable")


AS_OF = click.option("--as-of", type=click.DateTime(["%Y-%m-%d"]), metavar="YYYY-MM-DD",
                     help="Count ages from this date (default: today).")


@archive.command()
@DB_OPTION
@click.option("--older-than", "age", default="5y", show_default=True, metavar="AGE",
              help="Age of the latest test: 5y, 18m or 90d.")
@AS_OF
@click.option("--format", "fmt", type=click.Choice(["table", "csv", "json"]), default="table",
              show_default=True)
def due(db_url: str | None, age: str, as_of: datetime | None, fmt: str) -> None:
    """Links whose latest test is older than AGE: due for re-test."""
    from reportgen.archive.store import latest_links

    today = as_of.date() if as_of else date.today()
    cutoff = parse_age(age, today)
    rows = latest_links(_archive(db_url), tested_before=cutoff.isoformat())
    for row in rows:
        row["capable"] = ";".join(row["capable"]) if fmt != "json" else row["capable"]
    _emit(rows, fmt, ["site", "link_id", "fiber_type", "verdict", "tested_last", "campaign",
                      "contractor"], f"No link was last tested before {cutoff.isoformat()}.")


@archive.command()
@DB_OPTION
@click.option("-o", "--output", type=click.Path(path_type=Path), required=True,
              help="Output folder for estate.html.")
@click.option("--older-than", "age", default="5y", show_default=True, metavar="AGE",
              help="Age after which a link is listed as due for re-test.")
@AS_OF
@_threshold()
@PDF_OPTION
def report(db_url: str | None, output: Path, age: str, as_of: datetime | None,
           threshold_db: float, no_pdf: bool) -> None:
    """Write an estate overview (estate.html, estate.pdf): sites, verdicts, capability, due
    re-tests, largest changes."""
    from reportgen.archive import html, store
    from reportgen.archive.compare import compare_link
    from reportgen.export.atomic import write_outputs
    from reportgen.report.messages_appendix import SAFETY
    from reportgen.report.render import templates_dir

    archive_ = _archive(db_url)
    today = as_of.date() if as_of else date.today()
    cutoff = parse_age(age, today)
    campaigns = store.list_campaigns(archive_)
    latest = store.latest_links(archive_)
    sites = []
    for name in sorted({row["site"] for row in latest} | {c["site"] for c in campaigns}):
        rows = [row for row in latest if row["site"] == name]
        sites.append({"name": name, "links": len(rows), "counts": html.verdict_counts(rows),
                      "campaigns": sum(1 for c in campaigns if c["site"] == name),
                      "last_tested": max((r["tested_last"] for r in rows if r["tested_last"]),
                                         default=None)})
    capability: dict[str, int] = {}
    for row in latest:
        for app in row["capable"]:
            capability[app] = capability.get(app, 0) + 1
    changes = []
    for pair in store.first_and_latest_losses(archive_):
        change = compare_link(pair["link_id"], pair["before"], pair["after"],
                              pair["first"].verdict, pair["latest"].verdict, threshold_db)
        if change.worst_change_db is not None:
            changes.append({"site": pair["site"], "change": change})
    changes.sort(key=lambda row: (-row["change"].worst_change_db, row["site"],
                                  row["change"].link_id))
    text = html.render(templates_dir(), "estate.html.j2", {
        "title": "Fiber estate overview", "campaigns": campaigns, "links": latest,
        "sites": sites, "as_of": today.isoformat(),
        "capability": [{"application": app, "links": count}
                       for app, count in sorted(capability.items())],
        "due": [row for row in latest if (row["tested_last"] or "") < cutoff.isoformat()],
        "due_before": cutoff.isoformat(), "due_age": age, "changes": changes[:50],
        "threshold_db": threshold_db, "safety": SAFETY, "generator": f"reportgen {__version__}"})
    outputs = {"estate.html": text.encode("utf-8")}
    if not no_pdf:
        outputs["estate.pdf"] = _pdf(text, "Fiber estate overview")
    write_outputs(output, outputs, ours=("estate.html", "estate.pdf"))
    _out().print(f"Written to {output}: {', '.join(outputs)}", markup=False)




def _pdf(html_text: str, title: str) -> bytes:
    """The HTML page as a PDF, through the report's PDF machinery (one part)."""
    from reportgen import pipeline
    from reportgen.pdf.engine import render_pdf
    from reportgen.report.render import templates_dir

    return render_pdf(lambda page_of, total: html_text, [], root=templates_dir(), title=title,
                      created=pipeline.build_now(None), workers=1, xml_first=True)


def _emit(rows: list[dict[str, Any]], fmt: str, columns: list[str], empty: str) -> None:
    if fmt == "json":
        click.echo(json.dumps([{k: row.get(k) for k in columns} for row in rows], indent=2,
                              ensure_ascii=False))
        return
    if fmt == "csv":
        from reportgen.export.results_csv import neutralise_cell

        buffer = io.StringIO()
        writer = csv.writer(buffer, lineterminator="\n")
        writer.writerow(columns)
        for row in rows:
            # text that a spreadsheet would run is neutralised; numbers are written as numbers
            writer.writerow(["" if row.get(k) is None else neutralise_cell(row[k])
                             if isinstance(row[k], str) else row[k] for k in columns])
        click.echo(buffer.getvalue(), nl=False)
        return
    if not rows:
        _out().print(empty, markup=False)
        return
    # On a terminal: the two test dates as one column, short headings, counts right-aligned and
    # never wrapped, so the table fits an 80-column terminal (csv and json keep every field).
    if "tested_first" in columns and "tested_last" in columns:
        rows = [{**row, "tested": _date_span(row.get("tested_first"), row.get("tested_last"))}
                for row in rows]
        at = columns.index("tested_first")
        columns = [*columns[:at], "tested", *[c for c in columns[at:] if c not in ("tested_first",
                                                                                  "tested_last")]]
    table = Table(show_header=True, header_style="bold")
    for column in columns:
        counts = all(isinstance(row.get(column), int) or row.get(column) is None for row in rows)
        label = _heading(column)
        if counts:
            table.add_column(label, justify="right", no_wrap=True)
        else:  # wrapped between words; headings never broken
            table.add_column(label, min_width=max(map(len, label.split())), overflow="fold")
    for row in rows:
        table.add_row(*(_cell(row.get(k)) for k in columns))
    out = _out()
    # the table's natural width: each column as wide as its longest cell, plus rules and padding
    natural = 1 + sum(3 + max(len(_heading(column)), *(len(_cell(row.get(column))) for row in rows))
                      for column in columns)
    if natural <= out.width:
        out.print(table)
        return
    # Too wide for this terminal: one block per row, a field per line, instead of a table
    # squeezed into slivers.
    width = max(len(_heading(column)) for column in columns)
    for number, row in enumerate(rows):
        if number:
            out.print()
        for column in columns:
            out.print(f"{_heading(column):<{width}}  {_cell(row.get(column))}", markup=False, highlight=False)


# Headings of the terminal tables where the field name is long; csv and json use the field names.
TABLE_HEADINGS = {"links_total": "links", "links_pass": "pass", "links_fail": "fail",
                  "links_incomplete": "incomplete", "title": "campaign", "tested_last": "last tested",
                  "worst_margin_db": "worst margin dB", "length_m": "length m", "fiber_type": "fiber"}


def _heading(column: str) -> str:
    return TABLE_HEADINGS.get(column, column.replace("_", " "))


def _date_span(first: str | None, last: str | None) -> str:
    first, last = (_cell(value) for value in (first, last))
    return first if first == last or not last else f"{first} to {last}" if first else last


def _cell(value: Any) -> str:
    """A value as the terminal table shows it: a test time as its date (csv and json keep it)."""
    if value is None:
        return ""
    text = str(value)
    if len(text) > 10 and text[4:5] == "-" and text[10:11] == "T" and text[:4].isdigit():
        return text[:10]
    return text


# ---------------------------------------------------------------- compare

def load_campaign(path: Path):  # type: ignore[no-untyped-def]
    """A build output folder as it is, or a project folder built in memory (nothing written)."""
    from reportgen.archive.campaign import parse_campaign, read_build_folder

    if (path / "project.yaml").is_file():
        from reportgen import pipeline
        from reportgen.export.results_csv import results_csv_bytes
        from reportgen.export.summary import json_bytes

        outcome = pipeline.compute(pipeline.validate_only(path))
        now = pipeline.build_now(None)
        return parse_campaign(str(path), json_bytes(pipeline.summary_document(outcome, now,
                                                                               __version__)),
                              results_csv_bytes(outcome.judgement.results))
    return read_build_folder(path)


@click.command()
@click.argument("baseline", type=click.Path(path_type=Path))
@click.argument("retest", type=click.Path(path_type=Path))
@click.option("-o", "--output", type=click.Path(path_type=Path),
              help="Output folder (default: ./compare).")
@_threshold()
@PDF_OPTION
def compare(baseline: Path, retest: Path, output: Path | None, threshold_db: float,
            no_pdf: bool) -> None:
    """Compare two campaigns link by link: compare.html, compare.pdf, compare.csv, compare.json.

    BASELINE and RETEST are build output folders (summary.json + results.csv) or project
    folders (built in memory).
    """
    from reportgen.archive import html
    from reportgen.archive.compare import (comparison_csv_bytes, comparison_json,
                                           comparison_json_bytes, compare_campaigns)
    from reportgen.export.atomic import write_outputs
    from reportgen.report.messages_appendix import SAFETY
    from reportgen.report.render import templates_dir

    before, after = load_campaign(baseline), load_campaign(retest)
    changes = compare_campaigns(before, after, threshold_db)
    document = comparison_json(changes, threshold_db, str(baseline), str(retest))
    text = html.render(templates_dir(), "compare.html.j2", {
        "title": "Campaign comparison", "baseline": _describe(before),
        "retest": _describe(after), "threshold_db": threshold_db,
        "threshold_basis": "twice the uncertainty of the difference of two tests each "
                           "uncertain by ±0.2 dB" if threshold_db == 0.6 else "as given",
        "totals": document["totals"], "links": document["links"],
        "changed": [link for link in document["links"]
                    if link["degraded"] or (link["status"] == "changed"
                                            and link["verdict_before"] != link["verdict_after"])],
        "safety": SAFETY, "generator": f"reportgen {__version__}"})
    out = output or Path("compare")
    outputs = {"compare.html": text.encode("utf-8")}
    if not no_pdf:
        outputs["compare.pdf"] = _pdf(text, "Campaign comparison")
    outputs["compare.csv"] = comparison_csv_bytes(changes)
    outputs["compare.json"] = comparison_json_bytes(document)
    write_outputs(out, outputs, ours=COMPARE_OUTPUTS)
    totals = document["totals"]
    _out().print(f"{len(changes)} links: {totals['same']} same, {totals['changed']} changed, "
                 f"{totals['added']} added, {totals['removed']} removed; {totals['degraded']} "
                 f"degraded by more than {threshold_db} dB. Written to {out}: "
                 + ", ".join(outputs), markup=False)


def _describe(campaign) -> str:  # type: ignore[no-untyped-def]
    project = campaign.project
    parts = [str(project.get(k)) for k in ("title", "contractor") if project.get(k)]
    tested = f"tested {campaign.tested_first} to {campaign.tested_last}" \
        if campaign.tested_first else "no test dates"
    return f"{campaign.label}: " + ", ".join(parts + [tested])


def register(group: click.Group, flag_options: Callable[[], list[click.Option]]) -> None:
    """Add ``archive`` and ``compare`` to GROUP; every command takes -v/--debug too."""
    for command in (archive, *archive.commands.values(), compare):
        # the whole first paragraph of the help in listings, as the main group does
        command.short_help = " ".join((command.help or "").split("\n\n")[0].split())
    for command in (*archive.commands.values(), compare):
        command.params.extend(flag_options())
    archive.params.extend(flag_options())
    group.add_command(archive)
    group.add_command(compare)
