"""The written evaluation report (deviation/report.py, deviation/cli_report.py).

Every demo case gives HTML, Markdown and PDF; the PDF's own text (read back with pypdf) holds
the key figures of the evaluation; the HTML is well-formed XML and fetches nothing; the same
input gives the same document except for the generation-time line.
"""

from __future__ import annotations

import argparse
import io
import re
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

pytest.importorskip("jinja2")
pytest.importorskip("matplotlib")
pytest.importorskip("weasyprint")
pypdf = pytest.importorskip("pypdf")

from deviation import report
from deviation.cli import report as cli_report  # noqa: E402
from deviation.inputs.case import load_case  # noqa: E402
from deviation.errors import DeviationError  # noqa: E402
from deviation.evaluate import CAUTION, evaluate_case  # noqa: E402
from deviation.guidance.wording import DISPOSITION_LOOK  # noqa: E402
from deviation.guidance import load_rule_set  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
DEMO_CASES = sorted((ROOT / "demo_cases").glob("*.toml"))
TIME_A = "2026-03-01T08:00:00Z"
TIME_B = "2031-12-31T23:59:59Z"


def _flat(text: str) -> str:
    """Whitespace collapsed: PDF text extraction breaks lines where the layout did."""
    return " ".join(text.split())


@pytest.fixture(scope="module")
def rule_set():
    return load_rule_set([])


def _render_case(path: Path) -> dict:
    """Evaluate one case and render it in every format (run in a worker process)."""
    rules = load_rule_set([])
    loaded = load_case(path)
    ev = evaluate_case(loaded, rule_set=rules)
    ctx = report.build_report_context(loaded, ev, rule_set=rules, generated_utc=TIME_A)
    pdf = report.render_pdf(ctx)
    reader = pypdf.PdfReader(io.BytesIO(pdf))
    return {
        "loaded": loaded, "ev": ev, "ctx": ctx,
        "html": report.render_html(ctx), "md": report.render_markdown(ctx), "pdf": pdf,
        "pdf_pages": [page.extract_text() for page in reader.pages],
    }


@pytest.fixture(scope="module")
def reports():
    """Every demo case evaluated and rendered once in every format.

    The PDFs are the slow part (about 2-3 s each): they are rendered in forked worker processes
    when the machine has more than one core.
    """
    import multiprocessing
    import os

    workers = min(len(DEMO_CASES), os.cpu_count() or 1, 6)
    if workers > 1 and "fork" in multiprocessing.get_all_start_methods():
        with multiprocessing.get_context("fork").Pool(workers) as pool:
            rendered = pool.map(_render_case, DEMO_CASES)
    else:
        rendered = [_render_case(path) for path in DEMO_CASES]
    return {path.stem: r for path, r in zip(DEMO_CASES, rendered)}


def test_there_are_demo_cases():
    assert len(DEMO_CASES) >= 10, DEMO_CASES


# ---------------------------------------------------------------------------------------------
# Every format for every demo case


@pytest.mark.parametrize("name", [p.stem for p in DEMO_CASES])
def test_every_format_is_produced(reports, name):
    r = reports[name]
    assert r["html"].startswith("<!DOCTYPE html>")
    assert r["md"].startswith("# Thermal process deviation evaluation")
    assert r["pdf"].startswith(b"%PDF-")
    assert len(r["pdf_pages"]) >= 2
    lot = r["ev"].lot
    for text in (r["html"], r["md"]):
        assert lot in text


@pytest.mark.parametrize("name", [p.stem for p in DEMO_CASES])
def test_pdf_text_holds_the_key_figures(reports, name):
    r = reports[name]
    ev = r["ev"]
    text = _flat("\n".join(r["pdf_pages"]))
    first = _flat(r["pdf_pages"][0])
    word = DISPOSITION_LOOK[ev.guidance["disposition"]][0]
    # The figures come from the evaluation object, not from the report's own formatting code.
    assert f"{ev.delivered_F_min:.2f} min" in first
    assert f"{ev.target_F_min:.2f} min" in first
    assert f"{ev.scheduled_F_min:.2f} min" in text
    assert f"{ev.botulinum_log_reductions:.1f}" in text
    assert f"{ev.expected_nonsterile_containers:.3g}" in text
    if ev.cycle.running:  # the record stops mid-cycle: the projection is on the first page too
        assert f"{ev.projected_F_min:.2f} min" in first
    assert ev.lot in first
    assert ev.process_id in first
    assert word in first
    # The caution is on the first page, whole.
    assert _flat(CAUTION) in first
    # Long hashes wrap inside their table cells: compare without whitespace.
    packed = re.sub(r"\s", "", text)
    assert r["loaded"].sha256 in packed
    assert ev.guidance["rule_set_sha256"] in packed
    assert f"engine {ev.engine_version}" in text or ev.engine_version in text
    assert "Not a stored record" in text
    # The signature block closes the report.
    last = _flat(r["pdf_pages"][-1])
    assert "Process authority" in last and "Signature" in last


