"""Ball's formula method: sterilizing value of a process from fh, jh, IT, RT and process time.

An independent cross-check of a filed process that a process authority computes by hand, set
beside the General Method on the tool's own cold-spot prediction. Nothing here depends on the
tool's heat models: it needs only the heating-curve parameters of the filing.

The method (Ball [1]; Ball & Olson [3]; the tables' later basis in Stumbo [2]):

- **Ball process time** ``B = Pt + 0.42 · CUT``: the process time measured from the corrected
  zero, the come-up time counted 42 % effective (Ball's 42 % rule).
- **Heating curve** at the cold spot, straight on semi-log paper: ``RT - T(t) = jh·I·10^(-t/fh)``
  with ``I = RT - IT``; at the end of heating ``g = jh·I·10^(-B/fh)``.
- **fh/U as a function of g**: ``U`` is the sterilizing value in minutes at the retort
  temperature, ``U = ∫ 10^((T(t) - RT)/z) dt`` over heating and cooling. With Ball's heating
  and cooling curves written in the temperature difference from the retort, ``U/fh`` depends
  only on ``g/z`` and ``(m+g)/z`` (``m + g = RT - T_cooling water``), so one relation serves
  every fh, in °C or °F alike. This module **computes that relation numerically** from the
  curves below; it does not read a copied table.
- ``U = fh / (fh/U)`` and ``F = U · 10^((RT - Tref)/z)`` (F0 with z = 10 °C, Tref = 121.1 °C).

The curves (Ball 1923 [1]; the method is reviewed in Ball & Olson [3] and Stoforos [4]). The
numerical constants of the cooling curve (0.3 m, 0.343 m) are **from memory**, checked as
noted; jc = 1.41 and fc = fh are stated in [5]:

- Heating: the straight line above, extended back without limit; its lethality has the closed
  form ``U_heating/fh = E1(ln10 · g/z) / ln10`` (``E1`` the exponential integral, Stoforos [4]).
  The lethality before the corrected zero that this includes, ``fh·E1(ln10·jh·I/z)/ln10``,
  is negligible for a real process (2e-10 fh for jh·I = 80 °C, z = 10 °C).
- Cooling water at ``RT - (m + g)``; cold-spot temperature above the water
  ``y(t) = m - 0.3 m (sqrt(1 + (t/a)^2) - 1)`` (an arc of a hyperbola, starting level: the cold
  spot keeps its temperature at first) until it has fallen ``0.343 m``, then the straight
  cooling line ``y = jc · m · 10^(-t/fc)`` with Ball's ``jc = 1.41`` and ``fc = fh``.
  ``a`` follows from the joint; with these
  three constants the arc meets the line with slopes equal to 0.3 % (exact tangency would need
  jc = 1.4128), which is how the recalled constants were checked against each other.
- The cooling integral is ``∫ (L(T) - L(T_water)) dt``: the lethal rate of the cooling water
  itself (``10^(-(m+g)/z)`` per minute, 1e-10 for m + g = 100 °C and z = 10 °C) is not
  credited, since over an unbounded cooling time it would add without limit.

Measured against published tables (z = 18 °F, m + g = 180 °F; read from the reprints in [5],
checked in ``tests/reference/test_reference_ball_formula.py``):

- Ball's fh/U : log g table [1] (reprint Table 38.6) lies 0.007 to 0.047 below this relation in
  log g (g 1.6 % to 11 % lower); at Ball's printed g this relation gives fh/U 0.8 % to 8 %
  lower, i.e. it credits up to about 9 % more U than Ball's own table, most at fh/U >= 30.
- Stumbo's 1973 table [2] (reprint Table 38.9, interpolated to jc = 1.41) lies 5 % to 8 %
  above it in g; at Stumbo's g this relation gives fh/U up to 24 % higher (Stumbo credits up to
  19 % more U).
- The two printed tables differ from each other by 8.5 % to 15 % in g; this relation lies
  between them.

Scope and limits (a process authority's reading of the formula):

- Ball's cooling lag is fixed at 1.41 and fc = fh: a measured jc is not used. A cold spot that
  lags more in cooling receives more cooling lethality than credited here; one that lags less
  (jc < 1.41) receives less, and there this formula is not on the safe side.
- Conduction packs: the centre of a conduction-heated can keeps heating for minutes after steam
  off (jc about 2), which Ball's level-start arc never does. On the chili demo (87 x 115 mm,
  fh 52 min, hold 72 min) the formula gives F0 4.3 against 6.93 on the exact conduction series
  for the same cycle: heating parts 3.04 against 3.24, cooling parts 1.27 against 3.70. Used as
  a cross-check of a conduction model, Ball's figure is expected to be the low one.
- The heating curve is one straight line (or two, for a broken heating curve) from the
  corrected zero: the formula knows nothing of retort temperature drops, short holds or any
  other deviation; it is the figure for the filed (or an alternate) process.
- Ball's tables are for m + g = 180 °F (100 °C, steam) and 130 °F (72.2 °C, water cooling);
  other values are computed the same way (a colder cooling water cools faster and credits less).

References
----------
.. [1] C. O. Ball, "Thermal process time for canned food", *Bulletin of the National Research
   Council* 7, part 1, no. 37 (1923).
.. [2] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., New York: Academic
   Press, 1973.
.. [3] C. O. Ball and F. C. W. Olson, *Sterilization in Food Technology*, New York:
   McGraw-Hill, 1957.
.. [4] N. G. Stoforos, "Thermal process calculations through Ball's original formula method:
   a critical presentation of the method and simplification of its use through regression
   equations", *Food Engineering Reviews* 2 (2010) 1-16.
.. [5] B. K. Simpson (ed.), *Food Biochemistry and Food Processing*, 2nd ed., Wiley-Blackwell,
   2012, ch. 38 "Thermal Processing Principles", Tables 38.6 and 38.9.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.special import exp1, expi

from deviation.errors import ModelError

__all__ = [
    "BALL_COOLING_LAG",
    "BALL_CURVILINEAR_DROP_FRACTION",
    "BALL_HYPERBOLA_FRACTION",
    "COME_UP_EFFECTIVENESS",
    "M_PLUS_G_STEAM_C",
    "M_PLUS_G_WATER_C",
    "BallFormulaInputError",
    "BallFormulaResult",
    "ball_formula",
    "ball_formula_process_time",
    "ball_process_time",
    "fh_over_u",
    "g_end_of_heating",
    "g_from_fh_over_u",
]

_LN10 = math.log(10.0)

BALL_COOLING_LAG = 1.41
"""Ball's cooling lag factor jc [-] (Ball 1923; also stated in Simpson 2012, ch. 38)."""

