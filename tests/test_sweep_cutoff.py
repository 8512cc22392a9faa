"""A cutoff-depth sweep and a cutoff-depth target search through the sweep engine.

Physics checked (issue 6): on a blanket-over-sand section the landside residual head under the toe
and the seepage quantity fall monotonically as a cutoff wall is driven deeper (a deeper wall lengthens
every flow path: Darcy, and the series-resistance argument of Harr, M.E. 1962, Groundwater and
Seepage, ch. 1). The target search must return a depth at which a direct solve meets the target, and
the other end of its bracket must fail it, within the stated tolerance.
"""

import copy

import numpy as np

import seepfe
from seepfe.sweep import run_sweep

SECTION = {
    "title": "Invented blanket over sand with a cutoff wall under the levee",
    "parameters": {"cutoff_depth": 5.0},
    "materials": {"blanket": {"k": 1e-7, "unit_weight": 18.5}, "sand": {"k": 1e-4, "unit_weight": 20.0},
                  "wall": {"k": 1e-9}},
    "zones": [{"name": "top stratum", "material": "blanket",
               "polygon": [[-100, 0], [100, 0], [100, -2], [-100, -2]]},
              {"name": "sand", "material": "sand", "polygon": [[-100, -2], [100, -2], [100, -22], [-100, -22]]},
              {"name": "levee", "material": "blanket", "polygon": [[-10, 0], [10, 0], [0, 3]]}],
    "boundaries": [{"name": "river", "polyline": [[-100, 0], [-10, 0]], "head": 4.0},
                   {"name": "landside", "polyline": [[10, 0], [100, 0]], "seepage_face": True}],
    "remedies": [{"type": "cutoff_wall", "name": "wall", "x": 0.0, "top": 0.0, "bottom": "=-2 - cutoff_depth",
                  "thickness": 0.6, "material": "wall"}],
    "checks": {"boundaries": ["landside"], "toe_x": 10.0},
    "mesh": {"size": 2.5, "order": 1},
}
UNDER_TOE = [10.0, -2.0]


def test_residual_head_and_flow_fall_as_the_cutoff_deepens():
    sweep = {"title": "cutoff depth", "vary": {"cutoff_depth": {"values": [0.0, 5.0, 10.0, 15.0, 19.0], "unit": "m"}},
             "points": {"under_toe": UNDER_TOE}, "exit": ["landside"], "criterion": {"fs": 1.5}}
    rep = run_sweep(SECTION, sweep, workers=1)
    rows = sorted(rep.table, key=lambda r: r["cutoff_depth_m"])
    assert [r["status"] for r in rows] == ["ok"] * 5
    head = np.array([r["head_under_toe_m"] for r in rows])
    flow = np.array([r["flow_river_m3_s_per_m"] for r in rows])
    assert np.all(np.diff(head) < 0) and np.all(np.diff(flow) < 0)
    # the least factor of safety rises with the residual head falling
    fs = np.array([r["fs"] for r in rows])
    assert np.all(np.diff(fs) > 0)


def test_target_cutoff_depth_meets_the_target_by_a_direct_solve():
    tol = 0.25
    bound = 1.85      # m of head under the toe (an invented design target)
    sweep = {"title": "cutoff depth target", "points": {"under_toe": UNDER_TOE}, "exit": ["landside"],
             "targets": [{"name": "depth", "parameter": "cutoff_depth", "unit": "m", "range": [0.0, 19.5],
                          "find": "smallest", "quantity": "head_under_toe_m", "at_most": bound,
                          "tolerance": tol}]}
    rep = run_sweep(SECTION, sweep, workers=1)
    t = rep.targets[0]
    assert t["status"] == "found"
    assert abs(t["value"] - t["other_end"]) <= tol + 1e-12
    for depth, meets in ((t["value"], True), (t["other_end"], False)):
        d = copy.deepcopy(SECTION)
        d["parameters"]["cutoff_depth"] = depth
        h = seepfe.solve(d).head([UNDER_TOE])[0]
        assert (h <= bound) == meets, (depth, h)
