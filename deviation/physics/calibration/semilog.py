"""Ball's semi-logarithmic method: fh, jh from the heating curve and fc, jc from the cooling curve
of one thermocouple, with the straight-line portion found automatically.

On ``log10(T_R - T)`` against time the heating curve becomes, after a lag, a straight line of
slope ``-1/fh``; its value at the corrected zero (58% of the come-up: Ball's 42% rule, the
come-up counted 42% effective) gives the pseudo-initial temperature ``Tpih`` and
``jh = (T_R - Tpih)/(T_R - IT)``. Cooling: the same on ``log10(T - Tw)`` after steam off, zero
at steam off, giving ``fc`` and ``jc = (Tw - Tpic)/(Tw - Tic)``.

References
----------
.. [1] C. O. Ball, "Thermal process time for canned food", *Bulletin of the National Research
   Council* 7, part 1, no. 37 (1923).
.. [2] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., Academic Press, 1973.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from deviation.errors import ModelError
from deviation.physics.calibration.results import (
    BrokenHeatingCurveFit,
    CoolingCurveFit,
    HeatingCurveFit,
    RetortPhases,
)

__all__ = [
    "CORRECTED_ZERO_FRACTION",
    "retort_phases",
    "semilog_broken_fit",
    "semilog_cooling_fit",
    "semilog_fit",
]

#: Ball's corrected zero as a fraction of the come-up time (the come-up counted 42% effective,
#: Ball 1923 [1]).
CORRECTED_ZERO_FRACTION = 0.58
#: A retort reading within this of the hold plateau is "at the plateau" [°C] (common practice).
PLATEAU_TOLERANCE_C = 0.5
#: Readings within this of the top of the record are used for the plateau's median [°C].
_PLATEAU_BAND_C = 1.0
#: A cooling phase needs the retort to fall at least this far below the plateau [°C].
_COOLING_DROP_C = 10.0
#: Points with ``T_R - T`` (or ``T - Tw``) below this are left out of the semi-log fit: near the
#: end the logarithm magnifies the thermocouple's noise and resolution [°C] (common practice).
DEFAULT_MIN_DIFFERENCE_C = 1.0
#: A window is straight when no residual exceeds this many noise standard deviations.
_STRAIGHT_SIGMAS = 4.0
#: ... and never asked to be straighter than this fraction of ``T_R - T`` (exact synthetic data
#: has no noise; 0.1% is far finer than a line drawn on semi-log paper).
_STRAIGHT_RELATIVE = 1e-3
#: A window's curvature is significant beyond this many standard errors ...
_CURVATURE_SIGMAS = 3.0
#: ... unless it changes the slope across the window by less than this fraction.
_SLOPE_CHANGE = 2e-3
#: Fewest points in a straight-line window.
_MIN_WINDOW_POINTS = 5
#: Broken heating curve: a first line must cover at least this many log cycles of ``T_R - T``
#: (this module's choice: a piece of the lag that happens to look straight covers far less) ...
_MIN_FIRST_LINE_DECADES = 0.1
#: ... its slope must differ from the second line's by more than this many standard errors ...
_BREAK_SIGMAS = 3.0
#: ... and by more than this fraction of the second line's slope.
_MIN_SLOPE_CHANGE = 0.05
#: The search for the first line tries at most this many window ends, on at most this many
#: readings (a longer record is thinned for the search only; the line is fitted on all).
_MAX_FIRST_LINE_ENDS = 80
_MAX_SEARCH_POINTS = 400


# --------------------------------------------------------------------------------------------
# Data
# --------------------------------------------------------------------------------------------


# --------------------------------------------------------------------------------------------
# Reading the CSV
# --------------------------------------------------------------------------------------------


# --------------------------------------------------------------------------------------------
# Retort phases
# --------------------------------------------------------------------------------------------


def retort_phases(time_min, retort_C) -> RetortPhases:
    """Hold plateau, come-up, steam off and cooling water temperature from a retort record.

    Method (common practice): the plateau is the median of the readings within 1 °C of the
    highest; the come-up ends at the first reading within 0.5 °C of the plateau; steam off is
    the last such reading, when the retort then falls at least 10 °C; the cooling water
    temperature is the median retort reading over the last quarter (in time) of the cooling
    phase.

    Parameters
    ----------
    time_min : array_like
        Times, increasing [min]
    retort_C : array_like
        Retort temperature [°C]

    Returns
    -------
    RetortPhases
    """
    t = np.asarray(time_min, dtype=float)
    T = np.asarray(retort_C, dtype=float)
    if t.ndim != 1 or T.shape != t.shape or t.size < 2:
        raise ModelError("retort record: expected two 1-D arrays of the same length, 2 or more")
    top = float(T.max())
    plateau = float(np.median(T[T >= top - _PLATEAU_BAND_C]))
    at = np.flatnonzero(T >= plateau - PLATEAU_TOLERANCE_C)
    come_up = float(t[at[0]] - t[0])
    last = int(at[-1])
    steam_off = cooling_water = None
    if last < t.size - 1 and T[last + 1:].min() <= plateau - _COOLING_DROP_C:
        steam_off = float(t[last])
        t_cool = t[last + 1:]
        quarter = t_cool >= t_cool[-1] - 0.25 * (t_cool[-1] - steam_off)
        cooling_water = float(np.median(T[last + 1:][quarter]))
    return RetortPhases(plateau, come_up, steam_off, cooling_water)


# --------------------------------------------------------------------------------------------
# Ball's semi-logarithmic method
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Line:
    intercept: float  # log10 difference at t = 0
    slope: float  # per minute
    start: int
    r_squared: float
    rms_C: float
    noise_estimate_C: float
    note: str


def _weighted_suffix_lines(t: np.ndarray, y: np.ndarray, w: np.ndarray):
    """Weighted least-squares line through every suffix ``[i:]`` at once (suffix sums)."""
    def suffix(a):
        return np.cumsum(a[::-1])[::-1]
    sw, swt, swy = suffix(w), suffix(w * t), suffix(w * y)
    swtt, swty = suffix(w * t * t), suffix(w * t * y)
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = (sw * swty - swt * swy) / (sw * swtt - swt**2)
        intercept = (swy - slope * swt) / sw
    return intercept, slope


def _weighted_suffix_quadratic_curvature(t, y, w, scale):
    """Quadratic coefficient of the weighted fit ``y = c0 + c1 t + c2 t²`` on every suffix, and
    the factor giving its standard error, ``se(c2) = scale · sqrt(factor)`` (batched 3x3
    normal equations from suffix sums)."""
    def suffix(a):
        return np.cumsum(a[::-1])[::-1]
    tc = t - t[-1]  # centred on the last point: better conditioned sums
    m = [suffix(w * tc**k) for k in range(5)]
    v = [suffix(w * tc**k * y) for k in range(3)]
    normal = np.stack([np.stack([m[i + j] for j in range(3)], axis=-1) for i in range(3)],
                      axis=-2)
    rhs = np.stack(v, axis=-1)
    c2 = np.full(t.size, np.nan)
    factor = np.full(t.size, np.nan)
    good = np.arange(t.size) <= t.size - 4  # a quadratic needs 3 points, its error a 4th
    with np.errstate(invalid="ignore", divide="ignore"):
        inverse = np.linalg.pinv(normal[good])
        c2[good] = np.einsum("nij,nj->ni", inverse, rhs[good])[:, 2]
        factor[good] = inverse[:, 2, 2]
    return c2, factor * scale**2


def _straight_tail(t: np.ndarray, d: np.ndarray, noise_C: float | None) -> _Line:
    """The longest window ending at the last point on which ``log10 d`` is a straight line.

    Weighted least squares with weights ``d²``: a thermocouple's noise is constant in °C, so the
    variance of ``log10 d`` goes as ``1/d²`` and each reading then counts equally in °C. A window
    is straight when both

    - its curvature is not significant: the quadratic term of a weighted quadratic fit is within
      3 standard errors of 0, or changes the slope across the window by less than 0.2%;
    - no reading departs from its line by more than ``4 σ`` (or 0.1% of ``d``),

    ``σ`` the noise: given, or the RMS departure over the last half of the points (the tail is
    straight after the lag: first-term behaviour of the series [4]).
    """
    n = t.size
    if n < _MIN_WINDOW_POINTS:
        raise ModelError(
            f"only {n} readings usable for the semi-log line; expected at least "
            f"{_MIN_WINDOW_POINTS}"
        )
    y = np.log10(d)
    w = d * d
    a, b = _weighted_suffix_lines(t, y, w)
    # departures in °C of every point k >= i from the line of window i (n x n, n ~ hundreds)
    with np.errstate(invalid="ignore", over="ignore"):  # the one-point suffix has no line
        fitted = np.power(10.0, a[:, None] + b[:, None] * t[None, :])
    departure = np.abs(d[None, :] - fitted)
    upper = np.triu(np.ones((n, n), dtype=bool))
    departure = np.where(upper, departure, 0.0)
    half = max(0, min(n // 2, n - _MIN_WINDOW_POINTS))
    if noise_C is None:
        m = n - half
        sigma = math.sqrt(float(np.sum(departure[half, half:] ** 2)) / max(m - 2, 1))
    else:
        sigma = float(noise_C)
    # the relative floor keeps exact (noise-free) data honest at both ends of the window
    allowed = np.maximum(_STRAIGHT_SIGMAS * sigma, _STRAIGHT_RELATIVE * d)
    close = np.all(departure <= allowed[None, :], axis=1)
    # var(log10 d) = (σ / (d ln10))²: with weights d² the covariance scale is σ / ln10
    c2, var_c2 = _weighted_suffix_quadratic_curvature(t, y, w, sigma / math.log(10.0))
    span = t[-1] - t
    with np.errstate(invalid="ignore"):
        flat = (np.abs(c2) <= _CURVATURE_SIGMAS * np.sqrt(var_c2)) | (
            2.0 * np.abs(c2) * span <= _SLOPE_CHANGE * np.abs(b))
    ok = close & flat & (np.arange(n) <= n - _MIN_WINDOW_POINTS) & np.isfinite(b)
    note = ""
    if ok.any():
        i = int(np.argmax(ok))
    else:
        i = half
        note = (f"no window is straight to within the noise ({sigma:.3f} °C); the last half of "
                "the readings was used")
    r = d[i:] - fitted[i, i:]
    yi, wi = y[i:], w[i:]
    ybar = np.sum(wi * yi) / np.sum(wi)
    ss_res = np.sum(wi * (yi - (a[i] + b[i] * t[i:])) ** 2)
    ss_tot = np.sum(wi * (yi - ybar) ** 2)
    r2 = float(1.0 - ss_res / ss_tot) if ss_tot > 0 else float("nan")
    return _Line(float(a[i]), float(b[i]), i, r2, float(np.sqrt(np.mean(r**2))), sigma, note)


def _cut_at_small(diff: np.ndarray, min_difference_C: float) -> int:
    below = np.flatnonzero(diff < min_difference_C)
    return int(below[0]) if below.size else diff.size


def _valid(time_min, temperature_C) -> tuple[np.ndarray, np.ndarray]:
    t = np.asarray(time_min, dtype=float)
    T = np.asarray(temperature_C, dtype=float)
    if t.ndim != 1 or T.shape != t.shape:
        raise ModelError(
            f"time_min and temperature_C have shapes {t.shape} and {T.shape}; expected two 1-D "
            "arrays of the same length"
        )
    keep = np.isfinite(T) & np.isfinite(t)
    return t[keep], T[keep]


def _heating_readings(time_min, temperature_C, retort_C, come_up_min, initial_C, steam_off_min,
                      min_difference_C):
    """Retort and initial temperature, come-up, and the hold readings as ``T_R - T``.

    Returns ``(TR, IT, come_up, t_h, d_h, end)``: readings from the end of the come-up to steam
    off, ``d_h = TR - T``, the first ``end`` of them above ``min_difference_C``.
    """
    t, T = _valid(time_min, temperature_C)
    if t.size == 0:
        raise ModelError("no readings; expected thermocouple readings [°C]")
    come_up = float(come_up_min)
    if not (math.isfinite(come_up) and come_up >= 0.0):
        raise ModelError(f"come_up_min = {come_up_min!r}; expected a time >= 0 [min]")
    if np.ndim(retort_C) == 0:
        TR = float(retort_C)
        off = steam_off_min
    else:
        phases = retort_phases(time_min, retort_C)
        TR = phases.plateau_C
        off = phases.steam_off_min if steam_off_min is None else steam_off_min
    IT = float(T[0]) if initial_C is None else float(initial_C)
    if not TR - IT > min_difference_C:
        raise ModelError(
            f"retort temperature {TR:.2f} °C is not above the initial temperature {IT:.2f} °C; "
            "expected a heating test"
        )
    hold = t >= come_up - 1e-9
    if off is not None:
        hold &= t <= off + 1e-9
    t_h, d_h = t[hold], TR - T[hold]
    end = _cut_at_small(d_h, min_difference_C)
    return TR, IT, come_up, t_h, d_h, end


def semilog_fit(
    time_min,
    temperature_C,
    retort_C,
    *,
    come_up_min: float,
    initial_C: float | None = None,
    steam_off_min: float | None = None,
    min_difference_C: float = DEFAULT_MIN_DIFFERENCE_C,
    noise_C: float | None = None,
) -> HeatingCurveFit:
    """fh and jh of a heat penetration curve by Ball's semi-logarithmic method.

    Method: Ball's formula-method heating curve (Ball 1923 [1]; Stumbo 1973 [2], ch. 9 from
    memory). On ``log10(T_R - T)`` against time, the straight-line portion after the lag is
    found automatically: the longest window ending at the last usable reading whose weighted
    line departs from no reading by more than 4 noise standard deviations (or 0.1% of
    ``T_R - T``).
    ``fh = -1/slope``; the corrected zero is ``t0 = 0.58 · come_up`` (the come-up counted 42%
    effective, [1]); ``Tpih`` is the line's temperature at ``t0`` and
    ``jh = (T_R - Tpih)/(T_R - IT)``.

    Parameters
    ----------
    time_min : array_like
        Reading times from steam on [min]
    temperature_C : array_like
        Thermocouple readings [°C]; NaN readings are skipped
    retort_C : float or array_like
        Retort temperature during the hold [°C], or the retort record on ``time_min`` (the
        plateau and steam off are then read from it, see :func:`retort_phases`)
    come_up_min : float
        Come-up time, steam on to process temperature [min]
    initial_C : float, optional
        Initial temperature IT [°C] (default: the first reading)
    steam_off_min : float, optional
        Readings after this are cooling and left out [min] (default: from the retort record if
        one is given, else none left out)
    min_difference_C : float, optional
        Readings from the first with ``T_R - T`` below this are left out [°C] (default 1.0)
    noise_C : float, optional
        Thermocouple noise standard deviation [°C] (default: estimated from the tail)

    Returns
    -------
    HeatingCurveFit

    Raises
    ------
    ModelError
        Fewer than 5 usable readings in the hold, or a line that does not fall.

    References
    ----------
    .. [1] Ball, *Bull. Natl. Res. Counc.* 7, part 1, no. 37 (1923).
    .. [2] Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., 1973.
    """
    TR, IT, come_up, t_h, d_h, end = _heating_readings(
        time_min, temperature_C, retort_C, come_up_min, initial_C, steam_off_min,
        min_difference_C)
    line = _straight_tail(t_h[:end], d_h[:end], noise_C)
    if not line.slope < 0.0:
        raise ModelError(
            f"the semi-log line does not fall (slope {line.slope:.3g} per min); expected the "
            "thermocouple to approach the retort temperature"
        )
    t0 = CORRECTED_ZERO_FRACTION * come_up
    d0 = 10.0 ** (line.intercept + line.slope * t0)
    return HeatingCurveFit(
        fh_min=-1.0 / line.slope,
        jh=d0 / (TR - IT),
        retort_C=TR,
        initial_C=IT,
        come_up_min=come_up,
        corrected_zero_min=t0,
        pseudo_initial_C=TR - d0,
        r_squared=line.r_squared,
        rms_residual_C=line.rms_C,
        window_start_min=float(t_h[line.start]),
        window_end_min=float(t_h[end - 1]),
        n_points=int(end - line.start),
        noise_estimate_C=line.noise_estimate_C,
        note=line.note,
    )


def _weighted_line(t: np.ndarray, d: np.ndarray, noise_C: float):
    """Weighted (``d²``) line through ``log10 d``: intercept, slope, standard error of the slope
    for a thermocouple noise ``noise_C`` [°C], R² and RMS departure [°C]."""
    y, w = np.log10(d), d * d
    tm = np.sum(w * t) / np.sum(w)
    ym = np.sum(w * y) / np.sum(w)
    sxx = np.sum(w * (t - tm) ** 2)
    slope = float(np.sum(w * (t - tm) * (y - ym)) / sxx)
    intercept = float(ym - slope * tm)
    se = (noise_C / math.log(10.0)) / math.sqrt(sxx) if sxx > 0 else math.inf
    return intercept, slope, se, *_window_stats(t, d, intercept + slope * t)


def _window_stats(t: np.ndarray, d: np.ndarray, fitted_log10: np.ndarray):
    """Weighted R² on ``log10 d`` and the RMS departure in °C of a fitted line."""
    y, w = np.log10(d), d * d
    ym = np.sum(w * y) / np.sum(w)
    ss_tot = np.sum(w * (y - ym) ** 2)
    ss_res = np.sum(w * (y - fitted_log10) ** 2)
    r2 = float(1.0 - ss_res / ss_tot) if ss_tot > 0 else float("nan")
    rms = float(np.sqrt(np.mean((d - 10.0 ** fitted_log10) ** 2)))
    return r2, rms


def _first_line(t: np.ndarray, d: np.ndarray, noise_C: float, accept=None):
    """The straight window ``[start, end]`` (indices) covering the longest time among the
    readings ``t, d``, falling by at least 0.1 log cycle (and passing ``accept(t, d)`` on its
    readings, if given); None if there is none.

    Every candidate end is tried with :func:`_straight_tail` (the longest straight window ending
    there, same tests and noise); a record longer than 400 readings is thinned for the search.
    """
    n = t.size
    if n < _MIN_WINDOW_POINTS:
        return None
    stride = max(1, math.ceil(n / _MAX_SEARCH_POINTS))
    index = np.arange(n - 1, -1, -stride)[::-1]  # keeps the last reading
    ts, ds = t[index], d[index]
    m = ts.size
    if m < _MIN_WINDOW_POINTS:
        return None
    ends = np.unique(np.rint(np.linspace(_MIN_WINDOW_POINTS - 1, m - 1,
                                         min(m - _MIN_WINDOW_POINTS + 1, _MAX_FIRST_LINE_ENDS))))
    best = None
    for e in ends.astype(int).tolist():
        line = _straight_tail(ts[:e + 1], ds[:e + 1], noise_C)
        if line.note or not line.slope < 0.0:
            continue
        span = float(ts[e] - ts[line.start])
        if -line.slope * span < _MIN_FIRST_LINE_DECADES:
            continue
        if best is not None and span <= best[2] + 1e-12:
            continue
        lo, hi = int(index[line.start]), int(index[e])
        if accept is not None and not accept(t[lo:hi + 1], d[lo:hi + 1]):
            continue
        if best is None or span > best[2] + 1e-12:
            best = (int(index[line.start]), int(index[e]), span)
    return None if best is None else best[:2]


def semilog_broken_fit(
    time_min,
    temperature_C,
    retort_C,
    *,
    come_up_min: float,
    initial_C: float | None = None,
    steam_off_min: float | None = None,
    break_min: float | None = None,
    min_difference_C: float = DEFAULT_MIN_DIFFERENCE_C,
    noise_C: float | None = None,
) -> BrokenHeatingCurveFit:
    """fh, jh, fh2 and the break time of a broken heating curve by Ball's semi-log method.

    Method: Ball's semi-logarithmic heating curve (Ball 1923 [1]) with two straight lines, the
    broken heating curve of products that thicken or gel (Stumbo 1973 [2], from memory): on
    ``log10(T_R - T)``

    - the **second line** is the straight tail, found as in :func:`semilog_fit` (the longest
      straight window ending at the last usable reading);
    - the **first line** is the straight window covering the longest time among the readings
      before it (same straightness tests, same noise) that falls by at least 0.1 log cycle and
      is steeper than the tail by more than 3 standard errors of the two slopes (noise as in
      :func:`semilog_fit`) and by more than 5 %: the product heats more slowly after the
      break, it thickens. A flatter stretch before the tail is what the lag looks like on noisy
      readings (measured: conduction curves with 0.2 °C noise gave one), so a second line
      *faster* than the first is not searched for; it is fitted only with ``break_min`` given;
    - a **break** is reported when there is such a first line and the two lines meet between
      its start and the last reading. The break time is where the lines meet,
      ``x_bh = t_meet - t0`` from the corrected zero ``t0 = 0.58 · come_up`` (the trade counts
      x_bh from the corrected zero, Stumbo [2], from memory). Otherwise the curve is one
      straight line and the result is that of :func:`semilog_fit` with no second line. A
      break within the lag leaves no straight first line and is not found: the one line
      reported is then the second, whose fh2 is too slow for a fall of the retort before the
      break; a process authority who sees the break on the plot gives ``break_min``.

    With ``break_min`` given the break is not searched for: the first line is the longest
    straight window before it, the second the straight tail after it, and the two are fitted
    together as one continuous broken line with its knot at the given break (weighted least
    squares, weights ``(T_R - T)²``).

    ``fh = -1/slope`` of the first line, ``jh`` its value at the corrected zero over
    ``T_R - IT``, ``fh2 = -1/slope`` of the second, the break temperature the first line's
    temperature at the break.

    Parameters
    ----------
    time_min : array_like
        Reading times from steam on [min]
    temperature_C : array_like
        Thermocouple readings [°C]; NaN readings are skipped
    retort_C : float or array_like
        Retort temperature during the hold [°C], or the retort record on ``time_min``
    come_up_min : float
        Come-up time, steam on to process temperature [min]
    initial_C : float, optional
        Initial temperature IT [°C] (default: the first reading)
    steam_off_min : float, optional
        Readings after this are cooling and left out [min]
    break_min : float, optional
        Break time x_bh from the corrected zero [min], if known; default: found
    min_difference_C : float, optional
        Readings from the first with ``T_R - T`` below this are left out [°C] (default 1.0)
    noise_C : float, optional
        Thermocouple noise standard deviation [°C] (default: estimated from the tail)

    Returns
    -------
    BrokenHeatingCurveFit
        ``fh2_min`` and the break fields are None when no break was found (``note`` says why).

    Raises
    ------
    ModelError
        Fewer than 5 usable readings, a line that does not fall, or with ``break_min``: fewer
        than 5 readings on either side of the break, or no straight first line before it.

    References
    ----------
    .. [1] Ball, *Bull. Natl. Res. Counc.* 7, part 1, no. 37 (1923).
    .. [2] Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., 1973.
    """
    TR, IT, come_up, t_h, d_h, end = _heating_readings(
        time_min, temperature_C, retort_C, come_up_min, initial_C, steam_off_min,
        min_difference_C)
    t_h, d_h = t_h[:end], d_h[:end]
    t0 = CORRECTED_ZERO_FRACTION * come_up
    common = {"retort_C": TR, "initial_C": IT, "come_up_min": come_up, "corrected_zero_min": t0}

    if break_min is not None:
        x_bh = float(break_min)
        if not (math.isfinite(x_bh) and x_bh >= 0.0):
            raise ModelError(f"break_min = {break_min!r}; expected a time >= 0 [min]")
        t_break = t0 + x_bh
        before, after = t_h < t_break, t_h > t_break
        if before.sum() < _MIN_WINDOW_POINTS or after.sum() < _MIN_WINDOW_POINTS:
            raise ModelError(
                f"the given break at {x_bh:.2f} min from the corrected zero leaves "
                f"{int(before.sum())} readings before it and {int(after.sum())} after it; "
                f"expected at least {_MIN_WINDOW_POINTS} on each side"
            )
        t2, d2 = t_h[after], d_h[after]
        tail = _straight_tail(t2, d2, noise_C)
        sigma = tail.noise_estimate_C
        first = _first_line(t_h[before], d_h[before], sigma)
        if first is None:
            raise ModelError(
                f"no straight first line before the given break at {x_bh:.2f} min; expected "
                f"a line falling by at least {_MIN_FIRST_LINE_DECADES} log cycle"
            )
        t1, d1 = t_h[before][first[0]:first[1] + 1], d_h[before][first[0]:first[1] + 1]
        t2, d2 = t2[tail.start:], d2[tail.start:]
        # one continuous broken line, knot at the break: log10 d = c + b1 min(t - tb, 0)
        # + b2 max(t - tb, 0)
        tt = np.concatenate((t1, t2))
        dd = np.concatenate((d1, d2))
        basis = np.stack((np.ones_like(tt), np.minimum(tt - t_break, 0.0),
                          np.maximum(tt - t_break, 0.0)), axis=1)
        sw = dd  # sqrt of the weights d²
        coef, *_ = np.linalg.lstsq(basis * sw[:, None], np.log10(dd) * sw, rcond=None)
        c, b1, b2 = (float(v) for v in coef)
        if not (b1 < 0.0 and b2 < 0.0):
            raise ModelError(
                f"a semi-log line does not fall (slopes {b1:.3g} and {b2:.3g} per min); expected "
                "the thermocouple to approach the retort temperature"
            )
        r2_1, rms_1 = _window_stats(t1, d1, c + b1 * (t1 - t_break))
        r2_2, rms_2 = _window_stats(t2, d2, c + b2 * (t2 - t_break))
        d0 = 10.0 ** (c + b1 * (t0 - t_break))
        return BrokenHeatingCurveFit(
            fh_min=-1.0 / b1, jh=d0 / (TR - IT), fh2_min=-1.0 / b2, break_min=x_bh,
            break_time_min=t_break, break_temperature_C=TR - 10.0 ** c, break_given=True,
            pseudo_initial_C=TR - d0, r_squared=r2_1, rms_residual_C=rms_1,
            window_start_min=float(t1[0]), window_end_min=float(t1[-1]), n_points=int(t1.size),
            r_squared2=r2_2, rms_residual2_C=rms_2, window2_start_min=float(t2[0]),
            window2_end_min=float(t2[-1]), n_points2=int(t2.size), noise_estimate_C=sigma,
            note=tail.note, **common)

    tail = _straight_tail(t_h, d_h, noise_C)
    if not tail.slope < 0.0:
        raise ModelError(
            f"the semi-log line does not fall (slope {tail.slope:.3g} per min); expected the "
            "thermocouple to approach the retort temperature"
        )
    sigma = tail.noise_estimate_C

    def single(reason: str) -> BrokenHeatingCurveFit:
        d0 = 10.0 ** (tail.intercept + tail.slope * t0)
        note = "; ".join(x for x in (tail.note, f"no break: {reason}") if x)
        return BrokenHeatingCurveFit(
            fh_min=-1.0 / tail.slope, jh=d0 / (TR - IT), fh2_min=None, break_min=None,
            break_time_min=None, break_temperature_C=None, break_given=False,
            pseudo_initial_C=TR - d0, r_squared=tail.r_squared, rms_residual_C=tail.rms_C,
            window_start_min=float(t_h[tail.start]), window_end_min=float(t_h[-1]),
            n_points=int(t_h.size - tail.start), r_squared2=None, rms_residual2_C=None,
            window2_start_min=None, window2_end_min=None, n_points2=None,
            noise_estimate_C=sigma, note=note, **common)

    t2, d2 = t_h[tail.start:], d_h[tail.start:]
    a2, b2, se2, r2_2, rms_2 = _weighted_line(t2, d2, sigma)

    def steeper(tw, dw):
        # significantly steeper than the tail: a thickening product's first line (a flatter
        # stretch before the tail is what the lag looks like on noisy readings, and a second
        # line faster than the first is not told from it here: give break_min)
        _, b, se, _, _ = _weighted_line(tw, dw, sigma)
        return (b2 - b > _BREAK_SIGMAS * math.hypot(se, se2)
                and b2 - b > _MIN_SLOPE_CHANGE * abs(b2))

    first = _first_line(t_h[:tail.start], d_h[:tail.start], sigma, steeper)
    if first is None:
        return single("no straight line before the straight tail covering "
                      f"{_MIN_FIRST_LINE_DECADES} log cycle and falling significantly faster "
                      "than it (a second line faster than the first is fitted only with "
                      "break_min given)")
    t1, d1 = t_h[first[0]:first[1] + 1], d_h[first[0]:first[1] + 1]
    a1, b1, _, r2_1, rms_1 = _weighted_line(t1, d1, sigma)
    t_meet = (a2 - a1) / (b1 - b2)
    if not (t1[0] <= t_meet <= t_h[-1]):
        return single(f"the two lines meet at {t_meet:.2f} min, outside the readings "
                      f"{t1[0]:.2f}-{t_h[-1]:.2f} min")
    d0 = 10.0 ** (a1 + b1 * t0)
    note = tail.note
    return BrokenHeatingCurveFit(
        fh_min=-1.0 / b1, jh=d0 / (TR - IT), fh2_min=-1.0 / b2, break_min=t_meet - t0,
        break_time_min=t_meet, break_temperature_C=TR - 10.0 ** (a1 + b1 * t_meet),
        break_given=False, pseudo_initial_C=TR - d0, r_squared=r2_1, rms_residual_C=rms_1,
        window_start_min=float(t1[0]), window_end_min=float(t1[-1]), n_points=int(t1.size),
        r_squared2=r2_2, rms_residual2_C=rms_2, window2_start_min=float(t2[0]),
        window2_end_min=float(t2[-1]), n_points2=int(t2.size), noise_estimate_C=sigma,
        note=note, **common)


def semilog_cooling_fit(
    time_min,
    temperature_C,
    retort_C,
    *,
    steam_off_min: float | None = None,
    cooling_water_C: float | None = None,
    min_difference_C: float = DEFAULT_MIN_DIFFERENCE_C,
    noise_C: float | None = None,
) -> CoolingCurveFit:
    """fc and jc of a cooling curve by the semi-logarithmic method.

    Method: Ball's cooling curve (Ball 1923 [1]; Stumbo 1973 [2]): on ``log10(T - Tw)`` after
    steam off the straight-line portion (found as in :func:`semilog_fit`) has slope ``-1/fc``;
    with the zero at steam off (common practice), ``Tpic`` is the line's temperature there and
    ``jc = (Tw - Tpic)/(Tw - Tic)``, ``Tic`` the thermocouple at steam off.

    Parameters
    ----------
    time_min : array_like
        Reading times from steam on [min]
    temperature_C : array_like
        Thermocouple readings [°C]; NaN readings are skipped
    retort_C : array_like
        Retort record on ``time_min`` [°C]: steam off and the cooling water temperature are read
        from its cooling phase (see :func:`retort_phases`) unless given
    steam_off_min : float, optional
        Steam off [min]
    cooling_water_C : float, optional
        Cooling water temperature Tw [°C]
    min_difference_C : float, optional
        Readings from the first with ``T - Tw`` below this are left out [°C] (default 1.0)
    noise_C : float, optional
        Thermocouple noise standard deviation [°C] (default: estimated from the tail)

    Returns
    -------
    CoolingCurveFit

    Raises
    ------
    ModelError
        No cooling phase on the record, or fewer than 5 usable cooling readings.

    References
    ----------
    .. [1] Ball, *Bull. Natl. Res. Counc.* 7, part 1, no. 37 (1923).
    .. [2] Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., 1973.
    """
    t, T = _valid(time_min, temperature_C)
    off, Tw = steam_off_min, cooling_water_C
    if off is None or Tw is None:
        phases = retort_phases(time_min, retort_C)
        off = phases.steam_off_min if off is None else off
        Tw = phases.cooling_water_C if Tw is None else Tw
    if off is None or Tw is None:
        raise ModelError("the retort record has no cooling phase; expected the retort to fall "
                         "at least 10 °C after the hold")
    off, Tw = float(off), float(Tw)
    if t.size < 2 or not (t[0] <= off <= t[-1]):
        raise ModelError(f"no thermocouple readings around steam off at {off:.2f} min")
    Tic = float(np.interp(off, t, T))
    if not Tic - Tw > min_difference_C:
        raise ModelError(
            f"the thermocouple at steam off ({Tic:.2f} °C) is not above the cooling water "
            f"({Tw:.2f} °C); expected a cooling phase"
        )
    after = t > off + 1e-9
    t_c, d_c = t[after], T[after] - Tw
    end = _cut_at_small(d_c, min_difference_C)
    line = _straight_tail(t_c[:end], d_c[:end], noise_C)
    if not line.slope < 0.0:
        raise ModelError(
            f"the semi-log cooling line does not fall (slope {line.slope:.3g} per min); "
            "expected the thermocouple to approach the cooling water temperature"
        )
    d0 = 10.0 ** (line.intercept + line.slope * off)
    return CoolingCurveFit(
        fc_min=-1.0 / line.slope,
        jc=d0 / (Tic - Tw),
        cooling_water_C=Tw,
        steam_off_min=off,
        start_C=Tic,
        pseudo_initial_C=Tw + d0,
        r_squared=line.r_squared,
        rms_residual_C=line.rms_C,
        window_start_min=float(t_c[line.start]),
        window_end_min=float(t_c[end - 1]),
        n_points=int(end - line.start),
        noise_estimate_C=line.noise_estimate_C,
        note=line.note,
    )


# --------------------------------------------------------------------------------------------
# Least squares of the model response to the actual retort record
# --------------------------------------------------------------------------------------------

# Grid step for the superposition: the record's own median step, within these limits [min].
_FINEST_STEP_MIN, _COARSEST_STEP_MIN = 0.05, 1.0


# --------------------------------------------------------------------------------------------
# All thermocouples
# --------------------------------------------------------------------------------------------


# --------------------------------------------------------------------------------------------
# The table to paste into a case
# --------------------------------------------------------------------------------------------


