"""Checks a process authority makes before trusting a model's figures, as flags.

- **Model vs filed** (either way): the model's F for the filed cycle against the filed target.
  A model that does not reproduce the filed process cannot be trusted on the deviation; the
  relative evaluation (delivered F x target / scheduled F) cancels its own error.
- **Ball's formula** for the filed cycle (Ball 1923; Stumbo 1973), the independent figure a
  process authority computes by hand, beside the model's.
- **jh against theory** for the conduction models: the shape's theoretical centre jh at the
  filed surface coefficient (Carslaw & Jaeger).
- **Nothing silently dropped**: a filed parameter the chosen model does not use is said.
- **Surface heat transfer**: a retort whose medium is water or a steam-air mixture gives the
  surface a finite coefficient; a conduction model with none filed says what it assumed.
- **Instruments** (21 CFR 113.40): the temperature-indicating device is the reference; where
  the recorder reads above it, the evaluation takes the recorder lowered by the largest excess.

Each tolerance comes from the rule set's ``[settings]`` (a plant or process authority may
change it there, never in code).
"""

from __future__ import annotations

import functools
import math
from dataclasses import replace

import numpy as np

from deviation.evaluate.cold_spot import ColdSpotModel
from deviation.evaluate.output import FlagOut
from deviation.inputs import logs as prof
from deviation.inputs.case import Process
from deviation.physics import ball_formula
from deviation.physics.heating import conduction

# Words in a free-text retort type that name a medium with a finite surface coefficient
# (21 CFR 113.40(b) water immersion; "other systems": water spray, steam-air).
_FINITE_SURFACE_WORDS = ("water", "spray", "steam-air", "steam/air", "steam air", "immersion", "cascade")
# The recorder may read below the indicating device by this much without a flag [°C]: the
# resolution to which either is read (common practice, 0.1 °C).
_INSTRUMENT_RESOLUTION_C = 0.1


def _flag(code: str, message: str, **kw) -> FlagOut:
    return FlagOut(code=code, message=message, **kw)


def model_vs_filed(scheduled_F: float, target_F: float, tolerance: float, z_label: str) -> list[FlagOut]:
    """``model-vs-filed`` when the model's filed-cycle F is outside target x (1 +- tolerance)."""
    ratio = scheduled_F / target_F
    if abs(ratio - 1.0) <= tolerance + 1e-12:
        return []
    side = "above" if ratio > 1.0 else "below"
    use = ("the figure the guidance stands on is the relative F (delivered x target / scheduled), "
           "which cancels the model's own error" if ratio > 1.0 else
           "the lethality computed here is not fully established")
    return [_flag("model-vs-filed",
                  f"The model gives {z_label} {scheduled_F:.2f} min for the filed process as scheduled, "
                  f"{abs(ratio - 1.0) * 100:.0f} % {side} the filed target {target_F:.2f} min (tolerance "
                  f"±{tolerance * 100:.0f} %): it does not reproduce the filed process; {use}. The "
                  "process authority checks the heat-penetration parameters.",
                  value=scheduled_F)]


def _theoretical_jh(process: Process, model: ColdSpotModel) -> float | None:
    box = process.container
    if box.shape == "cylinder":
        return conduction.theoretical_centre_jh_cylinder(
            box.diameter_mm / 2000.0, box.height_mm / 1000.0, h_over_k_per_m=model.h_over_k_per_m)
    return conduction.theoretical_centre_jh_brick(
        box.length_mm / 1000.0, box.width_mm / 1000.0, box.thickness_mm / 1000.0,
        h_over_k_per_m=model.h_over_k_per_m)


@functools.lru_cache(maxsize=128)
def _ball_cached(process_json: str, fh_min: float, jh: float) -> float:
    process = Process.model_validate_json(process_json)
    hp = process.heat_penetration
    broken = ({"fh2_min": hp.fh2_min, "break_time_min": hp.break_min}
              if hp.model == "heating-curve" and hp.fh2_min is not None else {})
    return ball_formula.ball_formula(
        fh_min, jh, process.minimum_initial_temperature_C, process.process_temperature_C,
        process.process_time_min, process.come_up_time_min, z_C=process.z_C,
        reference_temperature_C=process.reference_temperature_C,
        m_plus_g_C=process.process_temperature_C - process.cooling_water_temperature_C, **broken).F_min


def ball_formula_F(process: Process, model: ColdSpotModel) -> tuple[float | None, float | None]:
    """Ball's formula F [min] for the filed cycle, and the jh it used (None where it cannot apply).

    fh and jh as filed (heating-curve model), or for the conduction models fh from the model and
    jh as filed, else the shape's theoretical centre jh. A broken heating curve with Ball's
    broken-curve formula (fh to the break, fh2 after it and in cooling).
    """
    hp = process.heat_penetration
    jh = hp.jh if hp.jh is not None else (_theoretical_jh(process, model) if model.name != "heating-curve" else None)
    if jh is None or not (process.process_temperature_C - process.cooling_water_temperature_C) > 0.0:
        return None, None
    return _ball_cached(process.model_dump_json(), float(model.fh_min), float(jh)), float(jh)


