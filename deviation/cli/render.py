"""Rich terminal rendering of an evaluation (no computation here)."""

from __future__ import annotations

from rich.console import Console, Group
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from deviation.evaluate import CAUTION, Evaluation
from deviation.guidance.wording import DISPOSITION_LOOK, fmt_probability


def guidance_panel(ev: Evaluation) -> Panel:
    g = ev.guidance or {}
    disp = g.get("disposition", "evaluate")
    word, symbol, style = DISPOSITION_LOOK.get(disp, (disp.upper(), "?", "bold"))
    body = [Text(f"{symbol} {word}  [{disp}]", style=style)]
    reasons = g.get("reasons", [])
    for i, r in enumerate(reasons):
        body.append(Text(f"  • {r['text']}"))
        last_of_rule = i + 1 == len(reasons) or reasons[i + 1]["rule_id"] != r["rule_id"]
        if last_of_rule:  # the basis once per rule, after its reasons
            body.append(Text(f"    basis ({r['rule_id']}): {r['basis']}", style="dim"))
    if g.get("actions"):
        body.append(Text("What to do now:", style="bold"))
        for i, a in enumerate(g["actions"], 1):
            body.append(Text(f"  {i}. {a}"))
    return Panel(Group(*body), title=f"Guidance for lot {ev.lot}, retort {ev.retort_id}", border_style=style)


def flags_table(ev: Evaluation) -> Table | Text:
    if not ev.flags:
        return Text("No deviation found in the record.", style="green")
    t = Table(title="What the record shows", show_lines=False, expand=False)
    t.add_column("code", style="bold")
    t.add_column("what happened")
    for f in ev.flags:
        t.add_row(f"⚑ {f.code}", f.message)
    return t


