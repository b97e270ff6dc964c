"""ASET engine: times to untenability at every location, raw and corrected, fast.

Given one scenario's histories (internal units) and a criteria set, this module finds
for each location and criterion the time the limit is first reached, for the raw
predictions and for every Monte Carlo sample of the model-error factors.

How it stays fast (no loop over samples x time in Python):

* A criterion on one series scaled by one factor (temperature rise, heat flux,
  extinction, layer height) is exact: the sample's factor moves the *level* instead of the
  series, and the first crossing of many levels on one series is one ``searchsorted`` on
  its running maximum (:func:`~egressmargin.tenability.crossing.crossing_times_for_levels`).
* A dose (FED) depends on several factors. The cumulative dose is computed on a grid of
  factor values (G nodes per uncertain quantity, spanning the samples) and interpolated
  multilinearly in the factors for each sample; its crossing is found by a vectorised
  bisection restricted to the bracket given by the crossings at the cell's corners. Every dose rate is
  nondecreasing in every factor, so crossing times are monotone and the true crossing lies
  between the crossings at the lower and upper corners of the sample's grid cell: that
  bracket is reported as ``grid_bound_s``, an upper bound of the interpolation error.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from itertools import product

import numpy as np

from .criteria import CriteriaSet, Criterion
from .histories import O2_AMBIENT, ScenarioData
from .study import SMOKE_KEYS
from .tenability import heat, layer, toxicity, visibility
from .tenability.crossing import crossing_times_for_levels, cumulative_trapezoid

#: Grid nodes per uncertain quantity for dose interpolation, by number of quantities
#: (project choice: memory G**k * L * N kept moderate; the bound is reported).
GRID_NODES = {1: 21, 2: 10, 3: 6, 4: 5}
#: Cap on the bytes of one dose grid; locations are processed in chunks below it.
GRID_BYTES = 160e6

#: Which factor each criterion's inputs use, for the validated-range check and reporting.
CRITERION_QUANTITIES = {
    "temperature": ("temperature",),
    "heat_flux": ("heat_flux",),
    "visibility": ("smoke",),
    "layer_height": ("layer_height",),
    "fed_toxic": ("co", "hcn", "co2", "o2"),
    "fed_heat": ("temperature", "heat_flux"),
}


@dataclass
class Prepared:
    """Per-scenario arrays derived once from the histories, in validated form.

    ``rise`` is the temperature rise above ambient (the validated temperature),
    ``o2_depletion`` the depletion below ambient, ``extinction`` the natural-log
    extinction coefficient from whichever smoke series a location has.
    """

    t_s: np.ndarray
    ids: list[str]
    amb_c: np.ndarray
    rise: np.ndarray | None
    temp_present: np.ndarray
    extinction: np.ndarray | None
    smoke_kind: list[str | None]
    visibility_given: np.ndarray | None   # the visibility series as given, where that is the smoke series
    flux: np.ndarray | None
    layer: np.ndarray | None
    layer_source: list[str | None]
    gases: dict[str, np.ndarray]          # co, hcn, co2 fractions; NaN rows where absent
    o2_amb: float
    o2_depletion: np.ndarray | None
    velocity: np.ndarray | None
    present: dict[str, np.ndarray] = field(default_factory=dict)
    dose_grids: dict = field(default_factory=dict)   # reused across calls with factors in range

    @property
    def n_loc(self) -> int:
        return len(self.ids)


def prepare(data: ScenarioData, criteria: CriteriaSet, ambient_c: float | None = None,
            ambient_o2: float | None = None) -> Prepared:
    """Derive the validated quantities of every location once."""
    L = len(data.location_ids)
    t = data.t_s
    present = {k: data.has(k) for k in ("temperature", "co", "co2", "o2", "hcn", "heat_flux", "layer_height",
                                         "velocity", *SMOKE_KEYS)}
    temp = data.series.get("temperature")
    if temp is not None:
        amb = np.where(present["temperature"], temp[:, 0] if ambient_c is None else ambient_c, np.nan)
        rise = temp - amb[:, None]
    else:
        amb, rise = np.full(L, np.nan), None
    vis = criteria.items.get("visibility")
    c_sign = vis.params.get("sign_constant", visibility.SIGN_CONSTANT_LIGHT_EMITTING) if vis else \
        visibility.SIGN_CONSTANT_LIGHT_EMITTING
    k_m = vis.params.get("mass_extinction", visibility.MASS_EXTINCTION_FLAMING_M2_KG) if vis else \
        visibility.MASS_EXTINCTION_FLAMING_M2_KG
    ext = np.full((L, len(t)), np.nan)
    kind: list[str | None] = [None] * L
    for li in range(L):
        for key in SMOKE_KEYS:
            if present[key][li]:
                v = data.series[key][li]
                if key == "extinction":
                    k = v
                elif key == "optical_density":
                    k = visibility.extinction_from_optical_density(v)
                elif key == "soot":
                    k = visibility.extinction_from_soot(v, k_m)
                else:
                    k = visibility.extinction_from_visibility(v, c_sign)
                ext[li] = k
                kind[li] = key
                break
    lay = np.full((L, len(t)), np.nan)
    lsrc: list[str | None] = [None] * L
    for li in range(L):
        if present["layer_height"][li]:
            lay[li] = data.series["layer_height"][li]
            lsrc[li] = "layer_height"
        elif li in data.profiles:
            heights, temps_c, ceiling = data.profiles[li]
            lay[li] = layer.layer_height_integral(heights, temps_c + 273.15, ceiling)
            lsrc[li] = "temperature_profile"
    o2 = data.series.get("o2")
    o2_amb = O2_AMBIENT if ambient_o2 is None else ambient_o2
    return Prepared(
        t_s=t, ids=list(data.location_ids), amb_c=amb, rise=rise, temp_present=present["temperature"],
        extinction=ext if any(kind) else None, smoke_kind=kind, visibility_given=data.series.get("visibility"),
        flux=data.series.get("heat_flux"), layer=lay if any(lsrc) else None, layer_source=lsrc,
        gases={g: data.series[g] for g in ("co", "hcn", "co2") if g in data.series},
        o2_amb=o2_amb, o2_depletion=None if o2 is None else o2_amb - o2,
        velocity=data.series.get("velocity"), present=present)


# ----------------------------------------------------------------------------------------
# applying factors to validated quantities
# ----------------------------------------------------------------------------------------

def corrected_inputs(prep: Prepared, names, factor: dict[str, float], rows=slice(None)) -> dict:
    """The corrected series (internal units) that a dose needs, at one set of factors."""
    out = {}
    for q in names:
        f = factor.get(q, 1.0)
        if q == "temperature" and prep.rise is not None:
            out[q] = prep.amb_c[rows, None] + prep.rise[rows] * f
        elif q == "heat_flux" and prep.flux is not None:
            out[q] = prep.flux[rows] * f
        elif q in ("co", "hcn", "co2") and q in prep.gases:
            out[q] = prep.gases[q][rows] * f
        elif q == "o2" and prep.o2_depletion is not None:
            out[q] = np.clip(prep.o2_amb - prep.o2_depletion[rows] * f, 0.0, None)
    return out


def dose_rate(criterion: Criterion, inputs: dict) -> np.ndarray:
    """FED rate per minute for a dose criterion from corrected inputs."""
    if criterion.id == "fed_toxic":
        fn = toxicity.toxic_method(criterion.params.get("method", "iso13571"))
        return fn(co=inputs.get("co"), hcn=inputs.get("hcn"), co2=inputs.get("co2"), o2=inputs.get("o2"))
    return heat.fed_heat_rate(temperature_degc=inputs.get("temperature"), flux_kw_m2=inputs.get("heat_flux"),
                              radiant_threshold_kw_m2=criterion.params.get(
                                  "radiant_threshold", heat.RADIANT_THRESHOLD_KW_M2))


def dose_quantities(criterion: Criterion) -> tuple[str, ...]:
    if criterion.id == "fed_toxic":
        gases = getattr(toxicity, "METHOD_GASES", {}).get(criterion.params.get("method", "iso13571"))
        return tuple(gases) if gases else toxicity.TOXIC_GASES
    return ("temperature", "heat_flux")


# ----------------------------------------------------------------------------------------
# assessment status
# ----------------------------------------------------------------------------------------

def status(prep: Prepared, criterion: Criterion) -> tuple[np.ndarray, list[list[str]]]:
    """Which locations can be assessed for ``criterion``, and the series each lacks."""
    L = prep.n_loc
    p = prep.present
    cid = criterion.id
    if cid == "temperature":
        return p["temperature"].copy(), [[] if p["temperature"][i] else ["temperature"] for i in range(L)]
    if cid == "heat_flux":
        return p["heat_flux"].copy(), [[] if p["heat_flux"][i] else ["heat_flux"] for i in range(L)]
    if cid == "visibility":
        ok = np.array([k is not None for k in prep.smoke_kind])
        return ok, [[] if ok[i] else ["extinction (or optical_density, soot, visibility)"] for i in range(L)]
    if cid == "layer_height":
        ok = np.array([s is not None for s in prep.layer_source])
        return ok, [[] if ok[i] else ["layer_height (or temperature_profile)"] for i in range(L)]
    gases = dose_quantities(criterion)
    missing = [[g for g in gases if not p[g][i]] for i in range(L)]
    if cid == "fed_toxic":
        dosing = [g for g in gases if g != "co2"]          # CO2 alone only multiplies a dose
        ok = np.array([any(p[g][i] for g in dosing) for i in range(L)])
    else:
        ok = p["temperature"] | p["heat_flux"]
    return ok, missing


# ----------------------------------------------------------------------------------------
# single scaled series: exact
# ----------------------------------------------------------------------------------------

def _scaled_crossings(t_s, base, levels, direction, ok) -> np.ndarray:
    """(L, S) first crossings of ``levels[l, s]`` on ``base[l]``; NaN rows where not ok."""
    out = np.full(levels.shape, np.nan)
    for li in np.flatnonzero(ok):
        out[li] = crossing_times_for_levels(t_s, base[li], levels[li], direction)
    return out


def single_series_times(prep: Prepared, criterion: Criterion, factors: dict[str, np.ndarray], S: int,
                        ok: np.ndarray) -> np.ndarray:
    """Exact (L, S) crossing times of a criterion on one scaled series."""
    cid, lim = criterion.id, criterion.limit
    with np.errstate(divide="ignore", invalid="ignore"):
        if cid == "temperature":
            f = factors.get("temperature", np.ones(S))
            levels = (lim - prep.amb_c)[:, None] / f[None, :]
            return _scaled_crossings(prep.t_s, prep.rise, levels, "above", ok)
        if cid == "heat_flux":
            f = factors.get("heat_flux", np.ones(S))
            levels = np.broadcast_to(lim / f[None, :], (prep.n_loc, S))
            return _scaled_crossings(prep.t_s, prep.flux, levels, "above", ok)
        if cid == "visibility":
            # A visibility series given as such is searched as visibility (V / f falls to the
            # limit: V <= limit * f), so the crossing is interpolated on the series the user
            # gave; smoke given as K, D or soot is searched on K (K f reaches C / limit).
            k_lim = visibility.extinction_limit(lim, criterion.params.get("sign_constant", 8.0))
            direct = np.array([k == "visibility" for k in prep.smoke_kind])
            f = np.vstack([factors.get(smoke_factor_key(k), np.ones(S)) for k in prep.smoke_kind])
            out = _scaled_crossings(prep.t_s, prep.extinction, k_lim / f, "above", ok & ~direct)
            if direct.any():
                given = prep.visibility_given
                out_v = _scaled_crossings(prep.t_s, given, lim * f, "below", ok & direct)
                out = np.where(direct[:, None], out_v, out)
            return out
        if cid == "layer_height":
            f = factors.get("layer_height", np.ones(S))
            levels = np.broadcast_to(lim / f[None, :], (prep.n_loc, S))
            return _scaled_crossings(prep.t_s, prep.layer, levels, "below", ok)
    raise ValueError(f"not a single-series criterion: {cid}")


def smoke_factor_key(kind: str | None) -> str:
    """The factor that corrects a location's smoke series (all scale the extinction coefficient)."""
    return f"smoke:{kind}" if kind else "smoke:extinction"


