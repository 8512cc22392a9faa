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
import math
import time
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from . import bcs, fem, linsolve, nested
from .bcs import conditions
from .errors import SolverError

__all__ = ["KrModel", "UnconfinedSolution", "solve_unconfined", "saturated_start", "is_partly_dry", "DELTA_FACTOR",
           "KR_MIN_DEFAULT", "SAMPLES_PER_SIDE"]

log = logging.getLogger("seepfe")

#: transition length of the default steep kr, as a fraction of the element size (P1: size, P2: size / 2)
DELTA_FACTOR = 0.25
#: floor of the default steep kr (-)
KR_MIN_DEFAULT = 1e-6
#: continuation: first width of the steep transition (fraction of the section's height), ratio between
#: stages, relative residual that ends a stage, and the most Newton steps a stage takes
STAGE_START, STAGE_RATIO, STAGE_TOL, STAGE_MAX = 0.05, 4.0, 1e-2, 12
#: a narrowing that raises the relative flow residual above this is retried with a smaller ratio
STAGE_JUMP = 0.5
#: stopping rule (docs/unconfined.md), with the active set unchanged: relative flow residual <= rtol; or
#: <= max(FLOW_TOL, round-off floor) <= FLOOR_MAX (mass balance better than 1e-6) and the next correction,
#: weighted by the nodal kr, moves no head by more than HTOL x the range of the prescribed heads and outlet
#: elevations.  Round-off floor = FLOOR_C x EPS x sum_free (|K(h)| |h|) / Q (grows with the contrast).
EPS = float(np.finfo(float).eps)
FLOOR_C, FLOW_TOL, FLOOR_MAX, HTOL = 4.0, 1e-7, 1e-6, 1e-6
#: iteration budget that follows progress (after the continuation): the iteration ends as stalled when its best
#: flow residual has not fallen by STALL_PROGRESS over the last W = max(STALL_MIN, STALL_FRACTION x iterations
#: so far) iterations; solver.max_iterations stays the hard cap
STALL_MIN, STALL_FRACTION, STALL_PROGRESS = 10, 0.3, 1.2
#: backtracking line search: at most this many halvings of a step before the next candidate direction
LINE_SEARCH_CUTS = 6
#: trial heads are kept within the prescribed range widened by this fraction of it (maximum principle)
BOUND_MARGIN = 0.01
#: the line search accepts a step against the largest of this many recent residual norms (non-monotone)
NONMONOTONE = 4
#: mesh sequencing: coarse levels stop above COARSEST_NODES nodes and are solved to COARSE_RTOL
COARSEST_NODES, COARSE_RTOL = 1500, 1e-6
#: inexact Newton: GMRES (rows scaled by their 1-norm) to KRYLOV_RTOL with the LU of an earlier Jacobian as
#: the preconditioner; more than KRYLOV_REFRESH iterations refactorise at the next step, KRYLOV_MAX at once
KRYLOV_RTOL, KRYLOV_REFRESH, KRYLOV_MAX = 1e-4, 20, 40
#: on levels that start from a prolonged solution: largest head change per step (fraction of the head range),
#: Jacobian without the kr-derivative term in elements with kr_e below NEWTON_KR_MIN (there the Galerkin
#: Jacobian is gravity-dominated and gives wild corrections; Picard-like there, Newton at the front)
STEP_CAP, NEWTON_KR_MIN = 0.05, 1e-3
#: intermediate levels use the kr transition width of the finest mesh (the coarsest keeps its own)
COARSE_DELTA_FINE = True
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

    def __call__(self, psi: np.ndarray, derivative: bool = True, elements=None):
        """kr and dkr/dpsi (1/m) at psi (E', S) in m, for each element's zone.

        elements : (E',) indices of the elements whose samples psi holds (default: all, in order)."""
        z = self.zone if elements is None else self.zone[elements]
        delta = self.delta if elements is None else self.delta[elements]
        kmin = self.kr_min[z][:, None]
        d = self.stretch * delta[:, None]
        s = np.minimum(psi, 0.0) / d
        ex = np.exp(s)
        kr = kmin + (1.0 - kmin) * (1.0 - s) * ex          # C1 at psi = 0: kr = 1, dkr/dpsi = 0
        dk = (-(1.0 - kmin) / d) * s * ex if derivative else None
        if self.vg.any():
            rows = np.flatnonzero(self.vg[z])
            if len(rows):
                p = psi[rows]
                zr = z[rows]
                kr[rows] = self._vgm(p, zr)
                if derivative:
                    eps = 1e-7 * (1.0 + np.abs(p))
                    dk[rows] = np.where(p < 0.0, (self._vgm(np.minimum(p + eps, 0.0), zr)
                                                  - self._vgm(p - eps, zr))
                                        / (np.minimum(p + eps, 0.0) - (p - eps)), 0.0)
        return kr, dk

    def _vgm(self, p, z):
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
        self.row = np.repeat(np.arange(n), np.diff(P.indptr))
        self.diag = np.searchsorted(keys, np.arange(n, dtype=np.int64) * (n + 1))   # every node couples to itself
        self.n = n
        xi = _sample_points(SAMPLES_PER_SIDE)
        self.N = fem.shape(mesh.order, xi)                    # (S, nloc)
        self.w = np.full(len(xi), 1.0 / len(xi))
        # psi at a sample is sum_i N_i psi_i with sum_i N_i = 1, so it is at least
        # min psi_i - neg (max psi_i - min psi_i), neg = largest sum of the negative N_i over the samples
        # (0 for P1): an element whose bound is >= 0 is fully wet (kr = 1, no derivative) and is skipped
        self.neg = float(np.max(-np.minimum(self.N, 0.0).sum(axis=1)))
        self.y_cells = mesh.points[c, 1]                       # (E, nloc) elevation of the nodes, m
        self.partly_dry = 0                                    # elements sampled at the last call

    def matrix(self, data: np.ndarray) -> sp.csr_matrix:
        return sp.csr_matrix((data, self.indices, self.indptr), shape=(self.n, self.n))

    def kr(self, h: np.ndarray, derivative: bool = True):
        """Element kr (E,) and d kr_e / d h_local (E, nloc); only partly dry elements are sampled."""
        psin = h[self.mesh.cells] - self.y_cells             # nodal pressure head (E, nloc), m
        lo, hi = psin.min(axis=1), psin.max(axis=1)
        rows = np.flatnonzero(lo - self.neg * (hi - lo) < 0.0)
        self.partly_dry = len(rows)
        E, nl = psin.shape
        kr_e = np.ones(E)
        dkr = np.zeros((E, nl)) if derivative else None
        if len(rows):
            k, dk = self.model(psin[rows] @ self.N.T, derivative, rows)
            kr_e[rows] = k @ self.w
            if derivative:
                dkr[rows] = (dk * self.w) @ self.N
        return kr_e, dkr

    def assemble(self, kr_e: np.ndarray) -> sp.csr_matrix:
        d = np.bincount(self.pos, weights=(self.Ke * kr_e[:, None, None]).ravel(), minlength=self.nnz)
        return self.matrix(d)

    def pinned(self, J: sp.csr_matrix, free: np.ndarray) -> sp.csr_matrix:
        """J with the rows of the prescribed nodes (free False) replaced by identity rows (in place)."""
        J.data[~free[self.row]] = 0.0
        J.data[self.diag[~free]] = 1.0
        return J

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


