"""Heave and uplift factors of safety and the default verdicts, on columns with upward flow.

Sources:
* Terzaghi, K. (1943), Theoretical Soil Mechanics, ch. XII (hydraulic failure): upward flow through a
  sand lifts it (the quick condition) at the critical gradient i_c = gamma' / gamma_w =
  (gamma_sat - gamma_w) / gamma_w; the factor of safety against heave is FS = i_c / i.
* Unit weight of water gamma_w = 9.81 kN/m3 (common practice), written out here: a water unit weight
  of 10 kN/m3 slipped into the code moves i_c by 2-5 % on these soils, far more than the tolerance.
* Darcy (1856): 1D upward flow through layers in series has a linear head in each layer, which P2
  elements reproduce exactly, so the exit gradient is known in closed form.
* Uplift of a top stratum: FS = sum((gamma_sat - gamma_w) t) / (gamma_w h_excess) (US Army Corps of
  Engineers (2000), EM 1110-2-1913, Design and Construction of Levees, App. B; from memory).
* Default criteria: FS 1.6 against heave and uplift, allowable gradient 0.5 (USACE ETL 1110-2-569
  (2005), from memory): each is exercised here by a column just on either side of it.
"""

import pytest

import seepfe

GW = 9.81        # kN/m3, common practice


def _column(H, layers, width=2.0):
    """Layers [(name, thickness m, k m/s, unit weight kN/m3), ...] from the top down, the surface at
    y = 0 a seepage face, a head H at the base.  Heads stay >= y, so the column is saturated."""
    mats, zones, top = {}, [], 0.0
    for name, t, k, g in layers:
        mats[name] = {"k": k, "unit_weight": g}
        zones.append({"name": name, "material": name,
                      "polygon": [[0, top - t], [width, top - t], [width, top], [0, top]]})
        top -= t
    return {"title": "upward flow column (verification)", "materials": mats, "zones": zones,
            "boundaries": [{"name": "base", "polyline": [[0, top], [width, top]], "head": H},
                           {"name": "surface", "polyline": [[0, 0], [width, 0]], "seepage_face": True}],
            "mesh": {"size": 1.0, "order": 2}}


def _governing(sec):
    return seepfe.analyse(seepfe.solve(sec), ["surface"]).governing


@pytest.mark.parametrize("gamma_sat", [17.0, 19.0, 21.0])
def test_fs_heave_is_terzaghis_critical_gradient_over_the_exit_gradient(gamma_sat):
    # one sand, no top stratum: the exit gradient is the surface gradient i = H / L (Darcy, exact)
    H, L = 4.0, 10.0
    g = _governing(_column(H, [("sand", L, 1e-4, gamma_sat)]))
    i_c = (gamma_sat - GW) / GW                      # Terzaghi (1943), gamma_w = 9.81 (common practice)
    assert g["mode"] == "heave"
    assert g["fs"] == pytest.approx(i_c / (H / L), rel=1e-6)
    assert g["exit_gradient_max"] == pytest.approx(H / L, rel=1e-6)


def test_fs_uplift_of_a_two_layer_top_stratum():
    # top stratum: 1 m (19.62 kN/m3) over 1 m (15.2 kN/m3), both k_b, over 8 m of sand k_s.
    # Series flow (Darcy): head at the base of the top stratum h_b = H z / (z + t_s k_b / k_s).
    kb, ks, H = 1e-7, 1e-4, 1.0
    g = _governing(_column(H, [("upper", 1.0, kb, 19.62), ("lower", 1.0, kb, 15.2), ("sand", 8.0, ks, 20.0)]))
    hb = H * 2.0 / (2.0 + 8.0 * kb / ks)
    weight = (19.62 - GW) * 1.0 + (15.2 - GW) * 1.0   # kPa, buoyant weight of the top stratum
    assert g["mode"] == "uplift"
    # the head at the base is read a hair (1e-6 of the extent) inside the top stratum: 5e-6 relative
    assert g["fs"] == pytest.approx(weight / (GW * hb), rel=1e-4)


# ------------------------------------------------------------------------------- default criteria
# Each column lands 2-4 % on one side of one criterion and well inside the others, so changing that
# one default flips exactly this verdict.
def _heave_case(fs):
    """One sand with i_c = (17 - 9.81) / 9.81; exit gradient i_c / fs (< 0.5)."""
    i = (17.0 - GW) / GW / fs
    return _column(10.0 * i, [("sand", 10.0, 1e-4, 17.0)]), "heave", fs


def _gradient_case(i):
    """One heavy sand (i_c 1.24): FS > 2 everywhere, exit gradient i."""
    return _column(10.0 * i, [("sand", 10.0, 1e-4, 22.0)]), "gradient", (22.0 - GW) / GW / i


def _uplift_case(fs):
    """The two-layer top stratum above: uplift FS fs, heave FS > 2, gradient < 0.5."""
    kb, ks = 1e-7, 1e-4
    weight = (19.62 - GW) + (15.2 - GW)
    hb = weight / (GW * fs)
    H = hb * (2.0 + 8.0 * kb / ks) / 2.0
    return _column(H, [("upper", 1.0, kb, 19.62), ("lower", 1.0, kb, 15.2), ("sand", 8.0, ks, 20.0)]), "uplift", fs


@pytest.mark.parametrize("case, verdict", [
    (_heave_case(1.55), "fail"), (_heave_case(1.65), "pass"),
    (_gradient_case(0.52), "fail"), (_gradient_case(0.48), "pass"),
    (_uplift_case(1.55), "fail"), (_uplift_case(1.65), "pass")],
    ids=["heave-1.55", "heave-1.65", "gradient-0.52", "gradient-0.48", "uplift-1.55", "uplift-1.65"])
def test_verdict_at_the_default_criteria(case, verdict):
    sec, what, fs = case
    g = _governing(sec)
    assert g["fs"] == pytest.approx(fs, rel=1e-4)            # the closed forms above
    assert g["verdict"] == verdict, g["why"]
    if verdict == "fail":
        assert what in g["why"]