BALL_HYPERBOLA_FRACTION = 0.3
"""Ball's cooling hyperbola parameter: ``y = m - 0.3 m (sqrt(1 + (t/a)^2) - 1)`` (from memory)."""

BALL_CURVILINEAR_DROP_FRACTION = 0.343
"""Fall of the cold spot, as a fraction of m, at which Ball's hyperbola meets the straight
cooling line (from memory; consistent with jc = 1.41 by tangency to 0.3 %)."""

COME_UP_EFFECTIVENESS = 0.42
"""Ball's 42 % rule: the come-up time counts 42 % toward the process time."""

M_PLUS_G_STEAM_C = 100.0
"""m + g of Ball's steam tables, 180 °F as a temperature difference [°C]."""

M_PLUS_G_WATER_C = 130.0 * 5.0 / 9.0
"""m + g of Ball's water-cooling tables, 130 °F as a temperature difference [°C] (72.2)."""

F0_REFERENCE_TEMPERATURE_C = 121.1
F0_Z_C = 10.0

# Geometry of Ball's cooling curve in units of fc (= fh): the straight line reaches the end of
# the arc, y = (1 - 0.343) m, at s_join; the hyperbola's time scale a makes it pass there.
_JOIN_FRACTION = 1.0 - BALL_CURVILINEAR_DROP_FRACTION
_S_JOIN = math.log10(BALL_COOLING_LAG / _JOIN_FRACTION)
_A_SCALE = _S_JOIN / math.sqrt(
    (1.0 + BALL_CURVILINEAR_DROP_FRACTION / BALL_HYPERBOLA_FRACTION) ** 2 - 1.0
)
# Nodes and weights of the composite Gauss-Legendre rule over the arc [0, _S_JOIN].
_GL_X, _GL_W = np.polynomial.legendre.leggauss(16)
_PANEL_EDGES = np.linspace(0.0, _S_JOIN, 65)
_ARC_NODES_S = ((_PANEL_EDGES[:-1, None] + _PANEL_EDGES[1:, None]) / 2.0
                + (np.diff(_PANEL_EDGES)[:, None] / 2.0) * _GL_X[None, :]).ravel()
