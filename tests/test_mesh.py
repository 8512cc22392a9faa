"""The mesh: reproducible, conformal across zones (T-junctions included), the outline tagged, gmsh
state released after every call, and the same mesh from a worker process."""

import multiprocessing as mp

import numpy as np
import pytest

import seepfe
from seepfe.mesh import make_mesh

# an invented levee whose embankment meets the foundation along part of its top edge (T-junctions)
SECTION = {
    "materials": {"fill": {"k": 1e-7}, "sand": {"kx": 1e-4, "ky": 2.5e-5, "angle": 15.0}},
    "zones": [{"name": "embankment", "material": "fill", "polygon": [[-12, 0], [12, 0], [2, 4], [-2, 4]]},
              {"name": "foundation", "material": "sand", "polygon": [[-40, 0], [40, 0], [40, -10], [-40, -10]]}],
    "boundaries": [{"name": "river", "polyline": [[-40, 0], [-12, 0], [-6, 2.4]], "head": 3.0},
                   {"name": "landside", "polyline": [[12, 0], [40, 0]], "seepage_face": True}],
    "mesh": {"size": 2.0, "refine": [{"point": [12, 0], "size": 0.3}]},
}


def _mesh_arrays(order=1):
    m = make_mesh(seepfe.load_section(SECTION), order=order)
    return m.points, m.cells, m.zone, m.edges, m.edge_boundary


def test_same_input_gives_the_same_mesh_here_and_in_a_worker():
    a = _mesh_arrays()
    b = _mesh_arrays()
    with mp.get_context("spawn").Pool(1) as pool:
        c = pool.apply(_mesh_arrays)
    for x, y, z in zip(a, b, c):
        assert np.array_equal(x, y) and np.array_equal(x, z)


def test_gmsh_is_released_after_meshing():
    import gmsh
    make_mesh(seepfe.load_section(SECTION))
    assert not gmsh.isInitialized()


@pytest.mark.parametrize("order", [1, 2])
def test_mesh_is_conformal_and_covers_the_section(order):
    sec = seepfe.load_section(SECTION)
    m = make_mesh(sec, order=order)
    tri = m.triangles
    p = m.points
    # counter-clockwise, positive areas summing to the section's area (geometry, exact)
    a = 0.5 * ((p[tri[:, 1], 0] - p[tri[:, 0], 0]) * (p[tri[:, 2], 1] - p[tri[:, 0], 1])
               - (p[tri[:, 2], 0] - p[tri[:, 0], 0]) * (p[tri[:, 1], 1] - p[tri[:, 0], 1]))
    assert a.min() > 0
    assert a.sum() == pytest.approx(sec.outline.area, rel=1e-12)
    # conformal: every edge is shared by two triangles except the outline edges, used once
    e = np.sort(np.concatenate([tri[:, [0, 1]], tri[:, [1, 2]], tri[:, [2, 0]]]), axis=1)
    _, counts = np.unique(e, axis=0, return_counts=True)
    assert set(counts.tolist()) <= {1, 2}
    assert (counts == 1).sum() == len(m.edges)
    outline_len = np.linalg.norm(p[m.edges[:, 1]] - p[m.edges[:, 0]], axis=1).sum()
    assert outline_len == pytest.approx(sec.outline.length, rel=1e-12)
    # tagged outline: the river and landside polylines' lengths (geometry, exact)
    for bi, L in ((0, 28 + np.hypot(6, 2.4)), (1, 28.0)):
        on = m.edge_boundary == bi
        assert np.linalg.norm(p[m.edges[on, 1]] - p[m.edges[on, 0]], axis=1).sum() == pytest.approx(L, rel=1e-12)
    # both zones present, statistics reported
    assert set(np.unique(m.zone)) == {0, 1}
    for k in ("nodes", "elements", "min_angle_deg", "worst_quality"):
        assert k in m.stats
    assert 0 < m.stats["worst_quality"] <= 1 and 0 < m.stats["min_angle_deg"] < 60


def test_refinement_makes_small_elements_where_asked():
    m = make_mesh(seepfe.load_section(SECTION), order=1)
    c = m.points[m.triangles].mean(axis=1)
    u = m.points[m.triangles[:, 1]] - m.points[m.triangles[:, 0]]
    v = m.points[m.triangles[:, 2]] - m.points[m.triangles[:, 0]]
    h = np.sqrt(np.abs(u[:, 0] * v[:, 1] - u[:, 1] * v[:, 0]))          # sqrt of twice the area, m
    near = np.linalg.norm(c - [12, 0], axis=1) < 0.5
    far = np.linalg.norm(c - [12, 0], axis=1) > 15
    assert h[near].mean() < 0.6 and h[far].mean() > 1.5


def test_split_keeps_the_mesh_nested_and_the_same_size():
    sec = seepfe.load_section(SECTION)
    m0 = make_mesh(sec, order=1, size=2.0, split=0)
    m1 = make_mesh(sec, order=1, size=2.0, split=1)
    # the split mesh is made at 4 m and split once: about as many triangles as the direct 2 m mesh
    assert 0.5 < m1.n_elements / m0.n_elements < 2.0
    assert m1.stats["splits"] == 1 and m1.n_elements % 4 == 0
