"""USACE blanket theory against the FE, with the end conditions read from the section as drawn.

Source: US Army Corps of Engineers (2000), EM 1110-2-1913 Design and Construction of Levees,
Appendix B (after TM 3-424, 1956), from memory: c = sqrt(k_b / (k_f z_b d)); the effective length of
a blanket of length L beyond a toe is 1/c when it runs on without end (semi-infinite), tanh(cL)/c
when the substratum is open to water at its far end (a channel cutting through the blanket, the
river on the substratum's end face), and 1/(c tanh(cL)) when the substratum is closed there; the
residual head at the landside toe is h0 = H x3 / (x1 + x2 + x3) and the seepage under the levee
Q = k_f H d / (x1 + x2 + x3).

The theory assumes vertical flow in the blanket, horizontal flow in the substratum with no head loss
across its thickness (Dupuit), and an impervious levee.  With k_f / k_b = 1000, z_b = 1 m and
d = 20 m, the part of the flow it neglects (2D flow in the substratum near the toes and ends, within
about d of them, against a leakage length 1/c = 141 m) is a few per cent at most: tolerance 3 % on
h0 and on Q (measured: within 0.5 % for the blocked, open-channel and semi-infinite ends; 2.5 % on h0
and 1.4 % on Q where a ditch opens the substratum, whose bank turns the flow in two dimensions).
"""

import math

import pytest

import seepfe

KB, KF, Z, D, H = 1e-7, 1e-4, 1.0, 20.0, 4.0
C = math.sqrt(KB / (KF * Z * D))          # 1/m, the leakage factor of both blankets


def x_semi(c):
    return 1.0 / c


def x_open(c, L):
    return math.tanh(c * L) / c


def x_blocked(c, L):
    return 1.0 / (c * math.tanh(c * L))


def _levee(L1=200.0, L3=300.0, river_end="noflow", land_end="noflow", ditch=None, size=4.0, fine=1.0, d70=None,
           cutoff=None):
    """Levee (impervious, base 40 m) on a 1 m clay blanket over 20 m of sand.

    river_end / land_end: 'noflow' (the model's truncation) or 'head' (the river head, or 0 landside, on
    the sand's end face). ditch: a landside channel cut through the blanket from x = 20 + ditch to the
    end, its bed on the sand under standing water at the landside ground level (head 0).
    """
    x0, x1 = -20 - L1, 20 + L3
    sand = {"k": KF, "unit_weight": 20.0}
    if d70:
        sand["d70"] = d70
    blanket_land_end = x1 if ditch is None else 20 + ditch
    zones = [{"name": "levee", "material": "levee", "polygon": [[-20, 0], [20, 0], [4, 5], [-4, 5]]},
             {"name": "blanket", "material": "clay",
              "polygon": [[x0, 0], [-20, 0], [20, 0], [blanket_land_end, 0], [blanket_land_end, -Z], [x0, -Z]]},
             {"name": "aquifer", "material": "sand",
              "polygon": [[x0, -Z], [blanket_land_end, -Z]] + ([[x1, -Z]] if ditch is not None else [])
              + [[x1, -Z - D], [x0, -Z - D]]}]
    bounds = [{"name": "river", "polyline": [[x0, 0], [-20, 0], [-7.2, 4.0]], "head": H}]
    bounds.append({"name": "landside", "polyline": [[20, 0], [blanket_land_end, 0]], "seepage_face": True})
    if ditch is not None:
        bounds.append({"name": "ditch", "polyline": [[blanket_land_end, 0], [blanket_land_end, -Z], [x1, -Z]],
                       "head": 0.0})
    if river_end == "head":
        bounds.append({"name": "river channel", "polyline": [[x0, -Z], [x0, -Z - D]], "head": H})
    if land_end == "head":
        bounds.append({"name": "landside channel", "polyline": [[x1, -Z], [x1, -Z - D]], "head": 0.0})
    d = {"title": "levee on a thin blanket over a thick pervious layer",
         "materials": {"levee": {"k": 1e-10, "unit_weight": 19.0}, "clay": {"k": KB, "unit_weight": 18.0},
                       "sand": sand, "slurry": {"k": 1e-9, "unit_weight": 17.0}},
         "zones": zones, "boundaries": bounds,
         "checks": {"boundaries": ["landside"], "toe_x": 20.0, "riverside_toe_x": -20.0},
         "mesh": {"size": size, "refine": [{"polyline": [[x0, 0], [x1, 0]], "size": fine}]}}
    if cutoff is not None:
        d["remedies"] = [{"type": "cutoff_wall", "name": "slurry wall", "x": -10.0, "top": 0.0, "bottom": cutoff,
                          "thickness": 0.6, "material": "slurry"}]
    return d


