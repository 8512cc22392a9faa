"""Confined flow under a sheet pile and under a flat floor on a pervious layer of finite thickness,
against the conformal-mapping solutions with complete elliptic integrals.

Source: Harr, M.E. (1962), Groundwater and Seepage, McGraw-Hill, ch. 4: q / (k H) = K(lam) / (2 K(lam'))
with lam = cos(pi s / 2T) for a sheet pile of penetration s, and lam = sech(pi b / 4T) for a floor of
width b, in a layer of thickness T over an impervious base.  The derivation, and the exact solution of
the truncated model (length 2 L, no-flow ends) with Jacobi's sn, are in tests/harr_exact.py.

Truncation: the models are 2 L = 8 T long.  The exact discharge of the truncated model differs from
the infinite layer's by less than 1e-5 relative here (measured with harr_exact: 6.4e-6 for s/T = 0.5
at L = 4 T, falling about 500-fold for every 2 T of extra length), far below the finite-element
errors below; the tests compare with the truncated solution anyway, so truncation does not enter.

Tolerances: the discharge error of a conforming FE model driven by prescribed heads is one-signed
(q_FE >= q: the FE solution minimises the dissipation over a smaller space; Strang, G. and Fix, G.
(1973), An Analysis of the Finite Element Method, ch. 1, from memory) and, with the r^(1/2)
singularity at the pile tip or floor edge, falls like h under uniform refinement (measured:
0.071 -> 0.043 -> 0.021 for P1 at h = 2, 1, 0.5 m without refinement).  With the tip refined to
h / 50 the measured errors at h = 1 m (T = 10 m) are 1.8e-3 to 4.5e-3 (P1) and 1.3e-4 to 3.1e-4 (P2)
over the cases below; the tolerances are about twice the largest (8e-3 and 6e-4) and the errors must
be positive.  Balance: 1e-13 or better in every case.
"""

import numpy as np
import pytest

import seepfe

import harr_exact as hx

T, L, H, K = 10.0, 40.0, 3.0, 2e-5
TOL = {1: 8e-3, 2: 6e-4}


def pile_section(s, size=1.0, ratio=0.02, order=2, k=None):
    mat = k or {"k": K}
    return {"title": "sheet pile in a pervious layer (verification)",
            "materials": {"sand": mat},
            "zones": [{"name": "layer", "material": "sand", "polygon": [[-L, -T], [L, -T], [L, 0], [-L, 0]]}],
            "boundaries": [{"name": "upstream", "polyline": [[-L, 0], [0, 0]], "head": H},
                           {"name": "downstream", "polyline": [[0, 0], [L, 0]], "head": 0.0}],
            "barriers": [{"name": "sheet pile", "polyline": [[0, 0], [0, -s]]}],
            "mesh": {"size": size, "order": order,
                     "refine": [{"point": [0, -s], "size": size * ratio}] if ratio else []}}


def floor_section(b, size=1.0, ratio=0.02, order=2):
    return {"title": "flat floor on a pervious layer (verification)",
            "materials": {"sand": {"k": K}},
            "zones": [{"name": "layer", "material": "sand", "polygon": [[-L, -T], [L, -T], [L, 0], [-L, 0]]}],
            "boundaries": [{"name": "upstream", "polyline": [[-L, 0], [-b / 2, 0]], "head": H},
                           {"name": "downstream", "polyline": [[b / 2, 0], [L, 0]], "head": 0.0}],
            "mesh": {"size": size, "order": order,
                     "refine": [{"point": [-b / 2, 0], "size": size * ratio},
                                {"point": [b / 2, 0], "size": size * ratio}] if ratio else []}}


def test_exact_solutions_are_consistent():
    """Two independent maps agree: Harr's closed form (cosh map + Landen) and the sn map of the
    finite rectangle in the limit of a long model; Landen's transformation checked on its own."""
    for sT in (0.1, 0.25, 0.5, 0.75, 0.9):
        assert hx.sheet_pile(sT * T, T) == pytest.approx(hx.sheet_pile_landen(sT * T, T), rel=1e-12)
        assert hx.sheet_pile_truncated(sT * T, T, 8 * T) == pytest.approx(hx.sheet_pile(sT * T, T), rel=1e-8)
    for bT in (0.5, 1.0, 2.0):
        assert hx.floor_truncated(bT * T, T, 8 * T) == pytest.approx(hx.floor(bT * T, T), rel=1e-8)
    # s = T/2: lam = lam', so q / (k H) = 1/2 exactly
    assert hx.sheet_pile(T / 2, T) == pytest.approx(0.5, rel=1e-14)
    # truncation of the models used here is negligible
    assert abs(hx.sheet_pile_truncated(T / 2, T, L) / hx.sheet_pile(T / 2, T) - 1) < 1e-5


@pytest.mark.parametrize("order", [1, 2])
@pytest.mark.parametrize("s_over_T", [0.25, 0.5, 0.75])
def test_sheet_pile_discharge(order, s_over_T):
    s = s_over_T * T
    r = seepfe.solve(pile_section(s, order=order))
    exact = hx.sheet_pile_truncated(s, T, L)                  # Harr (1962) ch. 4, truncated model
    q = r.boundary_flow("upstream") / (K * H)
    err = q / exact - 1
    assert 0 < err < TOL[order]
    assert r.boundary_flow("downstream") == pytest.approx(-r.boundary_flow("upstream"), rel=1e-8)
    assert r.balance["relative_error"] < 1e-8
    # antisymmetry (common practice): the vertical below the pile tip is the equipotential h = H / 2
    below = np.column_stack([np.zeros(5), np.linspace(-T, -s - 0.5, 5)])
    assert np.allclose(r.head(below), H / 2, atol=1e-3 * H)


@pytest.mark.parametrize("order", [1, 2])
@pytest.mark.parametrize("b_over_T", [0.5, 1.0, 2.0])
def test_floor_discharge(order, b_over_T):
    b = b_over_T * T
    r = seepfe.solve(floor_section(b, order=order))
    exact = hx.floor_truncated(b, T, L)                       # Harr (1962) ch. 4, truncated model
    q = r.boundary_flow("upstream") / (K * H)
    err = q / exact - 1
    assert 0 < err < TOL[order]
    assert r.balance["relative_error"] < 1e-8
    below = np.column_stack([np.zeros(5), np.linspace(-T, 0, 5)])
    assert np.allclose(r.head(below), H / 2, atol=1e-3 * H)  # the middle vertical, by antisymmetry


def test_refinement_reduces_the_error():
    """The tolerance rests on convergence: halving h at a fixed tip ratio cuts the error about in half."""
    exact = hx.sheet_pile_truncated(5.0, T, L)
    errs = [seepfe.solve(pile_section(5.0, size=h, order=2)).boundary_flow("upstream") / (K * H) / exact - 1
            for h in (2.0, 1.0)]
    assert errs[0] > errs[1] > 0 and errs[0] / errs[1] > 1.5
