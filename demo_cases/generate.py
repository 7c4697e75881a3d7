"""Write the demo cases of Osterby Hollow Cannery (an invented plant) and their retort logs.

Invented data for the demo only: every process, lot and reading here is made up. Run from the
project root: ``python demo_cases/generate.py`` (deterministic: the same files every time).
"""

from __future__ import annotations

import tomllib
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
PROCESSES = HERE / "processes"
LOGS = HERE / "logs"


def process_table(pid: str) -> tuple[str, dict]:
    text = (PROCESSES / f"{pid}.toml").read_text()
    body = "\n".join(line for line in text.splitlines() if not line.startswith("#"))
    return body.strip() + "\n", tomllib.loads(text)["process"]


def retort_trace(p: dict, *, step_min=0.5, start_C=28.0, come_up_min=None, hold_min=None,
                 drops=(), gaps=(), end_min=None, cooling_min=45.0, seed=1,
                 overshoot_C=0.4, setpoint_C=None) -> tuple[np.ndarray, np.ndarray]:
    """A plausible still-retort recorder trace [min, °C] with drops (start, end, lowest) laid in."""
    rng = np.random.default_rng(seed)
    PT = p["process_temperature_C"] if setpoint_C is None else setpoint_C
    cu = p["come_up_time_min"] if come_up_min is None else come_up_min
    hold = p["process_time_min"] if hold_min is None else hold_min
    t = np.arange(0.0, cu + hold + cooling_min + step_min / 2, step_min)
    T = np.empty_like(t)
    up = t <= cu
    # Come-up: fast at first, slower near the top, reaching PT + overshoot at cu.
    frac = t[up] / cu
    T[up] = start_C + (PT + overshoot_C - start_C) * (1 - (1 - frac) ** 1.6)
    hold_mask = (t > cu) & (t <= cu + hold)
    T[hold_mask] = PT + overshoot_C + rng.uniform(-0.15, 0.15, hold_mask.sum())
    cool = t > cu + hold
    Tw = p.get("cooling_water_temperature_C", 20.0)
    T[cool] = Tw + (PT - Tw) * np.exp(-(t[cool] - cu - hold) / 4.0)
    for start, end, low in drops:
        # The retort falls to its lowest over a minute, stays, and recovers over a minute.
        ramp_down = (t >= start) & (t < start + 1.0)
        T[ramp_down] = np.minimum(T[ramp_down], PT + overshoot_C - (PT + overshoot_C - low) * (t[ramp_down] - start))
        T[(t >= start + 1.0) & (t <= end - 1.0)] = low + rng.uniform(0.0, 0.2, ((t >= start + 1.0) & (t <= end - 1.0)).sum())
        ramp_up = (t > end - 1.0) & (t <= end)
        T[ramp_up] = low + (PT + overshoot_C - low) * (t[ramp_up] - (end - 1.0))
    keep = np.ones_like(t, dtype=bool)
    for g0, g1 in gaps:
        keep &= ~((t > g0) & (t < g1))
    if end_min is not None:
        keep &= t <= end_min
    return t[keep], np.round(T[keep], 2)


def _predicted_cold_spot(p: dict, t, T, *, initial_C: float, seed: int) -> np.ndarray:
    """A cold-spot trace for the demo: the conduction model's answer plus thermocouple noise."""
    from deviation.inputs.case import Process
    from deviation.evaluate.cold_spot import cold_spot_model, deliver
    from deviation.inputs.logs import RetortProfile

    process = Process.model_validate(p)
    model = cold_spot_model(process)
    d = deliver(RetortProfile(t, T, "demo", None), initial_C, process, model, conservative=False)
    rng = np.random.default_rng(seed)
    return np.round(np.interp(t, d.time_min, d.cold_spot_C) + rng.normal(0.0, 0.05, t.size), 2)


