"""An independent finite-element library on the same problem and the same mesh.

Source: scikit-fem (Gustafsson, T. and McBain, G.D. (2020), scikit-fem: A Python package for finite
element assembly, Journal of Open Source Software 5(52), 2369), a test-only dependency.  It assembles
-div(K grad h) = 0 with its own P1 / P2 Lagrange elements, quadrature and DOF numbering, zone by zone
with each zone's full conductivity tensor.  The test builds its own inputs, apart from seepfe's:

* the tensors from the materials' kx, ky, angle by the published rotation convention,
  K = R diag(kx, ky) R^T with R the counter-clockwise rotation by the angle of kx from +x (Bear, J.
  (1972), Dynamics of Fluids in Porous Media, ch. 5; from memory), one angle positive, one negative;
* the prescribed heads from the geometry: h = 4 m on the river (y = 0, left of the pile) and h = y = 0
  on the whole landside seepage face (y = 0, right of the pile; water leaves all along it here), the
  node doubled at the pile's head assigned by the side its triangles lie on.

Heads and nodal reactions must agree to the tolerance of the direct solvers (1e-9 relative; measured
8e-13 (P1) and 2.4e-12 (P2) in heads, 1.3e-12 and 3.9e-12 in reactions).  The angle's sign flipped or
dropped in seepfe moves the heads by 6 cm (sign flipped) or 6 mm (absolute value; only the gravel's
negative angle changes), six orders of magnitude above the tolerance.

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


def bear_tensor(kx, ky, angle_deg):
    """K = R diag(kx, ky) R^T, R the counter-clockwise rotation by the angle of kx from +x (Bear 1972)."""
    a = np.radians(angle_deg)
    c, s = np.cos(a), np.sin(a)
    return np.array([[kx * c * c + ky * s * s, (kx - ky) * s * c],
                     [(kx - ky) * s * c, kx * s * s + ky * c * c]])


def _own_tensors(zone_names):
    """(Z, 2, 2) tensors of the zones in the mesh's zone order, from SECTION's materials."""
    mat_of = {z["name"]: SECTION["materials"][z["material"]] for z in SECTION["zones"]}
    out = []
    for name in zone_names:
        m = mat_of[name]
        out.append(m["k"] * np.eye(2) if "k" in m else bear_tensor(m["kx"], m["ky"], m.get("angle", 0.0)))
    return np.array(out)


def _own_prescribed_heads(m, x_pile=-15.0, H=4.0):
    """Nodes on y = 0 and their heads: H left of the pile, y (= 0) right of it (the seepage face)."""
    P = m.points
    top = np.flatnonzero(np.abs(P[:, 1]) < 1e-9)
    # mean x of the centroids of the elements around each node: tells the two copies of the pile head apart
    cx = P[m.cells].mean(axis=1)[:, 0]
    side = np.bincount(m.cells.ravel(), np.repeat(cx, m.cells.shape[1]), m.n_nodes)
    side /= np.bincount(m.cells.ravel(), minlength=m.n_nodes)
    x = np.where(np.abs(P[top, 0] - x_pile) < 1e-9, side[top], P[top, 0])
    return top, np.where(x < x_pile, H, P[top, 1])


def _skfem_heads(result, Kz, D, values):
    """scikit-fem's heads and reactions on seepfe's mesh, with tensors Kz per zone and h = values at nodes D."""
    m = result.mesh
    nv = m.n_vertices
    mesh = MeshTri(m.points[:nv].T.copy(), m.triangles.T.copy())
    elem = ElementTriP1() if m.order == 1 else ElementTriP2()
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
    x[perm[D]] = values
    x = solve(*condense(A, np.zeros(A.shape[0]), x=x, D=perm[D]))
    return x[perm], (A @ x)[perm]


@pytest.mark.parametrize("order", [1, 2])
def test_same_heads_and_reactions_as_scikit_fem(order):
    r = seepfe.solve(SECTION, order=order)
    assert r.mesh.n_elements < 5000 and len(r.mesh.barrier_edges) > 0
    assert r.balance["relative_error"] < 1e-8
    D, values = _own_prescribed_heads(r.mesh)
    # seepfe prescribed the same heads at the same nodes (head boundary and the converged seepage face)
    assert np.array_equal(np.sort(D), np.sort(r.fixed))
    assert np.allclose(r.h[D], values, rtol=0, atol=1e-12)
    Kz = _own_tensors(r.section.zone_names)
    assert Kz[2][0, 1] < 0 < Kz[1][0, 1]                    # one angle negative, one positive
    h, react = _skfem_heads(r, Kz, D, values)
    H = 4.0
    err = float(np.abs(h - r.h).max())
    assert err < 1e-9 * H
    scale = np.abs(r.reactions[r.fixed]).max()
    assert np.abs(react[r.fixed] - r.reactions[r.fixed]).max() < 1e-9 * scale
    # water enters at the river and leaves at the landside seepage face
    assert r.boundary_flow("river") > 0 > r.boundary_flow("landside")
