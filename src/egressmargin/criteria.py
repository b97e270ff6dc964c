"""Tenability criteria sets: bundled YAML files, user files, inline overrides.

A criteria set maps criterion ids to a limit in the internal unit of its quantity plus
the parameters the method needs. Loading checks every key and collects every problem.
"""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass, field
from pathlib import Path

from .errors import InputError, Problem
from .resources import resource_dir
from .tenability.visibility import SIGN_CONSTANTS
from .units import UnitProblem, parse_quantity
from .yamlfile import Located, load_located

#: criterion id -> (quantity of its limit for unit parsing, display unit, direction, words)
CRITERIA: dict[str, tuple[str | None, str, str, str]] = {
    "temperature": ("temperature", "degC", "above", "gas temperature reaches the limit"),
    "visibility": ("length", "m", "below", "visibility falls to the limit"),
    "heat_flux": ("heat_flux", "kW/m^2", "above", "radiant heat flux reaches the limit"),
    "fed_toxic": (None, "-", "above", "fractional effective dose of asphyxiant gases reaches the limit"),
    "fed_heat": (None, "-", "above", "fractional effective dose of heat reaches the limit"),
    "layer_height": ("length", "m", "below", "smoke layer falls to the limit"),
    "fed_hypoxia": (None, "-", "above", "fractional effective dose of low oxygen (hypoxia) reaches the limit"),
    "fec_irritant": (None, "-", "above", "fractional effective concentration of irritant gases reaches the limit"),
}

#: Optional parameters each criterion accepts, with the quantity used to parse them
#: (None: a plain value). Defaults and their sources live with the formulas.
PARAMETERS: dict[str, dict[str, str | None]] = {
    "temperature": {},
    "visibility": {"signs": None, "sign_constant": None, "mass_extinction": "mass_extinction"},
    "heat_flux": {},
    "fed_toxic": {"method": None},
    "fed_heat": {"radiant_threshold": "heat_flux"},
    "layer_height": {},
    "fed_hypoxia": {},
    "fec_irritant": {},
}

#: Limits that must be above zero (a visibility of 0 m has no extinction limit C/S).
POSITIVE_LIMITS = ("visibility", "heat_flux", "layer_height")

#: A gas temperature limit must be above normal room temperature, 20 degC (common
#: practice for the ambient of a building): a limit at or below it is reached before any
#: fire (and one below -273.15 degC is no temperature at all).
TEMPERATURE_LIMIT_FLOOR_C = 20.0

TOXIC_METHODS = ("iso13571", "purser")

#: Parameters whose value is one of a fixed set of words.
CHOICES: dict[str, tuple[str, ...]] = {"method": TOXIC_METHODS, "signs": tuple(SIGN_CONSTANTS)}


@dataclass(frozen=True)
class Criterion:
    """One tenability criterion as applied."""

    id: str
    limit: float                 # internal unit of the quantity (degC, m, kW/m^2, FED -)
    limit_text: str              # as written, e.g. "60 degC"
    unit: str                    # display unit
    params: dict = field(default_factory=dict)
    source: str = ""

    @property
    def direction(self) -> str:
        return CRITERIA[self.id][2]


@dataclass
class CriteriaSet:
    name: str
    description: str
    sources: list[str]
    items: dict[str, Criterion]
    path: Path | None = None
    override: dict | None = None     # set by ``run --criteria``: what was given, what it replaced
    #: True when nobody stated the kind of sign for this study: the visibility criterion
    #: uses the bundled set's light-emitting signs (C = 8), which the report should flag.
    signs_default: bool = True
    #: criteria declared not applicable for this study: criterion id -> the reason given
    #: (``{<criterion>: {not_applicable: "<reason>"}}``); they are not in ``items``.
    not_applicable: dict[str, str] = field(default_factory=dict)
    #: Height above the floor the set's series are meant to be taken at (`height:` of a
    #: criteria file) [m], with its text; None when the set states none.
    height_m: float | None = None
    height_text: str = ""

    @property
    def visibility_signs(self) -> dict | None:
        """The kind of sign the visibility criterion assumes, its constant C, and whether
        that is the bundled default (None without a visibility criterion)."""
        c = self.items.get("visibility")
        if c is None:
            return None
        return {"signs": c.params.get("signs", "light-emitting"), "sign_constant": c.params["sign_constant"],
                "default": self.signs_default}

    def as_results(self) -> dict:
        """The set as applied: limits as numbers in their display unit, with the text as written."""
        applied = {}
        for cid, c in self.items.items():
            entry = {"limit": round(c.limit, 6), "unit": c.unit, "limit_text": c.limit_text, "source": c.source}
            entry.update({k: _plain(v) for k, v in c.params.items()})
            applied[cid] = entry
        out = {"name": self.name, "description": self.description, "sources": list(self.sources),
               "applied": applied}
        if self.visibility_signs is not None:
            out["visibility_signs"] = self.visibility_signs
        if self.override is not None:
            out["override"] = dict(self.override)
        out["not_applicable"] = dict(self.not_applicable)
        if self.height_m is not None:
            out["height_m"] = round(self.height_m, 4)
            out["height_text"] = self.height_text
        return {**out, **{cid: {"limit": round(c.limit, 6), "unit": c.unit} for cid, c in self.items.items()}}