def shell_trace(p: dict, *, minutes: float, step_min: float = 0.1, drops=(), seed=1) -> tuple[np.ndarray, np.ndarray]:
    """A continuous cooker's shell record [min, °C]: at temperature all shift, drops laid in."""
    rng = np.random.default_rng(seed)
    t = np.arange(0.0, minutes + step_min / 2, step_min)
    T = p["process_temperature_C"] + 0.3 + rng.uniform(-0.12, 0.12, t.size)
    for start, end, lowest in drops:
        inside = (t >= start) & (t <= end)
        # down over a minute, flat at the bottom, back over a minute
        depth = np.minimum(np.minimum(t[inside] - start, end - t[inside]), 1.0)
        T[inside] -= (p["process_temperature_C"] + 0.3 - lowest) * depth
    return t, np.round(T, 2)


def write_log(name: str, t: np.ndarray, T: np.ndarray, column="temperature_C") -> str:
    LOGS.mkdir(exist_ok=True)
    path = LOGS / name
    lines = [f"# Invented demo record (Osterby Hollow Cannery). {name}", f"time_min,{column}"]
    lines += [f"{a:.2f},{b:.2f}" for a, b in zip(t, T)]
    path.write_text("\n".join(lines) + "\n")
    return f"logs/{name}"


def write_case(name: str, pid: str, header: str, deviation: str) -> None:
    body, _ = process_table(pid)
    text = f"# {header}\n# Invented demo case (Osterby Hollow Cannery); not real data.\n\n{body}\n{deviation.strip()}\n"
    (HERE / f"{name}.toml").write_text(text)


def deviation_block(lot, retort, size, it, *, log=None, extra=""):
    lines = ["[deviation]", 'plant = "Osterby Hollow Cannery"', f'lot = "{lot}"', f'retort_id = "{retort}"',
             f"lot_size_containers = {size}", f"initial_temperature_C = {it}"]
    if log:
        lines.append(f'retort_log = "{log}"')
    return "\n".join(lines) + "\n" + extra


