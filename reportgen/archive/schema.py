"""The archive's tables, its schema version and the ordered list of migrations.

Upgrade path (instead of Alembic; one small ordered list is enough for this schema):
``MIGRATIONS`` maps each schema version to the function that brings a database from the
version before it to that version. The version a database holds is the row
``schema_version`` of the table ``reportgen_archive``. ``upgrade`` applies, in one
transaction, every migration above the database's version; ``reportgen archive upgrade``
calls it. A database of a version above ``SCHEMA_VERSION`` (made by a newer reportgen) is
refused, never changed. To change the schema: add version N+1 to ``MIGRATIONS`` (create or
alter with SQLAlchemy core, in SQL both SQLite and PostgreSQL accept), raise
``SCHEMA_VERSION``, and add a test that upgrades a version-N database. Version 1 creates
the tables as defined in this module: before changing a table here, copy its version-1
definition into ``_create_v1`` so old databases are upgraded from what they really hold.

Version 2 added ``findings`` (summary.json's audit findings, docs/project-format.md §14).
"""
from __future__ import annotations

from collections.abc import Callable
from typing import Final

import sqlalchemy as sa

SCHEMA_VERSION: Final = 2
INFO_TABLE: Final = "reportgen_archive"

metadata = sa.MetaData()

info = sa.Table(
    INFO_TABLE, metadata,
    sa.Column("key", sa.String(64), primary_key=True),
    sa.Column("value", sa.Text, nullable=False),
)

sites = sa.Table(
    "sites", metadata,
    sa.Column("id", sa.Integer, primary_key=True),
    sa.Column("name", sa.Text, nullable=False, unique=True),
)

campaigns = sa.Table(
    "campaigns", metadata,
    sa.Column("id", sa.Integer, primary_key=True),
    sa.Column("digest", sa.String(64), nullable=False, unique=True),
    sa.Column("site_id", sa.Integer, sa.ForeignKey("sites.id"), nullable=False),
    sa.Column("title", sa.Text),
    sa.Column("job_number", sa.Text),
    sa.Column("customer", sa.Text),
    sa.Column("contractor", sa.Text),
    sa.Column("limits", sa.Text),
    sa.Column("reference_method", sa.Text),
    sa.Column("generated_at", sa.Text),
    sa.Column("generator", sa.Text),
    sa.Column("tested_first", sa.Text),  # ISO date-time text as in results.csv
    sa.Column("tested_last", sa.Text),
    sa.Column("links_total", sa.Integer, nullable=False),
    sa.Column("links_pass", sa.Integer, nullable=False),
    sa.Column("links_fail", sa.Integer, nullable=False),
    sa.Column("links_incomplete", sa.Integer, nullable=False),
    sa.Column("source", sa.Text),  # the folder it was added from, as given
)

links = sa.Table(
    "links", metadata,
    sa.Column("id", sa.Integer, primary_key=True),
    sa.Column("site_id", sa.Integer, sa.ForeignKey("sites.id"), nullable=False),
    sa.Column("link_id", sa.Text, nullable=False),
    sa.UniqueConstraint("site_id", "link_id"),
)

# A link's state in one campaign (its summary.json entry).
link_states = sa.Table(
    "link_states", metadata,
    sa.Column("id", sa.Integer, primary_key=True),
    sa.Column("campaign_id", sa.Integer, sa.ForeignKey("campaigns.id"), nullable=False),
    sa.Column("link_ref", sa.Integer, sa.ForeignKey("links.id"), nullable=False),
    sa.Column("position", sa.Integer, nullable=False),  # order in summary.json
    sa.Column("fiber_type", sa.Text),
    sa.Column("length_m", sa.Float),
    sa.Column("verdict", sa.Text, nullable=False),
    sa.Column("worst_margin_db", sa.Float),
    sa.Column("tested_last", sa.Text),  # the link's latest result in that campaign
    sa.UniqueConstraint("campaign_id", "link_ref"),
    sa.Index("ix_link_states_link", "link_ref", "tested_last"),
)

