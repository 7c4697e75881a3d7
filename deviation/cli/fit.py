"""``deviation fit``: heat penetration parameters from a test file, ready to paste into a case.

``deviation fit HEATPEN.csv [--come-up-min X] [--initial-temperature-C X]
[--diameter-mm D --height-mm H | --length-mm L --width-mm W --thickness-mm T] [--json]``

Prints, per thermocouple, Ball's semi-log fit and the least-squares fit of the model response to
the actual retort record (with fit quality), the chosen slowest-heating thermocouple, and a
``[process.heat_penetration]`` table. With ``--json`` one JSON object. Exit codes as the rest of
the CLI: 0 done, 2 bad input.
"""

from __future__ import annotations

import argparse
import json
import sys
from typing import TYPE_CHECKING

from deviation.errors import DeviationError

if TYPE_CHECKING:  # the fitting code (scipy.optimize) loads only when `deviation fit` runs
    from deviation.physics.calibration.results import FitReport

_CYLINDER = ("diameter_mm", "height_mm")
_BRICK = ("length_mm", "width_mm", "thickness_mm")


def register(subparsers) -> None:
    """Add ``fit`` to the ``deviation`` sub-parsers."""
    p = subparsers.add_parser(
        "fit",
        help="fh, jh (fc, jc, diffusivity) from a heat penetration test, for a case file",
        description="Fit heat penetration parameters to a test file (columns time_min or time, "
                    "retort_C or retort_F, one column per thermocouple named like tc1_C or "
                    "tc1_F) by Ball's semi-log method and by least squares of the model "
                    "response to the retort record.",
    )
    p.add_argument("file", metavar="HEATPEN.csv", help="heat penetration test (CSV)")
    p.add_argument("--come-up-min", type=float, default=None, metavar="X",
                   help="come-up time [min] (default: read from the retort column)")
    p.add_argument("--initial-temperature-C", dest="initial_temperature_C", type=float,
                   default=None, metavar="X",
                   help="initial temperature [°C] (default: each thermocouple's first reading)")
    for name in _CYLINDER + _BRICK:
        p.add_argument(f"--{name.replace('_', '-')}", dest=name, type=float, default=None,
                       metavar="MM", help=f"container inside {name[:-3]} [mm]")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(handler=run)


def _container(args):
    from deviation.physics.calibration import ContainerGeometry

    cylinder = {k: getattr(args, k) for k in _CYLINDER if getattr(args, k) is not None}
    brick = {k: getattr(args, k) for k in _BRICK if getattr(args, k) is not None}
    if cylinder and brick:
        raise DeviationError("give the cylinder dimensions (--diameter-mm, --height-mm) or the "
                             "brick dimensions (--length-mm, --width-mm, --thickness-mm), not "
                             "both", source="deviation fit")
    for shape, given, need in (("cylinder", cylinder, _CYLINDER), ("brick", brick, _BRICK)):
        if given:
            missing = [k for k in need if k not in given]
            if missing:
                raise DeviationError(
                    f"a {shape} needs " + ", ".join(f"--{k.replace('_', '-')}" for k in need)
                    + "; missing " + ", ".join(f"--{k.replace('_', '-')}" for k in missing),
                    source="deviation fit")
            for k, v in given.items():
                if not v > 0.0:
                    raise DeviationError(f"--{k.replace('_', '-')} {v:g}; expected a length > 0 "
                                         "[mm]", source="deviation fit")
            return ContainerGeometry(shape, **given)
    return None