def _plain(v):
    return v if isinstance(v, (int, float, str, bool)) or v is None else str(v)


def bundled_names() -> list[str]:
    """Names of the bundled criteria sets (file stems in ``criteria/``)."""
    return sorted(p.stem for p in resource_dir("criteria").glob("*.yaml"))


def bundled_path(name: str) -> Path:
    return resource_dir("criteria") / f"{name}.yaml"


def _did_you_mean(word: str, options) -> str:
    close = difflib.get_close_matches(str(word), [str(o) for o in options], n=1)
    return f"; did you mean '{close[0]}'?" if close else ""


NOT_APPLICABLE = "not_applicable"


def declared_not_applicable(cid: str, spec, where, problems: list[Problem]) -> str | None:
    """The reason of ``{<criterion>: {not_applicable: "<reason>"}}``, or None when ``spec`` is
    not such a declaration (or a broken one, reported in ``problems``).

    The reason must be a non-empty string, and the declaration stands alone: a limit or a
    parameter beside it would say the criterion both applies and does not (project choice).
    """
    if not isinstance(spec, dict) or NOT_APPLICABLE not in spec:
        return None
    reason = spec[NOT_APPLICABLE]
    others = [k for k in spec if k != NOT_APPLICABLE]
    if others:
        problems.append(Problem(where((others[0],)), f"found '{others[0]}' beside not_applicable for criterion "
                                f"'{cid}'; expected either not_applicable: \"<reason>\" alone, or the criterion's "
                                "limit and parameters without it"))
    if not isinstance(reason, str) or not reason.strip():
        problems.append(Problem(where((NOT_APPLICABLE,)), f"found {reason!r}; expected the reason the criterion "
                                f"'{cid}' does not apply, as text, e.g. not_applicable: \"no halogenated or "
                                "nitrogenous fuel\""))
        return None
    return None if others else reason.strip()


