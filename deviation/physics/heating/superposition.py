"""Cold-spot temperature for any retort profile by superposing step responses (Duhamel).

Linear superposition
--------------------
For a linear heat-transfer model with uniform initial temperature ``T_0`` and unit-step response
``U(t) = 1 - S(t)`` (``S`` the unaccomplished fraction), the cold-spot temperature for a retort
temperature history ``T_R(t)`` is Duhamel's integral ([1], §1.14, section from memory)

    T(t) = T_0 + (T_R(0) - T_0) U(t) + ∫_0^t T_R'(τ) U(t - τ) dτ.

With ``T_R`` taken as piecewise linear between samples on a uniform grid ``t_n = n Δt`` the
integral is a discrete convolution, exact under that assumption:

    T_n = T_0 + (T_R,0 - T_0) U(t_n) + Σ_{k<n} (T_R,k+1 - T_R,k) K_{n-k},
    K_j = (1/Δt) ∫_{(j-1)Δt}^{jΔt} U(u) du,

the kernel means ``K_j`` taken by Gauss-Legendre quadrature on each interval, the convolution by
FFT. This is exact for conduction (the series of :mod:`.conduction`).

Bounding superposition (two step responses)
-------------------------------------------
When the product's step response is known only to lie between two responses,
``S_fast <= S <= S_slow`` (a heating-curve filing: fh, jh, fc, jc do not fix the shape of the
lag), no single linear kernel is safe for every history: one that follows a rise slowly enough
also follows a fall too slowly and keeps the cold spot hot after steam off. The lowest cold-spot
temperature consistent with the bracket is used instead. Integrated by parts, Duhamel's integral
is an average of past retort temperatures with the weights ``dU``,

    T(t) = ∫ T_R(t - u) dU(u) = ∫_0^1 T_R(t - Q(q)) dq,   T_R = T_0 before t = 0,

``Q`` the inverse of ``U`` (``U`` non-decreasing: a cold spot's temperature is a weighted mean of
the temperatures its surface has had, the maximum principle of conduction [1]). The bracket
only places each quantile in an age window, ``A(q) <= Q(q) <= B(q)`` with ``A`` the inverse of
``1 - S_fast`` and ``B`` that of ``1 - S_slow``, so

    T(t) >= ∫_0^1 min{ T_R(s) : t - B(q) <= s <= t - A(q) } dq,

and no higher figure follows from the bracket alone: a non-decreasing ``U`` within it reaches
the bound, in the limit (the lower expectation over a band of distribution functions, a
"probability box", Ferson et al. [2], from memory). For a retort temperature that only rises
this is Duhamel's integral with ``S_slow``, for one that only falls with ``S_fast``; for any
history it is never above the product's temperature, and it is monotone (a retort lower
everywhere never gives a hotter cold spot). A short spike of the retort temperature counts only
for the responses in the bracket that could have answered within its length (next to nothing
for Ball's lag form), a short dip as much as the fastest would. Sorting the increments by sign
instead (rises with ``S_slow``, falls with ``S_fast``) is also a lower bound, but lower still:
each rise-fall pair of recorder noise subtracts, and on a 3-s grid with 0.1 °C noise it lost
three quarters of a filed F0 (see ``tests/reference/test_reference_heating_curve_bound.py``).

Discretised: ages are counted in ticks of ``Δt / m`` on short records (``m`` up to 8, windows
then end between samples, read on the piecewise-linear record) or sampled every ``c`` grid
steps on long ones (at most 2500 sampled ages). Each quantile bin between consecutive sampled
values of the two responses takes the union of its windows, rounded outward to sampled ages;
the minimum over a window is that of its end points and the samples inside (a sparse table of
running minima). Every rounding widens a window, so the discrete result is below the
continuous bound: with one response on both sides it is below Duhamel's integral, on a filed
cycle with a 100 °C fall in one grid step by at most 0.26 °C and 1 % of F0 for grids of 1 s
to 1 min (a fall is answered up to one age sample early).

References
----------
.. [1] H. S. Carslaw and J. C. Jaeger, *Conduction of Heat in Solids*, 2nd ed., Oxford:
   Clarendon Press, 1959 (Duhamel's theorem; maximum principle).
.. [2] S. Ferson, V. Kreinovich, L. Ginzburg, D. S. Myers and K. Sentz, *Constructing
   Probability Boxes and Dempster-Shafer Structures*, Sandia National Laboratories report
   SAND2002-4015, 2003.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
from scipy import fft as _fft

from deviation.physics.heating.conduction import ModelInputError

__all__ = ["superpose"]

# Gauss-Legendre nodes per grid interval for the kernel means. Six nodes integrate the smooth
# conduction response to far below 1e-10 °C at any sensible grid step; the heating-curve model's
# single slope break at the end of the lag costs at most O(Δt²) in one interval.
_GAUSS_NODES = 6
_GL_X, _GL_W = np.polynomial.legendre.leggauss(_GAUSS_NODES)
_GL_X = 0.5 * (_GL_X + 1.0)  # nodes on [0, 1]
_GL_W = 0.5 * _GL_W  # weights sum to 1: a mean, not an integral

# Relative tolerance on the grid spacing (retort logs carry times rounded in the CSV).
_GRID_RTOL = 1e-6

# Bounding superposition: at most this many sampled ages (the quantile bins are about twice as
# many, one pass over the record each). Longer records sample every c grid steps, widening the
# windows by up to c steps (conservative).
_MAX_AGES = 2500
# Short records: ages are counted in up to this many ticks per grid step, so windows end between
# samples (read on the piecewise-linear record) rather than being widened to whole steps.
_MAX_SUBDIVISION = 8

Unaccomplished = Callable[[np.ndarray], np.ndarray]


def uniform_grid(time_min) -> tuple[np.ndarray, float]:
    """``(times, step)`` [min] of a uniform grid starting at 0; :class:`ModelInputError` naming
    the first sample off it (or a non-finite, empty or non-increasing grid)."""
    t = np.asarray(time_min, dtype=float)
    if t.ndim != 1 or t.size == 0:
        raise ModelInputError(f"time_min has shape {t.shape}; expected a non-empty 1-D grid [min]")
    if not np.all(np.isfinite(t)):
        raise ModelInputError("time_min contains a non-finite value; expected finite times [min]")
    if t.size == 1:
        if t[0] != 0.0:
            raise ModelInputError(f"time_min starts at {t[0]!r}; expected a grid starting at 0")
        return t, 0.0
    dt = (t[-1] - t[0]) / (t.size - 1)
    if not dt > 0.0:
        raise ModelInputError("time_min does not increase; expected a uniform increasing grid")
    if abs(t[0]) > _GRID_RTOL * dt:
        raise ModelInputError(f"time_min starts at {t[0]!r}; expected a grid starting at 0")
    deviation = np.abs(t - dt * np.arange(t.size))
    worst = int(np.argmax(deviation))
    if deviation[worst] > _GRID_RTOL * dt:
        raise ModelInputError(
            f"time_min is not a uniform grid: sample {worst} is at {t[worst]!r} min, expected "
            f"{worst * dt!r} min (step {dt!r} min); resample the record first"
        )
    return t, dt


def _response(unaccomplished: Unaccomplished, t: np.ndarray, name: str) -> np.ndarray:
    s = np.asarray(unaccomplished(t), dtype=float)
    if s.shape != t.shape or not np.all(np.isfinite(s)):
        raise ModelInputError(
            f"{name} returned shape {s.shape} or non-finite values for {t.size} times; "
            "expected finite unaccomplished fractions of the same shape"
        )
    return 1.0 - s


def _kernel_means(unaccomplished: Unaccomplished, n_intervals: int, dt: float, name: str):
    """Kernel means ``K_j``, ``j = 1..n_intervals``: mean of U over ``[(j-1)Δt, jΔt]``.

    Gauss-Legendre quadrature on each interval.
    """
    # ascending sub-grid: interval by interval, nodes ascending within each
    sub_t = (np.arange(n_intervals)[:, None] + _GL_X[None, :]).ravel() * dt
    u = _response(unaccomplished, sub_t, name).reshape(n_intervals, _GAUSS_NODES)
    return u @ _GL_W


def _causal_convolution(increments: np.ndarray, kernel: np.ndarray) -> np.ndarray:
    """First ``len(increments)`` terms of the linear convolution, by real FFT.

    ``scipy.fft`` rather than ``scipy.signal.fftconvolve``: importing ``scipy.signal`` costs a
    large part of the tool's start-up time.
    """
    m = increments.size
    size = _fft.next_fast_len(2 * m - 1, real=True)  # no circular wrap into the first m terms
    spectrum = _fft.rfft(increments, size) * _fft.rfft(kernel, size)
    return _fft.irfft(spectrum, size)[:m]


def _sparse_minima(values: np.ndarray, longest: int) -> list[np.ndarray]:
    """``table[k][i] = min(values[i : i + 2**k])`` for ``2**k <= longest``."""
    table = [values]
    width = 1
    while 2 * width <= longest:
        prev = table[-1]
        table.append(np.minimum(prev[:-width], prev[width:]))
        width *= 2
    return table


def _bounding_envelope(
    n: int, dt: float, retort: np.ndarray, t0: float, first: Unaccomplished,
    second: Unaccomplished, max_ages: int = _MAX_AGES,
) -> np.ndarray:
    """Lowest cold-spot temperature for a step response bracketed by ``first`` and ``second``.

    See the module docstring (bounding superposition). Ages are counted in ticks of
    ``Δt / sub`` (short records: windows may end between samples, read on the piecewise-linear
    record) or sampled every ``stride`` grid steps (long records).
    """
    steps = n - 1
    sub = min(_MAX_SUBDIVISION, max(1, max_ages // steps))
    stride = 1 if sub > 1 else max(1, math.ceil(steps / max_ages))  # ticks between ages
    n_ages = math.ceil(steps * sub / stride) + 2  # one sampled age past the record
    ages = np.arange(n_ages) * (stride * dt / sub)
    u1 = _response(first, ages, "unaccomplished")
    u2 = _response(second, ages, "falling_unaccomplished")
    # U of the product lies in [lo, hi] at the sampled ages; monotone envelopes of the two stay
    # valid bounds of a non-decreasing U (and order the pair if the two responses cross)
    lo = np.maximum.accumulate(np.clip(np.minimum(u1, u2), 0.0, 1.0))
    hi = np.minimum.accumulate(np.clip(np.maximum(u1, u2), 0.0, 1.0)[::-1])[::-1]
    hi = np.maximum(hi, lo)

    # quantile bins (q_prev, q]: between consecutive sampled values of either bound
    levels = np.unique(np.concatenate((lo, hi, [1.0])))
    levels = levels[levels > 0.0]
    weights = np.diff(levels, prepend=0.0)
    # earliest age: the sampled age before hi reaches q; latest: the first where lo reaches q.
    # Ages past the record reach back to before t = 0 (T_0): capped at n grid steps.
    cap = n * sub
    first_hi = np.searchsorted(hi, levels, side="left")
    first_lo = np.searchsorted(lo, levels, side="left")
    earliest = np.minimum(np.maximum(first_hi - 1, 0) * stride, cap)
    latest = np.where(first_lo >= n_ages, cap, np.minimum(first_lo * stride, cap))
    # bins with the same window add up
    key, inverse = np.unique(earliest * (cap + 1) + latest, return_inverse=True)
    weight = np.bincount(inverse.ravel(), weights=weights, minlength=key.size)
    earliest, latest = np.divmod(key, cap + 1)

    # retort excess over T_0 after n + 1 samples of 0 (the time before the record)
    pad = n + 1
    history = np.concatenate((np.zeros(pad), retort - t0))
    rise = np.diff(history)
    inner_last = -(-earliest // sub)  # newest whole sample in the window [grid steps of age]
    inner_first = latest // sub  # oldest whole sample
    table = _sparse_minima(history, int(max(1, (inner_first - inner_last).max() + 1)))
    excess = np.zeros(n)
    keep = weight > 0.0
    earliest, latest, inner_last, inner_first, weight = (
        earliest[keep], latest[keep], inner_last[keep], inner_first[keep], weight[keep])
    # each window's minima fill one row of a block; the block is weighted and summed by one
    # matrix product (about 2**16 values: the block stays in the processor's cache)
    rows = max(1, min(weight.size, (1 << 16) // n))
    block = np.empty((rows, n))
    # the record read m/sub of a step after each sample, m = 1..sub-1: a window's end between
    # samples is one of these, shifted
    between = [None] + [history[:-1] + rise * (m / sub) for m in range(1, sub)]
    j = 0
    for a, b, i_new, i_old in zip(earliest.tolist(), latest.tolist(), inner_last.tolist(),
                                  inner_first.tolist()):
        buf = block[j % rows]
        if i_old >= i_new:  # whole samples inside the window: sparse-table minimum
            w = i_old - i_new + 1
            k = w.bit_length() - 1
            level = table[k]
            start = pad - i_old
            other = start + w - (1 << k)
            np.minimum(level[start:start + n], level[other:other + n], out=buf)
        else:
            buf.fill(np.inf)
        m_old = b - i_old * sub  # window's oldest end, m_old/sub of a step before sample i_old
        if m_old > 0:
            start = pad - i_old - 1
            np.minimum(buf, between[sub - m_old][start:start + n], out=buf)
        m_new = i_new * sub - a  # newest end, m_new/sub of a step after sample i_new
        if m_new > 0:
            start = pad - i_new
            np.minimum(buf, between[m_new][start:start + n], out=buf)
        if sub > 1:
            # A window reaching before t = 0 holds T_0 (excess 0), which the interpolation across
            # t = 0 would blur, for one output sample at each end: every earlier one already
            # takes in a zero padding the history (with whole samples only, sub = 1, all do).
            c = min(n, -(-b // sub))
            if i_old < c:
                np.minimum(buf[i_old:c], 0.0, out=buf[i_old:c])
            buf[max(0, i_new - 1): min(n, i_new)] = 0.0
        j += 1
        if j % rows == 0:
            excess += weight[j - rows:j] @ block
    if j % rows:
        excess += weight[j - j % rows:j] @ block[: j % rows]
    return t0 + excess


def superpose(
    time_min,
    retort_C,
    initial_C,
    unaccomplished: Unaccomplished,
    *,
    falling_unaccomplished: Unaccomplished | None = None,
    cooling_unaccomplished: Unaccomplished | None = None,
    cooling_start_min: float | None = None,
    max_ages: int = _MAX_AGES,
) -> np.ndarray:
    """Cold-spot temperature for a retort temperature record, by superposing step responses.

    Method: Duhamel's theorem for a linear system ([1]), the retort temperature taken as
    piecewise linear between samples, evaluated as one discrete convolution of the retort
    temperature increments with the interval-mean step response. With
    ``falling_unaccomplished``: the bounding superposition of the module docstring, the lowest
    cold-spot temperature of any product whose step response lies between the two given
    (the lower expectation over a band of distribution functions, Ferson et al. [2]).

    Parameters
    ----------
    time_min : array_like
        Uniform time grid starting at 0 [min].
    retort_C : array_like
        Retort temperature on that grid [°C].
    initial_C : float
        Uniform initial product temperature [°C].
    unaccomplished : callable
        ``S(t)`` for ``t`` an array of times [min]: the unaccomplished fraction after a unit step
        in retort temperature at ``t = 0`` (e.g. a ``functools.partial`` of
        ``cylinder_centre_unaccomplished`` or ``step_unaccomplished``). With
        ``falling_unaccomplished``, the slow side of the bracket, the response to rises (e.g.
        ``heating_curve.rising_unaccomplished``).
    falling_unaccomplished : callable, optional
        The fast side of the bracket, the response to falls (e.g.
        ``heating_curve.falling_unaccomplished``; both from ``heating_curve.bounding_kernels``).
        Not with the two cooling arguments.
    cooling_unaccomplished : callable, optional
        Step response used for retort changes at or after ``cooling_start_min`` (e.g. Ball's
        ``fc, jc``). Give both or neither of the two cooling arguments. Kept for existing
        callers; it can credit lethality the product did not receive (Notes).
    cooling_start_min : float, optional
        Time of steam off / start of cooling [min].
    max_ages : int, optional
        Bounding superposition only: the most ages sampled (the resolution of the bracket's
        age windows; fewer is faster and, every rounding widening a window, lower still).

    Returns
    -------
    numpy.ndarray
        Cold-spot temperature at each grid time [°C].

    Raises
    ------
    ModelInputError
        (a ``ModelError`` and a ``ValueError``) if the grid is not uniform from 0, the arrays
        disagree in length or hold non-finite values, a response callable misbehaves, or
        ``falling_unaccomplished`` comes with the cooling arguments.

    Notes
    -----
    The two-phase option (``cooling_unaccomplished``) answers each retort change with the kernel
    of the phase it occurs in. With Ball's lag form for cooling (``jc > 1``) that kernel is a
    dead time of ``fc · log10(jc)`` after steam off during which the heating-phase changes keep
    heating the cold spot at full rate: for a conduction product it over-credits the lethality
    (1.6 × the exact F0 of a filed cycle for an 87 × 115 mm can, 1.95 × on a hold 12 min
    short). Use
    ``falling_unaccomplished`` for a heating-curve model; for a linear conduction model use a
    single kernel: that is exact.

    References
    ----------
    .. [1] Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959 (Duhamel's theorem).
    .. [2] Ferson et al., *Constructing Probability Boxes and Dempster-Shafer Structures*,
       SAND2002-4015, 2003.
    """
    t, dt = uniform_grid(time_min)
    retort = np.asarray(retort_C, dtype=float)
    if retort.shape != t.shape:
        raise ModelInputError(
            f"retort_C has shape {retort.shape}; expected the shape of time_min {t.shape}"
        )
    if not np.all(np.isfinite(retort)):
        raise ModelInputError("retort_C contains a non-finite value; expected temperatures [°C]")
    t0 = float(initial_C)
    if not math.isfinite(t0):
        raise ModelInputError(f"initial_C = {initial_C!r}; expected a finite temperature [°C]")
    two_phase = cooling_unaccomplished is not None or cooling_start_min is not None
    if two_phase and falling_unaccomplished is not None:
        raise ModelInputError(
            "falling_unaccomplished cannot be combined with cooling_unaccomplished / "
            "cooling_start_min; the bracket already answers every fall"
        )
    if two_phase and (cooling_unaccomplished is None or cooling_start_min is None):
        raise ModelInputError(
            "cooling_unaccomplished and cooling_start_min must be given together"
        )
    if two_phase:
        t_cool = float(cooling_start_min)
        if not math.isfinite(t_cool):
            raise ModelInputError(
                f"cooling_start_min = {cooling_start_min!r}; expected a finite time [min]"
            )

    n = t.size
    if falling_unaccomplished is not None:
        if n == 1:
            # at t = 0 the product has not responded to anything yet
            _response(unaccomplished, t, "unaccomplished")
            _response(falling_unaccomplished, t, "falling_unaccomplished")
            return np.array([t0])
        return _bounding_envelope(
            n, dt, retort, t0, unaccomplished, falling_unaccomplished, max(2, int(max_ages))
        )

    # the initial step T_R(0) - T_0 at t = 0
    first = cooling_unaccomplished if two_phase and t_cool <= 0.0 else unaccomplished
    cold_spot = t0 + (retort[0] - t0) * _response(first, t, "unaccomplished")
    if n == 1:
        return cold_spot

    increments = np.diff(retort)  # segment k: [t_k, t_k+1]
    kernel = _kernel_means(unaccomplished, n - 1, dt, "unaccomplished")
    if not two_phase:
        cold_spot[1:] += _causal_convolution(increments, kernel)
        return cold_spot

    # segment starts at or after steam-off (with the grid's rounding tolerance) cool
    cooling = t[:-1] >= t_cool - _GRID_RTOL * dt
    heating_increments = np.where(cooling, 0.0, increments)
    cooling_increments = np.where(cooling, increments, 0.0)
    cold_spot[1:] += _causal_convolution(heating_increments, kernel)
    if np.any(cooling):
        cooling_kernel = _kernel_means(
            cooling_unaccomplished, n - 1, dt, "cooling_unaccomplished"
        )
        cold_spot[1:] += _causal_convolution(cooling_increments, cooling_kernel)
    return cold_spot