def figures_table(ev: Evaluation) -> Table:
    t = Table(title=f"Lethality at the cold spot ({ev.model}"
                    f"{', lower reading between samples' if ev.conservative else ', interpolated'})")
    t.add_column("quantity")
    t.add_column("value", justify="right")
    t.add_column("note")
    margin = ev.F_margin_min
    F = "F0" if ev.F0_min is None or abs(ev.F0_min - ev.delivered_F_min) < 1e-12 else "F"
    headline = f"{F} so far (cycle still running)" if ev.cycle.running else f"delivered {F} (the guidance uses it)"
    t.add_row(headline, f"{ev.delivered_F_min:.2f} min",
              ("meets" if margin >= 0 else "BELOW") + f" target by {abs(margin):.2f} min"
              + (f"; {ev.F_basis}" if ev.F_basis else ""))
    if ev.model_F_min is not None and abs(ev.model_F_min - ev.delivered_F_min) > 1e-9:
        t.add_row(f"  model {F} on the record", f"{ev.model_F_min:.2f} min", "before the relative correction")
    if ev.interpolated_F_min is not None and abs(ev.interpolated_F_min - (ev.model_F_min or ev.delivered_F_min)) > 1e-9:
        t.add_row(f"  interpolated {F} (not used)", f"{ev.interpolated_F_min:.2f} min",
                  "straight lines between readings, gaps credited: a friendlier figure")
    if ev.broken_curve is not None:
        b = ev.broken_curve
        when = ("did not thicken on this record" if b["earliest_break_min"] is None else
                f"thickened from {b['earliest_break_min']:.1f} min (earliest)"
                + ("" if b["latest_break_min"] is None else f" to {b['latest_break_min']:.1f} min (surely)"))
        t.add_row("broken heating curve", f"{b['break_temperature_C']:.1f} °C",
                  f"the product thickens at this temperature (as filed): fh {b['fh_min']:g} then "
                  f"{b['fh2_min']:g} min; on this record it {when}")
    if F == "F" and ev.F0_min is not None:
        t.add_row("  F0 (121.1 °C, z 10 °C)", f"{ev.F0_min:.2f} min", "the botulinum figure")
    t.add_row(f"filed target {F}", f"{ev.target_F_min:.2f} min", "")
    ratio = ev.scheduled_F_min / ev.target_F_min if ev.target_F_min else float("nan")
    t.add_row(f"scheduled process {F} (model)", f"{ev.scheduled_F_min:.2f} min",
              f"{ratio:.2f} x the target" + ("" if 0.85 <= ratio <= 1.15 else " (see the model-vs-filed flag)"))
    if ev.ball_formula_F_min is not None:
        t.add_row(f"scheduled process {F} (Ball's formula)", f"{ev.ball_formula_F_min:.2f} min",
                  "the hand cross-check of the filed process")
    if ev.projected_F_min is not None and ev.cycle.running:
        t.add_row("projected F0 if the rest runs as filed", f"{ev.projected_F_min:.2f} min", "cycle still running")
    if ev.extension_to_target_min == 0.0:
        t.add_row("extra hold to reach target", "none needed", "delivered F0 meets the target")
    elif ev.extension_to_target_min is not None:
        t.add_row("extra hold to reach target", f"{ev.extension_to_target_min:.1f} min",
                  "at process temperature, before cooling")
    elif ev.extension_reason:
        t.add_row("extra hold to reach target", "n/a", ev.extension_reason)
    if ev.reprocess_F_min is not None:
        t.add_row("a full reprocess as filed adds", f"{ev.reprocess_F_min:.2f} min",
                  f"total {ev.total_F_with_reprocess_min:.2f} min, from "
                  f"{ev.reprocess['reprocess_from_temperature_C']:.1f} °C")
    t.add_row("spoilage probability per container",
              fmt_probability(ev.spoilage_probability, ev.log10_spoilage_probability),
              f"filed target: {fmt_probability(ev.target_spoilage_probability, ev.log10_target_spoilage_probability)}")
    t.add_row("expected nonsterile containers in lot", f"{ev.expected_nonsterile_containers:.3g}", "")
    if ev.lot_nonsterile_probability is not None:
        t.add_row("probability of at least one in the lot",
                  fmt_probability(ev.lot_nonsterile_probability, ev.log10_lot_nonsterile_probability), "")
    ok = ev.botulinum_log_reductions >= ev.botulinum_log_reductions_required
    t.add_row("botulinum log reductions", f"{ev.botulinum_log_reductions:.1f}",
              f"{'meets' if ok else 'BELOW'} {ev.botulinum_log_reductions_required:g}D")
    c = ev.cycle
    if c.hold_start_min is not None:
        t.add_row("hold", f"{c.hold_duration_min:.1f} min" if c.hold_duration_min is not None else "n/a",
                  f"from {c.hold_start_min:.1f} to {c.hold_end_min:.1f} min" if c.hold_end_min is not None else "")
    if c.lowest_during_hold_C is not None:
        t.add_row("lowest retort during hold", f"{c.lowest_during_hold_C:.1f} °C", "")
    mc = ev.uncertainty
    if mc and "F_p05_min" not in mc:
        t.add_row("Monte Carlo", "not run", str(mc.get("reason", "")))
    elif mc:
        t.add_row("F0, 5th percentile (Monte Carlo)", f"{mc['F_p05_min']:.2f} min",
                  f"{mc['samples']} samples, seed {mc['seed']}")
        t.add_row("probability F0 below target", f"{mc.get('probability_below_target', mc['probability_F_below_target']):.1%}", "")
        t.add_row("spoilage probability, 95th percentile", fmt_probability(mc["spoilage_probability_p95"]), "")
    t.add_row("lethality established", "yes" if ev.lethality_established else "NO",
              "fully" if ev.lethality_fully_established else "not fully (see flags)")
    return t


def caution_panel() -> Panel:
    extra = (
        "Incubation of samples cannot by itself show safety: C. botulinum can grow without swelling. "
        "If any container of a deviant lot has been distributed, the regulator must be told."
    )
    return Panel(Text(f"{CAUTION}\n{extra}", style="bold"), title="Process authority decides",
                 border_style="magenta")


def print_evaluation(ev: Evaluation, console: Console | None = None) -> None:
    console = console or Console()
    console.print(Text(f"{ev.product} · process {ev.process_id} · lot {ev.lot} · retort {ev.retort_id}",
                       style="bold"))
    if ev.guidance:
        console.print(guidance_panel(ev))
    console.print(flags_table(ev))
    console.print(figures_table(ev))
    console.print(caution_panel())
