"""The written evaluation report (HTML, PDF, Markdown) and its templates."""

from deviation.report.context import FLAG_TITLES, FORMATS, REFERENCES, build_report_context
from deviation.report.plots import plots_svg
from deviation.report.log import LOG_COLUMNS, LOG_FORMATS, build_log_context, log_rows, write_log
from deviation.report.render import md_text, render_html, render_markdown, render_pdf, write_report

__all__ = ["FLAG_TITLES", "FORMATS", "LOG_COLUMNS", "LOG_FORMATS", "REFERENCES", "build_log_context",
           "build_report_context", "log_rows", "md_text", "plots_svg", "render_html", "render_markdown",
           "render_pdf", "write_log", "write_report"]
