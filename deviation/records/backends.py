"""The database under a store: SQLite (a file, WAL) or PostgreSQL by URL; connections, errors
in the user's words, bounded retries of write transactions, schema creation and upgrade."""

from __future__ import annotations

import getpass
import hashlib
import os
import time
from contextlib import contextmanager
from datetime import date, datetime, timedelta, timezone
from pathlib import Path
from typing import Any, Callable, Iterator

import sqlalchemy as sa
from sqlalchemy import event as sa_event
from sqlalchemy import exc as sa_exc

from deviation import __version__
from deviation.errors import DeviationError, StoreError
from deviation.records.chains import utc_now
from deviation.records.migrate import MIGRATIONS, SCHEMA_VERSION
from deviation.records.schema import (
    APP_NAME,
    schema_version_t,
    store_info_t,
)

_BUSY_TIMEOUT_S = 30.0


_WRITE_RETRIES = 6


_SQLITE_MAGIC = b"SQLite format 3\x00"


_RECONNECT_S = 30.0  # default window for reconnecting after a lost server (DEVIATION_DB_RECONNECT_S)


_CONNECT_TIMEOUT_S = 10


# Transaction-scoped advisory lock keys (PostgreSQL): schema changes, and every write.
_PG_SCHEMA_LOCK = 5050505


_PG_WRITE_LOCK = int.from_bytes(hashlib.sha256(b"deviation:chain-heads").digest()[:8], "big", signed=True)


class StoreUnavailable(StoreError):
    """The database server could not be reached (or the connection was lost) for longer than the
    reconnect window.

    ``outcome_unknown`` is True when the connection was lost while the write was committing: it
    may have been stored. Retrying with the same ``event_id`` (or record id) is then safe; the
    store recognises an append that did commit.
    """

    def __init__(self, message: str, *, source: str | None = None, outcome_unknown: bool = False,
                 event_id: str | None = None) -> None:
        super().__init__(message, source=source)
        self.outcome_unknown = outcome_unknown
        self.event_id = event_id


def default_db_path() -> Path:
    """``deviation.db`` in the user data directory (platformdirs)."""
    import platformdirs

    return Path(platformdirs.user_data_dir(APP_NAME)) / "deviation.db"


def url_for(target: str | os.PathLike | None) -> tuple[str, Path | None]:
    """The SQLAlchemy URL and, for SQLite, the file path."""
    if target is None:
        target = os.environ.get("DEVIATION_DB") or None
    if target is None:
        path = default_db_path()
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise StoreError(f"cannot create the data directory {path.parent}: {exc.strerror}") from None
        return f"sqlite:///{path}", path
    text = os.fspath(target)
    if "://" in text:
        scheme, rest = text.split("://", 1)
        if scheme in ("postgresql", "postgres"):  # the driver this tool ships with: psycopg 3
            return f"postgresql+psycopg://{rest}", None
        if text.startswith("sqlite:///") and len(text) > len("sqlite:///"):
            p = text[len("sqlite:///"):].split("?", 1)[0]
            return text, (Path(p) if p != ":memory:" else None)
        return text, None
    path = Path(text).expanduser()
    return f"sqlite:///{path}", path


def precheck_file(path: Path, name: str) -> None:
    """A clear word before SQLite says something obscure about a file that is not ours."""
    if path.is_dir():
        raise StoreError("is a directory, not a deviation record store", source=name)
    if not path.parent.exists():
        raise StoreError(f"the directory {path.parent} does not exist", source=name)
    if path.exists():
        try:
            with path.open("rb") as fh:
                head = fh.read(16)
        except OSError as exc:
            raise StoreError(f"cannot be read: {exc.strerror}", source=name) from None
        if head and head != _SQLITE_MAGIC:
            raise StoreError("is not a deviation record store (not an SQLite database file)",
                             source=name)


def reconnect_window_s(value: float | None) -> float:
    if value is not None:
        return max(0.0, float(value))
    text = os.environ.get("DEVIATION_DB_RECONNECT_S")
    if not text:
        return _RECONNECT_S
    try:
        return max(0.0, float(text))
    except ValueError:
        raise StoreError(f"DEVIATION_DB_RECONNECT_S must be a number of seconds, found {text!r}") from None


