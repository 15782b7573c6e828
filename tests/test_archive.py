"""The archive: every test runs against SQLite and a real PostgreSQL server (conftest.py:
REPORTGEN_TEST_PG, else a throwaway cluster, else the PostgreSQL cases skip with the reason).

Campaigns are small invented build outputs (tests/builders.write_build_output) with values
typed here; expected answers are worked by hand from them.
"""
from __future__ import annotations

import json
import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest
import sqlalchemy as sa

from reportgen import cli
from reportgen.archive import schema
from tests.builders import write_build_output

REPO = Path(__file__).resolve().parent.parent
SITE_N = "North depot (invented)"
SITE_S = "South yard (invented)"


def _rows(loss, when, verdict="pass"):
    """Four results of one strand: 850/1300 nm, both directions, all with one loss."""
    return [(1, wl, d, loss + (0.1 if wl == 1300 else 0), when, verdict)
            for wl in (850, 1300) for d in ("ab", "ba")]


@pytest.fixture
def campaigns(tmp_path):
    """Three campaigns: North 2024 (N-1, N-2), North 2031 re-test (N-1 worse, N-3 new),
    South 2019 (S-1 failing)."""
    north_2024 = write_build_output(tmp_path / "north-2024", [
        ("N-1", "pass", "OM4", ["10GBASE-SR", "100GBASE-SR4"], _rows(1.00, "2024-03-01T09:00")),
        ("N-2", "pass", "OS2", ["10GBASE-LR"], _rows(0.50, "2024-03-01T10:00")),
    ], site=SITE_N, title="North handover", contractor="Alder Fiber (invented)")
    north_2031 = write_build_output(tmp_path / "north-2031", [
        ("N-1", "pass", "OM4", ["10GBASE-SR"], _rows(1.70, "2031-06-01T09:00")),
        ("N-3", "pass", "OM4", ["10GBASE-SR"], _rows(0.90, "2031-06-01T11:00")),
    ], site=SITE_N, title="North re-test", contractor="Birch Testing (invented)")
    south_2019 = write_build_output(tmp_path / "south-2019", [
        ("S-1", "fail", "OM3", [], _rows(3.00, "2019-05-01T09:00", "fail")),
    ], site=SITE_S, title="South handover", contractor="Alder Fiber (invented)")
    return north_2024, north_2031, south_2019


def run(capsys, *args):
    status = cli.main([str(a) for a in args])
    captured = capsys.readouterr()
    return status, captured.out, captured.err


def _json(capsys, *args):
    status, out, err = run(capsys, *args)
    assert status == 0, err
    return json.loads(out)


def test_add_is_idempotent_and_list_shows_campaigns(archive_url, campaigns, capsys):
    north_2024, north_2031, south_2019 = campaigns
    status, out, err = run(capsys, "archive", "add", north_2024, north_2031, south_2019,
                           "--db", archive_url)
    assert status == 0, err
    status, out, _ = run(capsys, "archive", "add", north_2024, "--db", archive_url)
    assert status == 0 and "already in the archive" in out
    listed = _json(capsys, "archive", "list", "--db", archive_url, "--format", "json")
    assert [(c["site"], c["links_total"], c["links_fail"]) for c in listed] == [
        (SITE_N, 2, 0), (SITE_N, 2, 0), (SITE_S, 1, 1)]
    assert [c["tested_last"] for c in listed][:2] == ["2024-03-01T10:00", "2031-06-01T11:00"]


def test_terminal_list_is_a_table_when_it_fits_else_one_block_per_campaign(
        archive_url, campaigns, capsys, monkeypatch):
    run(capsys, "archive", "add", *campaigns, "--db", archive_url)
    monkeypatch.setenv("COLUMNS", "200")
    status, wide, _ = run(capsys, "archive", "list", "--db", archive_url)
    assert status == 0
    heading = next(line for line in wide.splitlines() if "contractor" in line)
    for label in ("id", "site", "campaign", "contractor", "tested", "links", "pass", "fail",
                  "incomplete"):
        assert label in heading
    assert "2024-03-01 to 2024-03-01" not in wide and "2031-06-01T" not in wide  # dates, one span
    monkeypatch.setenv("COLUMNS", "60")
    status, narrow, _ = run(capsys, "archive", "list", "--db", archive_url)
    assert status == 0
    assert "┃" not in narrow  # no table squeezed into slivers
    blocks = narrow.strip().split("\n\n")
    assert len(blocks) == 3
    assert blocks[1].splitlines()[1].split(None, 1) == ["site", SITE_N]
    assert "contractor  Birch Testing (invented)" in blocks[1]