def parse_criterion(cid: str, spec, where, problems: list[Problem], inherited: Criterion | None = None
                    ) -> Criterion | None:
    """Check one criterion mapping and return it in internal units (None if broken)."""
    if not isinstance(spec, dict):
        problems.append(Problem(where(()), f"found {spec!r}; expected a mapping such as {{limit: ...}}, or "
                                f"{{not_applicable: \"<reason>\"}} to leave '{cid}' out"))
        return None
    quantity, unit, _, _ = CRITERIA[cid]
    allowed = {"limit", "source", *PARAMETERS[cid]}
    for key in spec:
        if key not in allowed:
            problems.append(Problem(where((key,)), f"unknown key '{key}' for criterion '{cid}'; expected one of "
                                    f"{', '.join(sorted(allowed))}{_did_you_mean(key, allowed)}"))
    if "limit" not in spec and inherited is not None:
        limit, limit_raw = inherited.limit, inherited.limit_text        # an override keeps the base limit
    else:
        limit_raw = spec.get("limit")
        if limit_raw is None:
            problems.append(Problem(where(()), f"criterion '{cid}' has no 'limit'; expected e.g. limit: "
                                    f"{'0.3' if quantity is None else '60 degC' if cid == 'temperature' else '10 m'}"))
            return None
        try:
            if quantity is None:
                if isinstance(limit_raw, bool) or not isinstance(limit_raw, (int, float)):
                    raise UnitProblem(f"found {limit_raw!r}; expected a plain number (a dose fraction, e.g. 0.3)")
                limit = float(limit_raw)
            else:
                limit = parse_quantity(limit_raw, quantity)
        except UnitProblem as exc:
            problems.append(Problem(where(("limit",)), str(exc)))
            return None
        if not math.isfinite(limit):
            problems.append(Problem(where(("limit",)), f"found {limit_raw!r}; expected a finite limit"))
            return None
        if cid == "temperature" and not limit > TEMPERATURE_LIMIT_FLOOR_C:
            problems.append(Problem(where(("limit",)), f"found {limit_raw!r} ({limit:g} degC); expected a gas "
                                    f"temperature limit above room temperature ({TEMPERATURE_LIMIT_FLOOR_C:g} degC), "
                                    "e.g. 60 degC: a limit at or below it is reached before any fire"))
            return None
        if (quantity is None or cid in POSITIVE_LIMITS) and not limit > 0:
            kind = cid if quantity is not None else ("concentration (FEC)" if cid == "fec_irritant" else "dose")
            problems.append(Problem(where(("limit",)), f"found {limit_raw!r}; expected a {kind} limit above 0"))
            return None
    params = dict(inherited.params) if inherited else {}
    for key, pq in PARAMETERS[cid].items():
        if key not in spec:
            continue
        value = spec[key]
        if key in CHOICES:
            if value not in CHOICES[key]:
                problems.append(Problem(where((key,)), f"found {value!r}; expected one of "
                                        f"{', '.join(CHOICES[key])}{_did_you_mean(value, CHOICES[key])}"))
                continue
            params[key] = value
        elif key == "sign_constant":
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) \
                    or value <= 0:
                problems.append(Problem(where((key,)), f"found {value!r}; expected a finite positive number "
                                        "(8 for light-emitting, 3 for light-reflecting signs)"))
                continue
            params[key] = float(value)
        else:
            try:
                params[key] = parse_quantity(value, pq)
            except UnitProblem as exc:
                problems.append(Problem(where((key,)), str(exc)))
                continue
            if not math.isfinite(params[key]) or params[key] < 0 or (key == "mass_extinction" and params[key] == 0):
                problems.append(Problem(where((key,)), f"found {value!r}; expected a finite value above 0"))
                del params[key]
    if cid == "visibility":
        _settle_signs(spec, params, where, problems)
    if cid == "fed_toxic":
        params.setdefault("method", "iso13571")
    source = spec.get("source", inherited.source if inherited else "")
    return Criterion(cid, limit, str(limit_raw), unit, params, str(source))


def _settle_signs(spec: dict, params: dict, where, problems: list[Problem]) -> None:
    """Make ``signs`` and ``sign_constant`` agree: C = 8 light-emitting, 3 light-reflecting (Jin).

    A spec that states ``signs`` fixes the constant; one that states a number only is
    "light-emitting"/"light-reflecting" when the number is Jin's, else "custom"; both
    given and disagreeing is an input error. Nothing stated: inherited, else
    light-emitting (C = 8).
    """
    if "signs" in spec and "sign_constant" in spec and "signs" in params and "sign_constant" in params:
        if SIGN_CONSTANTS[params["signs"]] != params["sign_constant"]:
            problems.append(Problem(where(("sign_constant",)), f"found sign_constant {params['sign_constant']:g} "
                                    f"with signs: {params['signs']} (C = {SIGN_CONSTANTS[params['signs']]:g}, Jin "
                                    "1978); expected one of the two, or values that agree"))
    if "signs" in spec and "signs" in params:
        params["sign_constant"] = SIGN_CONSTANTS[params["signs"]]
    elif "sign_constant" in spec and "sign_constant" in params:
        named = [k for k, v in SIGN_CONSTANTS.items() if v == params["sign_constant"]]
        params["signs"] = named[0] if named else "custom"
    params.setdefault("sign_constant", SIGN_CONSTANTS["light-emitting"])
    params.setdefault("signs", "light-emitting")


def _states_signs(spec) -> bool:
    """True when a visibility criterion's mapping states the kind of sign or its constant."""
    return isinstance(spec, dict) and bool({"signs", "sign_constant"} & set(spec))


def load_criteria_file(path: Path) -> CriteriaSet:
    doc = load_located(path)
    problems: list[Problem] = []
    cset = criteria_from_document(doc, problems)
    if problems or cset is None:
        raise InputError(problems)
    return cset