_ARC_WEIGHTS = (np.diff(_PANEL_EDGES)[:, None] / 2.0 * _GL_W[None, :]).ravel()

# Smallest g/z the inverse searches: fh/U is about 0.0033 there.
_LOG_GZ_MIN = math.log(1e-300)


class BallFormulaInputError(ModelError, ValueError):
    """A parameter of Ball's formula is out of range.

    Both a ``deviation.errors.ModelError`` and a ``ValueError``; the message names the
    parameter, the value found and the unit expected.
    """


def _finite(name: str, value, unit: str) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise BallFormulaInputError(
            f"{name} = {value!r}; expected a finite number [{unit}]"
        ) from None
    if not math.isfinite(x):
        raise BallFormulaInputError(f"{name} = {value!r}; expected a finite number [{unit}]")
    return x


def _positive(name: str, value, unit: str) -> float:
    x = _finite(name, value, unit)
    if x <= 0.0:
        raise BallFormulaInputError(f"{name} = {value!r}; expected a finite number > 0 [{unit}]")
    return x


def _non_negative(name: str, value, unit: str) -> float:
    x = _finite(name, value, unit)
    if x < 0.0:
        raise BallFormulaInputError(f"{name} = {value!r}; expected a finite number >= 0 [{unit}]")
    return x


# ---------------------------------------------------------------------------------------------
# the fh/U : g relation


def _ein(x: float) -> float:
    """Entire exponential integral ``Ein(x) = ∫0^x (e^s - 1)/s ds`` for x >= 0."""
    if x < 1.0:
        total, term = 0.0, 1.0
        for k in range(1, 40):
            term *= x / k
            total += term / k
            if term / k < 1e-18 * total:
                break
        return total
    return float(expi(x)) - np.euler_gamma - math.log(x)


def _log10_ein(x: float) -> float:
    """log10 of Ein(x), safe where Ein overflows (x > 700: asymptotic Ei series)."""
    if x <= 700.0:
        return math.log10(_ein(x)) if x > 0.0 else -math.inf
    series = 1.0 + 1.0 / x + 2.0 / x**2 + 6.0 / x**3 + 24.0 / x**4
    return (x - math.log(x) + math.log(series)) / _LN10


def _heating_u_over_fh(gz: float) -> float:
    """Heating lethality of Ball's straight-line heating curve, per fh: E1(ln10·g/z)/ln10."""
    return float(exp1(_LN10 * gz)) / _LN10


def _log_heating_u_over_fh(gz: float) -> float:
    """Natural log of :func:`_heating_u_over_fh`, safe where E1 underflows."""
    x = _LN10 * gz
    if x < 600.0:
        return math.log(float(exp1(x))) - math.log(_LN10)
    series = 1.0 - 1.0 / x + 2.0 / x**2 - 6.0 / x**3 + 24.0 / x**4
    return -x - math.log(x) + math.log(series) - math.log(_LN10)


