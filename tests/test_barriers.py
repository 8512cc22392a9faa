"""Zero-thickness impervious barriers (sheet piles, thin cutoff walls): section key "barriers".

Checks: validation messages, the node doubling along a barrier (single node at a free tip, copies at
the same place), P1/P2 and split meshes, no flow across a barrier, and the head jump it carries.
The physics is checked against published solutions in test_verify_harr.py.
"""

import copy

import numpy as np
import pytest

import seepfe

BASE = {
    "materials": {"clay": {"k": 1e-7}, "sand": {"kx": 4e-5, "ky": 1e-5, "angle": 10.0}},
    "zones": [{"name": "blanket", "material": "clay", "polygon": [[-30, -2], [30, -2], [30, 0], [-30, 0]]},
              {"name": "sand", "material": "sand", "polygon": [[-30, -12], [30, -12], [30, -2], [-30, -2]]}],
    "boundaries": [{"name": "up", "polyline": [[-30, 0], [0, 0]], "head": 3.0},
                   {"name": "down", "polyline": [[0, 0], [30, 0]], "head": 0.5}],
    "barriers": [{"name": "pile", "polyline": [[0, 0], [0, -6]]},
                 {"name": "inner", "polyline": [[5, -8], [15, -8], [20, -5]]}],
    "mesh": {"size": 2.0},
}


def _with(poly, name="inner"):
    sec = copy.deepcopy(BASE)
    if poly == [[0, 0], [0, -11.9]]:   # a full cut at x = 25 leaves the right part with no boundary
        sec["boundaries"][1]["polyline"] = [[0, 0], [20, 0]]
        sec["barriers"].append({"name": "cut", "polyline": [[25, 0], [25, -12]]})
    for b in sec["barriers"]:
        if b["name"] == name:
            b["polyline"] = poly
    return sec


@pytest.mark.parametrize("poly, words", [
    ([[0, -1], [0, -20]], "barrier 'pile': polyline leaves the section near (0, -12)"),
    ([[2, -1], [8, -5], [8, -1], [2, -5]], "barrier 'pile': polyline crosses itself near (5, -3)"),
    ([[-30, -5], [-30, -8]], "barrier 'pile': runs along the outline"),
    ([[-10, -5], [-30, -5], [-30, -8]], "barrier 'pile': runs along the outline"),
    ([[-10, -5], [30, -5], [10, -7]], "barrier 'pile': touches the outline of the section near (30, -5)"),
    ([[4, -4], [10, -8]], "barriers 'pile' and 'inner' cross or touch near"),
    ([[1, -1], [1, -1]], "barrier 'pile': polyline has zero length"),
    ([[0, 0], [0, -11.9]], "barrier 'cut' cuts off part of the section"),
])
def test_bad_barrier_gives_one_line_error(poly, words):
    with pytest.raises(seepfe.SectionError) as e:
        seepfe.solve(_with(poly, "pile"))
    msg = str(e.value)
    assert words in msg and "\n" not in msg


def test_bad_barrier_keys():
    sec = copy.deepcopy(BASE)
    sec["barriers"][0]["polylin"] = sec["barriers"][0].pop("polyline")
    with pytest.raises(seepfe.SectionError, match="barrier 'pile'.*(polyline|polylin)"):
        seepfe.load_section(sec)
    sec = copy.deepcopy(BASE)
    sec["barriers"][1]["name"] = "pile"
    with pytest.raises(seepfe.SectionError, match="barrier 'pile' is defined 2 times"):
        seepfe.load_section(sec)


