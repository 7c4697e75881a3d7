"""The written evaluation report for the process authority's deviation file (HTML, PDF, Markdown).

The report holds what one evaluation found and everything it used: the lot and the filed
scheduled process, each deviation (what, when, how far, how long), all inputs with their
checksums, the method statement, the results, the guidance with each rule's basis, the event
timeline with sign-offs, the caution, and a signature block.

One direction: :func:`build_report_context` (this module) turns a case and its
:class:`~deviation.evaluate.Evaluation` into plain data (strings, numbers, lists, dicts: the
only place figures are formatted, so every format shows the same figures); the templates
``templates/report.html.j2`` and ``templates/report.md.j2`` lay it out (:mod:`.render`), and
:func:`~deviation.report.render.render_pdf` prints the same HTML with WeasyPrint; :mod:`.plots`
draws the plots. Nothing here computes physics: the figures come from the
evaluation, the plots from its cold-spot series.

Deterministic by construction: the same case, evaluation, events and rules give the same
document except for the one line that holds the generation time (SVG ids are salted with a
fixed string, SVG metadata is dropped, file names are shown without their directories).

References
----------
.. [1] Bigelow, W. D., Bohart, G. S., Richardson, A. C., Ball, C. O. (1920). Heat penetration in
   processing canned foods. National Canners Association Bulletin 16-L.
.. [2] Ball, C. O. (1923). Thermal process time for canned food. Bulletin of the National
   Research Council 7, part 1, no. 37.
.. [3] Carslaw, H. S., Jaeger, J. C. (1959). Conduction of Heat in Solids, 2nd ed. Oxford:
   Clarendon Press.
.. [4] Olson, F. C. W., Jackson, J. M. (1942). Heating curves: theory and practical
   application. Industrial and Engineering Chemistry 34, 337-341.
.. [5] Stumbo, C. R. (1973). Thermobacteriology in Food Processing, 2nd ed. Academic Press.
.. [6] 21 CFR 113.89, Deviations in processing, venting, or critical control factors.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import math
import re
from pathlib import Path
from typing import Any

from deviation.report.plots import plots_svg

__all__ = ["FLAG_TITLES", "FORMATS", "REFERENCES", "build_report_context"]

FORMATS = ("html", "pdf", "md")


REFERENCES = (
    ("bigelow1920", "Bigelow, W. D., Bohart, G. S., Richardson, A. C., Ball, C. O. (1920). Heat "
     "penetration in processing canned foods. National Canners Association Bulletin 16-L. "
     "(General Method.)"),
    ("ball1923", "Ball, C. O. (1923). Thermal process time for canned food. Bulletin of the "
     "National Research Council 7, part 1, no. 37. (Heating-curve parameters fh, jh.)"),
    ("carslaw1959", "Carslaw, H. S., Jaeger, J. C. (1959). Conduction of Heat in Solids, 2nd ed. "
     "Oxford: Clarendon Press. (Series solutions for the cylinder, slab and brick; Duhamel's "
     "theorem.)"),
    ("olson1942", "Olson, F. C. W., Jackson, J. M. (1942). Heating curves: theory and practical "
     "application. Industrial and Engineering Chemistry 34, 337-341. (fh and thermal "
     "diffusivity of a finite cylinder.)"),
    ("stumbo1973", "Stumbo, C. R. (1973). Thermobacteriology in Food Processing, 2nd ed. "
     "New York: Academic Press. (D and z values; 12D reduction of C. botulinum.)"),
    ("warne1988", "Warne, D. (1988). Manual on Fish Canning. FAO Fisheries Technical Paper 285, "
     "section 1.3.3. (Trapezoidal General Method worked example.)"),
    ("cfr113", "21 CFR 113.89, Deviations in processing, venting, or critical control factors; "
     "21 CFR 113.100, Processing and production records."),
)

# What each flag code means, in a short heading (the flag's own message gives the figures).
FLAG_TITLES = {
    "temperature-low": "Retort below process temperature",
    "short-hold": "Hold shorter than the filed process time",
    "long-come-up": "Come-up longer than filed",
    "low-initial-temperature": "Initial temperature below the filed minimum",
    "record-gap": "Gap in the temperature record",
    "process-temperature-not-reached": "Process temperature never reached",
    "record-ends-before-cooling": "Record ends before cooling",
    "critical-factor-out": "Critical factor outside its filed limit",
    "scheduled-F-below-target": "Model does not reproduce the filed F0",
    "implausible-input": "Implausible input",
    "alternate-process-met": "Filed alternate process met (information)",
    "recorder-above-indicating": "Recording device read above the indicating device",
    "model-vs-filed": "Model does not reproduce the filed process (information)",
    "ball-formula-differs": "Ball's formula differs from the General Method (information)",
    "jh-differs-from-theory": "Heating lag factor jh differs from theory (information)",
    "parameter-not-used": "A given parameter is not used by the model (information)",
    "surface-heat-transfer-assumed": "Surface heat transfer assumed (information)",
    "vent-schedule-not-met": "Venting schedule not met",
    "water-level-low": "Water level below its filed minimum",
    "water-level-below-top-layer": "Water below the top layer of containers",
    "circulation-loss": "Water circulation lost",
    "rotation-out": "Rotation speed outside its filed limit",
    "rotation-stopped": "Rotation stopped",
    "reel-stop": "Reel stopped (continuous retort)",
    "reel-speed-low": "Reel speed below its filed minimum",
    "botulinum-not-shown": "Botulinum safety not shown",
}


def _information_only() -> frozenset:
    """Flags about the filed process and its model, not about this cycle (the vocabulary's list)."""
    from deviation.guidance import vocabulary

    return frozenset(getattr(vocabulary, "INFORMATION_FLAG_CODES", {"alternate-process-met"}))


_HASH_PREFIX = 12
# The timeline table shows every 10 min of the cold-spot history (and the last point).
_TABLE_STEP_MIN = 10.0


# ---------------------------------------------------------------------------------------------
# Formatting (the one place figures become text)


def _num(x: float | None, digits: int = 2, unit: str = "") -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "n/a"
    text = f"{x:.{digits}f}"
    if text.startswith("-") and float(text) == 0.0:
        text = text[1:]  # never print "-0.00"
    return f"{text} {unit}".rstrip() if unit else text


def _g(x: float | None, unit: str = "") -> str:
    if x is None:
        return "n/a"
    return f"{x:g} {unit}".rstrip()


def _probability(p: float) -> str:
    from deviation.guidance.wording import fmt_probability

    return fmt_probability(p)


def _short(h: str | None) -> str:
    return (h or "")[:_HASH_PREFIX]


def _file_name(path: str | None) -> str | None:
    """A source path shown by its file name only: the report must not depend on where it ran."""
    if not path:
        return None
    return Path(path.split(" + ")[0]).name


def _text_sha256(text: str) -> str:
    """SHA-256 of a record's text as held in the case (UTF-8), when the file's own is not known."""
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _utc_now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


# ---------------------------------------------------------------------------------------------
# Context pieces


def _identity(loaded, ev) -> dict[str, Any]:
    case = loaded.case
    p, d = case.process, case.deviation
    return {
        "plant": d.plant or "not given",
        "date": d.date or "not given",
        "lot": d.lot,
        "retort_id": d.retort_id,
        "retort_type": p.retort_type,
        "process_id": p.id,
        "product": p.product,
        "lot_size": f"{d.lot_size_containers:,} containers",
        "description": d.description,
    }


def _deviations(ev) -> list[dict[str, str]]:
    """One row per flag: what, when, how far, how long (figures from the flag and low interval)."""
    pt = ev.facts.get("process_temperature_C")
    lows = list(ev.cycle.low_intervals)
    info_only = _information_only()
    rows = []
    for f in ev.flags:
        when = how_far = how_long = "-"
        if f.start_min is not None and f.end_min is not None:
            when = f"{_num(f.start_min)} to {_num(f.end_min)} min"
            how_long = _num(f.end_min - f.start_min, 2, "min")
        elif f.start_min is not None:
            when = f"from {_num(f.start_min)} min"
        code, v = f.code, f.value
        if code == "temperature-low" and v is not None:
            below = f"{_num(pt - v, 1)} °C below" if pt is not None else ""
            match = next((i for i in lows if abs(i.start_min - (f.start_min or -1e9)) < 1e-6), None)
            dm = f"; {_num(match.degree_minutes_below)} °C·min below" if match else ""
            how_far = f"lowest {_num(v, 1)} °C ({below}){dm}"
        elif code in ("short-hold", "long-come-up"):
            how_far = _num(v, 2, "min") + (" short" if code == "short-hold" else " over")
            how_long = _num(v, 2, "min")
        elif code == "low-initial-temperature":
            how_far = _num(v, 1, "°C") + " below the minimum"
            when = "at steam on"
        elif code == "record-gap":
            how_far = f"no reading for {_num(v, 2, 'min')}"
        elif code == "process-temperature-not-reached":
            how_far = f"highest reading {_num(v, 1, '°C')}"
        elif code == "record-ends-before-cooling":
            how_far = f"{_num(v, 2, 'min')} of the process time remain"
        elif code == "scheduled-F-below-target":
            how_far = f"model F0 {_num(v)} min vs target {_num(ev.target_F_min)} min"
        elif v is not None:
            how_far = _g(v)
        rows.append({
            "code": code,
            "title": FLAG_TITLES.get(code) or code.replace("-", " ").capitalize(),
            "when": when,
            "how_far": how_far,
            "how_long": how_long,
            "message": f.message,
            "information_only": code in info_only,
        })
    return rows


def _htc(hp) -> float | None:
    """The surface heat transfer coefficient of the heat-penetration table (either name)."""
    for name in ("surface_heat_transfer_W_m2K", "surface_htc_W_m2K"):
        value = getattr(hp, name, None)
        if value is not None:
            return value
    return None


def _row(name: str, value: str, note: str = "") -> dict[str, str]:
    return {"name": name, "value": value, "note": note}


def _inputs(loaded, ev) -> dict[str, Any]:
    case = loaded.case
    p, d = case.process, case.deviation
    m, box, hp = p.microbiology, p.container, p.heat_penetration
    process = [
        _row("Process id", p.id),
        _row("Product", p.product),
        _row("Retort type", p.retort_type),
        _row("Process temperature", _num(p.process_temperature_C, 1, "°C")),
        _row("Process time (hold)", _g(p.process_time_min, "min")),
        _row("Come-up time", _g(p.come_up_time_min, "min")),
        _row("Minimum initial temperature", _num(p.minimum_initial_temperature_C, 1, "°C")),
        _row("Target F0 (filed)", _num(p.target_F_min, 2, "min")),
        _row("Reference temperature Tref", _num(p.reference_temperature_C, 1, "°C")),
        _row("z", _num(p.z_C, 1, "°C")),
        _row("Cooling water temperature", _num(p.cooling_water_temperature_C, 1, "°C")),
        _row("Cooling time credited (filed cycle)",
             _g(p.cooling_time_min, "min") if p.cooling_time_min else "max(30 min, 1.5 fh)",
             "" if p.cooling_time_min else "default (common practice)"),
    ]
    if p.come_up_start_temperature_C is not None:
        process.append(_row("Retort temperature at steam on", _num(p.come_up_start_temperature_C, 1, "°C")))
    if box.shape == "cylinder":
        container = [_row("Shape", "cylinder"), _row("Inside diameter", _g(box.diameter_mm, "mm")),
                     _row("Inside height", _g(box.height_mm, "mm"))]
    else:
        container = [_row("Shape", "brick (tray)"), _row("Inside length", _g(box.length_mm, "mm")),
                     _row("Inside width", _g(box.width_mm, "mm")),
                     _row("Inside thickness", _g(box.thickness_mm, "mm"))]
    heat = [_row("Model", hp.model)]
    for name, value, unit in (("fh", hp.fh_min, "min"), ("jh", hp.jh, ""), ("fc", hp.fc_min, "min"),
                              ("jc", hp.jc, ""), ("Thermal diffusivity", hp.thermal_diffusivity_m2_s, "m²/s"),
                              ("Surface heat transfer coefficient", _htc(hp),
                               "W/(m²·K)"),
                              ("Thermal conductivity", getattr(hp, "thermal_conductivity_W_mK", None), "W/(m·K)")):
        if value is not None:
            heat.append(_row(name, f"{value:.4g} {unit}".rstrip()))
    micro = [
        _row("Spoilage organism D at Tref", _g(m.spoilage_D_min, "min")),
        _row("Spoilage spores per container N0", _g(m.spores_per_container)),
        _row("C. botulinum D at Tref", _g(m.botulinum_D_min, "min")),
        _row("Botulinum log reductions required", _g(m.botulinum_log_reductions_required)),
    ]
    alternates = [{
        "temperature": _num(a.process_temperature_C, 1, "°C"),
        "time": _g(a.process_time_min, "min"),
        "come_up": _g(a.come_up_time_min, "min") if a.come_up_time_min is not None else "as filed",
        "initial": (_num(a.minimum_initial_temperature_C, 1, "°C")
                    if a.minimum_initial_temperature_C is not None else "as filed"),
    } for a in p.alternate]
    readings = {r.name.strip().lower(): r for r in d.critical_factor_readings}
    factors = []
    for f in p.critical_factors:
        r = readings.get(f.name.strip().lower())
        limit = " and ".join(x for x in (f"min {f.min:g}" if f.min is not None else "",
                                         f"max {f.max:g}" if f.max is not None else "") if x)
        out = bool(r is not None and ((f.min is not None and r.value < f.min)
                                      or (f.max is not None and r.value > f.max)))
        factors.append({
            "name": f.name, "unit": f.unit or "-", "limit": limit,
            "reading": _g(r.value) if r is not None else "not recorded",
            "status": ("OUT" if out else "within") if r is not None else "-",
            "note": r.note if r is not None else "",
        })
    deviation = [
        _row("Initial temperature", _num(d.initial_temperature_C, 1, "°C")),
        _row("Lot size", f"{d.lot_size_containers:,} containers"),
        _row("Longest recorder gap accepted", _g(d.record_gap_limit_min, "min")),
    ]
    if d.reprocess_from_temperature_C is not None:
        deviation.append(_row("Reprocess from temperature", _num(d.reprocess_from_temperature_C, 1, "°C")))
    events = []
    for e in d.events:
        if e.kind == "temperature-low":
            what = f"retort at {_num(e.temperature_C, 1, '°C')} from {_g(e.start_min)} to {_g(e.end_min)} min"
        elif e.kind == "hold-time":
            what = f"hold given {_g(e.process_time_min, 'min')}"
        else:
            what = f"come-up taken {_g(e.come_up_time_min, 'min')}"
        events.append({"kind": e.kind, "what": what, "note": e.note})
    sources = [{"what": "Case (case file and the logs it names)", "name": _file_name(loaded.source) or "-",
                "sha256": loaded.sha256 or "-"}]
    if loaded.retort_log_text is not None:
        sources.append({"what": "Retort temperature record", "name": _file_name(loaded.retort_log_source) or "-",
                        "sha256": ev.cycle.retort_sha256 or _text_sha256(loaded.retort_log_text)})
    else:
        sources.append({"what": "Retort temperature record",
                        "name": f"none: {ev.cycle.retort_source}", "sha256": "-"})
    if loaded.cold_spot_log_text is not None:
        sources.append({"what": "Measured cold-spot record", "name": _file_name(loaded.cold_spot_log_source) or "-",
                        "sha256": _text_sha256(loaded.cold_spot_log_text)})
    return {"process": process, "container": container, "heat_penetration": heat, "microbiology": micro,
            "alternates": alternates, "critical_factors": factors, "deviation": deviation,
            "deviation_events": events, "sources": sources}


def _method(loaded, ev) -> dict[str, Any]:
    p = loaded.case.process
    hp, box = p.heat_penetration, p.container
    t = ev.cold_spot.time_min
    step = float(sorted(b - a for a, b in zip(t, t[1:]))[len(t) // 2 - 1]) if len(t) > 2 else None
    params: list[str] = []
    if ev.model == "measured":
        model = ("Measured cold-spot temperatures (thermocouple in a container of the lot) integrated "
                 "directly; the retort record is shown for comparison only. No heat-transfer model is used.")
    elif hp.model == "finite-difference":
        biot = _htc(hp)
        model = ("Conduction heating of the container solved by finite differences on a grid of nodes "
                 "(Teixeira et al. 1969), "
                 + ("with a finite surface heat transfer coefficient (Biot boundary)"
                    if biot else "with the surface at the retort temperature")
                 + "; the thermal diffusivity follows from fh through the first eigenvalue of the same "
                   "boundary problem (Carslaw & Jaeger; Olson & Jackson 1942).")
        if hp.fh_min:
            params.append(f"fh = {hp.fh_min:.4g} min")
        if hp.thermal_diffusivity_m2_s:
            params.append(f"thermal diffusivity α = {hp.thermal_diffusivity_m2_s:.4g} m²/s")
        if biot:
            params.append(f"surface h = {biot:.4g} W/(m²·K), product k = {hp.thermal_conductivity_W_mK:.4g} W/(m·K)")
    elif hp.model == "conduction":
        from deviation.physics.heating import (
            conduction,  # parameter display only: the same functions evaluate uses
        )

        if box.shape == "cylinder":
            r_m, h_m = box.diameter_mm / 2000.0, box.height_mm / 1000.0
            alpha = hp.thermal_diffusivity_m2_s or conduction.diffusivity_from_fh_cylinder(hp.fh_min, r_m, h_m)
            fh = hp.fh_min or conduction.fh_from_diffusivity_cylinder(alpha, r_m, h_m)
            model = ("Conduction heating of the geometric centre of a finite cylinder whose surface follows the "
                     "retort temperature (or, with a surface heat transfer coefficient filed, exchanges heat with "
                     "it through a Biot boundary): the product of the infinite-cylinder Bessel series and the "
                     "infinite-slab cosine series (Carslaw & Jaeger). Thermal diffusivity and fh are related by "
                     "fh = ln 10 / (α (β1²/R² + π²/H²)), β1 = 2.4048 (Olson & Jackson 1942).")
            params.append(f"R = {_g(box.diameter_mm / 2, 'mm')}, H = {_g(box.height_mm, 'mm')}")
        else:
            dims = box.length_mm / 1000.0, box.width_mm / 1000.0, box.thickness_mm / 1000.0
            alpha = hp.thermal_diffusivity_m2_s or conduction.diffusivity_from_fh_brick(hp.fh_min, *dims)
            fh = hp.fh_min or conduction.fh_from_diffusivity_brick(alpha, *dims)
            model = ("Conduction heating of the geometric centre of a rectangular brick (tray) whose surface "
                     "follows the retort temperature (or a Biot boundary, with a surface heat transfer "
                     "coefficient filed): the product of three infinite-slab cosine series "
                     "(Carslaw & Jaeger); thermal diffusivity from fh by the same first-term relation "
                     "(Olson & Jackson 1942).")
            params.append(f"{_g(box.length_mm)} × {_g(box.width_mm)} × {_g(box.thickness_mm, 'mm')}")
        params.append(f"thermal diffusivity α = {alpha:.4g} m²/s"
                      + ("" if hp.thermal_diffusivity_m2_s else " (derived from fh)"))
        params.append(f"fh = {fh:.4g} min" + ("" if hp.fh_min else " (derived from α)"))
        if _htc(hp):
            params.append(f"surface h = {_htc(hp):.4g} W/(m²·K), product k = {hp.thermal_conductivity_W_mK:.4g} "
                          "W/(m·K) (Biot series; α from fh through the Biot eigenvalues)")
    else:
        model = ("Ball's heating and cooling lines (Ball 1923) read as a band of step responses of the cold "
                 "spot: every rise of the retort answered by Ball's lag form S(t) = min(1, max(jh, 1) · "
                 "10^(−t/fh)), every fall by a two-stage response with the line j · 10^(−t/f) as asymptote "
                 "(f = min(fh, fc), j = min(jh, jc)"
                 + ("" if hp.fc_min else "; no fc filed: an immediate response, the least cooling credit")
                 + "); the cold spot is the lowest any response within the band allows, so it never runs "
                   "ahead of the product.")
        if getattr(hp, "fh2_min", None) is not None:
            model += (" Broken heating curve (Ball 1923; Stumbo 1973): the product thickens once, when its "
                      "cold spot reaches the filed break temperature (never before the highest cold spot "
                      "the curve allows could have); rises after that follow the second line, cooling fc.")
            params.append(f"fh2 = {hp.fh2_min:.4g} min from xbh = {hp.break_min:.4g} min; break temperature "
                          f"{hp.break_temperature_C:.4g} °C")
        params.append(f"fh = {hp.fh_min:.4g} min, jh = {hp.jh:.4g}")
        if hp.fc_min:
            params.append(f"fc = {hp.fc_min:.4g} min, jc = {(hp.jc or 1.0):.4g}"
                          + ("" if hp.jc else " (jc default 1: least cooling lethality credited)"))
    superposition = None
    if ev.model not in ("measured", "finite-difference"):
        superposition = ("Any retort history: the retort record is read as piecewise linear between readings and "
                         "the step responses are superposed by Duhamel's theorem (Carslaw & Jaeger), exact for "
                         "linear conduction, on a uniform grid"
                         + (f" of {step * 60:.0f} s" if step else "") + ".")
    lethality = (f"Lethal rate L = 10^((T − Tref)/z) with Tref = {_num(p.reference_temperature_C, 1, '°C')} and "
                 f"z = {_num(p.z_C, 1, '°C')}; delivered F0 = ∫ L dt over heating and cooling at the cold spot "
                 "(General Method, Bigelow et al. 1920).")
    if ev.conservative:
        integration = ("Conservative: each interval credited with the lower of its two lethal rates, and the "
                       "retort read at the lower of two neighbouring readings (the bottom of the trace).")
        options = ["retort temperature between readings read at the lower reading",
                   "no interval credited more than its lower lethal rate"]
    else:
        integration = "Trapezoidal rule on the cold-spot history (as in FAO Fisheries Technical Paper 285)."
        options = ["none: read with straight lines between readings (--interpolate), a friendlier figure than "
                   "the default reading at the bottom of the trace"]
    micro = p.microbiology
    spoilage = (f"Spoilage: N = N0 · 10^(−F/D) survivors per container with D = {_g(micro.spoilage_D_min, 'min')} "
                f"and N0 = {_g(micro.spores_per_container)}; the probability that a container is nonsterile is "
                "1 − exp(−N) (Poisson); expected nonsterile containers in the lot = probability × lot size. "
                f"Botulinum: log reductions F0/D (F0 at 121.1 °C, z 10 °C, whatever the spoilage organism's z) "
                f"with D = {_g(micro.botulinum_D_min, 'min')}, against "
                f"{_g(micro.botulinum_log_reductions_required)} (12D, Stumbo 1973).")
    scheduled = ("Scheduled-process F0: the same model run on the filed cycle (come-up ramp, hold at process "
                 "temperature, cooling) from the minimum initial temperature, as a check that the model "
                 "reproduces the filed process.")
    return {"model_name": ev.model, "model": model, "parameters": params, "superposition": superposition,
            "lethality": lethality, "integration": integration, "conservative_options": options,
            "spoilage": spoilage, "scheduled": scheduled,
            "grid_step": f"{step * 60:.0f} s" if step else "n/a",
            "references": [text for _, text in REFERENCES]}


def _results(ev) -> dict[str, Any]:
    margin = ev.F_margin_min
    rows = [
        _row("Delivered F0 at the cold spot", _num(ev.delivered_F_min, 2, "min"),
             ("meets" if margin >= 0 else "BELOW") + f" the filed target by {_num(abs(margin))} min"),
    ]
    if getattr(ev, "F_basis", None):
        rows.append(_row("What the delivered figure is", "", ev.F_basis))
    model_F, interpolated = getattr(ev, "model_F_min", None), getattr(ev, "interpolated_F_min", None)
    if model_F is not None and abs(model_F - ev.delivered_F_min) > 1e-9:
        rows.append(_row("Model F on the record", _num(model_F, 2, "min"), "before the relative correction"))
    if interpolated is not None and abs(interpolated - (model_F if model_F is not None else ev.delivered_F_min)) > 1e-9:
        rows.append(_row("Interpolated F (not used by the guidance)", _num(interpolated, 2, "min"),
                         "straight lines between readings, heat credited across gaps: a friendlier figure"))
    F0 = getattr(ev, "F0_min", None)
    if F0 is not None and abs(F0 - ev.delivered_F_min) > 1e-9:
        rows.append(_row("F0 (121.1 °C, z 10 °C) of the same cold spot", _num(F0, 2, "min"), "the botulinum figure"))
    broken = getattr(ev, "broken_curve", None)
    if broken:
        when = ("did not thicken on this record" if broken.get("earliest_break_min") is None else
                f"thickened from {_num(broken['earliest_break_min'], 1)} min (earliest)"
                + ("" if broken.get("latest_break_min") is None
                   else f" to {_num(broken['latest_break_min'], 1)} min (surely)"))
        rows.append(_row("Broken heating curve: break temperature", _num(broken["break_temperature_C"], 1, "°C"),
                         f"as filed; fh {_g(broken['fh_min'])} then {_g(broken['fh2_min'])} min; on this record "
                         f"the product {when}"))
    rows += [
        _row("Filed target F0", _num(ev.target_F_min, 2, "min"), ""),
        _row("Scheduled-process F0 (model, filed cycle)", _num(ev.scheduled_F_min, 2, "min"),
             "model reproduces the target" if ev.scheduled_F_min >= ev.target_F_min
             else "model falls SHORT of the target: lethality not fully established"),
    ]
    ball = getattr(ev, "ball_formula_F_min", None)
    if ball is not None:
        rows.append(_row("Scheduled-process F0 (Ball's formula)", _num(ball, 2, "min"),
                         "the hand cross-check of the filed process"))
    if ev.cycle.running and ev.projected_F_min is not None:
        rows.append(_row("Projected F0 if the rest of the cycle runs as filed", _num(ev.projected_F_min, 2, "min"),
                         "the record ends while the cycle runs"))
    if ev.extension_to_target_min == 0.0:
        rows.append(_row("Extra hold to reach the target", "none needed", "delivered F0 meets the target"))
    elif ev.extension_to_target_min is not None:
        rows.append(_row("Extra hold to reach the target", _num(ev.extension_to_target_min, 1, "min"),
                         "at process temperature, before cooling (what-if)"))
    else:
        rows.append(_row("Extra hold to reach the target", "n/a", ev.extension_reason or ""))
    rows += [
        _row("Spoilage probability per container", _probability(ev.spoilage_probability),
             f"at the filed target: {_probability(ev.target_spoilage_probability)}"),
        _row("Expected nonsterile containers in the lot", f"{ev.expected_nonsterile_containers:.3g}",
             f"lot of {int(ev.facts.get('lot_size_containers') or 0):,} containers"),
        _row("C. botulinum log reductions", _num(ev.botulinum_log_reductions, 1),
             ("meets" if ev.botulinum_log_reductions >= ev.botulinum_log_reductions_required else "BELOW")
             + f" the required {_g(ev.botulinum_log_reductions_required)}"),
    ]
    worst = ev.facts.get("gap_worst_case_F_min")
    if isinstance(worst, (int, float)):
        rows.append(_row("F0 if every over-limit gap had no heat", _num(worst, 2, "min"),
                         "worst case for the record gaps"))
    c = ev.cycle
    if c.come_up_min is not None:
        rows.append(_row("Come-up (record)", _num(c.come_up_min, 2, "min"), ""))
    if c.hold_start_min is not None:
        rows.append(_row("Hold (record)", _num(c.hold_duration_min, 2, "min"),
                         f"{_num(c.hold_start_min)} to {_num(c.hold_end_min)} min"))
    if c.lowest_during_hold_C is not None:
        rows.append(_row("Lowest retort reading during the hold", _num(c.lowest_during_hold_C, 1, "°C"), ""))
    rows.append(_row("Longest gap between readings", _num(c.max_gap_min, 2, "min"), ""))
    rows.append(_row("Lethality established", "yes" if ev.lethality_established else "NO",
                     "fully" if ev.lethality_fully_established else "not fully: see the deviations"))
    return {
        "rows": rows,
        "delivered_F": _num(ev.delivered_F_min, 2),
        "target_F": _num(ev.target_F_min, 2),
        "scheduled_F": _num(ev.scheduled_F_min, 2),
        "spoilage": _probability(ev.spoilage_probability),
        "spoilage_short": _probability(ev.spoilage_probability).split(" ")[0],
        "expected_nonsterile": f"{ev.expected_nonsterile_containers:.3g}",
        "botulinum": _num(ev.botulinum_log_reductions, 1),
        "botulinum_required": _g(ev.botulinum_log_reductions_required),
        "meets_target": margin >= 0,
        "projected_F": (_num(ev.projected_F_min, 2) if ev.cycle.running and ev.projected_F_min is not None
                        else None),
        "uncertainty": _uncertainty(ev),
        "affected": _affected(ev),
    }


def _affected(ev) -> list[dict[str, str]]:
    """A continuous system's entry-time ranges: every container inside the shell during a
    deviation, and the unaffected ranges before and after (clock times where known)."""
    out = []
    for a in getattr(ev, "affected_containers", None) or []:
        start = a.get("entry_start") or ""
        end = a.get("entry_end") or ""
        out.append({
            "start": f"{_num(a['entry_start_min'])} min" + (f" ({start.replace('T', ' ')})" if start else ""),
            "end": f"{_num(a['entry_end_min'])} min" + (f" ({end.replace('T', ' ')})" if end else ""),
            "containers": f"{int(a['containers']):,}",
            "min_F": _num(a["min_F_min"], 2, "min"),
            "disposition": str(a.get("disposition", "")),
        })
    return out


def _uncertainty(ev) -> dict[str, Any]:
    """The Monte Carlo figures of the evaluation, when it ran one."""
    mc = getattr(ev, "uncertainty", None)
    if mc and "F_p50_min" not in mc and mc.get("reason"):
        return {"computed": False, "rows": [],
                "statement": f"The Monte Carlo estimate was not run: {mc['reason']}."}
    if not mc or "F_p50_min" not in mc:
        return {"computed": False, "rows": [],
                "statement": ("No uncertainty estimate was run for this evaluation (the case has no "
                              "[deviation.uncertainty] table, or --uncertainty was not given). The conservative "
                              "reading (bottom of the trace, lower lethal rate per interval) bounds the "
                              "record-reading error from below; run the report with --conservative to show it.")}
    spreads = mc.get("spreads") or {}
    spread_text = ", ".join(f"{k} {v:g}" for k, v in sorted(spreads.items()) if isinstance(v, (int, float)))
    rows = [
        _row("F0, 5th / 50th / 95th percentile",
             f"{_num(mc['F_p05_min'])} / {_num(mc['F_p50_min'])} / {_num(mc['F_p95_min'])} min", ""),
        _row("Probability that F0 is below the filed target", f"{mc['probability_F_below_target']:.3f}", ""),
        _row("Spoilage probability per container, 95th percentile", _probability(mc["spoilage_probability_p95"]), ""),
        _row("C. botulinum log reductions, 5th percentile", _num(mc["botulinum_log_reductions_p05"], 1),
             f"required {_g(ev.botulinum_log_reductions_required)}"),
    ]
    statement = (f"Monte Carlo estimate: {mc.get('samples')} samples, seed {mc.get('seed')}; spreads: "
                 f"{spread_text or 'defaults'}." + (f" {mc['reason'][0].upper()}{mc['reason'][1:]}."
                                                     if mc.get("reason") else ""))
    return {"computed": True, "rows": rows, "statement": statement}


def _history_table(ev) -> list[dict[str, str]]:
    """The cold-spot history every 10 min (and its last point), for readers of the paper copy."""
    cs = ev.cold_spot
    t = cs.time_min
    if not t:
        return []
    picks, next_t = [], t[0]
    for i, ti in enumerate(t):
        if ti >= next_t - 1e-9:
            picks.append(i)
            next_t = (math.floor(ti / _TABLE_STEP_MIN + 1e-9) + 1) * _TABLE_STEP_MIN
    if picks[-1] != len(t) - 1:
        picks.append(len(t) - 1)
    return [{"time": _num(t[i], 1), "retort": _num(cs.retort_C[i], 1), "cold_spot": _num(cs.temperature_C[i], 1),
             "lethal_rate": f"{cs.lethal_rate[i]:.4f}", "cumulative_F": _num(cs.cumulative_F_min[i], 2)}
            for i in picks]


def _guidance(ev, rule_set) -> dict[str, Any]:
    from deviation.guidance.wording import DISPOSITION_LOOK

    g = ev.guidance or {}
    disp = g.get("disposition", "evaluate")
    word, symbol, _style = DISPOSITION_LOOK.get(disp, (disp.upper(), "?", "bold"))
    groups: list[dict[str, Any]] = []
    for r in g.get("reasons", []):
        if not groups or groups[-1]["rule_id"] != r["rule_id"]:
            title = r["rule_id"]
            if rule_set is not None:
                try:
                    title = rule_set.get(r["rule_id"]).title
                except KeyError:
                    title = "No rule covered the deviation" if r["rule_id"] == "no-rule-covered" else r["rule_id"]
            groups.append({"rule_id": r["rule_id"], "title": title, "basis": r["basis"], "reasons": []})
        groups[-1]["reasons"].append(r["text"])
    return {
        "disposition": disp,
        "word": word,
        "symbol": symbol,
        "summary": g.get("summary", ""),
        "rules": groups,
        "actions": list(g.get("actions", [])),
        "not_computed": list(g.get("not_computed", [])),
        "standing_caution": g.get("caution", ""),
        "rule_set_sha256": g.get("rule_set_sha256") or (rule_set.sha256 if rule_set is not None else "-"),
        "rule_sources": [_file_name(s) for s in (rule_set.sources if rule_set is not None else ())],
    }


def _event_summary(kind: str, payload: dict) -> str:
    p = payload or {}
    if kind == "entered":
        rec = p.get("record") or {}
        lot = rec.get("lot") or ((p.get("snapshot") or {}).get("case", {}).get("deviation", {}).get("lot"))
        return f"record entered (lot {lot})" if lot else "record entered"
    if kind == "amended":
        return f"case amended: {p.get('reason', '')}".rstrip(": ")
    if kind == "evaluated":
        e = p.get("evaluation") or {}
        F = e.get("delivered_F_min")
        disp = (e.get("guidance") or {}).get("disposition", "?")
        Ftxt = f"F0 {F:.2f} min" if isinstance(F, (int, float)) else "F0 ?"
        return f"evaluated: {Ftxt}, guidance {disp}"
    if kind == "hold-placed":
        return f"hold placed: {p.get('reason', '')}".rstrip(": ")
    if kind == "hold-released":
        cites = f" (citing the disposition, event {p['decision_seq']})" if p.get("decision_seq") else \
            " (no disposition cited: written before the rule)"
        return f"hold released: {p.get('reason', '')}{cites}"
    if kind == "disposition":
        from deviation.records.roles import decision_words

        res = f"; result: {p['result']}" if p.get("result") else ""
        sup = f" (supersedes event {p['supersedes']})" if p.get("supersedes") else ""
        return f"decision {decision_words(p)}: {p.get('reason', '')}{res}{sup}"
    if kind == "note":
        return str(p.get("text", ""))
    return ""


def _timeline(events, record_id, record_hash) -> dict[str, Any]:
    if events is None:
        return {"stored": False, "record_id": record_id, "record_hash": record_hash,
                "statement": "Not a stored record: this report was built from a case file, so there is no "
                             "event timeline and no sign-off on record.",
                "events": [], "signoffs": []}
    from deviation.records.events import origin_text

    rows = []
    for i, e in enumerate(events, 1):
        kind = str(e.get("kind", ""))
        rows.append({"n": str(e.get("seq", i)), "utc": str(e.get("utc", "")), "kind": kind,
                     "actor": str(e.get("actor", "")), "role": str(e.get("role", "")),
                     "summary": _event_summary(kind, e.get("payload") or {}),
                     "origin": origin_text(e.get("origin")) or "written in this store",
                     "imported": e.get("origin") is not None,
                     "hash": _short(str(e.get("hash", "")))})
    signoffs = [r for r in rows if r["kind"] in ("disposition", "hold-placed", "hold-released", "evaluated")]
    imported = sum(1 for r in rows if r["imported"])
    return {"stored": True, "record_id": record_id, "record_hash": record_hash, "imported": imported,
            "statement": f"{len(rows)} event(s) on record; each hash covers the event and the one before it. "
                         + (f"{imported} of them were imported from another store (their origin is shown). "
                            if imported else "") +
                         "The figures in this report are the record's latest stored evaluation when it is "
                         "of the latest case snapshot (otherwise they were computed again from that "
                         "snapshot); the evaluated events show what was computed at each time.",
            "events": rows, "signoffs": signoffs}


def _caution(ev) -> dict[str, Any]:
    from deviation.evaluate import CAUTION

    standing = (ev.guidance or {}).get("caution", "")
    # The standing caution's first sentence says what CAUTION says; keep the others.
    sentences = [s.strip() for s in re.split(r"(?<=[a-z]\.)\s+(?=[A-Z])", standing) if s.strip()]
    extra = [s for s in sentences if "process authority decides" not in s]
    return {"main": CAUTION, "extra": extra}


# ---------------------------------------------------------------------------------------------
# Public API


def build_report_context(loaded, evaluation, *, rule_set, events=None, record_id=None, record_hash=None,
                         generated_utc=None, with_plots: bool = True) -> dict[str, Any]:
    """Everything the report templates need, as plain data (the only place figures are formatted).

    Parameters
    ----------
    loaded : deviation.inputs.case.LoadedCase
        The case with its log contents.
    evaluation : deviation.evaluate.Evaluation
        The evaluation of that case.
    rule_set : deviation.guidance.rules.RuleSet or None
        The rules the guidance came from (titles, sources and hash).
    events : list of dict, optional
        The record's events (keys ``kind, utc, actor, role, payload, hash``, optionally ``seq``);
        ``None`` for a report built from a case file (no timeline: not a stored record).
    record_id, record_hash : str, optional
        The stored record's id and head hash.
    generated_utc : str, optional
        Generation time shown once in the report (default: now, ISO 8601 UTC).
    with_plots : bool
        Draw the SVG plots (the Markdown report does not need them).

    Returns
    -------
    dict
        Keys ``meta, identity, caution, disposition, deviations, low_intervals, inputs, method,
        results, history, guidance, timeline, plots, signature``.
    """
    ev = evaluation
    guidance = _guidance(ev, rule_set)
    ident = _identity(loaded, ev)
    deviations = _deviations(ev)
    meta = {
        "title": "Thermal process deviation evaluation",
        "generated_utc": generated_utc or _utc_now(),
        "engine_version": ev.engine_version,
        "rule_set_sha256": guidance["rule_set_sha256"],
        "case_sha256": ev.case_sha256 or loaded.sha256 or "-",
        "record_id": record_id,
        "record_hash": record_hash,
        "stored": events is not None,
        "source_name": _file_name(loaded.source) or "-",
        "run_head": f"Deviation evaluation · lot {ident['lot']} · retort {ident['retort_id']} · "
                    f"process {ident['process_id']}",
        "conservative": ev.conservative,
    }
    return {
        "meta": meta,
        "identity": ident,
        "caution": _caution(ev),
        "disposition": {k: guidance[k] for k in ("disposition", "word", "symbol", "summary")},
        "deviation_found": any(not d["information_only"] for d in deviations),
        "deviations": deviations,
        "low_intervals": [{"start": _num(i.start_min), "end": _num(i.end_min),
                           "duration": _num(i.end_min - i.start_min, 2, "min"),
                           "lowest": _num(i.lowest_C, 1, "°C"),
                           "degree_minutes": _num(i.degree_minutes_below, 2)}
                          for i in ev.cycle.low_intervals],
        "inputs": _inputs(loaded, ev),
        "method": _method(loaded, ev),
        "results": _results(ev),
        "history": _history_table(ev),
        "guidance": guidance,
        "timeline": _timeline(events, record_id, record_hash),
        "plots": plots_svg(ev, loaded.case.process) if with_plots else {},
        "signature": [
            {"role": "Prepared by", "detail": "name and function"},
            {"role": "Process authority", "detail": "name, organisation; decision in writing"},
            {"role": "Plant management", "detail": "name and function (optional)"},
        ],
    }


# ---------------------------------------------------------------------------------------------
# Plots


