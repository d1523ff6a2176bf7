"""Results kept in the project: read back as plain data only, and refused when they do not fit."""

import numpy as np

from orbitdesk.analyses.basins import BasinResult
from orbitdesk.document.results import pack, unpack


def basin_result():
    return BasinResult("x", np.array([0.0, 1.0]), "y", np.array([2.0]), np.array([[0, -1]]),
                       [{"label": 0, "kind": "limit cycle", "period": 6.283185307179586, "multiplier": float("nan"),
                         "centre": {"x": 0.0, "y": 1e-9}, "share": 0.5}], stroboscopic=False)


def test_records_round_trip_with_nan_as_null():
    data = pack(basin_result())
    assert data["attractors"]["records"][0]["multiplier"] is None  # JSON has no NaN
    back = unpack(BasinResult, data)
    assert back.attractors[0]["period"] == 6.283185307179586 and back.attractors[0]["centre"] == {"x": 0.0, "y": 1e-9}
    np.testing.assert_array_equal(back.labels, [[0, -1]])


def test_records_that_are_not_plain_data_are_refused():
    data = pack(basin_result())
    for bad in ([{"label": 0, "centre": {"x": {"deeper": 1}}}],   # three levels
                [{"label": [0, 1]}],                               # a list inside a record
                [{1: "not a text key"}],
                ["not a record"],
                {"label": 0}):
        data["attractors"] = {"records": bad}
        assert unpack(BasinResult, data) is None, bad
