"""Continuous retort systems, container by container: the F of every entry time.

What the systems are
--------------------
21 CFR 113.40(d) sets the equipment and procedures for pressure processing in steam in
continuous rotary (agitating) retorts, the reel-and-spiral cookers: containers enter the shell
one after another through an intake valve, a revolving reel carries them along a spiral fixed to
the shell, and they leave through a discharge or transfer valve. 21 CFR 113.40(f) does the same
for hydrostatic retorts: carriers climb a feed water leg, pass through the steam dome and come
down a discharge leg. In both the process time is the time a container spends in the steam
(the shell, the dome), and the speed of the reel or conveyor that sets it is a critical factor of
the scheduled process, adjusted and recorded by the operator; the paragraphs also say what
becomes of the containers inside after an emergency stop or a temperature drop (their wording
and sub-paragraph numbers are from memory here: read the text before writing a rule on them).
USDA-inspected products: 9 CFR 318.305 (same systems).
What those paragraphs make hard is the question this module answers: a temperature drop or a
stop touches only the containers inside at the time, each for its own part of its passage, and
each of them received its own F.

The model
---------
*The conveyor.* Its running state is a piecewise-constant relative speed ``v(t)`` (1 = filed
speed, 0 = stopped, 0.8 = a slow reel; :func:`conveyor_position_min`), so its position, in
minutes of travel at filed speed, is ``P(t) = ∫_0^t v``. A container sits in a pocket of the
reel or a carrier: it moves with the conveyor, so one entering at ``e`` has progressed
``P(t) - P(e)`` by ``t`` and leaves the shell when that reaches the filed residence
``residence_min`` (the filed process time), at ``x(e) = min{t : P(t) >= P(e) + residence_min}``.
While the conveyor stops, nobody enters or leaves and everyone inside waits, at whatever the
shell temperature is. Containers enter at ``containers_per_min`` × ``v(t)``: equally spaced in
conveyor position, not in time (common practice: an in-feed valve synchronised to the reel,
a carrier chain).

*The container.* It enters at ``initial_C`` (no credit for a preheater shell or a feed water
leg: a colder start only lowers F), sees the shell temperature record from its entry to its exit,
then cooling water at ``cooling_C`` for ``cooling_min`` (an instant step at exit; a discharge leg
or cooler warmer than ``cooling_C`` only adds lethality, so this is the safe side). The cold spot
follows a linear step response ``S(t)`` (the conduction series, or any linear model) by
Duhamel's theorem with the record piecewise linear between its samples, as in
:func:`deviation.physics.heating.superposition.superpose`, and F is the General Method's
trapezoidal integral over the container's own time since entry (Bigelow et al. 1920).

*On the record's grid.* Each container's history is taken on the grid ``τ_j = j Δt`` since its
entry, ``Δt`` the record's step. Samples with ``τ_j + Δt <= residence`` carry the shell, later
ones the cooling water: the exit step becomes a ramp over the last grid step that ends at or
before the exit, below the true step whenever the shell is above the cooling water (the
container is credited up to one step less in the shell).

*Rows: slots of conveyor position.* Entries are evaluated at conveyor positions ``entry_step_min``
apart (default: one container, but never closer than one record step; a stop's position is
split into the entry before the stop and the one after it). Each row stands for the containers
entering in its slot, and by default (``bound_slots=True``) its F is a lower bound for every one
of them: at each time since entry its history takes the lowest record sample within the
slot's spread of entry times (the window rounded outward to whole samples), and it leaves the
shell with the shortest residence in the slot. This is a lower bound of every container's
piecewise-linear history at every time (between two samples the straight line of the bound
stays under the record's line, since the record's kink between them is in both windows), and
the discrete Duhamel sum and the trapezoidal rule are monotone in the samples (a non-decreasing
``U = 1 - S``: every sample's weight is a difference of interval means of ``U``, never
negative). With ``bound_slots=False`` a row is the one container entering at the slot's start
(its history read on the record's piecewise-linear line), which is what the brute-force check
compares one to one.

*Speed.* A shift of production is tens of thousands of rows. A row whose every record sample it
reads is at or above the floor ``process_temperature_C - tolerance_C`` is credited a shell held
at that floor for its own residence (a lower bound: its samples are at or above it; a hotter
shell earns nothing more), one F for each distinct residence: the nominal passages (filed speed
throughout, the filed residence) all share one, ``nominal_F_min``. Only the rows that read a
sample below the floor (inside the shell during a drop) get their own history, in batches:
rows = entries, columns = time since entry, the increments of each row's own history convolved
with one kernel whose real FFT is computed once per transform length and reused for every row
and chunk (chunks bound the memory). With ``bound_slots=False`` every row that is not nominal
is computed on its own history.

*Categories.* A row is ``affected`` unless its passage was nominal: filed speed throughout, the
filed residence, and no temperature below the floor read by its history or seen by any of its
containers while inside (the closed interval from the first entry to the last exit, the record
read as linear between samples). Only the nominal rows take the category ``"unaffected"``
(:func:`group_entries`); a container inside during a drop never does, even one whose F still
meets its target.

What it does not model
----------------------
- Agitation. The step response is the one for the filed reel speed. A stopped or slow reel
  agitates less, and an agitated product then heats more slowly than that response says (a
  stopped reel is a still retort; 113.40(d), on emergency stops, has the containers given a
  full still process when the retort is run as a still one, wording from memory). The
  rows touched by a speed other than the filed one are marked ``off_filed_speed``; their F is
  not a bound for a product whose heating depends on agitation.
- Non-linear or bracketed responses (the heating-curve bounding superposition): the batch is a
  convolution, so the response must be linear.
- Temperature differences along the shell: one record stands for the whole shell (apply a cold-
  zone offset from the distribution test to the record first).

References
----------
.. [1] 21 CFR 113.40(d), equipment and procedures for pressure processing in steam in continuous
   rotary retorts; 113.40(f), in hydrostatic retorts. 9 CFR 318.305 for meat and poultry.
.. [2] W. D. Bigelow, G. S. Bohart, A. C. Richardson and C. O. Ball, "Heat penetration in
   processing canned foods", *National Canners Association Bulletin* 16-L (1920).
.. [3] H. S. Carslaw and J. C. Jaeger, *Conduction of Heat in Solids*, 2nd ed., Oxford:
   Clarendon Press, 1959 (Duhamel's theorem).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from scipy import fft as _fft

from deviation.physics.heating.conduction import ModelInputError
from deviation.physics.heating.superposition import uniform_grid
from deviation.physics.lethality import F0_REFERENCE_TEMPERATURE_C, F0_Z_C

__all__ = [
    "UNAFFECTED",
    "ContinuousEntries",
    "continuous_entries",
    "conveyor_position_min",
    "group_entries",
    "threshold_category",
]

UNAFFECTED = "unaffected"
"""Category of the rows that received the nominal F (whole passage nominal)."""

Unaccomplished = Callable[[np.ndarray], np.ndarray]

# Times and residences are snapped to the grid within this fraction of a step (a residence of
# exactly 30 min on a 1-s grid must give 1800 steps, not 1799 by rounding).
_SNAP = 1e-9
# Gauss-Legendre nodes per grid interval for the kernel means (as superpose: exact to far below
# 1e-10 °C for the smooth conduction response).
_GAUSS_NODES = 6
_GL_X, _GL_W = np.polynomial.legendre.leggauss(_GAUSS_NODES)
_GL_X = 0.5 * (_GL_X + 1.0)
_GL_W = 0.5 * _GL_W
# Cells (rows × FFT length) per batch: about 64 MB of complex spectrum, a few times that in all.
_DEFAULT_MAX_CELLS = 1 << 22
_LN10 = math.log(10.0)
# A step response may wobble by series rounding; beyond this it is not monotone.
_MONOTONE_TOL = 1e-9


@dataclass(frozen=True, eq=False)
class ContinuousEntries:
    """Every row (a slot of entries) of a continuous system, in entry order.

    Attributes
    ----------
    entry_min : numpy.ndarray
        Entry time of the slot's first container [min].
    entry_end_min : numpy.ndarray
        End of the slot: the next slot's first entry, or the stop's start [min].
    containers : numpy.ndarray
        Containers entering in the slot (int): positions ``k / containers_per_min`` from the
        first entry; the last slot includes the container at the window's end.
    residence_min : numpy.ndarray
        Time in the shell [min]: the shortest in the slot (``bound_slots``), else the slot's
        first container's.
    exit_min : numpy.ndarray
        Exit time of the slot's last container [min].
    F_min : numpy.ndarray
        F at the cold spot [min at Tref]: a lower bound for every container of the slot
        (``bound_slots``), else the first container's.
    lowest_shell_C : numpy.ndarray
        Lowest shell temperature any container of the slot saw inside [°C] (the record read as
        piecewise linear between samples).
    affected : numpy.ndarray
        bool: the slot's passage was not the nominal one: the conveyor off filed speed, a
        residence other than the filed one, or a shell temperature below ``floor_C`` read or
        seen while inside. False: the row received ``nominal_F_min``.
    own_history : numpy.ndarray
        bool: the row's F was computed on its own history. False: on a shell held at
        ``floor_C`` for the row's residence (every sample it reads at or above the floor; in
        point mode only the nominal rows).
    off_filed_speed : numpy.ndarray
        bool: the conveyor ran at other than the filed speed (stopped, slow, fast) while a
        container of the slot was inside.
    nominal_F_min : float
        F of a passage at filed speed in a shell held at ``floor_C`` [min].
    floor_C : float
        ``process_temperature_C - tolerance_C``: the lowest sample of a nominal passage [°C].
    bound_slots : bool
        Whether ``F_min`` bounds the slot (True) or is the slot's first container's (False).
    """

    entry_min: np.ndarray
    entry_end_min: np.ndarray
    containers: np.ndarray
    residence_min: np.ndarray
    exit_min: np.ndarray
    F_min: np.ndarray
    lowest_shell_C: np.ndarray
    affected: np.ndarray
    own_history: np.ndarray
    off_filed_speed: np.ndarray
    nominal_F_min: float
    floor_C: float
    bound_slots: bool

    @property
    def rows(self) -> int:
        """Number of rows (slots)."""
        return int(self.entry_min.size)

    @property
    def rows_computed(self) -> int:
        """Rows computed on their own history (the others: a shell at the floor, one F for
        each residence)."""
        return int(np.count_nonzero(self.own_history))


# --------------------------------------------------------------------------- conveyor


def _finite(name: str, value) -> float:
    x = float(value)
    if not math.isfinite(x):
        raise ModelInputError(f"{name} = {value!r}; expected a finite number")
    return x


def _positive(name: str, value, unit: str) -> float:
    x = float(value)
    if not (math.isfinite(x) and x > 0.0):
        raise ModelInputError(f"{name} = {value!r}; expected a finite number > 0 [{unit}]")
    return x


class _Conveyor:
    """Piecewise-constant speed ``v`` from change points ``c``; position ``P`` at each."""

    def __init__(self, speed_change_min, speed_fraction):
        c = np.atleast_1d(np.asarray(speed_change_min, dtype=float))
        v = np.atleast_1d(np.asarray(speed_fraction, dtype=float))
        if c.ndim != 1 or c.size == 0 or v.shape != c.shape:
            raise ModelInputError(
                f"speed_change_min has shape {c.shape} and speed_fraction {v.shape}; expected "
                "two 1-D sequences of the same non-zero length (a change point and the speed "
                "from it on)"
            )
        if not (np.all(np.isfinite(c)) and np.all(np.isfinite(v))):
            raise ModelInputError("speed_change_min or speed_fraction holds a non-finite value")
        if c[0] != 0.0:
            raise ModelInputError(
                f"speed_change_min starts at {c[0]!r}; expected 0 (the speed from the start "
                "of the record)"
            )
        if np.any(np.diff(c) <= 0.0):
            bad = int(np.flatnonzero(np.diff(c) <= 0.0)[0]) + 1
            raise ModelInputError(
                f"speed_change_min[{bad}] = {c[bad]!r} does not follow {c[bad - 1]!r}; "
                "expected strictly increasing change points [min]"
            )
        if np.any(v < 0.0):
            bad = int(np.flatnonzero(v < 0.0)[0])
            raise ModelInputError(
                f"speed_fraction[{bad}] = {v[bad]!r}; expected >= 0 (0 stopped, 1 filed speed)"
            )
        self.c, self.v = c, v
        self.P = np.concatenate(([0.0], np.cumsum(v[:-1] * np.diff(c))))

    def position(self, t) -> np.ndarray:
        t = np.asarray(t, dtype=float)
        seg = np.maximum(np.searchsorted(self.c, t, side="right") - 1, 0)
        return self.P[seg] + self.v[seg] * (t - self.c[seg])

    def first_time(self, p) -> np.ndarray:
        """``inf{t : P(t) >= p}`` (inf where never reached)."""
        p = np.asarray(p, dtype=float)
        seg = np.searchsorted(self.P, p, side="left") - 1
        out = np.zeros(p.shape)
        inside = seg >= 0
        s = seg[inside]
        with np.errstate(divide="ignore", invalid="ignore"):
            # P rises across segment s (P[s] < p <= P[s+1]), or s is the last segment
            t = self.c[s] + (p[inside] - self.P[s]) / self.v[s]
        out[inside] = np.where(self.v[s] > 0.0, t, np.inf)
        return out

    def last_time(self, p) -> np.ndarray:
        """``sup{t : P(t) <= p}`` (inf where the conveyor never passes ``p``)."""
        p = np.asarray(p, dtype=float)
        seg = np.maximum(np.searchsorted(self.P, p, side="right") - 1, 0)
        with np.errstate(divide="ignore", invalid="ignore"):
            t = self.c[seg] + (p - self.P[seg]) / self.v[seg]
        return np.where(self.v[seg] > 0.0, t, np.inf)

    def segment(self, t, side: str) -> np.ndarray:
        """Segment holding ``t`` (``side='right'``) or ending at/after it (``'left'``)."""
        return np.maximum(np.searchsorted(self.c, np.asarray(t, float), side=side) - 1, 0)


def conveyor_position_min(time_min, speed_change_min=(0.0,), speed_fraction=(1.0,)) -> np.ndarray:
    """Conveyor position ``P(t) = ∫_0^t v`` in minutes of travel at filed speed.

    Parameters
    ----------
    time_min : array_like
        Times [min].
    speed_change_min : sequence of float
        Change points of the conveyor's speed [min], strictly increasing, the first 0.
    speed_fraction : sequence of float
        Speed from each change point on, relative to the filed speed [-] (1 filed, 0 stopped).

    Returns
    -------
    numpy.ndarray
        Position [min at filed speed], shape of ``time_min``.
    """
    return _Conveyor(speed_change_min, speed_fraction).position(time_min)


# --------------------------------------------------------------------------- helpers


def _check_grid(time_min) -> tuple[np.ndarray, float]:
    t = np.asarray(time_min, dtype=float)
    if t.ndim != 1 or t.size < 2:
        raise ModelInputError(f"time_min has shape {t.shape}; expected a 1-D grid of >= 2 times")
    return uniform_grid(t)


def _sparse_table(values: np.ndarray, pad_value: float) -> np.ndarray:
    """``table[k, i] = min(values[i : i + 2**k])``; past the end, ``pad_value`` fills in."""
    n = values.size
    levels = max(1, n.bit_length())
    table = np.full((levels, n), pad_value)
    table[0] = values
    width = 1
    for k in range(1, levels):
        prev = table[k - 1]
        np.minimum(prev[: n - width], prev[width:], out=table[k, : n - width])
        table[k, n - width:] = np.minimum(prev[n - width:], pad_value)
        width *= 2
    return table


def _range_min(table: np.ndarray, first: np.ndarray, last: np.ndarray) -> np.ndarray:
    """``min(values[first : last + 1])`` per element; ``+inf`` where ``last < first``."""
    n = table.shape[1]
    first = np.clip(first, 0, n - 1)
    last = np.clip(last, -1, n - 1)
    width = last - first + 1
    ok = width > 0
    k = np.zeros(width.shape, dtype=np.int64)
    k[ok] = np.floor(np.log2(width[ok])).astype(np.int64)
    # guard the float log against an off-by-one at exact powers of two
    k = np.where(ok & ((1 << (k + 1)) <= width), k + 1, k)
    k = np.where(ok & ((1 << k) > width), k - 1, k)
    other = np.where(ok, last - (1 << k) + 1, first)
    out = np.minimum(table[k, first], table[k, other])
    return np.where(ok, out, np.inf)


def _window_min(values: np.ndarray, count: int) -> np.ndarray:
    """``out[i] = min(values[i : i + count])`` for every full window (by doubling)."""
    out = values
    width = 1
    while 2 * width <= count:
        out = np.minimum(out[:-width], out[width:])
        width *= 2
    if width < count:  # two overlapping windows of ``width`` cover ``count``
        out = np.minimum(out[: out.size - (count - width)], out[count - width:])
    return out


def _read(values: np.ndarray, steps: np.ndarray) -> np.ndarray:
    """The record's line at ``steps`` grid steps from 0 (within ``_SNAP`` of a sample: on it)."""
    i = np.clip(np.floor(steps + _SNAP).astype(np.int64), 0, values.size - 1)
    frac = np.where(steps - i < _SNAP, 0.0, steps - i)
    nxt = np.minimum(i + 1, values.size - 1)
    return values[i] + frac * (values[nxt] - values[i])