def _hierarchy(mesh):
    """Levels for mesh sequencing: only meshes made by splits have them (a coarser mesh of the same order
    first).  An unsplit P2 mesh is solved on itself: starting it from P1 on the same triangles stalled on
    locally refined meshes (drain ends refined to 1/1000 of the height, tests/test_unconfined_corpus.py)."""
    if mesh.stats.get("splits", 0) < 1:
        return [(mesh, None)]
    return nested.hierarchy(mesh, min_nodes=COARSEST_NODES)


def saturated_start(section, mesh, linear: str = "direct", tol: float = 1e-10):
    """The first saturated solve on the coarsest nested level of a split mesh (costs a fraction of the fine one).

    Returns (hierarchy, h, face, solver_cache) when the mesh has coarse levels and the saturated head field of
    the coarsest level is partly dry (the unconfined solve starts from it there), else None (the caller makes
    the saturated solve on the given mesh, which decides as before)."""
    hier = _hierarchy(mesh)
    if len(hier) < 2:
        return None
    m = hier[-1][0]
    try:
        b = conditions(section, m)
    except SolverError:
        return None
    ke = fem.element_matrices(m.points, m.cells, section.zone_tensors()[m.zone], m.order)
    A = fem.assemble(m.cells, ke, m.n_nodes)
    y = m.points[:, 1]
    fixed, values = bcs.fixed_set(b, b.face_start, y)
    cache: dict = {}
    h = bcs.solve_fixed(A, b.load, fixed, values, linear, tol, cache)
    if not is_partly_dry(m, h, section.head_tol):
        return None
    return hier, h, b.face_start.copy(), cache


