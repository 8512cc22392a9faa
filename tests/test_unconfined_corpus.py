"""A corpus of invented unconfined sections that must all converge with the default solver settings (issue 11).

Homogeneous and zoned dams, toe drains as boundaries and as zones, chimney and blanket drains, slopes from
1:1.5 to 1:4, conductivity contrasts up to 1e4, local refinement down to 1/1000 of the height at drain ends
and slope toes, P1 and P2.  Every case must converge (``solver_info["converged"]``) with the flow balance
below 1e-6 of the throughflow; where a closed form or a classical hand method applies, the discharge is
checked against it with the source named beside the check.

The cases are invented scenarios.  Those that take more than a few seconds on two shared cores are marked
``slow`` (run by CI; ``python3 -m pytest -m "not slow"`` leaves them out).
``python3 tests/test_unconfined_corpus.py`` prints the table of iterations and balances.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import seepfe

K = 1e-6          # m/s, fill


def _dam(H=10.0, h=8.0, m1=2.5, m2=2.0, crest=4.0, k=K, order=2, size=None):
    """Homogeneous trapezoidal dam on an impervious base; upstream slope 1:m1, downstream 1:m2."""
    x1 = m1 * H
    x2 = x1 + crest
    x3 = x2 + m2 * H
    sec = {"title": "invented homogeneous dam", "materials": {"fill": {"k": k}},
           "zones": [{"name": "dam", "material": "fill", "polygon": [[0, 0], [x3, 0], [x2, H], [x1, H]]}],
           "boundaries": [{"name": "upstream", "polyline": [[0, 0], [x1, H]], "head": h, "dry_above_level": True}],
           "mesh": {"order": order}}
    if size:
        sec["mesh"]["size"] = size
    return sec, (x1, x2, x3)


def dam_head_drain(order=2, refine=0.01):
    """Issue 11, case 1: horizontal toe drain held at h = 0 on the base under the downstream third, the mesh
    refined to H/1000 at the drain's upstream end."""
    H, h, drain = 10.0, 8.0, 10.0
    sec, (x1, x2, x3) = _dam(H, h, 2.5, 2.0, size=0.5)
    xd = x3 - drain
    sec["zones"][0]["polygon"] = [[0, 0], [xd, 0], [x3, 0], [x2, H], [x1, H]]
    sec["boundaries"] += [{"name": "drain", "polyline": [[xd, 0], [x3, 0]], "head": 0.0},
                          {"name": "downstream", "polyline": [[x3, 0], [x2, H]], "seepage_face": True}]
    sec["mesh"]["order"] = order
    sec["mesh"]["refine"] = [{"point": [xd, 0], "size": refine * H / 10.0}]
    return sec


def kozeny_domain(refine_frac=1e-3, order=2):
    """Issue 11, case 2: the exact Kozeny domain (upstream face the confocal parabola h = H), drain on the
    base, refined to about H/1000 at the drain's upstream end (the focus)."""
    H, d = 6.0, 12.0
    y0 = math.sqrt(H * H + d * d) - d
    s0, tH = math.sqrt(y0 / 2), H / math.sqrt(2 * y0)
    sig = np.linspace(0, s0, 16)
    face = np.column_stack([sig**2 - tH**2, 2 * sig * tH])
    top, xd = H + 1.0, 6.0
    sig2 = np.linspace(s0, top / (2 * tH), 4)[1:]
    face2 = np.column_stack([sig2**2 - tH**2, 2 * sig2 * tH])
    poly = [[xd, 0.0], [xd, top]] + face2[::-1].tolist() + face[::-1].tolist() + [[0.0, 0.0]]
    sec = {"title": "invented Kozeny embankment", "materials": {"fill": {"k": K}},
           "zones": [{"name": "dam", "material": "fill", "polygon": poly}],
           "boundaries": [{"name": "upstream", "polyline": face.tolist() + face2.tolist(), "head": H,
                           "dry_above_level": True},
                          {"name": "drain", "polyline": [[0, 0], [xd, 0]], "drain": True}],
           "mesh": {"order": order, "refine": [{"point": [0.0, 0.0], "size": refine_frac * H}]}}
    return sec, y0


