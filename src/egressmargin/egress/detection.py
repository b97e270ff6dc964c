"""Detection time from a fire's gas history: heat detectors, sprinkler links, smoke.

A thermal element (heat detector or sprinkler link) is followed through the gas
temperature and velocity history at its location with the response time index (RTI)
model; it activates when its temperature rise reaches the rated rise. A smoke
detector is taken to respond when the obscuration (as optical density or extinction
coefficient) at its location first reaches a threshold (a percent-obscuration rating is
turned into an extinction coefficient by :func:`egressmargin.units.obscuration_to_extinction`).
"""

from __future__ import annotations

import numpy as np

from egressmargin.tenability.crossing import first_crossing

__all__ = ["activation_time", "rti_response"]


def rti_response(t_s, gas_rise, velocity_m_s, rti) -> np.ndarray:
    """Temperature rise of a detector or sprinkler link above ambient, by the RTI model.

    Parameters
    ----------
    t_s : array_like
        Times [s], shape (N,), strictly increasing. The element is at ambient at
        ``t_s[0]``.
    gas_rise : array_like
        Gas temperature rise above ambient at the element [degC], shape (..., N).
        Leading axes are independent histories (e.g. Monte Carlo samples).
    velocity_m_s : float or array_like
        Gas speed past the element [m/s], a scalar or an array broadcastable to
        ``gas_rise`` (e.g. shape (N,) for one velocity history shared by all
        samples). The magnitude is used, so a signed velocity component is fine.
    rti : float or array_like
        Response time index [m^0.5 s^0.5], > 0; a scalar or an array broadcastable to
        the leading shape ``gas_rise.shape[:-1]``.

    Returns
    -------
    numpy.ndarray
        Element temperature rise above ambient [degC], shape (..., N) (the broadcast
        of ``gas_rise``, ``velocity_m_s`` and ``rti``), with 0 at ``t_s[0]``.

    Notes
    -----
    The RTI model of Heskestad and Bill (1988):

        dT_d/dt = sqrt(u) (T_g - T_d) / RTI

    with T_d the element temperature, T_g the gas temperature and u the gas speed
    (conduction to the mount neglected). Written for the rises
    theta = T - T_amb it reads d(theta_d)/dt = c (theta_g - theta_d),
    c = sqrt(u) / RTI.

    **Linearity.** For a given velocity history the equation is linear in the rise:
    if the gas rise is multiplied by a factor f (e.g. a model-uncertainty factor on
    the temperature rise) the element rise is multiplied by the same f, exactly. The
    caller may therefore scale the gas rise, or this result, by the sampled factor.

    **Integration.** On each step [t_k, t_k+1] of length h the gas rise is taken
    linear between its samples and c constant at the step average of sqrt(u)/RTI.
    The linear ODE is then solved exactly (exponential integrator): with
    x = c h, E = exp(-x) and phi = (1 - E)/x,

        theta_d,k+1 = E theta_d,k + (phi - E) theta_g,k + (1 - phi) theta_g,k+1.

    The update is exact for a constant velocity and a piecewise-linear gas rise, so
    coarse output intervals of a fire model lose no accuracy beyond that of the
    interpolation itself. The loop runs over the N times only; all leading axes are
    handled at once.

    References
    ----------
    Heskestad, G., Bill, R. G. (1988). Quantification of thermal responsiveness of
    automatic sprinklers including conduction effects. Fire Safety Journal 14(1-2),
    113-125.

    SFPE Handbook of Fire Protection Engineering, 5th ed. (2016), Springer,
    ch. 40, Schifiliti, R. P., Custer, R. L. P., Meacham, B. J., "Design of detection
    systems" (heat detector response, RTI equation) -- chapter number from memory.

    Examples
    --------
    A constant gas rise of 100 degC at 1 m/s with RTI = 50 m^0.5 s^0.5 (time
    constant 50 s): after one time constant the rise is 100 (1 - 1/e) = 63.2 degC.

    >>> import numpy as np
    >>> t = np.array([0.0, 50.0])
    >>> round(float(rti_response(t, np.array([100.0, 100.0]), 1.0, 50.0)[-1]), 1)
    63.2
    """
    t = np.asarray(t_s, dtype=float)
    if t.ndim != 1 or t.size < 1:
        raise ValueError("t_s must be a one-dimensional array with at least one time")
    dt = np.diff(t)
    if np.any(~(dt > 0)):
        raise ValueError("t_s must be strictly increasing")
    gas = np.asarray(gas_rise, dtype=float)
    if gas.ndim < 1 or gas.shape[-1] != t.size:
        raise ValueError(
            f"gas_rise must have the time axis last with {t.size} values; "
            f"got shape {gas.shape}"
        )
    root_u = np.sqrt(np.abs(np.asarray(velocity_m_s, dtype=float)))
    gas, root_u = np.broadcast_arrays(gas, root_u)
    rti_a = np.asarray(rti, dtype=float)
    if np.any(~(rti_a > 0)):
        raise ValueError("rti must be positive [m^0.5 s^0.5]")

    # Step rate c = <sqrt(u)>/RTI and its exponential weights, shape (..., N-1).
    c = 0.5 * (root_u[..., 1:] + root_u[..., :-1]) / rti_a[..., np.newaxis]
    x = c * dt
    e = np.exp(-x)
    small = x < 1e-8
    x_safe = np.where(small, 1.0, x)
    phi = np.where(small, 1.0 - 0.5 * x, -np.expm1(-x) / x_safe)
    w_old = e
    w_g0 = phi - e
    w_g1 = 1.0 - phi
    shape = np.broadcast_shapes(gas.shape, w_old.shape[:-1] + (t.size,))
    gas = np.broadcast_to(gas, shape)
    out = np.empty(shape)
    out[..., 0] = 0.0
    theta = np.zeros(shape[:-1])
    for k in range(t.size - 1):
        theta = (
            w_old[..., k] * theta + w_g0[..., k] * gas[..., k] + w_g1[..., k] * gas[..., k + 1]
        )
        out[..., k + 1] = theta
    return out


def activation_time(t_s, link_rise, activation_rise) -> np.ndarray:
    """Time at which a thermal element's rise first reaches its activation rise.

    Parameters
    ----------
    t_s : array_like
        Times [s], shape (N,).
    link_rise : array_like
        Element temperature rise above ambient [degC], shape (..., N), e.g. from
        :func:`rti_response`.
    activation_rise : float or array_like
        Rated activation temperature minus ambient [degC], > 0; broadcastable to the
        leading shape.

    Returns
    -------
    numpy.ndarray or float
        First-crossing time [s], linearly interpolated between the bracketing samples;
        NaN where the activation rise is not reached within ``t_s``.

    Notes
    -----
    Delegates to :func:`egressmargin.tenability.crossing.first_crossing`, the
    project's one first-crossing search (linear interpolation between the two
    bracketing samples, as the contract requires for every crossing time).
    """
    level = np.asarray(activation_rise, dtype=float)
    if np.any(~(level > 0)):
        raise ValueError(
            "activation_rise must be positive [degC above ambient]: the rated "
            "temperature must be above the ambient temperature"
        )
    rise = np.asarray(link_rise, dtype=float)
    # Crossing rise/level at 1 is the same linearly interpolated time as crossing
    # rise at level, and lets a per-sample level broadcast over the leading axes.
    ratio = rise / level[..., np.newaxis]
    if ratio.ndim <= 2:
        return first_crossing(t_s, ratio, 1.0, direction="above")
    flat = first_crossing(t_s, ratio.reshape(-1, ratio.shape[-1]), 1.0, direction="above")
    return flat.reshape(ratio.shape[:-1])


