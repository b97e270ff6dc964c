"""The batched sensitivity sweep (every setting a draw of one flow run per scenario)
gives exactly the tables of the one-setting-at-a-time computation it replaced.

The reference below is that earlier computation, kept verbatim as a slow check: one
call of the whole flow model per swept setting, with one draw. The study is synthetic
(invented for the test): three routes, a named element with a stream already in it
(priority merge), a named door shared first come first served, model-error factors
that move a smoke detector, uncertain parameters, premovement across occupants, and a
width sweep that moves the controlling element to the next corridor.
"""

from __future__ import annotations

import json

import numpy as np

from engine_helpers import results_for, write_study
from egressmargin import assess
from egressmargin.egress import distributions as dist
from egressmargin.egress.movement import element_properties
from egressmargin.stats import rounded
from egressmargin.study import DetectorRule


def _one_at_a_time(route, routes, prep, sweep_factors, sweep_index, sweep_loc_aset, labels, named=None):
    """The sensitivity table as computed before batching: one flow run per setting."""
    k = routes.index(route)
    n = len(routes)
    R = len(next(iter(sweep_factors.values()))) if sweep_factors else 1
    a = assess.route_aset(sweep_loc_aset, prep.ids, route.exposed_at)
    censored = ~np.isfinite(a)
    a = np.where(censored, prep.t_s[-1], a)
    rset = assess.scenario_egress(routes, prep, sweep_factors, [assess.EgressDraws.median(R)] * n,
                                  named).routes[route.id].rset
    margin = a - rset
    base = float(margin[0])
    rows = []
    for key, lo, hi in sweep_index:
        rows.append(assess._swing(labels.get(key, key), "p05", "p95", margin[lo], margin[hi]))
    base_f = {key: v[:1] for key, v in sweep_factors.items()}
    a0 = float(a[0])

    def margin_with(quantiles=None, scale=None, width=None) -> float:
        draws = [assess.EgressDraws.median(1) for _ in range(n)]
        for key, u in (quantiles or {}).items():          # this route's input at uniform u
            if key.startswith("premovement."):
                draws[k].parameters[key.split(".", 1)[1]] = np.full(1, u)
            else:
                setattr(draws[k], key, np.full(1, u))
        sc = [None] * n
        sc[k] = scale
        eg = assess.scenario_egress(routes, prep, base_f, draws, named, sc, width)
        return a0 - float(eg.routes[route.id].rset[0])

    low, high, frac, wf = assess.SWEEP_LOW, assess.SWEEP_HIGH, assess.SWEEP_FRACTION, assess.WHAT_IF_FRACTION
    what_if = []            # (label, key) of fixed RSET phases, swept +/-20 % as a what-if
    sweeps = []
    for name, spec in (("detection", route.detection), ("alarm", route.alarm)):
        if isinstance(spec, DetectorRule):
            what_if.append(("smoke detector threshold (extinction coefficient)" if spec.kind == "smoke" else
                            "heat detector activation (temperature rise above ambient)", name))
        elif dist.is_fixed(spec):
            what_if.append((f"{name} time", name))
        else:
            sweeps.append((f"{name} time", {name: low}, {name: high}))
    n_before = len(sweeps)
    pre_plain = dist.with_parameters(route.premovement, {p: dist.median(sub) for p, sub in
                                                         dist.parameter_specs(route.premovement).items()})
    if not route.premovement_across and not dist.is_fixed(pre_plain):
        sweeps.append(("premovement time", {"premovement": low}, {"premovement": high}))
    for p, sub in dist.parameter_specs(route.premovement).items():
        if not dist.is_fixed(sub):
            sweeps.append((f"premovement {p}", {f"premovement.{p}": low}, {f"premovement.{p}": high}))
    if len(sweeps) == n_before:
        what_if.append(("premovement across occupants (scaled)" if route.premovement_across else
                        "premovement time", "premovement"))
    for label, key, spec in (("occupant count", "occupants", route.occupants_dist or {"fixed": 1.0}),
                             ("walking speed", "speed_factor", route.speed_factor),
                             ("flow capacity", "flow_factor", route.flow_factor)):
        if dist.is_fixed(spec):
            rows.append(assess._swing(label, "-10 %", "+10 %", margin_with(scale={key: 1 - frac}),
                                      margin_with(scale={key: 1 + frac}), "what-if"))
        else:
            sweeps.append((label, {key: low}, {key: high}))
    for label, key in what_if:
        rows.append(assess._swing(label, "-20 %", "+20 %", margin_with(scale={key: 1 - wf}),
                                  margin_with(scale={key: 1 + wf}), "what-if"))
    for label, lo_q, hi_q in sweeps:
        rows.append(assess._swing(label, "p05", "p95", margin_with(quantiles=lo_q), margin_with(quantiles=hi_q)))
    ctrl = int(np.argmin([element_properties(e)["capacity_p_s"] for e in route.path]))
    node = assess._node(route, ctrl, route.path[ctrl])
    rows.append(assess._swing(f"effective width of element {ctrl + 1} ({route.path[ctrl]['type']})", "-10 %",
                              "+10 %", margin_with(width={node: 1 - frac}), margin_with(width={node: 1 + frac}),
                              "what-if"))
    rows.sort(key=lambda r: -(r["swing_s"] if r["swing_s"] is not None else np.inf))
    return [dict(r, base_margin_s=rounded(base, 2), lower_bound=bool(censored.any())) for r in rows]


