"""Fractional Effective Concentration (FEC) of irritant fire gases, after ISO 13571.

Irritant gases act at once on the eyes and the upper respiratory tract (sensory
irritation), so their criterion is a *concentration*, not a dose: at each time the
fractions of each gas's incapacitating concentration are summed, and the limit is first
reached when that sum reaches it (ISO 13571:2012, irritant gas model).

Units in: volume (mole) fractions [mol/mol]. Units out: FEC [-].

Missing gases: a gas that is not supplied (None, or NaN in a location's row) contributes
nothing; NaN never reaches the output. Negative concentrations (numerical noise) count as
zero.
"""

from __future__ import annotations

import numpy as np

__all__ = ["IRRITANT_GASES", "INCAPACITATING_PPM", "fec_irritant"]

#: Irritant series keys (as in the study file), in a fixed order.
IRRITANT_GASES = ("hcl", "hbr", "hf", "so2", "no2", "acrolein", "formaldehyde")

#: Concentration of each irritant expected to seriously compromise occupants' ability to
#: escape, F_i [uL/L = ppm] (ISO 13571:2012, irritant gas table). All seven values are
#: from memory (the standard's table could not be checked here): HCl 1000, HBr 1000,
#: HF 500, SO2 150, NO2 250, acrolein 30, formaldehyde 250.
INCAPACITATING_PPM: dict[str, float] = {
    "hcl": 1000.0,
    "hbr": 1000.0,
    "hf": 500.0,
    "so2": 150.0,
    "no2": 250.0,
    "acrolein": 30.0,
    "formaldehyde": 250.0,
}

PPM_PER_MOL_MOL = 1.0e6


def fec_irritant(**gases) -> np.ndarray:
    """ISO 13571 fractional effective concentration of irritant gases.

    Parameters
    ----------
    **gases : array_like or None
        Volume fractions [mol/mol] by key of :data:`IRRITANT_GASES` (``hcl=...``),
        shapes broadcastable to each other; None or NaN = not supplied.

    Returns
    -------
    numpy.ndarray
        FEC [-], the broadcast shape of the supplied arrays (0-d when none is supplied).

    Notes
    -----
    .. math:: FEC = \\sum_i \\frac{\\varphi_i}{F_i},

    :math:`\\varphi_i` and :math:`F_i` in uL/L (ppm), :math:`F_i` from
    :data:`INCAPACITATING_PPM`. FEC = 1 is the concentration expected to incapacitate
    the median person by sensory irritation; a lower limit (0.3) protects more
    susceptible occupants.

    References
    ----------
    ISO 13571:2012, Life-threatening components of fire -- Guidelines for the estimation
    of time to compromised tenability in fires, irritant gas (FEC) model; F values from
    memory.

    Raises
    ------
    ValueError
        For a key that is not an irritant gas (the message names the valid keys).

    Examples
    --------
    500 ppm HCl and 15 ppm acrolein: 500/1000 + 15/30 = 1.0:

    >>> round(float(fec_irritant(hcl=500e-6, acrolein=15e-6)), 6)
    1.0
    """
    unknown = sorted(set(gases) - set(IRRITANT_GASES))
    if unknown:
        raise ValueError(f"not irritant gases: {', '.join(unknown)}; valid keys: {', '.join(IRRITANT_GASES)}")
    arrays = {k: np.asarray(v, dtype=float) for k, v in gases.items() if v is not None}
    shape = np.broadcast_shapes(*(a.shape for a in arrays.values())) if arrays else ()
    total = np.zeros(shape)
    for key, a in arrays.items():
        clean = np.where(np.isnan(a) | (a < 0.0), 0.0, a)
        total = total + clean * PPM_PER_MOL_MOL / INCAPACITATING_PPM[key]
    return total
