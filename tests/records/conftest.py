"""One fixture, two backends: the store tests run on an SQLite file and on a PostgreSQL server.

``backend`` is parametrised ``sqlite`` / ``postgresql``. The PostgreSQL side needs a server
given by ``DEVIATION_TEST_PG_URL`` (``postgresql+psycopg://user@127.0.0.1:PORT/db``; ``.ci/run``
starts a throw-away one). Without it the PostgreSQL tests are skipped with that reason, except
under CI (``CI=true``), where a missing or unreachable server fails them: CI must prove both.

Every store a test asks for is fresh: an SQLite file in ``tmp_path``, or on PostgreSQL a schema
of its own in the test database (the URL sets ``search_path``), dropped after the test.
"""

from __future__ import annotations

import atexit
import os
import shutil
import socket
import sqlite3
import tempfile
import subprocess
import sys
import uuid
from pathlib import Path

import pytest

PG_URL_ENV = "DEVIATION_TEST_PG_URL"

# Store keys and anchor files of the test stores go to a folder of this test session (set at
# import, before any test module copies os.environ for its subprocesses), not the user's own.
if "DEVIATION_KEY_DIR" not in os.environ:
    os.environ["DEVIATION_KEY_DIR"] = _KEYS = tempfile.mkdtemp(prefix="deviation-test-keys.")
    atexit.register(shutil.rmtree, _KEYS, ignore_errors=True)
REPO = Path(__file__).resolve().parents[2]


def in_ci() -> bool:
    return os.environ.get("CI", "").strip().lower() in ("1", "true", "yes")


def _skip_or_fail(reason: str) -> None:
    if in_ci():
        pytest.fail(f"CI=true but {reason}: CI must run the store tests on PostgreSQL too "
                    "(.ci/run starts a server)", pytrace=False)
    pytest.skip(f"PostgreSQL: {reason}")


_PG_STATE: dict = {}


def pg_admin_engine():
    """A session-wide engine on the test database (None with the reason when there is none)."""
    if "engine" in _PG_STATE or "reason" in _PG_STATE:
        return _PG_STATE.get("engine"), _PG_STATE.get("reason")
    url = os.environ.get(PG_URL_ENV)
    if not url:
        _PG_STATE["reason"] = f"{PG_URL_ENV} is not set (.ci/run sets it; see .ci/postgres.sh)"
        return None, _PG_STATE["reason"]
    try:
        import psycopg  # noqa: F401
        import sqlalchemy as sa
    except ImportError:
        _PG_STATE["reason"] = "the psycopg driver is not installed (pip install 'psycopg[binary]')"
        return None, _PG_STATE["reason"]
    engine = sa.create_engine(url, isolation_level="AUTOCOMMIT", connect_args={"connect_timeout": 10})
    try:
        with engine.connect() as conn:
            conn.exec_driver_sql("SELECT 1")
    except Exception as exc:  # noqa: BLE001 - any failure to reach it is the reason
        engine.dispose()
        # Set but unreachable: a mistake, not an absent server; fail locally as well as in CI.
        pytest.fail(f"{PG_URL_ENV} is set but the server does not answer: {exc}", pytrace=False)
    _PG_STATE["engine"] = engine
    return engine, None


class SqliteBackend:
    """Stores as SQLite files in the test's temporary directory."""

    name = "sqlite"

    def __init__(self, tmp_path: Path) -> None:
        self.tmp_path = tmp_path

    def target(self, name: str = "records") -> str:
        """The ``--db`` value of a store called ``name`` (fresh per test)."""
        return str(self.tmp_path / f"{name}.db")

    def open(self, name: str = "records", **kw):
        from deviation.records.store import open_store

        return open_store(self.target(name), **kw)

    def sql(self, target: str, statement: str) -> None:
        """Edit the store as an outsider would: the sqlite3 command-line tool (or, when it is not
        installed, Python's sqlite3 module in another process)."""
        tool = shutil.which("sqlite3")
        cmd = [tool, target, statement] if tool else [
            sys.executable, "-c", "import sqlite3,sys; c=sqlite3.connect(sys.argv[1]); "
            "c.executescript(sys.argv[2]); c.commit()", target, statement]
        out = subprocess.run(cmd, capture_output=True, text=True, timeout=60)
        assert out.returncode == 0, out.stderr

    def query(self, target: str, statement: str) -> list[tuple]:
        con = sqlite3.connect(target)
        try:
            return con.execute(statement).fetchall()
        finally:
            con.close()

    def close(self) -> None:
        pass


