"""Fractional Effective Dose (FED) rates for the asphyxiant fire gases.

Two published methods are offered, each as plain functions of concentration arrays:

* ``iso13571`` -- ISO 13571:2012, asphyxiant toxic-gas model (CO, HCN, CO2
  hyperventilation multiplier);
* ``purser`` -- D. A. Purser's fractional incapacitating dose model in the SFPE
  Handbook (CO, HCN, CO2 hyperventilation factor, O2 hypoxia, CO2 narcosis).

Units in: gas concentrations are volume (mole) fractions [mol/mol]; each function
converts to ppm or percent where the source states its equation that way.
Units out: dose rate per minute [1/min]; integrate with
:func:`egressmargin.tenability.crossing.cumulative_trapezoid`.

Missing gases (outside contract): a gas that is not supplied contributes nothing --
its dose term is zero and any multiplier it would set is 1. "Not supplied" is either
the argument being ``None`` or NaN values, so one 2-D ``(L, N)`` array can mix
locations that have the gas and locations that do not. NaN never reaches the output.

Negative concentrations (numerical noise in model output) are treated as zero.
Overflow of an exponential at absurd concentrations gives an infinite rate (the dose
limit is then reached at once), without a warning.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

__all__ = [
    "TOXIC_GASES",
    "TOXIC_METHODS",
    "METHOD_GASES",
    "toxic_method",
    "iso13571_co_rate",
    "iso13571_hcn_rate",
    "iso13571_co2_multiplier",
    "iso13571_fed_rate",
    "purser_co_rate",
    "purser_hcn_rate",
    "purser_co2_multiplier",
    "purser_o2_rate",
    "purser_co2_rate",
    "purser_fed_rate",
    "purser_co2_narcosis_rate",
    "TOXIC_DOSES",
]

#: Gas series keys (as in the study file) that the toxic FED methods can use.
TOXIC_GASES = ("co", "hcn", "co2", "o2")

PPM_PER_MOL_MOL = 1.0e6
PERCENT_PER_MOL_MOL = 100.0

# --- ISO 13571:2012 constants -------------------------------------------------------
#: CO: exposure dose to incapacitation 35 000 uL/L*min (ISO 13571:2012, asphyxiant
#: FED equation).
ISO13571_CO_DOSE_PPM_MIN = 35000.0
#: HCN: rate = exp(phi/43)/220 - 0.0045 per minute, phi in uL/L (ISO 13571:2012,
#: asphyxiant FED equation; from memory -- the 2007 edition used phi^2.36/1.2e6).
ISO13571_HCN_SCALE_PPM = 43.0
ISO13571_HCN_DIVISOR_MIN = 220.0
ISO13571_HCN_OFFSET_PER_MIN = 0.0045
#: CO2 hyperventilation multiplier v = exp(phi_CO2/5), phi in percent
#: (ISO 13571, CO2 hyperventilation equation; from memory).
ISO13571_CO2_SCALE_PERCENT = 5.0

# --- Purser, SFPE Handbook constants ------------------------------------------------
#: CO: rate = 2.764e-5 * C^1.036 per minute, C in ppm (Purser, SFPE Handbook).
PURSER_CO_COEFF = 2.764e-5
PURSER_CO_EXPONENT = 1.036
#: HCN: rate = exp(C/43)/220 - 0.0045 per minute, C in ppm (Purser, SFPE Handbook).
PURSER_HCN_SCALE_PPM = 43.0
PURSER_HCN_DIVISOR_MIN = 220.0
PURSER_HCN_OFFSET_PER_MIN = 0.0045
#: CO2 hyperventilation: V = exp(0.1903*C + 2.0004)/7.1, C in percent (Purser, SFPE
#: Handbook, 4th ed. eq. 17).
PURSER_CO2_SLOPE_PER_PERCENT = 0.1903
PURSER_CO2_INTERCEPT = 2.0004
PURSER_CO2_DIVISOR = 7.1
#: O2 hypoxia: rate = 1/exp(8.13 - 0.54*(20.9 - C)) per minute, C in percent
#: (Purser, SFPE Handbook).
PURSER_O2_INTERCEPT = 8.13
PURSER_O2_SLOPE_PER_PERCENT = 0.54
PURSER_O2_AMBIENT_PERCENT = 20.9
#: CO2 narcosis: rate = 1/exp(6.1623 - 0.5189*C) per minute, C in percent
#: (Purser, SFPE Handbook; from memory).
PURSER_CO2_NARCOSIS_INTERCEPT = 6.1623
PURSER_CO2_NARCOSIS_SLOPE_PER_PERCENT = 0.5189


def _gas(x):
    """Return (values with NaN and negatives replaced by 0, mask of missing) or None."""
    if x is None:
        return None
    a = np.asarray(x, dtype=float)
    missing = np.isnan(a)
    clean = np.where(missing | (a < 0.0), 0.0, a)
    return clean, missing


def _term(x, formula) -> np.ndarray | float:
    """Apply ``formula`` to a gas array; missing entries give a term of 0."""
    g = _gas(x)
    if g is None:
        return 0.0
    clean, missing = g
    with np.errstate(over="ignore"):
        value = formula(clean)
    return np.where(missing, 0.0, value)


def _factor(x, formula) -> np.ndarray | float:
    """Apply ``formula`` to a gas array; missing entries give a multiplier of 1."""
    g = _gas(x)
    if g is None:
        return 1.0
    clean, missing = g
    with np.errstate(over="ignore"):
        value = formula(clean)
    return np.where(missing, 1.0, value)


def _result_shape(*arrays) -> tuple[int, ...]:
    shapes = [np.shape(a) for a in arrays if a is not None]
    return np.broadcast_shapes(*shapes) if shapes else ()


# =====================================================================================
# ISO 13571:2012
# =====================================================================================


def _exp_hcn_rate(hcn, scale_ppm: float, divisor_min: float, offset_per_min: float):
    """HCN rate of the form exp(C/scale)/divisor - offset per minute, clipped at zero.

    Both ISO 13571 and Purser state HCN in this form; each passes its own constants.
    """
    return _term(
        hcn,
        lambda c: np.maximum(np.exp(c * PPM_PER_MOL_MOL / scale_ppm) / divisor_min - offset_per_min, 0.0),
    )


def iso13571_co_rate(co):
    """ISO 13571 FED rate of carbon monoxide.

    Parameters
    ----------
    co : array_like or None
        CO volume fraction [mol/mol]; NaN or None = not supplied.

    Returns
    -------
    numpy.ndarray or float
        Dose rate [1/min]; 0 where not supplied.

    Notes
    -----
    .. math:: \\dot F_{CO} = \\frac{\\varphi_{CO}}{35\\,000} \\quad [1/\\mathrm{min}],

    :math:`\\varphi_{CO}` in uL/L (ppm); 35 000 uL/L*min is the CO exposure dose to
    incapacitation of the median person.

    References
    ----------
    ISO 13571:2012, Life-threatening components of fire -- Guidelines for the
    estimation of time to compromised tenability in fires, 2nd ed., asphyxiant
    toxic-gas FED equation.

    Examples
    --------
    1000 ppm CO gives 1/35 per minute:

    >>> round(float(iso13571_co_rate(1000e-6)), 6)
    0.028571
    """
    return _term(co, lambda c: c * PPM_PER_MOL_MOL / ISO13571_CO_DOSE_PPM_MIN)


def iso13571_hcn_rate(hcn):
    """ISO 13571 FED rate of hydrogen cyanide.

    Parameters
    ----------
    hcn : array_like or None
        HCN volume fraction [mol/mol]; NaN or None = not supplied.

    Returns
    -------
    numpy.ndarray or float
        Dose rate [1/min], clipped at 0; 0 where not supplied.

    Notes
    -----
    .. math:: \\dot F_{HCN} = \\max\\!\\left(0,\\ \\frac{\\exp(\\varphi_{HCN}/43)}{220}
              - 0.0045\\right) \\quad [1/\\mathrm{min}],

    :math:`\\varphi_{HCN}` in uL/L (ppm). Constants 43, 220 and 0.0045 from memory
    (ISO 13571:2012 adopted Purser's exponential form; the 2007 edition used
    :math:`\\varphi^{2.36}/1.2\\times10^{6}`). The expression is slightly positive at
    zero concentration (4.5e-5 per minute) and negative only for negative
    concentrations; the clip at zero guards against that (and negative inputs are
    set to zero before the formula).

    References
    ----------
    ISO 13571:2012, asphyxiant toxic-gas FED equation (HCN term).

    Examples
    --------
    100 ppm HCN: exp(100/43)/220 - 0.0045 = 0.04201 per minute:

    >>> round(float(iso13571_hcn_rate(100e-6)), 5)
    0.04201
    """
    return _exp_hcn_rate(hcn, ISO13571_HCN_SCALE_PPM, ISO13571_HCN_DIVISOR_MIN, ISO13571_HCN_OFFSET_PER_MIN)


def iso13571_co2_multiplier(co2):
    """ISO 13571 multiplier for CO2-induced hyperventilation.

    Parameters
    ----------
    co2 : array_like or None
        CO2 volume fraction [mol/mol]; NaN or None = not supplied.

    Returns
    -------
    numpy.ndarray or float
        Multiplier [-]; 1 where not supplied.

    Notes
    -----
    .. math:: v_{CO_2} = \\exp(\\varphi_{CO_2} / 5),

    :math:`\\varphi_{CO_2}` in percent; it multiplies the CO and HCN dose terms.
    The form and the constant 5 are from memory (ISO 13571 CO2 hyperventilation
    equation); at 5 % CO2 it gives e = 2.72, close to Purser's factor of 2.70.

    References
    ----------
    ISO 13571:2012, CO2 hyperventilation factor (from memory).

    Examples
    --------
    >>> round(float(iso13571_co2_multiplier(0.05)), 4)
    2.7183
    """
    return _factor(co2, lambda c: np.exp(c * PERCENT_PER_MOL_MOL / ISO13571_CO2_SCALE_PERCENT))


def iso13571_fed_rate(co=None, hcn=None, co2=None, o2=None):
    """ISO 13571 asphyxiant FED rate.

    Parameters
    ----------
    co, hcn, co2 : array_like or None
        Volume fractions [mol/mol], shapes broadcastable to each other, e.g. (N,) or
        (L, N); None or NaN = not supplied.
    o2 : array_like or None
        Accepted for a uniform signature across methods and not used: ISO 13571 does
        not add oxygen depletion to the asphyxiant FED sum (see Notes).

    Returns
    -------
    numpy.ndarray
        FED rate [1/min], the broadcast shape of the supplied arrays (0-d when none
        is supplied).

    Notes
    -----
    .. math:: \\dot F = \\left(\\frac{\\varphi_{CO}}{35\\,000}
              + \\frac{\\exp(\\varphi_{HCN}/43)}{220} - 0.0045\\right) v_{CO_2}

    (each term as in :func:`iso13571_co_rate`, :func:`iso13571_hcn_rate`,
    :func:`iso13571_co2_multiplier`). FED = 1 is incapacitation of the median person.

    Oxygen: the asphyxiant FED of ISO 13571:2012 has no O2 term. A search of the
    public pages available to this project found the standard's scope (toxic gases,
    heat, visual obscuration) but not its text on oxygen, so what follows is from
    memory: the standard treats hypoxia from O2 depletion as a separate consideration
    (in most fires CO dominates before O2 falls far enough to matter). So that a
    supplied O2 series is never ignored, the bundled criteria sets add the separate
    criterion ``fed_hypoxia`` (Purser's hypoxia dose, :func:`purser_o2_rate`), and the
    ``purser`` method includes the O2 term in its FED. :data:`METHOD_GASES` lists the
    gases each method uses, so a caller can tell when a location has none of them.

    References
    ----------
    ISO 13571:2012, Life-threatening components of fire -- Guidelines for the
    estimation of time to compromised tenability in fires, 2nd ed., asphyxiant
    toxic-gas model.

    Examples
    --------
    Constant 1000 ppm CO reaches FED 0.3 after 0.3*35000/1000 = 10.5 min:

    >>> round(0.3 / float(iso13571_fed_rate(co=1000e-6)), 6)
    10.5
    """
    del o2  # not part of the ISO 13571 asphyxiant sum (see Notes)
    shape = _result_shape(co, hcn, co2)
    rate = (iso13571_co_rate(co) + iso13571_hcn_rate(hcn)) * iso13571_co2_multiplier(co2)
    return np.broadcast_to(np.asarray(rate, dtype=float), shape).copy()


# =====================================================================================
# Purser, SFPE Handbook
# =====================================================================================


def purser_co_rate(co):
    """Purser fractional incapacitating dose rate of carbon monoxide.

    Parameters
    ----------
    co : array_like or None
        CO volume fraction [mol/mol]; NaN or None = not supplied.

    Returns
    -------
    numpy.ndarray or float
        Dose rate [1/min]; 0 where not supplied.

    Notes
    -----
    .. math:: \\dot F_{I,CO} = 2.764\\times10^{-5}\\, C_{CO}^{1.036}
              \\quad [1/\\mathrm{min}],\\ C_{CO}\\ \\text{in ppm}

    (derived, from memory, from Stewart's CO uptake equation for light activity,
    RMV 25 L/min, with incapacitation at 30 % COHb).

    References
    ----------
    Purser, D. A., and McAllister, J. L., "Assessment of Hazards to Occupants from
    Smoke, Toxic Gases, and Heat", SFPE Handbook of Fire Protection Engineering,
    5th ed., Springer, 2016 (chapter 63, from memory); the same CO equation appears
    in Purser's chapter of the 3rd and 4th editions.

    Examples
    --------
    >>> round(float(purser_co_rate(1000e-6)), 5)
    0.03544
    """
    return _term(co, lambda c: PURSER_CO_COEFF * (c * PPM_PER_MOL_MOL) ** PURSER_CO_EXPONENT)


def purser_hcn_rate(hcn):
    """Purser fractional incapacitating dose rate of hydrogen cyanide.

    Parameters
    ----------
    hcn : array_like or None
        HCN volume fraction [mol/mol]; NaN or None = not supplied.

    Returns
    -------
    numpy.ndarray or float
        Dose rate [1/min], clipped at 0; 0 where not supplied.

    Notes
    -----
    .. math:: \\dot F_{I,CN} = \\max\\!\\left(0,\\ \\frac{\\exp(C_{HCN}/43)}{220}
              - 0.0045\\right)\\quad [1/\\mathrm{min}],\\ C_{HCN}\\ \\text{in ppm}.

    The published expression is slightly positive at zero concentration and goes
    negative only below zero; negative inputs are set to 0 and the term is clipped
    at 0.

    References
    ----------
    Purser, D. A., SFPE Handbook of Fire Protection Engineering, 5th ed., 2016,
    chapter on assessment of hazards to occupants from smoke, toxic gases and heat
    (HCN incapacitation equation).

    Examples
    --------
    200 ppm HCN: exp(200/43)/220 - 0.0045 = 0.4714 per minute:

    >>> round(float(purser_hcn_rate(200e-6)), 4)
    0.4714
    """
    return _exp_hcn_rate(hcn, PURSER_HCN_SCALE_PPM, PURSER_HCN_DIVISOR_MIN, PURSER_HCN_OFFSET_PER_MIN)


def purser_co2_multiplier(co2):
    """Purser multiplying factor for CO2-induced hyperventilation.

    Parameters
    ----------
    co2 : array_like or None
        CO2 volume fraction [mol/mol]; NaN or None = not supplied.

    Returns
    -------
    numpy.ndarray or float
        Multiplier [-]; 1 where not supplied.

    Notes
    -----
    .. math:: V_{CO_2} = \\frac{\\exp(0.1903\\, C_{CO_2} + 2.0004)}{7.1},
              \\ C_{CO_2}\\ \\text{in percent}.

    As published it is 1.04 (not 1) at zero CO2; a CO2 series that is not supplied
    gives exactly 1 by the missing-gas convention.

    References
    ----------
    Purser, D. A., SFPE Handbook of Fire Protection Engineering (4th ed. 2008 eq. 17;
    5th ed. 2016), CO2 hyperventilation factor.

    Examples
    --------
    >>> round(float(purser_co2_multiplier(0.05)), 2)
    2.7
    """
    def factor(c):
        pct = c * PERCENT_PER_MOL_MOL
        exponent = PURSER_CO2_SLOPE_PER_PERCENT * pct + PURSER_CO2_INTERCEPT
        return np.exp(exponent) / PURSER_CO2_DIVISOR

    return _factor(co2, factor)


def purser_o2_rate(o2):
    """Purser fractional incapacitating dose rate of low oxygen (hypoxia).

    Parameters
    ----------
    o2 : array_like or None
        O2 volume fraction [mol/mol]; NaN or None = not supplied.

    Returns
    -------
    numpy.ndarray or float
        Dose rate [1/min]; 0 where not supplied.

    Notes
    -----
    .. math:: \\dot F_{I,O} = \\frac{1}{\\exp\\left[8.13 - 0.54\\,(20.9 - C_{O_2})\\right]}
              \\quad [1/\\mathrm{min}],\\ C_{O_2}\\ \\text{in percent}.

    As published the rate is small but not zero in normal air (1/exp(8.13) = 2.9e-4
    per minute at 20.9 %).

    References
    ----------
    Purser, D. A., SFPE Handbook of Fire Protection Engineering, 5th ed., 2016,
    hypoxia incapacitation equation.

    Examples
    --------
    Time to incapacitation at 12 % O2 is exp(8.13 - 0.54*8.9) = 27.8 min:

    >>> round(1.0 / float(purser_o2_rate(0.12)), 1)
    27.8
    """
    def rate(c):
        depletion_pct = PURSER_O2_AMBIENT_PERCENT - c * PERCENT_PER_MOL_MOL
        return np.exp(-(PURSER_O2_INTERCEPT - PURSER_O2_SLOPE_PER_PERCENT * depletion_pct))

    return _term(o2, rate)


def purser_co2_rate(co2):
    """Purser fractional incapacitating dose rate of CO2 narcosis.

    Parameters
    ----------
    co2 : array_like or None
        CO2 volume fraction [mol/mol]; NaN or None = not supplied.

    Returns
    -------
    numpy.ndarray or float
        Dose rate [1/min]; 0 where not supplied.

    Notes
    -----
    .. math:: \\dot F_{I,CO_2} = \\frac{1}{\\exp(6.1623 - 0.5189\\, C_{CO_2})}
              \\quad [1/\\mathrm{min}],\\ C_{CO_2}\\ \\text{in percent}

    (constants from memory). Purser gives it as the alternative endpoint when CO2
    itself is narcotic at high concentration ("... or F_ICO2"); see
    :func:`purser_fed_rate`.

    References
    ----------
    Purser, D. A., SFPE Handbook of Fire Protection Engineering, CO2 incapacitation
    equation (from memory).

    Examples
    --------
    >>> round(1.0 / float(purser_co2_rate(0.07)), 1)
    12.6
    """
    def rate(c):
        pct = c * PERCENT_PER_MOL_MOL
        exponent = PURSER_CO2_NARCOSIS_INTERCEPT - PURSER_CO2_NARCOSIS_SLOPE_PER_PERCENT * pct
        return np.exp(-exponent)

    return _term(co2, rate)


def purser_fed_rate(co=None, hcn=None, co2=None, o2=None):
    """Purser fractional incapacitating dose rate of the asphyxiant gases and hypoxia.

    Parameters
    ----------
    co, hcn, co2, o2 : array_like or None
        Volume fractions [mol/mol], shapes broadcastable to each other, e.g. (N,) or
        (L, N); None or NaN = not supplied.

    Returns
    -------
    numpy.ndarray
        FED rate [1/min], the broadcast shape of the supplied arrays (0-d when none
        is supplied).

    Notes
    -----
    .. math:: \\dot F_{IN} = (\\dot F_{I,CO} + \\dot F_{I,CN})\\, V_{CO_2} + \\dot F_{I,O}

    Purser writes the combination as
    :math:`F_{IN} = [(F_{I,CO} + F_{I,CN} + FLD_{irr}) \\times V_{CO_2} + F_{I,O}]`
    *or* :math:`F_{I,CO_2}`: CO2 narcosis is the alternative endpoint, a dose of its
    own (:func:`purser_co2_rate`). "Or" means whichever of the two cumulative doses
    reaches its limit first; both are integrated separately and the FED is the larger
    of the two *accumulated* doses at each time (:data:`TOXIC_DOSES` lists both rates;
    the engine takes the pointwise maximum of their integrals, which has the same first
    crossing as the earlier of the two). The irritant term :math:`FLD_{irr}` is not
    included: irritants are assessed by their own concentration criterion
    (``fec_irritant``, ISO 13571). Terms: :func:`purser_co_rate`,
    :func:`purser_hcn_rate`, :func:`purser_co2_multiplier`, :func:`purser_o2_rate`.

    References
    ----------
    Purser, D. A., "Assessment of Hazards to Occupants from Smoke, Toxic Gases, and
    Heat", SFPE Handbook of Fire Protection Engineering, 5th ed., Springer, 2016
    (combination of the asphyxiant doses, "or" CO2 narcosis; from memory).

    Examples
    --------
    >>> round(float(purser_fed_rate(co=1000e-6)), 5)
    0.03544
    """
    shape = _result_shape(co, hcn, co2, o2)
    rate = (purser_co_rate(co) + purser_hcn_rate(hcn)) * purser_co2_multiplier(co2) + purser_o2_rate(o2)
    return np.broadcast_to(np.asarray(rate, dtype=float), shape).copy()


def purser_co2_narcosis_rate(co=None, hcn=None, co2=None, o2=None):
    """CO2 narcosis dose rate with the method signature (see :func:`purser_co2_rate`).

    Parameters
    ----------
    co, hcn, o2 : array_like or None
        Accepted for a uniform signature; not used.
    co2 : array_like or None
        CO2 volume fraction [mol/mol]; NaN or None = not supplied.

    Returns
    -------
    numpy.ndarray
        Dose rate [1/min], the broadcast shape of the supplied arrays.

    Examples
    --------
    >>> round(1.0 / float(purser_co2_narcosis_rate(co2=0.07)), 1)
    12.6
    """
    shape = _result_shape(co, hcn, co2, o2)
    return np.broadcast_to(np.asarray(purser_co2_rate(co2), dtype=float), shape).copy()


# =====================================================================================
# Method registry
# =====================================================================================

#: Toxic FED rate methods by name; each takes ``co, hcn, co2, o2`` keywords [mol/mol]
#: and returns a rate [1/min].
TOXIC_METHODS: dict[str, Callable[..., np.ndarray]] = {
    "iso13571": iso13571_fed_rate,
    "purser": purser_fed_rate,
}

#: The dose rates whose cumulative doses make up each method's FED. Where a method
#: lists more than one, the endpoints are alternatives (Purser's "or"): the FED at a
#: time is the largest of the accumulated doses, so the limit is first reached when the
#: earliest of them reaches it.
TOXIC_DOSES: dict[str, tuple[Callable[..., np.ndarray], ...]] = {
    "iso13571": (iso13571_fed_rate,),
    "purser": (purser_fed_rate, purser_co2_narcosis_rate),
}

#: The gases each method actually uses. A location with none of them supplied cannot
#: be assessed by that method.
METHOD_GASES: dict[str, tuple[str, ...]] = {
    "iso13571": ("co", "hcn", "co2"),
    "purser": ("co", "hcn", "co2", "o2"),
}


def toxic_method(name: str) -> Callable[..., np.ndarray]:
    """Return the FED rate function registered under ``name``.

    Raises
    ------
    ValueError
        If ``name`` is not a key of :data:`TOXIC_METHODS`; the message names the
        valid keys.

    Examples
    --------
    >>> toxic_method("purser") is purser_fed_rate
    True
    """
    try:
        return TOXIC_METHODS[name]
    except (KeyError, TypeError):
        valid = ", ".join(repr(k) for k in TOXIC_METHODS)
        raise ValueError(f"unknown toxic FED method {name!r}; valid methods: {valid}") from None