def rect_dam(order=1, refine=True):
    """Rectangular dam with tailwater; refined to H/1000 at the downstream toe."""
    L, H, h1, h2 = 12.0, 8.0, 6.0, 1.0
    sec = {"title": "invented rectangular dam", "materials": {"fill": {"k": K}},
           "zones": [{"name": "dam", "material": "fill", "polygon": [[0, 0], [L, 0], [L, H], [0, H]]}],
           "boundaries": [{"name": "up", "polyline": [[0, 0], [0, H]], "head": h1, "dry_above_level": True},
                          {"name": "down", "polyline": [[L, 0], [L, H]], "head": h2, "dry_above_level": True}],
           "mesh": {"size": 0.4, "order": order}}
    if refine:
        sec["mesh"]["refine"] = [{"point": [L, h2], "size": H / 1000}]
    return sec, (L, h1, h2)


def steep_dam_no_drain(order=2):
    """Slopes 1:1.5 both sides, seepage face on the downstream slope, toe refined to H/1000."""
    sec, (x1, x2, x3) = _dam(H=10.0, h=9.0, m1=1.5, m2=1.5, crest=3.0, size=0.5, order=order)
    sec["boundaries"].append({"name": "downstream", "polyline": [[x3, 0], [x2, 10.0]], "seepage_face": True})
    sec["mesh"]["refine"] = [{"point": [x3, 0.0], "size": 0.01}]
    return sec


def flat_dam_toe_drain_zone(order=2):
    """Slopes 1:4 upstream, 1:3 downstream; a triangular toe drain as a drain zone, refined at its upstream corner."""
    H, h = 8.0, 7.0
    x1, x2 = 32.0, 36.0
    x3 = x2 + 3 * H
    xd = x3 - 6.0
    yd = 2.0
    xs = x3 - 3 * yd          # where the slope meets the top of the drain
    sec = {"title": "invented flat dam with a toe drain", "materials": {"fill": {"k": K}, "gravel": {"k": 1e-2}},
           "zones": [{"name": "dam", "material": "fill",
                      "polygon": [[0, 0], [xd, 0], [xd, yd], [xs, yd], [x2, H], [x1, H]]},
                     {"name": "toe drain", "material": "gravel", "drain": True,
                      "polygon": [[xd, 0], [x3, 0], [xs, yd], [xd, yd]]}],
           "boundaries": [{"name": "upstream", "polyline": [[0, 0], [x1, H]], "head": h, "dry_above_level": True}],
           "mesh": {"size": 0.8, "order": order, "refine": [{"point": [xd, 0.0], "size": H / 1000}]}}
    return sec


def zoned_chimney_blanket(order=2, anisotropic_core=False):
    """Core k 1e-8 between shells 1e-4 (contrast 1e4), chimney drain and blanket drain as zones; refined at the
    foot of the chimney."""
    kc, ks = 1e-8, 1e-4
    core = {"kx": 4 * kc, "ky": kc} if anisotropic_core else {"k": kc}
    return {"title": "invented zoned dam", "materials": {"core": core, "shell": {"kx": ks, "ky": ks / 4},
                                                         "filter": {"k": 1e-3}},
            "zones": [{"name": "upstream shell", "material": "shell", "polygon": [[0, 0], [20, 0], [22, 8], [19, 8]]},
                      {"name": "core", "material": "core", "polygon": [[20, 0], [26, 0], [24, 8], [22, 8]]},
                      {"name": "chimney", "material": "filter", "drain": True,
                       "polygon": [[26, 0], [27, 0], [25, 8], [24, 8]]},
                      {"name": "downstream shell", "material": "shell",
                       "polygon": [[27, 1], [42, 1], [28, 8], [25, 8], [26.75, 1]]},
                      {"name": "blanket", "material": "filter", "drain": True,
                       "polygon": [[27, 0], [44, 0], [42, 1], [27, 1], [26.75, 1]]}],
            "boundaries": [{"name": "reservoir", "polyline": [[0, 0], [19, 8]], "head": 7.0, "dry_above_level": True},
                           {"name": "toe", "polyline": [[44, 0], [42, 1], [28, 8]], "seepage_face": True}],
            "mesh": {"size": 0.6, "order": order, "refine": [{"point": [26.0, 0.0], "size": 0.008}]}}


