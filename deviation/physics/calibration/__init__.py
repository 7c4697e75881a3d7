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

Modules: ``semilog`` (Ball's method), ``least_squares`` (the model fitted to the record),
``fit`` (every thermocouple of a test, the slowest picked), ``results`` (what a fit returns).
Everything here takes arrays and floats and does no I/O; the CSV reader is
:mod:`deviation.inputs.heat_penetration`.

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

from deviation.physics.calibration.fit import fit_all
from deviation.physics.calibration.least_squares import least_squares_fit
from deviation.physics.calibration.results import (
    BrokenHeatingCurveFit,
    ContainerGeometry,
    CoolingCurveFit,
    FitReport,
    HeatingCurveFit,
    HeatPenData,
    ModelFit,
    RetortPhases,
    ThermocoupleFit,
)
from deviation.physics.calibration.semilog import (
    CORRECTED_ZERO_FRACTION,
    retort_phases,
    semilog_broken_fit,
    semilog_cooling_fit,
    semilog_fit,
)

__all__ = ["BrokenHeatingCurveFit", "CORRECTED_ZERO_FRACTION", "ContainerGeometry", "CoolingCurveFit", "FitReport",
           "HeatPenData", "HeatingCurveFit", "ModelFit", "RetortPhases", "ThermocoupleFit",
           "fit_all", "least_squares_fit", "retort_phases", "semilog_broken_fit", "semilog_cooling_fit",
           "semilog_fit"]