def _reference(routes, prep, sweep_factors, sweep_index, sweep_loc_aset, labels, named=None, only=None):
    return {r.id: _one_at_a_time(r, routes, prep, sweep_factors, sweep_index, sweep_loc_aset, labels, named)
            for r in routes if only is None or r.id in only}


def _study(tmp_path):
    t = np.arange(0.0, 901.0, 5.0)
    cols = {"T": ("degC", 20 + 0.15 * t), "K": ("1/m", 0.0004 * t), "CO": ("ppm", np.minimum(3 * t, 1500.0))}
    locs = [{"id": "hall", "temperature": "T", "extinction": "K", "co": "CO"},
            {"id": "stair", "temperature": "T", "co": "CO"}]
    unc = {"source": "synthetic, invented for the test", "distribution": "lognormal",
           "quantities": {"temperature": {"bias": 1.05, "sigma_model": 0.1},
                          "extinction": {"bias": 1.2, "sigma_model": 0.3},
                          "co": {"bias": 1.1, "sigma_model": 0.2}}}
    upper = {"id": "upper", "occupants": 90, "detection": {"smoke": {"location": "hall", "extinction": "0.1 1/m"}},
             "alarm": {"uniform": {"low": "10 s", "high": "40 s"}},
             "premovement": {"lognormal": {"median": {"uniform": {"low": "40 s", "high": "80 s"}}, "p95": "200 s"}},
             "speed_factor": {"lognormal": {"median": 1.0, "p95": 1.2}},
             "path": [{"corridor": {"length": "20 m", "width": "1.0 m"}},
                      {"corridor": {"length": "15 m", "width": "1.05 m"}},
                      {"element": "main-stair"}, {"element": "exit-door"}],
             "exposed_at": ["hall", "stair"]}
    lower = {"id": "lower", "occupants": {"uniform": {"low": 40, "high": 120}},
             "detection": {"normal": {"mean": "60 s", "sd": "15 s"}}, "alarm": "20 s",
             "premovement": {"across_occupants": {"triangular": {"low": "20 s", "mode": "60 s", "high": "180 s"}}},
             "flow_factor": {"uniform": {"low": 0.8, "high": 1.1}},
             "path": [{"corridor": {"length": "10 m", "width": "2 m"}}, {"element": "main-stair"},
                      {"element": "exit-door"}],
             "exposed_at": ["stair"]}
    side = {"id": "side", "occupants": 30, "detection": "45 s", "alarm": "0 s", "premovement": "60 s",
            "path": [{"door": {"width": "0.9 m"}}, {"element": "exit-door"}], "exposed_at": ["hall"]}
    elements = [{"id": "main-stair", "upstream": ["upper"],
                 "stair": {"length": "12 m", "width": "1.2 m", "riser": "178 mm", "tread": "279 mm"}},
                {"id": "exit-door", "door": {"width": "1.0 m"}}]
    return write_study(tmp_path, t, cols, locs, routes=[upper, lower, side], uncertainty=unc, samples=300,
                       extra={"elements": elements})


