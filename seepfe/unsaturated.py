"""Unconfined flow on the fixed mesh: saturated-unsaturated Darcy flow with a phreatic surface.

The steady equation is -div(kr(psi) K grad h) = 0 with pressure head psi = h - y (m) and a relative
conductivity 0 < kr <= 1 (kr = 1 where psi >= 0).  The phreatic surface is the contour psi = 0; nothing
is re-meshed.  Above it the soil conducts with kr < 1:

* a material with ``"unsaturated": {"alpha", "n", "kr_min"}`` uses the van Genuchten (1980) retention
  curve with Mualem's relative conductivity, Se = [1 + (alpha |psi|)^n]^-m, m = 1 - 1/n,
  kr = max(kr_min, Se^(1/2) [1 - (1 - Se^(1/m))^m]^2);
* any other material uses a steep exponential, kr = kr_min + (1 - kr_min) exp(psi / delta_e), with
  kr_min = 1e-6 and a transition length delta_e = DELTA_FACTOR x the element size (so the free surface
  is as sharp as the mesh can carry, and sharper on finer meshes).

kr enters as one multiplier per element, the mean of kr over SAMPLES_PER_SIDE^2 points spread evenly over
the element (the local matrices are computed once: K(h) = sum_e kr_e(h) K_e).  The nonlinear system
R(h) = K(h) h - f = 0 is solved by Newton's method with a backtracking line search (default), or by
Picard iteration with adaptive under-relaxation; the seepage-face and drain conditions (h = y where water
leaves, no flow where it would enter) are updated as an active set at every iteration, so both converge
together.  See docs/unconfined.md for the equations and the measured choice.
"""

from __future__ import annotations

import logging
import time
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from . import fem, linsolve
from .errors import SolverError

__all__ = ["KrModel", "UnconfinedSolution", "solve_unconfined", "is_partly_dry", "DELTA_FACTOR",
           "KR_MIN_DEFAULT", "SAMPLES_PER_SIDE"]

log = logging.getLogger("seepfe")

#: transition length of the default steep kr, as a fraction of the element size (P1: size, P2: size / 2)
DELTA_FACTOR = 0.25
#: floor of the default steep kr (-)
KR_MIN_DEFAULT = 1e-6
#: continuation: first width of the steep transition (fraction of the section's height), ratio between
#: stages, relative residual that ends a stage, and the most Newton steps a stage takes
STAGE_START, STAGE_RATIO, STAGE_TOL, STAGE_MAX = 0.05, 4.0, 1e-2, 4
#: a relative flow residual below which stagnation (round-off with strong conductivity contrasts) counts
#: as converged; the mass balance is then still better than 1e-6
FLOOR_TOL = 5e-7
#: kr is averaged over SAMPLES_PER_SIDE**2 evenly spread points of each element
SAMPLES_PER_SIDE = 4


def _sample_points(m: int) -> np.ndarray:
    """Centroids of the m*m congruent sub-triangles of the reference triangle: (m*m, 2), equal weights."""
    pts = []
    for i in range(m):
        for j in range(m - i):
            pts.append(((i + 1 / 3) / m, (j + 1 / 3) / m))            # upward sub-triangle
            if i + j < m - 1:
                pts.append(((i + 2 / 3) / m, (j + 2 / 3) / m))        # downward sub-triangle
    return np.array(pts)


