"""Rendering the report context: HTML and Markdown from the templates, PDF from the HTML
(WeasyPrint), and writing the file.

Text is data on every face. Every value a template prints goes through the environment's
``finalize``: in HTML (and so the PDF) it is autoescaped and its control and direction
characters are made visible (:func:`deviation.records.text.visible`); in Markdown every value is
written on one line with each character that could start markup escaped (:func:`md_text`), so a
product name, a note or a rule's text can open no heading, link, image or HTML element. Values
inside the stylesheet go through ``css_text``."""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

from deviation.errors import DeviationError
from deviation.records.text import visible
from deviation.report.context import FORMATS

# System packages WeasyPrint needs on Debian/Ubuntu (Pango for text layout, HarfBuzz for
# shaping, fontconfig and a font). Named in the error a missing one raises.
PDF_SYSTEM_PACKAGES = ("libpango-1.0-0 libpangoft2-1.0-0 libharfbuzz0b libharfbuzz-subset0 libfontconfig1 "
                       "libglib2.0-0 fonts-dejavu-core")


_MD_ESCAPE = {c: "\\" + c for c in "\\`*_[]#|~"}
_MD_ESCAPE.update({"<": "&lt;", ">": "&gt;"})
# An entity reference would be decoded by the renderer (``&#x202E;`` is a direction override).
_MD_ENTITY = re.compile(r"&(?=#[0-9]+;|#[xX][0-9a-fA-F]+;|[A-Za-z][A-Za-z0-9]*;)")
# What opens a block at the start of a line: a list item, a thematic break or setext underline,
# an ordered list item ("1." or "1)" followed by a space).
_MD_LINE_START = re.compile(r"^(\s*)([-=+]+(?=\s|$)|\d{1,9}[.)](?=\s|$))")


def md_text(value: Any) -> str:
    """A value for Markdown, printed literally: on one line, every character that could open
    markup (emphasis, code, link, image, heading, table cell, HTML, entity) escaped."""
    if value is None:
        return ""
    text = visible(value).replace("\n", " ").replace("\t", " ")
    text = "".join(_MD_ESCAPE.get(ch, ch) for ch in _MD_ENTITY.sub("&amp;", text))
    m = _MD_LINE_START.match(text)
    if m:  # a list item, a setext underline or an ordered list at the start of a line
        lead = m.group(2)
        escaped = lead[:-1] + "\\" + lead[-1] if lead[0].isdigit() else "\\" + lead
        text = m.group(1) + escaped + text[m.end():]
    return text


def css_text(value: Any) -> str:
    """A value inside the stylesheet (a ``content:`` string): letters, digits, ``.``, ``-``,
    ``+``, ``_``, ``:`` and spaces only."""
    return re.sub(r"[^A-Za-z0-9 ._+:-]", "?", str(value))


def _visible_finalize(value: Any) -> Any:
    from markupsafe import Markup

    if isinstance(value, Markup) or not isinstance(value, str):
        return value
    return visible(value)


def _jinja_env(*, markdown: bool = False):
    """The templates' environment: HTML autoescaped with visible controls, or Markdown escaped
    (``markdown``)."""
    try:
        import jinja2
    except ImportError:
        raise DeviationError("the report needs the Python package jinja2: pip install jinja2") from None
    env = jinja2.Environment(
        loader=jinja2.PackageLoader("deviation.report", "templates"),
        autoescape=False if markdown else jinja2.select_autoescape(enabled_extensions=("html.j2",),
                                                                   default_for_string=True),
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
        finalize=md_text if markdown else _visible_finalize,
    )
    env.filters["css_text"] = css_text
    env.filters["cell"] = lambda v: v  # kept for old templates: finalize escapes every value
    return env


def render_html(ctx: dict) -> str:
    """The report as a self-contained XHTML-compatible HTML document (inline CSS and SVG only)."""
    return _jinja_env().get_template("report.html.j2").render(**ctx)


def render_markdown(ctx: dict) -> str:
    """The report as Markdown (GitHub tables; no plots, the history table stands for them)."""
    return _jinja_env(markdown=True).get_template("report.md.j2").render(**ctx)


def render_pdf(ctx: dict) -> bytes:
    """The report as PDF: the same HTML printed by WeasyPrint (A4, vector plots).

    Raises
    ------
    DeviationError
        WeasyPrint or the system libraries it needs (Pango) are missing.
    """
    return html_to_pdf(render_html(ctx))


def html_to_pdf(html: str) -> bytes:
    """A document of this package's HTML printed by WeasyPrint (nothing fetched from outside)."""
    try:
        import weasyprint
    except ImportError:
        raise DeviationError("PDF output needs the Python package weasyprint: pip install weasyprint "
                             f"(and the system packages: apt-get install {PDF_SYSTEM_PACKAGES})") from None
    except OSError as exc:
        raise DeviationError(f"PDF output cannot load a system library ({exc}); install: "
                             f"apt-get install {PDF_SYSTEM_PACKAGES}") from None
    try:
        # No base_url: nothing in the document is fetched (it holds no external resource).
        return weasyprint.HTML(string=html).write_pdf()
    except OSError as exc:
        raise DeviationError(f"PDF output failed ({exc}); check the system packages: "
                             f"apt-get install {PDF_SYSTEM_PACKAGES}") from None


def write_report(path, fmt: str, ctx: dict) -> None:
    """Render ``ctx`` as ``fmt`` (``html``, ``pdf`` or ``md``) and write it to ``path`` (``-``: stdout)."""
    if fmt not in FORMATS:
        raise DeviationError(f"unknown report format {fmt!r}; expected one of: {', '.join(FORMATS)}")
    write_output(path, {"html": render_html, "md": render_markdown, "pdf": render_pdf}[fmt](ctx))


def write_output(path, data: str | bytes) -> None:
    """Write a rendered document to ``path`` (``-``: standard output, text only)."""
    import sys

    if str(path) == "-":
        if isinstance(data, bytes):
            raise DeviationError("a PDF is not written to the terminal: give -o FILE.pdf")
        sys.stdout.write(data)
        return
    path = Path(path)
    try:
        if isinstance(data, bytes):
            path.write_bytes(data)
        else:
            path.write_text(data, encoding="utf-8")
    except OSError as exc:
        raise DeviationError(f"cannot write the report: {exc.strerror}", source=str(path)) from None