def _cooling_u_over_fh(gz: float, mgz: float) -> float:
    """Cooling lethality of Ball's hyperbola-then-line cooling curve, per fh (fc = fh)."""
    mz = mgz - gz
    if mz <= 0.0:
        # the cold spot ends heating at or below the cooling water: nothing to credit
        return 0.0
    water = 10.0 ** (-mgz)

    # Composite Gauss-Legendre over the arc (smooth, decaying): 64 panels of 16 nodes hold the
    # integral to 1e-12 relative against adaptive quadrature (tests), with no scipy.integrate to
    # import for every evaluation.
    s = _ARC_NODES_S
    drop = BALL_HYPERBOLA_FRACTION * mz * (np.sqrt(1.0 + (s / _A_SCALE) ** 2) - 1.0)
    u_arc = float(np.dot(_ARC_WEIGHTS, 10.0 ** (-gz - drop) - water))
    # straight line y = jc m 10^-s from s_join: ∫ 10^-mgz (10^(y/z) - 1) ds = 10^-mgz Ein(x)/ln10
    x_join = _LN10 * _JOIN_FRACTION * mz
    log10_line = -mgz + _log10_ein(x_join) - math.log10(_LN10)
    u_line = 10.0 ** log10_line if log10_line > -300.0 else 0.0
    return max(u_arc, 0.0) + u_line


def _log_u_over_fh(gz: float, mgz: float) -> float:
    """ln(U/fh) = -ln(fh/U) for g/z and (m+g)/z: heating plus cooling lethality."""
    log_heating = _log_heating_u_over_fh(gz)
    cooling = _cooling_u_over_fh(gz, mgz)
    if cooling <= 0.0:
        return log_heating
    if log_heating < -700.0:  # heating lethality below double precision next to cooling's
        return math.log(cooling)
    return log_heating + math.log1p(cooling / math.exp(log_heating))


def _fh_over_u_scaled(gz: float, mgz: float) -> float:
    log_value = -_log_u_over_fh(gz, mgz)
    return math.exp(log_value) if log_value < 709.0 else math.inf


def _z_and_mg(z_C, m_plus_g_C) -> tuple[float, float]:
    z = _positive("z_C", z_C, "°C")
    mg = _positive("m_plus_g_C", m_plus_g_C, "°C")
    return z, mg


def fh_over_u(g_C, z_C=F0_Z_C, m_plus_g_C=M_PLUS_G_STEAM_C):
    """fh/U for a value of g: Ball's formula relation, computed numerically.

    Method: Ball's formula method (Ball 1923 [1]): the lethality of Ball's straight-line
    heating curve (closed form, exponential integral E1) plus that of Ball's cooling curve
    (hyperbolic arc then straight line, jc = 1.41, fc = fh; adaptive quadrature and the
    exponential integral Ei), ``fh/U = fh / (U_heating + U_cooling)``. Not read off a table.

    Parameters
    ----------
    g_C : float or array_like
        g, retort temperature minus cold-spot temperature at the end of heating [°C]
        (a temperature difference; > 0).
    z_C : float, optional
        z value [°C] (a temperature difference); 10 °C (18 °F) for F0.
    m_plus_g_C : float, optional
        m + g, retort temperature minus cooling-water temperature [°C]; Ball's tables use
        100 °C (180 °F, steam processes) and 72.2 °C (130 °F).

    Returns
    -------
    float or numpy.ndarray
        fh/U [-], the shape of ``g_C``; increases with g.

    Raises
    ------
    BallFormulaInputError
        (a ``ValueError``) if g_C, z_C or m_plus_g_C is not finite and > 0.

    Notes
    -----
    Against Ball's printed fh/U : log g table (z = 18 °F, m + g = 180 °F, as reprinted in [4])
    this relation gives fh/U 0.8 % to 8 % lower at the same g (up to about 9 % more U); against
    Stumbo's 1973 table [2] at jc = 1.41 it gives fh/U up to 24 % higher (less U). Ball's
    cooling lag 1.41 is fixed; see the module notes for conduction packs (jc about 2), where
    the formula credits far less cooling lethality than the can receives.

    References
    ----------
    .. [1] C. O. Ball, "Thermal process time for canned food", *Bull. Natl. Res. Counc.*
       7(37), 1923.
    .. [2] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., Academic Press, 1973.
    .. [3] C. O. Ball and F. C. W. Olson, *Sterilization in Food Technology*, McGraw-Hill, 1957.
    .. [4] B. K. Simpson (ed.), *Food Biochemistry and Food Processing*, 2nd ed., 2012, ch. 38.
    """
    z, mg = _z_and_mg(z_C, m_plus_g_C)
    g = np.asarray(g_C, dtype=float)
    if g.ndim == 0:
        return _fh_over_u_scaled(_positive("g_C", g_C, "°C") / z, mg / z)
    if g.size and (not np.all(np.isfinite(g)) or np.any(g <= 0.0)):
        bad = g[~(np.isfinite(g) & (g > 0.0))][0]
        raise BallFormulaInputError(f"g_C contains {bad!r}; expected finite numbers > 0 [°C]")
    out = np.empty(g.shape, dtype=float)
    for index, value in np.ndenumerate(g):
        out[index] = _fh_over_u_scaled(float(value) / z, mg / z)
    return out