def criteria_from_document(doc: Located, problems: list[Problem]) -> CriteriaSet | None:
    data = doc.data
    if not isinstance(data, dict):
        problems.append(Problem(doc.where(()), "expected a mapping with name, description, sources, criteria"))
        return None
    allowed = {"name", "description", "sources", "criteria", "height"}
    for key in data:
        if key not in allowed:
            problems.append(Problem(doc.where((key,)), f"unknown key '{key}'; expected one of "
                                    f"{', '.join(sorted(allowed))}{_did_you_mean(key, allowed)}"))
    sources = data.get("sources")
    if not isinstance(sources, list) or not sources:
        problems.append(Problem(doc.where(("sources",)), "expected a non-empty list of sources "
                                "(published documents, or 'common practice')"))
        sources = []
    crit = data.get("criteria")
    if not isinstance(crit, dict) or not crit:
        problems.append(Problem(doc.where(("criteria",)), "expected a mapping of criterion ids to "
                                f"{{limit: ...}}; ids: {', '.join(CRITERIA)}"))
        return None
    items = {}
    not_applicable: dict[str, str] = {}
    for cid, spec in crit.items():
        if cid not in CRITERIA:
            problems.append(Problem(doc.where(("criteria", cid)), f"unknown criterion '{cid}'; expected one of "
                                    f"{', '.join(CRITERIA)}{_did_you_mean(cid, CRITERIA)}"))
            continue
        if isinstance(spec, dict) and NOT_APPLICABLE in spec:
            reason = declared_not_applicable(cid, spec, lambda kp, cid=cid: doc.where(("criteria", cid) + tuple(kp)),
                                             problems)
            if reason is not None:
                not_applicable[cid] = reason
            continue
        c = parse_criterion(cid, spec, lambda kp, cid=cid: doc.where(("criteria", cid) + tuple(kp)), problems)
        if c:
            items[cid] = c
    stated = _states_signs(crit.get("visibility"))
    height_m, height_text = _set_height(doc, data.get("height"), problems)
    return CriteriaSet(str(data.get("name", doc.path.stem)), str(data.get("description", "")),
                       [str(s) for s in sources], items, doc.path, signs_default=not stated,
                       not_applicable=not_applicable, height_m=height_m, height_text=height_text)


def _set_height(doc, value, problems: list[Problem]) -> tuple[float | None, str]:
    """The optional `height:` of a criteria file: `{value: 2 m, basis: <text>}` or `2 m`.

    The height above the floor at which the set's series are meant to be taken (a
    location at another height gets a note in the report)."""
    if value is None:
        return None, ""
    text, basis = (value.get("value"), value.get("basis")) if isinstance(value, dict) else (value, None)
    from .units import UnitProblem, parse_quantity
    try:
        h = parse_quantity(text, "length")
    except UnitProblem as exc:
        problems.append(Problem(doc.where(("height",)), str(exc)))
        return None, ""
    if not h > 0:
        problems.append(Problem(doc.where(("height",)), f"found {text!r}; expected a height above zero, e.g. 2 m"))
        return None, ""
    return float(h), str(text) + (f" ({basis})" if basis else "")


