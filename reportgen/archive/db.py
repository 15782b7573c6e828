"""Opening an archive: the URL, the connection, the schema check, clear errors.

The URL is ``--db``, else the ``REPORTGEN_DB`` environment variable, else
``reportgen-archive.sqlite`` in the current folder. A plain path is read as an SQLite file.
Every write runs in one transaction that holds the archive's write lock (SQLite:
``BEGIN IMMEDIATE``; PostgreSQL: a transaction-level advisory lock), so two ``add`` runs at
once store one campaign after the other and an interrupted run leaves nothing behind.
"""
from __future__ import annotations

import os
from collections.abc import Iterator, Mapping
from contextlib import contextmanager
from pathlib import Path
from typing import Final

import sqlalchemy as sa
from sqlalchemy import event, exc

from reportgen.archive import schema
from reportgen.errors import ReportgenError

ENV_VAR: Final = "REPORTGEN_DB"
DEFAULT_FILE: Final = "reportgen-archive.sqlite"
SQLITE_BUSY_TIMEOUT_MS: Final = 60_000
# pg_advisory_xact_lock key of the archive's write lock (any fixed number; "rga1" in hex).
PG_LOCK_KEY: Final = 0x72676131
SQLITE_MAGIC: Final = b"SQLite format 3\x00"


class ArchiveError(ReportgenError):
    """The archive cannot be used as asked; nothing was changed."""


def resolve_url(option: str | None, environ: Mapping[str, str] = os.environ) -> str:
    text = option or environ.get(ENV_VAR) or DEFAULT_FILE
    if "://" in text:
        return text
    return "sqlite:///" + str(Path(text).expanduser().absolute())


def describe(url: sa.URL) -> str:
    """The URL as shown in messages: without its password."""
    if url.get_backend_name() == "sqlite":
        return url.database or ":memory:"
    return url.render_as_string(hide_password=True)


class Archive:
    """An open archive database."""

    def __init__(self, url_text: str, *, create: bool) -> None:
        try:
            self.url = sa.make_url(url_text)
        except exc.ArgumentError as error:
            raise ArchiveError(f"database URL {url_text!r}: expected sqlite:///FILE, "
                               "postgresql+psycopg://USER@HOST:PORT/DATABASE or a file path") \
                from error
        self.name = describe(self.url)
        self.backend = self.url.get_backend_name()
        if self.backend not in ("sqlite", "postgresql"):
            raise ArchiveError(f"database {self.name}: expected SQLite or PostgreSQL "
                               f"(got {self.backend})")
        if self.backend == "postgresql" and self.url.drivername == "postgresql":
            self.url = self.url.set(drivername="postgresql+psycopg")
        if self.backend == "sqlite":
            self._check_sqlite_file(create)
            self.engine = sa.create_engine(self.url, poolclass=sa.pool.NullPool)
            event.listen(self.engine, "connect", _sqlite_connect)
            event.listen(self.engine, "begin", _sqlite_begin)
        else:
            try:
                self.engine = sa.create_engine(self.url, poolclass=sa.pool.NullPool,
                                               connect_args={"connect_timeout": 10})
            except (exc.ArgumentError, exc.NoSuchModuleError) as error:
                raise ArchiveError(f"database {self.name}: {error}") from error

    def _check_sqlite_file(self, create: bool) -> None:
        database = self.url.database
        if not database or database == ":memory:":
            return
        path = Path(database)
        if not path.exists():
            if not create:
                raise ArchiveError(f"{path}: no archive there yet; 'reportgen archive add' "
                                   "makes one (or give --db / set REPORTGEN_DB)")
            return
        if path.is_dir():
            raise ArchiveError(f"{path}: is a folder; expected an SQLite archive file")
        with path.open("rb") as handle:
            head = handle.read(len(SQLITE_MAGIC))
        if head and head != SQLITE_MAGIC:
            raise ArchiveError(f"{path}: not an SQLite database (damaged, or another kind of "
                               "file); nothing was changed")

    @contextmanager
    def connect(self, *, write: bool) -> Iterator[sa.Connection]:
        """One transaction; for writes it holds the write lock. Errors become ArchiveError."""
        try:
            with self.engine.connect() as connection:
                connection.execution_options(reportgen_write=write)
                with connection.begin():
                    if write and self.backend == "postgresql":
                        connection.execute(sa.select(sa.func.pg_advisory_xact_lock(PG_LOCK_KEY)))
                    yield connection
        except exc.OperationalError as error:
            raise ArchiveError(f"database {self.name}: cannot use it: "
                               f"{_first_line(error.orig)}; nothing was changed") from error
        except exc.DatabaseError as error:
            raise ArchiveError(f"database {self.name}: {_first_line(error.orig)} (damaged, or "
                               "not a database); nothing was changed") from error

    def check_schema(self, connection: sa.Connection, *, create: bool) -> int:
        """The schema version; creates the schema in an empty database when ``create``."""
        inspector = sa.inspect(connection)
        tables = set(inspector.get_table_names())
        if schema.INFO_TABLE not in tables:
            if tables:
                shown = ", ".join(sorted(tables)[:5])
                raise ArchiveError(f"database {self.name}: not a reportgen archive (it holds "
                                   f"other tables: {shown}); nothing was changed")
            if not create:
                return 0
            upgrade(connection, 0)
            return schema.SCHEMA_VERSION
        version = read_version(connection, self.name)
        if version > schema.SCHEMA_VERSION:
            raise ArchiveError(f"database {self.name}: schema version {version} was written by "
                               f"a newer reportgen (this one knows up to version "
                               f"{schema.SCHEMA_VERSION}); upgrade reportgen. Nothing was "
                               "changed")
        if version < schema.SCHEMA_VERSION:
            raise ArchiveError(f"database {self.name}: schema version {version} is older than "
                               f"this reportgen's ({schema.SCHEMA_VERSION}); run "
                               "'reportgen archive upgrade' first")
        return version

    def upgrade(self) -> tuple[int, int]:
        """Bring the database to SCHEMA_VERSION; returns (version before, version after)."""
        with self.connect(write=True) as connection:
            tables = set(sa.inspect(connection).get_table_names())
            if schema.INFO_TABLE not in tables and tables:
                self.check_schema(connection, create=False)  # raises: foreign tables
            before = read_version(connection, self.name) if tables else 0
            if before > schema.SCHEMA_VERSION:
                self.check_schema(connection, create=False)  # raises: newer schema
            upgrade(connection, before)
            return before, schema.SCHEMA_VERSION


