"""Calibrate every thermocouple of a heat penetration test and pick the slowest-heating one."""

from __future__ import annotations

import numpy as np

from deviation.errors import ModelError
from deviation.physics.calibration.least_squares import least_squares_fit
from deviation.physics.calibration.results import (
    ContainerGeometry,
    FitReport,
    HeatPenData,
    ThermocoupleFit,
)
from deviation.physics.calibration.semilog import (
    retort_phases,
    semilog_broken_fit,
    semilog_cooling_fit,
    semilog_fit,
)
from deviation.physics.lethality import general_method

#: F0 reference (21 CFR 113 practice: 121.1 °C, z 10 °C) for the measured F0 of each thermocouple.
_TREF_C, _Z_C = 121.1, 10.0


def fit_all(
    data: HeatPenData,
    *,
    come_up_min: float | None = None,
    initial_C: float | None = None,
    container: ContainerGeometry | None = None,
) -> FitReport:
    """Fit every thermocouple of a heat penetration test by both methods; choose the slowest.

    For each thermocouple: Ball's semi-log heating fit (:func:`semilog_fit`) and, where the
    readings show a break, the broken-curve fit (:func:`semilog_broken_fit`), the cooling fit
    where the record has a cooling phase (:func:`semilog_cooling_fit`), least squares of the
    heating-curve model (and of the conduction model when ``container`` is given) to the actual
    retort record (:func:`least_squares_fit`), the thermal diffusivity from the semi-log fh
    (Olson & Jackson [3]) and the F0 of the thermocouple's own readings (General Method).

    The slowest-heating thermocouple chosen is the one with the **largest semi-log fh**; the one
    with the lowest measured F0 is reported beside it (it depends on jh and on the test's own
    cycle, not only on the product).

    Parameters
    ----------
    data : HeatPenData
        The test
    come_up_min : float, optional
        Come-up time [min] (default: read from the retort column, :func:`retort_phases`)
    initial_C : float, optional
        Initial temperature for every thermocouple [°C] (default: each one's first reading)
    container : ContainerGeometry, optional
        Inside dimensions, for the diffusivity and the conduction model

    Returns
    -------
    FitReport

    Raises
    ------
    ModelError
        When no thermocouple can be fitted by the semi-log method (each one's reason given).
    """
    phases = retort_phases(data.time_min, data.retort_C)
    detected = come_up_min is None
    come_up = phases.come_up_min if detected else float(come_up_min)
    fits: list[ThermocoupleFit] = []
    for name, readings in data.thermocouples.items():
        keep = np.isfinite(readings)
        t, T = data.time_min[keep], readings[keep]
        IT = float(T[0]) if initial_C is None else float(initial_C)
        problems: list[str] = []
        F0 = general_method(t, T, _TREF_C, _Z_C)[0]

        def attempt(what, fn):
            try:
                return fn()
            except ModelError as exc:
                problems.append(f"{what}: {exc}")
                return None

        semi = attempt("semi-log heating", lambda: semilog_fit(
            t, T, phases.plateau_C, come_up_min=come_up, initial_C=IT,
            steam_off_min=phases.steam_off_min))
        broken = attempt("semi-log broken heating", lambda: semilog_broken_fit(
            t, T, phases.plateau_C, come_up_min=come_up, initial_C=IT,
            steam_off_min=phases.steam_off_min))
        if broken is not None and broken.fh2_min is None:
            broken = None  # one straight line: the plain semi-log fit says it all
        cool = None
        if phases.steam_off_min is not None:
            cool = attempt("semi-log cooling", lambda: semilog_cooling_fit(
                t, T, data.retort_C, steam_off_min=phases.steam_off_min,
                cooling_water_C=phases.cooling_water_C))
        guess = {}
        if semi is not None:
            guess.update(fh_min=semi.fh_min, jh=semi.jh)
        if cool is not None:
            guess.update(fc_min=cool.fc_min, jc=cool.jc)
        hc = attempt("least squares (heating-curve)", lambda: least_squares_fit(
            t, T, data.time_min, data.retort_C, initial_C=IT, model="heating-curve",
            cooling_start_min=phases.steam_off_min, guess=guess))
        cond = alpha = None
        if container is not None:
            if semi is not None:
                alpha = attempt("diffusivity from fh",
                                lambda: container.diffusivity_from_fh(semi.fh_min))
            cguess = {"thermal_diffusivity_m2_s": alpha} if alpha else {}
            cond = attempt("least squares (conduction)", lambda: least_squares_fit(
                t, T, data.time_min, data.retort_C, initial_C=IT, model="conduction",
                geometry=container, guess=cguess))
        fits.append(ThermocoupleFit(name, IT, float(F0), semi, cool, hc, cond, alpha, problems, broken))

    fitted = [f for f in fits if f.semilog is not None]
    if not fitted:
        reasons = "; ".join(f"{f.name}: {' / '.join(f.problems)}" for f in fits)
        raise ModelError(f"no thermocouple could be fitted ({reasons})", source=data.source)
    chosen = max(fitted, key=lambda f: (f.semilog.fh_min, f.semilog.jh)).name
    lowest = min(fits, key=lambda f: f.measured_F0_min).name
    return FitReport(
        source=data.source, sha256=data.sha256, phases=phases, come_up_min=come_up,
        come_up_detected=detected, container=container, thermocouples=fits, chosen=chosen,
        lowest_F0=lowest,
    )