def _lu(M: sp.csr_matrix):
    if M.nnz <= 10 * M.shape[0]:
        # P1 pattern (about 7 entries a row): COLAMD is faster to factor and to solve with than minimum
        # degree on A + A^T (81k unknowns: 0.22 s and 13 ms against 1.76 s and 17 ms per factorisation/solve)
        try:
            return spla.splu(M.tocsc(), permc_spec="COLAMD")
        except RuntimeError as e:
            raise SolverError(f"the unconfined system is singular ({e}): is part of the section cut off "
                              "from every head boundary?") from None
    try:
        # minimum degree on A + A^T with the symmetric-mode pivot preference: the Jacobian has the symmetric
        # pattern of K, and this LU has about half the fill of COLAMD's, so each GMRES preconditioner solve
        # costs about half (measured at 84k P2 nodes: 18 -> 10 ms per solve, 0.36 -> 0.32 s per factorisation);
        # threshold pivoting stays on; where it meets a zero pivot (contrasts near 1e21) COLAMD with partial
        # pivoting decides, as before
        return spla.splu(M.tocsc(), permc_spec="MMD_AT_PLUS_A", options={"SymmetricMode": True})
    except RuntimeError:
        pass
    try:
        return spla.splu(M.tocsc(), permc_spec="COLAMD")
    except RuntimeError as e:
        raise SolverError(f"the unconfined system is singular ({e}): is part of the section cut off "
                          "from every head boundary?") from None


def _gmres(matvec, psolve, b: np.ndarray, rtol: float, maxiter: int):
    """Right-preconditioned GMRES without restart: x with ||b - A x||_2 <= rtol ||b||_2 when reached.

    Returns (x, iterations, reached).  Meant for few iterations (the preconditioner is the LU of a nearby
    Jacobian), so the small least-squares problem is solved afresh at each step."""
    beta = float(np.linalg.norm(b))
    if beta == 0.0:
        return np.zeros_like(b), 0, True
    V = np.empty((maxiter + 1, len(b)))
    Z = np.empty((maxiter, len(b)))
    H = np.zeros((maxiter + 1, maxiter))
    g = np.zeros(maxiter + 1)
    g[0] = beta
    V[0] = b / beta
    y, res = np.zeros(0), beta
    for j in range(maxiter):
        Z[j] = psolve(V[j])
        w = matvec(Z[j])
        for _ in range(2):                                   # classical Gram-Schmidt, twice
            c = V[:j + 1] @ w
            w -= c @ V[:j + 1]
            H[:j + 1, j] += c
        H[j + 1, j] = np.linalg.norm(w)
        y = np.linalg.lstsq(H[:j + 2, :j + 1], g[:j + 2], rcond=None)[0]
        res = float(np.linalg.norm(g[:j + 2] - H[:j + 2, :j + 1] @ y))
        if res <= rtol * beta or H[j + 1, j] <= 1e-14 * beta:
            break
        V[j + 1] = w / H[j + 1, j]
    return y @ Z[:len(y)], len(y), bool(res <= rtol * beta)


@dataclass
class _Level:
    mesh: object
    bc: object
    model: KrModel
    sysm: _System
    P: object = None                # prolongation from the next coarser level, (n, n_coarse)


def _levels(section, mesh, Ke, bc, sequencing: bool, hier=None) -> list:
    """The levels of the solve, coarsest first (just the given mesh without sequencing)."""
    if hier is None:
        hier = _hierarchy(mesh) if sequencing else [(mesh, None)]
    hier = list(hier)
    out = []
    Kz = section.zone_tensors()
    for i, (m, P) in enumerate(hier):
        if i == 0:
            ke, b = Ke, bc
        else:
            try:
                b = conditions(section, m)
            except SolverError:                      # a coarse level without a head node: stop there
                hier[i - 1] = (hier[i - 1][0], None)
                out[-1].P = None
                break
            ke = fem.element_matrices(m.points, m.cells, Kz[m.zone], m.order)
        model = KrModel.build(section, m)
        if i == 0:
            d_fine = float(np.median(model.delta))
        elif COARSE_DELTA_FINE and i < len(hier) - 1:     # not on the coarsest level
            model.delta = model.delta * (d_fine / float(np.median(model.delta)))
        out.append(_Level(mesh=m, bc=b, model=model, sysm=_System(m, ke, model), P=P))
    return out[::-1]