def test_links_latest_state_and_filters(archive_url, campaigns, capsys):
    run(capsys, "archive", "add", *campaigns, "--db", archive_url)
    base = ["archive", "links", "--db", archive_url, "--format", "json"]
    every = _json(capsys, *base)
    # N-1's latest state is the 2031 re-test: it no longer shows 100GBASE-SR4.
    assert [(r["site"], r["link_id"], r["tested_last"][:4]) for r in every] == [
        (SITE_N, "N-1", "2031"), (SITE_N, "N-2", "2024"), (SITE_N, "N-3", "2031"),
        (SITE_S, "S-1", "2019")]
    assert _json(capsys, *base, "--supports", "100GBASE-SR4") == []
    assert [r["link_id"] for r in _json(capsys, *base, "--supports", "10GBASE-SR")] == \
        ["N-1", "N-3"]
    assert [r["link_id"] for r in _json(capsys, *base, "--verdict", "fail")] == ["S-1"]
    assert [r["link_id"] for r in _json(capsys, *base, "--fiber", "os2")] == ["N-2"]
    assert [r["link_id"] for r in _json(capsys, *base, "--site", "south")] == ["S-1"]
    assert [r["link_id"] for r in _json(capsys, *base, "--tested-before", "2025-01-01")] == \
        ["N-2", "S-1"]
    status, out, _ = run(capsys, "archive", "links", "--db", archive_url, "--format", "csv")
    assert status == 0 and out.splitlines()[0].startswith("site,link_id,fiber_type")
    # S-1 (worst margin -0.5 dB in tests/builders.py): numbers stay numbers, no apostrophe
    assert ",OM3,100.0,fail,-0.5," in out


def test_history_oldest_first_with_the_change(archive_url, campaigns, capsys):
    run(capsys, "archive", "add", *campaigns, "--db", archive_url)
    document = _json(capsys, "archive", "history", "north", "N-1", "--db", archive_url,
                     "--format", "json")
    entries = document["campaigns"]
    assert [e["title"] for e in entries] == ["North handover", "North re-test"]
    assert entries[0]["status"] == "added"
    # 1.70 - 1.00 = +0.70 dB at every result (hand arithmetic), above the 0.6 dB default
    assert (entries[1]["worst_change_db"], entries[1]["degraded"]) == (0.70, True)
    status, _, err = run(capsys, "archive", "history", SITE_S, "N-1", "--db", archive_url)
    assert status == 2 and "not in the archive; it is known at: North depot" in err


def test_retests_rank_contractors_by_what_failed_or_degraded_later(archive_url, campaigns,
                                                                    tmp_path, capsys):
    # A fourth campaign: South 2032 re-tests S-1 (now passing, 3.00 -> 2.50 dB, better).
    south_2032 = write_build_output(tmp_path / "south-2032", [
        ("S-1", "pass", "OM3", [], _rows(2.50, "2032-05-01T09:00")),
    ], site=SITE_S, title="South re-test", contractor="Birch Testing (invented)")
    run(capsys, "archive", "add", *campaigns, south_2032, "--db", archive_url)
    document = _json(capsys, "archive", "retests", "--db", archive_url, "--format", "json")
    # Hand count: Alder handed over N-1 (re-tested 2031: +0.70 dB > 0.60 dB, degraded, pass)
    # and S-1 (re-tested 2032: pass, -0.50 dB, neither): 2 pairs, 0 failed, 1 degraded.
    # Birch's campaigns were never followed by another: no pair. N-2 and N-3: one campaign.
    assert document["contractors"] == [
        {"contractor": "Alder Fiber (invented)", "retests": 2, "failed": 0, "degraded": 1,
         "failed_or_degraded": 1}]
    # with a 1.0 dB threshold the +0.70 dB change is no longer degraded
    document = _json(capsys, "archive", "retests", "--db", archive_url, "--format", "json",
                     "--threshold", "1.0")
    assert document["contractors"][0]["degraded"] == 0
    status, out, _ = run(capsys, "archive", "retests", "--db", archive_url, "--format", "csv")
    assert status == 0 and out.splitlines() == [
        "contractor,retests,failed,degraded,failed_or_degraded", "Alder Fiber (invented),2,0,1,1"]