@dataclass
class KrModel:
    """Relative conductivity kr(psi) per element, with its derivative.

    zone-wise parameters: vg (Z,) bool, alpha (Z,) 1/m, n (Z,), kr_min (Z,); delta (E,) m for the steep
    default.
    """

    vg: np.ndarray
    alpha: np.ndarray
    n: np.ndarray
    kr_min: np.ndarray
    delta: np.ndarray
    zone: np.ndarray
    stretch: float = 1.0          # continuation: the steep transition is stretch times wider

    @classmethod
    def build(cls, section, mesh) -> "KrModel":
        Z = len(section.spec.zones)
        vg = np.zeros(Z, bool)
        alpha, n, kmin = np.ones(Z), np.full(Z, 2.0), np.full(Z, KR_MIN_DEFAULT)
        for zi in range(Z):
            u = section.zone_material(zi).unsaturated
            if u is not None:
                vg[zi], alpha[zi], n[zi], kmin[zi] = True, u.alpha, u.n, u.kr_min
        _, det = fem.jacobians(mesh.points, mesh.cells)
        size = np.sqrt(np.abs(det))                     # side of the equivalent right triangle, m
        delta = DELTA_FACTOR * size / mesh.order
        return cls(vg=vg, alpha=alpha, n=n, kr_min=kmin, delta=delta, zone=mesh.zone)

    def __call__(self, psi: np.ndarray, derivative: bool = True):
        """kr and dkr/dpsi (1/m) at psi (E, S) in m, for each element's zone."""
        z = self.zone
        kmin = self.kr_min[z][:, None]
        d = self.stretch * self.delta[:, None]
        s = np.minimum(psi, 0.0) / d
        ex = np.exp(s)
        kr = kmin + (1.0 - kmin) * (1.0 - s) * ex          # C1 at psi = 0: kr = 1, dkr/dpsi = 0
        dk = (-(1.0 - kmin) / d) * s * ex if derivative else None
        if self.vg.any():
            rows = np.flatnonzero(self.vg[z])
            if len(rows):
                p = psi[rows]
                kv = self._vgm(p, rows)
                kr[rows] = kv
                if derivative:
                    eps = 1e-7 * (1.0 + np.abs(p))
                    dk[rows] = np.where(p < 0.0, (self._vgm(np.minimum(p + eps, 0.0), rows)
                                                  - self._vgm(p - eps, rows))
                                        / (np.minimum(p + eps, 0.0) - (p - eps)), 0.0)
        return kr, dk

    def _vgm(self, p, rows):
        z = self.zone[rows]
        a, n, kmin = self.alpha[z][:, None], self.n[z][:, None], self.kr_min[z][:, None]
        m = 1.0 - 1.0 / n
        se = (1.0 + (a * np.maximum(-p, 0.0)) ** n) ** (-m)
        kr = np.sqrt(se) * (1.0 - (1.0 - se ** (1.0 / m)) ** m) ** 2
        return np.maximum(kr, kmin)


@dataclass
class UnconfinedSolution:
    h: np.ndarray
    matrix: sp.csr_matrix
    kr: np.ndarray                 # (E,) element relative conductivity
    fixed: np.ndarray              # sorted prescribed nodes
    face_active: np.ndarray        # state of bc.face_nodes (True = h = y)
    converged: bool
    info: dict = field(default_factory=dict)


class _System:
    """Element matrices, the CSR pattern and the sampling of psi; assembles K(h) and the Jacobian."""

    def __init__(self, mesh, Ke: np.ndarray, model: KrModel):
        self.mesh, self.Ke, self.model = mesh, Ke, model
        c = mesh.cells
        n = mesh.n_nodes
        nl = c.shape[1]
        rows = np.repeat(c, nl, axis=1).ravel()
        cols = np.tile(c, (1, nl)).ravel()
        P = sp.coo_matrix((np.ones(len(rows)), (rows, cols)), shape=(n, n)).tocsr()
        P.sum_duplicates()
        P.sort_indices()
        self.indptr, self.indices = P.indptr, P.indices
        keys = np.repeat(np.arange(n, dtype=np.int64), np.diff(P.indptr)) * n + P.indices
        self.pos = np.searchsorted(keys, rows.astype(np.int64) * n + cols)
        self.nnz = P.nnz
        self.n = n
        xi = _sample_points(SAMPLES_PER_SIDE)
        self.N = fem.shape(mesh.order, xi)                    # (S, nloc)
        self.w = np.full(len(xi), 1.0 / len(xi))
        self.ys = mesh.points[c, 1] @ self.N.T                 # (E, S) elevation at the samples, m

    def matrix(self, data: np.ndarray) -> sp.csr_matrix:
        return sp.csr_matrix((data, self.indices, self.indptr), shape=(self.n, self.n))

    def kr(self, h: np.ndarray, derivative: bool = True):
        """Element kr (E,) and d kr_e / d h_local (E, nloc)."""
        psi = h[self.mesh.cells] @ self.N.T - self.ys
        k, dk = self.model(psi, derivative)
        kr_e = k @ self.w
        dkr = (dk * self.w) @ self.N if derivative else None
        return kr_e, dkr

    def assemble(self, kr_e: np.ndarray) -> sp.csr_matrix:
        d = np.bincount(self.pos, weights=(self.Ke * kr_e[:, None, None]).ravel(), minlength=self.nnz)
        return self.matrix(d)

    def jacobian(self, A: sp.csr_matrix, h: np.ndarray, dkr: np.ndarray) -> sp.csr_matrix:
        """dR/dh = K(h) + sum_e (K_e h_e) (d kr_e / d h_e)^T, same pattern as K."""
        Kh = np.einsum("eij,ej->ei", self.Ke, h[self.mesh.cells])
        extra = np.bincount(self.pos, weights=(Kh[:, :, None] * dkr[:, None, :]).ravel(), minlength=self.nnz)
        return self.matrix(A.data + extra)


