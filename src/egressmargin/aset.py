"""ASET engine: times to untenability at every location, raw and corrected, fast.

Given one scenario's histories (internal units) and a criteria set, this module finds
for each location and criterion the time the limit is first reached, for the raw
predictions and for every Monte Carlo sample of the model-error factors.

How it stays fast (no loop over samples x time in Python):

* A criterion on one series scaled by one factor (temperature rise, heat flux,
  extinction, layer height) is exact: the sample's factor moves the *level* instead of the
  series, and the first crossing of many levels on one series is one ``searchsorted`` on
  its running maximum (:func:`~egressmargin.tenability.crossing.crossing_times_for_levels`).
* A dose (FED) with one uncertain factor is computed on a grid of factor values (41
  nodes spanning the samples; 3 where it is linear in the factor) and each sample's
  crossing found on the interpolation between the two nodes of its cell. Every dose rate
  is nondecreasing and convex in its factor (except the radiant term at its threshold),
  so the true crossing is bracketed by the chord (above the dose) and the extended left
  chord (below it): the midpoint is reported and half the bracket is a proven bound.
  Samples whose bound exceeds 0.5 s, and every sample when two or more factors vary, are
  integrated exactly (vectorised over those samples only). ``grid_bound_s`` is the
  largest remaining bound per location: at most 0.5 s, 0 where every sample is exact.
* The irritant FEC (a concentration summed over gases) is rebuilt and searched exactly
  for each distinct combination of factors.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from itertools import product

import numpy as np

from .criteria import CriteriaSet, Criterion
from .histories import O2_AMBIENT, ScenarioData
from .study import SMOKE_KEYS
from .tenability import heat, irritants, layer, toxicity, visibility
from .tenability.irritants import IRRITANT_GASES
from .tenability.crossing import crossing_times_for_levels, cumulative_trapezoid, first_crossing

#: Grid nodes per uncertain quantity for dose interpolation, by number of quantities
#: (project choice). The crossings use one-factor grids only; the 2-4 factor grids serve
#: the along-route dose and the plotted bands (memory G**k * L * N kept moderate).
GRID_NODES = {1: 41, 2: 10, 3: 6, 4: 5}
#: Cap on the bytes of one dose grid; locations are processed in chunks below it.
GRID_BYTES = 160e6

#: Criteria that are accumulated doses (FED), found by :func:`dose_times`.
DOSE_CRITERIA = ("fed_toxic", "fed_heat", "fed_hypoxia")

#: Which factor each criterion's inputs use, for the validated-range check and reporting.
CRITERION_QUANTITIES = {
    "temperature": ("temperature",),
    "heat_flux": ("heat_flux",),
    "visibility": ("smoke",),
    "layer_height": ("layer_height",),
    "fed_toxic": ("co", "hcn", "co2", "o2"),
    "fed_heat": ("temperature", "heat_flux"),
    "fed_hypoxia": ("o2",),
    "fec_irritant": IRRITANT_GASES,
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
    gases: dict[str, np.ndarray]          # co, hcn, co2 and irritant fractions; NaN rows where absent
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
                                         "velocity", *SMOKE_KEYS, *IRRITANT_GASES)}
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
        gases={g: data.series[g] for g in ("co", "hcn", "co2", *IRRITANT_GASES)
               if g in data.series and data.has(g).any()},
        o2_amb=o2_amb, o2_depletion=None if o2 is None else o2_amb - o2,
        velocity=data.series.get("velocity"), present=present)


# ----------------------------------------------------------------------------------------
# applying factors to validated quantities
# ----------------------------------------------------------------------------------------

def corrected_inputs(prep: Prepared, names, factor: dict, rows=slice(None), n_time: int | None = None) -> dict:
    """The corrected series (internal units) that a dose needs, at one set of factors.

    ``factor[q]`` is a number, or an array broadcastable to (rows, 1) (one factor per
    row, for the exact per-draw integration); ``n_time`` keeps only the first samples.
    Temperature is corrected on its rise above ambient, O2 on its depletion below
    ambient, every other quantity as given (see :mod:`egressmargin.uncertainty`).
    """
    out = {}
    cut = slice(None, n_time)
    for q in names:
        f = factor.get(q, 1.0)
        if q == "temperature" and prep.rise is not None:
            out[q] = prep.amb_c[rows, None] + prep.rise[rows, cut] * f
        elif q == "heat_flux" and prep.flux is not None:
            out[q] = prep.flux[rows, cut] * f
        elif q in prep.gases:
            out[q] = prep.gases[q][rows, cut] * f
        elif q == "o2" and prep.o2_depletion is not None:
            out[q] = np.clip(prep.o2_amb - prep.o2_depletion[rows, cut] * f, 0.0, None)
    return out


def dose_rates(criterion: Criterion, inputs: dict) -> tuple[np.ndarray, ...]:
    """FED rates per minute of a dose criterion from corrected inputs, one per endpoint.

    A criterion with several endpoints (Purser's asphyxiant FED "or" CO2 narcosis) gives
    one rate each; :func:`cumulative_dose` combines their integrals.
    """
    if criterion.id == "fed_toxic":
        fns = toxicity.TOXIC_DOSES[criterion.params.get("method", "iso13571")]
        return tuple(fn(co=inputs.get("co"), hcn=inputs.get("hcn"), co2=inputs.get("co2"), o2=inputs.get("o2"))
                     for fn in fns)
    if criterion.id == "fed_hypoxia":
        return (toxicity.purser_o2_rate(inputs.get("o2")),)
    return (heat.fed_heat_rate(temperature_degc=inputs.get("temperature"), flux_kw_m2=inputs.get("heat_flux"),
                               radiant_threshold_kw_m2=criterion.params.get(
                                   "radiant_threshold", heat.RADIANT_THRESHOLD_KW_M2)),)


def cumulative_dose(criterion: Criterion, t_s: np.ndarray, inputs: dict, shape) -> np.ndarray:
    """Cumulative FED of a dose criterion [-], shape ``shape`` = (rows, time).

    Each endpoint's rate is integrated with the trapezoidal rule; alternative endpoints
    combine by the published "or" (whichever dose reaches the limit first), which is the
    pointwise maximum of the accumulated doses (not of the rates).
    """
    doses = [cumulative_trapezoid(t_s, np.broadcast_to(r, shape)) for r in dose_rates(criterion, inputs)]
    return doses[0] if len(doses) == 1 else np.maximum.reduce(doses)


def dose_quantities(criterion: Criterion) -> tuple[str, ...]:
    """The series keys a dose criterion can use (each may carry a model-error factor)."""
    if criterion.id == "fed_toxic":
        return tuple(toxicity.METHOD_GASES[criterion.params.get("method", "iso13571")])
    if criterion.id == "fed_hypoxia":
        return ("o2",)
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
    if cid == "fec_irritant":
        ok = np.array([any(p[g][i] for g in IRRITANT_GASES) for i in range(L)])
        return ok, [[] if ok[i] else ["one of " + ", ".join(IRRITANT_GASES)] for i in range(L)]
    gases = dose_quantities(criterion)
    missing = [[g for g in gases if not p[g][i]] for i in range(L)]
    if cid == "fed_toxic":
        # ISO 13571: CO2 alone only multiplies a dose; Purser: CO2 alone is narcotic (its own dose)
        method = criterion.params.get("method", "iso13571")
        dosing = [g for g in gases if g != "co2" or method == "purser"]
        ok = np.array([any(p[g][i] for g in dosing) for i in range(L)])
    elif cid == "fed_hypoxia":
        ok = p["o2"].copy()
    else:
        ok = p["temperature"] | p["heat_flux"]
    return ok, missing


def partial(prep: Prepared, criterion: Criterion) -> np.ndarray:
    """(L,) locations assessed without a series that would make the dose larger, not smaller.

    A toxic dose without CO2 misses the hyperventilation multiplier (ISO 13571, Purser),
    which can only shorten the time: the time found is then an upper bound, reported as
    partial.
    """
    if criterion.id != "fed_toxic":
        return np.zeros(prep.n_loc, bool)
    return ~prep.present["co2"]


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
# doses: grid over factors, interpolation with proven error bounds, exact where needed
# ----------------------------------------------------------------------------------------

#: Largest error [s] accepted from interpolating a dose between grid nodes; a draw whose
#: proven bound is wider is integrated exactly (project choice, well inside the 1 s the
#: engine promises).
EXACT_TOLERANCE_S = 0.5
#: Cap on float64 elements per array in one block of the exact per-draw integration
#: (project choice: 8 MB per array keeps the temporaries small; results do not depend on it).
EXACT_BLOCK_ELEMENTS = 1_000_000


@dataclass
class DoseField:
    """Cumulative dose on a grid of factors, for a set of locations, and per-sample weights.

    ``values`` interpolates multilinearly between the corners of each sample's grid cell.
    ``pos`` holds each sample's position in grid coordinates (node index plus fraction),
    one column per varying factor; None when the grid has one node.
    """

    t_s: np.ndarray
    grid: np.ndarray          # (M, Lc, N) cumulative dose
    corners: np.ndarray       # (S, C) node indices
    weights: np.ndarray       # (S, C)
    pos: np.ndarray | None = None
    _base: np.ndarray | None = field(default=None, repr=False)

    def values(self, idx: np.ndarray) -> np.ndarray:
        """Dose at time index ``idx`` (S, Lc) for every sample."""
        M, Lc, N = self.grid.shape
        if self._base is None:   # flat offsets of every (sample, corner, location) curve, once
            lc = np.arange(Lc)[None, :]
            self._base = (self.corners[:, :, None] * Lc + lc[:, None, :]) * N
        g = self.grid.reshape(-1)[self._base + idx[:, None, :]]
        return np.einsum("sc,scl->sl", self.weights, g)

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
    cached = _fitting_grid(prep, criterion, names, fac, rows)
    if cached is not None:
        return cached
    key = (criterion.id, tuple(sorted(criterion.params.items())), rows.tobytes())
    k = len(varying)
    G = (3 if _linear_in(criterion, varying) else GRID_NODES.get(k, 4)) if k else 1
    nodes = {q: np.linspace(fac[q].min(), fac[q].max(), G) for q in varying}
    fixed = {q: float(fac[q][0]) for q in names if q not in varying}
    grid = np.empty((G ** k, len(rows), len(prep.t_s)))
    for m, combo in enumerate(product(range(G), repeat=k)):
        f = dict(fixed)
        f.update({q: nodes[q][j] for q, j in zip(varying, combo)})
        grid[m] = cumulative_dose(criterion, prep.t_s, corrected_inputs(prep, names, f, rows), grid.shape[1:])
    prep.dose_grids[key] = (grid, varying, nodes, fixed)
    return prep.dose_grids[key]


def _fitting_grid(prep: Prepared, criterion: Criterion, names, fac: dict, rows: np.ndarray):
    """The cached grid of ``rows`` (or cut from one over more locations) whose nodes span ``fac``; else None."""
    key = (criterion.id, tuple(sorted(criterion.params.items())), rows.tobytes())
    cached = prep.dose_grids.get(key)
    if cached is None:
        cached = _grid_of_superset(prep, key, rows)
    if cached is None:
        return None
    grid, c_vary, c_nodes, c_fixed = cached
    fits = True
    for q in names:
        lo, hi = float(fac[q].min()), float(fac[q].max())
        if q in c_nodes:
            fits &= c_nodes[q][0] <= lo and hi <= c_nodes[q][-1]
        else:
            fits &= lo == hi == c_fixed[q]
    return cached if fits else None


def _grid_of_superset(prep: Prepared, key: tuple, rows: np.ndarray):
    """A cached grid of the same criterion over more locations, cut to ``rows``; None if none.

    A location's curves on the grid do not depend on the other locations, so the cut is
    the grid these rows would get at the same nodes (an evaluation of a few locations,
    e.g. the routes' for the Sobol' design, reuses the scenario's grid).
    """
    for (cid, params, rb), (grid, vary, nodes, fixed) in prep.dose_grids.items():
        if (cid, params) != key[:2] or rb == key[2]:
            continue
        have = np.frombuffer(rb, dtype=rows.dtype)
        pos = np.searchsorted(have, rows)
        if pos.size and pos.max() < have.size and np.array_equal(have[pos], rows):
            return grid[:, pos], vary, nodes, fixed
    return None


def dose_field(prep: Prepared, criterion: Criterion, factors: dict[str, np.ndarray], S: int,
               rows: np.ndarray) -> DoseField:
    """The cumulative dose of ``criterion`` at locations ``rows`` for each of S factor samples."""
    names = dose_names(prep, criterion)
    fac = {q: np.broadcast_to(np.asarray(factors.get(q, 1.0), float), (S,)) for q in names}
    varying = [q for q in names if np.ptp(fac[q]) > 0]
    grid, g_vary, nodes, _ = _dose_grid(prep, criterion, names, fac, varying, rows)
    k = len(g_vary)
    if k == 0:
        corners = np.zeros((S, 1), int)
        return DoseField(prep.t_s, grid, corners, np.ones((S, 1)))
    G = len(nodes[g_vary[0]])
    pos = np.empty((S, k))
    for j, q in enumerate(g_vary):
        lo, hi = nodes[q][0], nodes[q][-1]
        pos[:, j] = np.clip((fac[q] - lo) / (hi - lo) * (G - 1), 0.0, G - 1)
    i0 = np.clip(np.floor(pos).astype(int), 0, G - 2)
    w = np.clip(pos - i0, 0.0, 1.0)
    strides = G ** np.arange(k - 1, -1, -1)
    bits = np.array(list(product((0, 1), repeat=k)))                      # (C, k)
    corners = ((i0[:, None, :] + bits[None, :, :]) * strides).sum(-1)      # (S, C)
    weights = np.prod(np.where(bits[None, :, :] == 1, w[:, None, :], 1 - w[:, None, :]), axis=-1)
    return DoseField(prep.t_s, grid, corners, weights, pos)


def _linear_in(criterion: Criterion, varying: list[str]) -> bool:
    """True where the dose is linear in its one varying factor: the ISO 13571 CO term.

    ISO 13571's FED rate is (phi_CO / 35 000 + HCN term) x CO2 multiplier, linear in the
    CO factor when the others are fixed; three nodes then both represent it exactly and
    let the grid check confirm it (:func:`_one_factor_times`).
    """
    return (criterion.id == "fed_toxic" and criterion.params.get("method", "iso13571") == "iso13571"
            and varying == ["co"])


def dose_names(prep: Prepared, criterion: Criterion) -> list[str]:
    """The quantities of a dose that the scenario supplies (each may carry a factor)."""
    return [q for q in dose_quantities(criterion) if _has(prep, q)]


def _has(prep: Prepared, q: str) -> bool:
    return _base_series(prep, q) is not None


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


def dose_shape(prep: Prepared, criterion: Criterion, varying: list[str], rows: np.ndarray,
               f_max: dict[str, float] | None = None):
    """Per location of ``rows``: is the dose (monotone, convex, linear) in its varying factors?

    From the form of the rates, checked on the series (cheap, no pass over the grid):

    * monotone (nondecreasing in every factor): every rate is nondecreasing in the
      corrected concentration, temperature rise, O2 depletion and flux it uses, so the
      dose is monotone where each varying quantity's base series is >= 0 (a temperature
      below ambient, O2 above ambient break it; such a location is integrated exactly);
    * convex (one varying factor): every rate is convex in its quantity -- ``T^3.4``
      (clipped at 0 degC), ``C^1.036``, the exponentials of HCN, CO2 and hypoxia, linear
      terms, products with a fixed positive multiplier, the larger of two convex doses --
      except the radiant term, which jumps at its threshold (fed_heat in ``heat_flux``);
    * linear: the ISO 13571 CO term alone (:func:`_linear_in`).

    Where the corrected O2 would be clipped at zero (depletion x largest factor ``f_max``
    reaching the ambient O2) the hypoxia rate flattens and is no longer convex there.

    ``tests/test_engine_bruteforce.py`` checks these claims against second differences on
    fine grids.
    """
    mono = np.ones(rows.size, bool)
    for q in varying:
        base = _base_series(prep, q)[rows]
        mono &= ~np.any(base < 0.0, axis=1)          # NaN (absent) compares False
    convex = np.full(rows.size, len(varying) == 1 and not (criterion.id == "fed_heat" and varying == ["heat_flux"]))
    if varying == ["o2"]:
        top = np.nanmax(np.where(np.isnan(prep.o2_depletion[rows]), 0.0, prep.o2_depletion[rows]), axis=1)
        convex &= top * (f_max or {}).get("o2", np.inf) < prep.o2_amb
    linear = np.full(rows.size, _linear_in(criterion, varying))
    return mono, convex & ~linear, linear


def _base_series(prep: Prepared, q: str) -> np.ndarray | None:
    """The (L, N) series a factor of ``q`` multiplies (its validated form); None if absent."""
    if q == "temperature":
        return prep.rise
    if q == "heat_flux":
        return prep.flux
    if q == "o2":
        return prep.o2_depletion
    return prep.gases.get(q)


def _pair_crossings(t_s: np.ndarray, grid: np.ndarray, limit: float, loc: np.ndarray, nodes: np.ndarray,
                    weights: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """First crossing of ``sum_c weights[p, c] * grid[nodes[p, c], loc[p]]`` (c = 0, 1) per pair p.

    The curves must be nondecreasing in time, below the limit at sample ``lo[p]`` (or
    ``lo[p] == 0``); a bisection inside [lo, hi] finds the first sample that reaches it and
    the crossing is interpolated linearly between the two bracketing samples, as for any
    crossing. NaN where the curve does not reach the limit by sample ``hi[p]``.
    """
    N = grid.shape[2]
    flat = grid.reshape(-1)
    (b0, b1), (w0, w1) = ((nodes[:, j] * grid.shape[1] + loc) * N for j in (0, 1)), weights.T

    def value(p, i):
        return w0[p] * flat[b0[p] + i] + w1[p] * flat[b1[p] + i]

    reached = value(np.arange(lo.size), hi) >= limit
    lo, hi = lo.copy(), hi.copy()
    act = np.flatnonzero(hi - lo > 1)
    while act.size:                       # bisection on the pairs still open only
        mid = (lo[act] + hi[act]) // 2
        hit = value(act, mid) >= limit
        hi[act] = np.where(hit, mid, hi[act])
        lo[act] = np.where(hit, lo[act], mid)
        act = act[hi[act] - lo[act] > 1]
    every = np.arange(lo.size)
    d_lo, d_hi = value(every, lo), value(every, hi)
    with np.errstate(divide="ignore", invalid="ignore"):
        frac = np.where(d_hi > d_lo, (limit - d_lo) / (d_hi - d_lo), 1.0)
    t = t_s[lo] + np.clip(frac, 0.0, 1.0) * (t_s[hi] - t_s[lo])
    t = np.where(d_lo >= limit, t_s[lo], t)                 # reached at the first sample
    return np.where(reached, t, np.nan)


def _one_factor_times(fld: DoseField, limit: float, mono, convex, linear):
    """Reported crossings and their proven error bounds [s] for a dose with one varying factor.

    Upper estimate: the chord between the cell's nodes (the interpolated dose). Where the
    dose is convex in the factor, the chord lies above it and the left chord extended past
    node j lies below it on [j, j+1] (``D(f) >= D_j + w (D_j - D_{j-1})``, w the place in
    the cell; in the first cell the lower node D_0): the truth lies between the two
    crossings, the midpoint is reported with half their distance as its bound. Otherwise
    the bound is the distance to the farther of the crossings at the cell's two nodes
    (monotone doses). Linear doses are exact. Every curve is searched only between the
    crossings of its cell's two nodes, where the monotone doses must cross. +inf bounds
    mark draws to integrate exactly (a location whose dose is not monotone; a draw whose
    lower bound does not reach the limit by the end). ``mono``, ``convex``, ``linear``
    (Lc,) come from :func:`dose_shape`.

    Returns (reported times, bounds, latest possible crossing), each (S, Lc) [s].
    """
    G, Lc, N = fld.grid.shape
    t_s = fld.t_s
    S = fld.pos.shape[0]
    pos = fld.pos[:, 0]
    cell = np.clip(np.floor(pos).astype(int), 0, G - 2)
    w = np.clip(pos - cell, 0.0, 1.0)
    t_nodes = node_crossings(t_s, fld.grid, limit)            # (G, Lc)
    t_early, t_late = t_nodes[cell + 1], t_nodes[cell]        # (S, Lc)
    t_rep = np.full((S, Lc), np.nan)
    err = np.zeros((S, Lc))
    s_idx, l_idx = np.nonzero(np.isfinite(t_early))           # the others never reach (upper node)
    if s_idx.size:
        te, tl = t_early[s_idx, l_idx], t_late[s_idx, l_idx]
        lo = np.clip(np.searchsorted(t_s, te, "left") - 1, 0, N - 1)
        hi = np.where(np.isfinite(tl), np.clip(np.searchsorted(t_s, np.where(np.isfinite(tl), tl, 0.0), "left"),
                                                 0, N - 1), N - 1)
        hi = np.maximum(hi, np.minimum(lo + 1, N - 1))
        c, ww = cell[s_idx], w[s_idx]
        up = _pair_crossings(t_s, fld.grid, limit, l_idx, np.stack([c, c + 1], 1), np.stack([1 - ww, ww], 1),
                             lo, hi)
        with np.errstate(invalid="ignore"):
            e = np.maximum(np.nan_to_num(up - te, nan=np.inf), np.nan_to_num(tl - up, nan=np.inf))
        rep = up
        e = np.where(linear[l_idx], 0.0, e)
        cx = convex[l_idx] & ~linear[l_idx]
        if cx.any():
            j = np.flatnonzero(cx)
            left = c[j] >= 1
            low = _pair_crossings(t_s, fld.grid, limit, l_idx[j], np.stack([c[j], np.maximum(c[j] - 1, 0)], 1),
                                  np.stack([np.where(left, 1 + ww[j], 1.0), np.where(left, -ww[j], 0.0)], 1),
                                  lo[j], hi[j])
            low = np.where(np.isfinite(tl[j]), np.fmin(low, tl[j]), low)
            u = up[j]
            # an upper bound that never reaches proves the truth never reaches (NaN, exact)
            rep[j] = np.where(np.isfinite(low), 0.5 * (u + low), u)
            e[j] = np.where(np.isnan(u), 0.0, np.where(np.isfinite(low), 0.5 * (low - u), np.inf))
        t_rep[s_idx, l_idx] = rep
        err[s_idx, l_idx] = e
    return t_rep, np.where(mono[None, :], err, np.inf), np.where(mono[None, :], t_late, np.inf)


def exact_dose_times(prep: Prepared, criterion: Criterion, fac: dict[str, np.ndarray], loc: np.ndarray,
                     draw: np.ndarray, t_stop: np.ndarray) -> np.ndarray:
    """Exact crossing for each (location ``loc[p]``, draw ``draw[p]``) pair, vectorised.

    Each pair's corrected series are rebuilt, its dose rate integrated with the
    trapezoidal rule and its first crossing searched, as a per-draw loop would, but only
    up to ``t_stop[p]`` (the latest time the crossing can be, +inf: the end) and in
    blocks of at most :data:`EXACT_BLOCK_ELEMENTS` values.
    """
    t = prep.t_s
    N = len(t)
    names = dose_names(prep, criterion)
    n_up = np.where(np.isfinite(t_stop), np.searchsorted(t, np.minimum(t_stop, t[-1]), "left") + 1, N)
    n_up = np.clip(n_up, 2, N)
    order = np.argsort(n_up, kind="stable")
    out = np.full(loc.shape, np.nan)
    start = 0
    while start < order.size:
        n = int(n_up[order[start]])
        stop = start + 1
        while stop < order.size and (stop - start + 1) * int(n_up[order[stop]]) <= EXACT_BLOCK_ELEMENTS:
            stop += 1
        block = order[start:stop]
        n = int(n_up[block].max())
        f = {q: fac[q][draw[block]][:, None] for q in names}
        inputs = corrected_inputs(prep, names, f, loc[block], n)
        dose = cumulative_dose(criterion, t[:n], inputs, (block.size, n))
        out[block] = first_crossing(t[:n], dose, criterion.limit)
        start = stop
    return out


def _exact_all_draws(prep: Prepared, criterion: Criterion, fac: dict[str, np.ndarray], rows: np.ndarray,
                     S: int) -> np.ndarray:
    """(len(rows), S) exact crossings of every draw at ``rows``, in blocks of draws.

    Each block's corrected series are (draws, locations, time) by broadcasting (no
    gather), integrated with the trapezoidal rule and searched, as a per-draw loop would.
    """
    t = prep.t_s
    N, L = len(t), rows.size
    names = dose_names(prep, criterion)
    out = np.empty((L, S))
    per_block = max(1, EXACT_BLOCK_ELEMENTS // (N * L))
    for start in range(0, S, per_block):
        d = np.arange(start, min(S, start + per_block))
        f = {q: fac[q][d][:, None, None] for q in names}
        inputs = corrected_inputs(prep, names, f, rows)              # (draws, locations, time)
        dose = cumulative_dose(criterion, t, inputs, (d.size, L, N)).reshape(-1, N)
        out[:, d] = first_crossing(t, dose, criterion.limit).reshape(d.size, L).T
    return out


def dose_times(prep: Prepared, criterion: Criterion, factors: dict[str, np.ndarray], S: int, ok: np.ndarray,
               with_bound: bool = True) -> tuple[np.ndarray, np.ndarray | None]:
    """(L, S) dose crossing times and, per location, a proven bound of their error [s].

    1. The dose is computed on a grid of factor values and each draw's crossing found on
       the multilinear interpolation between the corners of its grid cell.
    2. Every dose rate is nondecreasing in every factor where the base series are >= 0
       (:func:`dose_shape`), so the true crossing lies between the crossings at the cell's upper
       corner (earliest) and lower corner (latest); the interpolated crossing lies there
       too, and its error is at most the larger distance to either end.
    3. With one varying factor (:func:`_one_factor_times`): a dose convex in it
       (:func:`dose_shape`) is bracketed between the chord and the extended left
       chord; the midpoint of their crossings is reported with half their distance as its
       bound (second order in the node spacing). A dose linear in its factor (ISO 13571 CO
       alone) is exact.
    4. Every draw whose bound exceeds :data:`EXACT_TOLERANCE_S`, every draw of a
       location whose dose is not monotone, and every draw when two or more factors vary
       (the first-order corner bracket rarely proves the tolerance), is integrated exactly
       (:func:`exact_dose_times`), vectorised over those draws only, up to the latest
       time its crossing can be.

    The bound returned per location is the largest over its draws (0 where every draw is
    exact); None when the grid has a single node (no varying factor: the times are exact).
    """
    out = np.full((prep.n_loc, S), np.nan)
    rows_all = np.flatnonzero(ok)
    if rows_all.size == 0:
        return out, None
    bound = np.full(prep.n_loc, np.nan)
    single = True
    names = dose_names(prep, criterion)
    fac = {q: np.broadcast_to(np.asarray(factors.get(q, 1.0), float), (S,)) for q in names}
    varying = [q for q in names if np.ptp(fac[q]) > 0]
    k = len(varying)
    per_loc = 8 * len(prep.t_s) * GRID_NODES.get(k, 4) ** k * (3 if k == 1 else 1)   # with temporaries
    chunk = max(1, int(GRID_BYTES // per_loc))
    if k >= 2:
        # Several varying factors: the grid's corner bracket is first order in the node
        # spacing and rarely proves EXACT_TOLERANCE_S, so every draw is integrated exactly
        # (cheaper than a grid whose draws would nearly all be integrated anyway).
        out[rows_all] = _exact_all_draws(prep, criterion, fac, rows_all, S)
        bound[rows_all] = 0.0
        return out, (bound if with_bound else None)
    nodes = 3 if _linear_in(criterion, varying) else GRID_NODES[1]
    for start in range(0, rows_all.size, chunk):
        rows = rows_all[start:start + chunk]
        if k == 1 and S <= nodes and _fitting_grid(prep, criterion, names, fac, rows) is None:
            # Few draws and no grid to reuse (an ensemble member's share of the draws):
            # integrating each draw exactly costs no more than building the grid would.
            out[rows] = _exact_all_draws(prep, criterion, fac, rows, S)
            bound[rows] = 0.0
            single = False
            continue
        fld = dose_field(prep, criterion, factors, S, rows)
        if fld.grid.shape[0] == 1:
            out[rows] = np.repeat(node_crossings(prep.t_s, fld.grid, criterion.limit), S, axis=0).T
            out[rows] = np.where(np.isinf(out[rows]), np.nan, out[rows])
            continue
        single = False
        mono, convex, linear = dose_shape(prep, criterion, varying, rows, {q: float(fac[q].max()) for q in varying})
        t_rep, err, t_stop = _one_factor_times(fld, criterion.limit, mono, convex, linear)
        need = err > EXACT_TOLERANCE_S
        if need.any():
            s_idx, c_idx = np.nonzero(need)
            t_rep[s_idx, c_idx] = exact_dose_times(prep, criterion, fac, rows[c_idx], s_idx, t_stop[s_idx, c_idx])
            err[s_idx, c_idx] = 0.0
        out[rows] = t_rep.T
        bound[rows] = err.max(axis=0)
    return out, (None if single or not with_bound else bound)


# ----------------------------------------------------------------------------------------
# irritant FEC: a concentration, exact per distinct draw
# ----------------------------------------------------------------------------------------

def irritant_times(prep: Prepared, criterion: Criterion, factors: dict[str, np.ndarray], S: int,
                   ok: np.ndarray) -> np.ndarray:
    """(L, S) first time the irritant FEC reaches the limit (ISO 13571), exactly.

    FEC(t) = sum_i f_i phi_i(t) / F_i with one factor per gas (its table row), so it is
    rebuilt for each distinct combination of factors (one when nothing is uncertain) and
    searched for its first crossing, linearly interpolated, vectorised over locations and
    draws in blocks of at most :data:`EXACT_BLOCK_ELEMENTS` values.
    """
    out = np.full((prep.n_loc, S), np.nan)
    rows = np.flatnonzero(ok)
    names = [g for g in IRRITANT_GASES if g in prep.gases]
    if rows.size == 0 or not names:
        return out
    fac = np.stack([np.broadcast_to(np.asarray(factors.get(g, 1.0), float), (S,)) for g in names], axis=1)
    combos, inverse = np.unique(fac, axis=0, return_inverse=True)
    N = len(prep.t_s)
    per_block = max(1, EXACT_BLOCK_ELEMENTS // (N * rows.size))
    times = np.empty((combos.shape[0], rows.size))
    for start in range(0, combos.shape[0], per_block):
        block = combos[start:start + per_block]                              # (B, k)
        gases = {g: prep.gases[g][rows][None, :, :] * block[:, j, None, None] for j, g in enumerate(names)}
        fec = irritants.fec_irritant(**gases).reshape(-1, N)
        times[start:start + block.shape[0]] = first_crossing(prep.t_s, fec, criterion.limit).reshape(
            block.shape[0], rows.size)
    out[rows] = times[inverse.reshape(-1)].T
    return out


# ----------------------------------------------------------------------------------------
# all criteria
# ----------------------------------------------------------------------------------------

@dataclass
class CriterionResult:
    times: np.ndarray                 # (L, S)
    assessed: np.ndarray              # (L,)
    missing: list[list[str]]
    grid_bound_s: np.ndarray | None = None   # (L,) per-location proven error bound [s]
    partial: np.ndarray | None = None        # (L,) assessed without a dose-raising series (CO2)


def criterion_times(prep: Prepared, criterion: Criterion, factors: dict[str, np.ndarray], S: int,
                    with_bound: bool = True, only: np.ndarray | None = None) -> CriterionResult:
    ok, missing = status(prep, criterion)
    if only is not None:      # locations nobody asks about are left out (NaN times, not assessed)
        ok = ok & only
    if criterion.id in DOSE_CRITERIA:
        times, bound = dose_times(prep, criterion, factors, S, ok, with_bound)
        return CriterionResult(times, ok, missing, bound, ok & partial(prep, criterion))
    if criterion.id == "fec_irritant":
        return CriterionResult(irritant_times(prep, criterion, factors, S, ok), ok, missing)
    return CriterionResult(single_series_times(prep, criterion, factors, S, ok), ok, missing)


def evaluate(prep: Prepared, criteria: CriteriaSet, factors: dict[str, np.ndarray], S: int,
             with_bound: bool = True, only: np.ndarray | None = None) -> dict[str, CriterionResult]:
    """Every criterion's (L, S) times for the given factor samples.

    ``only`` (L,) bool, optional: evaluate these locations only; the others get NaN times
    and count as not assessed (for callers that read a few locations, e.g. the routes').
    A location's times do not depend on which other locations are evaluated.
    """
    return {cid: criterion_times(prep, c, factors, S, with_bound, only) for cid, c in criteria.items.items()}


def location_aset(results: dict[str, CriterionResult]) -> np.ndarray:
    """(L, S) earliest crossing over assessed criteria; +inf where none is reached."""
    stack = np.stack([np.where(np.isnan(r.times), np.inf, r.times) for r in results.values()])
    return stack.min(axis=0)