class PostgresBackend:
    """Stores as schemas of their own in the PostgreSQL test database."""

    name = "postgresql"

    def __init__(self, engine) -> None:
        self.engine = engine
        self.schemas: dict[str, str] = {}

    def schema(self, name: str = "records") -> str:
        if name not in self.schemas:
            schema = f"t_{uuid.uuid4().hex[:16]}"
            with self.engine.connect() as conn:
                conn.exec_driver_sql(f'CREATE SCHEMA "{schema}"')
            self.schemas[name] = schema
        return self.schemas[name]

    def target(self, name: str = "records") -> str:
        schema = self.schema(name)
        url = self.engine.url.update_query_dict({"options": f"-csearch_path={schema}"})
        return url.render_as_string(hide_password=False)

    def open(self, name: str = "records", **kw):
        from deviation.records.store import open_store

        return open_store(self.target(name), **kw)

    def _libpq(self, target: str) -> tuple[str, dict]:
        """A libpq connection string and environment for psql, from a target URL."""
        import sqlalchemy as sa

        url = sa.engine.make_url(target)
        schema = url.query.get("options", "").replace("-csearch_path=", "")
        plain = url.set(drivername="postgresql", query={}).render_as_string(hide_password=False)
        return plain, dict(os.environ, PGOPTIONS=f"-c search_path={schema}")

    def sql(self, target: str, statement: str) -> None:
        """Edit the store as an outsider would: with psql."""
        psql = shutil.which("psql")
        assert psql, "psql (the PostgreSQL client) is not installed"
        conninfo, env = self._libpq(target)
        out = subprocess.run([psql, "-X", "-q", "-v", "ON_ERROR_STOP=1", conninfo, "-c", statement],
                             capture_output=True, text=True, timeout=60, env=env)
        assert out.returncode == 0, out.stderr

    def query(self, target: str, statement: str) -> list[tuple]:
        import sqlalchemy as sa

        engine = sa.create_engine(target)
        try:
            with engine.connect() as conn:
                return [tuple(r) for r in conn.exec_driver_sql(statement)]
        finally:
            engine.dispose()

    def close(self) -> None:
        import gc

        gc.collect()  # pooled connections of stores a test left open go with their engines
        with self.engine.connect() as conn:
            conn.exec_driver_sql("SET lock_timeout = '10s'")
            for schema in self.schemas.values():
                try:
                    conn.exec_driver_sql(f'DROP SCHEMA "{schema}" CASCADE')
                except Exception:  # noqa: BLE001 - a schema left behind dies with the cluster
                    pass


def make_pg_backend() -> PostgresBackend:
    engine, reason = pg_admin_engine()
    if engine is None:
        _skip_or_fail(reason)
    return PostgresBackend(engine)


@pytest.fixture(params=["sqlite", "postgresql"])
def backend(request, tmp_path):
    """The store backend under test; ``backend.target(name)`` / ``backend.open(name)``."""
    b = SqliteBackend(tmp_path) if request.param == "sqlite" else make_pg_backend()
    yield b
    b.close()


@pytest.fixture
def pg_backend():
    """PostgreSQL only (skipped, or failed in CI, like the ``postgresql`` side of ``backend``)."""
    b = make_pg_backend()
    yield b
    b.close()


def pg_server_bindir() -> Path | None:
    """Where the PostgreSQL server programs are (for tests that run their own cluster)."""
    found = sorted(Path("/usr/lib/postgresql").glob("*/bin/pg_ctl"),
                   key=lambda p: [int(x) if x.isdigit() else x for x in p.parent.parent.name.split(".")])
    return found[-1].parent if found else None


@pytest.fixture(scope="session", autouse=True)
def _dispose_pg_admin():
    yield
    engine = _PG_STATE.get("engine")
    if engine is not None:
        engine.dispose()


SCRIPT = REPO / ".ci" / "postgres.sh"


def _free_loopback_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class Cluster:
    def __init__(self) -> None:
        self.dir = tempfile.mkdtemp(prefix="deviation-pgf.", dir="/tmp")  # short: socket path
        self.port = _free_loopback_port()
        self.url = self.start()

    def _run(self, *args: str) -> str:
        out = subprocess.run(["bash", str(SCRIPT), *args], capture_output=True, text=True, timeout=120)
        assert out.returncode == 0, out.stderr
        return out.stdout.strip()

    def start(self) -> str:
        return self._run("start", self.dir, str(self.port))

    def stop(self, mode: str = "fast") -> None:
        self._run("stop", self.dir, mode)

    def remove(self) -> None:
        try:
            self.stop("immediate")
        finally:
            shutil.rmtree(self.dir, ignore_errors=True)


@pytest.fixture
def pg_cluster():
    """A private throw-away cluster (own data directory, free loopback port), for tests that
    stop and start the server."""
    if not os.environ.get("DEVIATION_TEST_PG_URL"):
        _skip_or_fail("DEVIATION_TEST_PG_URL is not set (.ci/run sets it; see .ci/postgres.sh)")
    if pg_server_bindir() is None:
        _skip_or_fail("the PostgreSQL server programs are not installed (.ci/postgres.sh install)")
    c = Cluster()
    yield c
    c.remove()