@pytest.mark.parametrize("name", [p.stem for p in DEMO_CASES])
def test_report_names_every_deviation_found(reports, name):
    r = reports[name]
    text = _flat(r["md"])
    for flag in r["ev"].flags:
        assert _flat(report.FLAG_TITLES[flag.code]) in text
    for interval in r["ev"].cycle.low_intervals:
        assert f"{interval.start_min:.2f}" in text and f"{interval.end_min:.2f}" in text


def test_report_holds_inputs_method_and_references(reports):
    r = reports["chili_temperature_drop"]
    text = _flat(r["md"])
    # The integration rule the evaluation used (the engine's default reading may be conservative).
    rule = "Conservative: each interval credited" if r["ev"].conservative else "Trapezoidal rule"
    for needle in ("Bigelow", "Ball, C. O. (1923)", "Carslaw", "Olson, F. C. W.", "Stumbo", "21 CFR 113.89",
                   "Duhamel", rule, "fh: 52 min", "Inside diameter: 87 mm",
                   "C. botulinum D at Tref: 0.21 min", "118.3 °C", "fill weight", "R3-2026-1104-A.csv",
                   "Basis:"):
        assert needle in text, needle
    # The retort record's checksum is the SHA-256 of the log file (computed here independently).
    import hashlib

    log = ROOT / "demo_cases" / "logs" / "R3-2026-1104-A.csv"
    assert hashlib.sha256(log.read_bytes()).hexdigest() in text or \
        hashlib.sha256(log.read_text(encoding="utf-8").encode()).hexdigest() in text


def test_conservative_report_states_the_options(rule_set):
    loaded = load_case(ROOT / "demo_cases" / "chili_temperature_drop.toml")
    ev = evaluate_case(loaded, conservative=True, rule_set=rule_set)
    md = report.render_markdown(report.build_report_context(loaded, ev, rule_set=rule_set, with_plots=False))
    assert "lower of its two lethal rates" in md
    assert f"{ev.delivered_F_min:.2f} min" in md



def test_a_continuous_systems_report_lists_the_entry_ranges(reports):
    # issue 15: the report lists every entry-time range (clock times), affected or not
    r = reports["soup_reel_stop"]
    ranges = r["ev"].affected_containers
    assert ranges and any(a["disposition"] != "unaffected" for a in ranges)
    for text in (r["md"], r["html"], " ".join(r["pdf_pages"])):
        assert "Containers of the stream" in text
    md = r["md"]
    for a in ranges:
        row = f"| {a['containers']:,} | {a['min_F_min']:.2f} min | {a['disposition']} |"
        assert row in md, row
        assert a["entry_start"].replace("T", " ") in md
    assert "Containers of the stream" not in reports["chili_temperature_drop"]["md"]


def test_the_report_names_the_headline_basis_and_the_broken_curve(reports):
    r = reports["pudding_steam_drop"]
    ev, md = r["ev"], r["md"]
    assert ev.F_basis and _flat(ev.F_basis)[:60] in _flat(md)
    assert "Broken heating curve: break temperature" in md and "97.5 °C" in md
    assert f"{ev.model_F_min:.2f} min" in md  # the model F before the relative correction
    assert f"{ev.ball_formula_F_min:.2f} min" in md
    assert "thickens once" in md  # the method says how the break is read


def test_a_monte_carlo_not_run_says_why(rule_set):
    loaded = load_case(ROOT / "demo_cases" / "pudding_steam_drop.toml")
    ev = evaluate_case(loaded, rule_set=rule_set, what_if=False, uncertainty=True)
    md = report.render_markdown(report.build_report_context(loaded, ev, rule_set=rule_set, with_plots=False))
    assert "The Monte Carlo estimate was not run: a broken heating curve" in _flat(md)


# ---------------------------------------------------------------------------------------------
# HTML: well-formed and self-contained

_XLINK_HREF = "{http://www.w3.org/1999/xlink}href"
_URL_ATTRIBUTES = ("src", "href", _XLINK_HREF, "data", "poster", "action", "srcset", "background")


def _local(ref: str) -> bool:
    return ref.startswith("#") or ref.startswith("data:")


