"""Calibration from heat penetration test data: fh, jh (and fc, jc, thermal diffusivity).

A heat penetration test records the retort temperature and one or more thermocouples placed at
the container's cold spot. From each thermocouple this module finds the heating-curve
parameters two ways:

- **Ball's semi-logarithmic method** (Ball [1]): on ``log10(T_R - T)`` against time the heating
  curve becomes, after a lag, a straight line of slope ``-1/fh``; its value at the corrected zero
  (58% of the come-up: Ball's 42% rule, the come-up counted 42% effective) gives the
  pseudo-initial temperature ``Tpih`` and ``jh = (T_R - Tpih)/(T_R - IT)``. Cooling: the same
  on ``log10(T - Tw)`` after steam off, zero at steam off, giving ``fc`` and
  ``jc = (Tw - Tpic)/(Tw - Tic)``.
- **Least squares of the model response** to the *actual* retort record: the heating-curve step
  response (or the conduction series) superposed over the record (Duhamel), its parameters fitted
  to the thermocouple readings by ``scipy.optimize.least_squares``. These are the parameters that
  make this tool's own cold-spot model reproduce the test.

Thermal diffusivity for the conduction models follows from fh and the container's inside
dimensions (Olson & Jackson [3]).

The CSV format (see :func:`read_heat_penetration_csv`): a time column ``time_min`` (or ``time``,
ISO-8601), a retort column ``retort_C`` or ``retort_F``, and one column per thermocouple whose
name ends in ``_C`` or ``_F`` (its unit); the thermocouple's name is the column name without the
suffix.

The numerical functions take arrays and floats and do no I/O; only the reader touches files.

References
----------
.. [1] C. O. Ball, "Thermal process time for canned food", *Bulletin of the National Research
   Council* 7, part 1, no. 37 (1923).
.. [2] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., Academic Press, 1973.
.. [3] F. C. W. Olson and J. M. Jackson, "Heating curves: theory and practical application",
   *Industrial and Engineering Chemistry* 34 (1942) 337-341.
.. [4] H. S. Carslaw and J. C. Jaeger, *Conduction of Heat in Solids*, 2nd ed., Oxford:
   Clarendon Press, 1959.
"""

from __future__ import annotations

import functools
import hashlib
import math
from dataclasses import asdict, dataclass, field
from datetime import datetime
from pathlib import Path

import numpy as np
from scipy.optimize import least_squares

from deviation.inputs import logs as _profile
from deviation.errors import ModelError, RecordError
from deviation.physics.heating import conduction
from deviation.physics.heating.heating_curve import step_unaccomplished
from deviation.physics.heating.superposition import superpose
from deviation.physics.lethality import general_method
from deviation.inputs.units import fahrenheit_to_celsius