def zoned_core_toe_boundary(order=1):
    """Central core k 1e-8 in shells k 1e-4 (contrast 1e4), downstream toe drain as an h = 0 base boundary."""
    return {"title": "invented zoned dam with a toe drain boundary",
            "materials": {"core": {"k": 1e-8}, "shell": {"k": 1e-4}},
            "zones": [{"name": "upstream shell", "material": "shell", "polygon": [[0, 0], [22, 0], [24, 10], [20, 10]]},
                      {"name": "core", "material": "core", "polygon": [[22, 0], [30, 0], [26, 10], [24, 10]]},
                      {"name": "downstream shell", "material": "shell",
                       "polygon": [[30, 0], [40, 0], [50, 0], [30, 10], [26, 10]]}],
            "boundaries": [{"name": "reservoir", "polyline": [[0, 0], [20, 10]], "head": 9.0, "dry_above_level": True},
                           {"name": "toe drain", "polyline": [[40, 0], [50, 0]], "head": 0.0},
                           {"name": "downstream", "polyline": [[50, 0], [30, 10]], "seepage_face": True}],
            "mesh": {"size": 0.6, "order": order, "refine": [{"point": [30.0, 0.0], "size": 0.01}]}}


def dam_on_pervious_foundation(order=2):
    """Homogeneous dam on a foundation 100x more pervious, toe drain zone on the foundation, refined at the
    drain's upstream corner."""
    return {"title": "invented dam on a pervious foundation",
            "materials": {"fill": {"k": 1e-7}, "sand": {"k": 1e-5}, "gravel": {"k": 1e-2}},
            "zones": [{"name": "dam", "material": "fill", "polygon": [[0, 0], [36, 0], [36, 1.5], [27, 6], [23, 6]]},
                      {"name": "toe drain", "material": "gravel", "drain": True,
                       "polygon": [[36, 0], [42, 0], [39, 1.5], [36, 1.5]]},
                      {"name": "foundation", "material": "sand",
                       "polygon": [[-20, 0], [0, 0], [36, 0], [42, 0], [70, 0], [70, -5], [-20, -5]]}],
            "boundaries": [{"name": "reservoir", "polyline": [[-20, 0], [0, 0], [23, 6]], "head": 5.0,
                            "dry_above_level": True},
                           {"name": "tailwater ground", "polyline": [[42, 0], [70, 0]], "seepage_face": True}],
            "mesh": {"size": 0.7, "order": order, "refine": [{"point": [36.0, 0.0], "size": 0.006}]}}


def anisotropic_blanket_drain(order=2):
    """Homogeneous fill with kx/ky = 9 on a horizontal blanket drain zone (1:3 and 1:2.5 slopes)."""
    H, h = 9.0, 8.0
    x1, x2 = 27.0, 31.0
    x3 = x2 + 2.5 * H
    xb = 34.0
    return {"title": "invented anisotropic dam on a blanket drain",
            "materials": {"fill": {"kx": 9e-7, "ky": 1e-7}, "gravel": {"k": 1e-2}},
            "zones": [{"name": "dam", "material": "fill",
                       "polygon": [[0, 0], [xb, 0], [xb, 0.5], [x3 - 1.25, 0.5], [x2, H], [x1, H]]},
                      {"name": "blanket drain", "material": "gravel", "drain": True,
                       "polygon": [[xb, 0], [x3, 0], [x3 - 1.25, 0.5], [xb, 0.5]]}],
            "boundaries": [{"name": "upstream", "polyline": [[0, 0], [x1, H]], "head": h, "dry_above_level": True}],
            "mesh": {"size": 0.7, "order": order, "refine": [{"point": [xb, 0.0], "size": H / 1000}]}}


def chimney_homogeneous(order=1):
    """Homogeneous dam (slopes 1:2) with a vertical chimney drain zone joined to a short base drain."""
    return {"title": "invented dam with a chimney drain",
            "materials": {"fill": {"k": 5e-7}, "filter": {"k": 1e-3}},
            "zones": [{"name": "upstream fill", "material": "fill", "polygon": [[0, 0], [24, 0], [24, 10], [20, 10]]},
                      {"name": "chimney", "material": "filter", "drain": True,
                       "polygon": [[24, 0], [25, 0], [25, 10], [24, 10]]},
                      {"name": "downstream fill", "material": "fill", "polygon": [[25, 0], [45, 0], [25, 10]]}],
            "boundaries": [{"name": "reservoir", "polyline": [[0, 0], [20, 10]], "head": 8.5, "dry_above_level": True},
                           {"name": "downstream", "polyline": [[45, 0], [25, 10]], "seepage_face": True}],
            "mesh": {"size": 0.5, "order": order, "refine": [{"point": [24.0, 0.0], "size": 0.01}]}}