@pytest.mark.parametrize("order", [1, 2])
@pytest.mark.parametrize("split", [0, 1])
def test_nodes_doubled_along_barriers(order, split):
    sec = seepfe.load_section(BASE)
    m = seepfe.make_mesh(sec, order=order, split=split)
    L, R = m.barrier_edges, m.barrier_edges_other
    assert L.shape == R.shape == (len(m.barrier_index), order + 1)
    # both copies sit at the same place; the pile (6 m) and the inner barrier (about 15.8 m) are covered
    assert np.abs(m.points[L] - m.points[R]).max() == 0.0
    seg = np.linalg.norm(m.points[L[:, 1]] - m.points[L[:, 0]], axis=1)
    assert seg[m.barrier_index == 0].sum() == pytest.approx(6.0, rel=1e-12)
    assert seg[m.barrier_index == 1].sum() == pytest.approx(10 + np.hypot(5, 3), rel=1e-12)
    # a node is shared by both sides only at the free tips: the pile tip and both ends of 'inner'
    shared = np.unique(L[L == R])
    tips = np.array([[0, -6], [5, -8], [20, -5]], float)
    assert len(shared) == 3
    assert np.allclose(np.sort(m.points[shared], axis=0), np.sort(tips, axis=0))
    # the pile top, on the outline, is doubled: one copy on each boundary
    top = np.flatnonzero(np.all(m.points == [0.0, 0.0], axis=1))
    assert len(top) == 2
    b_of = {int(n): int(b) for e, b in zip(m.edges, m.edge_boundary) for n in e}
    assert sorted(b_of[int(t)] for t in top) == [0, 1]
    # P2: the midpoint of each barrier edge is doubled too and lies halfway
    if order == 2:
        mid = 0.5 * (m.points[L[:, 0]] + m.points[L[:, 1]])
        assert np.allclose(m.points[L[:, 2]], mid) and np.all(L[:, 2] != R[:, 2])
    # each barrier edge is an edge of a triangle on its left (left copy) and on its right (right copy)
    tri = m.triangles
    P = m.points
    for side, sign in ((L, 1.0), (R, -1.0)):
        a, b = P[side[:, 0]], P[side[:, 1]]
        cen = P[tri].mean(axis=1)
        has = [np.flatnonzero(((tri == i).any(1)) & ((tri == j).any(1))) for i, j in side[:, :2]]
        assert all(len(h) == 1 for h in has)
        t = np.array([h[0] for h in has])
        d, c = b - a, cen[t] - a
        assert np.all(sign * (d[:, 0] * c[:, 1] - d[:, 1] * c[:, 0]) > 0)


@pytest.mark.parametrize("order", [1, 2])
def test_barrier_carries_head_jump_and_no_flow(order):
    r = seepfe.solve(BASE, order=order)
    m = r.mesh
    assert r.balance["relative_error"] < 1e-8
    on_pile = m.barrier_index == 0
    jump = r.h[m.barrier_edges_other[on_pile]] - r.h[m.barrier_edges[on_pile]]
    # the pile is drawn downwards: upstream is on its right and has the higher head; one shared tip node
    assert jump[:, 0].max() == pytest.approx(2.5, rel=1e-12)           # at the top: 3.0 - 0.5
    Lp, Rp = m.barrier_edges[on_pile][:, :2], m.barrier_edges_other[on_pile][:, :2]
    assert (Lp == Rp).sum() == 1 and m.points[Lp[Lp == Rp]][0].tolist() == [0.0, -6.0]
    assert np.all(jump[:, :2][Lp != Rp] > 0)
    # no flow across a barrier: the consistent reaction of the free nodes on it is zero (natural condition)
    free = np.setdiff1d(np.unique(np.concatenate([m.barrier_edges, m.barrier_edges_other])), r.fixed)
    scale = np.abs(r.reactions[r.fixed]).max()
    assert np.abs(r.reactions[free]).max() < 1e-9 * scale


def test_barrier_along_zone_edge_and_across_it():
    """A barrier may run along a zone edge or cross it between vertices; both mesh conformally."""
    sec = copy.deepcopy(BASE)
    sec["barriers"] = [{"name": "seam", "polyline": [[-10, -2], [10, -2], [10, -7]]},
                       {"name": "pile", "polyline": [[-20, 0], [-20, -6]]}]
    r = seepfe.solve(sec, order=2)
    m = r.mesh
    assert r.balance["relative_error"] < 1e-8
    seg = np.linalg.norm(m.points[m.barrier_edges[:, 1]] - m.points[m.barrier_edges[:, 0]], axis=1)
    assert seg[m.barrier_index == 0].sum() == pytest.approx(25.0, rel=1e-12)
    # the crossing of the pile with the zone seam at (-20, -2) is a doubled mesh node
    assert (np.all(m.points == [-20.0, -2.0], axis=1)).sum() == 2
    # heads jump across the seam barrier, not across the open seam outside it
    above, below = r.head([[0.0, -1.99], [0.0, -2.01], [20.0, -1.99], [20.0, -2.01]]).reshape(2, 2).T
    assert abs(above[0] - below[0]) > 0.1
    assert abs(above[1] - below[1]) < 0.02