def os_user() -> str:
    try:
        return getpass.getuser()
    except Exception:  # noqa: BLE001 - no user name in some containers
        return "unknown"


def _is_conflict(exc: Exception) -> bool:
    low = str(getattr(exc, "orig", exc)).lower()
    return ("unique" in low or "duplicate" in low or "serializ" in low or "deadlock" in low
            or "could not obtain lock" in low)


def _sqlstate(exc: BaseException | None) -> str | None:
    orig = getattr(exc, "orig", None)
    return getattr(orig, "sqlstate", None) if orig is not None else None


# SQLSTATEs of a server that went away or is not ready: admin/crash shutdown, cannot connect now
# (starting up or shutting down), and the connection-exception class 08.
_GONE_STATES = ("57P01", "57P02", "57P03")


_CONFLICT_STATES = ("40001", "40P01", "23505")


_GONE_WORDS = ("starting up", "shutting down", "recovery mode", "not yet accepting", "terminating connection",
               "too many clients", "remaining connection slots")


def classify_error(exc: BaseException | None) -> str | None:
    """``"disconnect"`` (the server is unreachable or the connection died), ``"conflict"``
    (another writer got there first: worth retrying at once) or None."""
    if not isinstance(exc, sa_exc.DBAPIError):
        return None
    orig = exc.orig
    state = getattr(orig, "sqlstate", None)
    module = type(orig).__module__ or ""
    if module.startswith("psycopg"):
        if exc.connection_invalidated or state in _GONE_STATES or (state or "").startswith("08"):
            return "disconnect"
        # psycopg's own errors without a server SQLSTATE: a refused or broken connection, or a
        # server that answered the connection attempt with a FATAL message.
        if state is None and isinstance(exc, sa_exc.OperationalError):
            fatal = str(orig).partition("FATAL:")[2].lower()
            if fatal and not any(w in fatal for w in _GONE_WORDS):
                return None  # a wrong database, user or password: retrying will not help
            return "disconnect"
        if state in _CONFLICT_STATES:
            return "conflict"
        return None
    if exc.connection_invalidated:
        return "disconnect"
    if isinstance(exc, (sa_exc.IntegrityError, sa_exc.OperationalError)) and _is_conflict(exc):
        return "conflict"
    return None


def _jitter() -> float:
    return int.from_bytes(os.urandom(2), "big") / 65535.0


def check_columns(table: sa.Table, values: dict, *, source: str | None = None) -> None:
    """The same refusal on every backend for text a column cannot hold (SQLite would store any
    length; PostgreSQL refuses it, and NUL characters, with a database error)."""
    for key, value in values.items():
        if not isinstance(value, str):
            continue
        length = getattr(table.c[key].type, "length", None)
        if length is not None and len(value) > length:
            raise StoreError(f"{key} is {len(value)} characters long; the store keeps at most {length}",
                             source=source)
        if "\x00" in value:
            raise StoreError(f"{key} contains a NUL character", source=source)