def levee_on_blanket(order=2):
    """Levee of silty fill on a clay blanket over sand (contrast 1e3), landside seepage face refined to H/1000
    at the landside toe."""
    return {"title": "invented levee on a clay blanket",
            "materials": {"fill": {"kx": 4e-7, "ky": 1e-7}, "clay": {"k": 1e-7}, "sand": {"kx": 2e-4, "ky": 5e-5}},
            "zones": [{"name": "levee", "material": "fill", "polygon": [[0, 0], [26, 0], [14, 5], [10, 5]]},
                      {"name": "blanket", "material": "clay",
                       "polygon": [[-40, 0], [0, 0], [26, 0], [80, 0], [80, -2], [-40, -2]]},
                      {"name": "sand", "material": "sand", "polygon": [[-40, -2], [80, -2], [80, -14], [-40, -14]]}],
            "boundaries": [{"name": "river", "polyline": [[-40, 0], [0, 0], [10, 5]], "head": 4.0,
                            "dry_above_level": True},
                           {"name": "landside", "polyline": [[14, 5], [26, 0], [80, 0]], "seepage_face": True}],
            "mesh": {"size": 1.5, "order": order, "refine": [{"point": [26.0, 0.0], "size": 0.005}]}}


def van_genuchten_toe_drain(order=2):
    """Fill with a van Genuchten retention curve, toe drain zone, slopes 1:2.5 and 1:2."""
    sec = flat_dam_toe_drain_zone(order)
    sec["title"] = "invented dam with an unsaturated fill"
    sec["materials"]["fill"]["unsaturated"] = {"alpha": 1.5, "n": 2.5, "kr_min": 1e-6}
    sec["mesh"]["refine"] = [{"point": sec["zones"][1]["polygon"][0], "size": 0.05}]
    return sec


def split_dam_toe_drain(order=2):
    """The toe-drain dam on a fine mesh made by splits (mesh sequencing on nested levels)."""
    sec = flat_dam_toe_drain_zone(order)
    sec["mesh"]["size"] = 0.25
    sec["mesh"]["split"] = 1
    return sec


#: name -> (builder, slow)
CASES = {
    "dam, h=0 toe drain boundary, refined 1/1000, P2": (lambda: dam_head_drain(2), False),
    "dam, h=0 toe drain boundary, refined 1/1000, P1": (lambda: dam_head_drain(1), False),
    "Kozeny domain, drain boundary, refined 1/1000, P2": (lambda: kozeny_domain()[0], False),
    "rectangular dam, toe refined 1/1000, P1": (lambda: rect_dam(1)[0], False),
    "slopes 1:1.5, seepage face, toe refined, P2": (steep_dam_no_drain, False),
    "slopes 1:4 / 1:3, toe drain zone, refined 1/1000, P2": (flat_dam_toe_drain_zone, False),
    "zoned 1e4, chimney + blanket drain zones, P2": (zoned_chimney_blanket, False),
    "zoned 1e4, anisotropic core, chimney + blanket, P2": (lambda: zoned_chimney_blanket(anisotropic_core=True), True),
    "zoned 1e4 core, toe drain boundary, P1": (zoned_core_toe_boundary, False),
    "dam on pervious foundation, toe drain zone, P2": (dam_on_pervious_foundation, True),
    "kx/ky = 9 on a blanket drain zone, refined 1/1000, P2": (anisotropic_blanket_drain, False),
    "chimney drain zone, slopes 1:2, P1": (chimney_homogeneous, False),
    "levee on clay blanket (1e3), toe refined 1/1000, P2": (levee_on_blanket, True),
    "van Genuchten fill, toe drain zone, P2": (van_genuchten_toe_drain, True),
    "split mesh (sequencing), toe drain zone, P2": (split_dam_toe_drain, True),
}


def _params():
    return [pytest.param(name, marks=[pytest.mark.slow] if slow else [], id=name) for name, (_, slow) in CASES.items()]