def g_from_fh_over_u(fh_over_U, z_C=F0_Z_C, m_plus_g_C=M_PLUS_G_STEAM_C) -> float:
    """g for a value of fh/U: the inverse of :func:`fh_over_u`, by root finding.

    Method: Ball's formula method (Ball 1923 [1]); Brent's method on ``ln g`` (fh/U rises
    strictly with g), to a relative tolerance of about 1e-13.

    Parameters
    ----------
    fh_over_U : float
        fh/U [-], > 0 (fh/U below about 0.0033 needs g/z below 1e-300 and is refused).
    z_C : float, optional
        z value [°C]; 10 °C for F0.
    m_plus_g_C : float, optional
        m + g, retort minus cooling-water temperature [°C]; 100 °C (180 °F) in Ball's tables.

    Returns
    -------
    float
        g [°C] (a temperature difference).

    Raises
    ------
    BallFormulaInputError
        (a ``ValueError``) if an argument is not finite and > 0, or fh/U is below the range.

    References
    ----------
    .. [1] C. O. Ball, "Thermal process time for canned food", *Bull. Natl. Res. Counc.*
       7(37), 1923.
    .. [2] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., Academic Press, 1973.
    """
    target = _positive("fh_over_U", fh_over_U, "-")
    z, mg = _z_and_mg(z_C, m_plus_g_C)
    mgz = mg / z
    log_target = math.log(target)

    def residual(log_gz: float) -> float:
        return -_log_u_over_fh(math.exp(log_gz), mgz) - log_target

    low = _LOG_GZ_MIN
    if residual(low) > 0.0:
        smallest = _fh_over_u_scaled(math.exp(low), mgz)
        raise BallFormulaInputError(
            f"fh_over_U = {fh_over_U!r}; expected a value >= {smallest:.4g} [-] "
            "(smaller fh/U would need g below 1e-300 z)"
        )
    high = 0.0
    while residual(high) < 0.0:
        low, high = high, high + 1.0
    from scipy.optimize import brentq  # only the inverse needs a root finder

    log_gz = brentq(residual, low, high, xtol=1e-14, rtol=1e-15, maxiter=500)
    return math.exp(log_gz) * z


# ---------------------------------------------------------------------------------------------
# process figures


