"""How accurate are the numbers of a solve: discretisation error of scalar quantities from coarser meshes.

:func:`estimate` solves the same section on two coarser versions of the result's mesh and extrapolates
(Richardson extrapolation with the observed order of convergence, in the generalised form for unequal
refinement ratios of Celik, I.B., Ghia, U., Roache, P.J., Freitas, C.J., Coleman, H. and Raad, P.E. (2008),
Procedure for estimation and reporting of uncertainty due to discretization in CFD applications, J. Fluids
Eng. 130(7), 078001, eqs. 1-4; Roache, P.J. (1998), Verification and Validation in Computational Science
and Engineering, Hermosa, ch. 5).

The coarser levels, cheapest and most faithful first:

* the nested coarse levels the mesh already has: a mesh made by 4-way splits of a coarser gmsh mesh
  (:mod:`seepfe.nested`) gives the parent mesh of the same order at exactly twice the element size, with
  no re-meshing;
* otherwise the same mesh spec meshed again with every size (global and refinements) multiplied by 2 or 4
  (``make_mesh(scale=...)``); not nested, so the refinement ratio is taken from the element counts,
  r = sqrt(E_fine / E_coarse) (Celik et al. 2008, eq. 1).

With three values f1 (the result), f2, f3 the observed order p is found from eqs. 3a-3c of Celik et al. and
the error of f1 is estimated as |f1 - f2| / (r21^p - 1) (Richardson); p is bounded to [0.5, 2 x order].
When the three values do not converge monotonically (oscillation, or a difference at round-off), or a
coarse level cannot be meshed or solved, there is no observed order: the estimate is then |f1 - f2|
(Richardson with r^p - 1 = 1, i.e. first order at r = 2), and ``observed_order`` is None; the method string
says which was used.

Limits (say so beside the numbers): the estimate is for quantities that converge under refinement: seepage
discharges, heads at points, gradients averaged over a length or across a layer.  The largest element
gradient at a singular corner (a levee toe, the tip of a cutoff) grows under refinement and has no
discretisation error to estimate: such values are excluded.  The estimate assumes the meshes are in the
asymptotic range; the verification (tests/test_accuracy.py, Harr's sheet pile) measured the true error
within a factor 3 of the estimate.
"""

from __future__ import annotations

import math

import numpy as np

from .errors import SeepfeError

__all__ = ["estimate", "default_quantities", "solve_to_accuracy", "MAX_ROUNDS"]

#: the solve function, registered by seepfe.solver when it is imported (so this module does not import the
#: solver: the solver calls solve_to_accuracy for the ``solver.accuracy`` key)
_solve = None


def register_solver(fn) -> None:
    """Called by :mod:`seepfe.solver` with its ``solve``."""
    global _solve
    _solve = fn


def _solver():
    if _solve is None:
        import importlib
        importlib.import_module("seepfe.solver")    # registers itself
    return _solve


#: rounds of re-meshing when a mesh is chosen for a requested accuracy
MAX_ROUNDS = 4
#: a boundary flow below this fraction of the largest one is left out of the default quantities
_SMALL_FLOW = 1e-3


def default_quantities(result) -> dict:
    """{"q:<boundary>": flow (m3/s per m)} for every boundary and drain zone that carries a flow."""
    flows = result.flows
    big = max((abs(v) for v in flows.values()), default=0.0)
    return {f"q:{k}": float(v) for k, v in flows.items() if big > 0 and abs(v) >= _SMALL_FLOW * big}


def _coarse_meshes(result, n: int = 2):
    """Up to n coarser meshes of the result's mesh, each (mesh, nested: bool); a level that fails is left out."""
    from . import nested
    from .mesh import make_mesh
    mesh, section = result.mesh, result.section
    out = []
    m = mesh
    for _ in range(n):
        par = nested._split_parent(m)
        if par is None:
            break
        m = par[0]
        out.append((m, True))
    j = len(out)
    size = mesh.stats.get("size_m")
    while len(out) < n and size:
        j += 1
        # the gmsh mesh of the result is at size x 2^splits; its version with every size x 2^j, no splits
        sc = float(mesh.stats.get("scale", 1.0))
        try:
            cm = make_mesh(section, order=mesh.order, size=size / sc, split=0, scale=sc * 2.0 ** j)
        except SeepfeError:
            break
        out.append((cm, False))
    return out


def _observed_order(f1, f2, f3, r21, r32, order):
    """Celik et al. (2008), eqs. 3a-3c: p by fixed-point iteration; None when not monotone."""
    e21, e32 = f2 - f1, f3 - f2
    scale = max(abs(f1), abs(f2), abs(f3), 1e-300)
    if abs(e21) <= 1e-12 * scale or abs(e32) <= 1e-12 * scale:
        return None
    s = math.copysign(1.0, e32 / e21)
    if s < 0:
        return None                      # oscillating: no observed order
    p = 1.0
    for _ in range(50):
        q = math.log((r21**p - s) / (r32**p - s))
        pn = abs(math.log(abs(e32 / e21)) + q) / math.log(r21)
        if abs(pn - p) < 1e-10:
            p = pn
            break
        p = pn
    return float(min(max(p, 0.5), 2.0 * order))


