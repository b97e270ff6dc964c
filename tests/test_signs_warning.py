"""The sign type behind the visibility limit is never invisible (issue 16 item 2).

Jin (1978), S = C/K: C = 8 for light-emitting and C = 3 for light-reflecting signs. A set
that leaves the sign type at its default gets a warning; a study that states it does not.
"""

from __future__ import annotations

import numpy as np

from engine_helpers import results_for, write_study


def _study(tmp_path, criteria):
    t = np.arange(0.0, 301.0, 10.0)
    return write_study(tmp_path, t, {"K": ("1/m", 0.002 * t)}, [{"id": "a", "extinction": "K"}], criteria=criteria)


def test_default_sign_type_is_warned(tmp_path):
    res, _ = results_for(_study(tmp_path, "general-2m"))
    assert res["criteria"]["visibility_signs"]["default"] is True
    assert any("exit signs" in w and "light-reflecting" in w for w in res["warnings"])


def test_stated_sign_type_is_not_warned_and_sets_c(tmp_path):
    res, _ = results_for(_study(tmp_path, {"base": "general-2m", "visibility": {"signs": "light-reflecting"}}))
    signs = res["criteria"]["visibility_signs"]
    assert signs == {"signs": "light-reflecting", "sign_constant": 3.0, "default": False}
    assert not any("exit signs" in w for w in res["warnings"])
    # K = 0.002 t reaches C/S = 3/10 = 0.3 1/m at t = 150 s (Jin: S = C/K)
    loc = res["scenarios"][0]["locations"][0]
    assert abs(loc["criteria"]["visibility"]["raw_s"] - 150.0) < 1e-6
