"""Hand methods beside the finite elements: closed forms from the literature.

Pure functions (SI units; heads and lengths m, conductivities m/s, unit weights kN/m3):

* :func:`blanket_theory`: USACE EM 1110-2-1913 (2000), Design and Construction of Levees, Appendix B
  (after TM 3-424, 1956): a semipervious top stratum over a pervious substratum of uniform thickness;
  effective riverside and landside lengths x1, x3, residual head at the landside toe, gradient, FS.
* :func:`lane_creep`: Lane, E.W. (1935), Security from under-seepage: masonry dams on earth
  foundations, Trans. ASCE 100, 1235-1351: weighted creep L_w = sum(L_v) + sum(L_h) / 3.
* :func:`khosla_exit_gradient`: Khosla, A.N., Bose, N.K. and Taylor, E.McK. (1936), Design of weirs
  on permeable foundations, CBI Publication 12: floor of length b with a downstream cutoff of depth d
  on an infinitely deep homogeneous foundation, G_E = H / (d pi sqrt(lambda)),
  lambda = (1 + sqrt(1 + (b/d)^2)) / 2.
* :func:`terzaghi_heave`: Terzaghi, K. (1943), Theoretical Soil Mechanics, ch. on hydraulic failure:
  a prism of width d/2 beside the downstream face of a sheet pile of penetration d,
  FS = gamma' d / (gamma_w h_a), h_a the mean excess head on the prism's base.
* :func:`sellmeijer_2011`: Sellmeijer, J.B., Lopez de la Cruz, J., van Beek, V.M. and Knoeff, J.G.
  (2011), Fine-tuning of the backward erosion piping model through small-scale, medium-scale and
  IJkdijk experiments, Eur. J. Env. Civil Eng. 15(8), 1139-1154: critical head difference
  H_c = F_R F_S F_G L (coefficients in :data:`SELLMEIJER`; recalled from memory, marked so).
* :func:`khosla_pressures`: the residual heads at the junction and the tip of a downstream cutoff
  (Khosla, Bose and Taylor 1936, method of independent variables).
* :func:`kozeny_drain`: Kozeny, J. (1931), Grundwasserbewegung bei freiem Spiegel, Fluss- und
  Kanalversickerung, Wasserkraft und Wasserwirtschaft 26(3): the phreatic parabola of a homogeneous
  section draining to a horizontal drain, y0 = sqrt(d^2 + h^2) - d, q = k y0.
* :func:`casagrande_exit`: Casagrande, A. (1937), Seepage through dams, J. New England Water Works
  Assoc. 51(2): exit of the phreatic line on a downstream slope beta <= 30 deg,
  a = sqrt(d^2 + h^2) - sqrt(d^2 - h^2 cot^2 beta), q = k a sin^2 beta (from memory).

Each function returns a dict; :mod:`seepfe.checks.report` applies them to a section and says where
their assumptions do not hold instead of printing a number.
"""

from __future__ import annotations

import math

__all__ = ["blanket_theory", "lane_creep", "khosla_exit_gradient", "khosla_pressures", "khosla_interference", "terzaghi_heave",
           "sellmeijer_2011", "kozeny_drain", "casagrande_exit", "LANE_RATIOS", "SELLMEIJER"]

# Lane (1935) weighted creep ratios C_w (safe values), from memory
LANE_RATIOS = {
    "very fine sand or silt": 8.5, "fine sand": 7.0, "medium sand": 6.0, "coarse sand": 5.0,
    "fine gravel": 4.0, "medium gravel": 3.5, "coarse gravel including cobbles": 3.0,
    "boulders with some cobbles and gravel": 2.5, "soft clay": 3.0, "medium clay": 2.0, "hard clay": 1.8,
    "very hard clay or hardpan": 1.6,
}


def _x_eff(c: float, L: float, end: str) -> float:
    """Effective length of a blanket of length L (m) beyond a toe, EM 1110-2-1913 App. B, m.

    end = 'semi-infinite' (or 'infinite'): 1/c; 'open' (substratum exposed at the far end): tanh(cL)/c;
    'blocked' (far end closed to flow): 1/(c tanh(cL)); 'none' (no blanket, source at the toe): 0.
    """
    if end == "none" or L == 0:
        return 0.0
    if end in ("semi-infinite", "infinite"):
        return 1.0 / c
    if end == "open":
        return math.tanh(c * L) / c
    if end == "blocked":
        return 1.0 / (c * math.tanh(c * L))
    raise ValueError(f"unknown blanket end {end!r}")