def _check(r):
    info = r.solver_info
    u = info["unconfined"]
    assert info["converged"] and u["converged"], u["stop_reason"]
    # issue 11: flow balance below 1e-6 of the throughflow (global balance of the boundary flows is Darcy
    # continuity, exact for the consistent nodal reactions; common practice)
    assert r.balance["relative_error"] < 1e-6
    assert u["relative_residual"] <= 1e-6
    return u


@pytest.mark.parametrize("name", _params())
def test_corpus_converges_with_defaults(name):
    r = seepfe.solve(CASES[name][0]())
    _check(r)


def test_head_drain_dam_against_casagrande_basic_parabola():
    # Casagrande, A. (1937), Seepage through dams, J. New England Water Works Assoc. 51(2): for a dam on a
    # horizontal drain the phreatic line is the basic (Kozeny) parabola with its focus at the drain's upstream
    # end, starting 0.3 Delta upstream of where the water meets the upstream slope (Delta = horizontal
    # projection of the wetted slope); q = k y0, y0 = sqrt(h^2 + d^2) - d, d = horizontal distance from that
    # point to the focus.  Kozeny, J. (1931), Wasserkraft und Wasserwirtschaft 26(3): exact only for the
    # parabolic upstream face (held to 3 % below).  On a straight 1:2.5 slope the 0.3 Delta entry correction is
    # empirical and the hand value comes out low: measured here the FE discharge is 16 % above it (as for the
    # embankment without a drain in test_unconfined.py, 16-17 %); the band is 20 % and the hand value must not
    # exceed the FE one (its known bias).
    sec = dam_head_drain(2)
    r = seepfe.solve(sec)
    _check(r)
    h, m1 = 8.0, 2.5
    xd = sec["boundaries"][1]["polyline"][0][0]
    d = xd - 0.7 * m1 * h
    y0 = math.hypot(h, d) - d
    q = K * y0
    fe = r.boundary_flow("upstream")
    assert fe == pytest.approx(q, rel=0.20) and fe > q
    assert -r.boundary_flow("drain") - r.boundary_flow("downstream") == pytest.approx(fe, rel=1e-6)


def test_kozeny_domain_refined_matches_kozeny_discharge():
    # Kozeny, J. (1931), Wasserkraft und Wasserwirtschaft 26(3); Casagrande (1937), as above: q = k y0, exact on
    # the domain bounded by the confocal parabola h = H (drawn with 15 chords; the transition of the default kr
    # adds about 1-2 % of unsaturated flow, docs/unconfined.md)
    sec, y0 = kozeny_domain()
    r = seepfe.solve(sec)
    _check(r)
    assert r.drain_flows()["drain"] == pytest.approx(K * y0, rel=0.03)


def test_rectangular_dam_refined_matches_dupuit_discharge():
    # Dupuit-Forchheimer discharge q = k (h1^2 - h2^2) / (2 L), exact for the discharge of the rectangular dam
    # with a seepage face: Charny, I.A. (1951), Dokl. Akad. Nauk SSSR 79(6); Polubarinova-Kochina, P.Ya.
    # (1962), Theory of Ground Water Movement, ch. II.  P2 with the toe refined to H/1000 (P1 carries a
    # transition of the default kr twice as wide, about 4 % of extra unsaturated flow on this mesh).
    sec, (L, h1, h2) = rect_dam(2)
    r = seepfe.solve(sec)
    _check(r)
    q = K * (h1**2 - h2**2) / (2 * L)
    assert r.boundary_flow("up") == pytest.approx(q, rel=0.03)


if __name__ == "__main__":       # the corpus table for docs/unconfined.md
    import time
    print("| case | nodes | iterations | factorisations | restarts | relative residual | balance | time (s) |")
    print("|---|---|---|---|---|---|---|---|")
    for name, (build, _) in CASES.items():
        t0 = time.perf_counter()
        r = seepfe.solve(build())
        dt = time.perf_counter() - t0
        u = r.solver_info["unconfined"]
        flag = "" if u["converged"] else " NOT CONVERGED"
        print(f"| {name}{flag} | {r.mesh.n_nodes} | {u['iterations']} | {u['factorizations']} | {u['restarts']} | "
              f"{u['relative_residual']:.1e} | {r.balance['relative_error']:.1e} | {dt:.2f} |", flush=True)
