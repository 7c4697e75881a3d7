"""The filed-process library: scheduled processes, versioned, on the record store's database.

A filed process is the ``[process]`` table of the case contract (with its microbiology,
container, heat penetration, alternates and critical factors) kept as filed. Filing an id again
adds the next version; nothing is overwritten or removed. Retiring an id is an appended row too:
it retires every version filed so far, and a later filing of the same id is active again.

A case names a filed process with ``deviation.process_ref = "ID"`` (the latest active version)
or ``"ID@3"`` (version 3, also when retired, so an old case stays readable).

The tables live beside the record store's own, in the same database, under their own schema
version (table ``library_schema_version``) so they can be migrated later without touching the
store's ``schema_version``. They are created on first use (``checkfirst``).

Only a process authority files or retires a process (21 CFR 113.83: scheduled processes are
established by persons with expert knowledge of thermal processing); everyone may read.

In the chain: every filing and retirement is also an event of the store-wide hash chain (record
``LIBRARY``, kinds ``process-filed`` and ``process-retired``, signed under the store's key), whose
payload holds the filing's SHA-256. Every read of a filed process recomputes the SHA-256 of its
text and checks it against that event (and the event's own signature), and retirements are read
from the chain; a process edited in the database is refused with the reason, and ``verify``
reports it.
"""

from __future__ import annotations

import hashlib
import os
import weakref
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import sqlalchemy as sa
from pydantic import ValidationError

from deviation import __version__
from deviation.errors import CaseError, PermissionDenied, StoreError
from deviation.records import ledger
from deviation.records.chains import canonical_json, event_hash, utc_now
from deviation.records.events import AsDict
from deviation.records.schema import LIBRARY_ID, events_t, records_t

FILE_ACTION = "file or retire a scheduled process"
FILER_ROLE = "process-authority"
# Advisory-lock key for creating the library tables on PostgreSQL (the store uses 5050505).
_PG_LOCK_KEY = 5050506


# ---------------------------------------------------------------------------------------------
# Schema. As in the store: freeze a table's definition inside the migration that made it.


