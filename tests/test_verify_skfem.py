"""An independent finite-element library on the same problem and the same mesh.

Source: scikit-fem (Gustafsson, T. and McBain, G.D. (2020), scikit-fem: A Python package for finite
element assembly, Journal of Open Source Software 5(52), 2369), a test-only dependency.  It assembles
-div(K grad h) = 0 with its own P1 / P2 Lagrange elements, quadrature and DOF numbering, zone by zone
with each zone's full conductivity tensor; the prescribed heads are the ones seepfe ended with (head
boundaries and the converged seepage-face nodes).  Heads and nodal reactions must agree to the
tolerance of the direct solvers (1e-9 relative; measured 8e-13 (P1) and 2.4e-12 (P2) in heads,
1.3e-12 and 3.9e-12 in reactions).

The section: a clay blanket over anisotropic sand with a tilted principal direction over gravel with
another tilt (four zones with a T-junction),
a sheet pile through the blanket, a river head and a landside seepage face.  It stays below y = 0
with heads >= 0, so it is fully saturated.
"""

import numpy as np
import pytest
from skfem import Basis, BilinearForm, ElementTriP1, ElementTriP2, MeshTri, condense, solve

import seepfe

SECTION = {
    "title": "multi-zone anisotropic section with a sheet pile (verification)",
    "materials": {"clay": {"k": 2e-7},
                  "sand": {"kx": 1e-4, "ky": 2.5e-5, "angle": 15.0},
                  "gravel": {"kx": 5e-3, "ky": 1e-3, "angle": -30.0}},
    "zones": [{"name": "blanket", "material": "clay", "polygon": [[-60, -2], [60, -2], [60, 0], [-60, 0]]},
              {"name": "sand", "material": "sand", "polygon": [[-60, -12], [60, -12], [60, -2], [-60, -2]]},
              {"name": "gravel west", "material": "gravel", "polygon": [[-60, -20], [10, -20], [10, -12], [-60, -12]]},
              {"name": "gravel east", "material": "sand", "polygon": [[10, -20], [60, -20], [60, -12], [10, -12]]}],
    "boundaries": [{"name": "river", "polyline": [[-60, 0], [-15, 0]], "head": 4.0},
                   {"name": "landside", "polyline": [[-15, 0], [60, 0]], "seepage_face": True}],
    "barriers": [{"name": "sheet pile", "polyline": [[-15, 0], [-15, -8]]}],
    "mesh": {"size": 2.5, "refine": [{"point": [-15, -8], "size": 0.5}]},
}


def _skfem_heads(result):
    m = result.mesh
    nv = m.n_vertices
    mesh = MeshTri(m.points[:nv].T.copy(), m.triangles.T.copy())
    elem = ElementTriP1() if m.order == 1 else ElementTriP2()
    Kz = result.section.zone_tensors()
    A = None
    for z in range(len(Kz)):
        kxx, kxy, kyy = Kz[z][0, 0], Kz[z][0, 1], Kz[z][1, 1]

        @BilinearForm
        def darcy(u, v, w, kxx=kxx, kxy=kxy, kyy=kyy):
            return (kxx * u.grad[0] * v.grad[0] + kxy * (u.grad[0] * v.grad[1] + u.grad[1] * v.grad[0])
                    + kyy * u.grad[1] * v.grad[1])

        basis = Basis(mesh, elem, elements=np.flatnonzero(m.zone == z))
        Az = darcy.assemble(basis)
        A = Az if A is None else A + Az
    # seepfe node -> scikit-fem DOF: vertices are nodal DOFs; P2 midpoints are the facet DOFs
    perm = np.empty(m.n_nodes, dtype=np.int64)
    full = Basis(mesh, elem)
    perm[:nv] = full.nodal_dofs[0]
    if m.order == 2:
        nf = mesh.facets.shape[1]
        fkey = np.sort(mesh.facets, axis=0)
        fkey = fkey[0].astype(np.int64) * nv + fkey[1]
        order = np.argsort(fkey)
        c = m.cells
        for k, (i, j) in enumerate(((0, 1), (1, 2), (2, 0))):
            a, b = np.minimum(c[:, i], c[:, j]), np.maximum(c[:, i], c[:, j])
            f = order[np.searchsorted(fkey[order], a.astype(np.int64) * nv + b)]
            perm[c[:, 3 + k]] = full.facet_dofs[0, f]
        assert nf == m.n_nodes - nv
    x = np.zeros(A.shape[0])
    D = perm[result.fixed]
    x[D] = result.h[result.fixed]
    x = solve(*condense(A, np.zeros(A.shape[0]), x=x, D=D))
    return x[perm], (A @ x)[perm]


@pytest.mark.parametrize("order", [1, 2])
def test_same_heads_and_reactions_as_scikit_fem(order):
    r = seepfe.solve(SECTION, order=order)
    assert r.mesh.n_elements < 5000 and len(r.mesh.barrier_edges) > 0
    assert r.balance["relative_error"] < 1e-8
    h, react = _skfem_heads(r)
    H = 4.0
    assert np.abs(h - r.h).max() < 1e-9 * H
    scale = np.abs(r.reactions[r.fixed]).max()
    assert np.abs(react[r.fixed] - r.reactions[r.fixed]).max() < 1e-9 * scale
    # water enters at the river and leaves at the landside seepage face
    assert r.boundary_flow("river") > 0 > r.boundary_flow("landside")
