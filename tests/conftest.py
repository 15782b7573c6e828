"""Shared fixtures for the test suite, and the --update-golden option."""
from __future__ import annotations

import difflib
from collections.abc import Callable
from pathlib import Path

import pytest

GOLDEN_DIR = Path(__file__).resolve().parent / "golden"
# Test data are dated in 2030 (invented). Builds and checks in the tests run on a clock set
# after them (SOURCE_DATE_EPOCH, 2031-01-01T00:00Z), so the audit rule "result dated after
# the report date" does not fire on every test project; a test may set its own clock.
TEST_CLOCK_EPOCH = "1924992000"
UPDATE_GOLDEN = "python -m pytest -q tests/test_golden.py --update-golden"


def pytest_addoption(parser: pytest.Parser) -> None:
    parser.addoption("--update-golden", action="store_true", default=False,
                     help="rewrite the golden files in tests/golden/ from the current output "
                          "instead of comparing with them; review the diff before committing")


@pytest.fixture(autouse=True)
def test_clock(monkeypatch: pytest.MonkeyPatch) -> None:
    """Every test runs with SOURCE_DATE_EPOCH = TEST_CLOCK_EPOCH unless it sets its own."""
    monkeypatch.setenv("SOURCE_DATE_EPOCH", TEST_CLOCK_EPOCH)


@pytest.fixture
def golden(request: pytest.FixtureRequest) -> Callable[[str, str], None]:
    """``golden(name, text)``: ``text`` must equal the reviewed file tests/golden/<name>.

    With ``--update-golden`` the file is rewritten from ``text`` instead; a difference
    fails the test with a unified diff (reviewed file first, then the current output).
    """
    update = request.config.getoption("--update-golden")

    def check(name: str, text: str) -> None:
        path = GOLDEN_DIR / name
        if update:
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_bytes(text.encode("utf-8"))
            return
        if not path.exists():
            pytest.fail(f"tests/golden/{name} does not exist; create it with: {UPDATE_GOLDEN}",
                        pytrace=False)
        expected = path.read_bytes().decode("utf-8")
        if text != expected:
            diff = "".join(difflib.unified_diff(
                _tag_lines(expected), _tag_lines(text),
                fromfile=f"tests/golden/{name} (reviewed)", tofile=f"{name} (rendered now)"))
            pytest.fail(f"the output differs from tests/golden/{name} (diff with a line break "
                        f"between adjacent tags, for reading):\n{diff}\n"
                        f"If the change is intended, rewrite the file ({UPDATE_GOLDEN}), "
                        f"review `git diff tests/golden/` and commit it.", pytrace=False)

    return check


def _tag_lines(text: str) -> list[str]:
    """Lines to diff: a link sheet is one long line of HTML, so break between tags too."""
    return text.replace("><", ">\n<").splitlines(keepends=True)

# A minimal valid project folder (invented data, for tests only). Files given to
# make_project() replace these or are added beside them; None removes one.
MINIMAL_PROJECT: dict[str, str] = {
    "project.yaml": (
        "project:\n"
        "  title: Test backbone\n"
        "  contractor: {name: Test Cabling}\n"
        "testing:\n"
        "  limits: tia-568.3-d\n"
        "  reference_method: one-cord\n"
        "components:\n"
        "  split-1x8: {loss_db: 10.5, description: test splitter}\n"
        "transceivers:\n"
        "  sr: {wavelength_nm: 850, tx_min_dbm: -7.3, tx_max_dbm: -1.0,\n"
        "       rx_sensitivity_dbm: -9.9, rx_overload_dbm: -1.0}\n"
        "instruments:\n"
        "  - {id: SRC-1, kind: light-source, model: T-1, serial: '00417', calibration_due: 2030-03-01}\n"
        "  - {id: PM-1, kind: power-meter}\n"
    ),
    "links.csv": (
        "link_id,end_a,end_b,fiber_type,length_m,strands\n"
        "L1,Room 1,Room 2,OM4,120,2\n"
        "L2,Room 1,Hut 3,OS2,1500,1\n"
    ),
    "results/day1.csv": (
        "link_id,strand,wavelength_nm,direction,loss_db,tested_at,instrument\n"
        "L1,1,850,ab,1.20,2030-01-15T09:00,SRC-1;PM-1\n"
        "L2,1,1310,ab,1.05,2030-01-15T10:00,SRC-1\n"
    ),
}


@pytest.fixture
def make_project(tmp_path: Path) -> Callable[[dict[str, str | bytes | None]], Path]:
    """Write MINIMAL_PROJECT into tmp_path/project; ``files`` (text or bytes) replace or add files."""

    def make(files: dict[str, str | bytes | None] | None = None) -> Path:
        root = tmp_path / "project"
        merged = {**MINIMAL_PROJECT, **(files or {})}
        for name, content in merged.items():
            if content is None:
                continue
            path = root / name
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_bytes(content.encode("utf-8") if isinstance(content, str) else content)
        root.mkdir(parents=True, exist_ok=True)
        return root

    return make


# ---------------------------------------------------------------- archive databases
# The archive tests run against SQLite and a real PostgreSQL server: REPORTGEN_TEST_PG (a
# URL, set by .ci/run), else a throwaway cluster started here with tests/pg_cluster.sh when
# the server binaries are installed, else the PostgreSQL cases are skipped with the reason.
PG_ENV = "REPORTGEN_TEST_PG"
PG_SCRIPT = Path(__file__).resolve().parent / "pg_cluster.sh"


def _free_port() -> int:
    import socket

    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


@pytest.fixture(scope="session")
def pg_server(tmp_path_factory: pytest.TempPathFactory):  # type: ignore[no-untyped-def]
    """The URL of a PostgreSQL server's maintenance database, or a skip with the reason."""
    import os
    import shutil
    import subprocess
    import tempfile

    url = os.environ.get(PG_ENV)
    if url:
        yield url
        return
    folder = Path(tempfile.mkdtemp(prefix="reportgen-pg-"))
    port = _free_port()
    started = subprocess.run(["bash", str(PG_SCRIPT), "start", str(folder), str(port)],
                             capture_output=True, text=True, timeout=120)
    if started.returncode != 0:
        shutil.rmtree(folder, ignore_errors=True)
        why = ((started.stderr or started.stdout).strip().splitlines() or ["no reason given"])[-1]
        pytest.skip(f"PostgreSQL: {PG_ENV} is unset and no server could be started ({why})")
    try:
        yield f"postgresql+psycopg://postgres@127.0.0.1:{port}/postgres"
    finally:
        subprocess.run(["bash", str(PG_SCRIPT), "stop", str(folder)], capture_output=True,
                       timeout=120)
        shutil.rmtree(folder, ignore_errors=True)


@pytest.fixture(params=["sqlite", "postgresql"])
def archive_url(request: pytest.FixtureRequest, tmp_path: Path):  # type: ignore[no-untyped-def]
    """A fresh, empty archive database: an SQLite file, or a new PostgreSQL database."""
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path / 'archive.sqlite'}"
        return
    import uuid

    import sqlalchemy as sa

    server = sa.make_url(request.getfixturevalue("pg_server"))
    name = f"reportgen_test_{uuid.uuid4().hex[:12]}"
    admin = sa.create_engine(server, isolation_level="AUTOCOMMIT", poolclass=sa.pool.NullPool)
    with admin.connect() as connection:
        connection.exec_driver_sql(f'CREATE DATABASE "{name}"')
    try:
        yield server.set(database=name).render_as_string(hide_password=False)
    finally:
        with admin.connect() as connection:
            connection.exec_driver_sql(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
        admin.dispose()
