"""The written evaluation report (HTML, PDF, Markdown) and its templates."""

from deviation.report.context import FLAG_TITLES, FORMATS, REFERENCES, build_report_context
from deviation.report.plots import plots_svg
from deviation.report.render import render_html, render_markdown, render_pdf, write_report

__all__ = ["FLAG_TITLES", "FORMATS", "REFERENCES", "build_report_context", "plots_svg", "render_html",
           "render_markdown", "render_pdf", "write_report"]