def test_due_counts_age_from_the_latest_test(archive_url, campaigns, capsys):
    run(capsys, "archive", "add", *campaigns, "--db", archive_url)
    # as of 2029-06-01, 5 years back is 2024-06-01: N-2 (2024-03-01) and S-1 (2019) are due;
    # N-1 was re-tested in 2031 (hand arithmetic on the dates above)
    due = _json(capsys, "archive", "due", "--older-than", "5y", "--as-of", "2029-06-01",
                "--db", archive_url, "--format", "json")
    assert [r["link_id"] for r in due] == ["N-2", "S-1"]
    due = _json(capsys, "archive", "due", "--older-than", "6y", "--as-of", "2029-06-01",
                "--db", archive_url, "--format", "json")
    assert [r["link_id"] for r in due] == ["S-1"]  # cut-off 2023-06-01
    status, _, err = run(capsys, "archive", "due", "--older-than", "five", "--db", archive_url)
    assert status == 2 and "expected a number and y, m or d" in err


def test_estate_report(archive_url, campaigns, capsys, tmp_path):
    run(capsys, "archive", "add", *campaigns, "--db", archive_url)
    status, _, err = run(capsys, "archive", "report", "-o", tmp_path / "estate", "--db",
                         archive_url, "--as-of", "2032-01-01", "--no-pdf")
    assert status == 0, err
    html = (tmp_path / "estate" / "estate.html").read_text(encoding="utf-8")
    for heading in ("Sites", "What the estate can carry", "Due for re-test",
                    "Largest changes since first tested", "Safety"):
        assert f">{heading}</h2>" in html
    assert "+0.70" in html  # N-1: 1.70 - 1.00 dB


def test_hostile_link_ids_and_site_names_are_stored_as_text(archive_url, tmp_path, capsys):
    link = "L'1\"; DROP TABLE links;--"
    site = "Site'); DELETE FROM sites;--"
    folder = write_build_output(tmp_path / "h", [(link, "pass", "OM4", ["10GBASE-SR"],
                                                  _rows(1.0, "2026-01-01T09:00"))], site=site)
    formula = write_build_output(tmp_path / "f", [("=HYPERLINK(1)", "pass", "OM4", [],
                                                   _rows(1.0, "2026-01-02T09:00"))], site=site)
    status, _, err = run(capsys, "archive", "add", folder, formula, "--db", archive_url)
    assert status == 0, err
    rows = _json(capsys, "archive", "links", "--db", archive_url, "--format", "json")
    assert sorted((r["site"], r["link_id"]) for r in rows) == sorted(
        [(site, link), (site, "=HYPERLINK(1)")])
    status, out, _ = run(capsys, "archive", "links", "--db", archive_url, "--format", "csv")
    assert "'=HYPERLINK(1)" in out  # neutralised for spreadsheets, as results.csv does
    entries = _json(capsys, "archive", "history", site, link, "--db", archive_url,
                    "--format", "json")["campaigns"]
    assert len(entries) == 1
    status, _, err = run(capsys, "archive", "report", "-o", tmp_path / "estate", "--no-pdf",
                         "--db", archive_url)
    assert status == 0, err
    html = (tmp_path / "estate" / "estate.html").read_text(encoding="utf-8")
    assert "Site&#39;); DELETE FROM sites;--" in html


