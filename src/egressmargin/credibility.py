"""Grid sensitivity of a time to limit: refinement ratios, apparent order and the GCI.

A fire simulation run on two or three grids gives two or three values of the same
result, here usually the time at which a tenability limit is first reached at a
location (seconds). This module says how much that result depends on the grid, by the
procedure of Celik et al. (2008), which builds on Roache's (1994) grid convergence index
(GCI):

1. sort the grids fine to coarse by representative cell size, h1 < h2 < h3, and form
   the refinement ratios r21 = h2/h1 and r32 = h3/h2;
2. take the differences eps21 = phi2 - phi1 and eps32 = phi3 - phi2 and classify the
   behaviour by the convergence ratio R = eps21/eps32;
3. for monotone convergence only, solve for the apparent order p, extrapolate to zero
   cell size and report the fine-grid GCI.

Everything here is a pure function of plain floats; nothing reads files or prints.
Ratios and relative errors are returned as fractions (0.015 means 1.5 %).

References
----------
Celik, I. B., Ghia, U., Roache, P. J., Freitas, C. J., Coleman, H. and Raad, P. E.
(2008). Procedure for estimation and reporting of uncertainty due to discretization in
CFD applications. Journal of Fluids Engineering 130(7), 078001.

Roache, P. J. (1994). Perspective: a method for uniform reporting of grid refinement
studies. Journal of Fluids Engineering 116(3), 405-413.

Stern, F., Wilson, R. V., Coleman, H. W. and Paterson, E. G. (2001). Comprehensive
approach to verification and validation of CFD simulations - Part 1: methodology and
procedures. Journal of Fluids Engineering 123(4), 793-802. (Convergence ratio R and
its three classes; citation details from memory.)

NPARC Alliance, NASA Glenn Research Center. Examining spatial (grid) convergence
(web tutorial): refinement ratio r >= 1.1 so that the discretization error can be told
apart from other error sources.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

__all__ = [
    "CHANGE_THRESHOLD",
    "MIN_REFINEMENT_RATIO",
    "RECOMMENDED_REFINEMENT_RATIO",
    "SAFETY_FACTOR_THREE_GRIDS",
    "GCI_THRESHOLD",
    "ORDER_LOW",
    "ORDER_HIGH",
    "flag_change",
    "grid_flags",
    "grid_convergence",
    "refinement_problems",
    "refinement_ratio",
]

#: Factor of safety for a three-grid study, Fs = 1.25 (Celik et al. 2008, Eq. 5c;
#: Roache 1994).
SAFETY_FACTOR_THREE_GRIDS: float = 1.25

#: Smallest refinement ratio the project accepts as input, r >= 1.1 (NPARC Alliance,
#: "Examining spatial (grid) convergence": below it the grid's effect cannot be told
#: apart from iteration and round-off errors).
MIN_REFINEMENT_RATIO: float = 1.1

#: Refinement ratio Celik et al. (2008, Step 2) call desirable, r > 1.3, "based on
#: experience and not on formal derivation" (wording from memory; the value is
#: corroborated by secondary sources).
RECOMMENDED_REFINEMENT_RATIO: float = 1.3

#: Relative change of a time to limit between the two finest grids above which the
#: result is flagged as grid sensitive: 10 % (common practice, no single source).
CHANGE_THRESHOLD: float = 0.10

#: Fine-grid GCI above which a result is flagged as grid sensitive, and the largest
#: relative change from the fine-grid value to the extrapolated one: 10 % (project
#: choice, the same figure as CHANGE_THRESHOLD; configurable as credibility.max_gci).
GCI_THRESHOLD: float = 0.10

#: Apparent orders outside [ORDER_LOW, ORDER_HIGH] are flagged. The schemes of the fire
#: models in use are usually second order in space (formal order 2, common practice), and
#: an apparent order far from the formal one says the grids are not in the asymptotic
#: range, where Richardson extrapolation and the GCI hold (Celik et al. 2008, Step 3 and
#: the discussion of Table 1; Roache 1994). Below 0.5 (a quarter of 2) the change barely
#: shrinks with refinement and extrapolation moves the value far (order 0.15 moves a
#: 200 s time to 119 s); above 4 (twice 2) the change shrinks faster than any scheme in
#: use can explain, so the small GCI is not to be trusted either. The bounds 0.5 and 4
#: are a project choice.
ORDER_LOW: float = 0.5
ORDER_HIGH: float = 4.0

# Differences smaller than this fraction of the values' magnitude count as zero
# (round-off), and the fixed-point iteration for p stops when a step is below _P_TOL.
_ROUND_OFF = 1e-12
_P_TOL = 1e-12
_P_MAX_ITER = 500


def refinement_ratio(h_coarse: float, h_fine: float) -> float:
    """Grid refinement ratio r = h_coarse / h_fine.

    Parameters
    ----------
    h_coarse : float
        Representative cell size of the coarser grid [m].
    h_fine : float
        Representative cell size of the finer grid [m].

    Returns
    -------
    float
        Refinement ratio [-]; greater than 1 when ``h_coarse`` is the coarser grid.

    Notes
    -----
    r = h_coarse / h_fine (Celik et al. 2008, Step 2, r21 = h2/h1). For a grid of N cells
    filling a domain of volume V, the representative size is h = (V/N)^(1/3) (in 2-D,
    h = (A/N)^(1/2)), Celik et al. (2008) Step 1.

    References
    ----------
    Celik et al. (2008), J. Fluids Eng. 130(7), 078001, Step 2.

    Examples
    --------
    >>> refinement_ratio(0.2, 0.1)
    2.0
    """
    h_coarse = float(h_coarse)
    h_fine = float(h_fine)
    if not (math.isfinite(h_coarse) and math.isfinite(h_fine)) or h_coarse <= 0 or h_fine <= 0:
        raise ValueError(
            f"cell sizes must be positive finite numbers; got {h_coarse!r} and {h_fine!r}"
        )
    return h_coarse / h_fine


def _is_missing(value: Any) -> bool:
    if value is None:
        return True
    try:
        return not math.isfinite(float(value))
    except (TypeError, ValueError):
        return True


def _fmt(value: float) -> str:
    return f"{value:.4g}"


def _pct(fraction: float) -> str:
    return f"{100.0 * fraction:.3g} %"


def _fixed_point_order(r21: float, r32: float, eps21: float, eps32: float) -> float:
    """Solve Celik et al. (2008) Eqs. 3a-3c for p by fixed-point iteration.

    p = |ln|eps32/eps21| + q(p)| / ln(r21),
    q(p) = ln((r21^p - s) / (r32^p - s)),  s = sign(eps32/eps21).

    Raises ArithmeticError when the iteration leaves the real numbers or does not
    settle (it need not: the map is not a contraction for every r21, r32).
    """
    s = 1.0 if eps32 / eps21 > 0 else -1.0
    log_ratio = math.log(abs(eps32 / eps21))
    ln_r21 = math.log(r21)
    p = abs(log_ratio) / ln_r21  # start with q = 0, exact when r21 == r32
    for _ in range(_P_MAX_ITER):
        a = r21**p - s
        b = r32**p - s
        if a <= 0 or b <= 0:
            raise ArithmeticError("q(p) is undefined: r^p - s is not positive")
        p_new = abs(log_ratio + math.log(a / b)) / ln_r21
        if not math.isfinite(p_new):
            raise ArithmeticError("apparent order is not finite")
        if abs(p_new - p) <= _P_TOL * max(1.0, abs(p_new)):
            return p_new
        p = p_new
    raise ArithmeticError(f"fixed-point iteration did not settle in {_P_MAX_ITER} steps")


def _bracketed_order(r21: float, r32: float, ratio: float) -> float:
    """Solve the same equation for monotone data (s = 1) by bracketing.

    For s = 1, Eqs. 3a-3c are equivalent to
    R = eps21/eps32 = (r21^p - 1) / (r21^p (r32^p - 1)),
    whose right side falls strictly from ln(r21)/ln(r32) (p -> 0) to 0 (p -> inf), so
    one root exists for 0 < R < ln(r21)/ln(r32) and Brent's method finds it.
    """
    from scipy.optimize import brentq

    ln21, ln32 = math.log(r21), math.log(r32)
    target = math.log(ratio)

    def g(p: float) -> float:
        return math.log(math.expm1(p * ln21)) - p * ln21 - math.log(math.expm1(p * ln32)) - target

    p_lo, p_hi = 1e-9, 1.0
    while g(p_hi) > 0:
        p_hi *= 2.0
        if p_hi * max(ln21, ln32) > 600.0:
            raise ArithmeticError("apparent order is implausibly large")
    if g(p_lo) < 0:
        raise ArithmeticError("no positive apparent order fits these differences")
    return float(brentq(g, p_lo, p_hi, xtol=1e-14, rtol=1e-13, maxiter=500))


def _apparent_order(r21: float, r32: float, eps21: float, eps32: float) -> float:
    """Apparent order p: fixed-point iteration first, bracketing if it does not settle."""
    try:
        return _fixed_point_order(r21, r32, eps21, eps32)
    except ArithmeticError:
        if eps21 / eps32 <= 0:
            raise
        return _bracketed_order(r21, r32, eps21 / eps32)


def grid_convergence(
    cells: Sequence[float],
    values: Sequence[float | None],
    safety_factor: float = SAFETY_FACTOR_THREE_GRIDS,
) -> dict[str, Any]:
    """Grid sensitivity of one result computed on two or three grids.

    Parameters
    ----------
    cells : sequence of float
        Representative cell size of each grid [m], 2 or 3 of them, in any order.
    values : sequence of float or None
        The result on each grid, in the same order as ``cells``, typically a time to
        limit [s]. None or NaN where the result is missing (limit not reached on that
        grid).
    safety_factor : float, optional
        Factor of safety Fs in the GCI [-]; 1.25 for three grids (Celik et al. 2008).

    Returns
    -------
    dict
        ``h`` cell sizes sorted fine to coarse [m]; ``values`` in that order (None where
        missing); ``r21``, ``r32`` refinement ratios [-] (``r32`` None for two grids);
        ``relative_change`` = |phi1 - phi2| / |phi1| between the two finest grids [-];
        ``convergence_ratio`` R = eps21/eps32 [-] (None when eps32 is zero
        within round-off); ``p`` apparent order [-];
        ``phi_ext21`` extrapolated value [unit of ``values``]; ``e_a21`` approximate
        relative error [-]; ``e_ext21`` extrapolated relative error [-]; ``gci_fine21``
        fine-grid convergence index [-]; ``oscillation_range`` (low, high) of the three
        values for oscillatory cases; ``convergence``, one of ``"monotone"``,
        ``"oscillatory"``, ``"divergent"``, ``"converged"``, ``"two grids"``,
        ``"incomplete"``; ``note``, a plain-English sentence on what was and was not
        computed. Quantities that cannot be computed are None.

    Notes
    -----
    With h1 < h2 < h3 and phi_k the value on grid k (Celik et al. 2008):

    - r21 = h2/h1, r32 = h3/h2; eps21 = phi2 - phi1, eps32 = phi3 - phi2.
    - Convergence ratio R = eps21/eps32 (Stern et al. 2001, for a constant refinement
      ratio): 0 < R < 1 monotone convergence, R < 0 oscillatory (Celik et al.:
      eps32/eps21 < 0), R > 1 divergence. With unequal ratios r21 != r32 the bound 1
      moves: for exact data phi = phi0 + c h^p one has
      R = (r21^p - 1) / (r21^p (r32^p - 1)), which falls from ln(r21)/ln(r32) at p -> 0
      to 0 as p grows. So here the triple is divergent when
      R >= R_div = ln(r21)/ln(r32) (derived in this module; R_div = 1 when
      r21 = r32, which is Stern et al.'s rule; R = R_div means p = 0 and is counted
      as divergent). Without this, a perfectly first-order triple on r21 = 2,
      r32 = 1.25 (R = 2) would be called divergent. Both differences zero within
      round-off: ``"converged"``; eps21 zero alone: the two finest grids agree, also
      ``"converged"``; eps32 zero alone: divergent.
    - Apparent order, Eqs. 3a-3c, solved by fixed-point iteration::

          p = |ln|eps32/eps21| + q(p)| / ln(r21)
          q(p) = ln((r21^p - s) / (r32^p - s)),   s = sign(eps32/eps21)

      The iteration does not settle for every pair of ratios (for example r21 = 1.25,
      r32 = 2); then the same equation, which for s = 1 reads
      R = (r21^p - 1) / (r21^p (r32^p - 1)), is solved by Brent's method on a bracket.

    - Extrapolated value, Eq. 4: phi_ext21 = (r21^p phi1 - phi2) / (r21^p - 1).
    - Approximate relative error, Eq. 5a: e_a21 = |(phi1 - phi2) / phi1|.
    - Extrapolated relative error, Eq. 5b: e_ext21 = |(phi_ext21 - phi1) / phi_ext21|.
    - Fine-grid convergence index, Eq. 5c: GCI_fine21 = Fs e_a21 / (r21^p - 1),
      Fs = 1.25.

    The equation numbers follow Celik et al. (2008) as remembered (numbering from
    memory). Order, extrapolation and GCI are reported only for monotone convergence;
    for oscillatory and divergent triples they would be meaningless and are None, as
    Celik et al. and Stern et al. advise. For an oscillating triple the range of the
    three values is given instead.

    References
    ----------
    Celik et al. (2008), J. Fluids Eng. 130(7), 078001, Steps 1-5, Eqs. 3-5, Table 1.
    Roache (1994), J. Fluids Eng. 116(3), 405-413.
    Stern et al. (2001), J. Fluids Eng. 123(4), 793-802.

    Examples
    --------
    Celik et al. (2008) Table 1, first column (2-D grids of 18000, 8000 and 4500 cells,
    h = (1/N)^(1/2)):

    >>> out = grid_convergence([(1/18000)**0.5, (1/8000)**0.5, (1/4500)**0.5],
    ...                        [6.063, 5.972, 5.863])
    >>> out["convergence"], round(out["p"], 2), round(out["phi_ext21"], 4)
    ('monotone', 1.53, 6.1685)
    >>> round(out["gci_fine21"], 3)
    0.022
    """
    if len(cells) != len(values):
        raise ValueError(
            f"cells and values must have the same length; got {len(cells)} and {len(values)}"
        )
    if len(cells) not in (2, 3):
        raise ValueError(f"grid_convergence takes 2 or 3 grids; got {len(cells)}")
    h_in = [float(h) for h in cells]
    if any(not math.isfinite(h) or h <= 0 for h in h_in):
        raise ValueError(f"cell sizes must be positive finite numbers; got {h_in}")
    if len(set(h_in)) != len(h_in):
        raise ValueError(f"each grid needs a different cell size; got {h_in}")
    safety_factor = float(safety_factor)
    if not math.isfinite(safety_factor) or safety_factor <= 0:
        raise ValueError(f"safety_factor must be a positive number; got {safety_factor!r}")

    order = sorted(range(len(h_in)), key=lambda i: h_in[i])
    h = [h_in[i] for i in order]
    phi: list[float | None] = [
        None if _is_missing(values[i]) else float(values[i])  # type: ignore[arg-type]
        for i in order
    ]
    n = len(h)
    r21 = h[1] / h[0]
    r32 = h[2] / h[1] if n == 3 else None

    out: dict[str, Any] = {
        "h": h,
        "values": phi,
        "r21": r21,
        "r32": r32,
        "relative_change": None,
        "convergence_ratio": None,
        "p": None,
        "phi_ext21": None,
        "e_a21": None,
        "e_ext21": None,
        "gci_fine21": None,
        "oscillation_range": None,
        "convergence": None,
        "note": "",
    }

    # Relative change between the two finest grids (Celik et al. 2008, Eq. 5a).
    phi1, phi2 = phi[0], phi[1]
    change_text = ""
    if phi1 is not None and phi2 is not None:
        if phi1 != 0.0:
            out["relative_change"] = abs(phi1 - phi2) / abs(phi1)
            out["e_a21"] = out["relative_change"]
            change_text = (
                f"the two finest grids differ by {_pct(out['relative_change'])} "
                f"({_fmt(phi1)} and {_fmt(phi2)})"
            )
        else:
            change_text = "the finest-grid value is zero, so no relative change is defined"

    missing = [k + 1 for k, v in enumerate(phi) if v is None]
    if missing:
        out["convergence"] = "incomplete"
        which = ", ".join(f"grid {k}" for k in missing)
        done = f"; {change_text}" if change_text else ""
        out["note"] = (
            f"Incomplete: no value on {which} (1 = finest), for example the limit was not "
            f"reached there{done}; the apparent order, extrapolated value and GCI were not "
            f"computed."
        )
        return out

    if n == 2:
        out["convergence"] = "two grids"
        out["note"] = (
            f"Two grids only: {change_text}; the apparent order, extrapolated value and "
            f"GCI need a third grid and were not computed."
        )
        return out

    phi3 = phi[2]
    assert phi1 is not None and phi2 is not None and phi3 is not None and r32 is not None
    eps21 = phi2 - phi1
    eps32 = phi3 - phi2
    scale = max(abs(phi1), abs(phi2), abs(phi3), 1e-300)
    zero21 = abs(eps21) <= _ROUND_OFF * scale
    zero32 = abs(eps32) <= _ROUND_OFF * scale

    if zero21 and zero32:
        out["convergence"] = "converged"
        out["convergence_ratio"] = None
        out["note"] = (
            f"Converged: the value is the same on all three grids ({_fmt(phi1)}) within "
            f"round-off; no apparent order or GCI can be computed from zero differences."
        )
        return out
    if zero21:
        out["convergence"] = "converged"
        out["convergence_ratio"] = 0.0
        out["note"] = (
            f"Converged on the two finest grids: they agree within round-off "
            f"({_fmt(phi1)}) while the coarsest grid gives {_fmt(phi3)}; no apparent "
            f"order or GCI can be computed from a zero difference."
        )
        return out
    if zero32:
        out["convergence"] = "divergent"
        out["convergence_ratio"] = None  # eps21/0: kept out of JSON as None, not inf
        out["note"] = (
            f"Divergent: the two coarsest grids agree but refining further changes the "
            f"value ({change_text}); the apparent order and GCI would be meaningless and "
            f"were not computed."
        )
        return out

    ratio = eps21 / eps32
    out["convergence_ratio"] = ratio
    if ratio < 0:
        low, high = min(phi1, phi2, phi3), max(phi1, phi2, phi3)
        out["convergence"] = "oscillatory"
        out["oscillation_range"] = (low, high)
        out["note"] = (
            f"Oscillatory: the value goes up and down as the grid is refined "
            f"(R = eps21/eps32 = {_fmt(ratio)}), ranging from {_fmt(low)} to {_fmt(high)}; "
            f"{change_text}; the apparent order, extrapolated value and GCI would be "
            f"meaningless and were not computed."
        )
        return out
    ratio_div = math.log(r21) / math.log(r32)
    if ratio >= ratio_div:
        out["convergence"] = "divergent"
        out["note"] = (
            f"Divergent: the change does not shrink as the grid is refined "
            f"(R = eps21/eps32 = {_fmt(ratio)}, at or above {_fmt(ratio_div)} = "
            f"ln r21/ln r32); {change_text}; the apparent order, extrapolated value and "
            f"GCI would be meaningless and were not computed."
        )
        return out

    out["convergence"] = "monotone"
    try:
        p = _apparent_order(r21, r32, eps21, eps32)
    except ArithmeticError as exc:
        out["note"] = (
            f"Monotone convergence (R = {_fmt(ratio)}), but the apparent order could not "
            f"be solved ({exc}); {change_text}; no extrapolated value or GCI was computed."
        )
        return out
    rp = r21**p
    phi_ext = (rp * phi1 - phi2) / (rp - 1.0)
    out["p"] = p
    out["phi_ext21"] = phi_ext
    if out["e_a21"] is not None:
        out["gci_fine21"] = safety_factor * out["e_a21"] / (rp - 1.0)
    if phi_ext != 0.0:
        out["e_ext21"] = abs((phi_ext - phi1) / phi_ext)
    gci_text = (
        f"fine-grid GCI {_pct(out['gci_fine21'])} (Fs = {safety_factor:g})"
        if out["gci_fine21"] is not None
        else "no GCI (finest-grid value is zero)"
    )
    out["note"] = (
        f"Monotone convergence over three grids (R = {_fmt(ratio)}): apparent order "
        f"p = {p:.3g}, extrapolated value {_fmt(phi_ext)}, {gci_text}; {change_text}."
    )
    return out


def refinement_problems(cells: Sequence[float]) -> list[str]:
    """Problems with a set of grid cell sizes, as messages for the person who set them.

    Parameters
    ----------
    cells : sequence of float
        Representative cell size of each grid [m], in any order.

    Returns
    -------
    list of str
        One message per problem; empty when the grids can be used. Checked: fewer than
        two grids; sizes that are not positive finite numbers; repeated sizes (the
        sorted sizes are not strictly increasing); a refinement ratio between
        neighbouring grids below 1.1.

    Notes
    -----
    The input threshold r >= 1.1 is from the NPARC Alliance tutorial "Examining spatial
    (grid) convergence": with a smaller ratio the grid's effect cannot be told apart
    from other errors (iteration, round-off). Celik et al. (2008, Step 2) go further and
    call r > 1.3 desirable, based on experience (wording from memory). Order does not
    matter: the sizes are sorted before ratios are formed.

    References
    ----------
    Celik et al. (2008), J. Fluids Eng. 130(7), 078001, Step 2.
    NPARC Alliance, NASA Glenn Research Center, "Examining spatial (grid) convergence".

    Examples
    --------
    >>> refinement_problems([0.10, 0.15, 0.225])
    []
    >>> len(refinement_problems([0.10, 0.105]))
    1
    """
    cells = list(cells)
    problems: list[str] = []
    sizes: list[float] = []
    for k, raw in enumerate(cells, start=1):
        try:
            h = float(raw)
        except (TypeError, ValueError):
            problems.append(f"cell size {k} is {raw!r}; expected a positive number (m)")
            continue
        if not math.isfinite(h) or h <= 0:
            problems.append(f"cell size {k} is {raw!r}; expected a positive number (m)")
            continue
        sizes.append(h)
    if len(cells) < 2:
        problems.append(f"a grid sensitivity check needs at least 2 grids; got {len(cells)}")
    sizes.sort()
    seen: set[float] = set()
    for h in sizes:
        if h in seen:
            problems.append(
                f"cell size {h:g} appears more than once; each grid needs a different "
                f"cell size (the sizes must strictly decrease from coarse to fine)"
            )
        seen.add(h)
    distinct = sorted(seen)
    for fine, coarse in zip(distinct, distinct[1:]):
        r = coarse / fine
        if r < MIN_REFINEMENT_RATIO:
            problems.append(
                f"grids with cell sizes {coarse:g} and {fine:g} have a refinement ratio of "
                f"{r:.3g}, below {MIN_REFINEMENT_RATIO:g}: a change this small is dominated "
                f"by other errors (iteration, round-off) and cannot show the grid's effect; "
                f"Celik et al. (2008) recommend r > {RECOMMENDED_REFINEMENT_RATIO:g}"
            )
    return problems


def flag_change(relative_change: float | None, threshold: float = CHANGE_THRESHOLD) -> bool:
    """True when a relative change between grids is large enough to report.

    Parameters
    ----------
    relative_change : float or None
        |phi1 - phi2| / |phi1| between the two finest grids [-] (a fraction, 0.1 = 10 %).
        None or NaN when it could not be computed.
    threshold : float, optional
        Fraction above which the change is flagged [-]; default 0.10 (10 %, common
        practice, no single source).

    Returns
    -------
    bool
        True when ``relative_change`` exceeds ``threshold``, and also when it is unknown
        (None or NaN): a change that could not be measured is not shown to be small.

    Examples
    --------
    >>> flag_change(0.15), flag_change(0.05), flag_change(None)
    (True, False, True)
    """
    if _is_missing(relative_change):
        return True
    return abs(float(relative_change)) > float(threshold)  # type: ignore[arg-type]


def grid_flags(g: dict[str, Any], max_change: float = CHANGE_THRESHOLD,
               max_gci: float = GCI_THRESHOLD) -> list[str]:
    """Every reason, in words, to flag one grid-sensitivity result (empty when there is none).

    Parameters
    ----------
    g : dict
        The output of :func:`grid_convergence`.
    max_change : float
        Largest relative change between the two finest grids [-] (0.10 = 10 %).
    max_gci : float
        Largest fine-grid GCI [-], and largest relative change |phi_ext21 - phi1| / |phi1|
        from the fine-grid value to the extrapolated one [-].

    Returns
    -------
    list of str
        One sentence per reason: a divergent or oscillatory triple; a value missing on
        some grids but not all; the fine-pair change above ``max_change``; for monotone
        convergence, GCI_fine above ``max_gci`` (Celik et al. 2008, Eq. 5c), an apparent
        order outside [ORDER_LOW, ORDER_HIGH] (Celik et al. 2008, Eq. 3; see the
        constants), or an extrapolated value (Eq. 4) more than ``max_gci`` from the
        fine-grid value. A value reached on no grid gives no reason (nothing to be grid
        sensitive).

    Examples
    --------
    >>> g = grid_convergence([0.05, 0.10, 0.20], [200.0, 209.0, 219.0])
    >>> len(grid_flags(g))
    3
    """
    reached_any = any(v is not None for v in g["values"])
    reasons: list[str] = []
    conv = g.get("convergence")
    if conv == "divergent":
        reasons.append("divergent: the change does not shrink as the grid is refined")
    elif conv == "oscillatory":
        lo, hi = g["oscillation_range"]
        reasons.append(f"oscillatory: the value lies between {lo:.4g} s and {hi:.4g} s on these grids")
    elif conv == "incomplete" and reached_any:
        reasons.append("the limit is reached on some grids but not on others")
    rc = g.get("relative_change")
    if rc is not None and flag_change(rc, max_change):
        reasons.append(f"the two finest grids differ by {rc:.1%}, above {max_change:.0%}")
    gci, p, ext, phi1 = g.get("gci_fine21"), g.get("p"), g.get("phi_ext21"), g["values"][0]
    if not _is_missing(gci) and gci > max_gci:
        reasons.append(f"fine-grid GCI {gci:.1%}, above {max_gci:.0%}")
    if not _is_missing(p) and not ORDER_LOW <= p <= ORDER_HIGH:
        reasons.append(f"apparent order {p:.2f}, outside {ORDER_LOW:g} to {ORDER_HIGH:g} (formal order of "
                       "the usual schemes: 2), so the grids are not in the asymptotic range")
    if not _is_missing(ext) and phi1 not in (None, 0.0):
        shift = abs(ext - phi1) / abs(phi1)
        if shift > max_gci:
            reasons.append(f"the extrapolated value {ext:.4g} s differs from the fine-grid {phi1:.4g} s "
                           f"by {shift:.1%}, above {max_gci:.0%}")
    return reasons