__all__ = [
    "CORRECTED_ZERO_FRACTION",
    "HeatPenData",
    "RetortPhases",
    "HeatingCurveFit",
    "CoolingCurveFit",
    "ModelFit",
    "ContainerGeometry",
    "ThermocoupleFit",
    "FitReport",
    "read_heat_penetration_csv",
    "retort_phases",
    "semilog_fit",
    "semilog_cooling_fit",
    "least_squares_fit",
    "fit_all",
    "paste_table",
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
#: F0 reference (21 CFR 113 practice: 121.1 °C, z 10 °C) for the measured F0 of each thermocouple.
_TREF_C, _Z_C = 121.1, 10.0

_WHAT = "heat penetration file"


# --------------------------------------------------------------------------------------------
# Data
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class HeatPenData:
    """A heat penetration test: retort temperature and thermocouple readings on one time axis.

    Parameters
    ----------
    time_min : numpy.ndarray
        Time from the first row (steam on), strictly increasing [min]
    retort_C : numpy.ndarray
        Retort temperature [°C]
    thermocouples : dict of str to numpy.ndarray
        Thermocouple name (column name less its unit suffix) to its readings [°C]; NaN where the
        row had no reading (an empty field)
    columns : dict of str to str
        Thermocouple name to the column name in the file
    source : str
        File path or the name given for the text
    sha256 : str or None
        SHA-256 hex digest of the file bytes when read from a file
    """

    time_min: np.ndarray
    retort_C: np.ndarray
    thermocouples: dict[str, np.ndarray]
    columns: dict[str, str]
    source: str
    sha256: str | None = None


@dataclass(frozen=True)
class RetortPhases:
    """Phases of a heat penetration test read from its retort column.

    Parameters
    ----------
    plateau_C : float
        Hold (process) temperature: median of the readings within 1 °C of the highest [°C]
    come_up_min : float
        First time the retort reaches the plateau (within 0.5 °C) [min]
    steam_off_min : float or None
        Last reading at the plateau when a cooling phase follows it; None without one [min]
    cooling_water_C : float or None
        Cooling water temperature: median retort reading over the last quarter of the cooling
        phase [°C]; None without a cooling phase
    """

    plateau_C: float
    come_up_min: float
    steam_off_min: float | None
    cooling_water_C: float | None


@dataclass(frozen=True)
class HeatingCurveFit:
    """Result of Ball's semi-logarithmic heating-curve method for one thermocouple.

    Parameters
    ----------
    fh_min : float
        Heating rate index fh, ``-1/slope`` of the straight line [min]
    jh : float
        Heating lag factor ``(T_R - Tpih)/(T_R - IT)`` [-]
    retort_C : float
        Retort (process) temperature T_R used [°C]
    initial_C : float
        Initial temperature IT [°C]
    come_up_min : float
        Come-up time [min]
    corrected_zero_min : float
        Ball's corrected zero, ``0.58 · come_up_min`` [min]
    pseudo_initial_C : float
        Tpih, the line's temperature at the corrected zero [°C]
    r_squared : float
        Coefficient of determination of the weighted line fit on ``log10(T_R - T)`` [-]
    rms_residual_C : float
        RMS of the readings' departure from the line in the window [°C]
    window_start_min, window_end_min : float
        First and last reading of the straight-line window [min]
    n_points : int
        Readings in the window
    noise_estimate_C : float
        Thermocouple noise standard deviation used for the straightness tests: given, or the
        RMS departure from the line over the last half of the usable readings [°C]
    note : str
        Anything the fit could not do as intended ("" when none)
    """

    fh_min: float
    jh: float
    retort_C: float
    initial_C: float
    come_up_min: float
    corrected_zero_min: float
    pseudo_initial_C: float
    r_squared: float
    rms_residual_C: float
    window_start_min: float
    window_end_min: float
    n_points: int
    noise_estimate_C: float
    note: str = ""


@dataclass(frozen=True)
class CoolingCurveFit:
    """Result of the semi-logarithmic cooling-curve method for one thermocouple.

    Parameters
    ----------
    fc_min : float
        Cooling rate index fc [min]
    jc : float
        Cooling lag factor ``(Tw - Tpic)/(Tw - Tic)`` [-]
    cooling_water_C : float
        Cooling water temperature Tw [°C]
    steam_off_min : float
        Steam off, the zero of the cooling curve [min]
    start_C : float
        Tic, the thermocouple's temperature at steam off [°C]
    pseudo_initial_C : float
        Tpic, the line's temperature at steam off [°C]
    r_squared, rms_residual_C, window_start_min, window_end_min, n_points, noise_estimate_C, note
        As in :class:`HeatingCurveFit`, on ``log10(T - Tw)``
    """

    fc_min: float
    jc: float
    cooling_water_C: float
    steam_off_min: float
    start_C: float
    pseudo_initial_C: float
    r_squared: float
    rms_residual_C: float
    window_start_min: float
    window_end_min: float
    n_points: int
    noise_estimate_C: float
    note: str = ""


@dataclass(frozen=True)
class ModelFit:
    """Least-squares fit of a cold-spot model's response to the actual retort record.

    Parameters
    ----------
    model : str
        ``"heating-curve"`` or ``"conduction"``
    parameters : dict of str to float
        Fitted values: ``fh_min``, ``jh`` (and ``fc_min``, ``jc`` with a cooling phase) for the
        heating-curve model; ``thermal_diffusivity_m2_s`` and the equivalent ``fh_min`` for
        conduction
    standard_errors : dict of str to float
        One standard error of each parameter, from the Jacobian at the solution (same units)
    rms_residual_C : float
        RMS of model minus reading [°C]
    n_points : int
        Readings fitted
    converged : bool
        The optimiser met a convergence test
    message : str
        The optimiser's own status message
    """

    model: str
    parameters: dict[str, float]
    standard_errors: dict[str, float]
    rms_residual_C: float
    n_points: int
    converged: bool
    message: str


@dataclass(frozen=True)
class ContainerGeometry:
    """Inside dimensions of the test container, for the conduction models.

    Parameters
    ----------
    shape : {"cylinder", "brick"}
        Container shape
    diameter_mm, height_mm : float or None
        Cylinder inside diameter and height [mm]
    length_mm, width_mm, thickness_mm : float or None
        Brick inside dimensions [mm]
    """

    shape: str
    diameter_mm: float | None = None
    height_mm: float | None = None
    length_mm: float | None = None
    width_mm: float | None = None
    thickness_mm: float | None = None

    def __post_init__(self) -> None:
        need = {"cylinder": ("diameter_mm", "height_mm"),
                "brick": ("length_mm", "width_mm", "thickness_mm")}.get(self.shape)
        if need is None:
            raise ModelError(f"container shape {self.shape!r}; expected 'cylinder' or 'brick'")
        for name in need:
            value = getattr(self, name)
            if value is None or not math.isfinite(value) or value <= 0.0:
                raise ModelError(f"a {self.shape} needs {name} > 0 [mm]; found {value!r}")

    def _dims_m(self) -> tuple[float, ...]:
        if self.shape == "cylinder":
            return self.diameter_mm / 2000.0, self.height_mm / 1000.0
        return self.length_mm / 1000.0, self.width_mm / 1000.0, self.thickness_mm / 1000.0

    def describe(self) -> str:
        """Dimensions in words, e.g. ``74 x 113 mm cylinder``."""
        if self.shape == "cylinder":
            return f"{self.diameter_mm:g} x {self.height_mm:g} mm cylinder"
        return f"{self.length_mm:g} x {self.width_mm:g} x {self.thickness_mm:g} mm brick"

    def diffusivity_from_fh(self, fh_min: float) -> float:
        """Thermal diffusivity [m²/s] from fh [min] (Olson & Jackson 1942 [3])."""
        if self.shape == "cylinder":
            return conduction.diffusivity_from_fh_cylinder(fh_min, *self._dims_m())
        return conduction.diffusivity_from_fh_brick(fh_min, *self._dims_m())

    def fh_from_diffusivity(self, diffusivity_m2_s: float) -> float:
        """fh [min] from the thermal diffusivity [m²/s] (Olson & Jackson 1942 [3])."""
        if self.shape == "cylinder":
            return conduction.fh_from_diffusivity_cylinder(diffusivity_m2_s, *self._dims_m())
        return conduction.fh_from_diffusivity_brick(diffusivity_m2_s, *self._dims_m())

    def unaccomplished(self, diffusivity_m2_s: float):
        """Centre step response ``S(t)`` of the conduction series (Carslaw & Jaeger [4])."""
        if self.shape == "cylinder":
            radius_m, height_m = self._dims_m()
            return functools.partial(conduction.cylinder_centre_unaccomplished,
                                     diffusivity_m2_s=diffusivity_m2_s, radius_m=radius_m,
                                     height_m=height_m)
        length_m, width_m, thickness_m = self._dims_m()
        return functools.partial(conduction.brick_centre_unaccomplished,
                                 diffusivity_m2_s=diffusivity_m2_s, length_m=length_m,
                                 width_m=width_m, thickness_m=thickness_m)


@dataclass(frozen=True)
class ThermocoupleFit:
    """Everything fitted for one thermocouple.

    Parameters
    ----------
    name : str
        Thermocouple name
    initial_C : float
        Initial temperature used [°C]
    measured_F0_min : float
        F0 of the thermocouple's own readings by the General Method (121.1 °C, z 10 °C) [min]
    semilog : HeatingCurveFit or None
        Ball's semi-log heating fit
    cooling : CoolingCurveFit or None
        Semi-log cooling fit (with a cooling phase)
    heating_curve : ModelFit or None
        Least squares, heating-curve model
    conduction : ModelFit or None
        Least squares, conduction model (with container dimensions)
    diffusivity_from_fh_m2_s : float or None
        Thermal diffusivity from the semi-log fh and the dimensions [m²/s]
    problems : list of str
        Fits that could not be made, and why
    """

    name: str
    initial_C: float
    measured_F0_min: float
    semilog: HeatingCurveFit | None = None
    cooling: CoolingCurveFit | None = None
    heating_curve: ModelFit | None = None
    conduction: ModelFit | None = None
    diffusivity_from_fh_m2_s: float | None = None
    problems: list[str] = field(default_factory=list)


@dataclass(frozen=True)
class FitReport:
    """All thermocouples of a heat penetration test fitted, and the one chosen.

    Parameters
    ----------
    source : str
        The test file
    sha256 : str or None
        Its SHA-256 digest
    phases : RetortPhases
        Plateau, come-up, steam off and cooling water read from the retort column
    come_up_min : float
        Come-up time used for the corrected zero [min]
    come_up_detected : bool
        True when ``come_up_min`` was read from the retort column rather than given
    container : ContainerGeometry or None
        Dimensions for the conduction models
    thermocouples : list of ThermocoupleFit
        In column order
    chosen : str
        Name of the slowest-heating thermocouple: the largest semi-log fh
    lowest_F0 : str
        Name of the thermocouple whose readings gave the lowest measured F0
    """

    source: str
    sha256: str | None
    phases: RetortPhases
    come_up_min: float
    come_up_detected: bool
    container: ContainerGeometry | None
    thermocouples: list[ThermocoupleFit]
    chosen: str
    lowest_F0: str

    def chosen_fit(self) -> ThermocoupleFit:
        """The chosen thermocouple's fits."""
        return next(tc for tc in self.thermocouples if tc.name == self.chosen)

    def to_dict(self) -> dict:
        """A JSON-able dict (NaN and infinities become None)."""
        return _json_safe(asdict(self))


def _json_safe(obj):
    if isinstance(obj, dict):
        return {k: _json_safe(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_json_safe(v) for v in obj]
    if isinstance(obj, (float, np.floating)):
        value = float(obj)
        return value if math.isfinite(value) else None
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    return obj


# --------------------------------------------------------------------------------------------
# Reading the CSV
# --------------------------------------------------------------------------------------------


def _read_text(path: Path, source: str) -> tuple[str, str]:
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise RecordError(f"cannot read the {_WHAT}: {exc.strerror or exc}",
                          source=source) from None
    digest = hashlib.sha256(raw).hexdigest()
    try:
        text = raw.decode("utf-16") if raw.startswith((b"\xff\xfe", b"\xfe\xff")) else raw.decode(
            "utf-8-sig")
    except UnicodeDecodeError as exc:
        raise RecordError(
            f"the {_WHAT} is not UTF-8 text (byte 0x{raw[exc.start]:02x} at offset {exc.start}); "
            "expected a CSV file saved as UTF-8",
            source=source,
        ) from None
    return text, digest


def _header(header: list[str], line: int, source: str):
    """Time column, retort column and thermocouple columns of the header."""
    names = [name.strip() for name in header]
    listed = ", ".join(repr(name) for name in names)
    time_cols = [i for i, n in enumerate(names) if n.lower() in ("time_min", "time")]
    retort_cols = [i for i, n in enumerate(names) if n.lower() in ("retort_c", "retort_f")]
    if len(time_cols) > 1:
        raise RecordError(
            f"line {line}: {len(time_cols)} time columns in the header ("
            + ", ".join(names[i] for i in time_cols)
            + "); expected one: time_min (minutes) or time (ISO-8601 timestamps)",
            source=source,
        )
    if not time_cols:
        raise RecordError(
            f"line {line}: no time column in the header (found {listed}); expected time_min "
            f"(minutes) or time (ISO-8601 timestamps) in a {_WHAT}",
            source=source,
        )
    if len(retort_cols) > 1:
        raise RecordError(
            f"line {line}: {len(retort_cols)} retort columns in the header ("
            + ", ".join(names[i] for i in retort_cols)
            + "); expected one: retort_C or retort_F",
            source=source,
        )
    if not retort_cols:
        raise RecordError(
            f"line {line}: no retort column in the header (found {listed}); expected retort_C "
            f"or retort_F in a {_WHAT}",
            source=source,
        )
    time_index, retort_index = time_cols[0], retort_cols[0]
    time_name = names[time_index].lower()
    retort_unit = names[retort_index][-1].upper()
    thermocouples: list[tuple[str, int, str, str]] = []  # (name, index, column, unit)
    seen: dict[str, str] = {}
    for index, column in enumerate(names):
        if index in (time_index, retort_index):
            continue
        if not column:
            raise RecordError(
                f"line {line}: column {index + 1} has no name; expected a thermocouple column "
                "named like tc1_C or tc1_F",
                source=source,
            )
        if len(column) < 3 or column[-2:].upper() not in ("_C", "_F"):
            raise RecordError(
                f"line {line}, column {column}: not a thermocouple column (no _C or _F unit "
                "suffix); expected every column other than the time and retort columns to be a "
                "thermocouple named like tc1_C or tc1_F",
                source=source,
            )
        name = column[:-2]
        if name.lower() in seen:
            raise RecordError(
                f"line {line}: thermocouple {seen[name.lower()][:-2]} appears twice in the "
                f"header (columns "
                f"{seen[name.lower()]} and {column}); expected each thermocouple once",
                source=source,
            )
        seen[name.lower()] = column
        thermocouples.append((name, index, column, column[-1].upper()))
    if not thermocouples:
        raise RecordError(
            f"line {line}: no thermocouple column in the header (found {listed}); expected at "
            "least one column named like tc1_C or tc1_F",
            source=source,
        )
    return (time_name, time_index), (names[retort_index], retort_index, retort_unit), thermocouples


def _column_to_celsius(values: np.ndarray, column: str, unit: str, lines: list[int],
                       source: str, what: str) -> np.ndarray:
    """Unit look-alike checks and the plausible range, as for retort logs (profile.py)."""
    finite = np.isfinite(values)
    if not finite.any():
        return values
    with np.errstate(over="ignore", invalid="ignore"):
        highest = int(np.nanargmax(values))
        twin = f"{column[:-2]}_{'F' if unit == 'C' else 'C'}"
        if unit == "C":
            as_C_if_F = fahrenheit_to_celsius(values[finite])
            if values[highest] > _profile.HIGHEST_CELSIUS_READING_C and np.all(
                (as_C_if_F >= _profile.LOWEST_PLAUSIBLE_C)
                & (as_C_if_F <= _profile.HIGHEST_PLAUSIBLE_C)
            ):
                raise RecordError(
                    f"column {column}: values look like °F (highest {values[highest]:g} at line "
                    f"{lines[highest]}, above the {_profile.HIGHEST_CELSIUS_READING_C:g} °C no "
                    f"retort reaches); if the {what} is in Fahrenheit name the column {twin}",
                    source=source,
                )
            celsius = values
        else:
            if values[highest] < _profile.LOWEST_FAHRENHEIT_MAXIMUM_F:
                raise RecordError(
                    f"column {column}: values look like °C (all below "
                    f"{_profile.LOWEST_FAHRENHEIT_MAXIMUM_F:g} °F, highest {values[highest]:g} "
                    f"at line {lines[highest]}; a heat penetration test reaches about 240-265 "
                    f"°F); if the {what} is in Celsius name the column {twin}",
                    source=source,
                )
            celsius = fahrenheit_to_celsius(values)
        bad = np.flatnonzero(finite & ((celsius < _profile.LOWEST_PLAUSIBLE_C)
                                       | (celsius > _profile.HIGHEST_PLAUSIBLE_C)))
    if bad.size:
        i = int(bad[0])
        found = f"{values[i]:g} °{unit}" + (f" ({celsius[i]:.1f} °C)" if unit == "F" else "")
        raise RecordError(
            f"line {lines[i]}, column {column}: temperature {found} is impossible; expected "
            f"{_profile.LOWEST_PLAUSIBLE_C:g} to {_profile.HIGHEST_PLAUSIBLE_C:g} °C",
            source=source,
        )
    return np.asarray(celsius, dtype=float)


def read_heat_penetration_csv(path_or_text, *, source: str | None = None) -> HeatPenData:
    """Read a heat penetration test (CSV), validating every row.

    Parameters
    ----------
    path_or_text : str or os.PathLike
        A ``pathlib.Path`` or a string without a line break is a file path (UTF-8, with or
        without BOM, or UTF-16 with BOM); any other string is the CSV text itself.
    source : str, optional
        Name used in messages (default: the path, or ``"<text>"``).

    Returns
    -------
    HeatPenData
        Times shifted so the first row is 0 [min]; temperatures in [°C].

    Raises
    ------
    RecordError
        Naming the file line (1-based, every line counted), the column, the value found and what
        was expected.

    Notes
    -----
    Naming rule for the header (names trimmed; ``time_min``/``time``/``retort_*`` matched
    case-insensitively):

    - one time column: ``time_min`` (minutes) or ``time`` (ISO-8601 timestamps);
    - one retort column: ``retort_C`` or ``retort_F``;
    - every other column is a thermocouple, its unit given by the suffix ``_C`` or ``_F``
      (e.g. ``tc1_C``, ``tc2_F``); the thermocouple's name is the column name without the
      suffix. A column without a unit suffix is an error (a unit is never guessed).

    ``#`` comment lines and blank lines are skipped. An empty field in a thermocouple column is a
    missing reading (a thermocouple lost for some rows); an empty time or retort field is an
    error. Unit look-alike checks and the plausible range -50 to 160 °C are those of the retort
    logs (common practice).
    """
    digest = None
    if isinstance(path_or_text, Path) or (isinstance(path_or_text, str)
                                          and "\n" not in path_or_text
                                          and "\r" not in path_or_text):
        src = str(path_or_text) if source is None else source
        text, digest = _read_text(Path(path_or_text), src)
    else:
        src = "<text>" if source is None else source
        text = str(path_or_text)
    if text.startswith("\ufeff"):
        text = text[1:]
    lines = _profile._data_lines(text)
    rows = _profile._csv_rows(lines, src, _WHAT) if lines else []
    if not rows:
        raise RecordError(
            f"the {_WHAT} is empty; expected a header line naming time_min, retort_C and the "
            "thermocouple columns (tc1_C, ...), then at least 2 rows of readings",
            source=src,
        )
    header_line, header = rows[0]
    (time_name, time_index), (retort_name, retort_index, retort_unit), tcs = _header(
        header, header_line, src)
    data = rows[1:]
    if len(data) < 2:
        found = "no readings" if not data else f"only 1 reading (line {data[0][0]})"
        raise RecordError(f"the {_WHAT} has {found}; expected at least 2 rows", source=src)

    needed = len(header)
    line_numbers: list[int] = []
    time_texts: list[str] = []
    times: list[float] = []
    stamps: list[datetime] = []
    retort: list[float] = []
    readings = np.full((len(data), len(tcs)), np.nan)
    for row, (line, fields) in enumerate(data):
        if len(fields) < needed:
            raise RecordError(
                f"line {line}: {len(fields)} field(s) found; expected {needed} (the columns of "
                "the header)",
                source=src,
            )
        time_text = fields[time_index].strip()
        if time_name == "time_min":
            times.append(_profile._number(time_text, line, "time_min", "minutes from steam on",
                                          src))
        else:
            stamps.append(_profile._timestamp(time_text, line, src))
        retort.append(_profile._number(fields[retort_index], line, retort_name,
                                       f"a temperature [°{retort_unit}]", src))
        for k, (_, index, column, unit) in enumerate(tcs):
            if fields[index].strip():  # empty: no reading from this thermocouple on this row
                readings[row, k] = _profile._number(fields[index], line, column,
                                                    f"a temperature [°{unit}]", src)
        line_numbers.append(line)
        time_texts.append(time_text)

    time_min = _profile.checked_times(time_name, times, stamps, line_numbers, time_texts, src)

    retort_C = _column_to_celsius(np.array(retort), retort_name, retort_unit, line_numbers, src,
                                  _WHAT)
    thermocouples: dict[str, np.ndarray] = {}
    columns: dict[str, str] = {}
    for k, (name, _, column, unit) in enumerate(tcs):
        values = readings[:, k]
        if np.count_nonzero(np.isfinite(values)) < 2:
            raise RecordError(
                f"column {column}: {np.count_nonzero(np.isfinite(values))} reading(s); expected "
                "at least 2 (a thermocouple that failed from the start: remove its column)",
                source=src,
            )
        thermocouples[name] = _column_to_celsius(values, column, unit, line_numbers, src, _WHAT)
        columns[name] = column
    return HeatPenData(time_min=time_min, retort_C=retort_C, thermocouples=thermocouples,
                       columns=columns, source=src, sha256=digest)


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
    record = _profile.RetortProfile(time_min=rt0, temperature_C=rT, source="retort record")
    grid, retort_grid = _profile.resample_uniform(record, step)
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


# --------------------------------------------------------------------------------------------
# All thermocouples
# --------------------------------------------------------------------------------------------


def fit_all(
    data: HeatPenData,
    *,
    come_up_min: float | None = None,
    initial_C: float | None = None,
    container: ContainerGeometry | None = None,
) -> FitReport:
    """Fit every thermocouple of a heat penetration test by both methods; choose the slowest.

    For each thermocouple: Ball's semi-log heating fit (:func:`semilog_fit`), the cooling fit
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
        fits.append(ThermocoupleFit(name, IT, float(F0), semi, cool, hc, cond, alpha, problems))

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


# --------------------------------------------------------------------------------------------
# The table to paste into a case
# --------------------------------------------------------------------------------------------


def _g(value: float, digits: int = 4) -> str:
    """A number for TOML with ``digits`` significant figures (always a float literal)."""
    text = f"{value:.{digits}g}"
    if "e" in text:
        mantissa, exponent = text.split("e")
        if "." not in mantissa:
            mantissa += ".0"
        return f"{mantissa}e{int(exponent)}"
    return text if "." in text else text + ".0"


def paste_table(report: FitReport, *, method: str = "least-squares") -> str:
    """A ``[process.heat_penetration]`` TOML table for the chosen thermocouple.

    Parameters
    ----------
    report : FitReport
        From :func:`fit_all`
    method : {"least-squares", "semilog"}
        Which values go in the table. The default, least squares of the heating-curve model to
        the actual retort record, gives the parameters with which this tool's own cold-spot model
        (the same step response superposed over a retort record) reproduces the test; Ball's
        semi-log values are given in a comment. Falls back to the semi-log values when the least
        squares did not converge.

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
    if cool is not None:
        lines.append(
            f"# semi-log cooling: fc {cool.fc_min:.2f} min, jc {cool.jc:.3f}, "
            f"R² {cool.r_squared:.5f}, RMS {cool.rms_residual_C:.3f} °C"
        )
    if hc is not None:
        pe = ", ".join(f"{k} {_g(v)} ± {_g(hc.standard_errors[k], 2)}"
                       for k, v in hc.parameters.items())
        lines.append(f"# least squares (heating-curve model on the retort record): {pe}, "
                     f"RMS {hc.rms_residual_C:.3f} °C")
    lines.append(f"# values below: {'least squares' if use_ls else 'semi-log'}")
    lines.append("[process.heat_penetration]")
    lines.append('model = "heating-curve"')
    if use_ls:
        values = {k: hc.parameters[k] for k in ("fh_min", "jh", "fc_min", "jc")
                  if k in hc.parameters}
    else:
        values = {"fh_min": semi.fh_min, "jh": semi.jh}
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
