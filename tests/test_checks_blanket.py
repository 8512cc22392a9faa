"""USACE blanket theory against the FE on a thin blanket over a thick pervious layer.

Source: US Army Corps of Engineers (2000), EM 1110-2-1913 Design and Construction of Levees,
Appendix B (after TM 3-424, 1956): c = sqrt(k_b / (k_f z_b d)); a blanket of length L ending against
a closed (no-flow) end has the effective length x = 1 / (c tanh(c L)); the residual head at the
landside toe is h0 = H x3 / (x1 + x2 + x3) and the seepage under the levee Q = k_f H d / (x1 + x2 + x3).

The theory assumes vertical flow in the blanket, horizontal flow in the substratum with no head loss
across its thickness (Dupuit), and an impervious levee.  With k_f / k_b = 1000, z_b = 1 m and
d = 20 m, the part of the flow it neglects (2D flow in the substratum near the toes, within about d
of them, against a leakage length 1/c = 141 m) is a few per cent at most: tolerance 3 % on h0 and
on Q (measured: h0 0.4 % low, Q 0.05 %).
"""

import math

import pytest

import seepfe



def _d(m):
    """A hand method as the flat dict the checks below read (inputs, hand and FE values)."""
    d = {"applicable": m.applies, "reason": m.why, **{k: v["value"] for k, v in m.inputs.items()}}
    fe = {}
    for q, (hv, fv) in m.values.items():
        fe[q] = fv
    d["fe"] = {"h0_m": fe.get("h0_m"), "i0": fe.get("top_stratum_gradient"), "q_m3_s_per_m": fe.get("q_m3_s_per_m")}
    if m.applies and "fs_uplift" in m.values:
        d["fs"] = m.values["fs_uplift"][0]
    return d


def _levee(kb=1e-7, kf=1e-4, z=1.0, d=20.0, L1=200.0, L3=300.0, H=4.0, size=4.0, fine=1.0, d70=None):
    x0, x1 = -20 - L1, 20 + L3
    sand = {"k": kf, "unit_weight": 20.0}
    if d70:
        sand["d70"] = d70
    return {"title": "levee on a thin blanket over a thick pervious layer",
            "materials": {"levee": {"k": 1e-10, "unit_weight": 19.0}, "clay": {"k": kb, "unit_weight": 18.0},
                          "sand": sand},
            "zones": [{"name": "levee", "material": "levee", "polygon": [[-20, 0], [20, 0], [4, 5], [-4, 5]]},
                      {"name": "blanket", "material": "clay", "polygon": [[x0, 0], [x1, 0], [x1, -z], [x0, -z]]},
                      {"name": "aquifer", "material": "sand", "polygon": [[x0, -z], [x1, -z], [x1, -z - d], [x0, -z - d]]}],
            "boundaries": [{"name": "river", "polyline": [[x0, 0], [-20, 0], [-7.2, 4.0]], "head": H},
                           {"name": "landside", "polyline": [[20, 0], [x1, 0]], "seepage_face": True}],
            "mesh": {"size": size, "refine": [{"polyline": [[x0, 0], [x1, 0]], "size": fine}]}}


@pytest.fixture(scope="module")
def report():
    return seepfe.analyse(seepfe.solve(_levee(d70=2.0e-4)))


def test_blanket_theory_against_fe(report):
    b = _d(report.hand_method("blanket_theory"))
    assert b["applicable"], b.get("reason")
    # the geometry the checks read from the section
    assert b["L2_m"] == pytest.approx(40.0, abs=1e-6)
    assert b["L1_m"] == pytest.approx(200.0, abs=1e-6) and b["riverside_end"] == "blocked"
    assert b["L3_m"] == pytest.approx(300.0, abs=1e-6) and b["landside_end"] == "blocked"
    assert b["zb_land_m"] == pytest.approx(1.0) and b["d_m"] == pytest.approx(20.0)
    # the closed form, written out here independently of seepfe.checks.handmethods
    c = math.sqrt(1e-7 / (1e-4 * 1.0 * 20.0))
    x1 = 1 / (c * math.tanh(c * 200.0))
    x3 = 1 / (c * math.tanh(c * 300.0))
    h0 = 4.0 * x3 / (x1 + 40.0 + x3)
    q = 1e-4 * 4.0 * 20.0 / (x1 + 40.0 + x3)
    assert b["h0_m"] == pytest.approx(h0, rel=1e-12)
    assert b["q_m3_s_per_m"] == pytest.approx(q, rel=1e-12)
    # FE beside it, within the tolerance the theory's assumptions allow (module docstring)
    assert b["fe"]["h0_m"] == pytest.approx(h0, rel=0.03)
    assert b["fe"]["q_m3_s_per_m"] == pytest.approx(q, rel=0.03)
    # gradient and FS at the toe: i = h0 / z, FS = (gamma_sat - gamma_w) z / (gamma_w h0)
    assert b["i0"] == pytest.approx(h0 / 1.0)
    assert b["fs"] == pytest.approx((18.0 - 9.81) / 9.81 / h0, rel=1e-9)


def test_fe_exit_checks_agree_with_toe_values(report):
    ex = report.exits["landside"]
    b = _d(report.hand_method("blanket_theory"))
    i = int(abs(ex.x - 20.0).argmin())
    assert ex.blanket_gradient[i] == pytest.approx(b["fe"]["i0"], rel=1e-3)
    assert ex.governing["x_m"] == pytest.approx(20.0, abs=1.0)   # least FS at the toe
    assert ex.governing["verdict"] == "fail"                      # FS ~ 0.5 < 1.6


def test_sellmeijer_beside_blanket(report):
    # Sellmeijer et al. (2011) revised rule, with the section's seepage length x1 + L2 and D = d.
    # Checked against the rule written out here (coefficients from memory, as in the module).
    s = _d(report.hand_method("sellmeijer"))
    assert s["applicable"], s.get("reason")
    b = _d(report.hand_method("blanket_theory"))
    L, D, d70, k = b["x1_m"] + 40.0, 20.0, 2.0e-4, 1e-4
    kappa = 1.33e-6 * k / 9.81
    FR = 0.25 * 16.5 / 9.81 * math.tan(math.radians(37.0))
    FS = 2.08e-4 / (kappa * L) ** (1 / 3) * (d70 / 2.08e-4) ** 0.4
    FG = 0.91 * (D / L) ** (0.28 / ((D / L) ** 2.8 - 1) + 0.04)
    assert s["H_c_m"] == pytest.approx(FR * FS * FG * L, rel=1e-12)
    assert 0 < s["H_c_m"] < 50


def test_blanket_theory_says_when_it_does_not_hold():
    # a 'blanket' only 3 times less pervious than the layer below is no top stratum at the default
    # contrast of 10: the theory is not applied and the reason is given instead of a number
    rep = seepfe.analyse(seepfe.solve(_levee(kb=3e-5, size=8.0, fine=2.0)))
    b = _d(rep.hand_method("blanket_theory"))
    assert not b["applicable"] and "top stratum" in b["reason"]
    assert "not applicable" in rep.text()