@dataclass(frozen=True)
class BallFormulaResult:
    """Ball's formula figures for one process.

    Attributes
    ----------
    ball_process_time_min : float
        B, process time from the corrected zero, ``Pt + 0.42 CUT`` [min].
    g_C : float
        g, retort minus cold-spot temperature at the end of heating [°C].
    fh_over_U : float
        fh/U [-] (fh2/U for a broken heating curve).
    U_min : float
        Sterilizing value in minutes at the retort temperature [min].
    U_heating_min, U_cooling_min : float
        The parts of U credited to heating and to cooling [min].
    F_min : float
        Sterilizing value at the reference temperature, ``U·10^((RT - Tref)/z)`` [min];
        F0 when z = 10 °C and Tref = 121.1 °C.
    retort_temperature_C, reference_temperature_C, z_C, m_plus_g_C : float
        The values the figures were computed with [°C].
    g_break_C : float or None
        g at the break of a broken heating curve [°C], None for a simple curve.
    """

    ball_process_time_min: float
    g_C: float
    fh_over_U: float
    U_min: float
    U_heating_min: float
    U_cooling_min: float
    F_min: float
    retort_temperature_C: float
    reference_temperature_C: float
    z_C: float
    m_plus_g_C: float
    g_break_C: float | None = None


def ball_process_time(process_time_min, come_up_time_min=0.0) -> float:
    """Ball process time B from the operator's process time and the come-up time.

    Method: Ball's 42 % come-up rule (Ball 1923 [1]): ``B = Pt + 0.42 · CUT``, the process time
    counted from the corrected zero (58 % of the way through the come-up).

    Parameters
    ----------
    process_time_min : float
        Pt, the hold at process temperature after come-up [min], >= 0.
    come_up_time_min : float, optional
        CUT, time from steam on to process temperature [min], >= 0.

    Returns
    -------
    float
        B [min].

    References
    ----------
    .. [1] C. O. Ball, "Thermal process time for canned food", *Bull. Natl. Res. Counc.*
       7(37), 1923.
    .. [2] C. O. Ball and F. C. W. Olson, *Sterilization in Food Technology*, McGraw-Hill, 1957.
    """
    pt = _non_negative("process_time_min", process_time_min, "min")
    cut = _non_negative("come_up_time_min", come_up_time_min, "min")
    return pt + COME_UP_EFFECTIVENESS * cut


def _curve_inputs(fh_min, jh, initial_temperature_C, retort_temperature_C):
    fh = _positive("fh_min", fh_min, "min")
    j = _positive("jh", jh, "-")
    it = _finite("initial_temperature_C", initial_temperature_C, "°C")
    rt = _finite("retort_temperature_C", retort_temperature_C, "°C")
    if rt <= it:
        raise BallFormulaInputError(
            f"retort_temperature_C = {retort_temperature_C!r} is not above "
            f"initial_temperature_C = {initial_temperature_C!r}; expected RT > IT [°C]"
        )
    return fh, j, it, rt


def g_end_of_heating(
    fh_min, jh, initial_temperature_C, retort_temperature_C, ball_process_time_min
) -> float:
    """g at the end of heating on Ball's straight-line heating curve.

    Method: Ball's heating curve (Ball 1923 [1]): ``g = jh · (RT - IT) · 10^(-B/fh)``.

    Parameters
    ----------
    fh_min : float
        fh, heating rate factor [min], > 0.
    jh : float
        jh, heating lag factor [-], > 0.
    initial_temperature_C : float
        IT, initial product temperature [°C].
    retort_temperature_C : float
        RT, retort (process) temperature [°C], > IT.
    ball_process_time_min : float
        B, process time from the corrected zero [min], >= 0.

    Returns
    -------
    float
        g [°C].

    References
    ----------
    .. [1] C. O. Ball, "Thermal process time for canned food", *Bull. Natl. Res. Counc.*
       7(37), 1923.
    """
    fh, j, it, rt = _curve_inputs(fh_min, jh, initial_temperature_C, retort_temperature_C)
    b = _non_negative("ball_process_time_min", ball_process_time_min, "min")
    return j * (rt - it) * 10.0 ** (-b / fh)


def _lethality_inputs(z_C, reference_temperature_C, m_plus_g_C):
    z, mg = _z_and_mg(z_C, m_plus_g_C)
    ref = _finite("reference_temperature_C", reference_temperature_C, "°C")
    return z, ref, mg