@dataclass
class _Outcome:
    h: np.ndarray
    face: np.ndarray
    A: sp.csr_matrix
    kr: np.ndarray
    converged: bool
    reason: str
    iterations: int
    history: list
    rel: float
    floor: float


def _iterate(section, lv: _Level, h: np.ndarray, face: np.ndarray, *, method: str, linear: str, tol: float,
             rtol: float, budget: int, continuation: bool, stats: dict, step_cap: float = 0.0) -> _Outcome:
    """Newton (or Picard) iteration with the seepage-face active set on one level; see docs/unconfined.md."""
    mesh, bc, model, sysm = lv.mesh, lv.bc, lv.model, lv.sysm
    y = mesh.points[:, 1]
    n = mesh.n_nodes
    fn = bc.face_nodes
    htol = section.head_tol
    # head scale for the head-change criterion: the range of the prescribed heads and outlet elevations
    dH = max(float(np.ptp(np.concatenate([bc.head_values, y[fn]]))), htol)
    model.stretch = 1.0
    if continuation and not model.vg.all():
        # continuation in the width of the default steep kr: start at about 1/20 of the section's height
        d_med = float(np.median(model.delta)) if len(model.delta) else 1.0
        model.stretch = max(1.0, STAGE_START * float(np.ptp(y)) / d_med)
    face = face.copy()
    h = h.copy()
    history: list[float] = []
    best = None
    best_log: list[float] = []          # best residual at each iteration with the final kr (stall rule)
    stage_it, omega, prev_norm = 0, 0.7, np.inf
    stage_ratio = STAGE_RATIO
    lu = None
    reason, converged, rel, floor = "", False, np.inf, 0.0
    changes: list[int] = []
    stalled = False
    recent_norms: list[float] = []
    # maximum principle: without flux boundaries, the heads lie between the lowest outlet (or prescribed head)
    # and the highest prescribed head; trial iterates are projected into that range (with a margin for the
    # overshoot of P2 interpolation), which keeps Newton from sending weakly coupled dry heads far away
    bounded = not np.any(bc.load)
    lo = float(min(bc.head_values.min(), y[fn].min() if len(fn) else np.inf)) - BOUND_MARGIN * dH
    hi = float(bc.head_values.max()) + BOUND_MARGIN * dH

    def residual(h):
        kr_e, dkr = sysm.kr(h, derivative=(method == "newton"))
        A = sysm.assemble(kr_e)
        return kr_e, dkr, A, A @ h - bc.load

    def measures(A, r, h, free, fixed):
        """Relative flow residual and its round-off floor (see docs/unconfined.md)."""
        Q = max(0.5 * np.abs(r[fixed]).sum(), 1e-300)          # flow through the prescribed nodes
        rel = np.abs(r[free]).sum() / Q
        fl = FLOOR_C * EPS * (sysm.matrix(np.abs(A.data)) @ np.abs(h))[free].sum() / Q
        return rel, fl

    def merit(r, free):
        """Line-search merit: the 1-norm of the flow residual at the unknown nodes, m3/s per m."""
        return np.abs(r[free]).sum()

    def picard_step(A, h, free_mask, fixed):
        """Correction to the solution of K(h) x = f with the current kr (symmetric positive definite)."""
        ta = time.perf_counter()
        fi = np.flatnonzero(free_mask)
        Af = A[fi]
        f, _ = linsolve.spd_factor(Af[:, fi])
        stats["factorizations"] += 1
        stats["picard_steps"] += 1
        stats["factor_s"] += time.perf_counter() - ta
        x = h.copy()
        x[fi] = f.solve(bc.load[fi] - Af[:, fixed] @ h[fixed])
        stats["linear_solves"] += 1
        return x - h

    it = 0
    for it in range(1, budget + 1):
        fixed, values = bcs.fixed_set(bc, face, y)
        h[fixed] = values
        free_mask = np.ones(n, bool)
        free_mask[fixed] = False
        kr_e, dkr, A, r = residual(h)
        rel, floor = measures(A, r, h, free_mask, fixed)
        history.append(float(rel))
        log.info("unconfined iteration %d: relative flow residual %.2e", it, rel)
        if model.stretch == 1.0 and (best is None or rel < best[0]):
            best = (rel, h.copy(), A, kr_e, face.copy(), floor, it)
        # active set of the seepage faces and drains, updated with the current iterate
        new_face, release, catch = bcs.update_active(bc, face, r, h, y, htol)
        changed = bool(release.any() or catch.any())
        changes.append(int(changed))
        if model.stretch > 1.0 and (rel < STAGE_TOL or stage_it >= STAGE_MAX) and not changed:
            # continuation: narrow the transition of the default kr and go on from this iterate; a narrowing
            # that throws the residual far off (above STAGE_JUMP) is retried with the square root of the ratio
            old_stretch = model.stretch
            while True:
                model.stretch = max(1.0, old_stretch / stage_ratio)
                kr_e, dkr, A, r = residual(h)
                rel, floor = measures(A, r, h, free_mask, fixed)
                if rel <= STAGE_JUMP or stage_ratio < 1.1:
                    break
                stage_ratio = math.sqrt(stage_ratio)
            if rel < STAGE_TOL:
                stage_ratio = min(STAGE_RATIO, stage_ratio * stage_ratio)
            stats["stages"] += 1
            stage_it = 0
            if model.stretch == 1.0:
                best = (rel, h.copy(), A, kr_e, face.copy(), floor, it)
        elif model.stretch == 1.0 and not changed and rel <= rtol:
            converged, reason = True, f"relative flow residual {rel:.1e} <= {rtol:.0e}"
            break
        stage_it += 1
        if changed:
            face = new_face
            stats["active_set_changes"] += 1
            fixed, values = bcs.fixed_set(bc, face, y)
            h[fixed] = values
            free_mask[:] = True
            free_mask[fixed] = False
            kr_e, dkr, A, r = residual(h)
        rn = merit(r, free_mask)
        b = -r
        b[fixed] = 0.0
        ta = time.perf_counter()
        if method == "newton":
            if NEWTON_KR_MIN > 0 and step_cap > 0:
                dkr = dkr * (kr_e >= NEWTON_KR_MIN)[:, None]
            J = sysm.pinned(sysm.jacobian(A, h, dkr), free_mask)
            fresh = False

            def directions():
                """Candidate corrections, best first: GMRES with an earlier LU, the LU of this Jacobian, Picard."""
                nonlocal lu, fresh
                if lu is not None:
                    # inexact Newton: GMRES preconditioned with the LU of an earlier Jacobian
                    # rows scaled by their 1-norm, so the dry rows (kr_min) count as much as the wet ones
                    d = np.add.reduceat(np.abs(J.data), J.indptr[:-1])
                    eta = KRYLOV_RTOL
                    if step_cap > 0:
                        # prolonged start: forcing term of Eisenstat and Walker (1996), choice 2
                        prev = history[-2] if len(history) > 1 else np.inf
                        eta = min(0.1, max(KRYLOV_RTOL, 0.9 * (rel / prev) ** 2)) if rel < prev else 0.1
                    x, k, ok = _gmres(lambda v: (J @ v) / d, lambda v: lu.solve(d * v), b / d, eta, KRYLOV_MAX)
                    stats["krylov_iterations"] += k
                    stats["linear_solves"] += k
                    if k > KRYLOV_REFRESH or not ok:
                        lu = None                     # refactorise (now, or at the next step)
                    if ok:
                        stats["chord_steps"] += 1
                        yield "chord", x
                if lu is None or not fresh:
                    t1 = time.perf_counter()
                    lu = _lu(J)
                    fresh = True
                    stats["factorizations"] += 1
                    stats["factor_s"] += time.perf_counter() - t1
                    stats["linear_solves"] += 1
                    yield "newton", lu.solve(b)
                yield "picard", picard_step(A, h, free_mask, fixed)

            gen = directions()
            kind, dh = next(gen)
            if model.stretch == 1.0 and not changed and rel <= max(FLOW_TOL, floor) <= FLOOR_MAX:
                # flow residual small enough for the mass balance: converged when the next correction moves
                # no head that carries flow (weighted by the relative conductivity) measurably
                w = np.zeros(n)
                np.maximum.at(w, mesh.cells.ravel(), np.repeat(kr_e, mesh.cells.shape[1]))
                dmax = float(np.abs(w * dh).max())
                if dmax <= HTOL * dH:
                    converged = True
                    reason = (f"relative flow residual {rel:.1e} <= {max(FLOW_TOL, floor):.0e} (round-off floor "
                              f"{floor:.1e}) and next head correction x kr {dmax:.1e} m <= {HTOL:.0e} x {dH:.3g} m")
                    # that correction is computed already: applied, it takes the flow residual (and so the mass
                    # balance) from the 1e-7 of this rule down towards its round-off floor, for one residual;
                    # kept only if it lowers the residual and leaves the active set as it is (issue 15: a
                    # converged solve balanced only to 1.55e-8)
                    hn = h + dh
                    kr_n, _, A_n, r_n = residual(hn)
                    rel_n, floor_n = measures(A_n, r_n, hn, free_mask, fixed)
                    _, rel_out, caught = bcs.update_active(bc, face, r_n, hn, y, htol)
                    if rel_n < rel and not rel_out.any() and not caught.any():
                        h, A, kr_e, rel, floor = hn, A_n, kr_n, rel_n, floor_n
                        history.append(float(rel))
                        reason += f"; that correction applied: relative flow residual {rel:.1e}"
                    stats["solve_s"] += time.perf_counter() - ta
                    break
            # backtracking line search on the 1-norm of the flow residual; a direction that does not reduce
            # it is replaced by the next candidate (fresh LU, then a Picard step); when none does, the trial
            # with the least residual is taken (the iteration must move to leave the point)
            trial = None
            # non-monotone acceptance (Grippo, Lampariello and Lucidi 1986, SIAM J. Numer. Anal. 23, 707-716):
            # against the largest of the last NONMONOTONE residual norms, so that a step may leave a narrow valley
            if changed or stage_it == 1:
                recent_norms.clear()              # a new active set or kr: compare with this point only
            recent_norms.append(rn)
            ref = max(recent_norms[-NONMONOTONE:])
            while True:
                if kind != "picard" and step_cap > 0:
                    dh = np.clip(dh, -step_cap * dH, step_cap * dH)
                t = 1.0
                ok = False
                for _ in range(LINE_SEARCH_CUTS + 1):
                    ht = h + t * dh
                    if bounded:
                        np.clip(ht, lo, hi, out=ht)
                    rt = merit(residual(ht)[3], free_mask)
                    if trial is None or rt < trial[0]:
                        trial = (rt, ht)
                    if rt <= (1.0 - 1e-4 * t) * ref:
                        ok = True
                        break
                    t *= 0.5
                    stats["line_search_cuts"] += 1
                if ok:
                    h = ht
                    break
                nxt = next(gen, None)
                if nxt is None:
                    h = trial[1]
                    stats["failed_line_searches"] += 1
                    break
                kind, dh = nxt
            log.debug("level %d nodes: it %d stretch %.3g rel %.3e floor %.1e %s t %.3g |dh| %.3g changed %s", n, it, model.stretch, rel,
                      floor, kind, t, float(np.abs(dh).max()), changed)
            gen.close()
        else:
            free = np.flatnonzero(free_mask)
            solver = linsolve.factorize(A[free][:, free].tocsr(), linear, tol)
            stats["factorizations"] += 1
            stats["factor_s"] += time.perf_counter() - ta
            hn = h.copy()
            hn[free] = solver.solve(bc.load[free] - A[free][:, fixed] @ h[fixed])
            stats["linear_solves"] += 1
            dh = hn - h
            # adaptive under-relaxation: grow while the residual falls, cut when it rises
            omega = min(1.0, omega * 1.2) if rn < prev_norm else max(0.1, omega * 0.5)
            prev_norm = rn
            h = h + omega * dh
        stats["solve_s"] += time.perf_counter() - ta
        if model.stretch == 1.0 and best is not None:
            # iteration budget that follows progress: stalled when the best residual has not halved over the
            # last W iterations, W = max(STALL_MIN, STALL_FRACTION x the iterations with the final kr so far)
            best_log.append(best[0])
            W = max(STALL_MIN, int(STALL_FRACTION * len(best_log)))
            if len(best_log) > W and best_log[-1] > best_log[-1 - W] / STALL_PROGRESS:
                stalled = True
                break
    if not converged:
        if best is None:
            best = (rel, h.copy(), A, kr_e, face.copy(), floor, it)
        rel, h, A, kr_e, face, floor, _ = best
        recent = changes[-STALL_MIN:]
        if floor > FLOOR_MAX:
            reason = (f"the round-off floor of the flow residual ({floor:.1e}) is above {FLOOR_MAX:.0e}: the "
                      "conductivity contrast (with kr_min in dry zones) is too large for a reliable balance")
        elif not stalled:
            reason = f"iteration cap ({budget} left of solver.max_iterations) reached"
        elif sum(recent) >= len(recent) // 2:
            reason = (f"the seepage-face / drain active set kept changing ({sum(recent)} changes in the last "
                      f"{len(recent)} iterations)")
        else:
            reason = (f"the flow residual stopped falling (not cut by {STALL_PROGRESS:g}x in the last {W} iterations) above its "
                      f"round-off floor {floor:.1e}")
    return _Outcome(h=h, face=face, A=A, kr=kr_e, converged=converged, reason=reason, iterations=it,
                    history=history, rel=float(rel), floor=float(floor))


