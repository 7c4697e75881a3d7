"""Least squares of the model response to the actual retort record: the parameters that make
this tool's own cold-spot model reproduce a heat penetration test (``scipy.optimize.least_squares``)."""

from __future__ import annotations

import functools
import math

import numpy as np
from scipy.optimize import least_squares

from deviation.errors import ModelError
from deviation.physics.calibration.results import ContainerGeometry, ModelFit
from deviation.physics.calibration.semilog import _COARSEST_STEP_MIN, _FINEST_STEP_MIN, _valid
from deviation.physics.heating.heating_curve import step_unaccomplished
from deviation.physics.heating.superposition import superpose


def least_squares_fit(
    time_min,
    temperature_C,
    retort_time_min,
    retort_C,
    *,
    initial_C: float,
    model: str = "heating-curve",
    geometry: ContainerGeometry | None = None,
    cooling_start_min: float | None = None,
    guess: dict[str, float] | None = None,
) -> ModelFit:
    """Fit a cold-spot model's response to the actual retort record, by least squares.

    Method: the model's step response is superposed over the retort record (Duhamel's theorem,
    Carslaw & Jaeger [4]; see :func:`deviation.physics.heating.superposition.superpose`) and its
    parameters are adjusted by ``scipy.optimize.least_squares`` (trust-region reflective) to
    minimise the squared differences from the thermocouple readings. Parameters are fitted as
    logarithms (all positive); standard errors come from the Jacobian at the solution,
    ``cov = s² (JᵀJ)⁻¹`` with ``s² = Σr²/(n - p)``, carried to the parameters to first order.

    - ``model="heating-curve"``: Ball's step response ``min(1, jh 10^(-t/fh))``
      (:func:`deviation.physics.heating.heating_curve.step_unaccomplished`); with ``cooling_start_min``
      retort changes from then on answer with ``(fc, jc)``, fitted too, as the evaluation does.
    - ``model="conduction"``: the centre series of the container (``geometry`` needed), one
      parameter, the thermal diffusivity; the equivalent fh is reported with it.

    Parameters
    ----------
    time_min : array_like
        Thermocouple reading times from steam on [min]
    temperature_C : array_like
        Thermocouple readings [°C]; NaN readings are skipped
    retort_time_min : array_like
        Retort record times from steam on, increasing [min]
    retort_C : array_like
        Retort record [°C]
    initial_C : float
        Uniform initial product temperature [°C]
    model : {"heating-curve", "conduction"}
        Model whose response is fitted
    geometry : ContainerGeometry, optional
        Container dimensions (needed for ``"conduction"``)
    cooling_start_min : float, optional
        Steam off [min], for the heating-curve model's cooling parameters
    guess : dict, optional
        Starting values (``fh_min``, ``jh``, ``fc_min``, ``jc``, ``thermal_diffusivity_m2_s``)

    Returns
    -------
    ModelFit

    References
    ----------
    .. [1] Ball, *Bull. Natl. Res. Counc.* 7, part 1, no. 37 (1923).
    .. [4] Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959.
    """
    t, T = _valid(time_min, temperature_C)
    rt = np.asarray(retort_time_min, dtype=float)
    rT = np.asarray(retort_C, dtype=float)
    if rt.ndim != 1 or rT.shape != rt.shape or rt.size < 2 or np.any(np.diff(rt) <= 0.0):
        raise ModelError("retort record: expected increasing times and temperatures of the same "
                         "length, 2 or more")
    IT = float(initial_C)
    guess = dict(guess or {})
    rt0 = rt - rt[0]
    step = min(max(float(np.median(np.diff(rt0))), _FINEST_STEP_MIN), _COARSEST_STEP_MIN)
    # The record on a uniform grid from 0, straight lines between readings (the superposition's
    # own assumption); a final partial step is dropped.
    grid = np.arange(int(np.floor(rt0[-1] / step + 1e-9)) + 1) * step
    retort_grid = np.interp(grid, rt0, rT)
    t_rel = t - rt[0]

    if model == "heating-curve":
        names = ["fh_min", "jh"]
        x0 = [guess.get("fh_min", max(float(rt0[-1]) / 4.0, 1.0)), guess.get("jh", 1.5)]
        cooling_kw = {}
        if cooling_start_min is not None:
            names += ["fc_min", "jc"]
            x0 += [guess.get("fc_min", x0[0]), guess.get("jc", 1.4)]
            # steam off snapped down to the grid, as the evaluation does it
            start = math.floor((float(cooling_start_min) - rt[0]) / step + 1e-9) * step
            cooling_kw = {"cooling_start_min": start}

        def predict(x):
            heat = functools.partial(step_unaccomplished, fh_min=x[0], jh=x[1])
            kw = dict(cooling_kw)
            if kw:
                kw["cooling_unaccomplished"] = functools.partial(step_unaccomplished,
                                                                 fh_min=x[2], jh=x[3])
            return superpose(grid, retort_grid, IT, heat, **kw)
    elif model == "conduction":
        if geometry is None:
            raise ModelError("model 'conduction' needs the container dimensions")
        names = ["thermal_diffusivity_m2_s"]
        x0 = [guess.get("thermal_diffusivity_m2_s", 1.5e-7)]

        def predict(x):
            return superpose(grid, retort_grid, IT, geometry.unaccomplished(x[0]))
    else:
        raise ModelError(f"model {model!r}; expected 'heating-curve' or 'conduction'")

    if t.size <= len(names):
        raise ModelError(f"{t.size} readings for {len(names)} parameters; expected more readings")

    def residuals(log_x):
        return np.interp(t_rel, grid, predict(np.exp(log_x))) - T

    log_x0 = np.log(np.asarray(x0, dtype=float))
    result = least_squares(residuals, log_x0, method="trf", x_scale=1.0, xtol=1e-10,
                           ftol=1e-12, gtol=1e-12, max_nfev=400)
    x = np.exp(result.x)
    n, p = t.size, len(names)
    rss = float(np.sum(result.fun**2))
    s2 = rss / (n - p)
    jac = result.jac
    cov_log = s2 * np.linalg.pinv(jac.T @ jac)
    se_log = np.sqrt(np.clip(np.diag(cov_log), 0.0, None))
    parameters = {name: float(v) for name, v in zip(names, x)}
    errors = {name: float(v * s) for name, v, s in zip(names, x, se_log)}
    if model == "conduction":
        fh = geometry.fh_from_diffusivity(parameters["thermal_diffusivity_m2_s"])
        parameters["fh_min"] = fh
        errors["fh_min"] = fh * float(se_log[0])  # fh ∝ 1/α: same relative error
    return ModelFit(
        model=model,
        parameters=parameters,
        standard_errors=errors,
        rms_residual_C=math.sqrt(rss / n),
        n_points=n,
        converged=bool(result.success),
        message=str(result.message),
    )
