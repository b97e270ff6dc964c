"""Memory estimate of the per-person times the flow model keeps for every occupant's exposure.

The bytes are the project's own measurement (``bench/memory_per_person.py``, stated beside
``sizing.BYTES_PER_SAMPLE_OCCUPANT_ELEMENT``); these tests check the closed form of the term
and that a study that would not fit because of it is refused with exit 2 before computing.
"""

from __future__ import annotations

import pytest


@pytest.fixture
def small_machine(monkeypatch):
    """This machine with 8 GB available of 16 GB (sizing.available_memory replaced)."""
    from egressmargin import sizing
    monkeypatch.setattr(sizing, "available_memory", lambda: (8_000_000_000, 16_000_000_000))


def test_kept_term_closed_form():
    """S P E x 16 B kept plus E blocks of min(S P, 500 000) float64 x 10 arrays, per kept route."""
    from egressmargin import sizing
    from egressmargin.exposure import PERSON_BLOCK_ELEMENTS

    base = sizing.estimate_bytes(2000, [(2, 1, 60, 44000)])
    kept = sizing.estimate_bytes(2000, [(2, 1, 60, 44000, ((44000, 2),))])
    assert kept - base == 2000 * 44000 * 2 * 16 + 2 * PERSON_BLOCK_ELEMENTS * 8 * 10
    assert sizing.kept_bytes(10, [(3, 4)]) == 10 * 3 * 4 * 16 + 4 * 30 * 8 * 10      # a block smaller than the cap


def _text(kit, extra: str = "", basis: str | None = None) -> str:
    text = kit.study.replace("occupants: 120", "occupants: 40000" + extra).replace(
        "samples: 200", "samples: 2000\nmax_samples: 2000")
    if basis:
        text = text.replace("acceptance: {max_p_fail: 0.05}", f"acceptance: {{max_p_fail: 0.05, basis: {basis}}}")
    return text


def test_a_study_fits_without_the_exposure(kit, make_study, cli, small_machine):
    """40 000 occupants (44 000 as bounded) x 2000 samples x 64 B = 5.6 GB: fits in 8 GB."""
    status, _, err = cli(["validate", make_study(_text(kit))])
    assert status == 0, err


@pytest.mark.parametrize("extra, basis", [("\n    exposure: along-route", None), ("", "occupants")])
def test_kept_times_that_do_not_fit_are_refused_before_computing(kit, make_study, cli, expect_input_error,
                                                                  small_machine, extra, basis):
    """The same study with every occupant's exposure: + 2000 x 44 000 x 3 elements x 16 B = 4.2 GB, over 8 GB.
    validate and run both exit 2 at the occupant count, and run writes nothing."""
    text = _text(kit, extra, basis)
    study = make_study(text)
    line = kit.line_of(text, "occupants:")
    status, _, verr = cli(["validate", study])
    assert status == 2, verr
    err = expect_input_error(study)
    for msg in (verr, err):
        assert f"study.yaml:{line} egress[0].occupants: error: 40000 occupants on route" in msg, msg
        assert "keeps their times at each of the route's 3 path elements" in msg, msg
        assert "expected at most about" in msg


def test_largest_count_that_fits_counts_the_kept_times(kit, make_study, cli, small_machine):
    """The count named as fitting solves estimate_bytes(...) = available with the kept term included."""
    import re
    from egressmargin import sizing

    status, _, err = cli(["validate", make_study(_text(kit, "\n    exposure: along-route"))])
    assert status == 2
    fits = int(re.search(r"expected at most about (\d+) occupants", err).group(1))

    def need(n):
        bound = sizing.occupant_count_bound({"fixed": float(n)}, 2000)
        return sizing.estimate_bytes(2000, [(2, 1, 60, bound, ((bound, 3),))])

    assert need(fits) <= 8e9 < need(fits + 50)
