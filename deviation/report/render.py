"""Rendering the report context: HTML and Markdown from the templates, PDF from the HTML
(WeasyPrint), and writing the file."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from deviation.errors import DeviationError
from deviation.report.context import FORMATS

# System packages WeasyPrint needs on Debian/Ubuntu (Pango for text layout, HarfBuzz for
# shaping, fontconfig and a font). Named in the error a missing one raises.
PDF_SYSTEM_PACKAGES = ("libpango-1.0-0 libpangoft2-1.0-0 libharfbuzz0b libharfbuzz-subset0 libfontconfig1 "
                       "libglib2.0-0 fonts-dejavu-core")


def _jinja_env():
    try:
        import jinja2
    except ImportError:
        raise DeviationError("the report needs the Python package jinja2: pip install jinja2") from None
    return jinja2.Environment(
        loader=jinja2.PackageLoader("deviation.report", "templates"),
        autoescape=jinja2.select_autoescape(enabled_extensions=("html.j2",), default_for_string=True),
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )


def render_html(ctx: dict) -> str:
    """The report as a self-contained XHTML-compatible HTML document (inline CSS and SVG only)."""
    return _jinja_env().get_template("report.html.j2").render(**ctx)


def _md_cell(value: Any) -> str:
    """A Markdown table cell: pipes escaped, line breaks flattened."""
    return str(value).replace("|", "\\|").replace("\n", " ")


def render_markdown(ctx: dict) -> str:
    """The report as Markdown (GitHub tables; no plots, the history table stands for them)."""
    env = _jinja_env()
    env.filters["cell"] = _md_cell
    return env.get_template("report.md.j2").render(**ctx)


def render_pdf(ctx: dict) -> bytes:
    """The report as PDF: the same HTML printed by WeasyPrint (A4, vector plots).

    Raises
    ------
    DeviationError
        WeasyPrint or the system libraries it needs (Pango) are missing.
    """
    html = render_html(ctx)
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
    import sys

    if fmt not in FORMATS:
        raise DeviationError(f"unknown report format {fmt!r}; expected one of: {', '.join(FORMATS)}")
    data: str | bytes = {"html": render_html, "md": render_markdown, "pdf": render_pdf}[fmt](ctx)
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