def _response(unaccomplished: Unaccomplished, t: np.ndarray) -> np.ndarray:
    s = np.asarray(unaccomplished(t), dtype=float)
    if s.shape != t.shape or not np.all(np.isfinite(s)):
        raise ModelInputError(
            f"unaccomplished returned shape {s.shape} or non-finite values for {t.size} times; "
            "expected finite unaccomplished fractions of the same shape"
        )
    return 1.0 - s


# --------------------------------------------------------------------------- batch F


class _Batch:
    """Cold spot and F of many histories on one grid of time since entry (one kernel spectrum).

    Duhamel for a piecewise-linear history on ``τ_j = j Δt``:
    ``T_j = T_0 + (h_0 - T_0) U(τ_j) + Σ_{k<j} (h_{k+1} - h_k) K_{j-k}``, ``K`` the interval
    means of ``U`` (Gauss-Legendre, as superpose); the sum by real FFT, the kernel's spectrum
    computed once per transform length and reused for every row and every chunk.
    """

    def __init__(self, unaccomplished: Unaccomplished, columns: int, dt: float, initial_C: float,
                 reference_temperature_C: float, z_C: float, conservative: bool):
        self.dt = dt
        self.t0 = initial_C
        self.u = _response(unaccomplished, dt * np.arange(columns))
        sub = (np.arange(columns - 1)[:, None] + _GL_X[None, :]).ravel() * dt
        self.kernel = _response(unaccomplished, sub).reshape(columns - 1, _GAUSS_NODES) @ _GL_W
        # the lower bounds rest on every sample's weight being >= 0: U = 1 - S never falls
        falls = min(float(np.diff(self.u).min(initial=0.0)),
                    float(np.diff(self.kernel).min(initial=0.0)))
        if falls < -_MONOTONE_TOL:
            raise ModelInputError(
                "unaccomplished(t) rises somewhere over the passage; expected a step response "
                "that never goes back (S non-increasing), as conduction and Ball's lag form are"
            )
        self.rate = _LN10 / z_C
        self.tref = reference_temperature_C
        self.conservative = conservative
        self._spectra: dict[int, np.ndarray] = {}

    @staticmethod
    def size(columns: int, changing: int) -> int:
        """FFT length for ``columns`` kept terms of increments in columns ``0 .. changing``.

        The linear convolution has ``changing + columns - 1`` terms; a shorter circular one
        would wrap its tail into the kept terms.
        """
        return _fft.next_fast_len(max(changing + columns - 1, 2), real=True)

    def buffer(self, rows: int, columns: int, changing: int) -> np.ndarray:
        """A zeroed (rows × FFT length) buffer for the increments."""
        return np.zeros((rows, self.size(columns, changing)))

    def F(self, increments: np.ndarray, columns: int, first_C: np.ndarray,
          last_column: np.ndarray) -> np.ndarray:
        """F [min] of each row, integrated over columns ``0 .. last_column``.

        ``increments[:, j] = h_j - h_{j-1}`` for ``1 <= j < columns`` (column 0 and the padding
        past ``columns`` zero: the sum for ``T_j`` then lands in column ``j``); ``first_C``:
        ``h_0``, the shell temperature at entry [°C].
        """
        m = columns
        size = increments.shape[1]
        spectrum = self._spectra.get(size)
        if spectrum is None:
            spectrum = self._spectra[size] = _fft.rfft(self.kernel[: m - 1], size)
        product = _fft.rfft(increments, axis=1, workers=-1, overwrite_x=True)
        product *= spectrum
        out = _fft.irfft(product, size, axis=1, workers=-1, overwrite_x=True)
        del product
        cold = out[:, :m]
        cold += (first_C[:, None] - self.t0) * self.u[None, :m]
        cold += self.t0 - self.tref
        cold *= self.rate
        rate = np.exp(cold, out=cold)  # lethal rate 10^((T - Tref)/z)
        n = rate.shape[0]
        rows = np.arange(n)
        if self.conservative:
            # interval k credited min(L_k, L_k+1), intervals 0 .. last_column - 1
            rate = np.minimum(rate[:, :-1], rate[:, 1:])
            stop = last_column
        else:
            stop = last_column + 1  # samples 0 .. last_column, the two ends halved below
        total = rate.sum(axis=1)
        for i in np.flatnonzero(stop < rate.shape[1]).tolist():  # rows ending early
            total[i] = rate[i, : stop[i]].sum()
        if not self.conservative:
            total -= 0.5 * (rate[:, 0] + rate[rows, last_column])
        return self.dt * total