def test_upgrade_creates_and_reports_the_schema_version(archive_url, capsys):
    status, out, err = run(capsys, "archive", "upgrade", "--db", archive_url)
    assert status == 0, err
    assert f"schema version 0 -> {schema.SCHEMA_VERSION}" in out
    status, out, _ = run(capsys, "archive", "upgrade", "--db", archive_url)
    assert "up to date" in out
    engine = sa.create_engine(archive_url, poolclass=sa.pool.NullPool)
    with engine.connect() as connection:
        version = connection.execute(sa.text(
            "SELECT value FROM reportgen_archive WHERE key = :key"), {"key": "schema_version"}
        ).scalar()
        tables = set(sa.inspect(connection).get_table_names())
    engine.dispose()
    assert version == str(schema.SCHEMA_VERSION)
    assert {"sites", "campaigns", "links", "results", "application_verdicts", "power_budgets",
            "instruments", "files", "findings"} <= tables


def test_older_schema_asks_for_upgrade_then_works(archive_url, campaigns, capsys):
    run(capsys, "archive", "add", campaigns[0], "--db", archive_url)
    engine = sa.create_engine(archive_url, poolclass=sa.pool.NullPool)
    with engine.begin() as connection:
        connection.execute(sa.text("UPDATE reportgen_archive SET value = '0' "
                                   "WHERE key = 'schema_version'"))
    engine.dispose()
    status, _, err = run(capsys, "archive", "add", campaigns[1], "--db", archive_url)
    assert status == 2 and "run 'reportgen archive upgrade' first" in err
    status, out, _ = run(capsys, "archive", "upgrade", "--db", archive_url)
    assert status == 0 and f"schema version 0 -> {schema.SCHEMA_VERSION}" in out
    status, _, err = run(capsys, "archive", "add", campaigns[1], "--db", archive_url)
    assert status == 0, err
    assert len(_json(capsys, "archive", "list", "--db", archive_url, "--format", "json")) == 2


def test_version_1_archive_is_upgraded_to_hold_findings(archive_url, tmp_path, capsys):
    """Version 2 added the findings table: a version-1 archive is refused until upgraded."""
    engine = sa.create_engine(archive_url, poolclass=sa.pool.NullPool)
    with engine.begin() as connection:
        schema.MIGRATIONS[1](connection)
        connection.execute(schema.info.insert().values(key="schema_version", value="1"))
    folder = write_build_output(tmp_path / "f", [("F-1", "pass", "OM4", [],
                                                   _rows(1.0, "2026-03-01T09:00"))])
    summary = json.loads((folder / "summary.json").read_text(encoding="utf-8"))
    summary["findings"] = [  # the shape of docs/project-format.md §10.2 "findings" (invented)
        {"rule": "test-rule", "severity": "error", "link_id": "F-1", "message": "One.",
         "evidence": [{"file": "links.csv", "line": 2}]},
        {"rule": "test-rule", "severity": "note", "link_id": None, "message": "Two.",
         "evidence": []}]
    (folder / "summary.json").write_text(json.dumps(summary), encoding="utf-8")
    status, _, err = run(capsys, "archive", "add", folder, "--db", archive_url)
    assert status == 2 and "schema version 1 is older" in err
    status, out, _ = run(capsys, "archive", "upgrade", "--db", archive_url)
    assert status == 0 and "schema version 1 -> 2" in out
    status, _, err = run(capsys, "archive", "add", folder, "--db", archive_url)
    assert status == 0, err
    with engine.connect() as connection:
        rows = connection.execute(sa.text(
            "SELECT f.severity, l.link_id FROM findings f LEFT JOIN links l ON l.id = f.link_ref "
            "ORDER BY f.id")).all()
    engine.dispose()
    assert [tuple(row) for row in rows] == [("error", "F-1"), ("note", None)]


def test_a_project_folder_is_not_added_as_a_build(tmp_path, capsys):
    status, _, err = run(capsys, "archive", "add", REPO / "demo_project", "--db",
                         tmp_path / "a.sqlite")
    assert status == 2
    assert "this is a project folder: build it first" in err
    assert not (tmp_path / "a.sqlite").exists()


