"""Text is data in the reports (issue 14): a product name, a lot, a note or a rule's words that
hold HTML, Markdown or direction overrides come out as text in HTML, Markdown and PDF; the
Markdown is read back with a CommonMark renderer (markdown-it-py) to see what a reader would get."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

from deviation import report
from deviation.evaluate import evaluate_case
from deviation.inputs.case import load_case

ROOT = Path(__file__).resolve().parents[2]
HOSTILE = {
    "script": "<script>alert(1)</script>",
    "image": "<img src=http://evil.example/x.png>",
    "link": "[click](javascript:alert(1))",
    "md_image": "![x](http://evil.example/y.png)",
    "heading": "ok\n# DISPOSITION: RELEASE APPROVED",
    "emphasis": "**RELEASE APPROVED**",
    "entity": "&#x202E;gnp.exe",
    "rtl": "exe.\u202etxt",
    "pipe": "a | b",
}


@pytest.fixture(scope="module")
def hostile_report(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("hostile")
    text = (ROOT / "demo_cases" / "chili_temperature_drop.toml").read_text(encoding="utf-8")
    product = HOSTILE["heading"] + " " + HOSTILE["script"]
    text = re.sub(r'product = ".*"', lambda m: "product = " + json.dumps(product), text, count=1)
    text = text.replace('retort_log = "logs/', f'retort_log = "{ROOT.as_posix()}/demo_cases/logs/')
    case = tmp / "hostile.toml"
    case.write_text(text, encoding="utf-8")
    loaded = load_case(case)
    ev = evaluate_case(loaded, conservative=False)
    events = [{"seq": i + 1, "kind": "note", "utc": "2026-11-20T08:00:00.000000Z", "actor": HOSTILE["link"],
               "role": "operator", "payload": {"text": v}, "hash": "ab" * 32, "origin": None}
              for i, v in enumerate(HOSTILE.values())]
    events[0]["origin"] = '{"import":"x","source_store":"<b>S</b>","signatures":"not-verified"}'
    ctx = report.build_report_context(loaded, ev, rule_set=None, events=events, record_id="DR-AAAAAAAAAAAA",
                                      record_hash="ab" * 32, with_plots=False)
    return ctx


def test_markdown_renders_every_field_as_text(hostile_report):
    from markdown_it import MarkdownIt

    md = report.render_markdown(hostile_report)
    html = MarkdownIt("commonmark").enable("table").render(md)
    assert "<script" not in html and "<img" not in html and "javascript:" not in html.replace(
        "(javascript:alert(1))", "")
    assert '<a href="javascript' not in html and "<a href" not in html
    assert "evil.example/y.png" not in re.findall(r'src="([^"]*)"', html)
    headings = re.findall(r"<h[1-6]>(.*?)</h[1-6]>", html)
    assert not any("RELEASE APPROVED" in h for h in headings)  # no forged heading
    assert "<strong>RELEASE APPROVED</strong>" not in html
    assert "\u202e" not in html and "&#x202E;" not in md.replace("&amp;#x202E;", "")
    # ...and the texts are still there to read, as typed.
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert "[click](javascript:alert(1))" in html and "**RELEASE APPROVED**" in html
    assert "exe.⟨U+202E⟩txt" in html


def test_html_and_pdf_escape_every_field(hostile_report):
    html = report.render_html(hostile_report)
    assert "<script>" not in html and "<img src=http" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert "\u202e" not in html and "exe.⟨U+202E⟩txt" in html
    assert "&lt;b&gt;S&lt;/b&gt;" in html  # the origin of an imported event, shown and escaped
    pdf = report.render_pdf(hostile_report)
    assert pdf.startswith(b"%PDF")


def test_the_stylesheet_takes_no_text_from_the_record(hostile_report):
    ctx = dict(hostile_report, meta=dict(hostile_report["meta"], engine_version='1"; } body { display: none'))
    html = report.render_html(ctx)
    style = html[html.index("<style>"):html.index("</style>")]
    assert "body { display: none" not in style and "engine 1?? ? body ? display: none" in style


def test_every_flag_the_evaluation_may_raise_has_a_title():
    from deviation.guidance.vocabulary import FLAG_CODES

    assert [c for c in FLAG_CODES if c not in report.FLAG_TITLES] == []