def run(args) -> int:
    """Handler of ``deviation fit``: returns the exit code."""
    from deviation.inputs.heat_penetration import read_heat_penetration_csv
    from deviation.physics.calibration import fit_all

    container = _container(args)
    data = read_heat_penetration_csv(args.file, source=args.file)
    report = fit_all(data, come_up_min=args.come_up_min, initial_C=args.initial_temperature_C,
                     container=container)
    table = paste_table(report)
    if args.json:
        out = report.to_dict()
        out["paste_table"] = table
        sys.stdout.write(json.dumps(out, separators=(",", ":"), ensure_ascii=False,
                                    allow_nan=False) + "\n")
        return 0

    from rich.console import Console
    from rich.table import Table

    console = Console()
    if not console.is_terminal:
        console = Console(width=110)  # piped or captured: wide enough for the tables
    ph = report.phases
    how = "read from the retort column (first reading at its hold plateau)" \
        if report.come_up_detected else "as given"
    console.print(f"[bold]Heat penetration test[/bold] {report.source}")
    console.print(f"retort plateau {ph.plateau_C:.2f} °C; come-up {report.come_up_min:g} min, "
                  f"{how}; corrected zero {0.58 * report.come_up_min:.2f} min (Ball, 58% of the "
                  "come-up)", highlight=False)
    if ph.steam_off_min is not None:
        console.print(f"steam off {ph.steam_off_min:g} min; cooling water "
                      f"{ph.cooling_water_C:.2f} °C (retort column, end of cooling)",
                      highlight=False)
    else:
        console.print("no cooling phase on the record: no fc, jc", highlight=False)

    t = Table(title="Heating and cooling parameters per thermocouple")
    for col in ("TC", "method", "fh min", "jh", "fc min", "jc", "RMS °C", "fit"):
        t.add_column(col, justify="left" if col in ("TC", "method", "fit") else "right")
    for tc in report.thermocouples:
        s, c, m = tc.semilog, tc.cooling, tc.heating_curve
        name = tc.name + (" ◀" if tc.name == report.chosen else "")
        if s is not None:
            quality = f"R² {s.r_squared:.5f}, {s.window_start_min:g}-{s.window_end_min:g} min"
            t.add_row(name, "semi-log", f"{s.fh_min:.2f}", f"{s.jh:.3f}",
                      f"{c.fc_min:.2f}" if c else "-", f"{c.jc:.3f}" if c else "-",
                      f"{s.rms_residual_C:.3f}", quality)
            name = ""
        if m is not None:
            p, e = m.parameters, m.standard_errors
            keys = ("fh_min", "jh", "fc_min", "jc")
            t.add_row(name, "least squares", *(f"{p[k]:.4g}" if k in p else "-" for k in keys),
                      f"{m.rms_residual_C:.3f}",
                      "converged" if m.converged else "NOT converged")
            t.add_row("", "  ± 1 s.e.", *(f"{e[k]:.2g}" if k in e else "" for k in keys), "", "")
        t.add_row("", "F0 of readings", f"{tc.measured_F0_min:.2f}", "", "", "", "", "",
                  end_section=True)
    console.print(t)
    console.print("F0 of readings: the thermocouple's own record by the General Method (121.1 °C, "
                  "z 10 °C). Semi-log cooling: zero at steam off, no come-down correction.",
                  highlight=False)

    if container is not None:
        t = Table(title=f"Thermal diffusivity, conduction models ({container.describe()})")
        for col in ("TC", "least squares α m²/s", "± 1 s.e.", "its fh min", "RMS °C",
                    "α from semi-log fh"):
            t.add_column(col, justify="left" if col == "TC" else "right")
        for tc in report.thermocouples:
            k = tc.conduction
            row = [tc.name]
            if k is not None:
                row += [f"{k.parameters['thermal_diffusivity_m2_s']:.3g}",
                        f"{k.standard_errors['thermal_diffusivity_m2_s']:.2g}",
                        f"{k.parameters['fh_min']:.2f}", f"{k.rms_residual_C:.3f}"]
            else:
                row += ["-"] * 4
            row.append(f"{tc.diffusivity_from_fh_m2_s:.3g}" if tc.diffusivity_from_fh_m2_s
                       else "-")
            t.add_row(*row)
        console.print(t)

    for tc in report.thermocouples:
        for problem in tc.problems:
            console.print(f"[yellow]{tc.name}: {problem}[/yellow]", highlight=False)
        for fit in (tc.semilog, tc.cooling):
            if fit is not None and fit.note:
                console.print(f"[yellow]{tc.name}: {fit.note}[/yellow]", highlight=False)
    console.print(f"Chosen: [bold]{report.chosen}[/bold], the slowest heating (largest semi-log "
                  "fh).", highlight=False)
    if report.lowest_F0 != report.chosen:
        console.print(f"[yellow]Note: {report.lowest_F0} had the lowest F0 of its own readings "
                      "in this test; the process authority decides which point is the cold "
                      "spot.[/yellow]", highlight=False)
    console.print("These parameters are for the process authority to review before anything is "
                  "filed; the process authority decides, and local regulations govern.", highlight=False)
    console.print("Paste into the case file:", highlight=False)
    sys.stdout.flush()
    sys.stdout.write(table)  # verbatim: no wrapping or markup, so it parses as TOML
    return 0


def main(argv=None) -> int:  # pragma: no cover - the lead wires ``fit`` into deviation.cli
    parser = argparse.ArgumentParser(prog="deviation")
    register(parser.add_subparsers(dest="command"))
    args = parser.parse_args(argv)
    try:
        return args.handler(args)
    except DeviationError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return exc.exit_code


def _g(value: float, digits: int = 4) -> str:
    """A number for TOML with ``digits`` significant figures (always a float literal)."""
    text = f"{value:.{digits}g}"
    if "e" in text:
        mantissa, exponent = text.split("e")
        if "." not in mantissa:
            mantissa += ".0"
        return f"{mantissa}e{int(exponent)}"
    return text if "." in text else text + ".0"


