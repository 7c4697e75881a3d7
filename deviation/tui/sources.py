"""Where the terminal UI finds filed processes, and the demo store it can open.

Filed processes come from the process library in the store (``deviation.records.processes``) when that
layer is installed, else from a folder of TOML files: ``<cases>/processes/*.toml`` (one
``[process]`` table each) and the ``[process]`` tables of the case files in ``<cases>``.
"""

from __future__ import annotations

import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from deviation.errors import DeviationError
from deviation.resources import shipped

# The demo plant: installed with the package (``deviation/_data/demo_cases``, where the wheel
# maps the repository's ``demo_cases/``), else the checkout's own folder.
REPO_DEMO_CASES = shipped("demo_cases")
DEMO_ACTORS = {"operator": "olga", "supervisor": "sam", "process-authority": "pat", "auditor": "ada"}


@dataclass(frozen=True)
class FiledProcess:
    """A filed scheduled process the operator can pick."""

    key: str  # unique in the list: "library:ID@VERSION" or "file:PATH"
    id: str
    version: str | None
    product: str
    origin: str  # "process library" or the file it came from
    process: dict  # the [process] table

    @property
    def label(self) -> str:
        v = f" v{self.version}" if self.version else ""
        return f"{self.id}{v} · {self.product}"


def _library():
    try:
        from deviation.records import processes as library
    except ImportError:
        return None
    return library


def _get(obj: Any, name: str, default=None):
    if isinstance(obj, dict):
        return obj.get(name, default)
    return getattr(obj, name, default)


def _process_table(obj: Any) -> dict | None:
    """The ``[process]`` table in whatever the library returns (a dict, a model, a record)."""
    for candidate in (_get(obj, "process"), _get(obj, "data"), obj):
        if hasattr(candidate, "model_dump"):
            candidate = candidate.model_dump(mode="json")
        if isinstance(candidate, dict):
            if isinstance(candidate.get("process"), dict):
                candidate = candidate["process"]
            if "process_temperature_C" in candidate or "process_temperature_F" in candidate:
                return candidate
    return None


def library_processes(store) -> list[FiledProcess]:
    """The active filed processes of the store's process library (empty without the layer)."""
    lib = _library()
    if lib is None or store is None:
        return []
    out = []
    try:
        items = list(lib.list_processes(store))
    except DeviationError:
        return []
    for item in items:
        pid = _get(item, "id") or _get(item, "process_id")
        version = _get(item, "version")
        if not pid or _get(item, "retired", False):
            continue
        try:
            got = lib.get_process(store, pid, version)
        except DeviationError:
            continue
        table = _process_table(got)
        if table is None:
            continue
        v = None if version is None else str(version)
        out.append(FiledProcess(f"library:{pid}@{v}", str(pid), v, str(table.get("product", "")),
                                "process library", table))
    return out


def folder_processes(cases_dir: str | Path | None) -> list[FiledProcess]:
    """Filed processes from ``processes/*.toml`` and the case files of a folder."""
    from deviation.inputs.case import load_toml

    if cases_dir is None:
        return []
    root = Path(cases_dir)
    files = sorted((root / "processes").glob("*.toml")) + sorted(root.glob("*.toml"))
    out, seen = [], {}
    for path in files:
        try:
            table = load_toml(path).get("process")
        except DeviationError:
            continue
        if not isinstance(table, dict) or not table.get("id"):
            continue
        if seen.get(table["id"]) == table:
            continue  # a case file that inlines a process already listed from its own file
        seen[table["id"]] = table
        out.append(FiledProcess(f"file:{path}", str(table["id"]), None, str(table.get("product", "")),
                                str(path), table))
    return out


def filed_processes(store, cases_dir) -> list[FiledProcess]:
    """The library's processes first, then the folder's (those not in the library)."""
    lib = library_processes(store)
    have = {p.id for p in lib}
    return lib + [p for p in folder_processes(cases_dir) if p.id not in have]


