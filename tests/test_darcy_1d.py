"""1D flow across and along layers against the series and parallel equivalent conductivities.

Source: Darcy's law with the harmonic (series) and arithmetic (parallel) means of layered
conductivity, e.g. Harr, M.E. (1962), Groundwater and Seepage, ch. 1 (exact for 1D flow).
"""

import numpy as np
import pytest

import seepfe


def _column(k1, k2, t1, t2, order):
    # two layers stacked in y, head on top and bottom: flow across the layers (series)
    return {
        "materials": {"a": {"k": k1}, "b": {"k": k2}},
        "zones": [{"name": "lower", "material": "a", "polygon": [[0, 0], [2, 0], [2, t1], [0, t1]]},
                  {"name": "upper", "material": "b", "polygon": [[0, t1], [2, t1], [2, t1 + t2], [0, t1 + t2]]}],
        "boundaries": [{"name": "bottom", "polyline": [[0, 0], [2, 0]], "head": 10.0},
                       {"name": "top", "polyline": [[0, t1 + t2], [2, t1 + t2]], "head": 20.0}],
        "mesh": {"size": 0.5, "order": order},
    }


@pytest.mark.parametrize("order", [1, 2])
def test_series_flow_matches_harmonic_mean(order):
    k1, k2, t1, t2 = 1e-5, 1e-7, 3.0, 1.0
    r = seepfe.solve(_column(k1, k2, t1, t2, order))
    keq = (t1 + t2) / (t1 / k1 + t2 / k2)                      # series (Darcy, exact)
    q = keq * (20.0 - 10.0) / (t1 + t2) * 2.0                   # m3/s per m through a 2 m wide column
    assert r.boundary_flow("top") == pytest.approx(q, rel=1e-9)
    assert r.boundary_flow("bottom") == pytest.approx(-q, rel=1e-9)
    # head at the interface: continuity of flux
    hi = 10.0 + q / 2.0 * t1 / k1
    assert r.head([[1.0, t1]])[0] == pytest.approx(hi, rel=1e-9)


@pytest.mark.parametrize("order", [1, 2])
def test_parallel_flow_matches_arithmetic_mean(order):
    sec = _column(1e-5, 1e-7, 3.0, 1.0, order)
    sec["boundaries"] = [{"name": "left", "polyline": [[0, 0], [0, 4]], "head": 5.0},
                         {"name": "right", "polyline": [[2, 0], [2, 4]], "head": 1.0}]
    # keep the column below the lowest head so it stays saturated (confined flow)
    for z in sec["zones"]:
        z["polygon"] = [[x, y - 10.0] for x, y in z["polygon"]]
    for b in sec["boundaries"]:
        b["polyline"] = [[x, y - 10.0] for x, y in b["polyline"]]
    r = seepfe.solve(sec)
    q = (1e-5 * 3.0 + 1e-7 * 1.0) * (5.0 - 1.0) / 2.0           # parallel (Darcy, exact)
    assert r.boundary_flow("left") == pytest.approx(q, rel=1e-9)
    assert r.balance["relative_error"] < 1e-8
    assert np.allclose(r.head([[1.0, -9.5], [1.0, -6.5]]), 3.0, rtol=1e-9)
