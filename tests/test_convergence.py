"""Convergence of the discharge under mesh refinement, P1 against P2.

Expected rates (theory, from memory): for a smooth solution the energy error is O(h^p) and a
boundary flux taken as the consistent nodal reaction is a "post-processed" quantity whose error is
the square of it, O(h^2p): slope 2 for P1 and 4 for P2 (Strang, G. and Fix, G. (1973), An Analysis of
the Finite Element Method, ch. 3; Babuska, I. and Miller, A. (1984), The post-processing approach in
the finite element method, part 1, Int. J. Numer. Meth. Eng. 20, 1085-1109).  A singularity r^lam
caps both at O(h^2 lam) under uniform refinement: the sheet-pile tip has lam = 1/2, so slope 1 for P1
and P2 alike, P2 only smaller by a constant.

1. Smooth case, known exact value: u = H0 (1 - x/W) + A exp(pi x/W) cos(pi y/W) in the square
   0 < x, y < W (harmonic), heads prescribed on the whole outline from u (non-constant data, which
   section files do not offer, so the system is assembled with seepfe.fem on seepfe meshes and the
   Dirichlet solve is done here).  The discharge is taken as seepfe.Result takes it, from the nodal
   reactions r = A h, here weighted: Q = sum_i r_i w(x_i) -> int_outline w k du/dn ds, with the
   smooth weight w = (1 - x/W)^2 (1 + y/W).  Why weighted: with a linear weight (a plain side
   discharge, whose "dual" field is linear in a rectangle) the error reduces to the quadrature of the
   boundary data, and the interior approximation would go untested.  The exact value is integrated
   from the analytic normal flux with scipy.integrate.quad (to 1e-13).
2. Singular case through the public API: the sheet pile of test_verify_harr.py, uniform meshes
   (no tip refinement), exact discharge from Harr (1962), Groundwater and Seepage, ch. 4.

Slopes are fitted by least squares to log(error) against log(h) over four nested meshes each
(one gmsh mesh split 0..3 times into 4 similar triangles, so h halves exactly).
"""

import numpy as np
import scipy.sparse.linalg as spla
from scipy.integrate import quad

import seepfe
from seepfe import fem

import harr_exact as hx
from test_verify_harr import H, K, L, T, pile_section

W, H0, A, KS = 10.0, 2.0, 1.5, 3e-5


def _square_mesh(split, order):
    sec = seepfe.load_section({
        "materials": {"soil": {"k": KS}},
        "zones": [{"name": "square", "material": "soil", "polygon": [[0, 0], [W, 0], [W, W], [0, W]]}],
        "boundaries": [{"name": "outline", "polyline": [[0, 0], [W, 0], [W, W], [0, W], [0, 0]],
                        "head": 0.0}], "solver": {"phreatic": "off"}})
    return seepfe.make_mesh(sec, order=order, size=2.0 / 2**split, split=split)   # nested: one gmsh mesh, split


def _exact_head(p):
    x, y = p[:, 0], p[:, 1]
    return H0 * (1 - x / W) + A * np.exp(np.pi * x / W) * np.cos(np.pi * y / W)


def _weight(p):
    return (1 - p[:, 0] / W) ** 2 * (1 + p[:, 1] / W)


def _exact_weighted_discharge():
    def grad(x, y):
        e = A * np.exp(np.pi * x / W) * np.pi / W
        return -H0 / W + e * np.cos(np.pi * y / W), -e * np.sin(np.pi * y / W)

    def w(x, y):
        return (1 - x / W) ** 2 * (1 + y / W)

    sides = [(lambda t: (t, 0.0), (0.0, -1.0)), (lambda t: (W, t), (1.0, 0.0)),
             (lambda t: (t, W), (0.0, 1.0)), (lambda t: (0.0, t), (-1.0, 0.0))]
    total = 0.0
    for xy, n in sides:
        f = lambda t: w(*xy(t)) * KS * np.dot(grad(*xy(t)), n)
        total += quad(f, 0.0, W, epsabs=0, epsrel=1e-13, limit=200)[0]
    return total


def _smooth_discharge_error(split, order):
    m = _square_mesh(split, order)
    Ke = fem.element_matrices(m.points, m.cells, np.broadcast_to(KS * np.eye(2), (m.n_elements, 2, 2)), order)
    Amat = fem.assemble(m.cells, Ke, m.n_nodes).tocsr()
    fixed = np.unique(m.edges)
    free = np.setdiff1d(np.arange(m.n_nodes), fixed)
    h = np.zeros(m.n_nodes)
    h[fixed] = _exact_head(m.points[fixed])
    h[free] = spla.spsolve(Amat[free][:, free].tocsc(), -Amat[free][:, fixed] @ h[fixed])
    q = float(np.sum((Amat @ h)[fixed] * _weight(m.points[fixed])))
    exact = _exact_weighted_discharge()
    return abs(q / exact - 1)


def _slope(h, e):
    return np.polyfit(np.log(h), np.log(e), 1)[0]


def test_smooth_rates_p1_2_p2_4():
    """Nested meshes: one gmsh mesh (h = 2 m) split 0..3 times into 4, h = 2, 1, 0.5, 0.25 m."""
    sizes = np.array([2.0, 1.0, 0.5, 0.25])
    e1 = np.array([_smooth_discharge_error(k, 1) for k in range(4)])
    e2 = np.array([_smooth_discharge_error(k, 2) for k in range(4)])
    s1, s2 = _slope(sizes, e1), _slope(sizes, e2)
    # measured: slopes 2.00 (P1) and 4.68 (P2, still above its asymptotic 4 on these meshes);
    # errors at h = 0.25 m: 1.4e-4 (P1), 1.1e-9 (P2)
    assert 1.8 < s1 < 2.2
    assert 3.7 < s2 < 5.2
    assert np.all(e2 < 0.01 * e1)


def test_sheet_pile_rate_is_capped_by_the_tip_singularity():
    """Nested meshes of the sheet-pile section without tip refinement (this also runs the node doubling
    along the barrier through the 4-way splits)."""
    exact = hx.sheet_pile_truncated(5.0, T, L)
    sizes = np.array([4.0, 2.0, 1.0, 0.5])
    err = {}
    for o in (1, 2):
        sec = seepfe.load_section(pile_section(5.0, ratio=None, order=o))
        err[o] = np.array([seepfe.solve(sec, mesh=seepfe.make_mesh(sec, size=4.0 / 2**k, split=k))
                           .boundary_flow("upstream") / (K * H) / exact - 1 for k in range(4)])
    s1, s2 = _slope(sizes, err[1]), _slope(sizes, err[2])
    # measured: slopes 1.06 (P1) and 1.01 (P2); errors at h = 0.5 m: 1.6e-2 (P1), 4.7e-3 (P2)
    assert np.all(err[1] > 0) and np.all(err[2] > 0)          # one-signed: q_FE >= q
    assert 0.8 < s1 < 1.2 and 0.8 < s2 < 1.2
    assert np.all(err[2] < 0.5 * err[1])