def test_batched_sensitivity_equals_one_setting_at_a_time(tmp_path, monkeypatch):
    path = _study(tmp_path)
    flows, plain = [], assess.scenario_egress

    def recording(*args, **kw):
        out = plain(*args, **kw)
        flows.append(out.routes["upper"].flow.controlling)
        return out

    monkeypatch.setattr(assess, "scenario_egress", recording)
    batched, _ = results_for(path)
    monkeypatch.setattr(assess, "scenario_egress", plain)
    # the width sweep of corridor 1 hands control to corridor 2 in its +10 % draw only
    (per_draw,) = [c for c in flows if isinstance(c, np.ndarray)]
    assert set(per_draw.tolist()) == {0, 1} and int(np.sum(per_draw == 1)) == 1
    monkeypatch.setattr(assess, "scenario_sensitivity", _reference)
    reference, _ = results_for(path)
    routes = batched["scenarios"][0]["routes"]
    for got, want in zip(routes, reference["scenarios"][0]["routes"]):
        assert got["sensitivity"] == want["sensitivity"], got["id"]
    # the whole results.json too: nothing else depends on how the sweep is run
    assert json.dumps(batched, sort_keys=True) == json.dumps(reference, sort_keys=True)
    # the study exercises what it is meant to: factor rows, parameters, scale and width rows
    names = {r["id"]: [s["input"] for s in r["sensitivity"]] for r in routes}
    assert "model error: smoke (extinction)" in names["upper"] and "premovement median" in names["upper"]
    assert "occupant count" in names["lower"] and "flow capacity" in names["lower"]
    assert "effective width of element 1 (corridor)" in names["upper"]
    assert any(s["swing_s"] for r in routes for s in r["sensitivity"] if s["input"].startswith("effective width"))
    # every RSET phase is in every table (issue 21): fixed ones as what-if rows
    assert "alarm time" in names["lower"] and "premovement across occupants (scaled)" in names["lower"]
    assert {"detection time", "alarm time", "premovement time"} <= set(names["side"])
    assert "smoke detector threshold (extinction coefficient)" in names["upper"]
    kinds = {s["input"]: s["kind"] for s in routes[2]["sensitivity"]}
    assert kinds["detection time"] == "what-if" and kinds["effective width of element 1 (door)"] == "what-if"
    assert {s["kind"] for s in routes[0]["sensitivity"] if s["input"].startswith("model error")} == {"distribution"}


def test_per_draw_width_moves_the_controlling_element():
    """The +10 % width row of the upper route: corridor 1 (1.0 m: We 0.6 m, 0.78
    persons/s; SFPE Handbook 5th ed. ch. 59 boundary layers 0.2 m a side and 1.3
    persons/(s m), from memory, as in egress/movement.py) passes 0.858 persons/s, more
    than corridor 2 (1.05 m: We 0.65 m, 0.845 persons/s), so corridor 2 controls in
    that draw only."""
    from egressmargin.egress.flow import NetElement, NetRoute

    caps = np.array([0.78 * 0.9, 0.78, 0.78 * 1.1])
    route = NetRoute("r", np.zeros((3, 2)), np.array([2, 2, 2]),
                     (NetElement("a", 20.0, 1.4, caps / 1.3, caps), NetElement("b", 15.0, 1.4, 0.65, 0.845)),
                     np.ones(3), np.ones(3))
    assert route.controlling.tolist() == [0, 0, 1]
    scalar = NetRoute("r", np.zeros((1, 2)), np.array([2]),
                      (NetElement("a", 20.0, 1.4, 0.6, 0.78), NetElement("b", 15.0, 1.4, 0.65, 0.845)),
                      np.ones(1), np.ones(1))
    assert scalar.controlling == 0