def estimate(result, quantities=None, *, levels: int = 2, linear: str | None = None) -> dict:
    """Discretisation error of scalar quantities of a solve.

    Parameters
    ----------
    result : Result
        A solve (its section and mesh are solved again on coarser meshes).
    quantities : callable, optional
        Maps a Result to {name: float}; default :func:`default_quantities` (flow per boundary, m3/s per m).
        Leave out values at singular corners (they do not converge).
    levels : int
        Coarser levels to use (2 gives the observed order; 1 the two-level estimate only).
    linear : str, optional
        Linear solver for the coarse solves (default: the section's).

    Returns
    -------
    dict
        {name: {"value", "error_estimate", "relative", "observed_order" (float or None), "method",
        "extrapolated", "coarse_values"}}; units those of the quantity.
    """
    solve = _solver()
    fn = quantities or default_quantities
    q1 = fn(result)
    coarse = []
    for cm, nested_ in _coarse_meshes(result, levels):
        try:
            rc = solve(result.section, mesh=cm, linear=linear, accuracy=0)
        except SeepfeError:
            break
        if not rc.solver_info.get("converged", True):
            break
        coarse.append((rc, cm, nested_))
    vals = [fn(rc) for rc, _, _ in coarse]
    E1 = result.mesh.n_elements
    Es = [cm.n_elements for _, cm, _ in coarse]
    order = result.mesh.order
    out = {}
    for name, f1 in q1.items():
        f = [v.get(name) for v in vals]
        rec = {"value": f1, "error_estimate": None, "relative": None, "observed_order": None,
               "method": "no coarser level could be solved", "extrapolated": None,
               "coarse_values": [x for x in f if x is not None]}
        if f and f[0] is not None:
            r21 = math.sqrt(E1 / Es[0])
            kind = "nested" if coarse[0][2] else "re-meshed"
            p = None
            if len(f) > 1 and f[1] is not None:
                r32 = math.sqrt(Es[0] / Es[1])
                p = _observed_order(f1, f[0], f[1], r21, r32, order)
            if p is not None:
                fac = r21**p - 1.0
                err = abs(f1 - f[0]) / fac
                rec.update(observed_order=round(p, 3), extrapolated=f1 + (f1 - f[0]) / fac,
                           method=f"Richardson, observed order from three levels ({kind}, r = {r21:.2f})")
            else:
                err = abs(f1 - f[0])
                why = "no monotone third level" if len(f) > 1 else "two levels"
                rec.update(method=f"difference to the next coarser level ({kind}, r = {r21:.2f}; {why}: "
                                  "no observed order)")
            rec["error_estimate"] = float(err)
            rec["relative"] = float(err / abs(f1)) if f1 else None
        out[name] = rec
    return out


def solve_to_accuracy(section, target: float, *, order=None, linear=None, quantities=None):
    """Solve with a mesh chosen so that the estimated relative error of the quantities is at most target.

    Starts from the section's own mesh spec; while the worst estimated relative error e exceeds the target,
    every size (global and refinements) is multiplied by 0.8 (target / e)^(1 / p) (p the observed order, 1
    when none), at least 0.25 and at most 0.8 per round, for at most MAX_ROUNDS rounds.  Returns the last
    Result with ``solver_info["accuracy"]`` = {"target", "achieved", "rounds", "scale", "estimates"}.
    Refines uniformly (the refinements keep their ratio to the global size); values at singular corners are
    not part of the target (module docstring)."""
    from .mesh import make_mesh
    solve = _solver()
    if not target > 0:
        raise SeepfeError("the requested accuracy must be a positive relative error")
    scale, res, est, worst = 1.0, None, {}, math.inf
    rounds = 0
    for rounds in range(1, MAX_ROUNDS + 1):
        mesh = make_mesh(section, order=order, scale=scale, split=0)
        res = solve(section, mesh=mesh, linear=linear, accuracy=0)
        est = estimate(res, quantities, linear=linear)
        rel = [v["relative"] for v in est.values() if v["relative"] is not None]
        worst = max(rel) if rel else math.inf
        if worst <= target or not np.isfinite(worst):
            break
        ps = [v["observed_order"] for v in est.values() if v["observed_order"]]
        p = min(ps) if ps else 1.0
        scale *= min(0.8, max(0.25, 0.8 * (target / worst) ** (1.0 / p)))
    res.solver_info["accuracy"] = {"target": target, "achieved": worst if np.isfinite(worst) else None,
                                   "met": bool(worst <= target), "rounds": rounds, "scale": scale,
                                   "estimates": est}
    return res
