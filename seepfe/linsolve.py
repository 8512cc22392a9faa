"""Sparse linear solvers for the condensed (symmetric positive-definite) conductance system.

``direct``: a sparse Cholesky factorisation: CHOLMOD (supernodal, through cvxopt's binary wheels, or
scikit-sparse where installed), else qdldl's LDL^T (its own approximate-minimum-degree ordering); SuperLU
(COLAMD ordering) when none is importable or the factorisation meets a zero or negative pivot (the matrix
is then not positive definite: a part of the section cut off from every head boundary, or a contrast
beyond double precision). Measured side by side on the P2 matrix of a levee at 1e5 unknowns
(scripts/bench.py): CHOLMOD 2.5x, qdldl 1.8-1.9x faster than SuperLU COLAMD.
``amg``: smoothed-aggregation algebraic multigrid (pyamg) as a preconditioner for conjugate gradients.
``auto``: direct up to :data:`AMG_ABOVE` unknowns, AMG above (measured in scripts/bench.py).

A factorisation is kept in the returned object so that new right-hand sides (seepage-face passes,
repeated loads) cost only the triangular solves.

:func:`one_thread` limits BLAS and OpenMP pools to one thread for the solver's small dense operations
(GMRES orthogonalisation, sampling of the relative conductivity) and restores them afterwards; the
process environment is never changed.
"""

from __future__ import annotations

import contextlib

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from .errors import SolverError

__all__ = ["factorize", "AMG_ABOVE", "one_thread", "spd_factor"]

#: unknowns above which ``auto`` picks algebraic multigrid (scripts/bench.py: with the LDL^T the direct
#: solve stays ahead of smoothed aggregation + CG, and uses less than 2 GiB, up to about this size)
AMG_ABOVE = 600_000


@contextlib.contextmanager
def one_thread():
    """BLAS/OpenMP pools limited to one thread inside the block (threadpoolctl), restored afterwards.

    Small dense products (tens x tens of thousands) run 2-5x slower with several OpenBLAS threads on shared
    cores (docs/unconfined.md); the caller's settings and environment variables are left as they were."""
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:          # a dependency; without it the pools keep their settings
        yield
        return
    with threadpool_limits(limits=1):
        yield


class _LDL:
    """qdldl's LDL^T of a symmetric positive-definite CSC matrix (upper triangle passed)."""

    def __init__(self, A: sp.spmatrix):
        import qdldl
        self._f = qdldl.Solver(sp.triu(A, format="csc"), upper=True)     # the upper triangle is all it reads

    def solve(self, b):
        return self._f.solve(np.ascontiguousarray(b, dtype=float))


class _CvxCholmod:
    """CHOLMOD's supernodal Cholesky factorisation through cvxopt (GPL-3, binary wheels)."""

    def __init__(self, A: sp.spmatrix):
        from cvxopt import cholmod, spmatrix
        C = sp.tril(A, format="coo")                                  # CHOLMOD reads the lower triangle
        self._M = spmatrix(C.data, C.row.astype(np.int64), C.col.astype(np.int64), size=A.shape)
        self._F = cholmod.symbolic(self._M)
        cholmod.numeric(self._M, self._F)          # ArithmeticError when not positive definite
        self._cholmod = cholmod

    def solve(self, b):
        from cvxopt import matrix
        b = np.asarray(b, dtype=float)
        x = matrix(np.ascontiguousarray(b.reshape(len(b), -1), dtype=float))
        self._cholmod.solve(self._F, x)
        return np.asarray(x).reshape(b.shape)


def spd_factor(A: sp.spmatrix):
    """Factorise a symmetric positive-definite matrix; returns (object with ``solve(b)``, backend name).

    CHOLMOD (cvxopt, or scikit-sparse) when importable, else qdldl's LDL^T, else (or when the factorisation
    meets a zero or negative pivot) SuperLU with COLAMD. Raises SolverError when the matrix is singular."""
    try:
        from sksparse.cholmod import CholmodNotPositiveDefiniteError, cholesky   # optional, faster where installed
    except ImportError:
        pass
    else:
        try:
            return cholesky(A.tocsc()), "cholmod"
        except CholmodNotPositiveDefiniteError:
            pass
    try:
        return _CvxCholmod(A), "cholmod-cvxopt"
    except ImportError:
        pass
    except (ArithmeticError, ValueError):      # not positive definite: try the LDL^T, then SuperLU
        pass
    try:
        f = _LDL(A)
    except ImportError:
        f = None
    except (ValueError, RuntimeError):       # zero pivot: not positive definite
        f = None
    if f is not None:
        # qdldl does not test the signs of D; a negative pivot shows as a residual far above round-off
        return f, "qdldl-ldlt"
    try:
        return spla.splu(A.tocsc(), permc_spec="COLAMD"), "superlu-colamd"
    except RuntimeError as e:
        raise SolverError(f"the conductance matrix is singular ({e}): is part of the section cut off "
                          "from every head boundary?") from None


class _Direct:
    method = "direct"

    def __init__(self, A: sp.csr_matrix):
        self.A = A
        f, self.backend = spd_factor(A)
        self._solve = f if self.backend == "cholmod" else f.solve
        self._amax = float(np.abs(A.data).max()) if A.nnz else 0.0
        self.iterations = 0

    def solve(self, b: np.ndarray) -> np.ndarray:
        x = self._solve(b)
        if not np.all(np.isfinite(x)):
            raise SolverError("the direct solve returned non-finite heads: the system is singular")
        if self.backend in ("qdldl-ldlt", "cholmod-cvxopt"):
            # no pivoting: check the residual once per solve (a product with A, ~1 % of the cost)
            r = float(np.abs(self.A @ x - b).max())
            scale = float(np.abs(b).max()) + self._amax * float(np.abs(x).max())
            if not r <= 1e-8 * max(scale, 1e-300):
                try:
                    self._solve = spla.splu(self.A.tocsc(), permc_spec="COLAMD").solve
                except RuntimeError as e:
                    raise SolverError(f"the conductance matrix is singular ({e}): is part of the section cut "
                                      "off from every head boundary?") from None
                self.backend = "superlu-colamd"
                return self.solve(b)
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