# ----------------------------------------------------------------------------------------
# doses: grid over factors, multilinear interpolation, vectorised bisection
# ----------------------------------------------------------------------------------------

@dataclass
class DoseField:
    """Cumulative dose on a grid of factors, for a set of locations, and per-sample weights."""

    t_s: np.ndarray
    grid: np.ndarray          # (M, Lc, N) cumulative dose
    corners: np.ndarray       # (S, C) node indices
    weights: np.ndarray       # (S, C)
    low: np.ndarray           # (S,) node index of the lower corner
    high: np.ndarray          # (S,) node index of the upper corner
    _base: np.ndarray | None = field(default=None, repr=False)

    def values(self, idx: np.ndarray) -> np.ndarray:
        """Dose at time index ``idx`` (S, Lc) for every sample."""
        M, Lc, N = self.grid.shape
        if self._base is None:   # flat offsets of every (sample, corner, location) curve, once
            lc = np.arange(Lc)[None, :]
            self._base = (self.corners[:, :, None] * Lc + lc[:, None, :]) * N
        g = self.grid.reshape(-1)[self._base + idx[:, None, :]]
        return np.einsum("sc,scl->sl", self.weights, g)

    def crossing(self, limit: float) -> np.ndarray:
        """(S, Lc) first time the dose reaches ``limit`` (linear between samples); NaN if never."""
        n = self.grid.shape[2]
        shape = (self.corners.shape[0], self.grid.shape[1])
        last = self.values(np.full(shape, n - 1))
        first = self.values(np.zeros(shape, int))
        tc = self.bracketed_crossing(limit, np.zeros(shape, int), np.full(shape, n - 1))
        tc = np.where(first >= limit, self.t_s[0], tc)
        return np.where(last >= limit, tc, np.nan)

    def bracketed_crossing(self, limit: float, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
        """First crossing of the interpolated dose when ``dose(lo) < limit <= dose(hi)`` is known.

        Bisection inside the bracket only, then linear interpolation between the two
        samples (:meth:`crossing` calls it with the whole time axis as the bracket).
        """
        lo, hi = lo.copy(), hi.copy()
        while True:
            active = hi - lo > 1
            if not active.any():
                break
            mid = (lo + hi) // 2
            hit = self.values(mid) >= limit
            hi = np.where(active & hit, mid, hi)
            lo = np.where(active & ~hit, mid, lo)
        d_lo, d_hi = self.values(lo), self.values(hi)
        t = self.t_s
        with np.errstate(divide="ignore", invalid="ignore"):
            frac = np.where(d_hi > d_lo, (limit - d_lo) / (d_hi - d_lo), 1.0)
        return t[lo] + np.clip(frac, 0.0, 1.0) * (t[hi] - t[lo])

    def at_times(self, times_s: np.ndarray) -> np.ndarray:
        """Dose at times (S, Lc) [s], linear between samples, held at the end value after the end."""
        t = self.t_s
        x = np.clip(times_s, t[0], t[-1])
        i = np.clip(np.searchsorted(t, x, side="right") - 1, 0, len(t) - 2)
        w = (x - t[i]) / (t[i + 1] - t[i])
        return self.values(i) * (1 - w) + self.values(i + 1) * w


def _dose_grid(prep: Prepared, criterion: Criterion, names, fac: dict, varying: list, rows: np.ndarray):
    """Cumulative dose on a grid of factor values, reused while later factors stay inside it.

    The grid spans the Monte Carlo samples; the sensitivity rows (medians, 5th and 95th
    percentiles) and the along-route dose fall inside that span and reuse it.
    """
    key = (criterion.id, tuple(sorted(criterion.params.items())), rows.tobytes())
    cached = prep.dose_grids.get(key)
    if cached is not None:
        grid, c_vary, c_nodes, c_fixed = cached
        fits = True
        for q in names:
            lo, hi = float(fac[q].min()), float(fac[q].max())
            if q in c_nodes:
                fits &= c_nodes[q][0] <= lo and hi <= c_nodes[q][-1]
            else:
                fits &= lo == hi == c_fixed[q]
        if fits:
            return cached
    k = len(varying)
    G = GRID_NODES.get(k, 4) if k else 1
    nodes = {q: np.linspace(fac[q].min(), fac[q].max(), G) for q in varying}
    fixed = {q: float(fac[q][0]) for q in names if q not in varying}
    grid = np.empty((G ** k, len(rows), len(prep.t_s)))
    for m, combo in enumerate(product(range(G), repeat=k)):
        f = dict(fixed)
        f.update({q: nodes[q][j] for q, j in zip(varying, combo)})
        rate = dose_rate(criterion, corrected_inputs(prep, names, f, rows))
        grid[m] = cumulative_trapezoid(prep.t_s, np.broadcast_to(rate, grid.shape[1:]))
    prep.dose_grids[key] = (grid, varying, nodes, fixed)
    return prep.dose_grids[key]


def dose_field(prep: Prepared, criterion: Criterion, factors: dict[str, np.ndarray], S: int,
               rows: np.ndarray) -> DoseField:
    """The cumulative dose of ``criterion`` at locations ``rows`` for each of S factor samples."""
    names = [q for q in dose_quantities(criterion) if _has(prep, q)]
    fac = {q: np.broadcast_to(np.asarray(factors.get(q, 1.0), float), (S,)) for q in names}
    varying = [q for q in names if np.ptp(fac[q]) > 0]
    grid, g_vary, nodes, _ = _dose_grid(prep, criterion, names, fac, varying, rows)
    k = len(g_vary)
    if k == 0:
        corners = np.zeros((S, 1), int)
        return DoseField(prep.t_s, grid, corners, np.ones((S, 1)), corners[:, 0], corners[:, 0])
    G = len(nodes[g_vary[0]])
    pos = np.empty((S, k))
    for j, q in enumerate(g_vary):
        lo, hi = nodes[q][0], nodes[q][-1]
        pos[:, j] = (fac[q] - lo) / (hi - lo) * (G - 1)
    i0 = np.clip(np.floor(pos).astype(int), 0, G - 2)
    w = np.clip(pos - i0, 0.0, 1.0)
    strides = G ** np.arange(k - 1, -1, -1)
    bits = np.array(list(product((0, 1), repeat=k)))                      # (C, k)
    corners = ((i0[:, None, :] + bits[None, :, :]) * strides).sum(-1)      # (S, C)
    weights = np.prod(np.where(bits[None, :, :] == 1, w[:, None, :], 1 - w[:, None, :]), axis=-1)
    return DoseField(prep.t_s, grid, corners, weights, (i0 * strides).sum(-1), ((i0 + 1) * strides).sum(-1))


def _has(prep: Prepared, q: str) -> bool:
    if q == "temperature":
        return prep.rise is not None
    if q == "heat_flux":
        return prep.flux is not None
    if q == "o2":
        return prep.o2_depletion is not None
    return q in prep.gases


def node_crossings(t_s: np.ndarray, grid: np.ndarray, limit: float) -> np.ndarray:
    """(M, Lc) first time each grid curve (nondecreasing cumulative dose) reaches ``limit``.

    Linear interpolation between the bracketing samples, as for any crossing; +inf where
    the curve never reaches the limit.
    """
    hit = grid >= limit
    reached = hit.any(axis=-1)
    i = np.argmax(hit, axis=-1)
    i0 = np.maximum(i - 1, 0)
    d0 = np.take_along_axis(grid, i0[..., None], -1)[..., 0]
    d1 = np.take_along_axis(grid, i[..., None], -1)[..., 0]
    with np.errstate(divide="ignore", invalid="ignore"):
        frac = np.where(d1 > d0, (limit - d0) / (d1 - d0), 1.0)
    t = t_s[i0] + np.clip(frac, 0.0, 1.0) * (t_s[i] - t_s[i0])
    t = np.where(i == 0, t_s[0], t)
    return np.where(reached, t, np.inf)


def dose_times(prep: Prepared, criterion: Criterion, factors: dict[str, np.ndarray], S: int, ok: np.ndarray,
               with_bound: bool = True) -> tuple[np.ndarray, np.ndarray | None]:
    """(L, S) dose crossing times and, per location, the largest interpolation bracket [s].

    The crossing time is first found on every node of the factor grid. Crossing times are
    monotone in every factor, so for each sample both the truth and the crossing of the
    multilinearly interpolated dose lie between the times at the upper and the lower
    corner of its grid cell: that bracket is the reported bound, and a short bisection
    inside it finds the interpolated crossing (exact where the dose is linear in the
    factor, as the ISO 13571 CO term is). Where only the upper corner reaches the limit the
    whole time axis is searched. The bracket is None when the grid has a single node.
    """
    out = np.full((prep.n_loc, S), np.nan)
    rows_all = np.flatnonzero(ok)
    if rows_all.size == 0:
        return out, None
    bound = np.full(prep.n_loc, np.nan)
    exact = True
    k = len(dose_quantities(criterion))
    per_loc = 8 * len(prep.t_s) * GRID_NODES.get(k, 4) ** k
    chunk = max(1, int(GRID_BYTES // per_loc))
    end = prep.t_s[-1]
    for start in range(0, rows_all.size, chunk):
        rows = rows_all[start:start + chunk]
        fld = dose_field(prep, criterion, factors, S, rows)
        t_nodes = node_crossings(prep.t_s, fld.grid, criterion.limit)            # (M, Lc)
        t_early = t_nodes[fld.high]      # upper corner of each sample's cell: most dose, earliest
        t_late = t_nodes[fld.low]        # lower corner: least dose, latest
        t = np.full(t_early.shape, np.nan)
        # Both corners reach the limit: the sample's crossing on the interpolated dose lies
        # between theirs, so a bisection inside that bracket finds it.
        both = np.isfinite(t_late)
        if both.any():
            n = len(prep.t_s)
            lo = np.clip(np.searchsorted(prep.t_s, np.where(both, t_early, prep.t_s[0]), "left") - 1, 0, n - 1)
            hi = np.clip(np.searchsorted(prep.t_s, np.where(both, t_late, prep.t_s[0]), "left"), 0, n - 1)
            hi = np.maximum(hi, lo + 1)
            t = np.where(both, fld.bracketed_crossing(criterion.limit, lo, np.minimum(hi, n - 1)), t)
            t = np.where(both & (t_early <= prep.t_s[0]), prep.t_s[0], t)
        # Only the upper corner reaches it: the sample may or may not; full search there.
        mixed = np.isfinite(t_early) & ~both
        if mixed.any():
            cols = np.flatnonzero(mixed.any(axis=0))
            sub = DoseField(fld.t_s, fld.grid[:, cols, :], fld.corners, fld.weights, fld.low, fld.high)
            t_mixed = sub.crossing(criterion.limit)
            t[:, cols] = np.where(mixed[:, cols], t_mixed, t[:, cols])
        out[rows] = t.T
        if with_bound and fld.grid.shape[0] > 1:
            exact = False
            width = np.where(np.isfinite(t_early), np.where(np.isfinite(t_late), t_late, end) - t_early, 0.0)
            bound[rows] = width.max(axis=0)
    return out, (None if exact else bound)


# ----------------------------------------------------------------------------------------
# all criteria
# ----------------------------------------------------------------------------------------

@dataclass
class CriterionResult:
    times: np.ndarray                 # (L, S)
    assessed: np.ndarray              # (L,)
    missing: list[list[str]]
    grid_bound_s: np.ndarray | None = None   # (L,) per-location bracket [s]


def criterion_times(prep: Prepared, criterion: Criterion, factors: dict[str, np.ndarray], S: int,
                    with_bound: bool = True) -> CriterionResult:
    ok, missing = status(prep, criterion)
    if criterion.id in ("fed_toxic", "fed_heat"):
        times, bound = dose_times(prep, criterion, factors, S, ok, with_bound)
        return CriterionResult(times, ok, missing, bound)
    return CriterionResult(single_series_times(prep, criterion, factors, S, ok), ok, missing)


def evaluate(prep: Prepared, criteria: CriteriaSet, factors: dict[str, np.ndarray], S: int,
             with_bound: bool = True) -> dict[str, CriterionResult]:
    """Every criterion's (L, S) times for the given factor samples."""
    return {cid: criterion_times(prep, c, factors, S, with_bound) for cid, c in criteria.items.items()}


def location_aset(results: dict[str, CriterionResult]) -> np.ndarray:
    """(L, S) earliest crossing over assessed criteria; +inf where none is reached."""
    stack = np.stack([np.where(np.isnan(r.times), np.inf, r.times) for r in results.values()])
    return stack.min(axis=0)