def read_version(connection: sa.Connection, name: str) -> int:
    value = connection.execute(sa.select(schema.info.c.value)
                               .where(schema.info.c.key == "schema_version")).scalar()
    try:
        return int(value)
    except (TypeError, ValueError):
        raise ArchiveError(f"database {name}: its schema version is unreadable "
                           f"({value!r}); nothing was changed") from None


def upgrade(connection: sa.Connection, version: int) -> None:
    """Apply every migration above ``version``, in order, inside the caller's transaction."""
    for target in sorted(schema.MIGRATIONS):
        if target > version:
            schema.MIGRATIONS[target](connection)
            table = schema.info
            if connection.execute(sa.select(table.c.key)
                                  .where(table.c.key == "schema_version")).first():
                connection.execute(table.update().where(table.c.key == "schema_version")
                                   .values(value=str(target)))
            else:
                connection.execute(table.insert().values(key="schema_version", value=str(target)))


def _first_line(error: BaseException | None) -> str:
    text = str(error or "").strip()
    return text.splitlines()[0] if text else type(error).__name__


def _sqlite_connect(dbapi_connection, _record) -> None:  # type: ignore[no-untyped-def]
    # Let SQLAlchemy's "begin" event issue BEGIN IMMEDIATE itself (pysqlite would defer it).
    dbapi_connection.isolation_level = None
    cursor = dbapi_connection.cursor()
    cursor.execute(f"PRAGMA busy_timeout = {SQLITE_BUSY_TIMEOUT_MS}")
    cursor.execute("PRAGMA foreign_keys = ON")
    cursor.close()


def _sqlite_begin(connection: sa.Connection) -> None:
    # writes take SQLite's write lock at once (two adds queue up instead of failing later);
    # reads start a plain transaction and do not wait for a running add
    write = connection.get_execution_options().get("reportgen_write", True)
    connection.exec_driver_sql("BEGIN IMMEDIATE" if write else "BEGIN")