def blanket_theory(H: float, d: float, kf: float, *, zb_land: float, kb_land: float, L3: float,
                   end3: str = "semi-infinite", L2: float, zb_river: float = 0.0, kb_river: float = 0.0,
                   L1: float = 0.0, end1: str = "none", gamma_buoyant_land: float | None = None,
                   gamma_w: float = 9.81) -> dict:
    """USACE blanket theory (EM 1110-2-1913, App. B).

    Parameters
    ----------
    H : net head on the levee (river level - landside level), m.
    d, kf : thickness (m) and horizontal conductivity (m/s) of the pervious substratum.
    zb_land, kb_land : thickness (m) and vertical conductivity (m/s) of the landside top stratum.
    L3, end3 : length of the landside blanket beyond the toe (m) and its far end ('semi-infinite', 'open',
        'blocked').
    L2 : base width of the levee, toe to toe, m.
    zb_river, kb_river, L1, end1 : the same for the riverside blanket ('none' if the river meets the
        substratum at the riverside toe).
    gamma_buoyant_land : mean (gamma_sat - gamma_w) of the landside top stratum, kN/m3 (for the FS).

    Returns
    -------
    dict with c1, c3 (1/m), x1, x3 (m), h0 (residual head at the landside toe above the landside level, m),
    i0 = h0 / zb_land (m/m), q (seepage under the levee, m3/s per m), i_c and fs when the unit weight is known.
    """
    c3 = math.sqrt(kb_land / (kf * zb_land * d))
    x3 = _x_eff(c3, L3, end3)
    if end1 != "none" and zb_river > 0 and kb_river > 0:
        c1 = math.sqrt(kb_river / (kf * zb_river * d))
        x1 = _x_eff(c1, L1, end1)
    else:
        c1, x1 = float("nan"), 0.0
    total = x1 + L2 + x3
    h0 = H * x3 / total
    q = kf * H * d / total
    out = {"c1_per_m": c1, "c3_per_m": c3, "x1_m": x1, "x2_m": L2, "x3_m": x3, "h0_m": h0,
           "i0": h0 / zb_land, "q_m3_s_per_m": q, "H_m": H}
    if gamma_buoyant_land is not None and math.isfinite(gamma_buoyant_land):
        ic = gamma_buoyant_land / gamma_w
        out["i_critical"] = ic
        out["fs"] = ic / out["i0"] if out["i0"] > 0 else math.inf
    return out


def lane_creep(path, H: float, extra_vertical: float = 0.0) -> dict:
    """Lane's weighted creep along a contact path [[x, y], ...] (m) under a head difference H (m).

    Segments steeper than 45 degrees count in full, flatter ones one third (Lane 1935).
    extra_vertical: vertical creep added for cutoffs not on the path (both faces), m.
    """
    Lv = Lh = 0.0
    for (x0, y0), (x1, y1) in zip(path[:-1], path[1:]):
        dx, dy = abs(x1 - x0), abs(y1 - y0)
        if dy > dx:
            Lv += math.hypot(dx, dy)
        else:
            Lh += math.hypot(dx, dy)
    Lv += extra_vertical
    Lw = Lv + Lh / 3.0
    return {"vertical_m": Lv, "horizontal_m": Lh, "weighted_m": Lw, "H_m": H,
            "ratio": Lw / H if H > 0 else math.inf}


def khosla_exit_gradient(H: float, b: float, d: float) -> dict:
    """Khosla, Bose and Taylor (1936): exit gradient at a downstream cutoff of depth d under a floor of
    length b on an infinitely deep homogeneous foundation, G_E = H / (d pi sqrt(lambda)), m/m."""
    alpha = b / d
    lam = (1.0 + math.sqrt(1.0 + alpha * alpha)) / 2.0
    return {"alpha": alpha, "lambda": lam, "exit_gradient": H / (d * math.pi * math.sqrt(lam)), "H_m": H,
            "b_m": b, "d_m": d}


def khosla_pressures(b: float, d: float) -> dict:
    """Residual heads, as fractions of H, at the junction E of floor and downstream cutoff and at its tip D
    (Khosla, Bose and Taylor 1936): phi_E = arccos((lambda - 2) / lambda) / pi,
    phi_D = arccos((lambda - 1) / lambda) / pi, lambda = (1 + sqrt(1 + (b/d)^2)) / 2 (from memory).

    A single sheet pile (b = 0, lambda = 1) gives phi_E = 1 and phi_D = 1/2, the exact values of the
    conformal solution (Harr 1962).
    """
    lam = (1.0 + math.sqrt(1.0 + (b / d) ** 2)) / 2.0
    return {"lambda": lam, "phi_e": math.acos((lam - 2.0) / lam) / math.pi,
            "phi_d": math.acos((lam - 1.0) / lam) / math.pi}


def khosla_interference(D: float, d: float, b_between: float, b: float) -> float:
    """Khosla, Bose and Taylor (1936): correction, as a fraction of H, of the pressure at a cutoff of depth d
    for another cutoff of depth D a distance b_between away on a floor of total length b,
    C = 0.19 sqrt(D / b') (d + D) / b (19 per cent in the original; from memory). It raises the pressure
    upstream of the other cutoff and lowers it downstream."""
    return 0.19 * math.sqrt(D / b_between) * (d + D) / b