def test_newer_schema_is_refused_and_left_alone(archive_url, campaigns, capsys):
    run(capsys, "archive", "add", campaigns[0], "--db", archive_url)
    engine = sa.create_engine(archive_url, poolclass=sa.pool.NullPool)
    with engine.begin() as connection:
        connection.execute(sa.text("UPDATE reportgen_archive SET value = '99' "
                                   "WHERE key = 'schema_version'"))
    for command in (["add", campaigns[1]], ["list"], ["upgrade"]):
        status, _, err = run(capsys, "archive", *command, "--db", archive_url)
        assert status == 2
        assert "schema version 99 was written by a newer reportgen" in err
    with engine.connect() as connection:
        assert connection.execute(sa.text("SELECT count(*) FROM campaigns")).scalar() == 1
    engine.dispose()


def test_foreign_database_is_refused_and_left_alone(archive_url, campaigns, capsys):
    engine = sa.create_engine(archive_url, poolclass=sa.pool.NullPool)
    with engine.begin() as connection:
        connection.execute(sa.text("CREATE TABLE invoices (id INTEGER PRIMARY KEY)"))
    status, _, err = run(capsys, "archive", "add", campaigns[0], "--db", archive_url)
    assert status == 2
    assert "not a reportgen archive (it holds other tables: invoices)" in err
    with engine.connect() as connection:
        assert set(sa.inspect(connection).get_table_names()) == {"invoices"}
    engine.dispose()


def test_damaged_and_foreign_sqlite_files(tmp_path, campaigns, capsys):
    junk = tmp_path / "junk.sqlite"
    junk.write_bytes(b"PK\x03\x04 this is a zip file, not a database" * 20)
    before = junk.read_bytes()
    status, _, err = run(capsys, "archive", "add", campaigns[0], "--db", junk)
    assert status == 2 and "not an SQLite database" in err and junk.read_bytes() == before
    # a real archive cut short: the header survives, the pages do not
    good = tmp_path / "good.sqlite"
    run(capsys, "archive", "add", campaigns[0], "--db", good)
    cut = tmp_path / "cut.sqlite"
    cut.write_bytes(good.read_bytes()[:1024] + b"\xff" * 3072)
    before = cut.read_bytes()
    status, _, err = run(capsys, "archive", "list", "--db", cut)
    assert status == 2 and "nothing was changed" in err and cut.read_bytes() == before
    # reading an archive that is not there: an error, and no file made
    status, _, err = run(capsys, "archive", "list", "--db", tmp_path / "none.sqlite")
    assert status == 2 and "no archive there yet" in err
    assert not (tmp_path / "none.sqlite").exists()