def ball_flags(ball_F: float | None, jh: float | None, scheduled_F: float, tolerance: float,
               model: ColdSpotModel) -> list[FlagOut]:
    """``ball-formula-differs`` when the model's filed-cycle F and Ball's formula disagree."""
    if ball_F is None or ball_F <= 0.0:
        return []
    ratio = scheduled_F / ball_F
    if abs(ratio - 1.0) <= tolerance + 1e-12:
        return []
    why = (" Ball's formula fixes the cooling lag at 1.41 (fc = fh), so a conduction-heated centre, "
           "which keeps heating after steam off, gets more cooling lethality from the model than from "
           "the formula." if model.name != "heating-curve" and ratio > 1.0 else "")
    return [_flag("ball-formula-differs",
                  f"For the filed cycle the model gives {scheduled_F:.2f} min and Ball's formula "
                  f"{ball_F:.2f} min (fh {model.fh_min:.1f} min, jh {jh:.2f}): they differ by "
                  f"{abs(ratio - 1.0) * 100:.0f} %, more than ±{tolerance * 100:.0f} %.{why} The process "
                  "authority compares the two.", value=ball_F)]


def parameter_flags(process: Process, model: ColdSpotModel, jh_tolerance: float) -> list[FlagOut]:
    """Filed parameters the model does not use, and a filed jh far from the shape's theory."""
    hp = process.heat_penetration
    out = []
    if model.name in ("conduction", "finite-difference"):
        unused = [k for k in ("fc_min", "jc") if getattr(hp, k) is not None]
        if unused:
            out.append(_flag("parameter-not-used",
                             f"{' and '.join(unused)} filed but not used: the {model.name} model computes "
                             "cooling from the thermal diffusivity and the container; the filed cooling "
                             "parameters are not checked against it."))
        if hp.jh is not None:
            theory = _theoretical_jh(process, model)
            if theory and abs(hp.jh / theory - 1.0) > jh_tolerance:
                out.append(_flag("jh-differs-from-theory",
                                 f"The filed jh {hp.jh:.2f} is {abs(hp.jh / theory - 1.0) * 100:.0f} % from "
                                 f"the theoretical centre jh {theory:.2f} of this {process.container.shape} "
                                 f"(tolerance ±{jh_tolerance * 100:.0f} %): the cold spot may not be at the "
                                 "centre, or the product may not heat by conduction alone; the process "
                                 "authority checks the heat-penetration data.", value=hp.jh))
    elif hp.thermal_diffusivity_m2_s is not None:
        out.append(_flag("parameter-not-used",
                         "thermal_diffusivity_m2_s filed but not used: the heating-curve model runs on fh "
                         "and jh (and fc, jc)."))
    return out


def surface_flags(process: Process, model: ColdSpotModel) -> list[FlagOut]:
    """What a conduction model assumed of the surface in a water or steam-air retort."""
    if model.name == "heating-curve" or model.h_over_k_per_m is not None:
        return []
    kind = process.retort_type.lower()
    if not any(word in kind for word in _FINITE_SURFACE_WORDS):
        return []
    return [_flag("surface-heat-transfer-assumed",
                  f"Retort type '{process.retort_type}': the surface heat transfer coefficient of the "
                  "heating medium is finite, but none is filed (surface_heat_transfer_W_m2K with "
                  "thermal_conductivity_W_mK), so the model holds the container surface at the retort "
                  "temperature. A filed fh measured in this retort already holds the surface's effect; "
                  "a diffusivity alone does not, and then the computed lethality is too high.")]


def lower_instrument(profile: prof.RetortProfile) -> tuple[prof.RetortProfile, list[FlagOut]]:
    """The record on the lower of the two instruments (21 CFR 113.40: the indicating device is the
    reference and the recorder is never to read above it).

    Where the recorder reads above the indicating device the whole recorder trace is lowered by
    the largest excess found (a recorder that reads high once is not trusted to read low
    elsewhere), and the flag ``recorder-above-indicating`` names it.
    """
    indicating = profile.indicating_C
    plain = replace(profile, indicating_C=None)
    if indicating is None or not np.any(np.isfinite(indicating)):
        return plain, []
    have = np.isfinite(indicating)
    excess = np.where(have, profile.temperature_C - np.where(have, indicating, 0.0), -math.inf)
    worst = int(np.argmax(excess))
    if not excess[worst] > _INSTRUMENT_RESOLUTION_C:
        return plain, []
    shift = float(excess[worst])
    lowered = replace(plain, temperature_C=profile.temperature_C - shift,
                      source=profile.source + f" (recorder lowered {shift:.1f} °C)")
    t = float(profile.time_min[worst])
    return lowered, [_flag(
        "recorder-above-indicating",
        f"The recorder read {profile.temperature_C[worst]:.1f} °C at {t:.1f} min where the "
        f"temperature-indicating device read {indicating[worst]:.1f} °C: {shift:.1f} °C above the "
        "reference instrument. The evaluation takes the whole recorder trace lowered by that much; the "
        "recorder must be adjusted to agree with, and never read above, the indicating device "
        "(21 CFR 113.40).", start_min=t, value=shift)]


__all__ = ["ball_flags", "ball_formula_F", "lower_instrument", "model_vs_filed", "parameter_flags",
           "surface_flags"]
