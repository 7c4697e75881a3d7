"""The deviation log (21 CFR 113.89: deviations and their dispositions kept in a separate file or
log): every deviation record entered in a period, open items first, as CSV for the plant and
HTML, PDF or Markdown for the file.

Each row: the record, lot, retort, filed process and plant; what happened (the flags of the
latest evaluation); the guidance; the hold (who placed and lifted it, when, why); the process
authority's disposition in force (who, when, decision, reason, result) and any it superseded;
where imported events came from. Built from the store's record summaries (one query), nothing
recomputed.
"""

from __future__ import annotations

import csv
import io
from typing import Any

from deviation.errors import DeviationError
from deviation.records.events import origin_text
from deviation.records.text import one_line

LOG_FORMATS = ("csv", "html", "pdf", "md")

#: The CSV columns, in order (their names are the JSON keys of ``record log --json``).
LOG_COLUMNS = (
    "record_id", "open", "state", "lot", "retort_id", "process_id", "process_version", "plant", "entered_utc",
    "what_happened", "flags", "guidance", "guidance_summary", "delivered_F_min", "target_F_min",
    "on_hold", "hold_placed_by", "hold_placed_utc", "hold_reason", "hold_released_by", "hold_released_utc",
    "hold_release_reason", "decision", "decision_words", "decided_by", "decided_role", "decided_utc",
    "decision_reason", "decision_result", "superseded", "imported_from",
)


def _flag_text(flags: list[dict]) -> str:
    return "; ".join(str(f.get("message") or f.get("code")) for f in flags) or "no deviation flagged"


def log_row(s: dict) -> dict[str, Any]:
    """One record summary as a flat row of the log (plain values; text as stored)."""
    hold = s.get("hold") or {}
    d = s.get("disposition") or {}
    evaluated = s.get("evaluated_utc") is not None
    return {
        "record_id": s["id"], "open": d == {}, "state": s["state"], "lot": s["lot"], "retort_id": s["retort_id"],
        "process_id": s["process_id"], "process_version": s.get("process_version"), "plant": s.get("plant"),
        "entered_utc": s["created_utc"],
        "what_happened": _flag_text(s.get("flags") or []) if evaluated else "not evaluated",
        "flags": ", ".join(str(f.get("code")) for f in s.get("flags") or []),
        "guidance": s.get("guidance"), "guidance_summary": s.get("guidance_summary"),
        "delivered_F_min": s.get("delivered_F_min"), "target_F_min": s.get("target_F_min"),
        "on_hold": bool(s.get("held")),
        "hold_placed_by": hold.get("placed_by"), "hold_placed_utc": hold.get("placed_utc"),
        "hold_reason": hold.get("reason"),
        "hold_released_by": hold.get("released_by"), "hold_released_utc": hold.get("released_utc"),
        "hold_release_reason": hold.get("release_reason"),
        "decision": d.get("decision"), "decision_words": d.get("words"), "decided_by": d.get("by"),
        "decided_role": d.get("role"), "decided_utc": d.get("utc"), "decision_reason": d.get("reason"),
        "decision_result": d.get("result"),
        "superseded": " | ".join(f"{o.get('words')} by {o.get('by')} at {o.get('utc')} ({o.get('reason')})"
                                 for o in s.get("superseded_dispositions") or []),
        "imported_from": " | ".join(origin_text(o) for o in s.get("origins") or []),
    }


def log_rows(summaries: list[dict]) -> list[dict]:
    return [log_row(s) for s in summaries]


def _F(x) -> str:
    return f"{x:.2f}" if isinstance(x, (int, float)) and not isinstance(x, bool) else "-"


def build_log_context(summaries: list[dict], *, since=None, until=None, plant=None, store: str | None = None,
                      store_head: dict | None = None, generated_utc: str | None = None) -> dict:
    """Everything the log templates need, as plain data (texts on one line, figures formatted)."""
    from deviation.report.context import _utc_now

    rows = []
    for r in log_rows(summaries):
        rows.append({**{k: one_line(v) if isinstance(v, str) else v for k, v in r.items()},
                     "F": f"{_F(r['delivered_F_min'])} / {_F(r['target_F_min'])}",
                     "open_word": "OPEN: awaiting the process authority" if r["open"] else "decided"})
    period = f"{since or 'the first record'} to {until or 'the last record'}"
    from deviation.evaluate.output import CAUTION

    return {"title": "Deviation log", "period": period, "since": since, "until": until, "plant": plant,
            "store": store, "store_head": store_head or {}, "generated_utc": generated_utc or _utc_now(),
            "rows": rows, "raw": log_rows(summaries), "count": len(rows),
            "open_count": sum(1 for r in rows if r["open"]), "caution": CAUTION}


_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def _csv_cell(value: Any) -> Any:
    """A text cell a spreadsheet cannot read as a formula (a leading ``'``), kept otherwise."""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if value is None:
        return ""
    if isinstance(value, str) and value.startswith(_FORMULA_START):
        return "'" + value
    return value


def render_log_csv(ctx: dict) -> str:
    out = io.StringIO()
    w = csv.writer(out, lineterminator="\n")
    w.writerow(LOG_COLUMNS)
    for r in ctx["raw"]:
        w.writerow([_csv_cell(r[k]) for k in LOG_COLUMNS])
    return out.getvalue()


def render_log_html(ctx: dict) -> str:
    from deviation.report.render import _jinja_env

    return _jinja_env().get_template("log.html.j2").render(**ctx)


def render_log_markdown(ctx: dict) -> str:
    from deviation.report.render import _jinja_env

    return _jinja_env(markdown=True).get_template("log.md.j2").render(**ctx)


def write_log(path, fmt: str, ctx: dict) -> None:
    """Write the log as ``fmt`` (csv, html, pdf or md) to ``path`` (``-``: standard output)."""
    from deviation.report.render import html_to_pdf, write_output

    if fmt not in LOG_FORMATS:
        raise DeviationError(f"unknown log format {fmt!r}; expected one of: {', '.join(LOG_FORMATS)}")
    if fmt == "pdf" and str(path) == "-":
        raise DeviationError("a PDF is not written to the terminal: give -o FILE.pdf")
    data = {"csv": render_log_csv, "html": render_log_html, "md": render_log_markdown,
            "pdf": lambda c: html_to_pdf(render_log_html(c))}[fmt](ctx)
    write_output(path, data)


__all__ = ["LOG_FORMATS", "LOG_COLUMNS", "log_row", "log_rows", "build_log_context", "render_log_csv",
           "render_log_html", "render_log_markdown", "write_log"]
