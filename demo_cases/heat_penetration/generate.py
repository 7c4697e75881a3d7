"""Write the demo heat penetration test ``OH-PEA-hp-test.csv`` of Osterby Hollow Cannery.

Invented data for the demo only: the plant, the test and every reading are made up. Four
thermocouples in 74 x 113 mm cans of garden peas in brine, a still steam retort at 118.3 °C
with a 9-minute come-up, a 22-minute hold and 25 minutes of water cooling at 22 °C.

Each thermocouple's readings are the heating-curve model of this tool (Ball's step response
``min(1, j 10^(-t/f))`` superposed over the retort trace, with ``fc, jc`` after steam off:
``deviation.physics.heating``) for the known parameters in ``THERMOCOUPLES`` below, plus Gaussian
thermocouple noise of 0.1 °C standard deviation, rounded to 0.01 °C. ``deviation fit`` should
give them back.

Run from the project root: ``python demo_cases/heat_penetration/generate.py`` (deterministic:
the same file every time).
"""

from __future__ import annotations

import functools
import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parents[1]))

from deviation.physics.heating.heating_curve import step_unaccomplished  # noqa: E402
from deviation.physics.heating.superposition import superpose  # noqa: E402

OUT = HERE / "OH-PEA-hp-test.csv"
STEP_MIN = 0.5
START_C = 50.0  # retort at steam on: at the temperature of the hot-filled load
PROCESS_C = 118.3
COME_UP_MIN = 9.0
HOLD_MIN = 22.0
COOLING_MIN = 25.0
COOLING_WATER_C = 22.0
INITIAL_C = 50.0  # hot-filled brine
NOISE_C = 0.1
SEED = 20261103

#: name: (fh_min, jh, fc_min, jc). tc2 is the slowest heating (largest fh).
THERMOCOUPLES = {
    "tc1": (8.4, 1.25, 9.6, 1.35),
    "tc2": (9.2, 1.32, 10.4, 1.42),
    "tc3": (8.8, 1.45, 10.0, 1.50),
    "tc4": (7.9, 1.18, 9.0, 1.30),
}


def retort_trace(rng) -> tuple[np.ndarray, np.ndarray]:
    """Steam on at 0, a linear come-up, a hold with controller ripple, a fast fall to the water."""
    t = np.arange(0.0, COME_UP_MIN + HOLD_MIN + COOLING_MIN + STEP_MIN / 2, STEP_MIN)
    T = np.full_like(t, PROCESS_C)
    up = t < COME_UP_MIN
    T[up] = START_C + (PROCESS_C - START_C) * t[up] / COME_UP_MIN
    hold = (t >= COME_UP_MIN) & (t <= COME_UP_MIN + HOLD_MIN)
    T[hold] = PROCESS_C + 0.2 + rng.uniform(-0.1, 0.1, hold.sum())
    cool = t > COME_UP_MIN + HOLD_MIN
    # water on: the retort falls to the cooling water with a 1-minute time constant
    T[cool] = COOLING_WATER_C + (PROCESS_C - COOLING_WATER_C) * np.exp(
        -(t[cool] - COME_UP_MIN - HOLD_MIN) / 1.0)
    return t, np.round(T, 2)


def main(out: Path = OUT) -> None:
    rng = np.random.default_rng(SEED)
    t, retort = retort_trace(rng)
    steam_off = COME_UP_MIN + HOLD_MIN
    columns = {"time_min": [f"{x:.1f}" for x in t], "retort_C": [f"{x:.2f}" for x in retort]}
    for name, (fh, jh, fc, jc) in THERMOCOUPLES.items():
        cold = superpose(
            t, retort, INITIAL_C,
            functools.partial(step_unaccomplished, fh_min=fh, jh=jh),
            cooling_unaccomplished=functools.partial(step_unaccomplished, fh_min=fc, jh=jc),
            cooling_start_min=steam_off,
        )
        noisy = cold + rng.normal(0.0, NOISE_C, t.size)
        columns[f"{name}_C"] = [f"{x:.2f}" for x in noisy]
    header = (
        "# Osterby Hollow Cannery (an invented plant): heat penetration test, garden peas in "
        "brine,\n# 74 x 113 mm can, still steam retort R3. INVENTED DEMO DATA, not a real test.\n"
        "# Written by demo_cases/heat_penetration/generate.py (heating-curve model + 0.1 °C "
        "noise):\n# " + "; ".join(f"{n} fh {v[0]} jh {v[1]} fc {v[2]} jc {v[3]}"
                                  for n, v in THERMOCOUPLES.items()) + "\n"
    )
    rows = [",".join(columns)] + [",".join(col[i] for col in columns.values())
                                  for i in range(t.size)]
    out.write_text(header + "\n".join(rows) + "\n", encoding="utf-8")
    print(f"wrote {out} ({t.size} rows)")


if __name__ == "__main__":
    main()
