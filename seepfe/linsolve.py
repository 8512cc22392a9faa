"""Sparse linear solvers for the condensed (symmetric positive-definite) conductance system.

``direct``: sparse LU (SuperLU with COLAMD ordering), or CHOLMOD where scikit-sparse is installed.
``amg``: smoothed-aggregation algebraic multigrid (pyamg) as a preconditioner for conjugate gradients.
``auto``: direct up to :data:`AMG_ABOVE` unknowns, AMG above (measured in scripts/bench.py).

A factorisation is kept in the returned object so that new right-hand sides (seepage-face passes,
repeated loads) cost only the triangular solves.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from .errors import SolverError

__all__ = ["factorize", "AMG_ABOVE"]

#: unknowns above which ``auto`` picks algebraic multigrid
AMG_ABOVE = 300_000


class _Direct:
    method = "direct"

    def __init__(self, A: sp.csr_matrix):
        self.backend = "superlu-colamd"
        try:
            from sksparse.cholmod import cholesky  # optional, faster where installed
            self._f = cholesky(A.tocsc())
            self.backend = "cholmod"
            self._solve = self._f
        except ImportError:
            try:
                self._f = spla.splu(A.tocsc(), permc_spec="COLAMD")
            except RuntimeError as e:
                raise SolverError(f"the conductance matrix is singular ({e}): is part of the section cut off "
                                  "from every head boundary?") from None
            self._solve = self._f.solve
        self.iterations = 0

    def solve(self, b: np.ndarray) -> np.ndarray:
        x = self._solve(b)
        if not np.all(np.isfinite(x)):
            raise SolverError("the direct solve returned non-finite heads: the system is singular")
        return x


class _AMG:
    method = "amg"

    def __init__(self, A: sp.csr_matrix, tol: float):
        import pyamg
        self.backend = "pyamg-sa-cg"
        self.A = A
        self.tol = tol
        # symmetric strength with a small threshold copes with kx/ky up to about 10 (bench.py)
        self.ml = pyamg.smoothed_aggregation_solver(A, symmetry="symmetric", max_coarse=500)
        self.iterations = 0

    def solve(self, b: np.ndarray) -> np.ndarray:
        res: list[float] = []
        x = self.ml.solve(b, tol=self.tol, accel="cg", maxiter=500, residuals=res)
        self.iterations += len(res) - 1
        rel = res[-1] / max(res[0], 1e-300) if res else 0.0
        if not np.isfinite(rel) or rel > max(1e3 * self.tol, 1e-6):
            raise SolverError(f"algebraic multigrid did not converge (relative residual {rel:.2e} after "
                              f"{len(res) - 1} iterations); try \"solver\": {{\"linear\": \"direct\"}}")
        return x


def factorize(A: sp.csr_matrix, method: str = "auto", tol: float = 1e-10):
    """Prepare a solver for A; returns an object with ``solve(b)``, ``method`` and ``backend``."""
    if A.shape[0] == 0:
        raise SolverError("no unknowns left: every node has a prescribed head")
    if method == "auto":
        method = "amg" if A.shape[0] > AMG_ABOVE else "direct"
    if method == "direct":
        return _Direct(A)
    if method == "amg":
        return _AMG(A, tol)
    raise SolverError(f"unknown linear solver '{method}' (use auto, direct or amg)")
