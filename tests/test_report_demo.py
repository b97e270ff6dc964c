"""The bundled demo reads as a submittal should: its routes are fully assessed.

Issue 15 ("less noise"): the demo supplies every series its route locations need, so no
demo verdict is "incomplete", and its detection points say role: detector.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from egressmargin.pipeline import RunOptions, build_results, load

DEMO = Path(__file__).resolve().parents[1] / "demo" / "study.yaml"


@pytest.fixture(scope="module")
def demo_results():
    opts = RunOptions(samples=200, pdf=False, html=False)
    return build_results(load(DEMO, opts), opts)[0]


def test_demo_routes_are_fully_assessed(demo_results):
    for sc in demo_results["scenarios"]:
        locs = {loc["id"]: loc for loc in sc["locations"]}
        for rt in sc["routes"]:
            assert rt["not_assessed"] == [], (sc["id"], rt["id"])
            for lid in rt["exposed_at"]:
                for cid, c in locs[lid]["criteria"].items():
                    assert c["status"] == "assessed", (sc["id"], lid, cid)
                    assert not c.get("missing_series"), (sc["id"], lid, cid, c.get("missing_series"))


def test_demo_detection_points_are_detectors(demo_results):
    for sc in demo_results["scenarios"]:
        roles = {loc["id"]: loc.get("role") for loc in sc["locations"]}
        assert roles["reading-soffit"] == roles["atrium-roof"] == "detector"
        assert sum(1 for r in roles.values() if r == "detector") == 2


def test_demo_scenarios_describe_their_design_fire(demo_results):
    for sc in demo_results["scenarios"]:
        df = sc["design_fire"]
        assert {"growth", "peak_hrr", "sprinklers", "ventilation", "yields"} <= set(df)