def resolve_criteria(value, where, base_dir: Path, problems: list[Problem]) -> CriteriaSet | None:
    """The study's ``criteria:`` value: a bundled name, a file path, or an inline mapping.

    ``where(key_path)`` locates keys below ``criteria`` for messages.
    """
    names = bundled_names()
    if isinstance(value, str):
        return _named_or_file(value, where(()), base_dir, names, problems)
    if not isinstance(value, dict):
        problems.append(Problem(where(()), f"found {value!r}; expected a bundled set name "
                                f"({', '.join(names)}), a file path, or a mapping with 'base'"))
        return None
    allowed = {"base", "only", *CRITERIA}
    for key in value:
        if key not in allowed:
            problems.append(Problem(where((key,)), f"unknown key '{key}'; expected 'base', 'only' or a criterion id "
                                    f"({', '.join(CRITERIA)}){_did_you_mean(key, allowed)}"))
    base = None
    if "base" in value:
        base = _named_or_file(str(value["base"]), where(("base",)), base_dir, names, problems)
        if base is None:
            return None
    items = dict(base.items) if base else {}
    not_applicable = dict(base.not_applicable) if base else {}
    for cid in CRITERIA:
        if cid in value and isinstance(value[cid], dict) and NOT_APPLICABLE in value[cid]:
            reason = declared_not_applicable(cid, value[cid], lambda kp, cid=cid: where((cid,) + tuple(kp)), problems)
            if reason is not None:
                items.pop(cid, None)
                not_applicable[cid] = reason
            continue
        if cid in value:
            not_applicable.pop(cid, None)          # stated again in full: it applies after all
            c = parse_criterion(cid, value[cid], lambda kp, cid=cid: where((cid,) + tuple(kp)), problems,
                                inherited=items.get(cid))
            if c:
                spec = value[cid] if isinstance(value[cid], dict) else {}
                changed = [k for k in spec if k != "source"]
                if "source" not in spec and (c.source == "" or changed):
                    inherited = items.get(cid)
                    note = "set in the study file" + (f" (overrides {base.name}: {', '.join(changed)})"
                                                      if base and changed else "")
                    c = Criterion(c.id, c.limit, c.limit_text, c.unit, c.params,
                                  f"{inherited.source}; {note}" if inherited and inherited.source else note)
                items[cid] = c
    if "only" in value:
        only = value["only"]
        if not isinstance(only, list) or not all(isinstance(x, str) for x in only) or not only:
            problems.append(Problem(where(("only",)), f"found {only!r}; expected a non-empty list of criterion "
                                    f"ids, e.g. [{', '.join(list(items)[:2]) or 'temperature, visibility'}]"))
        else:
            if not items and not base:
                problems.append(Problem(where(("only",)), "'only' needs criteria to choose from; expected a "
                                        f"'base' set too, e.g. base: {names[0] if names else 'general-2m'}"))
                only = []
            for i, cid in enumerate(only):
                if cid in not_applicable:
                    problems.append(Problem(where(("only", i)), f"'{cid}' is declared not applicable "
                                            f"({not_applicable[cid]}); expected it in 'only' or not_applicable, "
                                            "not both"))
                elif cid not in items:
                    problems.append(Problem(where(("only", i)), f"'{cid}' is not a criterion of this set; expected "
                                            f"one of {', '.join(items)}{_did_you_mean(cid, items)}"))
            items = {k: v for k, v in items.items() if k in only}
    name = base.name + " (modified in the study)" if base else "set in the study file"
    stated = _states_signs(value.get("visibility"))
    return CriteriaSet(name, base.description if base else "Criteria given in the study file.",
                       list(base.sources) if base else ["as stated in the study file"], items,
                       base.path if base else None,
                       signs_default=not stated and (base.signs_default if base else True),
                       not_applicable=not_applicable,
                       height_m=base.height_m if base else None, height_text=base.height_text if base else "")


def override_criteria(text: str, study_value, problems: list[Problem],
                      base_dir: Path | None = None) -> CriteriaSet | None:
    """The criteria set of ``run --criteria NAME|FILE``, replacing the study's ``criteria:``.

    ``text`` is a bundled set name or a criteria file path relative to ``base_dir`` (the
    current folder by default, as a shell user expects). The set records the option and
    what it replaced (``override`` in results.json), so the replacement is never silent.
    """
    base_dir = Path.cwd() if base_dir is None else Path(base_dir)
    cset = _named_or_file(text, "--criteria", base_dir, bundled_names(), problems)
    if cset is None:
        return None
    cset.override = {"option": f"--criteria {text}", "study_criteria": describe_criteria_value(study_value)}
    return cset


def describe_criteria_value(value) -> str:
    """A study's ``criteria:`` value in a few words (for the record of an override)."""
    if value is None:
        return "none given"
    if isinstance(value, dict):
        base = value.get("base")
        return f"an inline set (base {base})" if base else "an inline set"
    return str(value)


def _named_or_file(text: str, where: str, base_dir: Path, names: list[str], problems) -> CriteriaSet | None:
    if text in names:
        path = bundled_path(text)
    else:
        path = (base_dir / text)
        if not path.is_file():
            problems.append(Problem(where, f"'{text}' is neither a bundled criteria set ({', '.join(names)}) nor an "
                                    f"existing file{_did_you_mean(text, names)}"))
            return None
    try:
        cset = load_criteria_file(path)
    except InputError as exc:
        problems.extend(exc.problems)
        return None
    if text in names:
        cset.signs_default = True         # a bundled set's signs are an assumption, not the user's choice
    return cset
