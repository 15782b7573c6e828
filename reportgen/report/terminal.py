"""Terminal output of the command line (rich tables, progress bar). No computation."""
from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager

import pandas as pd
from rich import box
from rich.console import Console
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn
from rich.table import Table
from rich.text import Text

from reportgen.inputs.limits import builtin_ids, describe_rows, load_builtin_limit_set
from reportgen.errors import ReportgenError
from reportgen.units import format_db, m_to_ft

_CONTROL = {code: f"\\x{code:02x}" for code in [*range(0x20), 0x7F]}


def plain(text: str) -> Text:
    """Input text for the terminal: no markup, control characters shown as escapes."""
    return Text(str(text).translate(_CONTROL))


# Verdict words shown in the terminal; style only adds emphasis, the word carries the meaning.
_VERDICT_STYLE = {"pass": "", "fail": "bold reverse", "incomplete": "bold"}


def _missing_text(outcome, limit: int = 4) -> str:
    parts = [
        f"s{m.strand} {m.wavelength_nm} {'' if m.direction == 'any' else m.direction}".rstrip()
        + (" (invalid)" if m.reason == "invalid" else "")
        for m in outcome.missing[:limit]
    ]
    more = len(outcome.missing) - limit
    return ", ".join(parts) + (f", +{more} more" if more > 0 else "")


# Above this many links, ``check`` lists only the links that need action unless asked.
FULL_TABLE_MAX_LINKS = 100


def print_check_table(console: Console, outcome, show_all: bool = False) -> None:
    """Links with verdict, worst margin and what is missing, then totals."""
    project = outcome.project
    table = Table(title=plain(f"{project.info.title} — limits {project.limits.id}, "
                              f"{project.testing.reference_method.value} reference"),
                  title_justify="left", header_style="bold")
    table.add_column("link")
    table.add_column("fiber")
    table.add_column("length", justify="right")
    table.add_column("verdict")
    table.add_column("worst margin", justify="right")
    table.add_column("missing")
    links = {link.link_id: link for link in project.links}
    unit = project.testing.units.value
    listed = outcome.judgement.links
    if not show_all and len(listed) > FULL_TABLE_MAX_LINKS:
        listed = [item for item in listed if item.verdict.value != "pass"]
        table.caption = (f"{len(outcome.judgement.links) - len(listed)} passing links not "
                         f"listed (reportgen check --all lists every link)")
        table.caption_justify = "left"
    for item in listed:
        link = links[item.link_id]
        length = link.length_m if unit == "m" else m_to_ft(link.length_m)
        margin = "—" if item.worst_margin_db is None else f"{_signed_db(item.worst_margin_db)} dB"
        table.add_row(plain(item.link_id), link.fiber_type.value, f"{length:,.0f} {unit}",
                      item.verdict.value.upper(), margin, _missing_text(item),
                      style=_VERDICT_STYLE[item.verdict.value] or None)
    console.print(table)
    totals = outcome.judgement.totals
    console.print(f"{totals['links']} links: {totals['pass']} pass, {totals['fail']} fail, "
                  f"{totals['incomplete']} incomplete")
    print_findings(console, outcome.findings, show_all=show_all)


def print_findings(console: Console, findings, show_all: bool = False) -> None:
    """Audit findings after the link table: severity, link, rule and message, then counts.

    Above FULL_TABLE_MAX_LINKS findings only the errors are listed unless ``show_all``.
    """
    from reportgen.report.messages_findings import finding_text

    listed = findings.items
    if not show_all and len(listed) > FULL_TABLE_MAX_LINKS:
        listed = [f for f in listed if f.severity.value == "error"]
    if listed:
        table = Table(title="Audit findings", title_justify="left", header_style="bold")
        if len(listed) < len(findings.items):
            table.caption = (f"{len(findings.items) - len(listed)} warnings and notes not listed "
                             "(reportgen check --all lists every finding)")
            table.caption_justify = "left"
        table.add_column("severity")
        table.add_column("link")
        table.add_column("rule")
        table.add_column("finding")
        for finding in listed:
            severity = finding.severity.value
            table.add_row(severity.upper() if severity == "error" else severity,
                          plain(finding.link_id or "(project)"), finding.rule,
                          plain(finding_text(finding)),
                          style="bold" if severity == "error" else None)
        console.print(table)
    counts = findings.counts
    console.print(f"Audit findings: {counts['error']} error, {counts['warning']} warning, "
                  f"{counts['note']} note")


def print_limit_sets(console: Console) -> None:
    table = Table(header_style="bold", title="Built-in limit sets", title_justify="left")
    table.add_column("id")
    table.add_column("title")
    table.add_column("source")
    for set_id in builtin_ids():
        limits = load_builtin_limit_set(set_id)
        table.add_row(limits.id, limits.title, limits.source)
    console.print(table)


def print_limit_set(console: Console, set_id: str) -> None:
    try:
        limits = load_builtin_limit_set(set_id)
    except KeyError:
        raise ReportgenError(f"no built-in limit set {set_id!r}; expected one of "
                             f"{', '.join(builtin_ids())}") from None
    console.print(f"[bold]{limits.title}[/bold] ({limits.id})")
    console.print(f"Source: {limits.source}", markup=False)
    console.print(f"Mated connection: {format_db(limits.connection_db)} dB — "
                  f"{limits.source_for('connection_db')}", markup=False)
    console.print(f"Splice: {format_db(limits.splice_db)} dB — {limits.source_for('splice_db')}",
                  markup=False)
    table = Table(header_style="bold")
    for column in ("cable", "fiber", "λ nm", "dB/km", "source"):
        table.add_column(column, justify="right" if column in ("λ nm", "dB/km") else "left")
    for row in describe_rows(limits):
        table.add_row(row["table"], row["fiber_type"], str(row["wavelength_nm"]),
                      format_db(row["attenuation_db_per_km"]), row["source"])
    console.print(table)
    for note in limits.notes:
        console.print(f"Note: {note}", markup=False)