def is_partly_dry(mesh, h: np.ndarray, tol: float) -> bool:
    """True where the saturated solution has negative pressure head anywhere (beyond tol, m)."""
    xi = _sample_points(2)
    psi = h[mesh.cells] @ fem.shape(mesh.order, xi).T - mesh.points[mesh.cells, 1] @ fem.shape(mesh.order, xi).T
    return bool(psi.min() < -tol) or bool((h - mesh.points[:, 1]).min() < -tol)


def _lu(M: sp.csr_matrix):
    try:
        return spla.splu(M.tocsc(), permc_spec="COLAMD")
    except RuntimeError as e:
        raise SolverError(f"the unconfined system is singular ({e}): is part of the section cut off "
                          "from every head boundary?") from None


def solve_unconfined(section, mesh, Ke: np.ndarray, bc, h0: np.ndarray, face0: np.ndarray, *,
                     method: str = "newton", linear: str = "auto", tol: float = 1e-10,
                     max_iterations: int = 60, rtol: float = 1e-9,
                     continuation: bool = True) -> UnconfinedSolution:
    """Solve the saturated-unsaturated problem from the saturated head field h0.

    Parameters
    ----------
    section, mesh : the section and its mesh.
    Ke : (E, nloc, nloc) saturated element matrices, m/s.
    bc : :class:`seepfe.solver.Conditions`.
    h0 : (N,) starting heads (the saturated solution), m.
    face0 : state of ``bc.face_nodes`` at h0 (True = h = y).
    method : "newton" (with line search) or "picard" (adaptive under-relaxation).
    linear : linear solver for Picard ("auto", "direct", "amg"); Newton uses sparse LU (non-symmetric).
    rtol : stop when the flow residual at the unknown nodes (m3/s per m, 1-norm) is below rtol times
        the flow through the section and the seepage-face active set no longer changes.
    """
    t0 = time.perf_counter()
    model = KrModel.build(section, mesh)
    sysm = _System(mesh, Ke, model)
    y = mesh.points[:, 1]
    n = mesh.n_nodes
    htol = 10 * section.tol
    face = face0.copy()
    h = h0.copy()
    fn = bc.face_nodes
    stats = {"factorizations": 0, "linear_solves": 0, "line_search_cuts": 0, "active_set_changes": 0, "chord_steps": 0,
             "stages": 0,
             "factor_s": 0.0, "solve_s": 0.0}
    history: list[float] = []
    best = None
    converged = False
    omega = 0.7
    lu, lu_key, chord_ok = None, None, False
    # continuation in the width of the default steep kr: start at about 1/20 of the section's height
    height = float(np.ptp(y))
    d_med = float(np.median(model.delta)) if len(model.delta) else 1.0
    model.stretch = max(1.0, STAGE_START * height / d_med) if continuation else 1.0
    if model.vg.all():
        model.stretch = 1.0
    stage_it = 0
    stalled, prev_rel = 0, np.inf
    prev_norm = np.inf

    def fixed_set(face):
        fixed = np.concatenate([bc.head_nodes, fn[face]])
        values = np.concatenate([bc.head_values, y[fn[face]]])
        o = np.argsort(fixed)
        return fixed[o], values[o]

    def residual(h, free):
        kr_e, dkr = sysm.kr(h, derivative=(method == "newton"))
        A = sysm.assemble(kr_e)
        r = A @ h - bc.load
        return kr_e, dkr, A, r, np.abs(r[free]).sum()

    it = 0
    for it in range(1, max_iterations + 1):
        fixed, values = fixed_set(face)
        h[fixed] = values
        free_mask = np.ones(n, bool)
        free_mask[fixed] = False
        free = np.flatnonzero(free_mask)
        kr_e, dkr, A, r, rn = residual(h, free)
        # flow scale: what passes through the prescribed nodes
        Q = max(0.5 * np.abs(r[fixed]).sum(), 1e-300)
        rel = rn / Q
        history.append(float(rel))
        if best is None or rel < best[0]:
            best = (rel, h.copy(), A, kr_e, fixed.copy(), face.copy())
        # active set of the seepage faces and drains, updated with the current iterate
        if len(fn):
            rf = r[fn]
            scale = max(np.abs(r[bc.head_nodes]).max(), 1e-300)
            release = face & (rf > 1e-9 * scale)
            catch = ~face & (h[fn] > y[fn] + htol)
            changed = bool(release.any() or catch.any())
        else:
            changed = False
        if model.stretch > 1.0 and (rel < STAGE_TOL or stage_it >= STAGE_MAX) and not changed:
            # continuation: narrow the transition of the default kr and go on from this iterate
            model.stretch = max(1.0, model.stretch / STAGE_RATIO)
            stats["stages"] += 1
            stage_it = 0
            chord_ok = False
            kr_e, dkr, A, r, rn = residual(h, free)
            Q = max(0.5 * np.abs(r[fixed]).sum(), 1e-300)
            rel = rn / Q
        elif not changed and (rel < rtol or (rel < FLOOR_TOL and stalled >= 3)):
            # rtol reached, or a round-off floor below FLOOR_TOL where three steps gained < 10 %
            converged = True
            break
        stalled = stalled + 1 if rel > 0.9 * prev_rel else 0
        prev_rel = rel
        stage_it += 1
        if changed:
            face = (face & ~release) | catch
            stats["active_set_changes"] += 1
            fixed, values = fixed_set(face)
            h[fixed] = values
            free_mask[:] = True
            free_mask[fixed] = False
            free = np.flatnonzero(free_mask)
            kr_e, dkr, A, r, rn = residual(h, free)
        R = r[free]
        ta = time.perf_counter()
        if method == "newton":
            dh, t = None, 1.0
            fkey = free.tobytes() if lu is not None else None
            if lu is not None and chord_ok and fkey == lu_key:
                # chord step: the last factorised Jacobian, kept while it still halves the residual
                tb = time.perf_counter()
                dc = lu.solve(-R)
                stats["solve_s"] += time.perf_counter() - tb
                stats["linear_solves"] += 1
                ht = h.copy()
                ht[free] += dc
                _, _, _, _, rt = residual(ht, free)
                if rt <= 0.5 * rn:
                    dh = dc
                    stats["chord_steps"] += 1
            if dh is None:
                J = sysm.jacobian(A, h, dkr)
                lu = _lu(J[free][:, free])
                lu_key = free.tobytes()
                stats["factorizations"] += 1
                tb = time.perf_counter()
                dh = lu.solve(-R)
                stats["factor_s"] += tb - ta
                stats["solve_s"] += time.perf_counter() - tb
                stats["linear_solves"] += 1
                # backtracking line search on the 1-norm of the flow residual
                for _ in range(8):
                    ht = h.copy()
                    ht[free] += t * dh
                    _, _, _, _, rt = residual(ht, free)
                    if rt <= (1.0 - 1e-4 * t) * rn or rt < rtol * Q * 0.5:
                        break
                    t *= 0.5
                    stats["line_search_cuts"] += 1
            chord_ok = t == 1.0 and rt <= 0.5 * rn
            h = ht
        else:
            Aff = A[free][:, free].tocsr()
            solver = linsolve.factorize(Aff, linear, tol)
            stats["factorizations"] += 1
            tb = time.perf_counter()
            Afd = A[free][:, fixed]
            hn = h.copy()
            hn[free] = solver.solve(bc.load[free] - Afd @ h[fixed])
            stats["factor_s"] += tb - ta
            stats["solve_s"] += time.perf_counter() - tb
            stats["linear_solves"] += 1
            # adaptive under-relaxation: grow while the residual falls, cut when it rises
            omega = min(1.0, omega * 1.2) if rn < prev_norm else max(0.1, omega * 0.5)
            prev_norm = rn
            h = h + omega * (hn - h)
    if not converged:
        rel, h, A, kr_e, fixed, face = best
        log.warning("unconfined (phreatic-surface) iteration did not converge in %d iterations: relative "
                    "flow residual %.2e (target %.0e); the best iterate is returned, marked unconverged",
                    it, rel, rtol)
    else:
        fixed, _ = fixed_set(face)
    info = {
        "method": method, "iterations": it, "converged": bool(converged),
        "relative_residual": float(history[-1] if converged else best[0]),
        "residual_history": [float(f"{v:.3e}") for v in history],
        "factorizations": stats["factorizations"], "linear_solves": stats["linear_solves"],
        "line_search_cuts": stats["line_search_cuts"], "active_set_changes": stats["active_set_changes"],
        "chord_steps": stats["chord_steps"], "continuation_stages": stats["stages"],
        "kr_model": {"default": "exponential", "delta_factor": DELTA_FACTOR, "kr_min": KR_MIN_DEFAULT,
                     "van_genuchten_zones": [section.zone_names[i] for i in np.flatnonzero(model.vg)]},
        "dry_elements": int((kr_e < 0.5).sum()),
        "times_s": {"total": round(time.perf_counter() - t0, 4), "factor": round(stats["factor_s"], 4),
                    "solve": round(stats["solve_s"], 4)},
    }
    return UnconfinedSolution(h=h, matrix=A, kr=kr_e, fixed=fixed, face_active=face, converged=converged,
                              info=info)