def _bt(d):
    a = seepfe.analyse(seepfe.solve(d))
    return a.hand_method("blanket_theory"), a


def _inp(m, k):
    return m.inputs[k]["value"]


def _check(m, x1, x3, tol=0.03):
    """Hand values against the closed form written out here; FE beside them within the theory's tolerance."""
    assert m.applies, m.why
    assert _inp(m, "x1_m") == pytest.approx(x1, rel=1e-9)
    assert _inp(m, "x3_m") == pytest.approx(x3, rel=1e-9)
    h0 = H * x3 / (x1 + 40.0 + x3)
    q = KF * H * D / (x1 + 40.0 + x3)
    hand_h0, fe_h0 = m.values["h0_m"]
    hand_q, fe_q = m.values["q_m3_s_per_m"]
    assert hand_h0 == pytest.approx(h0, rel=1e-9) and hand_q == pytest.approx(q, rel=1e-9)
    assert fe_h0 == pytest.approx(h0, rel=tol), (fe_h0, h0)
    assert fe_q == pytest.approx(q, rel=tol), (fe_q, q)
    return h0


@pytest.fixture(scope="module")
def blocked():
    return _bt(_levee(d70=2.0e-4))


def test_blocked_ends_when_the_model_stops_within_3_over_c(blocked):
    m, _ = blocked
    # c L = 1.41 (riverside) and 2.12 (landside): the no-flow ends of the model matter; the FE sees a
    # closed substratum there, and so does the hand method
    assert _inp(m, "riverside_end") == "blocked" and _inp(m, "landside_end") == "blocked"
    assert _inp(m, "L1_m") == pytest.approx(200.0) and _inp(m, "L3_m") == pytest.approx(300.0)
    assert _inp(m, "L2_m") == pytest.approx(40.0) and _inp(m, "zb_land_m") == pytest.approx(1.0)
    h0 = _check(m, x_blocked(C, 200.0), x_blocked(C, 300.0))
    # gradient and FS at the toe: i = h0 / z, FS = (gamma_sat - gamma_w) z / (gamma_w h0)
    assert m.values["top_stratum_gradient"][0] == pytest.approx(h0 / 1.0)
    assert m.values["fs_uplift"][0] == pytest.approx((18.0 - 9.81) / 9.81 / h0, rel=1e-9)


def test_open_riverside_end_when_the_river_stands_on_the_sand():
    # the river head on the sand's end face (a channel cut into the substratum 200 m out): open end,
    # x1 = tanh(c L1)/c = 126.1 m, not the blocked 1/(c tanh(c L1)) = 158.6 m (the fault once reported)
    m, _ = _bt(_levee(river_end="head"))
    assert _inp(m, "riverside_end") == "open" and "river channel" in m.inputs["riverside_end"]["meaning"]
    _check(m, x_open(C, 200.0), x_blocked(C, 300.0))
    assert abs(x_open(C, 200.0) / x_blocked(C, 200.0) - 1) > 0.2         # the branches really differ here