def ball_formula(
    fh_min,
    jh,
    initial_temperature_C,
    retort_temperature_C,
    process_time_min,
    come_up_time_min=0.0,
    *,
    z_C=F0_Z_C,
    reference_temperature_C=F0_REFERENCE_TEMPERATURE_C,
    m_plus_g_C=M_PLUS_G_STEAM_C,
    fh2_min=None,
    break_time_min=None,
) -> BallFormulaResult:
    """Sterilizing value of a process by Ball's formula method.

    Method: Ball's formula method (Ball 1923 [1]; Ball & Olson 1957 [3]; Stumbo 1973 [2]):
    ``B = Pt + 0.42 CUT``, ``g = jh (RT - IT) 10^(-B/fh)``, fh/U from g by Ball's relation
    (computed numerically, :func:`fh_over_u`), ``U = fh/(fh/U)``,
    ``F = U · 10^((RT - Tref)/z)``.

    Broken heating curve (optional, ``fh2_min`` and ``break_time_min`` together): the heating
    curve follows fh until the break at ``x_bh`` (from the corrected zero), then fh2, and
    cooling follows fh2. Then ``g_bh = jh I 10^(-x_bh/fh)``, ``g = g_bh 10^(-(B - x_bh)/fh2)``
    and ``U = fh2/(fh2/U)_g + (fh - fh2) · E1(ln10 · g_bh/z)/ln10``: the second term replaces
    the lethality of the fh2 line before the break by that of the fh line, in closed form.
    Ball [1] and Stumbo [2] give the same correction through tabulated factors (Stumbo's
    ``r_bh``, from memory); here it is the exact integral of the two-line curve.

    Parameters
    ----------
    fh_min : float
        fh, heating rate factor [min] (fh1 of a broken curve), > 0.
    jh : float
        jh, heating lag factor [-], > 0.
    initial_temperature_C : float
        IT, initial product temperature [°C].
    retort_temperature_C : float
        RT, retort (process) temperature [°C], > IT.
    process_time_min : float
        Pt, hold at process temperature after come-up [min], >= 0.
    come_up_time_min : float, optional
        CUT, come-up time [min], >= 0; 42 % of it counts (Ball's rule).
    z_C : float, optional
        z value [°C]; 10 °C for F0.
    reference_temperature_C : float, optional
        Tref [°C]; 121.1 °C for F0.
    m_plus_g_C : float, optional
        m + g, retort minus cooling-water temperature [°C]; 100 °C (180 °F) is Ball's steam
        value, 72.2 °C (130 °F) his water-cooling value.
    fh2_min : float, optional
        fh2, heating rate factor after the break of a broken heating curve [min], > 0.
    break_time_min : float, optional
        x_bh, time of the break from the corrected zero [min], >= 0.

    Returns
    -------
    BallFormulaResult
        B, g, fh/U, U and its heating and cooling parts, F.

    Raises
    ------
    BallFormulaInputError
        (a ``ValueError``) naming the parameter and its unit if any input is out of range,
        or if only one of ``fh2_min`` and ``break_time_min`` is given.

    References
    ----------
    .. [1] C. O. Ball, "Thermal process time for canned food", *Bull. Natl. Res. Counc.*
       7(37), 1923.
    .. [2] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., Academic Press, 1973.
    .. [3] C. O. Ball and F. C. W. Olson, *Sterilization in Food Technology*, McGraw-Hill, 1957.
    """
    fh, j, it, rt = _curve_inputs(fh_min, jh, initial_temperature_C, retort_temperature_C)
    b = ball_process_time(process_time_min, come_up_time_min)
    z, ref, mg = _lethality_inputs(z_C, reference_temperature_C, m_plus_g_C)
    if (fh2_min is None) != (break_time_min is None):
        missing = "break_time_min" if break_time_min is None else "fh2_min"
        raise BallFormulaInputError(
            f"{missing} is missing; a broken heating curve needs both fh2_min [min] "
            "and break_time_min [min]"
        )
    g_bh = None
    extra_u = 0.0
    f_last = fh
    if fh2_min is not None:
        fh2 = _positive("fh2_min", fh2_min, "min")
        xbh = _non_negative("break_time_min", break_time_min, "min")
        if b > xbh:
            g_bh = j * (rt - it) * 10.0 ** (-xbh / fh)
            g = g_bh * 10.0 ** (-(b - xbh) / fh2)
            extra_u = (fh - fh2) * _heating_u_over_fh(g_bh / z)
            f_last = fh2
        else:
            g = j * (rt - it) * 10.0 ** (-b / fh)
    else:
        g = j * (rt - it) * 10.0 ** (-b / fh)
    gz, mgz = g / z, mg / z
    u_heating = f_last * _heating_u_over_fh(gz) + extra_u
    u_cooling = f_last * _cooling_u_over_fh(gz, mgz)
    u = u_heating + u_cooling
    return BallFormulaResult(
        ball_process_time_min=b,
        g_C=g,
        fh_over_U=f_last / u,
        U_min=u,
        U_heating_min=u_heating,
        U_cooling_min=u_cooling,
        F_min=u * 10.0 ** ((rt - ref) / z),
        retort_temperature_C=rt,
        reference_temperature_C=ref,
        z_C=z,
        m_plus_g_C=mg,
        g_break_C=g_bh,
    )