def solve_unconfined(section, mesh, Ke: np.ndarray, bc, h0: np.ndarray, face0: np.ndarray, *,
                     method: str = "newton", linear: str = "auto", tol: float = 1e-10,
                     max_iterations: int = 200, rtol: float = 1e-9,
                     continuation: bool = True, sequencing: bool = True, start=None) -> UnconfinedSolution:
    """Solve the saturated-unsaturated problem from the saturated head field h0.

    Parameters
    ----------
    section, mesh : the section and its mesh.
    Ke : (E, nloc, nloc) saturated element matrices, m/s.
    bc : :class:`seepfe.solver.Conditions`.
    h0 : (N,) starting heads (the saturated solution), m.
    face0 : state of ``bc.face_nodes`` at h0 (True = h = y).
    method : "newton" (with line search) or "picard" (adaptive under-relaxation).
    linear : linear solver for Picard ("auto", "direct", "amg"); Newton uses sparse LU (non-symmetric),
        reused as the preconditioner of GMRES while it serves.
    rtol : target of the relative flow residual (flow residual at the unknown nodes, m3/s per m, 1-norm,
        over the flow through the section); a residual at its round-off floor (below FLOOR_MAX) also
        stops when the next Newton correction moves no head by more than HTOL x the head range.
    continuation : widen the default kr at the start and narrow it in stages (on the coarsest level).
    sequencing : Newton on the nested coarse levels of a split mesh first (:mod:`seepfe.nested`).
    start : the result of :func:`saturated_start` (h0 and face0 are then not used): the coarsest level
        starts from its own saturated solve.
    """
    with linsolve.one_thread():
        return _solve_unconfined(section, mesh, Ke, bc, h0, face0, method=method, linear=linear, tol=tol,
                                 max_iterations=max_iterations, rtol=rtol, continuation=continuation,
                                 sequencing=sequencing, start=start)


