"""The study file: schema, loading, and every validation error, located.

:func:`load_study` reads the YAML, checks every key against the schema of the contract
(plus the documented extensions), converts every quantity to internal units and returns
a :class:`Study` of plain values. It collects all problems before raising one
:class:`~egressmargin.errors.InputError`.
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass, field
from pathlib import Path

from .criteria import CriteriaSet, describe_criteria_value, override_criteria, resolve_criteria
from .errors import InputError, Problem
from .units import UnitProblem, check_unit, parse_obscuration, parse_quantity
from .yamlfile import Located, load_located

#: Location series keys (contract) plus `velocity` (for detector response).
SERIES_KEYS = ("temperature", "co", "co2", "o2", "hcn", "extinction", "optical_density", "soot",
               "visibility", "heat_flux", "layer_height", "velocity",
               # irritant gases (ISO 13571 FEC), volume fractions; appended last so that the
               # Monte Carlo streams of the keys above do not change
               "hcl", "hbr", "hf", "so2", "no2", "acrolein", "formaldehyde")
SMOKE_KEYS = ("extinction", "optical_density", "soot", "visibility")
DISTRIBUTIONS = {"lognormal": ("median", "p95"), "normal": ("mean", "sd"), "uniform": ("low", "high"),
                 "triangular": ("low", "mode", "high")}
ELEMENTS = {"corridor": ("length", "width"), "door": ("width",), "stair": ("width", "riser", "tread"),
            "ramp": ("length", "width")}
ELEMENT_OPTIONAL = {"boundary", "length", "at"}
#: A stair's travel length: along the slope (`length`), or from plan length and rise.
STAIR_LENGTH_KEYS = {"plan_length", "rise"}
#: Keys of a named element in the top-level `elements:` list, besides its type.
NAMED_ELEMENT_KEYS = {"id", "title", "upstream"}
#: Distributions accepted for counts and multipliers (normal is left out: truncated at
#: zero it gives zero people or zero capacity).
POSITIVE_DISTRIBUTIONS = ("lognormal", "uniform", "triangular")
TOP_KEYS = {"title", "criteria", "uncertainty", "samples", "seed", "acceptance", "scenarios", "egress", "credibility",
            "reference", "prepared_by", "prepared_for", "paper", "max_samples", "elements", "report",
            "basis", "sign_off"}
SCENARIO_KEYS = {"id", "title", "histories", "time", "units_row", "locations", "ambient", "resolutions",
                 "ignition", "design_fire"}
LOCATION_KEYS = {"id", "title", "temperature_profile", "role", "height", *SERIES_KEYS}
#: A location may acknowledge plausibility findings by code (plausibility.CODES).
LOCATION_KEYS = LOCATION_KEYS | {"accept_warnings"}
#: A location's role: an occupied point assessed for tenability, or a detection point only.
LOCATION_ROLES = ("occupied", "detector")
#: Optional description of a scenario's design fire, printed in the report as given.
DESIGN_FIRE_KEYS = ("growth", "peak_hrr", "sprinklers", "ventilation", "yields", "notes", "hrr")
#: Basis of design (top-level `basis:`), printed in the report as given, in this order.
BASIS_KEYS = ("building", "occupant_load", "fire_model", "premovement_source", "acceptance_source")
FIRE_MODEL_KEYS = ("name", "version", "grid")
#: The responsible engineer's sign-off (top-level `sign_off:`).
SIGN_OFF_KEYS = ("engineer", "licence", "organisation", "date")
ROUTE_KEYS = {"id", "title", "scenarios", "occupants", "detection", "alarm", "premovement", "path",
              "exposed_at", "movement", "exposure", "flow_factor", "speed_factor", "start_at"}
#: A scenario's CSV format: field delimiters it may declare (``delimiter:``), and decimal marks (``decimal:``).
SCENARIO_KEYS = SCENARIO_KEYS | {"delimiter", "decimal"}
#: An ensemble of fire runs instead of one set of histories (see :mod:`egressmargin.ensemble`).
SCENARIO_KEYS = SCENARIO_KEYS | {"ensemble"}
#: Weighted design fires (probabilistic design, see :mod:`egressmargin.design`).
TOP_KEYS = TOP_KEYS | {"scenario_weights", "weights_source"}
DELIMITERS = {",": ",", ";": ";", "\t": "\t", r"\t": "\t", "tab": "\t", "|": "|"}
DECIMALS = (".", ",")

DEFAULT_SAMPLES = 2000
#: A clear width below this is flagged as a likely unit slip (common practice: escape
#: doors and corridors are rarely narrower than about 0.7 m).
MIN_PLAUSIBLE_WIDTH_M = 0.6
#: Cap on the draws taken to settle a verdict whose interval straddles max_p_fail
#: (project choice: enough to resolve p_fail = 0.05 to about +/-0.003 at 95 %).
DEFAULT_MAX_SAMPLES = 16000
DEFAULT_SEED = 1


@dataclass
class SeriesRef:
    """A column of a histories file mapped to a series key; unit None: from the header."""

    key: str
    column: str
    unit: str | None
    where: str


@dataclass
class ProfileRef:
    columns: list[str]
    heights_m: list[float]
    ceiling_m: float
    unit: str | None
    where: str


@dataclass
class LocationSpec:
    id: str
    title: str
    series: dict[str, SeriesRef]
    profile: ProfileRef | None
    where: str
    role: str = "occupied"          # "detector": detection only, not assessed for tenability
    accept_warnings: tuple[str, ...] = ()   # plausibility codes acknowledged here (plausibility.CODES)
    height_m: float | None = None   # height of the measuring point above the floor (`height:`) [m]


@dataclass
class ResolutionSpec:
    cell_m: float
    histories: Path
    where: str


@dataclass
class ScenarioSpec:
    id: str
    title: str
    histories: Path
    time: SeriesRef
    units_row: bool | str           # False, "above" or "below" (a units row over or under the names)
    locations: list[LocationSpec]
    ambient_temperature_c: float | None = None
    ambient_o2: float | None = None
    resolutions: list[ResolutionSpec] = field(default_factory=list)
    where: str = ""
    design_fire: dict | None = None   # as given (text and numbers), for the report
    ignition_s: float | None = None     # ignition on the file's clock; None: its first time
    delimiter: str = ","
    decimal: str = "."
    #: An ensemble of fire runs sharing the column mapping (``histories`` is the first's); None: one run.
    ensemble: list["MemberSpec"] | None = None
    #: Heat-release-rate curve of the design fire (`design_fire: {hrr: ...}`), or None.
    hrr: "HrrRef | None" = None
    where: str = ""
    #: The side table of an ensemble given by `glob` (CSV: file, name, value), or None.
    ensemble_table: Path | None = None


@dataclass
class MemberSpec:
    """One fire run of an ensemble scenario: its histories, relative weight and parameters."""

    id: str
    histories: Path
    weight: float
    parameters: dict
    where: str = ""


@dataclass
class HrrRef:
    """Where a design fire's heat-release rate is read: a column of the scenario's histories
    (``file`` None) or a column of its own CSV file (relative to the study) with a time column.
    ``unit`` None: from the header (``name [unit]``), as for every series."""

    column: str
    unit: str | None
    file: Path | None = None
    time: str | None = None
    time_unit: str | None = None
    where: str = ""


@dataclass
class DetectorRule:
    kind: str                       # "heat" | "smoke"
    location: str
    rti: float = 0.0                # m^0.5 s^0.5
    activation_c: float = 0.0       # degC
    velocity_m_s: float | None = None
    extinction_per_m: float = 0.0   # smoke threshold as natural-log extinction coefficient
    threshold_text: str = ""
    where: str = ""
    activation_where: str = ""      # file:line of the activation key, for the check against ambient


@dataclass
class RouteSpec:
    id: str
    title: str
    scenarios: list[str] | None
    occupants: int
    detection: dict | DetectorRule
    alarm: dict
    premovement: dict
    path: list[dict]
    exposed_at: list[str]
    movement_mode: str = "flow"
    along_route: bool = False
    where: str = ""
    #: True: `premovement` spreads start times across the occupants; False: one
    #: uncertain time for everyone.
    premovement_across: bool = False
    #: Occupant count as a distribution spec ({"fixed": n} when certain).
    occupants_dist: dict | None = None
    #: Multipliers on every element's flow capacity and walking speed (distribution specs).
    flow_factor: dict = field(default_factory=lambda: {"fixed": 1.0})
    speed_factor: dict = field(default_factory=lambda: {"fixed": 1.0})
    #: Where the occupants are during detection, alarm and pre-movement (a location id).
    start_at: str | None = None


@dataclass
class NamedElement:
    """A path element that routes share: its parsed element and the merge rule.

    ``upstream``: ids of the routes whose stream is already in the element (they keep
    their flow; the others receive the capacity left over). Empty: first come, first
    served.
    """

    id: str
    element: dict
    upstream: list[str]
    where: str = ""


#: Ambient oxygen accepted in `ambient: {o2}` (volume fraction). Above 23.5 % the air is
#: oxygen-enriched (US OSHA 29 CFR 1910.146(b), definition of an oxygen enriched
#: atmosphere); below 15 % it is lower than fire-prevention oxygen-reduction systems keep
#: in occupied rooms (about 15 %, from memory). Outside that range the value is taken to
#: be a slip (a fraction written as percent, or the reverse).
AMBIENT_O2_LOW = 0.15
AMBIENT_O2_HIGH = 0.235
#: Below 19.5 % an atmosphere is oxygen-deficient (US OSHA 29 CFR 1910.146(b)): accepted
#: with a warning.
AMBIENT_O2_DEFICIENT = 0.195

#: What governs a route's verdict (`acceptance: {basis: ...}`, contract turn 3): the route
#: ASET against RSET (default, the accepted practice), every occupant's exposure while
#: present (:mod:`egressmargin.exposure`), or both (the worse of the two).
ACCEPTANCE_BASES = ("route-aset", "occupants", "both")

#: What the report shows of locations no route uses (`report: {unused_locations: ...}`):
#: their detail in the appendix (default), or left out with a line naming them.
UNUSED_LOCATIONS = ("appendix", "omit")


@dataclass
class Study:
    path: Path
    title: str
    criteria: CriteriaSet
    scenarios: list[ScenarioSpec]
    routes: list[RouteSpec]
    uncertainty_path: Path | None = None
    samples: int = DEFAULT_SAMPLES
    max_samples: int = DEFAULT_MAX_SAMPLES
    seed: int = DEFAULT_SEED
    max_p_fail: float = 0.05
    #: What governs a route's verdict (`acceptance: {basis: ...}`): see :data:`ACCEPTANCE_BASES`.
    acceptance_basis: str = "route-aset"
    reference: str = ""
    prepared_by: str = ""
    prepared_for: str = ""
    paper: str = "A4"
    #: Relative change of a time to limit between the two finest grids above which it is
    #: flagged (10 %: common practice, no single source).
    max_grid_change: float = 0.10
    #: Fine-grid GCI (Celik et al. 2008, Eq. 5c) above which a time to limit is flagged, and
    #: the largest change from the fine-grid time to the extrapolated one (10 %: project
    #: choice, the same figure as max_grid_change).
    max_gci: float = 0.10
    warnings: list[Problem] = field(default_factory=list)
    #: Named path elements (top-level `elements:`), by id.
    elements: dict[str, "NamedElement"] = field(default_factory=dict)
    #: Report options (top-level `report:`), e.g. ``{"unused_locations": "appendix"}``.
    report: dict = field(default_factory=lambda: {"unused_locations": UNUSED_LOCATIONS[0]})
    #: Weighted design fires: {scenario id: probability} (sum 1), or None; where they come from;
    #: the acceptance limit on the design-level p_fail (None: max_p_fail).
    scenario_weights: dict[str, float] | None = None
    weights_source: str = ""
    max_design_p_fail: float | None = None
    #: Basis of design as given (`basis:`; absent keys left out, the report says "not stated").
    basis: dict = field(default_factory=dict)
    #: The responsible engineer's sign-off as given (`sign_off:`), or None.
    sign_off: dict | None = None

    @property
    def base_dir(self) -> Path:
        return self.path.parent


def did_you_mean(word, options) -> str:
    close = difflib.get_close_matches(str(word), [str(o) for o in options], n=1)
    return f"; did you mean '{close[0]}'?" if close else ""


class _Checker:
    """Walks the located document and collects problems."""

    def __init__(self, doc: Located):
        self.doc = doc
        self.problems: list[Problem] = []

    def err(self, kp, message):
        self.problems.append(Problem(self.doc.where(kp), message))

    def warn(self, kp, message):
        self.problems.append(Problem(self.doc.where(kp), message, warning=True))

    def keys(self, value, kp, allowed, what):
        if not isinstance(value, dict):
            self.err(kp, f"found {_show(value)}; expected a mapping ({what})")
            return False
        for key in value:
            if key not in allowed:
                self.err(kp + (key,), f"unknown key '{key}' in {what}; expected one of "
                         f"{', '.join(sorted(allowed))}{did_you_mean(key, allowed)}")
        return True

    def require(self, value: dict, kp, key, expected):
        if key not in value:
            self.err(kp, f"missing key '{key}'; expected {expected}")
            return False
        return True

    def text(self, value, kp, default=""):
        if value is None:
            return default
        if not isinstance(value, (str, int, float)) or isinstance(value, bool):
            self.err(kp, f"found {_show(value)}; expected text")
            return default
        return str(value)

    def ident(self, value, kp):
        if not isinstance(value, (str, int)) or isinstance(value, bool) or str(value).strip() == "":
            self.err(kp, f"found {_show(value)}; expected a short identifier such as 'atrium-l1'")
            return None
        return str(value)

    def quantity(self, value, kp, quantity, positive=False, default_unit=None):
        try:
            v = parse_quantity(value, quantity, default_unit)
        except UnitProblem as exc:
            self.err(kp, str(exc))
            return None
        if positive and not v > 0:
            self.err(kp, f"found {_show(value)}; expected a value above zero")
            return None
        return v

    def distribution_params(self, name, params, kp, parse) -> dict | None:
        """The parameters of distribution `name`, each read by parse(value, key path); None on error."""
        needed = DISTRIBUTIONS[name]
        if not self.keys(params, kp + (name,), set(needed), f"a {name} distribution ({', '.join(needed)})"):
            return None
        out = {}
        for p in needed:
            if p not in params:
                self.err(kp + (name,), f"missing '{p}' for the {name} distribution; expected "
                         f"{', '.join(needed)} as times, e.g. '90 s'")
                continue
            v = parse(params[p], kp + (name, p))
            if v is not None:
                out[p] = v
        return out if len(out) == len(needed) else None

    def distribution(self, value, kp, what):
        """A time: fixed ('60 s') or a distribution mapping, returned in seconds."""
        if isinstance(value, dict) and len(value) == 1 and next(iter(value)) in DISTRIBUTIONS:
            name, params = next(iter(value.items()))
            out = self.distribution_params(name, params, kp,
                                           lambda v, kpp: self.quantity(v, kpp, "duration"))
            if out is None:
                return None
            spec = {name: out}
            from .egress.distributions import check_spec, truncation_note
            messages = check_spec(spec)
            for msg in messages:
                self.err(kp + (name,), msg)
            note = None if messages else truncation_note(spec)
            if note:
                self.warn(kp + (name,), note)
            return spec
        if isinstance(value, dict):
            self.err(kp, f"found {_show(value)}; expected {what}: a time such as '60 s' or one of "
                     f"{', '.join('{' + k + ': {...}}' for k in DISTRIBUTIONS)}"
                     f"{did_you_mean(next(iter(value), ''), DISTRIBUTIONS) if value else ''}")
            return None
        v = self.quantity(value, kp, "duration")
        if v is None:
            return None
        if v < 0:
            self.err(kp, f"found {_show(value)}; expected a time of zero or more")
            return None
        return {"fixed": v}


def _show(value) -> str:
    text = repr(value)
    return text if len(text) < 60 else text[:57] + "..."


def load_study(path: str | Path) -> Study:
    """Load and check a study file; raise InputError listing every problem."""
    study, _, problems = check_study(path)
    if study is None:
        raise InputError(problems)
    return study


def check_study(path: str | Path, criteria_override: str | None = None
                ) -> tuple[Study | None, list[ScenarioSpec], list[Problem]]:
    """Check a study file without stopping at the first problem.

    Returns the study (None when it has errors), the scenarios that could be read (so a
    caller can go on to check their CSV files and report those problems too), and every
    problem and warning found. ``criteria_override`` (``run --criteria``: a bundled set
    name or a file path relative to the current folder) replaces the study's
    ``criteria:``, with a warning saying what it replaced.
    """
    path = Path(path)
    doc = load_located(path)
    ck = _Checker(doc)
    data = doc.data
    if not ck.keys(data, (), TOP_KEYS, "the study file"):
        return None, [], ck.problems
    base = path.parent
    title = ck.text(data.get("title"), ("title",), default=path.stem)
    if "title" not in data:
        ck.warn((), "no 'title'; the report will use the file name")

    criteria = None
    if criteria_override is not None:
        criteria = override_criteria(criteria_override, data.get("criteria"), ck.problems)
        if criteria is not None:
            ck.warn(("criteria",), f"not applied: --criteria {criteria_override} replaces the study's criteria "
                    f"({describe_criteria_value(data.get('criteria'))})")
    elif ck.require(data, (), "criteria", "a bundled set name, a criteria file, or a mapping with 'base'"):
        criteria = resolve_criteria(data["criteria"], lambda kp: doc.where(("criteria",) + tuple(kp)),
                                    base, ck.problems)

    unc_path = None
    if data.get("uncertainty") is not None:
        unc = data["uncertainty"]
        if not isinstance(unc, str):
            ck.err(("uncertainty",), f"found {_show(unc)}; expected the path of a model-uncertainty YAML file")
        else:
            unc_path = base / unc
            if not unc_path.is_file():
                ck.err(("uncertainty",), f"file '{unc}' not found (looked at {unc_path}); expected a "
                       "model-uncertainty YAML file relative to the study file")

    samples = _int(ck, data.get("samples", DEFAULT_SAMPLES), ("samples",), low=1, what="a number of Monte Carlo samples")
    seed = _int(ck, data.get("seed", DEFAULT_SEED), ("seed",), low=0, what="a seed (whole number >= 0)")
    max_samples = _int(ck, data.get("max_samples", max(DEFAULT_MAX_SAMPLES, samples)), ("max_samples",), low=1,
                       what="the most Monte Carlo samples drawn to settle a verdict")
    if "max_samples" in data and isinstance(max_samples, int) and max_samples < samples:
        ck.err(("max_samples",), f"found {max_samples}; expected at least 'samples' ({samples})")
    max_p_fail = 0.05
    max_design_p_fail = None
    acceptance_basis = ACCEPTANCE_BASES[0]
    if "acceptance" in data:
        acc = data["acceptance"]
        if ck.keys(acc, ("acceptance",), {"max_p_fail", "max_design_p_fail", "basis"}, "acceptance"):
            if "basis" in acc:
                b = acc["basis"]
                if b not in ACCEPTANCE_BASES:
                    ck.err(("acceptance", "basis"), f"found {_show(b)}; expected one of "
                           + ", ".join(ACCEPTANCE_BASES) + did_you_mean(b, ACCEPTANCE_BASES))
                else:
                    acceptance_basis = b
            limit = _acceptance_limit(ck, acc, "max_p_fail")
            max_p_fail = max_p_fail if limit is None else limit
            max_design_p_fail = _acceptance_limit(ck, acc, "max_design_p_fail")
    max_grid_change = 0.10
    max_gci = 0.10
    if "credibility" in data:
        cred = data["credibility"]
        if ck.keys(cred, ("credibility",), {"max_grid_change", "max_gci"}, "credibility"):
            if "max_grid_change" in cred:
                v = ck.quantity(cred["max_grid_change"], ("credibility", "max_grid_change"), "fraction",
                                positive=True, default_unit="dimensionless")
                if v is not None:
                    max_grid_change = v
            if "max_gci" in cred:
                v = ck.quantity(cred["max_gci"], ("credibility", "max_gci"), "fraction",
                                positive=True, default_unit="dimensionless")
                if v is not None:
                    max_gci = v
    report = _report_options(ck, data.get("report"))
    paper = ck.text(data.get("paper"), ("paper",), default="A4")
    if paper.lower() not in ("a4", "letter"):
        ck.err(("paper",), f"found '{paper}'; expected A4 or letter")

    basis = _basis(ck, data.get("basis"))
    sign_off = _sign_off(ck, data.get("sign_off"))
    scenarios = _scenarios(ck, data.get("scenarios"), base)
    loc_ids = {s.id: {loc.id: loc for loc in s.locations} for s in scenarios}
    named, broken = _named_elements(ck, data.get("elements"))
    routes = _routes(ck, data.get("egress", []), loc_ids, named, broken)
    _check_upstream(ck, named, routes)
    scenario_weights = _scenario_weights(ck, data, scenarios)

    # Report fields are checked before the error count, so a map or list there is an error, not a blank.
    for key in ("reference", "prepared_by", "prepared_for"):
        ck.text(data.get(key), (key,))
    if criteria is not None:
        _usable_criteria(ck, criteria, data.get("criteria"))
    errors = [p for p in ck.problems if not p.warning]
    if errors or criteria is None:
        return None, scenarios, ck.problems
    return Study(path=path, title=title, criteria=criteria, scenarios=scenarios, routes=routes,
                 uncertainty_path=unc_path, samples=samples, max_samples=max_samples, seed=seed, max_p_fail=max_p_fail,
                 acceptance_basis=acceptance_basis,
                 reference=ck.text(data.get("reference"), ("reference",)),
                 prepared_by=ck.text(data.get("prepared_by"), ("prepared_by",)),
                 prepared_for=ck.text(data.get("prepared_for"), ("prepared_for",)),
                 paper="letter" if paper.lower() == "letter" else "A4", max_grid_change=max_grid_change,
                 max_gci=max_gci, warnings=[p for p in ck.problems if p.warning], elements=named,
                 report=report, scenario_weights=scenario_weights,
                 weights_source=ck.text(data.get("weights_source"), ("weights_source",)),
                 max_design_p_fail=max_design_p_fail, basis=basis, sign_off=sign_off), scenarios, ck.problems


def _acceptance_limit(ck, acc, key: str) -> float | None:
    """``acceptance.<key>`` (``max_p_fail``, or ``max_design_p_fail``: the limit on the
    design-level p_fail), a probability in [0, 1); None when not given or wrong (error recorded)."""
    if key not in acc:
        return None
    v = acc[key]
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not 0 <= v < 1:
        ck.err(("acceptance", key), f"found {_show(v)}; expected a probability in [0, 1)")
        return None
    return float(v)


def _scenario_weights(ck, data, scenarios) -> dict[str, float] | None:
    """``scenario_weights: {scenario id: probability}``: every scenario named once, none negative, sum 1.

    A scenario left out is an error (project choice: an unweighted design fire would silently
    drop out of the design-level figure). The sum may differ from 1 by
    :data:`egressmargin.design.WEIGHT_SUM_TOLERANCE` (round-off).
    """
    from .design import WEIGHT_SUM_TOLERANCE

    if "weights_source" in data and "scenario_weights" not in data:
        ck.err(("weights_source",), "found 'weights_source' without 'scenario_weights'; expected both or neither")
    if "scenario_weights" not in data:
        return None
    value = data["scenario_weights"]
    kp = ("scenario_weights",)
    if not isinstance(value, dict) or not value:
        ck.err(kp, f"found {_show(value)}; expected a mapping {{<scenario id>: <probability>}} summing to 1")
        return None
    ids = [s.id for s in scenarios]
    out, ok = {}, True
    for sid, w in value.items():
        if str(sid) not in ids:
            ck.err(kp + (sid,), f"unknown scenario '{sid}'; expected one of {', '.join(ids)}{did_you_mean(sid, ids)}")
            ok = False
            continue
        if isinstance(w, bool) or not isinstance(w, (int, float)) or w != w:
            ck.err(kp + (sid,), f"found {_show(w)}; expected a probability (a number in [0, 1])")
            ok = False
        elif w < 0 or w > 1:
            ck.err(kp + (sid,), f"found {w}; expected a probability in [0, 1] (weights are not negative)")
            ok = False
        else:
            out[str(sid)] = float(w)
    missing = [s for s in ids if s not in {str(k) for k in value}]
    if missing:
        ck.err(kp, f"no weight for scenario{'s' if len(missing) > 1 else ''} {', '.join(missing)}; expected a "
               "weight for every scenario (give 0 to leave one out of the design-level figure)")
        ok = False
    if ok and abs(sum(out.values()) - 1.0) > WEIGHT_SUM_TOLERANCE:
        ck.err(kp, f"the weights sum to {sum(out.values()):.9g}; expected 1 (conditional probabilities of the "
               f"design fires given a fire, to within {WEIGHT_SUM_TOLERANCE:g})")
        ok = False
    return out if ok else None


def _report_options(ck, value) -> dict:
    """The top-level `report:` block: ``unused_locations: appendix | omit``.

    ``appendix`` (the default) prints the detail of locations no route uses in the
    appendix; ``omit`` leaves it out and the report names the locations left out.
    """
    options = {"unused_locations": UNUSED_LOCATIONS[0]}
    if value is None or not ck.keys(value, ("report",), {"unused_locations"}, "report"):
        return options
    if "unused_locations" in value:
        v = value["unused_locations"]
        word = v.strip().lower() if isinstance(v, str) else None
        if word not in UNUSED_LOCATIONS:
            ck.err(("report", "unused_locations"), f"found {_show(v)}; expected appendix (the detail of "
                   "locations no route uses goes in the appendix) or omit (left out, the report names them)")
        else:
            options["unused_locations"] = word
    return options


def _usable_criteria(ck, criteria: CriteriaSet, given) -> None:
    """Errors for criteria the engine cannot apply: none left (``only: []``), or a limit of
    zero or less where only a positive one means anything (every criterion but temperature)."""
    if not criteria.items:
        kp = ("criteria", "only") if isinstance(given, dict) and "only" in given else ("criteria",)
        ck.err(kp, "no criterion is left to apply; expected at least one criterion id in 'only'"
               if not criteria.not_applicable else
               f"no criterion is left to apply (not applicable: {', '.join(criteria.not_applicable)}); expected at "
               "least one criterion that applies")
    for cid, c in criteria.items.items():
        if cid != "temperature" and not c.limit > 0:
            ck.err(("criteria", cid, "limit"), f"found '{c.limit_text}' for '{cid}'; expected a limit above zero")


def _int(ck, value, kp, low, what):
    if isinstance(value, bool) or not isinstance(value, int) or value < low:
        ck.err(kp, f"found {_show(value)}; expected {what}")
        return low if low > 0 else 0
    return value


def _optional_unit(ck, value: dict, kp, quantity: str) -> tuple[str | None, bool]:
    """The optional ``unit:`` of a mapping, checked for ``quantity``: (unit text or None, ok)."""
    unit = value.get("unit")
    if unit is None:
        return None, True
    msg = check_unit(str(unit), quantity)
    if msg:
        ck.err(kp + ("unit",), msg)
        return None, False
    return str(unit), True


def _series_ref(ck, key, value, kp) -> SeriesRef | None:
    where = ck.doc.where(kp)
    if isinstance(value, str) and value.strip():
        return SeriesRef(key, value.strip(), None, where)
    if isinstance(value, dict):
        if not ck.keys(value, kp, {"column", "unit"}, f"the '{key}' series"):
            return None
        col = value.get("column")
        if not isinstance(col, str) or not col.strip():
            ck.err(kp, f"missing 'column' for '{key}'; expected {{column: <CSV column name>, unit: <unit>}}")
            return None
        unit, ok = _optional_unit(ck, value, kp, "time" if key == "time" else key)
        if not ok:
            return None
        return SeriesRef(key, col.strip(), unit, where)
    ck.err(kp, f"found {_show(value)}; expected a column name or {{column: ..., unit: ...}}")
    return None


def _scenarios(ck, value, base: Path) -> list[ScenarioSpec]:
    if value is None:
        ck.err((), "missing key 'scenarios'; expected a list of scenarios with histories and locations")
        return []
    if not isinstance(value, list) or not value:
        ck.err(("scenarios",), f"found {_show(value)}; expected a non-empty list of scenarios")
        return []
    out, seen = [], {}
    for i, sc in enumerate(value):
        kp = ("scenarios", i)
        if not ck.keys(sc, kp, SCENARIO_KEYS, "a scenario"):
            continue
        sid = ck.ident(sc.get("id"), kp + ("id",)) if "id" in sc else None
        if sid is None:
            if "id" not in sc:
                ck.err(kp, "missing key 'id'; expected a short scenario identifier")
            continue
        if sid in seen:
            ck.err(kp + ("id",), f"duplicate scenario id '{sid}' (first at scenarios[{seen[sid]}]); "
                   "expected unique ids")
        seen[sid] = i
        resolutions = _resolutions(ck, sc.get("resolutions"), kp + ("resolutions",), base)
        hist = None
        if "histories" in sc:
            if not isinstance(sc["histories"], str):
                ck.err(kp + ("histories",), f"found {_show(sc['histories'])}; expected a CSV path")
            else:
                hist = base / sc["histories"]
                if not hist.is_file():
                    ck.err(kp + ("histories",), f"file '{sc['histories']}' not found (looked at {hist}); "
                           "expected a CSV file relative to the study file")
        if resolutions:
            finest = min(resolutions, key=lambda r: r.cell_m)
            if hist is None:
                hist = finest.histories
            elif hist.resolve() != finest.histories.resolve():
                ck.err(kp + ("histories",), f"'{sc['histories']}' is not the finest resolution's histories "
                       f"({finest.histories.name}); expected the assessed histories to be the finest grid")
        elif hist is None and "histories" not in sc and "ensemble" not in sc:
            ck.err(kp, "missing key 'histories'; expected the path of the scenario's CSV time histories")
        time = _series_ref(ck, "time", sc.get("time", "Time") if "time" in sc else None, kp + ("time",)) \
            if "time" in sc else None
        if "time" not in sc:
            ck.err(kp, "missing key 'time'; expected the name of the time column, e.g. time: Time")
        units_row = sc.get("units_row", False)
        if units_row is True:
            units_row = "below"
        if units_row not in (False, "above", "below"):
            ck.err(kp + ("units_row",), f"found {_show(units_row)}; expected above (a units row over the names), "
                   "below or true (under the names), or false")
            units_row = False
        amb_t = amb_o2 = None
        if "ambient" in sc and ck.keys(sc["ambient"], kp + ("ambient",), {"temperature", "o2"}, "ambient"):
            if "temperature" in sc["ambient"]:
                amb_t = ck.quantity(sc["ambient"]["temperature"], kp + ("ambient", "temperature"), "temperature")
                if amb_t is not None and amb_t <= -273.15:
                    ck.err(kp + ("ambient", "temperature"), f"found {_show(sc['ambient']['temperature'])}, at or "
                           "below absolute zero; expected an ambient air temperature")
                    amb_t = None
            if "o2" in sc["ambient"]:
                amb_o2 = ck.quantity(sc["ambient"]["o2"], kp + ("ambient", "o2"), "o2")
                if amb_o2 is not None and not 0 < amb_o2 <= 1:
                    ck.err(kp + ("ambient", "o2"), "expected an oxygen fraction in (0, 100] percent")
                elif amb_o2 is not None and not AMBIENT_O2_LOW <= amb_o2 <= AMBIENT_O2_HIGH:
                    ck.err(kp + ("ambient", "o2"), f"found {_show(sc['ambient']['o2'])} ({amb_o2 * 100:g} percent); "
                           f"expected an ambient oxygen fraction from {AMBIENT_O2_LOW * 100:g} to "
                           f"{AMBIENT_O2_HIGH * 100:g} percent (dry air holds 20.9 percent; a fraction written "
                           "as a percentage, or percent as a fraction?)")
                    amb_o2 = None
                elif amb_o2 is not None and amb_o2 < AMBIENT_O2_DEFICIENT:
                    ck.warn(kp + ("ambient", "o2"), f"ambient oxygen {amb_o2 * 100:g} percent is below "
                            f"{AMBIENT_O2_DEFICIENT * 100:g} percent, an oxygen-deficient atmosphere before any "
                            "fire (an oxygen-reduction system?); check the value")
        ignition = None
        if "ignition" in sc:
            ignition = ck.quantity(sc["ignition"], kp + ("ignition",), "duration")
        locations = _locations(ck, sc.get("locations"), kp + ("locations",))
        design_fire = _design_fire(ck, sc["design_fire"], kp + ("design_fire",)) if "design_fire" in sc else None
        members = _ensemble(ck, sc, kp, base, resolutions) if "ensemble" in sc else None   # an ensemble of fire runs
        if members and not resolutions:
            hist = members[0].histories       # the reference member (with resolutions: the finest grid's)
        hrr = None
        if design_fire is not None and "hrr" in design_fire:
            hrr = _hrr(ck, design_fire.pop("hrr"), kp + ("design_fire", "hrr"), base)
        out.append(ScenarioSpec(sid, ck.text(sc.get("title"), kp + ("title",), default=sid), hist, time,
                                units_row, locations, amb_t, amb_o2, resolutions, ck.doc.where(kp),
                                design_fire, ignition_s=ignition, hrr=hrr))
        out[-1].delimiter, out[-1].decimal = _csv_format(ck, sc, kp)
        out[-1].ensemble = members
        table = sc["ensemble"].get("parameters") if members and isinstance(sc.get("ensemble"), dict) else None
        if isinstance(table, str) and (base / table).is_file():
            out[-1].ensemble_table = base / table       # a file read: hashed into the results' inputs
    return out


# ------------------------------------------------------------ ensembles of fire runs

def _ensemble(ck, sc, kp, base: Path, resolutions=()) -> list[MemberSpec] | None:
    """``ensemble:`` a list of ``{histories, weight, parameters, id}``, or ``{glob, parameters}``.

    With ``glob`` every matching file is a member of equal weight, in sorted order; the
    optional ``parameters`` is a CSV side table with columns ``file, name, value`` (one row
    per member and parameter; ``file`` the member's file name). Every member uses the
    scenario's column mapping (checked when the files are read).
    """
    kp = kp + ("ensemble",)
    value = sc["ensemble"]
    if "histories" in sc:
        ck.err(kp, "found both 'histories' and 'ensemble'; expected one of them")
        return None
    members: list[MemberSpec] = []
    if isinstance(value, dict):
        if not ck.keys(value, kp, {"glob", "parameters"}, "an ensemble given by a file pattern"):
            return None
        pattern = value.get("glob")
        if not isinstance(pattern, str) or not pattern.strip():
            ck.err(kp, f"found {_show(pattern)} for 'glob'; expected a file pattern such as runs/a-*.csv")
            return None
        files = sorted(p for p in base.glob(pattern) if p.is_file())
        if not files:
            ck.err(kp + ("glob",), f"no file matches '{pattern}' (looked in {base}); expected the members' CSV files")
            return None
        params = _side_table(ck, value.get("parameters"), kp + ("parameters",), base, files) \
            if value.get("parameters") is not None else {}
        members = [MemberSpec(f.stem, f, 1.0, params.get(f.name, {}), ck.doc.where(kp)) for f in files]
    elif isinstance(value, list) and value:
        for j, m in enumerate(value):
            mkp = kp + (j,)
            if not ck.keys(m, mkp, {"id", "histories", "weight", "parameters"}, "an ensemble member"):
                continue
            h = m.get("histories")
            if not isinstance(h, str):
                ck.err(mkp, f"found {_show(h)} for 'histories'; expected the member's CSV path")
                continue
            path = base / h
            if not path.is_file():
                ck.err(mkp + ("histories",), f"file '{h}' not found (looked at {path}); expected a CSV file "
                       "relative to the study file")
            w = m.get("weight", 1)
            if isinstance(w, bool) or not isinstance(w, (int, float)) or not w > 0 or w == float("inf"):
                ck.err(mkp + ("weight",), f"found {_show(w)}; expected a positive number (relative weight)")
                w = 1.0
            par = m.get("parameters", {})
            if not isinstance(par, dict) or any(isinstance(v, (dict, list)) for v in par.values()):
                ck.err(mkp + ("parameters",), f"found {_show(par)}; expected a mapping of names to numbers or text")
                par = {}
            mid = ck.ident(m.get("id", path.stem), mkp + ("id",)) or path.stem
            members.append(MemberSpec(mid, path, float(w), dict(par), ck.doc.where(mkp)))
    else:
        ck.err(kp, f"found {_show(value)}; expected a list of members {{histories, weight, parameters}} "
               "or {glob: <pattern>}")
        return None
    if members and resolutions:
        finest = min(resolutions, key=lambda r: r.cell_m).histories
        if finest.resolve() not in {m.histories.resolve() for m in members}:
            ck.err(kp, f"the finest resolution's histories ({finest.name}) are not a member of the ensemble; expected "
                   "the grid study to be made on one member (the reference member)")
    ids = [m.id for m in members]
    for m in members:
        if ids.count(m.id) > 1:
            ck.err(kp, f"member id '{m.id}' is used {ids.count(m.id)} times; expected unique ids (give 'id:')")
            break
    return members or None


def _side_table(ck, rel, kp, base: Path, files: list[Path]) -> dict[str, dict]:
    """The ensemble's parameter side table (CSV: file, name, value) as {file name: {name: value}}."""
    import csv

    if not isinstance(rel, str):
        ck.err(kp, f"found {_show(rel)}; expected the path of a CSV side table with columns file, name, value")
        return {}
    path = base / rel
    if not path.is_file():
        ck.err(kp, f"file '{rel}' not found (looked at {path}); expected a CSV side table (file, name, value)")
        return {}
    out: dict[str, dict] = {}
    names = {f.name for f in files}
    with path.open(newline="", encoding="utf-8-sig") as fh:
        reader = csv.DictReader(fh)
        if reader.fieldnames is None or not {"file", "name", "value"} <= {c.strip() for c in reader.fieldnames}:
            ck.err(kp, f"{path}: found columns {reader.fieldnames}; expected file, name, value")
            return {}
        for i, row in enumerate(reader, start=2):
            row = {k.strip(): (v or "").strip() for k, v in row.items() if k}
            fname = Path(row["file"]).name
            if fname not in names:
                ck.err(kp, f"{path}, line {i}, column file: found '{row['file']}'; expected one of the files the "
                       f"pattern matches ({', '.join(sorted(names))})")
                continue
            v = row["value"]
            try:
                v = float(v)
            except ValueError:
                pass
            out.setdefault(fname, {})[row["name"]] = v
    return out


def _csv_format(ck, sc, kp) -> tuple[str, str]:
    """The scenario's declared CSV delimiter and decimal mark (default ',' and '.')."""
    delimiter, decimal = ",", "."
    if "delimiter" in sc:
        d = sc["delimiter"]
        if not isinstance(d, str) or d not in DELIMITERS:
            ck.err(kp + ("delimiter",), f"found {_show(d)}; expected one of "
                   f"{', '.join(repr(k) for k in DELIMITERS)}")
        else:
            delimiter = DELIMITERS[d]
    if "decimal" in sc:
        d = sc["decimal"]
        if d not in DECIMALS:
            ck.err(kp + ("decimal",), f"found {_show(d)}; expected '.' or ','")
        else:
            decimal = d
    if decimal == delimiter:
        ck.err(kp + ("decimal",), f"the decimal mark {decimal!r} is also the delimiter; expected delimiter: ';' "
               "with decimal: ','")
    return delimiter, decimal


def _resolutions(ck, value, kp, base) -> list[ResolutionSpec]:
    if value is None:
        return []
    if not isinstance(value, list) or len(value) < 2:
        ck.err(kp, f"found {_show(value)}; expected a list of 2 or 3 {{cell: <size>, histories: <csv>}}")
        return []
    out = []
    for j, r in enumerate(value):
        if not ck.keys(r, kp + (j,), {"cell", "histories"}, "a resolution"):
            continue
        cell = ck.quantity(r.get("cell"), kp + (j, "cell"), "length", positive=True) if "cell" in r else None
        if "cell" not in r:
            ck.err(kp + (j,), "missing 'cell'; expected the grid cell size, e.g. cell: 0.1 m")
        h = r.get("histories")
        if not isinstance(h, str):
            ck.err(kp + (j,), "missing 'histories'; expected the CSV of this resolution")
            continue
        path = base / h
        if not path.is_file():
            ck.err(kp + (j, "histories"), f"file '{h}' not found (looked at {path}); expected a CSV file")
            continue
        if cell is not None:
            out.append(ResolutionSpec(cell, path, ck.doc.where(kp + (j,))))
    if len(out) == len(value):
        from .credibility import refinement_problems
        for msg in refinement_problems([r.cell_m for r in out]):
            ck.err(kp, msg)
    return out


def _locations(ck, value, kp) -> list[LocationSpec]:
    if not isinstance(value, list) or not value:
        ck.err(kp, f"found {_show(value)}; expected a non-empty list of locations")
        return []
    out, seen = [], {}
    for j, loc in enumerate(value):
        lkp = kp + (j,)
        if not ck.keys(loc, lkp, LOCATION_KEYS, "a location"):
            continue
        if "id" not in loc:
            ck.err(lkp, "missing key 'id'; expected a short location identifier")
            continue
        lid = ck.ident(loc["id"], lkp + ("id",))
        if lid is None:
            continue
        if lid in seen:
            ck.err(lkp + ("id",), f"duplicate location id '{lid}' (first at locations[{seen[lid]}]); "
                   "expected unique ids within a scenario")
            continue
        seen[lid] = j
        series = {}
        for key in SERIES_KEYS:
            if key in loc:
                ref = _series_ref(ck, key, loc[key], lkp + (key,))
                if ref:
                    series[key] = ref
        smoke = [k for k in SMOKE_KEYS if k in series]
        if len(smoke) > 1:
            ck.warn(lkp, f"several smoke series given ({', '.join(smoke)}); the visibility criterion uses "
                    f"'{smoke[0]}' (order of preference: {', '.join(SMOKE_KEYS)})")
        profile = None
        if "temperature_profile" in loc:
            profile = _profile(ck, loc["temperature_profile"], lkp + ("temperature_profile",))
            if profile and "layer_height" in series:
                ck.warn(lkp, "both 'layer_height' and 'temperature_profile' given; the given layer_height is used")
        if not series and profile is None:
            ck.warn(lkp, "no series mapped at this location; every criterion will be 'not assessed' here")
        role = loc.get("role", "occupied")
        if role not in LOCATION_ROLES:
            ck.err(lkp + ("role",), f"found {_show(role)}; expected one of {', '.join(LOCATION_ROLES)} "
                   f"(detector: a detection point, not assessed for tenability){did_you_mean(str(role), LOCATION_ROLES)}")
            role = "occupied"
        height = None
        if "height" in loc:
            height = ck.quantity(loc["height"], lkp + ("height",), "length", positive=True)
        out.append(LocationSpec(lid, ck.text(loc.get("title"), lkp + ("title",), default=lid), series, profile,
                                ck.doc.where(lkp), role, _accept_warnings(ck, loc.get("accept_warnings"),
                                                                          lkp + ("accept_warnings",)),
                                height_m=height))
    return out


def _accept_warnings(ck, value, kp) -> tuple[str, ...]:
    """A location's ``accept_warnings``: a list of plausibility codes (plausibility.CODES)."""
    from .plausibility import CODES
    if value is None:
        return ()
    if not isinstance(value, list):
        ck.err(kp, f"found {_show(value)}; expected a list of warning codes such as [start-co-nonzero]")
        return ()
    out = []
    for j, code in enumerate(value):
        if not isinstance(code, str) or code not in CODES:
            ck.err(kp + (j,), f"unknown warning code {_show(code)}; expected one of {', '.join(CODES)}"
                   f"{did_you_mean(str(code), CODES)}")
            continue
        out.append(code)
    return tuple(out)


def _design_fire(ck, value, kp) -> dict | None:
    """The optional design-fire description: text or numbers per key, kept as given."""
    if not ck.keys(value, kp, set(DESIGN_FIRE_KEYS), "a design-fire description"):
        return None
    out = {}
    for key in DESIGN_FIRE_KEYS:
        if key not in value:
            continue
        v = value[key]
        if key == "hrr":
            out[key] = v            # parsed by _hrr
        elif key == "yields" and isinstance(v, dict):
            bad = [k for k, x in v.items() if isinstance(x, (dict, list)) or x is None]
            if bad:
                ck.err(kp + (key,), f"found {_show(v)}; expected a mapping of species to yields as text, "
                       "e.g. {co: 0.03 kg/kg}")
                continue
            out[key] = {str(k): x if isinstance(x, (int, float, str)) else str(x) for k, x in v.items()}
        elif isinstance(v, (str, int, float)) and not isinstance(v, bool):
            out[key] = v
        else:
            ck.err(kp + (key,), f"found {_show(v)}; expected text (or a number), shown in the report as given")
    return out


def _hrr(ck, value, kp, base: Path) -> HrrRef | None:
    """`design_fire: {hrr: {column, unit}}` (a column of the scenario's histories) or
    `{hrr: {file, time, column}}` (a CSV of its own, relative to the study file). A
    column's unit comes from `unit:` or the header (`name [unit]`), never a guess."""
    if not ck.keys(value, kp, {"column", "unit", "file", "time"},
                   "a heat-release-rate curve ({column, unit} or {file, time, column})"):
        return None
    col = value.get("column")
    if not isinstance(col, str) or not col.strip():
        ck.err(kp, f"missing 'column'; expected the heat-release-rate column, e.g. {{column: HRR, unit: kW}}")
        return None
    unit, ok = _optional_unit(ck, value, kp, "hrr")
    if not ok:
        return None
    where = ck.doc.where(kp)
    if "file" not in value:
        if "time" in value:
            ck.err(kp + ("time",), "'time' goes with 'file'; a column of the scenario's histories uses its time")
            return None
        return HrrRef(col.strip(), unit, where=where)
    f = value["file"]
    if not isinstance(f, str) or not f.strip():
        ck.err(kp + ("file",), f"found {_show(f)}; expected a CSV path relative to the study file")
        return None
    path = base / f
    if not path.is_file():
        ck.err(kp + ("file",), f"file '{f}' not found; expected a CSV file relative to the study file")
        return None
    if "time" not in value:
        ck.err(kp, "missing 'time'; expected the time column of the heat-release-rate file, e.g. time: Time")
        return None
    t = _series_ref(ck, "time", value["time"], kp + ("time",))
    if t is None:
        return None
    return HrrRef(col.strip(), unit, path, t.column, t.unit, where)


def _basis(ck, value) -> dict:
    """The top-level `basis:` as given: text per key, `fire_model` a mapping of text."""
    if value is None or not ck.keys(value, ("basis",), set(BASIS_KEYS), "the basis of design"):
        return {}
    out: dict = {}
    for key in BASIS_KEYS:
        if key not in value:
            continue
        v = value[key]
        if key == "fire_model":
            if not ck.keys(v, ("basis", key), set(FIRE_MODEL_KEYS), "the fire model ({name, version, grid})"):
                continue
            out[key] = {k: ck.text(v[k], ("basis", key, k)) for k in FIRE_MODEL_KEYS if k in v}
        else:
            out[key] = ck.text(v, ("basis", key))
    return out


def _sign_off(ck, value) -> dict | None:
    """The top-level `sign_off:` as given; `date` text or a YAML date (ISO 8601 kept)."""
    import datetime as _dt
    if value is None or not ck.keys(value, ("sign_off",), set(SIGN_OFF_KEYS), "the sign-off"):
        return None
    out = {}
    for key in SIGN_OFF_KEYS:
        if key not in value:
            continue
        v = value[key]
        out[key] = v.isoformat() if isinstance(v, _dt.date) else ck.text(v, ("sign_off", key))
    if not out.get("engineer"):
        ck.err(("sign_off",), "missing 'engineer'; expected the name of the responsible engineer")
    return out


def _profile(ck, value, kp) -> ProfileRef | None:
    if not ck.keys(value, kp, {"columns", "heights", "ceiling", "unit"}, "a temperature profile"):
        return None
    ok = all(ck.require(value, kp, k, e) for k, e in
             (("columns", "a list of temperature column names, lowest first"),
              ("heights", "a list of sensor heights, e.g. [0.5 m, 1.0 m]"),
              ("ceiling", "the ceiling height, e.g. 4.0 m")))
    if not ok:
        return None
    cols, heights = value["columns"], value["heights"]
    if not isinstance(cols, list) or len(cols) < 2 or not all(isinstance(c, str) for c in cols):
        ck.err(kp + ("columns",), f"found {_show(cols)}; expected a list of two or more column names")
        return None
    if not isinstance(heights, list) or len(heights) != len(cols):
        ck.err(kp + ("heights",), f"found {_show(heights)}; expected {len(cols)} heights, one per column")
        return None
    hs = [ck.quantity(h, kp + ("heights", i), "length") for i, h in enumerate(heights)]
    ceiling = ck.quantity(value["ceiling"], kp + ("ceiling",), "length", positive=True)
    if any(h is None for h in hs) or ceiling is None:
        return None
    if any(b <= a for a, b in zip(hs, hs[1:])) or hs[0] < 0 or hs[-1] > ceiling:
        ck.err(kp + ("heights",), f"found heights {heights}; expected strictly increasing heights between the "
               f"floor and the ceiling ({value['ceiling']})")
        return None
    unit, ok = _optional_unit(ck, value, kp, "temperature")
    if not ok:
        return None
    return ProfileRef([c.strip() for c in cols], hs, ceiling, unit, ck.doc.where(kp))


def _routes(ck, value, loc_ids: dict[str, dict], named: dict | None = None,
            broken: set[str] | None = None) -> list[RouteSpec]:
    if value is None or value == []:
        return []
    if not isinstance(value, list):
        ck.err(("egress",), f"found {_show(value)}; expected a list of escape routes")
        return []
    out, seen = [], {}
    all_scen = list(loc_ids)
    for i, r in enumerate(value):
        kp = ("egress", i)
        if not ck.keys(r, kp, ROUTE_KEYS, "an escape route"):
            continue
        if "id" not in r:
            ck.err(kp, "missing key 'id'; expected a short route identifier")
        rid = ck.ident(r["id"], kp + ("id",)) if "id" in r else None
        if rid is None:
            rid = f"egress[{i}]"          # keep checking the route's other keys
        if rid in seen:
            ck.err(kp + ("id",), f"duplicate route id '{rid}' (first at egress[{seen[rid]}]); expected unique ids")
        seen[rid] = i
        scen = r.get("scenarios")
        if scen is not None:
            if not isinstance(scen, list) or not scen:
                ck.err(kp + ("scenarios",), f"found {_show(scen)}; expected a list of scenario ids")
                scen = None
            else:
                for j, s in enumerate(scen):
                    if not isinstance(s, (str, int)) or isinstance(s, bool):
                        ck.err(kp + ("scenarios", j), f"found {_show(s)}; expected a scenario id")
                        continue
                    if str(s) not in loc_ids:        # ids are text: an integer id is compared as written
                        ck.err(kp + ("scenarios", j), f"no scenario '{s}'; expected one of "
                               f"{', '.join(all_scen)}{did_you_mean(s, all_scen)}")
                scen = [str(s) for s in scen]
        occ, occ_dist = _occupants(ck, r.get("occupants"), kp + ("occupants",))
        for key in ("detection", "alarm", "premovement", "path", "exposed_at"):
            if key not in r:
                ck.err(kp, f"missing key '{key}' for route '{rid}'")
        covered = scen or all_scen
        exposed = []
        if "exposed_at" in r:
            ex = r["exposed_at"]
            if not isinstance(ex, list) or not ex:
                ck.err(kp + ("exposed_at",), f"found {_show(ex)}; expected a list of location ids the occupants pass")
            else:
                for j, lid in enumerate(ex):
                    lid = _location_ref(ck, lid, kp + ("exposed_at", j), covered, loc_ids)
                    if lid is None:
                        continue
                    detectors = [s for s in covered if s in loc_ids and lid in loc_ids[s]
                                 and loc_ids[s][lid].role == "detector"]
                    if detectors:
                        ck.err(kp + ("exposed_at", j), f"location '{lid}' has role: detector in scenario "
                               f"{', '.join(detectors)}; a detection point is not assessed for tenability, "
                               "so occupants cannot be exposed at it (remove the role or the location)")
                    exposed.append(lid)
        detection = _detection(ck, r.get("detection"), kp + ("detection",), covered, loc_ids) \
            if "detection" in r else None
        alarm = ck.distribution(r["alarm"], kp + ("alarm",), "an alarm delay") if "alarm" in r else None
        pre, across = _premovement(ck, r["premovement"], kp + ("premovement",)) if "premovement" in r \
            else (None, False)
        path = _path(ck, r.get("path"), kp + ("path",), named or {}, broken) if "path" in r else []
        for j, element in enumerate(path):
            if element.get("at") is not None:
                _location_ref(ck, element["at"], element["at_kp"], covered, loc_ids)
                if "exposed_at" in r and element["at"] not in exposed:
                    ck.err(element["at_kp"], f"path element {j + 1} says its people are at '{element['at']}', "
                           "which is not in the route's exposed_at; expected it there too (the route is judged "
                           "against the ASET of every location its occupants pass)")
        start_at = _location_ref(ck, r["start_at"], kp + ("start_at",), covered, loc_ids) \
            if "start_at" in r else None
        if start_at is not None and "exposed_at" in r and start_at not in exposed:
            ck.err(kp + ("start_at",), f"the occupants start at '{start_at}', which is not in the route's "
                   "exposed_at; expected it there too (the route is judged against the ASET of every location "
                   "its occupants are at)")
        factors = {key: _positive_number_or_distribution(ck, r[key], kp + (key,), "a multiplier")
                   if key in r else {"fixed": 1.0} for key in ("flow_factor", "speed_factor")}
        mode = _movement_mode(ck, r.get("movement", "flow"), kp + ("movement",))
        exposure = r.get("exposure")
        if exposure not in (None, "along-route", "location"):
            ck.err(kp + ("exposure",), f"found {_show(exposure)}; expected 'along-route'")
        out.append(RouteSpec(rid, ck.text(r.get("title"), kp + ("title",), default=rid), scen, occ, detection,
                             alarm, pre, path, exposed, mode, exposure == "along-route", ck.doc.where(kp),
                             premovement_across=across, occupants_dist=occ_dist,
                             flow_factor=factors["flow_factor"] or {"fixed": 1.0},
                             speed_factor=factors["speed_factor"] or {"fixed": 1.0}, start_at=start_at))
    return out


def _location_ref(ck, lid, kp, covered, loc_ids) -> str | None:
    """A location id that must exist in every scenario the route covers."""
    if not isinstance(lid, (str, int)) or isinstance(lid, bool):
        ck.err(kp, f"found {_show(lid)}; expected a location id")
        return None
    lid = str(lid)                          # ids are text: an integer id is compared as written
    missing = [s for s in covered if s in loc_ids and lid not in loc_ids[s]]
    if missing:
        known = sorted({x for s in covered if s in loc_ids for x in loc_ids[s]})
        ck.err(kp, f"location '{lid}' does not exist in scenario {', '.join(missing)}; expected one of "
               f"{', '.join(known)}{did_you_mean(lid, known)}")
    return str(lid)


def _movement_mode(ck, mode, kp) -> str:
    if mode == "max":
        ck.err(kp, "'movement: max' is no longer accepted: the larger of travel and flow time lets the last "
               "person walk the whole path while everyone else queues, which understates RSET whenever walking "
               "comes before or after the queue (the hydraulic method adds them, SFPE Handbook ch. 59). "
               "Movement is now a flow of persons through the path; remove the key")
    elif mode == "sum":
        ck.warn(kp, "'movement: sum' is now the flow model (persons queue at each element and walk it; with "
                "everyone starting together this is travel plus flow time, with crowd speed from the "
                "controlling element on); the key can be removed")
    elif mode != "flow":
        ck.err(kp, f"found {_show(mode)}; expected 'flow' (the default) or no 'movement' key")
    return "flow"


def _occupants(ck, value, kp) -> tuple[int, dict]:
    """Occupant count: a whole number, or a distribution of counts (rounded per draw)."""
    if isinstance(value, dict):
        spec = _positive_number_or_distribution(ck, value, kp, "an occupant count")
        if spec is None:
            return 1, {"fixed": 1.0}
        from .egress.distributions import median
        return max(1, int(round(median(spec)))), spec
    if isinstance(value, bool) or not isinstance(value, int) or value <= 0:
        ck.err(kp, f"found {_show(value)}; expected a positive whole number of occupants or a distribution "
               "such as {uniform: {low: 120, high: 180}}")
        return 1, {"fixed": 1.0}
    return value, {"fixed": float(value)}


def _positive_number_or_distribution(ck, value, kp, what) -> dict | None:
    """A plain positive number or {lognormal | uniform | triangular: {...}} of plain numbers."""
    if isinstance(value, dict):
        if len(value) != 1 or next(iter(value)) not in POSITIVE_DISTRIBUTIONS:
            ck.err(kp, f"found {_show(value)}; expected {what}: a number or one of "
                   f"{', '.join('{' + k + ': {...}}' for k in POSITIVE_DISTRIBUTIONS)} "
                   "(normal is not accepted: truncated at zero it can give zero)")
            return None
        name, params = next(iter(value.items()))
        needed = DISTRIBUTIONS[name]
        if not ck.keys(params, kp + (name,), set(needed), f"a {name} distribution ({', '.join(needed)})"):
            return None
        vals = {}
        for p in needed:
            v = params.get(p)
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not (v > 0) or v == float("inf"):
                ck.err(kp + (name, p) if p in params else kp + (name,),
                       f"found {_show(v)} for '{p}'; expected a plain number above zero")
                continue
            vals[p] = float(v)
        if len(vals) != len(needed):
            return None
        spec = {name: vals}
        from .egress.distributions import check_spec
        problems = check_spec(spec)
        for msg in problems:
            ck.err(kp + (name,), msg.replace(" s)", ")").replace(" s,", ","))
        return None if problems else spec
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not (0 < value < float("inf")):
        ck.err(kp, f"found {_show(value)}; expected {what}: a number above zero or a distribution")
        return None
    return {"fixed": float(value)}


def _premovement(ck, value, kp) -> tuple[dict | None, bool]:
    """`premovement: <distribution>` (one time for all) or `{across_occupants: <distribution>}`."""
    across = isinstance(value, dict) and len(value) == 1 and "across_occupants" in value
    if isinstance(value, dict) and len(value) == 1 and not across and next(iter(value)) not in DISTRIBUTIONS:
        ck.err(kp, f"found {_show(value)}; expected a distribution (one uncertain time for everyone) or "
               "{across_occupants: <distribution>} (start times spread across the occupants)"
               f"{did_you_mean(next(iter(value)), ['across_occupants', *DISTRIBUTIONS])}")
        return None, False
    if across:
        kp = kp + ("across_occupants",)
        value = value["across_occupants"]
    return _duration(ck, value, kp, "a pre-movement time"), across


def _duration(ck, value, kp, what) -> dict | None:
    """A duration distribution whose parameters may themselves be bounded distributions."""
    from .egress.distributions import BOUNDED_KINDS, check_nested_spec
    nested = isinstance(value, dict) and len(value) == 1 and next(iter(value)) in DISTRIBUTIONS \
        and isinstance(next(iter(value.values())), dict) \
        and any(isinstance(v, dict) for v in next(iter(value.values())).values())
    if not nested:
        return ck.distribution(value, kp, what)
    name, params = next(iter(value.items()))

    def parse(v, kpp):
        if not isinstance(v, dict):
            return ck.quantity(v, kpp, "duration")
        if len(v) != 1 or next(iter(v)) not in BOUNDED_KINDS:
            ck.err(kpp, f"found {_show(v)}; an uncertain parameter needs a bounded "
                   "distribution: {uniform: {low, high}} or {triangular: {low, mode, high}} of times")
            return None
        return ck.distribution(v, kpp, f"the {kpp[-1]} of the {name} distribution")

    out = ck.distribution_params(name, params, kp, parse)
    if out is None:
        return None
    spec = {name: out}
    problems = check_nested_spec(spec)
    for msg in problems:
        ck.err(kp + (name,), msg)
    return None if problems else spec


def _named_elements(ck, value) -> tuple[dict[str, NamedElement], set[str]]:
    """The top-level `elements:` list: [{id: east-stair, stair: {...}}, ...].

    Returns the elements by id, and the ids whose definition has problems (already
    reported; a route that uses one is not flagged again).
    """
    if value is None:
        return {}, set()
    if not isinstance(value, list):
        ck.err(("elements",), f"found {_show(value)}; expected a list of named path elements such as "
               "{id: east-stair, stair: {...}}")
        return {}, set()
    out: dict[str, NamedElement] = {}
    broken: set[str] = set()
    for i, item in enumerate(value):
        kp = ("elements", i)
        if not isinstance(item, dict):
            ck.err(kp, f"found {_show(item)}; expected {{id: ..., <element type>: {{...}}}}")
            continue
        kinds = [k for k in item if k not in NAMED_ELEMENT_KEYS]
        if "id" not in item:
            ck.err(kp, "missing key 'id'; expected a short element identifier such as 'east-stair'")
        eid = ck.ident(item["id"], kp + ("id",)) if "id" in item else None
        if len(kinds) != 1:
            ck.err(kp, f"found {', '.join(map(str, kinds)) or 'no element type'}; expected exactly one element "
                   f"type ({', '.join(ELEMENTS)}) beside {', '.join(sorted(NAMED_ELEMENT_KEYS))}")
            continue
        element = _element(ck, {kinds[0]: item[kinds[0]]}, kp)
        upstream = item.get("upstream", [])
        if not isinstance(upstream, list) or not all(isinstance(x, (str, int)) and not isinstance(x, bool)
                                                     for x in upstream):
            ck.err(kp + ("upstream",), f"found {_show(upstream)}; expected a list of route ids whose flow is "
                   "already in the element")
            upstream = []
        if eid is not None and element is None:
            broken.add(eid)                # its own problems are reported; routes using it are not re-flagged
        if eid is None or element is None:
            continue
        if eid in out:
            ck.err(kp + ("id",), f"duplicate element id '{eid}'; expected unique ids")
            continue
        element["id"] = eid
        out[eid] = NamedElement(eid, element, [str(x) for x in upstream], ck.doc.where(kp))
    return out, broken


def _check_upstream(ck, named: dict[str, NamedElement], routes: list[RouteSpec]) -> None:
    """Every named element is used; `upstream` names its users; shared elements keep one order."""
    ids = [r.id for r in routes]
    for i, (eid, el) in enumerate(named.items()):
        users = [r.id for r in routes if any(e.get("id") == eid for e in r.path)]
        if not users:
            ck.warn(("elements", i), f"element '{eid}' is not used by any route's path")
        kp = ("elements", list(named).index(eid), "upstream")
        for j, rid in enumerate(el.upstream):
            if rid not in users:
                ck.err(kp + (j,), f"route '{rid}' does not use element '{eid}'; expected one of "
                       f"{', '.join(users) or '(no route uses it)'}{did_you_mean(rid, users or ids)}")
        if el.upstream and users and set(users) <= set(el.upstream):
            # with every user upstream nobody receives "the capacity left over": the merge
            # would fall back to first come, first served while the report says they keep their flow
            ck.err(kp, f"upstream names every route that uses element '{eid}' ({', '.join(users)}); expected "
                   "at least one route left behind, which receives the capacity the upstream routes leave "
                   "(or no upstream: first come, first served)")
    for a_i, a in enumerate(routes):
        for b in routes[a_i + 1:]:
            if a.scenarios and b.scenarios and not set(a.scenarios) & set(b.scenarios):
                continue
            order_a = [e["id"] for e in a.path if e.get("id")]
            common = [x for x in order_a if any(e.get("id") == x for e in b.path)]
            order_b = [e["id"] for e in b.path if e.get("id") in common]
            if common != order_b:
                ck.err(("egress", ids.index(b.id), "path"), f"route '{b.id}' uses the shared elements "
                       f"{', '.join(order_b)} in another order than route '{a.id}' ({', '.join(common)}); "
                       "expected one order, as people flow from one into the next")


def _detection(ck, value, kp, covered, loc_ids):
    if isinstance(value, dict) and len(value) == 1 and next(iter(value)) in ("heat", "smoke"):
        kind, spec = next(iter(value.items()))
        allowed = {"location", "rti", "activation", "velocity"} if kind == "heat" else \
            {"location", "extinction", "optical_density", "obscuration"}
        if not ck.keys(spec, kp + (kind,), allowed, f"a {kind}-detection rule"):
            return None
        lid = spec.get("location")
        if lid is None:
            ck.err(kp + (kind,), "missing 'location'; expected the id of the location at the detector")
            return None
        rule = DetectorRule(kind, str(lid), where=ck.doc.where(kp + (kind,)))
        for s in covered:
            if s not in loc_ids:
                continue
            loc = loc_ids[s].get(str(lid))
            if loc is None:
                known = sorted(loc_ids[s])
                ck.err(kp + (kind, "location"), f"location '{lid}' does not exist in scenario {s}; expected one "
                       f"of {', '.join(known)}{did_you_mean(lid, known)}")
                continue
            need = ["temperature"] if kind == "heat" else []
            if kind == "heat" and "velocity" in spec and "velocity" in loc.series:
                ck.err(kp + (kind, "velocity"), f"the rule gives a constant velocity and location '{lid}' in scenario "
                       f"{s} has a 'velocity' series ({loc.series['velocity'].where}); which one the RTI model "
                       "should use is not decided: expected one of them, remove the other")
            if kind == "heat" and "velocity" not in spec and "velocity" not in loc.series:
                ck.err(kp + (kind,), f"location '{lid}' in scenario {s} has no 'velocity' series and the rule "
                       "gives no constant 'velocity'; expected one of them for the RTI model")
            if kind == "smoke" and not any(k in loc.series for k in SMOKE_KEYS):
                ck.err(kp + (kind, "location"), f"location '{lid}' in scenario {s} has no smoke series "
                       f"({', '.join(SMOKE_KEYS)}); expected one for smoke detection")
            for k in need:
                if k not in loc.series:
                    ck.err(kp + (kind, "location"), f"location '{lid}' in scenario {s} has no '{k}' series; "
                           f"expected one for {kind} detection")
        if kind == "heat":
            for k in ("rti", "activation"):
                if k not in spec:
                    ck.err(kp + (kind,), f"missing '{k}'; expected rti (m^0.5 s^0.5) and activation temperature")
            if "rti" in spec:
                rule.rti = ck.quantity(spec["rti"], kp + (kind, "rti"), "rti", positive=True,
                                       default_unit="m^0.5*s^0.5") or 0.0
            if "activation" in spec:
                rule.activation_c = ck.quantity(spec["activation"], kp + (kind, "activation"), "temperature") or 0.0
                rule.activation_where = ck.doc.where(kp + (kind, "activation"))
            if "velocity" in spec:
                rule.velocity_m_s = ck.quantity(spec["velocity"], kp + (kind, "velocity"), "velocity", positive=True)
        else:
            given = [k for k in ("extinction", "optical_density", "obscuration") if k in spec]
            if len(given) != 1:
                ck.err(kp + (kind,), "expected exactly one threshold: extinction (1/m), optical_density (1/m) or "
                       "obscuration (percent/m or percent/ft)")
                return rule
            k = given[0]
            rule.threshold_text = f"{k} {spec[k]}"
            if k == "obscuration":
                try:
                    frac, length_m = parse_obscuration(spec[k])
                except UnitProblem as exc:
                    ck.err(kp + (kind, k), str(exc))
                else:
                    from .units import obscuration_to_extinction
                    # Percent obscuration O over a path l: K = -ln(1 - O) / l [1/m], Beer-Lambert
                    # (the one conversion the series use too, units.obscuration_to_extinction)
                    rule.extinction_per_m = float(obscuration_to_extinction(100.0 * frac, length_m))
            else:
                v = ck.quantity(spec[k], kp + (kind, k), k, positive=True)
                if v is not None:
                    if k == "optical_density":
                        from .tenability.visibility import extinction_from_optical_density
                        v = float(extinction_from_optical_density(v))
                    rule.extinction_per_m = v
        return rule
    return ck.distribution(value, kp, "a detection time, a distribution, or a {heat: ...} / {smoke: ...} rule")


def _path(ck, value, kp, named: dict | None = None, broken: set[str] | None = None) -> list[dict]:
    if not isinstance(value, list) or not value:
        ck.err(kp, f"found {_show(value)}; expected a list of path elements ({', '.join(ELEMENTS)}, or "
               "{element: <id>} for a named element)")
        return []
    named = named or {}
    out = []
    for j, el in enumerate(value):
        ekp = kp + (j,)
        if isinstance(el, dict) and "element" in el:
            ref = el["element"]
            if len(el) != 1:
                ck.err(ekp, f"found {_show(el)}; expected only {{element: <id>}} (say 'at' and 'upstream' on "
                       "the element in 'elements:')")
                continue
            if str(ref) in (broken or set()):
                continue
            if not isinstance(ref, (str, int)) or isinstance(ref, bool) or str(ref) not in named:
                known = list(named)
                ck.err(ekp + ("element",), f"no element '{ref}' in 'elements:'; expected one of "
                       f"{', '.join(known) or '(none defined)'}{did_you_mean(ref, known)}")
                continue
            if any(e.get("id") == str(ref) for e in out):
                ck.err(ekp + ("element",), f"element '{ref}' is used twice on this route; expected once")
                continue
            out.append(dict(named[str(ref)].element))
            continue
        element = _element(ck, el, ekp)
        if element is not None:
            out.append(element)
    return out


def _element(ck, el, ekp) -> dict | None:
    """One path element {type: {...}} in internal units, or None (problems recorded)."""
    if not isinstance(el, dict) or len(el) != 1:
        ck.err(ekp, f"found {_show(el)}; expected one element such as {{door: {{width: 0.9 m}}}}")
        return None
    kind, spec = next(iter(el.items()))
    if kind not in ELEMENTS:
        ck.err(ekp + (kind,), f"unknown path element '{kind}'; expected one of {', '.join(ELEMENTS)}"
               f"{did_you_mean(kind, ELEMENTS)}")
        return None
    needed = ELEMENTS[kind]
    allowed = set(needed) | ELEMENT_OPTIONAL | (STAIR_LENGTH_KEYS if kind == "stair" else set())
    if not ck.keys(spec, ekp + (kind,), allowed, f"a {kind}"):
        return None
    vals = {}
    for p in needed:
        if p not in spec:
            ck.err(ekp + (kind,), f"missing '{p}' for the {kind}; expected {', '.join(needed)} with units")
            continue
        vals[p] = ck.quantity(spec[p], ekp + (kind, p), "length", positive=True)
    for p in (ELEMENT_OPTIONAL | STAIR_LENGTH_KEYS) - set(needed) - {"at"}:
        if p in spec:
            vals[p] = ck.quantity(spec[p], ekp + (kind, p), "length", positive=(p != "boundary"))
    if any(v is None for v in vals.values()) or not all(p in vals for p in needed):
        return None
    length, basis = vals.get("length", 0.0), "given"
    if kind == "stair":
        length, basis = _stair_length(ck, spec, vals, ekp + (kind,))
        if length is None:
            return None
        from .egress.movement import STAIR_ROWS
        steepest = max(r["riser_m"] / r["tread_m"] for r in STAIR_ROWS)
        if vals["riser"] / vals["tread"] > steepest + 1e-9:
            rows = "; ".join(f"{r['riser_m'] * 1000:.0f}/{r['tread_m'] * 1000:.0f} mm" for r in STAIR_ROWS)
            ck.err(ekp + (kind,), f"stair {vals['riser'] * 1000:.0f}/{vals['tread'] * 1000:.0f} mm (riser/tread "
                   f"{vals['riser'] / vals['tread']:.3f}) is steeper than every row of the hydraulic method's "
                   f"stair table (rows {rows}; steepest {steepest:.3f}, SFPE Handbook ch. 59); expected a "
                   "riser and tread within the table")
            return None
        if not _stair_geometry(ck, vals, ekp + (kind,), STAIR_ROWS):
            return None
    element = {"type": kind, "length_m": length, "width_m": vals["width"],
               "riser_m": vals.get("riser"), "tread_m": vals.get("tread"), "boundary_m": vals.get("boundary"),
               "length_basis": basis}
    from .egress.movement import effective_width
    try:
        we = effective_width(element["width_m"], kind, element["boundary_m"])
        if we <= 0:
            raise ValueError("no effective width")
    except ValueError as exc:
        ck.err(ekp + (kind, "width"), f"width {spec['width']} leaves no effective width after the boundary "
               f"layers ({exc}); expected a wider element")
        return None
    if element["width_m"] < MIN_PLAUSIBLE_WIDTH_M:
        ck.warn(ekp + (kind, "width"), f"width {spec['width']} is {element['width_m']:.2f} m, narrower than any "
                f"escape {kind} is likely to be ({MIN_PLAUSIBLE_WIDTH_M} m); check the unit (it controls the "
                f"route's flow at {we:.2f} m effective width)")
    if "at" in spec:
        element["at"] = str(spec["at"]) if isinstance(spec["at"], (str, int)) \
            and not isinstance(spec["at"], bool) else None
        element["at_kp"] = ekp + (kind, "at")
        if element["at"] is None:
            ck.err(ekp + (kind, "at"), f"found {_show(spec['at'])}; expected a location id")
        else:
            element["at"] = str(element["at"])
    element["where"] = ck.doc.where(ekp)
    return element


#: A riser or tread more than this beyond the stair table's own span [m] is outside what the
#: table covers (project choice: one inch, the table's step between tread rows; beyond it the
#: hydraulic method's stair rows are extrapolated, and a millimetre or centimetre slip lies far beyond).
STAIR_RANGE_TOLERANCE_M = 0.0254
#: A stair's plan length may be this much shorter than its treads need ((risers - 1) x tread,
#: risers = rise / riser) before riser, tread, rise and plan length are called inconsistent
#: (project choice: rounding of the riser count and nosing overlap).
STAIR_PLAN_SHORTFALL = 0.10
#: A plan length above this multiple of risers x tread is flagged as a likely slip in rise or
#: plan length (project choice: landings of a multi-flight stair rarely double the flights' length).
STAIR_PLAN_EXCESS = 3.0


def _stair_geometry(ck, vals, kp, rows) -> bool:
    """Riser and tread within the stair table's span, and consistent with the stair's own rise and
    plan length when both are given; False (an error recorded) when not."""
    ok = True
    for name, key in (("riser", "riser_m"), ("tread", "tread_m")):
        lo = min(r[key] for r in rows) - STAIR_RANGE_TOLERANCE_M
        hi = max(r[key] for r in rows) + STAIR_RANGE_TOLERANCE_M
        v = vals[name]
        if not lo <= v <= hi:
            span = f"{min(r[key] for r in rows) * 1000:.0f} to {max(r[key] for r in rows) * 1000:.0f} mm"
            ck.err(kp + (name,), f"stair {name} {v * 1000:.4g} mm is outside the hydraulic method's stair table "
                   f"({name}s {span}, SFPE Handbook ch. 59) by more than {STAIR_RANGE_TOLERANCE_M * 1000:.1f} mm; "
                   f"expected a {name} within {lo * 1000:.0f} to {hi * 1000:.0f} mm (check the unit)")
            ok = False
    if not ok or "rise" not in vals or "plan_length" not in vals:
        return ok
    risers = vals["rise"] / vals["riser"]
    need = max(risers - 1.0, 0.0) * vals["tread"]
    if vals["plan_length"] < need * (1 - STAIR_PLAN_SHORTFALL):
        ck.err(kp, f"rise {vals['rise']:g} m / riser {vals['riser'] * 1000:.4g} mm is {risers:.1f} risers, whose "
               f"{max(risers - 1, 0):.1f} treads of {vals['tread'] * 1000:.4g} mm need a plan length of at least "
               f"{need:.2f} m; the plan length is {vals['plan_length']:g} m; expected riser, tread, rise and "
               "plan_length that agree (check their units)")
        return False
    if vals["plan_length"] > STAIR_PLAN_EXCESS * max(risers, 1.0) * vals["tread"]:
        ck.warn(kp, f"plan length {vals['plan_length']:g} m is more than {STAIR_PLAN_EXCESS:g} times the "
                f"{risers:.1f} treads of {vals['tread'] * 1000:.4g} mm that rise {vals['rise']:g} m / riser "
                f"{vals['riser'] * 1000:.4g} mm gives ({risers * vals['tread']:.2f} m); check the rise and the "
                "plan length (landings included?)")
    return True


def _stair_length(ck, spec, vals, kp) -> tuple[float | None, str]:
    """A stair's travel length along its slope: `length`, or from `plan_length` and `rise`."""
    given = [k for k in ("length", "plan_length", "rise") if k in spec]
    if given == ["length"]:
        return vals["length"], "length along the slope, as given"
    if set(given) == {"plan_length", "rise"}:
        plan, rise = vals["plan_length"], vals["rise"]
        slope = (plan ** 2 + rise ** 2) ** 0.5
        return slope, (f"along the slope from plan length {plan:g} m and rise {rise:g} m: "
                       f"sqrt({plan:g}^2 + {rise:g}^2) = {slope:.2f} m")
    ck.err(kp, f"found {', '.join(given) or 'no length'}; expected either 'length' (along the slope, landings "
           "included) or both 'plan_length' and 'rise' (the slope length follows)")
    return None, ""
def data_problems(study: Study, data: dict, samples: int | None = None) -> list[Problem]:
    """Errors only the loaded histories can tell, so that ``validate`` OK means ``run`` works.

    - memory: the run's estimated working set (:mod:`egressmargin.sizing`) against this
      machine's available memory, for ``samples`` (``--samples``) or the study's, or the
      most a verdict may draw (``max_samples``) when more;
    - a heat detector whose activation temperature is at or below the ambient temperature
      (the scenario's ``ambient.temperature``, else the first value of the location's
      temperature series, as the detector model takes it) would respond at time zero.

    ``data`` maps scenario id to its :class:`~egressmargin.histories.ScenarioData`.
    """
    from .sizing import estimate_bytes, memory_problems, occupant_count_bound

    problems: list[Problem] = []
    by_id = {s.id: s for s in study.scenarios}
    for route in study.routes:
        rule = route.detection
        if not isinstance(rule, DetectorRule) or rule.kind != "heat":
            continue
        for sid in route.scenarios or list(by_id):
            d, spec = data.get(sid), by_id.get(sid)
            if d is None or spec is None or rule.location not in d.location_ids:
                continue
            li = d.location_ids.index(rule.location)
            if spec.ambient_temperature_c is not None:
                ambient, source = spec.ambient_temperature_c, f"ambient.temperature of scenario {sid}"
            elif d.has("temperature")[li] and d.series["temperature"].shape[1]:
                ambient = float(d.series["temperature"][li][0])
                source = f"the first temperature at location '{rule.location}' in scenario {sid}"
            else:
                continue
            if rule.activation_c <= ambient:
                problems.append(Problem(rule.activation_where or rule.where,
                                        f"found an activation temperature of {rule.activation_c:g} degC, at or "
                                        f"below the ambient {ambient:g} degC ({source}): the detector would "
                                        "respond at time zero; expected an activation temperature above ambient"))
    drawn = int(samples or study.samples)
    most = int(getattr(study, "max_samples", 0) or 0)

    def shapes_at(n_samples):
        return [(len(d.location_ids), sum(1 for r in study.routes if r.scenarios is None or sid in r.scenarios),
                 len(d.t_s), sum(occupant_count_bound(r.occupants_dist or {"fixed": float(r.occupants)}, n_samples)
                                 for r in study.routes if r.scenarios is None or sid in r.scenarios),
                 _kept_persons(study, sid, n_samples))
                for sid, d in data.items()]
    shapes = shapes_at(drawn)
    # Every scenario keeps its `samples` draws to the end; the extra draws that settle a
    # straddling verdict (up to max_samples) are made for one scenario at a time and dropped.
    memory = memory_problems(drawn, shapes, "")
    key, used, used_shapes = "samples", drawn, shapes
    if not memory and most > drawn and shapes:
        largest = max(shapes_at(most), key=lambda sh: estimate_bytes(most, [sh]))
        memory = memory_problems(most, [largest], "")
        key, used, used_shapes = "max_samples", most, [largest]
    if memory:   # locate the key only when there is something to say (reads the study again)
        occupant_problem = _occupant_memory_problem(study, used, used_shapes, key, samples)
        if occupant_problem is not None:
            problems.append(occupant_problem)
        else:
            where = "--samples (command line)" if samples and key == "samples" else \
                load_located(study.path).where((key,))
            problems += [Problem(where, p.message) for p in memory]
    return problems


def _kept(study: Study, route) -> bool:
    """Whether the route's per-person times are kept for every occupant's exposure."""
    return bool(route.along_route) or getattr(study, "acceptance_basis", "route-aset") != "route-aset"


def _kept_persons(study: Study, sid: str, n_samples: int) -> tuple:
    """(occupants as drawn, path elements) of each route of scenario ``sid`` whose per-person
    times the flow model keeps (:func:`egressmargin.sizing.kept_bytes`). An ensemble scenario
    counts the elements twice: each member's exposure works on a copy of its draws' times
    (``ensemble._take``), up to every draw for a member of large weight."""
    from .sizing import occupant_count_bound

    spec = next((sc for sc in study.scenarios if sc.id == sid), None)
    copies = 2 if spec is not None and getattr(spec, "ensemble", None) else 1
    return tuple((occupant_count_bound(r.occupants_dist or {"fixed": float(r.occupants)}, n_samples),
                  len(r.path) * copies)
                 for r in study.routes if (r.scenarios is None or sid in r.scenarios) and _kept(study, r))


def _occupant_memory_problem(study: Study, n_samples: int, shapes, key: str, cli_samples) -> Problem | None:
    """The memory problem located at the occupant count of the largest route, when the flow
    model's (samples x occupants) arrays are at least half of what the run needs; else None.

    Says the count as drawn (for a distribution its quantile ``1 - 1/(10 samples)``, see
    :func:`~egressmargin.sizing.occupant_count_bound`), the memory needed and available, the
    largest count of that route that fits with everything else unchanged, and the most
    samples that fit with the counts unchanged.
    """
    from .sizing import (BYTES_PER_SAMPLE_OCCUPANT, BYTES_PER_SAMPLE_OCCUPANT_ELEMENT, OCCUPANT_SWEEP,
                         available_memory, estimate_bytes, format_bytes, occupant_count_bound)

    available, total = available_memory()
    need = estimate_bytes(n_samples, shapes)
    occupant_bytes = need - estimate_bytes(n_samples, [sh[:3] for sh in shapes])   # flow model and kept times
    if available is None or not study.routes or occupant_bytes * 2 < need \
            or need - occupant_bytes > available:       # too many samples whatever the counts: say so at samples
        return None
    bounds = {r.id: occupant_count_bound(r.occupants_dist or {"fixed": float(r.occupants)}, n_samples)
              for r in study.routes}
    route = max(study.routes, key=lambda r: bounds[r.id])
    # bytes per occupant of this route: it counts once in every scenario it is assessed on (of those sized)
    n_scen = min(len(shapes), max(1, sum(1 for sc in study.scenarios
                                         if route.scenarios is None or sc.id in route.scenarios)))
    # the route's own per-occupant bytes: the flow model's, and its kept per-person times per element
    b_route = BYTES_PER_SAMPLE_OCCUPANT + (BYTES_PER_SAMPLE_OCCUPANT_ELEMENT * len(route.path)
                                           if _kept(study, route) else 0)
    per_occupant = n_scen * n_samples * b_route * OCCUPANT_SWEEP
    rest = need - n_scen * n_samples * bounds[route.id] * b_route
    fits = max(int((available - rest) // per_occupant), 0)
    while fits > 0 and rest + n_scen * n_samples * b_route * occupant_count_bound(
            {"fixed": float(fits)}, n_samples) > available:       # the bound rounds up: step down to what fits
        fits -= 1
    fixed = estimate_bytes(0, shapes)
    most_samples = max(int((available - fixed) // max(estimate_bytes(1, shapes) - fixed, 1)), 0)
    doc = load_located(study.path)
    index = next((i for i, r in enumerate(doc.data.get("egress") or [])
                  if isinstance(r, dict) and str(r.get("id")) == route.id), None)
    where = doc.where(("egress", index, "occupants")) if index is not None else route.where
    dist = route.occupants_dist or {"fixed": float(route.occupants)}
    if "fixed" in dist:
        count, limit = f"{route.occupants} occupants", f"at most about {fits} occupants on this route"
    else:
        drawn = f"about {round(bounds[route.id] / OCCUPANT_SWEEP):.4g}" if bounds[route.id] < 10 ** 18 \
            else "beyond 1e18"
        count = (f"an occupant count reaching {drawn} (its quantile 1 - 1/(10 x {n_samples}), "
                 f"about the largest of {n_samples} draws)")
        limit = f"a count whose largest draws stay below about {fits} on this route"
    whole = f" ({format_bytes(total)} in all)" if total else ""
    samples_words = "--samples" if cli_samples and key == "samples" else key
    paren = "" if samples_words == "samples" else f" ({samples_words})"
    return Problem(where, f"{count} on route '{route.id}' with {n_samples} samples{paren} need about "
                          f"{format_bytes(need)} of memory: the flow model follows every occupant in every draw "
                          f"(counted 10 % high for the sensitivity sweep)"
                          + (f" and keeps their times at each of the route's {len(route.path)} path elements for "
                             "their exposure" if _kept(study, route) else "")
                          + f"; this machine has "
                          f"{format_bytes(available)} available{whole}; expected {limit}"
                          + (f", or {samples_words} at most about {most_samples} with these counts" if most_samples
                             else " (no number of samples fits these counts)"))