def created_bound(value: str | date | datetime, which: str) -> str:
    """A ``created_utc`` comparison bound: dates whole-day, times converted to UTC."""
    if isinstance(value, datetime):
        dt = value if value.tzinfo else value.replace(tzinfo=timezone.utc)
    elif isinstance(value, date):
        dt = datetime(value.year, value.month, value.day, tzinfo=timezone.utc)
        if which == "until":
            dt += timedelta(days=1)
    else:
        text = str(value).strip()
        try:
            if len(text) == 10:
                d = date.fromisoformat(text)
                return created_bound(d, which)
            dt = datetime.fromisoformat(text.replace("Z", "+00:00"))
        except ValueError:
            raise DeviationError(f"'{value}' is not a date (YYYY-MM-DD) or an ISO time",
                                 source=f"--{which}") from None
        dt = dt if dt.tzinfo else dt.replace(tzinfo=timezone.utc)
    return dt.astimezone(timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


class Database:
    """A connection to a store's database: engine, errors in the user's words, read and
    write transactions with bounded retries, and the schema (created and migrated here).

    :class:`deviation.records.store.Store` adds the records; the process library uses the same
    transactions.
    """

    def __init__(self, url: str, *, path: Path | None = None, reconnect_s: float | None = None) -> None:
        self.url = url
        self.path = path
        self.reconnect_s = reconnect_window_s(reconnect_s)
        try:
            self.engine = self._make_engine(url)
        except ModuleNotFoundError as exc:
            raise StoreError(f"cannot use database URL: its driver '{exc.name}' is not installed"
                             + (" (pip install 'psycopg[binary]')" if "psycopg" in str(exc.name) else ""),
                             source=url.split("@")[-1]) from None
        except (sa_exc.ArgumentError, sa_exc.NoSuchModuleError, ImportError) as exc:
            raise StoreError(f"cannot use database URL: {exc}", source=url.split("@")[-1]) from None
        self.name = str(path) if path is not None else self.engine.url.render_as_string(hide_password=True)
        self.dialect = self.engine.dialect.name
        if path is not None:
            precheck_file(path, self.name)
        self._open()

    # -- engine ------------------------------------------------------------------------------

    @staticmethod
    def _make_engine(url: str) -> sa.Engine:
        if url.startswith("sqlite"):
            engine = sa.create_engine(url, connect_args={"timeout": _BUSY_TIMEOUT_S})

            @sa_event.listens_for(engine, "connect")
            def _on_connect(dbapi_conn, _record):  # noqa: ANN001
                # Let SQLAlchemy's "begin" below issue BEGIN itself (the driver's own
                # transaction handling would defer it and lose BEGIN IMMEDIATE).
                dbapi_conn.isolation_level = None
                cur = dbapi_conn.cursor()
                cur.execute("PRAGMA foreign_keys=ON")
                cur.execute(f"PRAGMA busy_timeout={int(_BUSY_TIMEOUT_S * 1000)}")
                # FULL: a committed event survives power loss too, not only a killed process.
                cur.execute("PRAGMA synchronous=FULL")
                cur.close()

            @sa_event.listens_for(engine, "begin")
            def _on_begin(conn):  # noqa: ANN001
                # Writers take the write lock at BEGIN so concurrent appends queue, never
                # interleave on stale chain heads.
                if conn.get_execution_options().get("deviation_write"):
                    conn.exec_driver_sql("BEGIN IMMEDIATE")
                else:
                    conn.exec_driver_sql("BEGIN")

            return engine
        connect_args: dict[str, Any] = {}
        if url.startswith("postgresql+psycopg"):
            # Give up on an unreachable server in bounded time, and notice a dead peer (TCP
            # keepalive) instead of waiting on it for ever. libpq parameters in the URL win.
            connect_args = {"connect_timeout": _CONNECT_TIMEOUT_S, "keepalives": 1,
                            "keepalives_idle": 30, "keepalives_interval": 10, "keepalives_count": 3,
                            "application_name": APP_NAME}
            query = sa.engine.make_url(url).query
            connect_args = {k: v for k, v in connect_args.items() if k not in query}
        # pre_ping: a pooled connection that died with a restarted server is replaced, not used.
        engine = sa.create_engine(url, pool_pre_ping=True, connect_args=connect_args)
        if engine.dialect.name == "postgresql":

            @sa_event.listens_for(engine, "connect")
            def _on_pg_connect(dbapi_conn, _record):  # noqa: ANN001
                # A bounded wait for any lock, like SQLite's busy timeout: set once per
                # connection, not in every write transaction (one round trip fewer each).
                cur = dbapi_conn.cursor()
                cur.execute(f"SET lock_timeout = '{int(_BUSY_TIMEOUT_S * 1000)}ms'")
                cur.close()
                dbapi_conn.commit()

        return engine

    def close(self) -> None:
        self.engine.dispose()

    def __enter__(self) -> "Database":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"Store({self.name!r})"

    @contextmanager
    def _guard(self) -> Iterator[None]:
        """Database errors become StoreError naming the store."""
        try:
            yield
        except DeviationError:
            raise
        except sa_exc.SQLAlchemyError as exc:
            raise self._store_error(exc) from None

    def _store_error(self, exc: Exception) -> StoreError:
        orig = getattr(exc, "orig", None)
        reason = str(orig if orig is not None else exc).strip().splitlines()[0] if str(exc) else type(exc).__name__
        low = reason.lower()
        kind = classify_error(exc)
        if kind == "disconnect":
            return StoreError(f"cannot reach the database server or lost the connection to it ({reason})",
                              source=self.name)
        state = _sqlstate(exc) or ""
        if self.dialect == "postgresql":
            fatal = reason.partition("FATAL:")[2].strip()
            if fatal:
                if "does not exist" in fatal and "database" in fatal:
                    state = "3D000"
                elif any(w in fatal for w in ("authentication failed", "pg_hba.conf", "password", "role")):
                    state = "28000"
                reason = fatal
            if state == "55P03":
                return StoreError(f"the store stayed locked by another writer for over "
                                  f"{_BUSY_TIMEOUT_S:.0f} s ({reason}); try again", source=self.name)
            if state == "3D000":
                return StoreError(f"the database does not exist ({reason}); create it first "
                                  "(createdb), the tool makes its tables itself", source=self.name)
            if state.startswith("28"):
                return StoreError(f"the database server refused the login ({reason})", source=self.name)
            if state == "42501":
                return StoreError(f"the database role lacks a privilege this action needs ({reason}); "
                                  "see the README on grants", source=self.name)
            if state in ("53100", "53200", "53300"):
                return StoreError(f"the database server is out of resources ({reason}); try again "
                                  "later", source=self.name)
        if "file is not a database" in low:
            return StoreError("is not a deviation record store (not an SQLite database, or its "
                              f"header is damaged): {reason}", source=self.name)
        if "malformed" in low or "corrupt" in low:
            return StoreError(f"the database file is corrupt ({reason}); restore it from a backup",
                              source=self.name)
        if "locked" in low or "busy" in low:
            return StoreError(f"the store stayed locked by another process for over "
                              f"{_BUSY_TIMEOUT_S:.0f} s ({reason}); try again", source=self.name)
        if "unable to open" in low or "readonly" in low or "read-only" in low:
            return StoreError(f"cannot open or write the database file ({reason})", source=self.name)
        return StoreError(f"database error: {reason}", source=self.name)

    @contextmanager
    def _read(self) -> Iterator[sa.Connection]:
        with self._guard(), self.engine.connect() as conn:
            with conn.begin():
                yield conn

    @contextmanager
    def _write(self, *, lock_heads: bool = True) -> Iterator[sa.Connection]:
        with self._guard(), self.engine.connect() as conn:
            conn.execution_options(deviation_write=True)
            with conn.begin():
                if self.dialect == "postgresql" and lock_heads:
                    # Every writer takes the same lock: the chain heads read after it are
                    # current until COMMIT. Transaction-scoped, so a lost client frees it. (The
                    # connection's lock_timeout bounds the wait.)
                    conn.exec_driver_sql(f"SELECT pg_advisory_xact_lock({_PG_WRITE_LOCK})")
                yield conn

    def _retrying(self, fn: Callable[[sa.Connection], Any], *, idempotent: bool = False) -> Any:
        """Run a write transaction ``fn(conn)``; retried when a concurrent writer took the same
        key (a few times, with backoff) and when the server went away (within the reconnect
        window).

        A failure before COMMIT was sent leaves nothing stored, so any ``fn`` is retried; a
        failure during COMMIT has an unknown outcome and is retried only when ``fn`` is
        ``idempotent`` (it recognises its own committed write, e.g. by an ``event_id``).
        """
        conflicts = 0
        lost = 0
        deadline: float | None = None
        while True:
            phase = "begin"
            try:
                with self._write() as conn:
                    phase = "write"
                    result = fn(conn)
                    phase = "commit"
                return result
            except StoreError as exc:
                cause = exc.__context__
                kind = classify_error(cause) if isinstance(cause, Exception) else None
                if kind == "conflict" and conflicts < _WRITE_RETRIES - 1:
                    time.sleep(0.01 * (2 ** conflicts) * (0.5 + _jitter()))
                    conflicts += 1
                    continue
                if kind != "disconnect":
                    raise
                unknown = phase == "commit"
                now = time.monotonic()
                if deadline is None:
                    deadline = now + self.reconnect_s
                if (idempotent or not unknown) and now < deadline:
                    # Bounded exponential backoff with jitter, never past the window.
                    time.sleep(min(1.0, 0.05 * (2 ** lost), max(0.0, deadline - now)) * (0.5 + _jitter()))
                    lost += 1
                    continue
                raise self._unavailable(exc, unknown=unknown, tries=lost + 1) from None

    def _unavailable(self, exc: StoreError, *, unknown: bool, tries: int) -> StoreUnavailable:
        reason = exc.message
        if unknown:
            tail = ("the connection was lost while the write was committing, so it may have been "
                    "stored: check (deviation record show / list) before repeating it")
        else:
            tail = "nothing of this write was stored; repeat it when the server is back"
        waited = f"tried {tries} time(s) over {self.reconnect_s:g} s" if tries > 1 else "not retried"
        return StoreUnavailable(f"{reason}; {waited}; {tail}", source=self.name, outcome_unknown=unknown)

    # -- schema ------------------------------------------------------------------------------

    def _open(self) -> None:
        with self._guard():
            with self.engine.connect() as conn:
                names = set(sa.inspect(conn).get_table_names())
                version = self._check_tables(conn, names)
            if self.dialect == "sqlite" and self.path is not None:
                self._set_wal()
            if version < SCHEMA_VERSION:
                self._upgrade()

    def _check_tables(self, conn: sa.Connection, names: set[str]) -> int:
        if not names:
            return 0
        if "schema_version" not in names or "events" not in names:
            shown = ", ".join(sorted(names)[:8]) + (", ..." if len(names) > 8 else "")
            raise StoreError(f"is not a deviation record store (it holds other tables: {shown})",
                             source=self.name)
        rows = conn.execute(sa.select(schema_version_t.c.version, schema_version_t.c.app)).all()
        if not rows or any(r.app != APP_NAME for r in rows):
            raise StoreError("is not a deviation record store (its schema_version table is not ours)",
                             source=self.name)
        version = max(r.version for r in rows)
        if version > SCHEMA_VERSION:
            raise StoreError(
                f"was written by a newer deviation (schema version {version}; this deviation "
                f"{__version__} knows up to {SCHEMA_VERSION}); upgrade the tool, the store is "
                "left untouched", source=self.name)
        return version

    def _set_wal(self) -> None:
        with self.engine.connect() as conn:
            # Outside any transaction: SQLite cannot switch journal mode inside one.
            dbapi = conn.connection.driver_connection
            mode = dbapi.execute("PRAGMA journal_mode=WAL").fetchone()[0]
            if str(mode).lower() != "wal":  # pragma: no cover - e.g. a file system without locks
                raise StoreError(f"cannot use WAL journal mode (got {mode})", source=self.name)

    def _upgrade(self) -> None:
        for version, migration in enumerate(MIGRATIONS, start=1):
            with self._write(lock_heads=False) as conn:
                if self.dialect == "postgresql":
                    # Two tools creating one fresh schema at once: the second waits, then skips.
                    conn.exec_driver_sql(f"SELECT pg_advisory_xact_lock({_PG_SCHEMA_LOCK})")
                current = self._version_in(conn)
                if current >= version:
                    continue
                migration(conn)
                conn.execute(schema_version_t.insert().values(
                    version=version, app=APP_NAME, applied_utc=utc_now(), tool_version=__version__))

    @staticmethod
    def _version_in(conn: sa.Connection) -> int:
        if "schema_version" not in set(sa.inspect(conn).get_table_names()):
            return 0
        return conn.execute(sa.select(sa.func.max(schema_version_t.c.version))).scalar() or 0

    def schema_version(self) -> int:
        with self._read() as conn:
            return self._version_in(conn)

    def store_id(self) -> str:
        with self._read() as conn:
            return conn.execute(sa.select(store_info_t.c.store_id)).scalar_one()