def _solve_unconfined(section, mesh, Ke, bc, h0, face0, *, method, linear, tol, max_iterations, rtol,
                      continuation, sequencing, start) -> UnconfinedSolution:
    t0 = time.perf_counter()
    if start is not None and not (sequencing and method == "newton"):
        raise ValueError("a coarse saturated start needs Newton with mesh sequencing")
    levels = _levels(section, mesh, Ke, bc, sequencing and method == "newton",
                     hier=None if start is None else start[0])
    if start is not None and levels[0].mesh.n_nodes != len(start[1]):
        raise ValueError("the coarse saturated start does not match the coarsest level")
    stats = {"factorizations": 0, "linear_solves": 0, "line_search_cuts": 0, "active_set_changes": 0,
             "chord_steps": 0, "krylov_iterations": 0, "stages": 0, "factor_s": 0.0, "solve_s": 0.0,
             "picard_steps": 0, "failed_line_searches": 0, "restarts": 0}
    act = np.zeros(mesh.n_nodes, bool)
    if start is None:
        act[bc.face_nodes[face0]] = True
    used, per_level, out, history = 0, [], None, []
    def restart(lv):
        """The finest level from its own saturated solution with the continuation in kr (as a mesh without
        coarse levels is solved): the safety net when a prolonged start did not lead to convergence."""
        fx, vals = bcs.fixed_set(lv.bc, lv.bc.face_start, lv.mesh.points[:, 1])
        cache: dict = {}
        h = bcs.solve_fixed(lv.sysm.assemble(np.ones(lv.mesh.n_elements)), lv.bc.load, fx, vals, linear, tol, cache)
        stats["factorizations"] += cache["factorizations"]
        stats["factor_s"] += cache["factor_s"]
        stats["linear_solves"] += 1
        stats["restarts"] += 1
        return _iterate(section, lv, h, lv.bc.face_start.copy(), method=method, linear=linear, tol=tol, rtol=rtol,
                        budget=max_iterations - used, continuation=continuation, stats=stats, step_cap=0.0)

    for k, lv in enumerate(levels):
        final = k == len(levels) - 1
        if out is None and start is not None:
            h, face = start[1].copy(), start[2].copy()   # the coarsest level's own saturated solve
        elif out is None:
            h = h0[:lv.mesh.n_nodes].copy()           # injection: coarse nodes come first
            face = act[:lv.mesh.n_nodes][lv.bc.face_nodes]
        else:
            h = lv.P @ out.h                           # prolong the heads and the outlets' state
            ac = np.zeros(levels[k - 1].mesh.n_nodes)
            ac[levels[k - 1].bc.face_nodes[out.face]] = 1.0
            face = (lv.P @ ac)[lv.bc.face_nodes] > 0.5
        left = max_iterations - used
        budget = left if final else left - max(2, left // 3)
        if budget <= 0:
            continue
        t1 = time.perf_counter()
        f0 = stats["factorizations"]
        out = _iterate(section, lv, h, face, method=method, linear=linear, tol=tol,
                       rtol=rtol if final else COARSE_RTOL, budget=budget, continuation=continuation and k == 0,
                       stats=stats, step_cap=STEP_CAP if k > 0 else 0.0)
        used += out.iterations
        history += out.history
        per_level.append({"nodes": int(lv.mesh.n_nodes), "order": int(lv.mesh.order), "iterations": out.iterations,
                          "factorizations": stats["factorizations"] - f0, "converged": out.converged,
                          "relative_residual": float(f"{out.rel:.3e}"), "time_s": round(time.perf_counter() - t1, 4)})
        if k > 0 and not out.converged and out.floor <= FLOOR_MAX and max_iterations - used > 0:
            # a level started from a prolonged solution did not converge: go to the finest level and start it
            # afresh (its own saturated solution, continuation), with what is left of the budget
            per_level[-1]["abandoned"] = True
            lv = levels[-1]
            t1 = time.perf_counter()
            f0 = stats["factorizations"]
            out = restart(lv)
            used += out.iterations
            history += out.history
            per_level.append({"nodes": int(lv.mesh.n_nodes), "order": int(lv.mesh.order),
                              "iterations": out.iterations, "factorizations": stats["factorizations"] - f0,
                              "converged": out.converged, "relative_residual": float(f"{out.rel:.3e}"),
                              "time_s": round(time.perf_counter() - t1, 4), "restart": True})
            break
    converged = out.converged
    if not converged:
        _, det = fem.jacobians(mesh.points, mesh.cells)
        smallest = float(np.sqrt(2.0 * np.abs(det).min()))
        if "cap" in out.reason:
            advice = f"raise solver.max_iterations (now {max_iterations})"
        else:
            advice = (f"raise solver.max_iterations (now {max_iterations}), use a coarser local mesh size (the "
                      f"smallest element is {smallest:.3g} m), or try \"solver\": {{\"nonlinear\": \"picard\"}}"
                      if method == "newton" else
                      f"raise solver.max_iterations (now {max_iterations}), use a coarser local mesh size (the "
                      f"smallest element is {smallest:.3g} m), or the default \"nonlinear\": \"newton\"")
        log.warning("unconfined (phreatic-surface) iteration did not converge in %d iterations: %s; relative "
                    "flow residual %.2e (target %.0e); the best iterate is returned, marked unconverged; to "
                    "change: %s", used, out.reason, out.rel, rtol, advice)
    fixed = np.sort(np.concatenate([bc.head_nodes, bc.face_nodes[out.face]]))
    info = {
        "method": method, "iterations": used, "converged": bool(converged),
        "relative_residual": out.rel, "round_off_floor": float(f"{out.floor:.3e}"), "stop_reason": out.reason,
        "advice": "" if converged else advice,
        "residual_history": [float(f"{v:.3e}") for v in history],
        "levels": per_level,
        "factorizations": stats["factorizations"], "linear_solves": stats["linear_solves"],
        "krylov_iterations": stats["krylov_iterations"],
        "line_search_cuts": stats["line_search_cuts"], "active_set_changes": stats["active_set_changes"],
        "chord_steps": stats["chord_steps"], "continuation_stages": stats["stages"],
        "picard_steps": stats["picard_steps"], "failed_line_searches": stats["failed_line_searches"],
        "restarts": stats["restarts"],
        "kr_model": {"default": "exponential", "delta_factor": DELTA_FACTOR, "kr_min": KR_MIN_DEFAULT,
                     "van_genuchten_zones": [section.zone_names[i] for i in np.flatnonzero(lv.model.vg)]},
        "dry_elements": int((out.kr < 0.5).sum()),
        "times_s": {"total": round(time.perf_counter() - t0, 4), "factor": round(stats["factor_s"], 4),
                    "solve": round(stats["solve_s"], 4)},
    }
    return UnconfinedSolution(h=out.h, matrix=out.A, kr=out.kr, fixed=fixed, face_active=out.face,
                              converged=converged, info=info)