def _define_v1(md: sa.MetaData) -> dict[str, sa.Table]:
    version = sa.Table(
        "library_schema_version", md,
        sa.Column("version", sa.Integer, primary_key=True, autoincrement=False),
        sa.Column("applied_utc", sa.String(32), nullable=False),
        sa.Column("tool_version", sa.String(32), nullable=False),
    )
    processes = sa.Table(
        "processes", md,
        sa.Column("process_id", sa.String(200), primary_key=True),
        sa.Column("version", sa.Integer, primary_key=True, autoincrement=False),
        sa.Column("filed_utc", sa.String(32), nullable=False),
        sa.Column("actor", sa.String(200), nullable=False),
        sa.Column("role", sa.String(32), nullable=False),
        sa.Column("reason", sa.Text, nullable=True),
        sa.Column("source", sa.Text, nullable=True),
        sa.Column("process", sa.Text, nullable=False),  # canonical JSON of the table as filed
        sa.Column("sha256", sa.String(64), nullable=False),
        sa.Column("scheduled_F_min", sa.Float, nullable=False),
        sa.Column("target_F_min", sa.Float, nullable=False),
    )
    retirements = sa.Table(
        "process_retirements", md,
        sa.Column("seq", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("process_id", sa.String(200), nullable=False),
        sa.Column("up_to_version", sa.Integer, nullable=False),
        sa.Column("retired_utc", sa.String(32), nullable=False),
        sa.Column("actor", sa.String(200), nullable=False),
        sa.Column("role", sa.String(32), nullable=False),
        sa.Column("reason", sa.Text, nullable=False),
        sa.Index("ix_process_retirements_id", "process_id"),
    )
    return {t.name: t for t in (version, processes, retirements)}


_metadata = sa.MetaData()
_T = _define_v1(_metadata)
version_t, processes_t, retirements_t = (_T["library_schema_version"], _T["processes"],
                                         _T["process_retirements"])


def _migrate_1(conn: sa.Connection) -> None:
    """Processes and retirements."""
    md = sa.MetaData()
    md.create_all(conn, tables=list(_define_v1(md).values()), checkfirst=True)


LIBRARY_MIGRATIONS = [_migrate_1]
LIBRARY_SCHEMA_VERSION = len(LIBRARY_MIGRATIONS)

_ready: "weakref.WeakSet[Any]" = weakref.WeakSet()


def _library_version(conn: sa.Connection) -> int:
    if "library_schema_version" not in set(sa.inspect(conn).get_table_names()):
        return 0
    return conn.execute(sa.select(sa.func.max(version_t.c.version))).scalar() or 0


def ensure_library(store) -> None:
    """Create or upgrade the library tables in ``store``'s database (idempotent, once per store).

    Raises :class:`StoreError` when the database holds a newer library schema than this tool knows.
    """
    if store in _ready:
        return

    with store._read() as conn:
        current = _library_version(conn)
    if current > LIBRARY_SCHEMA_VERSION:
        raise StoreError(
            f"its process library was written by a newer deviation (library schema version "
            f"{current}; this deviation {__version__} knows up to {LIBRARY_SCHEMA_VERSION}); "
            "upgrade the tool, the library is left untouched", source=store.name)
    for version, migration in enumerate(LIBRARY_MIGRATIONS, start=1):
        if version <= current:
            continue

        def write(conn: sa.Connection, version=version, migration=migration) -> None:
            if store.dialect == "postgresql":
                # Two tools creating the library at once: the second waits, then skips.
                conn.exec_driver_sql(f"SELECT pg_advisory_xact_lock({_PG_LOCK_KEY})")
            if _library_version(conn) >= version:
                return
            migration(conn)
            conn.execute(version_t.insert().values(version=version, applied_utc=utc_now(),
                                                   tool_version=__version__))

        store._retrying(write)
    _ready.add(store)


# ---------------------------------------------------------------------------------------------
# Views


@dataclass(frozen=True)
class Retirement(AsDict):
    """One retirement of a process id (every version up to ``up_to_version``)."""

    up_to_version: int
    retired_utc: str
    actor: str
    role: str
    reason: str


@dataclass(frozen=True)
class FiledProcess:
    """One filed version of a scheduled process."""

    process_id: str
    version: int
    filed_utc: str
    actor: str
    role: str
    reason: str | None
    source: str | None
    process: dict  # the [process] table as filed
    sha256: str
    scheduled_F_min: float
    target_F_min: float
    retired: Retirement | None = None  # the retirement that covers this version, if any
    latest_version: int | None = None

    @property
    def ref(self) -> str:
        return f"{self.process_id}@{self.version}"

    @property
    def active(self) -> bool:
        return self.retired is None

    @property
    def product(self) -> str | None:
        return self.process.get("product")

    def to_dict(self, *, with_process: bool = True) -> dict:
        d = asdict(self)
        d["ref"] = self.ref
        d["active"] = self.active
        d["product"] = self.product
        d["scheduled_F_below_target"] = self.scheduled_F_min < self.target_F_min
        if not with_process:
            d.pop("process")
        return d


@dataclass(frozen=True)
class ResolvedRef(AsDict):
    """What a ``process_ref`` resolved to: keep it on the record (``process_version``)."""

    ref: str
    process_id: str
    process_version: int
    sha256: str


# ---------------------------------------------------------------------------------------------
# Reading a process file


def process_table(data: dict, *, source: str = "process") -> dict:
    """The ``[process]`` table of a process file (a file holding only ``[process]``), or of a
    mapping that already is the table (it has an ``id``)."""
    if not isinstance(data, dict):
        raise CaseError("a process file holds a [process] table", source=source)
    if "process" in data and isinstance(data["process"], dict):
        others = sorted(k for k in data if k != "process")
        if others:
            raise CaseError(f"a process file holds only the [process] table; remove "
                            f"{', '.join(others)} (a deviation goes in a case file)", source=source)
        return data["process"]
    if "id" in data:
        return data
    raise CaseError("no [process] table: a process file is the [process] table of the case "
                    "contract with its sub-tables (see demo_cases/processes/)", source=source)


def validate_process(table: dict, *, source: str = "process"):
    """The :class:`deviation.inputs.case.Process` of a ``[process]`` table; one line per problem."""
    from deviation.inputs.case import Process, _format_validation

    try:
        return Process.model_validate(table)
    except ValidationError as exc:
        lines = ["process." + line if not line.startswith("process") else line
                 for line in _format_validation(exc).splitlines()]
        raise CaseError("\n".join(lines), source=source) from None


def read_process_file(path: str | os.PathLike) -> dict:
    """The ``[process]`` table of a process file (TOML), validated against the case contract."""
    from deviation.inputs.case import load_toml

    table = process_table(load_toml(path), source=str(path))
    validate_process(table, source=str(path))
    return table


def _sha(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _check_filer(actor: str, role: str) -> str:
    from deviation.records.roles import normalize_role

    role = normalize_role(role, actor=actor)
    if role != FILER_ROLE:
        raise PermissionDenied(
            f"actor '{actor}' (role {role}) may not {FILE_ACTION}: that is for role {FILER_ROLE}")
    return role


def _check_id(process_id: Any) -> str:
    if not isinstance(process_id, str) or not process_id.strip():
        raise CaseError("a process id is a non-empty text")
    if "@" in process_id or process_id != process_id.strip():
        raise CaseError(f"process id '{process_id}' may not hold '@' or surrounding spaces "
                        "('ID@N' names version N of ID)")
    return process_id


# ---------------------------------------------------------------------------------------------
# Writing


@dataclass(frozen=True)
class Filed(AsDict):
    """What :func:`add_process` did."""

    process_id: str
    version: int
    scheduled_F_min: float
    warning: str | None
    new_version: bool = True

    def __iter__(self):  # (id, version, scheduled_F_min, warning)
        return iter((self.process_id, self.version, self.scheduled_F_min, self.warning))


def add_process(store, process: dict | str | os.PathLike, *, actor: str, role: str,
                reason: str | None = None) -> Filed:
    """File a scheduled process (a process file path or its ``[process]`` table).

    The scheduled-process F is computed with the process's own model for the filed cycle
    (:func:`deviation.evaluate.scheduled_F_min`, General Method on the predicted cold spot). When
    it falls short of ``target_F_min`` the filing needs a ``reason`` (the process authority may
    have grounds the model does not see) and the result carries a warning.

    Returns ``Filed(process_id, version, scheduled_F_min, warning)``, which unpacks as a tuple.
    Filing content identical to the latest active version adds no version (``new_version``
    False, with a warning saying so).

    Raises
    ------
    PermissionDenied
        unless ``role`` is process-authority.
    CaseError
        for a process that breaks the case contract, or a scheduled-F shortfall with no reason.
    """
    from deviation.evaluate import scheduled_F_min

    role = _check_filer(actor, role)
    if isinstance(process, dict):
        source = None
        table = process_table(process)
        validate_process(table)
    else:
        source = str(process)
        table = read_process_file(process)
    model = validate_process(table, source=source or "process")
    pid = _check_id(model.id)
    reason = reason.strip() if isinstance(reason, str) and reason.strip() else None
    F = float(scheduled_F_min(model))
    target = float(model.target_F_min)
    warning = None
    if F < target:
        warning = (f"the model gives F0 {F:.2f} min for process {pid} as scheduled, below its filed "
                   f"target {target:.2f} min: the model does not reproduce the filed lethality")
        if reason is None:
            raise CaseError(
                f"{warning}; a process authority may still file it, with a reason (--reason TEXT) "
                "saying why it stands (e.g. the heat penetration tests it rests on)", source=source)
    text = canonical_json(table)
    digest = _sha(text)
    ensure_library(store)

    def write(conn: sa.Connection, rows: list) -> Filed:
        last = conn.execute(sa.select(processes_t.c.version, processes_t.c.sha256)
                            .where(processes_t.c.process_id == pid)
                            .order_by(processes_t.c.version.desc()).limit(1)).first()
        retired_to = _chain(conn, store.signer).retired_to(pid)
        if last is not None and last.sha256 == digest and last.version > retired_to:
            return Filed(pid, last.version, F,
                         f"identical to version {last.version} already filed: no new version", False)
        version = (last.version if last else 0) + 1
        values = dict(process_id=pid, version=version, filed_utc=utc_now(), actor=actor, role=role,
                      reason=reason, source=source, process=text, sha256=digest, scheduled_F_min=F,
                      target_F_min=target)
        # Append-only: a filing is INSERTed, never changed or removed; and chained.
        conn.execute(processes_t.insert().values(**values))
        rows.append(append_library_event(conn, store.signer, "process-filed", filing_payload(values),
                                         actor=actor, role=role, utc=values["filed_utc"], source=store.name))
        return Filed(pid, version, F, warning)

    return store.write_anchored(write, idempotent=False)


def retire_process(store, process_id: str, *, reason: str, actor: str, role: str) -> Retirement:
    """Retire a process id: every version filed so far stops resolving as ``"ID"``.

    ``"ID@N"`` still resolves (old cases and records stay readable); filing the id again makes
    it active again. Needs the process-authority role and a reason.
    """

    role = _check_filer(actor, role)
    if not isinstance(reason, str) or not reason.strip():
        raise CaseError(f"retiring process {process_id} needs a reason (--reason TEXT)")
    ensure_library(store)

    def write(conn: sa.Connection, rows: list) -> Retirement:
        versions = _versions(conn, process_id)
        if not versions:
            raise CaseError(_unknown_id(conn, process_id))
        retired_to = _chain(conn, store.signer).retired_to(process_id)
        if retired_to >= versions[-1]:
            raise CaseError(f"process '{process_id}' is already retired (every version up to "
                            f"{retired_to})")
        r = Retirement(versions[-1], utc_now(), actor, role, reason.strip())
        conn.execute(retirements_t.insert().values(process_id=process_id, **r.to_dict()))
        rows.append(append_library_event(
            conn, store.signer, "process-retired", retirement_payload(process_id, r.up_to_version, r.reason),
            actor=actor, role=role, utc=r.retired_utc, source=store.name))
        return r

    return store.write_anchored(write, idempotent=False)


# ---------------------------------------------------------------------------------------------
# The library in the store-wide chain


def filing_payload(values, *, migrated: bool = False) -> dict:
    """The payload of a ``process-filed`` event: what identifies the filing, with its SHA-256."""
    p = {k: values[k] for k in ("process_id", "version", "sha256", "scheduled_F_min", "target_F_min",
                                "reason", "source", "filed_utc")}
    if migrated:
        p["migrated"] = True  # filed before the library was chained: SHA-256 as found at the upgrade
    return p


def retirement_payload(process_id: str, up_to_version: int, reason: str, *, retired_utc: str | None = None,
                       migrated: bool = False) -> dict:
    p = {"process_id": process_id, "up_to_version": up_to_version, "reason": reason}
    if migrated:
        p.update(migrated=True, retired_utc=retired_utc)
    return p


def append_library_event(conn: sa.Connection, signer, kind: str, payload: dict, *, actor: str, role: str,
                         utc: str, source: str | None = None) -> dict:
    """Chain one library event (creating the ``LIBRARY`` pseudo-record on first use)."""
    if conn.execute(sa.select(records_t.c.id).where(records_t.c.id == LIBRARY_ID)).first() is None:
        conn.execute(records_t.insert().values(id=LIBRARY_ID, lot="", retort_id="", process_id="",
                                               process_version=None, created_utc=utc))
    return ledger.insert_event(conn, signer, record_id=LIBRARY_ID, kind=kind, utc=utc, actor=actor, role=role,
                               payload_json=canonical_json(payload), payload=payload, source=source)


@dataclass
class _Chain:
    """The library's chain events, read once: filings by (id, version), retirements by id."""

    filed: dict[tuple[str, int], dict]
    retired: dict[str, list[Retirement]]
    problems: list[str]

    def retired_to(self, process_id: str) -> int:
        rets = self.retired.get(process_id) or []
        return max((r.up_to_version for r in rets), default=0)


def _chain(conn: sa.Connection, signer=None) -> _Chain:
    """The library events of the store-wide chain; ``problems``: events whose signature fails."""
    import json

    rows = conn.execute(sa.select(events_t).where(events_t.c.record_id == LIBRARY_ID)
                        .order_by(events_t.c.seq)).mappings().all()
    filed: dict[tuple[str, int], dict] = {}
    retired: dict[str, list[Retirement]] = {}
    problems = []
    key = getattr(signer, "key", None)
    for r in rows:
        if key is not None and r["hash"] != event_hash(r["record_id"], r["seq"], r["kind"], r["utc"], r["actor"],
                                                       r["role"], r["payload"], r["prev_hash"], key):
            problems.append(f"library event {r['seq']} ({r['kind']}) does not match its signature")
            continue
        try:
            p = json.loads(r["payload"])
        except ValueError:
            problems.append(f"library event {r['seq']} is not JSON")
            continue
        if r["kind"] == "process-filed":
            filed[(p.get("process_id"), p.get("version"))] = dict(p, event_seq=r["seq"])
        elif r["kind"] == "process-retired":
            retired.setdefault(p.get("process_id"), []).append(
                Retirement(p.get("up_to_version"), p.get("retired_utc") or r["utc"], r["actor"], r["role"],
                           p.get("reason")))
    return _Chain(filed, retired, problems)


def check_filing(row, chain: _Chain) -> str | None:
    """Why a processes row is not the filing the chain holds (None when it is)."""
    pid, ver = row["process_id"], row["version"]
    text_sha = _sha(row["process"])
    event = chain.filed.get((pid, ver))
    if event is None:
        return (f"process '{pid}' version {ver} is not in the store's chain (added to the database "
                "behind the tool's back)")
    if text_sha != event.get("sha256") or row["sha256"] != event.get("sha256"):
        return (f"process '{pid}' version {ver} was changed after it was filed: its text has SHA-256 "
                f"{text_sha}, the filing (chain event {event['event_seq']}) has {event.get('sha256')}")
    return None


# ---------------------------------------------------------------------------------------------
# Reading


def _versions(conn: sa.Connection, process_id: str) -> list[int]:
    return list(conn.execute(sa.select(processes_t.c.version)
                             .where(processes_t.c.process_id == process_id)
                             .order_by(processes_t.c.version)).scalars())


def _filed_ids(conn: sa.Connection) -> list[str]:
    return list(conn.execute(sa.select(processes_t.c.process_id).distinct()
                             .order_by(processes_t.c.process_id)).scalars())


def _unknown_id(conn: sa.Connection, process_id: str) -> str:
    ids = _filed_ids(conn)
    known = (f"filed: {', '.join(ids)}" if ids
             else "the library is empty: a process authority files one with 'deviation process add FILE'")
    return f"no process '{process_id}' is filed in the library ({known})"


def _retirements(chain: _Chain, process_id: str) -> list[Retirement]:
    return list(chain.retired.get(process_id) or [])


def _covering(retirements: list[Retirement], version: int) -> Retirement | None:
    """The retirement that covers ``version`` (the last retirement; earlier ones were lifted by a
    later filing only for versions after them)."""
    if not retirements:
        return None
    last = retirements[-1]
    return last if version <= last.up_to_version else None


def _view(row, retirements: list[Retirement], latest: int, chain: _Chain) -> FiledProcess:
    import json

    why = check_filing(row, chain)
    if why:
        raise StoreError(f"{why}; the filed process is not used. Run deviation verify")
    return FiledProcess(
        process_id=row["process_id"], version=row["version"], filed_utc=row["filed_utc"],
        actor=row["actor"], role=row["role"], reason=row["reason"], source=row["source"],
        process=json.loads(row["process"]), sha256=row["sha256"],
        scheduled_F_min=row["scheduled_F_min"], target_F_min=row["target_F_min"],
        retired=_covering(retirements, row["version"]), latest_version=latest)


def list_processes(store, include_retired: bool = False, *, all_versions: bool = False) -> list[FiledProcess]:
    """The latest version of every filed process id (``all_versions``: every version), by id.

    Retired ids are left out unless ``include_retired``.
    """
    ensure_library(store)
    with store._read() as conn:
        rows = conn.execute(sa.select(processes_t).order_by(processes_t.c.process_id,
                                                            processes_t.c.version)).mappings().all()
        chain = _chain(conn, store.signer)
    retired = chain.retired
    latest: dict[str, int] = {}
    for r in rows:
        latest[r["process_id"]] = r["version"]
    out = []
    for r in rows:
        pid = r["process_id"]
        if not all_versions and r["version"] != latest[pid]:
            continue
        view = _view(r, retired.get(pid, []), latest[pid], chain)
        if view.retired is not None and not include_retired:
            continue
        out.append(view)
    return out


def get_process(store, process_id: str, version: int | None = None) -> FiledProcess:
    """One filed version (``None``: the latest, retired or not).

    Raises :class:`CaseError` naming the id or version and what is filed.
    """
    ensure_library(store)
    with store._read() as conn:
        versions = _versions(conn, process_id)
        if not versions:
            raise CaseError(_unknown_id(conn, process_id))
        if version is None:
            version = versions[-1]
        elif version not in versions:
            raise CaseError(f"process '{process_id}' has no version {version} (filed versions: "
                            f"{', '.join(map(str, versions))})")
        row = conn.execute(sa.select(processes_t).where(processes_t.c.process_id == process_id,
                                                        processes_t.c.version == version)).mappings().one()
        chain = _chain(conn, store.signer)
    return _view(row, _retirements(chain, process_id), versions[-1], chain)


def history(store, process_id: str) -> dict:
    """Every version and retirement of a process id, in order (for ``process show``)."""
    ensure_library(store)
    with store._read() as conn:
        versions = _versions(conn, process_id)
        if not versions:
            raise CaseError(_unknown_id(conn, process_id))
        rets = _retirements(_chain(conn, store.signer), process_id)
    return {"versions": [get_process(store, process_id, v).to_dict(with_process=False) for v in versions],
            "retirements": [r.to_dict() for r in rets]}


def parse_ref(ref: Any) -> tuple[str, int | None]:
    """``"ID"`` -> (ID, None); ``"ID@3"`` -> (ID, 3)."""
    bad = CaseError(f"process_ref {ref!r}: expected 'ID' (the latest active version) or 'ID@N' "
                    "(version N, a whole number from 1)")
    if not isinstance(ref, str) or not ref.strip():
        raise bad
    pid, sep, ver = ref.strip().rpartition("@")
    if not sep:
        return ref.strip(), None
    if not pid or not ver.isdigit() or int(ver) < 1:
        raise bad
    return pid, int(ver)


def lookup(store, ref: str) -> FiledProcess:
    """The filed process a ``process_ref`` names (see :func:`resolve`)."""
    pid, version = parse_ref(ref)
    ensure_library(store)
    with store._read() as conn:
        versions = _versions(conn, pid)
        if not versions:
            raise CaseError(f"process_ref '{ref}': {_unknown_id(conn, pid)}")
        rets = _retirements(_chain(conn, store.signer), pid)
    filed = f"filed versions: {', '.join(map(str, versions))}"
    if version is None:
        version = versions[-1]
        cover = _covering(rets, version)
        if cover is not None:
            raise CaseError(
                f"process_ref '{ref}': process '{pid}' was retired on {cover.retired_utc[:10]} by "
                f"{cover.actor} ({cover.reason}); name a version explicitly ('{pid}@N') to use a "
                f"retired one ({filed})")
    elif version not in versions:
        raise CaseError(f"process_ref '{ref}': process '{pid}' has no version {version} ({filed})")
    return get_process(store, pid, version)


def resolve(store, ref: str) -> dict:
    """The ``[process]`` table a ``process_ref`` names: ``"ID"`` (latest active version) or
    ``"ID@3"`` (version 3, retired or not).

    Raises :class:`CaseError` naming the ref and what is filed, for an unknown id, an unknown
    version, a retired id (without a version) or a malformed ref.
    """
    return lookup(store, ref).process


@dataclass
class LibraryResolver:
    """The ``process_resolver`` for :func:`deviation.inputs.case.load_case`; remembers what it resolved.

    After ``load_case(path, process_resolver=r)``, ``r.last`` is the :class:`ResolvedRef`
    (id, version, sha256) the case was loaded against, or None when the case inlines its process.
    """

    store: Any
    resolved: list[ResolvedRef] = field(default_factory=list)

    def __call__(self, ref: str) -> dict:
        entry = lookup(self.store, ref)
        self.resolved.append(ResolvedRef(ref, entry.process_id, entry.version, entry.sha256))
        return entry.process

    @property
    def last(self) -> ResolvedRef | None:
        return self.resolved[-1] if self.resolved else None


def resolver(store) -> LibraryResolver:
    """A resolver for ``load_case(..., process_resolver=resolver(store))``."""
    return LibraryResolver(store)


def load_case_with_ref(path: str | os.PathLike, store=None):
    """``load_case`` with the library of ``store``; returns ``(loaded, ResolvedRef | None)``.

    Keep the ref on the record: ``create_record(..., process_id=ref.process_id,
    process_version=str(ref.process_version))`` and ``snapshot["process_ref"] = ref.to_dict()``.
    """
    from deviation.inputs.case import load_case

    res = resolver(store) if store is not None else None
    loaded = load_case(Path(path), process_resolver=res)
    return loaded, (res.last if res is not None else None)


__all__ = ["add_process", "retire_process", "list_processes", "get_process", "history", "lookup",
           "resolve", "resolver", "parse_ref", "load_case_with_ref", "read_process_file",
           "process_table", "validate_process", "ensure_library", "FiledProcess", "Filed",
           "Retirement", "ResolvedRef", "LibraryResolver", "LIBRARY_SCHEMA_VERSION", "filing_payload",
           "retirement_payload", "append_library_event", "check_filing", "library_problems"]


def library_problems(conn: sa.Connection, signer) -> list[str]:
    """What ``verify`` finds wrong in the library: rows that are not the chained filings, chain
    filings with no row, retirements that differ from the chain's (for ``Store.verify``)."""
    names = set(sa.inspect(conn).get_table_names())
    chain = _chain(conn, signer)
    problems = list(chain.problems)
    if "processes" not in names:
        return problems + [f"process '{pid}' version {v} is filed in the chain but the library has no table"
                           for pid, v in chain.filed]
    seen = set()
    for row in conn.execute(sa.select(processes_t)).mappings().all():
        seen.add((row["process_id"], row["version"]))
        why = check_filing(row, chain)
        if why:
            problems.append(why)
    for pid, v in chain.filed:
        if (pid, v) not in seen:
            problems.append(f"process '{pid}' version {v} is filed in the chain but missing from the library")
    table_rets: dict[str, list[tuple]] = {}
    for r in conn.execute(sa.select(retirements_t).order_by(retirements_t.c.seq)).mappings():
        table_rets.setdefault(r["process_id"], []).append((r["up_to_version"], r["reason"]))
    chain_rets = {pid: [(r.up_to_version, r.reason) for r in rets] for pid, rets in chain.retired.items()}
    for pid in sorted(set(table_rets) | set(chain_rets)):
        if table_rets.get(pid, []) != chain_rets.get(pid, []):
            problems.append(f"the retirements of process '{pid}' in the library differ from those in the chain")
    return problems
