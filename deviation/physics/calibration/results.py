"""What a calibration returns: the test data, the fits per thermocouple and the report, each
JSON-able (``to_dict``)."""

from __future__ import annotations

import functools
import math
from dataclasses import asdict, dataclass, field

import numpy as np

from deviation.errors import ModelError
from deviation.physics.heating import conduction


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
class BrokenHeatingCurveFit:
    """Result of Ball's semi-logarithmic method for a broken heating curve, one thermocouple.

    Two straight lines on ``log10(T_R - T)``: the first (fh, jh) from the end of the lag to the
    break, the second (fh2) after it; the break time ``x_bh`` is counted from the corrected
    zero (Ball 1923; Stumbo 1973, notation from memory). The first line's figures have the
    names of :class:`HeatingCurveFit`; the second line's carry a ``2``.

    Parameters
    ----------
    fh_min : float
        Rate index of the first line, ``-1/slope`` [min]; of the only line when no break
    jh : float
        Heating lag factor of the first line at the corrected zero [-]
    fh2_min : float or None
        Rate index of the second line [min]; None when no break was found
    break_min : float or None
        x_bh, break time from the corrected zero [min]: where the two lines meet, or as given
    break_time_min : float or None
        The break on the test's own time axis (from steam on) [min]
    break_temperature_C : float or None
        Temperature of the first line at the break, ``T_R - g_bh`` [°C]: the temperature at
        which the product breaks
    break_given : bool
        True when the break time was given rather than found
    retort_C, initial_C, come_up_min, corrected_zero_min, pseudo_initial_C
        As in :class:`HeatingCurveFit` (``pseudo_initial_C`` of the first line) [°C, min]
    r_squared, rms_residual_C, window_start_min, window_end_min, n_points
        The first line's window and fit, as in :class:`HeatingCurveFit`
    r_squared2, rms_residual2_C, window2_start_min, window2_end_min, n_points2
        The second line's (None when no break) [-, °C, min, min, count]
    noise_estimate_C : float
        Thermocouple noise standard deviation used for the straightness tests [°C]
    note : str
        Anything the fit could not do as intended, or why no break was found ("" when none)
    """

    fh_min: float
    jh: float
    fh2_min: float | None
    break_min: float | None
    break_time_min: float | None
    break_temperature_C: float | None
    break_given: bool
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
    r_squared2: float | None
    rms_residual2_C: float | None
    window2_start_min: float | None
    window2_end_min: float | None
    n_points2: int | None
    noise_estimate_C: float
    note: str = ""

    @property
    def broken(self) -> bool:
        """True when the curve has a second line."""
        return self.fh2_min is not None

    def to_dict(self) -> dict:
        """A JSON-able dict (NaN and infinities become None)."""
        return _json_safe(asdict(self))


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
    broken : BrokenHeatingCurveFit or None
        Ball's semi-log broken-curve fit, when the readings show a break (None otherwise)
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
    broken: BrokenHeatingCurveFit | None = None


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