results = sa.Table(
    "results", metadata,
    sa.Column("id", sa.Integer, primary_key=True),
    sa.Column("campaign_id", sa.Integer, sa.ForeignKey("campaigns.id"), nullable=False),
    sa.Column("link_ref", sa.Integer, sa.ForeignKey("links.id"), nullable=False),
    sa.Column("row_number", sa.Integer, nullable=False),  # order in results.csv
    sa.Column("strand", sa.Integer, nullable=False),
    sa.Column("wavelength_nm", sa.Integer, nullable=False),
    sa.Column("direction", sa.Text, nullable=False),
    sa.Column("loss_db", sa.Float),
    sa.Column("tested_at", sa.Text),
    sa.Column("limit_db", sa.Float),
    sa.Column("margin_db", sa.Float),
    sa.Column("verdict", sa.Text, nullable=False),
    sa.Column("flags", sa.Text),
    sa.Column("technician", sa.Text),
    sa.Column("instrument", sa.Text),
    sa.Column("measured_length_m", sa.Float),
    sa.Column("note", sa.Text),
    sa.Column("source_file", sa.Text),
    sa.Column("source_line", sa.Integer),
    sa.Index("ix_results_link", "link_ref", "campaign_id"),
)

application_verdicts = sa.Table(
    "application_verdicts", metadata,
    sa.Column("id", sa.Integer, primary_key=True),
    sa.Column("campaign_id", sa.Integer, sa.ForeignKey("campaigns.id"), nullable=False),
    sa.Column("link_ref", sa.Integer, sa.ForeignKey("links.id"), nullable=False),
    sa.Column("application", sa.Text, nullable=False),
    sa.Column("requested", sa.Boolean, nullable=False),  # named in links.csv
    sa.Column("verdict", sa.Text),  # the check's verdict where requested
    sa.Column("capable", sa.Boolean, nullable=False),  # in summary.json's "capable" list
    sa.Column("max_loss_db", sa.Float),
    sa.Column("worst_loss_db", sa.Float),
    sa.Index("ix_applications", "application", "campaign_id", "link_ref"),
)

power_budgets = sa.Table(
    "power_budgets", metadata,
    sa.Column("id", sa.Integer, primary_key=True),
    sa.Column("campaign_id", sa.Integer, sa.ForeignKey("campaigns.id"), nullable=False),
    sa.Column("link_ref", sa.Integer, sa.ForeignKey("links.id"), nullable=False),
    sa.Column("transceiver", sa.Text),
    sa.Column("basis", sa.Text),
    sa.Column("wavelength_nm", sa.Integer),
    sa.Column("rx_min_dbm", sa.Float),
    sa.Column("rx_max_dbm", sa.Float),
    sa.Column("low_margin_db", sa.Float),
    sa.Column("high_margin_db", sa.Float),
    sa.Column("attenuator_db", sa.Float),
    sa.Column("verdict", sa.Text),
)

instruments = sa.Table(
    "instruments", metadata,
    sa.Column("id", sa.Integer, primary_key=True),
    sa.Column("campaign_id", sa.Integer, sa.ForeignKey("campaigns.id"), nullable=False),
    sa.Column("instrument_id", sa.Text, nullable=False),
    sa.Column("results", sa.Integer, nullable=False),  # result rows naming it
)

files = sa.Table(
    "files", metadata,
    sa.Column("id", sa.Integer, primary_key=True),
    sa.Column("campaign_id", sa.Integer, sa.ForeignKey("campaigns.id"), nullable=False),
    sa.Column("name", sa.Text, nullable=False),
    sa.Column("sha256", sa.String(64), nullable=False),
    sa.Column("size_bytes", sa.Integer, nullable=False),
)

# Audit findings of a campaign (summary.json "findings"); link_ref is empty for a finding on
# the whole project. evidence: the finding's evidence list as JSON text.
findings = sa.Table(
    "findings", metadata,
    sa.Column("id", sa.Integer, primary_key=True),
    sa.Column("campaign_id", sa.Integer, sa.ForeignKey("campaigns.id"), nullable=False),
    sa.Column("link_ref", sa.Integer, sa.ForeignKey("links.id")),
    sa.Column("rule", sa.Text, nullable=False),
    sa.Column("severity", sa.Text, nullable=False),
    sa.Column("message", sa.Text),
    sa.Column("evidence", sa.Text),
    sa.Index("ix_findings_rule", "rule", "severity"),
)

OUR_TABLES: Final = frozenset(metadata.tables)
V1_TABLES: Final = (info, sites, campaigns, links, link_states, results, application_verdicts,
                    power_budgets, instruments, files)


def _create_v1(connection: sa.Connection) -> None:
    metadata.create_all(connection, tables=list(V1_TABLES))


def _add_findings_v2(connection: sa.Connection) -> None:
    findings.create(connection, checkfirst=True)


MIGRATIONS: Final[dict[int, Callable[[sa.Connection], None]]] = {
    1: _create_v1,
    2: _add_findings_v2,
}
