"""Finite-element kernels for steady Darcy flow, -div(K grad h) = 0, on P1 and P2 triangles.

Everything is vectorised over elements: the only Python loops run over quadrature points and the
local basis (at most 6 x 6).  Local matrices go to CSR through COO (duplicates summed).

Local node order (P2): vertices 0, 1, 2 counter-clockwise, then midpoints of edges 01, 12, 20.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

__all__ = ["shape", "shape_grad_ref", "jacobians", "gradients", "element_matrices", "assemble",
           "edge_load", "QUAD"]

# Strang-Fix 3-point rule on the reference triangle (degree 2): points (xi, eta), weights sum to 1/2
QUAD = (np.array([[1 / 6, 1 / 6], [2 / 3, 1 / 6], [1 / 6, 2 / 3]]), np.array([1 / 6, 1 / 6, 1 / 6]))


def shape(order: int, xi: np.ndarray) -> np.ndarray:
    """Shape functions at reference points xi (n, 2) -> (n, nloc)."""
    x, y = xi[:, 0], xi[:, 1]
    l0, l1, l2 = 1.0 - x - y, x, y
    if order == 1:
        return np.stack([l0, l1, l2], axis=1)
    return np.stack([l0 * (2 * l0 - 1), l1 * (2 * l1 - 1), l2 * (2 * l2 - 1),
                     4 * l0 * l1, 4 * l1 * l2, 4 * l2 * l0], axis=1)


def shape_grad_ref(order: int, xi: np.ndarray) -> np.ndarray:
    """Reference gradients d/dxi, d/deta at points xi (n, 2) -> (n, nloc, 2)."""
    n = len(xi)
    if order == 1:
        g = np.array([[-1.0, -1.0], [1.0, 0.0], [0.0, 1.0]])
        return np.broadcast_to(g, (n, 3, 2)).copy()
    x, y = xi[:, 0], xi[:, 1]
    l0 = 1.0 - x - y
    dl = np.array([[-1.0, -1.0], [1.0, 0.0], [0.0, 1.0]])  # d(l0, l1, l2)/d(xi, eta)
    L = np.stack([l0, x, y], axis=1)                        # (n, 3)
    out = np.empty((n, 6, 2))
    for i in range(3):
        out[:, i] = (4 * L[:, i] - 1)[:, None] * dl[i]
    for k, (i, j) in enumerate(((0, 1), (1, 2), (2, 0))):
        out[:, 3 + k] = 4 * (L[:, i][:, None] * dl[j] + L[:, j][:, None] * dl[i])
    return out


def jacobians(points: np.ndarray, cells: np.ndarray):
    """Affine map of each triangle: (E, 2, 2) inverse Jacobian and (E,) determinant (= 2 area)."""
    p0, p1, p2 = points[cells[:, 0]], points[cells[:, 1]], points[cells[:, 2]]
    J = np.stack([p1 - p0, p2 - p0], axis=2)               # columns d x / d xi, d x / d eta
    det = J[:, 0, 0] * J[:, 1, 1] - J[:, 0, 1] * J[:, 1, 0]
    inv = np.empty_like(J)
    inv[:, 0, 0] = J[:, 1, 1] / det
    inv[:, 0, 1] = -J[:, 0, 1] / det
    inv[:, 1, 0] = -J[:, 1, 0] / det
    inv[:, 1, 1] = J[:, 0, 0] / det
    return inv, det


def gradients(order: int, inv: np.ndarray, xi: np.ndarray) -> np.ndarray:
    """Physical shape-function gradients at reference points: (E, n, nloc, 2), 1/m."""
    g = shape_grad_ref(order, xi)                           # (n, nloc, 2)
    n, nloc = g.shape[:2]
    return np.matmul(g.reshape(1, -1, 2), inv).reshape(len(inv), n, nloc, 2)


def element_matrices(points: np.ndarray, cells: np.ndarray, K: np.ndarray, order: int,
                     chunk: int = 200_000) -> np.ndarray:
    """Local conductance matrices int(grad N^T K grad N) dA, (E, nloc, nloc), m/s * m2 / m2 = m/s.

    K is (E, 2, 2) in m/s.  P1 is one einsum; P2 uses the 3-point rule (exact on straight edges).
    """
    if order == 1:
        return _p1_matrices(points, cells, K)
    inv, det = jacobians(points, cells)
    xi, w = QUAD
    nq = len(w)
    # reference gradients ordered (node, point, component) so one matmul gives (E, 6, 2q) directly
    g = shape_grad_ref(2, xi).transpose(1, 0, 2).reshape(1, -1, 2)
    wq = np.repeat(w, 2)                                     # weight of each (point, component) column
    out = np.empty((len(cells), 6, 6))
    for s in range(0, len(cells), chunk):
        e = slice(s, s + chunk)
        G = np.matmul(g, inv[e])                             # (e, 6q, 2) physical gradients
        KG = np.matmul(G, K[e].transpose(0, 2, 1))           # K grad N at each point
        G = G.reshape(-1, 6, 2 * nq)
        KG = KG.reshape(-1, 6, 2 * nq) * wq
        KG *= det[e, None, None]
        np.matmul(G, KG.transpose(0, 2, 1), out=out[e])      # sum over points and components
    return out


def _p1_matrices(points: np.ndarray, cells: np.ndarray, K: np.ndarray) -> np.ndarray:
    """P1 conductance matrices from the edge vectors: b_i, c_i = 2A dN_i/dx, 2A dN_i/dy, so that
    Ke_ij = (b_i, c_i) K (b_j, c_j)^T / (4A) (constant gradients, exact)."""
    x, y = points[:, 0], points[:, 1]
    x0, x1, x2 = x[cells[:, 0]], x[cells[:, 1]], x[cells[:, 2]]
    y0, y1, y2 = y[cells[:, 0]], y[cells[:, 1]], y[cells[:, 2]]
    b = np.stack([y1 - y2, y2 - y0, y0 - y1], axis=1)        # (E, 3)
    c = np.stack([x2 - x1, x0 - x2, x1 - x0], axis=1)
    s = 0.5 / ((x1 - x0) * (y2 - y0) - (x2 - x0) * (y1 - y0))   # 1 / (4A), det = 2A
    kb = (K[:, 0, 0] * s)[:, None] * b + (K[:, 0, 1] * s)[:, None] * c
    kc = (K[:, 1, 0] * s)[:, None] * b + (K[:, 1, 1] * s)[:, None] * c
    return b[:, :, None] * kb[:, None, :] + c[:, :, None] * kc[:, None, :]


def assemble(cells: np.ndarray, Ke: np.ndarray, n: int) -> sp.csr_matrix:
    """Global CSR matrix from local matrices (duplicates summed)."""
    nl = cells.shape[1]
    # 32-bit indices where they fit: half the index traffic, and scipy keeps them as they are
    c = cells.astype(np.int32, copy=False) if n < 2**31 - 1 else cells
    rows = np.repeat(c, nl, axis=1).ravel()
    cols = np.tile(c, (1, nl)).ravel()
    A = sp.coo_matrix((Ke.ravel(), (rows, cols)), shape=(n, n)).tocsr()
    A.sum_duplicates()
    return A


def edge_load(points: np.ndarray, edges: np.ndarray, q: np.ndarray, n: int) -> np.ndarray:
    """Consistent nodal inflow (m3/s per m) of a uniform normal inflow q (m/s) on each edge.

    P1 edges (a, b): q L / 2 each. P2 edges (a, b, m): q L / 6 at the ends, 2 q L / 3 at the midpoint.
    """
    L = np.linalg.norm(points[edges[:, 1]] - points[edges[:, 0]], axis=1)
    f = np.zeros(n)
    if edges.shape[1] == 2:
        np.add.at(f, edges[:, 0], 0.5 * q * L)
        np.add.at(f, edges[:, 1], 0.5 * q * L)
    else:
        np.add.at(f, edges[:, 0], q * L / 6)
        np.add.at(f, edges[:, 1], q * L / 6)
        np.add.at(f, edges[:, 2], 2 * q * L / 3)
    return f