# --------------------------------------------------------------------------- the engine


def continuous_entries(
    time_min,
    shell_C,
    *,
    residence_min: float,
    containers_per_min: float,
    entry_start_min: float,
    entry_end_min: float,
    unaccomplished: Unaccomplished,
    initial_C: float,
    cooling_C: float,
    cooling_min: float,
    process_temperature_C: float,
    tolerance_C: float = 0.0,
    speed_change_min: Sequence[float] = (0.0,),
    speed_fraction: Sequence[float] = (1.0,),
    reference_temperature_C: float = F0_REFERENCE_TEMPERATURE_C,
    z_C: float = F0_Z_C,
    conservative: bool = False,
    entry_step_min: float | None = None,
    bound_slots: bool = True,
    max_cells: int = _DEFAULT_MAX_CELLS,
) -> ContinuousEntries:
    """F at the cold spot of every container entering a continuous retort.

    Method: each container's own shell history (from its entry to its exit, the conveyor's
    stops and speed changes included) followed by cooling water; Duhamel superposition of a
    linear step response ([3]) in batches sharing one kernel spectrum; General Method ([2]).
    The model and its assumptions are in the module docstring; the systems are those of
    21 CFR 113.40(d) (continuous rotary, reel-and-spiral) and 113.40(f) (hydrostatic) [1].

    Parameters
    ----------
    time_min : array_like
        Uniform time grid of the shell record, starting at 0 [min].
    shell_C : array_like
        Shell (steam dome) temperature on that grid [°C]; the lower of the indicating and
        recording devices, cold-zone offset applied, is the caller's to give.
    residence_min : float
        Filed residence time in the shell at filed speed (the scheduled process time) [min].
    containers_per_min : float
        Entry rate at filed speed [1/min]: reel rpm × containers per turn, or carriers per min ×
        containers per carrier.
    entry_start_min, entry_end_min : float
        Production window: the first and the last container's entry [min]. Containers sit
        ``1 / containers_per_min`` apart in conveyor travel from the one at the window's start;
        one at a position the conveyor had reached before ``entry_start_min`` (stopped there)
        entered before the window and is not counted.
    unaccomplished : callable
        Linear step response ``S(t)`` at the cold spot, ``t`` an array of times [min] (e.g. a
        ``functools.partial`` of ``cylinder_centre_unaccomplished``).
    initial_C : float
        Product temperature at entry [°C].
    cooling_C : float
        Cooling water temperature after the exit [°C].
    cooling_min : float
        Time in the cooling water counted in F [min].
    process_temperature_C : float
        Filed shell temperature [°C].
    tolerance_C : float, optional
        A record sample at or above ``process_temperature_C - tolerance_C`` counts as nominal;
        the shared nominal F is computed at that floor [°C]. Default 0.
    speed_change_min : sequence of float, optional
        Change points of the conveyor's speed [min], strictly increasing, the first 0.
    speed_fraction : sequence of float, optional
        Speed from each change point on, relative to the filed speed [-] (1 filed, 0 stopped,
        0.8 a slow reel). Default: filed speed throughout.
    reference_temperature_C : float, optional
        Tref of F [°C]; 121.1 °C for F0.
    z_C : float, optional
        z [°C]; 10 °C for F0.
    conservative : bool, optional
        General Method with each interval credited at its lower lethal rate (as
        ``general_method(conservative=True)``).
    entry_step_min : float, optional
        Conveyor travel between rows [min at filed speed]. Default: one container
        (``1 / containers_per_min``) but not less than one record step.
    bound_slots : bool, optional
        True (default): each row's F bounds every container of its slot from below. False: the
        F of the slot's first container (its history read on the record's line).
    max_cells : int, optional
        Rows × FFT length per batch (memory bound).

    Returns
    -------
    ContinuousEntries
        One row per slot of entries, in entry order.

    Raises
    ------
    ModelInputError
        (a ``ModelError`` and a ``ValueError``) for a grid that is not uniform from 0, a
        non-finite or out-of-range number, a speed schedule that is not one, a production window
        in which the conveyor did not move, a record that ends before the last container leaves
        the shell, or a step response that misbehaves.

    References
    ----------
    .. [1] 21 CFR 113.40(d) and (f).
    .. [2] Bigelow et al., *NCA Bulletin* 16-L (1920).
    .. [3] Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed., 1959.
    """
    t, dt = _check_grid(time_min)
    shell = np.asarray(shell_C, dtype=float)
    if shell.shape != t.shape:
        raise ModelInputError(
            f"shell_C has shape {shell.shape}; expected the shape of time_min {t.shape}"
        )
    if not np.all(np.isfinite(shell)):
        bad = int(np.flatnonzero(~np.isfinite(shell))[0])
        raise ModelInputError(
            f"shell_C[{bad}] = {shell[bad]!r}; expected a finite temperature [°C]"
        )
    residence = _positive("residence_min", residence_min, "min")
    rate_in = _positive("containers_per_min", containers_per_min, "1/min")
    start = _finite("entry_start_min", entry_start_min)
    end = _finite("entry_end_min", entry_end_min)
    if start < 0.0 or end < start:
        raise ModelInputError(
            f"entry window {start!r} .. {end!r} min; expected 0 <= entry_start_min <= "
            "entry_end_min [min]"
        )
    t0 = _finite("initial_C", initial_C)
    cool = _finite("cooling_C", cooling_C)
    cooling = float(cooling_min)
    if not (math.isfinite(cooling) and cooling >= 0.0):
        raise ModelInputError(f"cooling_min = {cooling_min!r}; expected a finite time >= 0 [min]")
    floor = _finite("process_temperature_C", process_temperature_C)
    tol = float(tolerance_C)
    if not (math.isfinite(tol) and tol >= 0.0):
        raise ModelInputError(f"tolerance_C = {tolerance_C!r}; expected a finite value >= 0 [°C]")
    floor -= tol
    tref = _finite("reference_temperature_C", reference_temperature_C)
    z = _positive("z_C", z_C, "°C")
    if entry_step_min is None:
        step = max(1.0 / rate_in, dt)
    else:
        step = _positive("entry_step_min", entry_step_min, "min")
    if int(max_cells) < 1:
        raise ModelInputError(f"max_cells = {max_cells!r}; expected a positive integer")
    conveyor = _Conveyor(speed_change_min, speed_fraction)

    # ---- rows: slots between nodes of conveyor position (a stop's position is two nodes)
    p_start, p_end = (float(x) for x in conveyor.position([start, end]))
    if not p_end > p_start:
        raise ModelInputError(
            f"the conveyor did not move between entry_start_min = {start!r} and entry_end_min = "
            f"{end!r}: no container entered"
        )
    tol_p = 1e-9 * max(1.0, p_end)
    count = math.floor((p_end - p_start) / step + 1e-9)
    lattice = p_start + step * np.arange(count + 1)
    if p_end - lattice[-1] > tol_p:
        lattice = np.append(lattice, p_end)
    else:
        lattice[-1] = p_end
    stopped = conveyor.v == 0.0
    stops = np.unique(conveyor.P[stopped])
    stops = stops[(stops >= p_start - tol_p) & (stops <= p_end + tol_p)]
    if stops.size:
        near = np.abs(lattice[:, None] - stops[None, :]).min(axis=1) <= tol_p
        lattice = lattice[~near]
    node_p = np.concatenate((lattice, stops, stops))
    node_t = np.concatenate((
        conveyor.first_time(lattice), conveyor.first_time(stops), conveyor.last_time(stops),
    ))
    # 0: a lattice position; 1: a stop's position as its start; 2: as its end
    node_kind = np.concatenate((np.zeros(lattice.size), np.ones(stops.size),
                                np.full(stops.size, 2.0)))
    node_t = np.clip(node_t, start, end)
    order = np.lexsort((node_t, node_p))
    node_p, node_t, node_kind = node_p[order], node_t[order], node_kind[order]
    row_of = np.flatnonzero(np.diff(node_p) > tol_p)  # node index of each row's start
    a, b = row_of, row_of + 1
    if stops.size and abs(stops[0] - p_start) <= tol_p and (
            conveyor.first_time(stops[:1])[0] >= start - _SNAP * dt):
        # the window opens as the conveyor stops: the container at the first position entered
        # then and waits inside; it has a slot of its own (one position, one entry time)
        first_node = int(np.flatnonzero(node_kind == 1)[0])
        a = np.concatenate(([first_node], a))
        b = np.concatenate(([first_node], b))
    p_a, p_b = node_p[a], node_p[b]
    t_a, t_b = node_t[a], node_t[b]
    start_kind, end_kind = node_kind[a], node_kind[b]
    n_rows = a.size

    # ---- exits and residences
    exit_node = conveyor.first_time(node_p + residence)
    x_a, x_b = exit_node[a], exit_node[b]
    if not np.all(np.isfinite(x_b)) or float(x_b.max()) > t[-1] + _SNAP * dt:
        last = float(x_b.max())
        when = (f"at {last!r} min" if math.isfinite(last)
                else "never (the conveyor stays stopped)")
        raise ModelInputError(
            f"the shell record ends at {t[-1]!r} min but the last container leaves the shell "
            f"{when}; extend the record or end the production window earlier"
        )
    if bound_slots:
        res = np.minimum(x_a - t_a, x_b - t_b)
        # interior kinks of x(p) - e(p): a speed change at entry or at exit inside the slot
        kinks = np.concatenate((conveyor.P, conveyor.P - residence))
        kinks = kinks[(kinks > p_start) & (kinks < p_end)]
        if kinks.size:
            row = np.searchsorted(p_a, kinks, side="right") - 1
            inside = (row >= 0) & (kinks > p_a[np.maximum(row, 0)] + tol_p) & (
                kinks < p_b[np.maximum(row, 0)] - tol_p)
            k = kinks[inside]
            kink_res = conveyor.first_time(k + residence) - conveyor.first_time(k)
            np.minimum.at(res, row[inside], kink_res)
    else:
        res = x_a - t_a

    # ---- columns: samples in the shell, then cooling; and each row's window on the record
    shell_steps = np.floor(res / dt + _SNAP).astype(np.int64)
    nominal_steps = math.floor(residence / dt + _SNAP)
    cooling_steps = math.ceil(cooling / dt - _SNAP)
    last_column = shell_steps + cooling_steps
    lo = np.floor(t_a / dt + _SNAP).astype(np.int64)
    if bound_slots:
        hi = np.maximum(np.ceil(t_b / dt - _SNAP).astype(np.int64), lo)
        width = hi - lo  # window of width + 1 samples at each time since entry
        frac = np.zeros(n_rows)
    else:
        frac = t_a / dt - lo
        frac = np.where(frac < _SNAP, 0.0, frac)
        width = (frac > 0.0).astype(np.int64)
    table = _sparse_table(shell, cool)

    seg_a = conveyor.segment(t_a, "right")
    seg_b = conveyor.segment(x_b, "left")
    off_prefix = np.concatenate(([0], np.cumsum(np.abs(conveyor.v - 1.0) > _SNAP)))
    off_speed = off_prefix[seg_b + 1] - off_prefix[seg_a] > 0
    # lowest shell temperature any container of the slot saw inside (record read as linear)
    seen = np.minimum(_read(shell, t_a / dt), _read(shell, x_b / dt))
    inner = _range_min(table, np.ceil(t_a / dt - _SNAP).astype(np.int64),
                       np.floor(x_b / dt + _SNAP).astype(np.int64))
    lowest = np.minimum(seen, inner)
    # nominal: filed speed throughout, the filed residence, and every sample the row's history
    # reads (window_min) and every temperature its containers saw inside (lowest) at the floor
    window_min = _range_min(table, lo, lo + width + shell_steps - 1)
    at_floor = window_min >= floor
    affected = off_speed | (shell_steps != nominal_steps) | ~at_floor | ~(lowest >= floor)
    # a row whose samples are all at or above the floor is credited the floor for its own
    # residence (slot mode: a bound; the nominal rows are the ones with the filed residence)
    flat = ~affected | (at_floor if bound_slots else False)
    own = ~flat

    # ---- F: each residence at the floor once, the other rows in batches
    columns = max(2, nominal_steps + cooling_steps + 1, int(last_column.max(initial=0)) + 1)
    batch = _Batch(unaccomplished, columns, dt, t0, tref, z, bool(conservative))
    F = np.empty(n_rows)
    residences, which = np.unique(np.append(shell_steps[flat], nominal_steps), return_inverse=True)
    F_floor = np.empty(residences.size)
    per_chunk = max(1, int(max_cells) // _Batch.size(columns, columns))
    for i0 in range(0, residences.size, per_chunk):
        c = residences[i0:i0 + per_chunk]
        m = int(c.max()) + cooling_steps + 1
        increments = batch.buffer(c.size, m, int(c.max()))
        increments[np.arange(c.size), c] = cool - floor  # the exit; column 0 when c = 0
        first = np.where(c > 0, floor, cool)
        increments[c == 0, 0] = 0.0
        F_floor[i0:i0 + per_chunk] = batch.F(increments, m, first, c + cooling_steps)
    F[flat] = F_floor[which[:-1]]
    nominal_F = float(F_floor[which[-1]])
    rows = np.flatnonzero(own)
    rows = rows[np.argsort(last_column[rows], kind="stable")]  # similar lengths share a chunk
    chunk = per_chunk
    # the record padded with cooling water (read only past an exit, by rounding)
    record = np.concatenate((shell, np.full(columns + int(width.max(initial=0)) + 2, cool)))
    lines: dict[int, tuple[np.ndarray, np.ndarray]] = {}  # windowed minima, by window width

    def line(w: int) -> tuple[np.ndarray, np.ndarray]:
        if w not in lines:
            values = _window_min(record, w + 1) if bound_slots else record
            lines[w] = values, np.diff(values)
        return lines[w]

    window = np.lib.stride_tricks.sliding_window_view
    for i0 in range(0, rows.size, chunk):
        r = rows[i0:i0 + chunk]
        m = max(2, int(last_column[r].max()) + 1)
        steps = shell_steps[r]
        top = int(steps.max())  # increments live in columns 1 .. top
        increments = batch.buffer(r.size, m, top)
        first = np.empty(r.size)
        before_exit = np.empty(r.size)  # h at the last sample in the shell
        for w in (np.unique(width[r]).tolist() if bound_slots else [0]):
            sel = np.flatnonzero(width[r] == w) if bound_slots else np.arange(r.size)
            values, rises = line(w)
            start = lo[r[sel]]
            last = start + np.maximum(steps[sel] - 1, 0)
            if top > 1:
                inc = window(rises, top - 1)[start]  # h_j - h_j-1, j = 1 .. top - 1
                if not bound_slots:  # the record's line at the entry time, between samples
                    f = frac[r[sel], None]
                    inc *= 1.0 - f
                    inc += f * window(rises, top - 1)[start + 1]
                increments[sel, 1:top] = inc
            if bound_slots:
                first[sel] = values[start]
                before_exit[sel] = values[last]
            else:
                f = frac[r[sel]]
                first[sel] = values[start] + f * rises[start]
                before_exit[sel] = values[last] + f * rises[last]
        # the exit: a ramp to the cooling water over the last step, nothing changes after it
        for i, c in enumerate(steps.tolist()):
            if c == 0:
                first[i] = cool
                increments[i, 1:top + 1] = 0.0
            else:
                increments[i, c] = cool - before_exit[i]
                increments[i, c + 1:top + 1] = 0.0
        F[r] = batch.F(increments, m, first, last_column[r])

    # ---- containers per slot and the lowest shell temperature seen
    # containers at positions k / containers_per_min from the first; one exactly at a stop's
    # position entered as the stop began (the first time the conveyor reached it): it belongs
    # to the slot ending there, whose window holds that entry time
    def first_at_or_after(p, strictly):
        x = (p - p_start) * rate_in
        return np.where(strictly, np.floor(x + 1e-9) + 1.0, np.ceil(x - 1e-9))

    first_pos = first_at_or_after(p_a, start_kind == 2)
    next_pos = first_at_or_after(p_b, end_kind == 1)
    next_pos[-1] = math.floor((p_end - p_start) * rate_in + 1e-9) + 1
    containers = np.maximum(next_pos - first_pos, 0).astype(np.int64)

    return ContinuousEntries(
        entry_min=t_a, entry_end_min=t_b, containers=containers, residence_min=res,
        exit_min=x_b, F_min=F, lowest_shell_C=lowest, affected=affected, own_history=own,
        off_filed_speed=off_speed, nominal_F_min=nominal_F, floor_C=floor,
        bound_slots=bool(bound_slots),
    )


# --------------------------------------------------------------------------- grouping


def threshold_category(
    bounds_min: Sequence[float], labels: Sequence[str],
) -> Callable[[float], str]:
    """A category from F by thresholds: ``labels[i]`` for ``bounds[i-1] <= F < bounds[i]``.

    Parameters
    ----------
    bounds_min : sequence of float
        Increasing F thresholds [min].
    labels : sequence of str
        One more label than thresholds: below the first, between each pair, at or above the last.

    Returns
    -------
    callable
        ``f(F_min) -> str``.
    """
    bounds = np.asarray(bounds_min, dtype=float)
    labels = [str(x) for x in labels]
    if bounds.ndim != 1 or not np.all(np.isfinite(bounds)) or np.any(np.diff(bounds) <= 0.0):
        raise ModelInputError("bounds_min must be finite and strictly increasing [min]")
    if len(labels) != bounds.size + 1:
        raise ModelInputError(
            f"{len(labels)} labels for {bounds.size} thresholds; expected one more label than "
            "thresholds"
        )

    def category(F_min: float) -> str:
        return labels[int(np.searchsorted(bounds, float(F_min), side="right"))]

    return category


def group_entries(
    entries: ContinuousEntries,
    category_of: Callable[[float], str],
    *,
    unaffected: str = UNAFFECTED,
) -> list[dict]:
    """Consecutive rows of one category, as entry-time intervals.

    Rows that received the nominal F (their whole passage nominal) are ``unaffected``; every
    other row, including one that still met its target, takes ``category_of(F)``. A new
    interval starts where the category changes or where the conveyor's filed speed starts or
    stops being kept (``off_filed_speed``: agitation is a critical factor of its own).

    Parameters
    ----------
    entries : ContinuousEntries
        Rows from :func:`continuous_entries`.
    category_of : callable
        ``f(F_min) -> str`` for an affected row (e.g. a disposition; see
        :func:`threshold_category`).
    unaffected : str, optional
        Category of the nominal rows. Default ``"unaffected"``.

    Returns
    -------
    list of dict
        In entry order, each ``{entry_start_min, entry_end_min, containers, min_F_min,
        category, lowest_shell_C, longest_residence_min, off_filed_speed, affected}``: the
        first container's entry and the interval's end [min], containers, the lowest F [min],
        the category, the lowest shell temperature seen [°C], the longest residence [min], and
        whether any row was off filed speed or affected (not nominal). The intervals cover
        every container of the production window once.
    """
    n = entries.rows
    if n == 0:
        return []
    categories = np.empty(n, dtype=object)
    categories[~entries.affected] = unaffected
    for i in np.flatnonzero(entries.affected):
        label = category_of(float(entries.F_min[i]))
        if not isinstance(label, str):
            raise ModelInputError(
                f"category_of({float(entries.F_min[i])!r}) returned {label!r}; expected a str"
            )
        categories[i] = label
    change = np.ones(n, dtype=bool)
    change[1:] = (categories[1:] != categories[:-1]) | (
        entries.off_filed_speed[1:] != entries.off_filed_speed[:-1])
    starts = np.flatnonzero(change)
    ends = np.append(starts[1:], n)
    out = []
    for a, b in zip(starts.tolist(), ends.tolist()):
        out.append({
            "entry_start_min": float(entries.entry_min[a]),
            "entry_end_min": float(entries.entry_end_min[b - 1]),
            "containers": int(entries.containers[a:b].sum()),
            "min_F_min": float(entries.F_min[a:b].min()),
            "category": categories[a],
            "lowest_shell_C": float(entries.lowest_shell_C[a:b].min()),
            "longest_residence_min": float(entries.residence_min[a:b].max()),
            "off_filed_speed": bool(entries.off_filed_speed[a:b].any()),
            "affected": bool(entries.affected[a:b].any()),
        })
    return out