def ball_formula_process_time(
    target_F_min,
    fh_min,
    jh,
    initial_temperature_C,
    retort_temperature_C,
    come_up_time_min=0.0,
    *,
    z_C=F0_Z_C,
    reference_temperature_C=F0_REFERENCE_TEMPERATURE_C,
    m_plus_g_C=M_PLUS_G_STEAM_C,
) -> float:
    """Process time Pt that delivers a target F by Ball's formula method.

    Method: Ball's formula method, inverse use (Ball 1923 [1]; Stumbo 1973 [2]):
    ``U = F · 10^((Tref - RT)/z)``, g from fh/U (:func:`g_from_fh_over_u`),
    ``B = fh (log10(jh I) - log10 g)``, ``Pt = B - 0.42 CUT``.

    Parameters
    ----------
    target_F_min : float
        Target sterilizing value at Tref [min], > 0.
    fh_min : float
        fh [min], > 0.
    jh : float
        jh [-], > 0.
    initial_temperature_C : float
        IT [°C].
    retort_temperature_C : float
        RT [°C], > IT.
    come_up_time_min : float, optional
        CUT [min], >= 0.
    z_C : float, optional
        z value [°C]; 10 °C for F0.
    reference_temperature_C : float, optional
        Tref [°C]; 121.1 °C for F0.
    m_plus_g_C : float, optional
        m + g [°C]; 100 °C (180 °F) in Ball's steam tables.

    Returns
    -------
    float
        Pt [min]; 0.0 when the formula's corrected-zero heating alone (``B <= 0.42 CUT``)
        already reaches the target.

    References
    ----------
    .. [1] C. O. Ball, "Thermal process time for canned food", *Bull. Natl. Res. Counc.*
       7(37), 1923.
    .. [2] C. R. Stumbo, *Thermobacteriology in Food Processing*, 2nd ed., Academic Press, 1973.
    """
    target = _positive("target_F_min", target_F_min, "min")
    fh, j, it, rt = _curve_inputs(fh_min, jh, initial_temperature_C, retort_temperature_C)
    cut = _non_negative("come_up_time_min", come_up_time_min, "min")
    z, ref, mg = _lethality_inputs(z_C, reference_temperature_C, m_plus_g_C)
    u = target * 10.0 ** ((ref - rt) / z)
    g = g_from_fh_over_u(fh / u, z, mg)
    b = fh * (math.log10(j * (rt - it)) - math.log10(g))
    return max(0.0, b - COME_UP_EFFECTIVENESS * cut)
