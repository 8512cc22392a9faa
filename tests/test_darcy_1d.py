"""1D flow across and along layers against the series and parallel equivalent conductivities.

Source: Darcy's law with the harmonic (series) and arithmetic (parallel) means of layered
conductivity, e.g. Harr, M.E. (1962), Groundwater and Seepage, ch. 1 (exact for 1D flow).
"""

import numpy as np
import pytest

import seepfe


def _column(k1, k2, t1, t2, order):
    # two layers stacked in y, head on top and bottom: flow across the layers (series)
    return {
        "materials": {"a": {"k": k1}, "b": {"k": k2}},
        "zones": [{"name": "lower", "material": "a", "polygon": [[0, 0], [2, 0], [2, t1], [0, t1]]},
                  {"name": "upper", "material": "b", "polygon": [[0, t1], [2, t1], [2, t1 + t2], [0, t1 + t2]]}],
        "boundaries": [{"name": "bottom", "polyline": [[0, 0], [2, 0]], "head": 10.0},
                       {"name": "top", "polyline": [[0, t1 + t2], [2, t1 + t2]], "head": 20.0}],
        "mesh": {"size": 0.5, "order": order},
    }


@pytest.mark.parametrize("order", [1, 2])
def test_series_flow_matches_harmonic_mean(order):
    k1, k2, t1, t2 = 1e-5, 1e-7, 3.0, 1.0
    r = seepfe.solve(_column(k1, k2, t1, t2, order))
    keq = (t1 + t2) / (t1 / k1 + t2 / k2)                      # series (Darcy, exact)
    q = keq * (20.0 - 10.0) / (t1 + t2) * 2.0                   # m3/s per m through a 2 m wide column
    assert r.boundary_flow("top") == pytest.approx(q, rel=1e-9)
    assert r.boundary_flow("bottom") == pytest.approx(-q, rel=1e-9)
    # head at the interface: continuity of flux
    hi = 10.0 + q / 2.0 * t1 / k1
    assert r.head([[1.0, t1]])[0] == pytest.approx(hi, rel=1e-9)


@pytest.mark.parametrize("order", [1, 2])
def test_parallel_flow_matches_arithmetic_mean(order):
    sec = _column(1e-5, 1e-7, 3.0, 1.0, order)
    sec["boundaries"] = [{"name": "left", "polyline": [[0, 0], [0, 4]], "head": 5.0},
                         {"name": "right", "polyline": [[2, 0], [2, 4]], "head": 1.0}]
    # keep the column below the lowest head so it stays saturated (confined flow)
    for z in sec["zones"]:
        z["polygon"] = [[x, y - 10.0] for x, y in z["polygon"]]
    for b in sec["boundaries"]:
        b["polyline"] = [[x, y - 10.0] for x, y in b["polyline"]]
    r = seepfe.solve(sec)
    q = (1e-5 * 3.0 + 1e-7 * 1.0) * (5.0 - 1.0) / 2.0           # parallel (Darcy, exact)
    assert r.boundary_flow("left") == pytest.approx(q, rel=1e-9)
    assert r.balance["relative_error"] < 1e-8
    assert np.allclose(r.head([[1.0, -9.5], [1.0, -6.5]]), 3.0, rtol=1e-9)


# ------------------------------------------------------------------------------- elevated seepage faces
# A seepage face is the line where water leaves at atmospheric pressure: h = y there, not h = 0
# (Casagrande, A. (1937), Seepage through dams; Harr, M.E. (1962), Groundwater and Seepage, ch. 3).
# The faces below are not at y = 0, so a face held at h = 0 gives another discharge.
def _face_column(y_base, y_face, H, phreatic="auto", width=2.0):
    return {"title": "upward flow to a seepage face (verification)",
            "materials": {"sand": {"k": 1e-5}},
            "zones": [{"name": "sand", "material": "sand",
                       "polygon": [[0, y_base], [width, y_base], [width, y_face], [0, y_face]]}],
            "boundaries": [{"name": "base", "polyline": [[0, y_base], [width, y_base]], "head": H},
                           {"name": "face", "polyline": [[0, y_face], [width, y_face]], "seepage_face": True}],
            "mesh": {"size": 1.0, "order": 1}, "solver": {"phreatic": phreatic}}


@pytest.mark.parametrize("y_base, y_face, H, phreatic", [
    (0.0, 5.0, 8.0, "off"),      # face 5 m above the datum (a raised berm), the saturated solve
    (0.0, 5.0, 8.0, "auto"),     # (the unconfined path takes over if a face goes wrong: also right)
    (-15.0, -10.0, 2.0, "auto"),  # face 10 m below the datum (an excavation floor)
])
def test_flow_to_an_elevated_seepage_face(y_base, y_face, H, phreatic):
    # Darcy (1856): q = k (H - y_face) / L per unit width, the face held at h = y_face
    r = seepfe.solve(_face_column(y_base, y_face, H, phreatic))
    q = 1e-5 * (H - y_face) / (y_face - y_base) * 2.0
    assert r.boundary_flow("base") == pytest.approx(q, rel=1e-9)
    assert r.boundary_flow("face") == pytest.approx(-q, rel=1e-9)
    assert r.head([[1.0, y_face]])[0] == pytest.approx(y_face, abs=1e-9)


def test_rectangular_dam_on_a_raised_base_matches_dupuit_charny():
    # The rectangular dam of test_unconfined.py lifted 5 m (heads with it): the seepage face above the
    # tailwater now lies at y = 6.. 13 m.  Dupuit-Forchheimer discharge, exact for this dam (Charny, I.A.
    # (1951), Dokl. Akad. Nauk SSSR 79(6); Polubarinova-Kochina, P.Ya. (1962), Theory of Ground Water
    # Movement, ch. II): q = k ((h1 - y0)^2 - (h2 - y0)^2) / (2 L).  3 %: the free-surface transition of
    # the unsaturated solve on this coarse mesh (measured +2.0 % at 0.4 m, +1.5 % at 0.3 m).  With the
    # faces held at h = 0 instead of h = y the discharge is off by far more.
    k, L, Hd, y0, h1, h2 = 1e-5, 10.0, 8.0, 5.0, 11.0, 6.0
    sec = {"title": "rectangular dam on a raised base (verification)", "materials": {"fill": {"k": k}},
           "zones": [{"name": "dam", "material": "fill", "polygon": [[0, y0], [L, y0], [L, y0 + Hd], [0, y0 + Hd]]}],
           "boundaries": [{"name": "up", "polyline": [[0, y0], [0, y0 + Hd]], "head": h1, "dry_above_level": True},
                          {"name": "down", "polyline": [[L, y0], [L, y0 + Hd]], "head": h2, "dry_above_level": True}],
           "mesh": {"size": 0.4, "order": 2}}
    r = seepfe.solve(sec)
    assert r.solver_info["unconfined"]["converged"]
    q = k * ((h1 - y0) ** 2 - (h2 - y0) ** 2) / (2 * L)
    assert r.boundary_flow("up") == pytest.approx(q, rel=0.03)
    assert r.boundary_flow("down") == pytest.approx(-q, rel=0.03)
    sf = r.seepage_faces()["down"]
    assert sf["exit_point_m"][1] > h2 + 0.2 and sf["outflow_m3_s_per_m"] > 0