def main() -> None:
    _, chili = process_table("OH-CHL-87x115")
    _, peas = process_table("OH-PEA-74x113")
    _, tray = process_table("OH-STW-TRAY")
    _, beans = process_table("OH-BNS-83x114")
    _, soup = process_table("OH-SOU-65x101")
    _, corn = process_table("OH-CRN-74x113")
    _, pudding = process_table("OH-RPD-83x114")

    # 1. Temperature drop in a still steam retort during the hold.
    t, T = retort_trace(chili, drops=[(40.0, 48.0, 117.2)], seed=11)
    log = write_log("R3-2026-1104-A.csv", t, T)
    write_case("chili_temperature_drop", "OH-CHL-87x115",
               "Retort 3 lost steam pressure for about 8 minutes during the hold.",
               deviation_block("CHL-261104-A", "R3", 4800, 52.0, log=log,
                               extra='description = "Steam header pressure fell; retort read 117.2 C at the lowest."\n'))

    # 2. Interrupted cycle: the retort cooled towards 100 C and came back.
    t, T = retort_trace(peas, drops=[(18.0, 30.0, 99.5)], hold_min=peas["process_time_min"] + 12, seed=12)
    log = write_log("R1-2026-1105-B.csv", t, T)
    write_case("peas_steam_loss", "OH-PEA-74x113",
               "Boiler trip: retort 1 fell to about 100 C and came back; operator extended the hold 12 min.",
               deviation_block("PEA-261105-B", "R1", 9600, 58.0, log=log))

    # 3. Short hold, entered by the operator from what was seen (no log yet).
    write_case("peas_short_hold", "OH-PEA-74x113",
               "Steam turned off 6 minutes early by mistake (operator's entry, no recorder file yet).",
               deviation_block("PEA-261106-C", "R2", 9600, 60.0, extra="""
[[deviation.events]]
kind = "hold-time"
process_time_min = 14
note = "cooling water opened at 23 min from steam on instead of 29"
"""))

    # 4. Low initial temperature: the lot waited in the cold room before closing.
    t, T = retort_trace(chili, seed=14)
    log = write_log("R2-2026-1107-D.csv", t, T)
    write_case("chili_low_initial_temperature", "OH-CHL-87x115",
               "Cans sat 40 minutes after filling; initial temperature 31 C against a filed minimum of 40 C.",
               deviation_block("CHL-261107-D", "R2", 4800, 31.0, log=log))

    # 5. Long come-up on a tray retort.
    t, T = retort_trace(tray, come_up_min=19.0, start_C=30.0, seed=15)
    log = write_log("R5-2026-1108-E.csv", t, T)
    write_case("tray_long_come_up", "OH-STW-TRAY",
               "Water-spray retort 5 took 19 minutes to come up (filed 12).",
               deviation_block("STW-261108-E", "R5", 2400, 50.0, log=log))

    # 6. A gap in the temperature record (recorder paper jam).
    t, T = retort_trace(chili, gaps=[(30.0, 34.5)], seed=16)
    log = write_log("R3-2026-1109-F.csv", t, T)
    write_case("chili_record_gap", "OH-CHL-87x115",
               "The recorder stopped for 4.5 minutes in the hold; the indicating thermometer was read at 30 and 34.5 min.",
               deviation_block("CHL-261109-F", "R3", 4800, 48.0, log=log))

    # 7. A critical factor out: fill weight above the filed maximum.
    t, T = retort_trace(peas, seed=17)
    log = write_log("R1-2026-1110-G.csv", t, T)
    write_case("peas_fill_weight", "OH-PEA-74x113",
               "Filler drifted: check-weigher found 318 g against a filed maximum of 310 g.",
               deviation_block("PEA-261110-G", "R1", 9600, 61.0, log=log, extra="""
[[deviation.critical_factor_readings]]
name = "fill weight"
value = 318
note = "heaviest of 10 containers at the check-weigher"
"""))

    # 8. A cycle run entirely at the filed alternate temperature (controller set-point error).
    t, T = retort_trace(chili, hold_min=100.0, seed=18, overshoot_C=0.3, setpoint_C=118.3)
    log = write_log("R4-2026-1111-H.csv", t, T)
    write_case("chili_alternate_process", "OH-CHL-87x115",
               "Set-point entered as 118.6 C instead of 121.4 C; the operator held 100 min per the filed alternate process.",
               deviation_block("CHL-261111-H", "R4", 4800, 50.0, log=log))

    # 8b. Steam failure early in the hold; the cycle was aborted and the retort cooled.
    t, T = retort_trace(tray, hold_min=7.0, start_C=30.0, seed=21)
    log = write_log("R5-2026-1114-L.csv", t, T)
    write_case("tray_steam_failure", "OH-STW-TRAY",
               "Boiler failure 7 minutes into the hold; the operator cooled the retort.",
               deviation_block("STW-261114-L", "R5", 2400, 50.0, log=log))

    # 8c. A measured cold-spot record: a thermocoupled tray rode with the deviant load.
    t, T = retort_trace(tray, drops=[(25.0, 33.0, 112.0)], start_C=30.0, seed=22, step_min=1.0)
    log = write_log("R6-2026-1115-M.csv", t, T)
    cold = _predicted_cold_spot(tray, t, T, initial_C=52.0, seed=23)
    cold_log = write_log("R6-2026-1115-M-coldspot.csv", t, cold)
    write_case("tray_measured_cold_spot", "OH-STW-TRAY",
               "Retort 6 dropped to 112 C for 8 minutes; a thermocouple tray in the load recorded its cold spot.",
               deviation_block("STW-261115-M", "R6", 2400, 52.0, log=log,
                               extra=f'cold_spot_log = "{cold_log}"\n'))

    # 9. A cycle with no deviation (for comparison).
    t, T = retort_trace(chili, seed=19)
    log = write_log("R2-2026-1112-J.csv", t, T)
    write_case("chili_no_deviation", "OH-CHL-87x115", "A normal cycle, for comparison.",
               deviation_block("CHL-261112-J", "R2", 4800, 50.0, log=log))

    # 11. Still steam: the vents were closed early (vent schedule not met).
    t, T = retort_trace(chili, seed=24)
    log = write_log("R2-2026-1116-N.csv", t, T)
    write_case("chili_vent_short", "OH-CHL-87x115",
               "Retort 2 vents closed after 5 minutes at 101 C (filed: 7 minutes and 104.4 C).",
               deviation_block("CHL-261116-N", "R2", 4800, 51.0, log=log, extra="""
[[deviation.events]]
kind = "venting"
vent_time_min = 5
vent_temperature_C = 101.0
note = "vent timer reset by mistake"
"""))

    # 12. Water immersion: the water level fell below the top layer for 10 minutes.
    t, T = retort_trace(beans, start_C=60.0, seed=25)
    log = write_log("R7-2026-1117-P.csv", t, T)
    write_case("beans_low_water", "OH-BNS-83x114",
               "Retort 7 (water immersion): a drain valve leaked; the water stood 15 mm below the top layer from 30 to 40 min.",
               deviation_block("BNS-261117-P", "R7", 3600, 62.0, log=log, extra="""
[[deviation.events]]
kind = "water-level"
start_min = 30
end_min = 40
level_above_top_mm = -15
note = "sight glass read 15 mm below the top layer; valve closed at 40 min"
"""))

    # 13. Reel-and-spiral: the reel stopped for 6 minutes and the shell fell to 121 C meanwhile.
    t, T = shell_trace(soup, minutes=150.0, drops=[(60.0, 67.0, 121.0)], seed=26)
    log = write_log("RS1-2026-1118-Q.csv", t, T)
    write_case("soup_reel_stop", "OH-SOU-65x101",
               "Reel-and-spiral line 1: a jam stopped the reel from 60 to 66 min; the shell fell to 121 C.",
               deviation_block("SOU-261118-Q", "RS1", 14760, 72.0, log=log, extra="""
[deviation.stream]
entry_start_min = 5
entry_end_min = 130
first_entry = "2026-11-18T06:05:00"

[[deviation.events]]
kind = "reel-stop"
start_min = 60
end_min = 66
note = "can jam at the transfer valve"
"""))

    # 14. Hydrostatic tower: the steam dome fell to 117 C for 8 minutes.
    t, T = shell_trace(corn, minutes=180.0, drops=[(80.0, 88.0, 117.0)], seed=27)
    log = write_log("HS1-2026-1119-R.csv", t, T)
    write_case("corn_dome_drop", "OH-CRN-74x113",
               "Hydrostatic tower 1: the steam dome fell to 117 C from 80 to 88 min (steam valve fault).",
               deviation_block("CRN-261119-R", "HS1", 13440, 64.0, log=log, extra="""
[deviation.stream]
entry_start_min = 5
entry_end_min = 145
first_entry = "2026-11-19T05:35:00"
"""))

    # 10. A cycle still running: the record so far ends in the hold with a drop.
    t, T = retort_trace(chili, drops=[(25.0, 31.0, 118.0)], end_min=45.0, seed=20)
    log = write_log("R3-2026-1113-K-partial.csv", t, T)
    write_case("chili_cycle_running", "OH-CHL-87x115",
               "Still in the hold at 45 min, after a 6-minute drop to 118 C: what if the rest runs as filed?",
               deviation_block("CHL-261113-K", "R3", 4800, 47.0, log=log))

    # 15. A broken heating curve: the rice pudding had thickened when retort 3 lost steam.
    t, T = retort_trace(pudding, drops=[(50.0, 59.0, 115.5)], seed=28)
    log = write_log("R3-2026-1120-S.csv", t, T)
    write_case("pudding_steam_drop", "OH-RPD-83x114",
               "Retort 3 fell to 115.5 C from 50 to 59 min, after the pudding had thickened.",
               deviation_block("RPD-261120-S", "R3", 3600, 68.0, log=log,
                               extra='description = "Steam supply shared with the blancher; the retort read 115.5 C at the lowest."\n'))


if __name__ == "__main__":
    main()