def print_applications(console: Console) -> None:
    """The application table: limits per fiber type, then each entry's source and status."""
    from reportgen.inputs.apptable import describe_rows as application_rows

    rows = application_rows()
    table = Table(header_style="bold", title="Applications (maximum channel insertion loss "
                  "and length per fiber type)", title_justify="left")
    for column, justify in (("id", "left"), ("fiber types", "left"), ("tested at nm", "left"),
                            ("max length m", "right"), ("min dB", "right"),
                            ("max dB", "right")):
        table.add_column(column, justify=justify, no_wrap=column == "id")
    for row in rows:
        table.add_row(row["id"], row["fiber_types"], row["test_wavelengths_nm"],
                      "none set" if row["max_length_m"] is None else f"{row['max_length_m']:,.0f}", _optional_db(row["min_loss_db"]),
                      _optional_db(row["max_loss_db"]))
    console.print(table)
    console.print("Sources:")
    for row in rows:
        console.print(f"  {row['id']} on {row['fiber_types']}: {row['source']} — {row['status']}",
                      markup=False)


def _optional_db(value: float | None) -> str:
    return "" if value is None else format_db(value)


def _signed_db(value: float) -> str:
    """A margin with its sign, rounded as in every output: +0.59, -0.58."""
    text = format_db(value)
    return text if text.startswith("-") else f"+{text}"


@contextmanager
def progress_bar(console: Console, enabled: bool = True) -> Iterator:
    """A progress callback ``(done, total)`` shown as a bar on a terminal."""
    if not enabled or not console.is_terminal:
        yield None
        return
    bar = Progress(TextColumn("rendering report"), BarColumn(), MofNCompleteColumn(),
                   TimeElapsedColumn(), console=console, transient=True)
    task = bar.add_task("render", total=None)

    def update(done: int, total: int) -> None:
        bar.update(task, completed=done, total=total)

    with bar:
        yield update


def print_imports(console: Console, outcome, rows: int = 5) -> None:
    """Per file read through ``imports:``: entry, profile, rows read, the mapping used, the
    headers left unmapped and the first rows as they are judged (links: as they are read)."""
    project = outcome.project
    if not project.imports:
        console.print("project.yaml has no imports: entries (links.csv and results/*.csv are read "
                      "as they are).", markup=False)
        return
    judged = outcome.judgement.results
    links = {link.link_id: link for link in project.links}
    for source in project.imports:
        sheet = f", sheet {source.sheet}" if source.sheet is not None else ""
        console.print(plain(f"imports[{source.entry}]: {source.file}{sheet} — profile {source.profile}, "
                            f"as {source.kind}"), style="bold")
        made = (f" → {source.rows_made} {source.kind} rows" if source.rows_made != source.rows_read
                else "")
        console.print(plain(f"  {source.rows_read} rows read{made}"))
        mapping = Table(show_header=True, header_style="bold", box=None, padding=(0, 2, 0, 2))
        mapping.add_column("our field")
        mapping.add_column("read from")
        for name, header in source.mapping:
            mapping.add_row(plain(name), plain(header))
        console.print(mapping)
        unmapped = ", ".join(source.unmapped) if source.unmapped else "none"
        console.print(plain(f"  columns not mapped (ignored): {unmapped}"))
        if source.kind == "links":
            table = Table(title=plain(f"first {rows} links as read"), title_justify="left",
                          header_style="bold")
            for name in ("link_id", "end_a", "end_b", "fiber", "length", "strands"):
                table.add_column(name)
            for link_id in source.link_ids[:rows]:
                link = links[link_id]
                table.add_row(plain(link.link_id), plain(link.end_a), plain(link.end_b),
                              link.fiber_type.value, f"{link.length_m:g} m", str(link.strands))
        else:
            table = Table(title=plain(f"first {rows} results as judged"), title_justify="left",
                          header_style="bold", box=box.SIMPLE_HEAD, padding=(0, 1), pad_edge=False,
                          collapse_padding=True)
            mine = judged[judged["source_file"] == source.file]
            if source.sheet is not None:
                mine = mine[mine["source"].str.startswith(f"{source.file}[{source.sheet}]:")]
            link_width = min(16, max([4, *mine["link_id"].head(rows).str.len()]))
            for name, width in (("row" if source.sheet is not None else "line", 4), ("link", link_width),
                                ("s", 1), ("nm", 4), ("dir", 3), ("loss", 5), ("tested", 16),
                                ("limit", 5), ("margin", 6), ("verdict", 10)):
                table.add_column(name, justify="right" if name in ("loss", "limit", "margin") else "left",
                                 min_width=width, no_wrap=True)
            for row in mine.head(rows).itertuples(index=False):
                table.add_row(str(row.source_line), plain(row.link_id), str(row.strand),
                              str(row.wavelength_nm), row.direction, format_db(row.loss_db),
                              pd.Timestamp(row.tested_at).strftime("%Y-%m-%d %H:%M"),
                              _db_or_blank(row.limit_db),
                              _db_or_blank(row.margin_db), str(row.verdict))
        console.print(table)
        console.print()


def _db_or_blank(value: float) -> str:
    return "" if value != value else format_db(value)  # NaN: no limit (link not judged)