def kozeny_drain(h: float, d: float, k: float) -> dict:
    """Kozeny (1931): phreatic parabola to a horizontal drain: y0 = sqrt(d^2 + h^2) - d (m), q = k y0.

    h : head above the base, m. d : horizontal distance from the parabola's entry point to the focus
    (the drain's upstream end), m. k : conductivity, m/s. The vertex lies y0 / 2 upstream of the focus.
    """
    y0 = math.sqrt(d * d + h * h) - d
    return {"y0_m": y0, "q_m3_s_per_m": k * y0, "vertex_offset_m": y0 / 2.0}


def casagrande_exit(h: float, d: float, beta: float, k: float) -> dict | None:
    """Casagrande (1937): wetted length a (m, along the slope) of a downstream slope at angle beta (rad,
    up to 30 deg) above the toe, a = sqrt(d^2 + h^2) - sqrt(d^2 - h^2 cot^2 beta), and q = k a sin^2 beta;
    None where d^2 < h^2 cot^2 beta (from memory)."""
    cot = 1.0 / math.tan(beta)
    disc = d * d - h * h * cot * cot
    if disc < 0:
        return None
    a = math.sqrt(d * d + h * h) - math.sqrt(disc)
    return {"a_m": a, "q_m3_s_per_m": k * a * math.sin(beta) ** 2}


def terzaghi_heave(d: float, h_a: float, gamma_buoyant: float, gamma_w: float = 9.81) -> dict:
    """Terzaghi (1943): prism d deep, d/2 wide beside a sheet pile; FS = gamma' d / (gamma_w h_a).

    d : penetration below the downstream surface, m. h_a : mean excess head on the prism base, m.
    gamma_buoyant : gamma_sat - gamma_w of the prism, kN/m3.
    """
    W = gamma_buoyant * d * d / 2.0           # submerged weight, kN per m
    U = gamma_w * h_a * d / 2.0               # excess water force on the base, kN per m
    return {"d_m": d, "width_m": d / 2.0, "h_a_m": h_a, "weight_kN_per_m": W, "uplift_kN_per_m": U,
            "fs": W / U if U > 0 else math.inf}


# Sellmeijer et al. (2011) coefficients (from memory):
SELLMEIJER = {
    "eta": 0.25,                 # White's drag coefficient (-)
    "theta_deg": 37.0,           # bedding angle (deg)
    # gamma_p' / gamma_w = 16.5 / 10 = 1.65: the submerged grain unit weight over water's as the rule was
    # calibrated (from memory). Taking the section's gamma_w = 9.81 would give 1.68, a critical head 2 %
    # higher: the unsafe side, so the calibrated ratio is kept whatever the section's gamma_w.
    "grain_ratio": 1.65,
    "d70_m": 2.08e-4,            # reference d70 of the small-scale tests, m
    "nu_m2_s": 1.33e-6,          # kinematic viscosity of water at about 10 degC, m2/s
    "g_m_s2": 9.81,
}


def sellmeijer_2011(L: float, D: float, d70: float, k: float) -> dict:
    """Critical head difference for backward erosion piping, revised rule of Sellmeijer et al. (2011).

    H_c = F_R F_S F_G L with
    F_R = eta (gamma_p' / gamma_w) tan(theta) with gamma_p' / gamma_w = 1.65 (see :data:`SELLMEIJER`), F_S = d70_m / (kappa L)^(1/3) (d70 / d70_m)^0.4,
    F_G = 0.91 (D/L)^(0.28 / ((D/L)^2.8 - 1) + 0.04), kappa = nu k / g (intrinsic permeability, m2).
    The relative-density, uniformity and grain-shape factors of the full rule are taken at their
    reference values (1), as in common Dutch practice (from memory).

    L : seepage length (entry to exit), m. D : thickness of the pervious layer, m. d70 : m. k : m/s.
    """
    s = SELLMEIJER
    kappa = s["nu_m2_s"] * k / s["g_m_s2"]
    FR = s["eta"] * s["grain_ratio"] * math.tan(math.radians(s["theta_deg"]))
    FS = s["d70_m"] / (kappa * L) ** (1.0 / 3.0) * (d70 / s["d70_m"]) ** 0.4
    r = D / L
    FG = 0.91 * r ** (0.28 / (r ** 2.8 - 1.0) + 0.04)
    return {"L_m": L, "D_m": D, "d70_m": d70, "k_m_s": k, "kappa_m2": kappa, "F_R": FR, "F_S": FS, "F_G": FG,
            "H_c_m": FR * FS * FG * L}