def external_references(html: str) -> list[str]:
    """Every reference in an XHTML-compatible document that would fetch something (empty: none).

    Parses the document as XML (raises ``ET.ParseError`` if it is not well-formed), then checks
    URL-valued attributes, ``url(...)`` and ``@import`` in style sheets and style attributes,
    and finally the raw text for any scheme or protocol-relative ``//`` outside the namespace
    declarations (which name vocabularies and are never fetched).
    """
    found = []
    root = ET.fromstring(html)
    for el in root.iter():
        for name in _URL_ATTRIBUTES:
            value = el.get(name)
            if value is not None and not _local(value.strip()):
                found.append(f"{el.tag} {name}={value!r}")
        styles = [el.get("style") or ""]
        if el.tag.endswith("style"):
            styles.append(el.text or "")
        for css in styles:
            if "@import" in css:
                found.append("@import")
            for ref in re.findall(r"url\(\s*['\"]?([^'\")]*)", css):
                if not _local(ref):
                    found.append(f"url({ref})")
    raw = re.sub(r'\sxmlns(:\w+)?="[^"]*"', "", html)
    for pattern in ("http:", "https:", "ftp:", "file:", "//"):
        if pattern in raw:
            i = raw.index(pattern)
            found.append(f"raw {pattern!r} near {raw[max(0, i - 40):i + 40]!r}")
    return found


@pytest.mark.parametrize("name", [p.stem for p in DEMO_CASES])
def test_html_is_well_formed_and_self_contained(reports, name):
    html = reports[name]["html"]
    root = ET.fromstring(html)  # expat: fails on any unclosed tag or bare '&'
    assert root.tag == "html"
    svgs = [el for el in root.iter() if el.tag == "{http://www.w3.org/2000/svg}svg"]
    assert len(svgs) == 2  # both plots inline
    assert external_references(html) == []


@pytest.mark.parametrize("bad", [
    '<img src="https://example.org/logo.png" />',
    '<link rel="stylesheet" href="//cdn.example.org/a.css" />',
    '<div style="background: url(pic.png)">x</div>',
    '<style>@import "print.css";</style>',
    '<script src="app.js"></script>',
])
def test_external_reference_check_can_fail(reports, bad):
    html = reports["chili_no_deviation"]["html"].replace("</body>", bad + "</body>")
    assert external_references(html)


def test_user_text_is_escaped_in_html(reports):
    ctx = reports["chili_no_deviation"]["ctx"]
    hostile = 'Seal <b>bad</b> & "fill" <script src="x.js"></script>'
    html = report.render_html(dict(ctx, identity=dict(ctx["identity"], description=hostile)))
    ET.fromstring(html)
    assert "&lt;script" in html and "<script" not in html
    assert external_references(html) == []


def test_well_formedness_check_can_fail(reports):
    html = reports["chili_no_deviation"]["html"].replace("</table>", "", 1)
    with pytest.raises(ET.ParseError):
        ET.fromstring(html)


# ---------------------------------------------------------------------------------------------
# Determinism


def _without(text: str, stamp: str) -> list[str]:
    lines = text.splitlines()
    assert sum(stamp in line for line in lines) == 1, "the generation time must be on exactly one line"
    return [line for line in lines if stamp not in line]


@pytest.mark.parametrize("name", [p.stem for p in DEMO_CASES])
def test_same_input_gives_same_report_except_generation_time(reports, rule_set, name):
    r = reports[name]
    # A fresh load and evaluation, as a second run of the command would do.
    loaded = load_case(ROOT / "demo_cases" / f"{name}.toml")
    ev = evaluate_case(loaded, rule_set=rule_set)
    ctx_b = report.build_report_context(loaded, ev, rule_set=rule_set, generated_utc=TIME_B)
    assert _without(r["html"], TIME_A) == _without(report.render_html(ctx_b), TIME_B)
    assert _without(r["md"], TIME_A) == _without(report.render_markdown(ctx_b), TIME_B)


def test_same_input_gives_same_pdf_text_except_generation_time(reports, rule_set):
    r = reports["peas_steam_loss"]
    ctx_b = dict(r["ctx"], meta=dict(r["ctx"]["meta"], generated_utc=TIME_B))
    pages_b = [p.extract_text() for p in pypdf.PdfReader(io.BytesIO(report.render_pdf(ctx_b))).pages]
    assert _without("\n".join(r["pdf_pages"]), TIME_A) == _without("\n".join(pages_b), TIME_B)


def test_plots_are_deterministic_svg_with_the_deviation_shaded(reports):
    r = reports["chili_temperature_drop"]
    process = r["loaded"].case.process
    one, two = report.plots_svg(r["ev"], process), report.plots_svg(r["ev"], process)
    assert one == two
    assert set(one) == {"temperature", "lethality"}
    assert "below process temperature" in one["temperature"]
    assert "process temperature 121.1 °C" in one["temperature"]
    assert f"filed target F0 {process.target_F_min:.2f} min" in one["lethality"]
    for svg in one.values():
        assert svg.startswith("<svg") and "<metadata" not in svg and "<image" not in svg


# ---------------------------------------------------------------------------------------------
# Command line and stored records


