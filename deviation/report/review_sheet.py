"""The daily record review sheet: every cycle of the day with what the review found, for the
qualified person's signature (21 CFR 113.100(b)). HTML from ``templates/review_sheet.html.j2``,
PDF from the same HTML by WeasyPrint, as the evaluation report."""

from __future__ import annotations

from datetime import UTC, datetime
from pathlib import Path

from deviation.errors import DeviationError
from deviation.report.render import _jinja_env, html_to_pdf, write_output

SHEET_FORMATS = ("html", "pdf")
# (symbol, word, css class): colour is never the only signal
STATUS_LOOK = {"clean": ("✓", "reviewed clean", "clean"),
               "deviation": ("⚑", "DEVIATION", "deviation"),
               "not-reviewed": ("✗", "NOT REVIEWED", "not-reviewed")}


def _num(value, spec: str, unit: str = "") -> str:
    return "—" if value is None else f"{value:{spec}}{unit}"


def _cycle_row(c: dict) -> dict:
    symbol, word, css = STATUS_LOOK[c["status"]]
    if c["status"] == "deviation":
        found = "; ".join(f"{f['code']}: {f['message']}" for f in c.get("flags") or []) or (
            f"guidance {c.get('disposition')}")
    elif c["status"] == "not-reviewed":
        found = "; ".join(c.get("why") or [])
    else:
        notes = ", ".join(f["code"] for f in c.get("flags") or [])
        found = "no deviation in the record" + (f" (notes: {notes})" if notes else "")
    record = c.get("record_id") or ""
    if c.get("record") == "already open":
        record += " (already open)"
    elif c.get("record") == "not opened":
        record = f"NOT OPENED: {c.get('record_error', '')}"
    process = c.get("process_id") or c.get("process") or ""
    if c.get("process_version") is not None:
        process += f"@{c['process_version']}"
    return {"symbol": symbol, "word": word, "css": css, "lot": c.get("lot") or "", "retort": c.get("retort") or "",
            "process": process, "product": c.get("product") or "",
            "steam_on": (c.get("steam_on") or "").replace("T", " "),
            "initial": _num(c.get("initial_temperature_C"), ".1f", " °C"),
            "delivered": _num(c.get("delivered_F_min"), ".2f"), "target": _num(c.get("target_F_min"), ".2f"),
            "disposition": c.get("disposition") or "", "found": found, "record": record,
            "recorder_file": c.get("recorder_file") or "", "recorder_sha256": c.get("recorder_sha256") or "",
            "where": c.get("where") or "", "guidance": c.get("guidance")}


def build_sheet_context(review: dict, *, generated_utc: str | None = None) -> dict:
    """Everything the review sheet shows, formatted once (``review``: :func:`deviation.live.review.review_day`)."""
    rows = [_cycle_row(c) for c in review["cycles"]]
    counts = review["counts"]
    return {"plant": review.get("plant") or "", "date": review.get("date") or "",
            "manifest": review["manifest"], "manifest_sha256": review["manifest_sha256"],
            "rows": rows, "attention": [r for r in rows if r["css"] != "clean"],
            "counts": counts, "count": review["count"], "reviewer": review.get("reviewer") or "",
            "store": review.get("store") or "no record store (screen only)",
            "recorded": review.get("recorded", False), "engine_version": review["engine_version"],
            "rule_set_sha256": review["rule_set_sha256"], "conservative": review.get("conservative", False),
            "caution": review["caution"],
            "generated_utc": generated_utc or datetime.now(UTC).strftime("%Y-%m-%d %H:%M UTC")}


def render_sheet_html(ctx: dict) -> str:
    """The review sheet as a self-contained HTML document."""
    return _jinja_env().get_template("review_sheet.html.j2").render(**ctx)


def sheet_format(path) -> str:
    """``html`` or ``pdf`` from the file name's suffix."""
    fmt = {".html": "html", ".htm": "html", ".pdf": "pdf"}.get(Path(path).suffix.lower())
    if fmt not in SHEET_FORMATS:
        raise DeviationError(f"cannot tell the review sheet's format from '{path}': name it .html or .pdf",
                             source="--sheet")
    return fmt


def write_review_sheet(path, review: dict, fmt: str | None = None) -> str:
    """Write the sheet of ``review`` to ``path`` as ``fmt`` (``html`` or ``pdf``; default from the
    suffix); returns the format written."""
    fmt = fmt or sheet_format(path)
    html = render_sheet_html(build_sheet_context(review))
    write_output(path, html_to_pdf(html) if fmt == "pdf" else html)
    return fmt


__all__ = ["SHEET_FORMATS", "build_sheet_context", "render_sheet_html", "sheet_format", "write_review_sheet"]