# ---------------------------------------------------------------------------------------------
# Demo store

# (case file, what happens to its record after the entry): a few records in different states.
DEMO_RECORDS = (
    ("chili_temperature_drop.toml", "held"),
    ("peas_short_hold.toml", "evaluated"),
    ("tray_steam_failure.toml", "decided"),
    ("chili_no_deviation.toml", "evaluated"),
    ("peas_steam_loss.toml", "released"),
)


def demo_db_path() -> Path:
    """A fresh demo store in a temporary folder."""
    return Path(tempfile.mkdtemp(prefix="deviation-demo-")) / "demo.db"


def _seed_library(store, cases_dir: Path) -> int:
    lib = _library()
    add = getattr(lib, "add_process", None) if lib is not None else None
    if add is None:
        return 0
    from deviation.inputs.case import load_toml

    n = 0
    for path in sorted((cases_dir / "processes").glob("*.toml")):
        for call in (
            lambda: add(store, load_toml(path), actor=DEMO_ACTORS["process-authority"], role="process-authority",
                        reason="demo library"),
            lambda: add(store, path, actor=DEMO_ACTORS["process-authority"], role="process-authority"),
        ):
            try:
                call()
                n += 1
                break
            except TypeError:
                continue  # another signature of the library: try the next form
            except DeviationError:
                break
    return n


def _relative_sources(loaded, base: Path):
    """Name the demo files relative to the demo folder's parent, so the seeded records (and their
    hashes) are the same wherever the project is checked out."""
    import os
    from dataclasses import replace

    def rel(p):
        return None if p is None else os.path.relpath(p, base)

    return replace(loaded, source=rel(loaded.source), retort_log_source=rel(loaded.retort_log_source),
                   cold_spot_log_source=rel(loaded.cold_spot_log_source))


def seed_demo(store, cases_dir: str | Path | None = None) -> dict:
    """Fill an empty store with the demo plant's processes and a few records in different states."""
    from deviation.evaluate import evaluate_case
    from deviation.inputs.case import load_case

    cases_dir = Path(cases_dir) if cases_dir else REPO_DEMO_CASES
    if store.count_records():
        return {"records": 0, "processes": 0}
    processes = _seed_library(store, cases_dir)
    op, sup, pa = DEMO_ACTORS["operator"], DEMO_ACTORS["supervisor"], DEMO_ACTORS["process-authority"]
    made = 0
    for name, fate in DEMO_RECORDS:
        path = cases_dir / name
        if not path.exists():
            continue
        loaded = _relative_sources(load_case(path), cases_dir.parent)
        dev, proc = loaded.case.deviation, loaded.case.process
        rid = store.create_record(loaded.snapshot(), actor=op, role="operator", lot=dev.lot,
                                  retort_id=dev.retort_id, process_id=proc.id)
        ev = evaluate_case(loaded).model_dump(mode="json")
        store.add_evaluation(rid, ev, actor=op, role="operator", snapshot_seq=1,
                             options={"conservative": ev["conservative"], "what_if": True})
        if fate in ("held", "decided", "released"):
            store.place_hold(rid, reason="deviation found at the retort; set aside for evaluation",
                             actor=sup, role="supervisor")
        if fate == "released":
            # a held lot is released only by the process authority's disposition (which lifts it)
            store.decide(rid, decision="release-after-evaluation",
                         reason="the operator's 12-min extension and the authority's own heat penetration "
                                "data for this fill cover the steam loss",
                         actor=pa, role="process-authority")
        if fate == "decided":
            store.decide(rid, decision="reprocess", reason="delivered F0 short of the filed target",
                         result="reprocessed as filed", actor=pa, role="process-authority")
        made += 1
    return {"records": made, "processes": processes}


__all__ = ["FiledProcess", "filed_processes", "folder_processes", "library_processes", "seed_demo",
           "demo_db_path", "REPO_DEMO_CASES", "DEMO_ACTORS"]