def test_open_landside_end_at_a_channel_and_at_a_ditch():
    m, _ = _bt(_levee(land_end="head"))
    assert _inp(m, "landside_end") == "open"
    _check(m, x_blocked(C, 200.0), x_open(C, 300.0))
    # a ditch through the blanket 120 m beyond the toe: the substratum is open to the surface there
    m, _ = _bt(_levee(ditch=120.0, L3=200.0))
    assert _inp(m, "landside_end") == "open" and _inp(m, "L3_m") == pytest.approx(120.0, abs=0.6)
    _check(m, x_blocked(C, 200.0), x_open(C, _inp(m, "L3_m")))


def test_semi_infinite_where_the_model_end_lies_beyond_3_over_c():
    m, _ = _bt(_levee(L1=600.0, L3=700.0, size=6.0, fine=2.0))
    assert _inp(m, "riverside_end") == "semi-infinite" and _inp(m, "landside_end") == "semi-infinite"
    _check(m, x_semi(C), x_semi(C))


def test_cutoff_makes_blanket_theory_not_applicable():
    # a partially penetrating cutoff: the theory has no term for it; never a silent mismatch
    m, a = _bt(_levee(cutoff=-11.0, size=6.0, fine=2.0))
    assert not m.applies and "penetrates" in m.why and "slurry wall" in m.why
    assert a.hand_method("sellmeijer").applies is False
    rec = [r for r in a.to_dict()["hand_methods"] if r["method"] == "blanket_theory"]
    assert all(r["hand"] is None and not r["applies"] for r in rec)
    # a full cutoff closes the substratum
    m, _ = _bt(_levee(cutoff=-21.0, size=6.0, fine=2.0))
    assert not m.applies and "closes" in m.why


def test_fe_exit_checks_agree_with_toe_values(blocked):
    m, a = blocked
    ex = a.exits["landside"]
    i = int(abs(ex.x - 20.0).argmin())
    assert ex.blanket_gradient[i] == pytest.approx(m.values["top_stratum_gradient"][1], rel=1e-3)
    assert ex.governing["x_m"] == pytest.approx(20.0, abs=1.0)   # least FS at the toe
    assert ex.governing["verdict"] == "fail"                      # FS ~ 0.5 < 1.6


def test_sellmeijer_beside_blanket(blocked):
    # Sellmeijer et al. (2011) revised rule, with the section's seepage length x1 + L2 and D = d.
    # Checked against the rule written out here with the calibration's own grain ratio
    # gamma_p' / gamma_w = 16.5 / 10 = 1.65 (from memory), eta = 0.25, theta = 37 deg, d70_m = 0.208 mm,
    # nu = 1.33e-6 m2/s: the section's gamma_w = 9.81 is NOT used there (it would give 1.68, a critical
    # head 2 % higher: the unsafe side).
    m, a = blocked
    s = a.hand_method("sellmeijer")
    assert s.applies, s.why
    L, d70, k = _inp(m, "x1_m") + 40.0, 2.0e-4, 1e-4
    kappa = 1.33e-6 * k / 9.81
    FR = 0.25 * 1.65 * math.tan(math.radians(37.0))
    FS = 2.08e-4 / (kappa * L) ** (1 / 3) * (d70 / 2.08e-4) ** 0.4
    FG = 0.91 * (D / L) ** (0.28 / ((D / L) ** 2.8 - 1) + 0.04)
    Hc = FR * FS * FG * L
    assert s.values["critical_head_m"][0] == pytest.approx(Hc, rel=1e-12)
    assert s.values["critical_head_ratio"][0] == pytest.approx(Hc / (H - 0.3 * Z), rel=1e-12)
    assert 0 < Hc < 50


def test_blanket_theory_says_when_it_does_not_hold():
    # a 'blanket' only 3 times less pervious than the layer below is no top stratum at the default
    # contrast of 10: the theory is not applied and the reason is given instead of a number
    d = _levee(size=8.0, fine=2.0)
    d["materials"]["clay"]["k"] = 3e-5
    a = seepfe.analyse(seepfe.solve(d))
    m = a.hand_method("blanket_theory")
    assert not m.applies and "top stratum" in m.why
    assert "not applicable" in a.text()