def test_db_from_environment_then_default_file(tmp_path, campaigns, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    monkeypatch.delenv("REPORTGEN_DB", raising=False)
    run(capsys, "archive", "add", campaigns[0])
    assert (tmp_path / "reportgen-archive.sqlite").is_file()
    monkeypatch.setenv("REPORTGEN_DB", str(tmp_path / "env.sqlite"))
    run(capsys, "archive", "add", campaigns[1])
    with sqlite3.connect(tmp_path / "env.sqlite") as connection:
        assert connection.execute("SELECT count(*) FROM campaigns").fetchone() == (1,)


def test_wrong_password_is_a_clear_error(pg_server, capsys):
    url = sa.make_url(pg_server).set(username="pwcheck", password="not-the-password")
    status, _, err = run(capsys, "archive", "list", "--db",
                         url.render_as_string(hide_password=False))
    if status == 0:
        pytest.skip("this PostgreSQL server does not ask role pwcheck for a password "
                    "(tests/pg_cluster.sh sets that up)")
    assert status == 2
    assert "password authentication failed" in err
    assert "not-the-password" not in err  # the URL is shown without its password


# ---------------------------------------------------------------- processes

def _env():
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(filter(None, [str(REPO), env.get("PYTHONPATH")]))
    return env


def _add_process(folder, url):
    return subprocess.Popen([sys.executable, "-m", "reportgen", "archive", "add", str(folder),
                             "--db", url], cwd=REPO, env=_env(), stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, start_new_session=True)


def _counts(url):
    engine = sa.create_engine(url, poolclass=sa.pool.NullPool)
    try:
        with engine.connect() as connection:
            return {table: connection.execute(sa.text(f"SELECT count(*) FROM {table}")).scalar()
                    for table in ("campaigns", "link_states", "results", "files")}
    finally:
        engine.dispose()


@pytest.mark.slow
def test_two_adds_at_once_store_each_campaign_once(archive_url, campaigns, capsys):
    north_2024, north_2031, _ = campaigns
    # the same campaign twice and another one, all at once, on an empty database
    processes = [_add_process(folder, archive_url)
                 for folder in (north_2024, north_2024, north_2031)]
    for process in processes:
        _, err = process.communicate(timeout=300)
        assert process.returncode == 0, err
    # 2 campaigns; link states 2 + 2; results 8 + 8; 2 files each (hand count)
    assert _counts(archive_url) == {"campaigns": 2, "link_states": 4, "results": 16,
                                    "files": 4}


def _in_transaction(url) -> bool:
    """Whether an add holds the archive's write transaction open right now."""
    parsed = sa.make_url(url)
    if parsed.get_backend_name() == "sqlite":
        # rollback-journal mode: the journal exists while a write transaction is open
        return Path(parsed.database + "-journal").exists()
    engine = sa.create_engine(url, poolclass=sa.pool.NullPool)
    try:
        with engine.connect() as connection:
            return bool(connection.execute(sa.text(
                "SELECT count(*) FROM pg_locks WHERE locktype = 'advisory' AND granted")).scalar())
    finally:
        engine.dispose()


@pytest.mark.slow
def test_sigkill_during_add_leaves_the_campaign_whole_or_absent(archive_url, tmp_path):
    links = [(f"K-{n:04d}", "pass", "OM4", ["10GBASE-SR"],
              _rows(1.0 + n / 10000, "2026-02-01T09:00")) for n in range(1500)]
    folder = write_build_output(tmp_path / "big", links)
    whole = {"campaigns": 1, "link_states": 1500, "results": 6000, "files": 2}  # hand count
    outcomes = []
    for extra in (0.0, 0.05, 0.15, None):  # seconds after the transaction opened; None: no kill
        process = _add_process(folder, archive_url)
        opened = False
        while process.poll() is None and not opened:
            opened = _in_transaction(archive_url)
        if extra is not None and process.poll() is None:
            time.sleep(extra)  # a moment inside the transaction, not a timing assertion
            os.killpg(process.pid, signal.SIGKILL)
        process.communicate(timeout=300)
        try:
            counts = _counts(archive_url)
        except sa.exc.DatabaseError:  # killed inside the transaction that creates the schema
            counts = {k: 0 for k in whole}
        assert counts in ({k: 0 for k in whole}, whole), (extra, counts)
        outcomes.append((opened, counts == whole))
    # each kill came inside the add's transaction (unless the add had already finished and
    # stored the campaign whole); the run left alone stored it whole
    assert all(opened or done for opened, done in outcomes[:3])
    assert outcomes[-1][1] is True


@pytest.mark.slow
def test_a_report_pdf_adds_the_build_it_carries(archive_url, tmp_path, capsys, monkeypatch):
    # The archive-grade report.pdf embeds summary.json and results.csv: adding the PDF and
    # then its build folder stores the build once (same digest of the two files).
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1924992000")  # 2031-01-01, after the fixture's tests
    out = tmp_path / "out"
    status, _, err = run(capsys, "build", REPO / "tests" / "fixtures" / "small_project", "-o", out)
    assert status == 0, err
    status, out_text, err = run(capsys, "archive", "add", out / "report.pdf", "--db", archive_url)
    assert status == 0 and "added as campaign 1" in out_text, err
    status, out_text, _ = run(capsys, "archive", "add", out, "--db", archive_url)
    assert status == 0 and "already in the archive (campaign 1" in out_text
    not_ours = tmp_path / "other.pdf"
    not_ours.write_bytes(b"%PDF-1.4\n%%EOF\n")
    status, _, err = run(capsys, "archive", "add", not_ours, "--db", archive_url)
    assert status == 2 and "other.pdf" in err
