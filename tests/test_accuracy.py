"""The discretisation-error estimate of seepfe.accuracy against a closed form (issue 11).

Harr, M.E. (1962), Groundwater and Seepage, McGraw-Hill, ch. 4: the discharge under a sheet pile in a
pervious layer of finite thickness (tests/harr_exact.py, truncated to the model length with the same method).
The estimate must bracket the true error of the fine solve within a factor 3 either way (the stated
accuracy of the estimator, docs/accuracy in docs/unconfined.md).
"""

import pytest

import harr_exact as hx
import seepfe
from seepfe import accuracy
from test_verify_harr import H, K, L, T, pile_section


@pytest.mark.parametrize("order, size", [(1, 1.0), (2, 2.0)])
def test_estimate_brackets_the_true_error_of_the_sheet_pile_discharge(order, size):
    s = 0.5 * T
    q_exact = K * H * hx.sheet_pile_truncated(s, T, L)
    r = seepfe.solve(pile_section(s, size=size, ratio=0.0, order=order))
    est = accuracy.estimate(r)
    e = est["q:upstream"]
    true = abs(r.boundary_flow("upstream") - q_exact)
    assert e["error_estimate"] > 0
    assert true / 3 <= e["error_estimate"] <= 3 * true, (e, true)
    assert e["value"] == r.boundary_flow("upstream")
    assert set(e) >= {"value", "error_estimate", "relative", "observed_order", "method"}


@pytest.mark.slow
def test_custom_quantities_and_solve_to_accuracy():
    s = 0.5 * T
    sec = pile_section(s, size=4.0, ratio=0.0, order=2)
    r = seepfe.solve(sec)
    est = accuracy.estimate(r, lambda res: {"head below pile": float(res.head([[1.0, -s - 1.0]])[0])})
    assert "head below pile" in est and est["head below pile"]["error_estimate"] is not None
    sec["solver"] = {"accuracy": 0.005}
    r2 = seepfe.solve(sec)
    acc = r2.solver_info["accuracy"]
    assert acc["met"] and acc["achieved"] <= 0.005
    q_exact = K * H * hx.sheet_pile_truncated(s, T, L)
    # the requested accuracy is reached in fact, within the factor 3 of the estimator
    assert abs(r2.boundary_flow("upstream") - q_exact) / q_exact <= 3 * 0.005