def paste_table(report: FitReport, *, method: str = "semilog") -> str:
    """A ``[process.heat_penetration]`` TOML table for the chosen thermocouple.

    Parameters
    ----------
    report : FitReport
        From :func:`fit_all`
    method : {"semilog", "least-squares"}
        Which values go in the table. The default, Ball's semi-log fh, jh, fc, jc, is what a
        filing uses and a process authority recognises (Ball 1923); the least-squares figures
        (Ball's curves superposed on the actual retort record) stand beside them as comments,
        labelled. ``least-squares`` puts those in the table instead (falls back to the semi-log
        values when the least squares did not converge).

    Returns
    -------
    str
        Comment lines (source, thermocouple, fit quality), the table with ``model``, ``fh_min``,
        ``jh`` and, with a cooling phase, ``fc_min``, ``jc``; with container dimensions a
        commented ``thermal_diffusivity_m2_s`` line for ``model = "conduction"``.
    """
    if method not in ("least-squares", "semilog"):
        raise ValueError(f"method {method!r}; expected 'least-squares' or 'semilog'")
    tc = report.chosen_fit()
    semi, cool, hc = tc.semilog, tc.cooling, tc.heating_curve
    use_ls = method == "least-squares" and hc is not None and hc.converged
    lines = [
        f"# from heat penetration test {report.source}, thermocouple {tc.name} "
        "(slowest heating: largest fh)",
        f"# semi-log (Ball): fh {semi.fh_min:.2f} min, jh {semi.jh:.3f}, R² {semi.r_squared:.5f}, "
        f"RMS {semi.rms_residual_C:.3f} °C, {semi.window_start_min:g}-{semi.window_end_min:g} "
        f"min ({semi.n_points} readings)",
    ]
    broken = tc.broken if not use_ls else None
    if tc.broken is not None:
        b = tc.broken
        lines.append(
            f"# broken heating curve (Ball): fh {b.fh_min:.2f} min, jh {b.jh:.3f} to the break at "
            f"{b.break_min:.2f} min from the corrected zero ({b.break_temperature_C:.1f} °C), then "
            f"fh2 {b.fh2_min:.2f} min" + (f"; {b.note}" if b.note else ""))
    if cool is not None:
        lines.append(
            f"# semi-log cooling: fc {cool.fc_min:.2f} min, jc {cool.jc:.3f}, "
            f"R² {cool.r_squared:.5f}, RMS {cool.rms_residual_C:.3f} °C"
        )
    if hc is not None:
        pe = ", ".join(f"{k} {_g(v)} ± {_g(hc.standard_errors[k], 2)}"
                       for k, v in hc.parameters.items())
        lines.append(f"# least squares (Ball's curves on the actual retort record, for comparison): {pe}, "
                     f"RMS {hc.rms_residual_C:.3f} °C")
    if use_ls and tc.broken is not None:
        lines.append("# the least squares fit one straight line: the break above is not in the values below")
    lines.append(f"# values below: {'least squares' if use_ls else 'semi-log (Ball 1923), as a filing uses'}")
    lines.append("[process.heat_penetration]")
    lines.append('model = "heating-curve"')
    if use_ls:
        values = {k: hc.parameters[k] for k in ("fh_min", "jh", "fc_min", "jc")
                  if k in hc.parameters}
    else:
        values = {"fh_min": semi.fh_min, "jh": semi.jh}
        if broken is not None:
            values = {"fh_min": broken.fh_min, "jh": broken.jh, "fh2_min": broken.fh2_min,
                      "break_min": broken.break_min, "break_temperature_C": broken.break_temperature_C}
        if cool is not None:
            values.update(fc_min=cool.fc_min, jc=cool.jc)
    for key, value in values.items():
        lines.append(f"{key} = {_g(value)}")
    if report.container is not None:
        alpha = None
        basis = ""
        if tc.conduction is not None and tc.conduction.converged:
            alpha = tc.conduction.parameters["thermal_diffusivity_m2_s"]
            basis = (f"least squares of the conduction model, RMS "
                     f"{tc.conduction.rms_residual_C:.3f} °C")
            if hc is not None and tc.conduction.rms_residual_C > 2.0 * hc.rms_residual_C:
                basis += " - a poor fit: not a conduction-heating product?"
        elif tc.diffusivity_from_fh_m2_s is not None:
            alpha = tc.diffusivity_from_fh_m2_s
            basis = "from the semi-log fh (Olson & Jackson 1942)"
        if alpha is not None:
            lines.append(f"# for model = \"conduction\" ({report.container.describe()}; {basis})")
            lines.append("# use this line in place of fh_min and jh:")
            lines.append(f"# thermal_diffusivity_m2_s = {_g(alpha, 3)}")
    return "\n".join(lines) + "\n"