def _parser():
    parser = argparse.ArgumentParser(prog="deviation")
    cli_report.register(parser.add_subparsers(dest="command"))
    return parser


def _run(argv):
    args = _parser().parse_args(argv)
    return args.handler(args)


@pytest.mark.parametrize("fmt", ["html", "md"])
def test_cli_writes_the_report_for_a_case_file(tmp_path, fmt):
    out = tmp_path / f"report.{fmt}"
    assert _run(["report", str(ROOT / "demo_cases" / "peas_short_hold.toml"), "-o", str(out)]) == 0
    text = out.read_text(encoding="utf-8")
    assert "PEA-261106-C" in text and "Not a stored record" in text


def test_cli_refuses_unknown_record_and_missing_case(tmp_path):
    db = str(tmp_path / "store.db")
    with pytest.raises(DeviationError, match="no record 'DR-NOPE'"):
        _run(["report", "DR-NOPE", "--db", db, "-o", str(tmp_path / "x.html")])
    with pytest.raises(DeviationError, match="case file not found"):
        _run(["report", str(tmp_path / "missing.toml"), "-o", str(tmp_path / "x.html")])
    with pytest.raises(DeviationError, match="format"):
        _run(["report", str(ROOT / "demo_cases" / "peas_short_hold.toml"), "-o", str(tmp_path / "x.txt")])


def test_stored_record_report_has_the_timeline_and_hashes(tmp_path):
    store_mod = pytest.importorskip("deviation.records.store")
    loaded = load_case(ROOT / "demo_cases" / "peas_steam_loss.toml")
    store = store_mod.open_store(str(tmp_path / "store.db"))
    rid = store.create_record(loaded.snapshot(), actor="ana", role="operator", lot=loaded.case.deviation.lot,
                              retort_id=loaded.case.deviation.retort_id, process_id=loaded.case.process.id)
    store.add_evaluation(rid, evaluate_case(loaded).model_dump(mode="json"), actor="ana", role="operator")
    store.place_hold(rid, reason="steam loss during the hold", actor="bo", role="supervisor")
    store.decide(rid, decision="reprocess", reason="F0 below target", actor="kim", role="process-authority")
    events = store.events(rid)
    store.close()

    out = tmp_path / "record.html"
    assert _run(["report", rid, "--db", str(tmp_path / "store.db"), "-o", str(out)]) == 0
    html = out.read_text(encoding="utf-8")
    assert external_references(html) == []
    text = _flat(re.sub(r"<[^>]+>", " ", html))
    assert rid in text
    assert events[-1].hash in text  # the record hash, whole
    for e in events:
        assert e.hash[:12] in text and e.kind in text
    assert "kim" in text and "process-authority" in text
    assert "Not a stored record" not in text


def test_pdf_without_weasyprint_names_the_packages(monkeypatch, reports):
    monkeypatch.setitem(sys.modules, "weasyprint", None)  # import now raises ImportError
    with pytest.raises(DeviationError, match="apt-get install .*libpango"):
        report.render_pdf(reports["chili_no_deviation"]["ctx"])


def test_report_shows_the_monte_carlo_figures(rule_set):
    loaded = load_case(ROOT / "demo_cases" / "peas_steam_loss.toml")
    ev = evaluate_case(loaded, rule_set=rule_set, uncertainty=True)
    mc = ev.uncertainty
    md = report.render_markdown(report.build_report_context(loaded, ev, rule_set=rule_set, with_plots=False))
    assert "### Uncertainty" in md
    assert f"{mc['F_p05_min']:.2f} / {mc['F_p50_min']:.2f} / {mc['F_p95_min']:.2f} min" in md
    assert f"{mc['samples']} samples, seed {mc['seed']}" in md


def test_report_for_the_finite_difference_model(tmp_path, rule_set):
    text = (ROOT / "demo_cases" / "chili_temperature_drop.toml").read_text(encoding="utf-8")
    text = text.replace('model = "conduction"', 'model = "finite-difference"\nsurface_htc_W_m2K = 500\n'
                        'thermal_conductivity_W_mK = 0.5')
    log = (ROOT / "demo_cases" / "logs" / "R3-2026-1104-A.csv").as_posix()
    text = text.replace('retort_log = "logs/R3-2026-1104-A.csv"', f'retort_log = "{log}"')
    case = tmp_path / "fd.toml"
    case.write_text(text, encoding="utf-8")
    loaded = load_case(case)
    ev = evaluate_case(loaded, rule_set=rule_set, what_if=False)
    md = report.render_markdown(report.build_report_context(loaded, ev, rule_set=rule_set, with_plots=False))
    assert "finite differences" in md and "Biot boundary" in md
    assert "Surface heat transfer coefficient: 500 W/(m²·K)" in md
    assert f"{ev.delivered_F_min:.2f} min" in md
