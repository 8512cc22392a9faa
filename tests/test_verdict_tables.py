"""The verdict tables and the small closed forms behind the hand methods, as pure functions.

A changed entry in one of these tables changes a verdict on every section without changing any
field: no comparison of heads or flows would see it.  Each value is checked against its publication
(values recalled from memory are marked so), and on the unsafe side in particular: a creep ratio
or a factor of safety lowered is the worst kind of defect, so each entry is pinned exactly.
The table of Lane's ratios itself and CriteriaSpec's defaults are pinned in tests/test_hand_methods.py;
here: the order of Lane's table, the defaults a section actually gets, the water unit weight, and the
blanket-theory end conditions.
"""

import math

import pytest

from seepfe.checks import handmethods as hm
from seepfe.schema import SectionSpec


# ------------------------------------------------------------------------------- Lane (1935)
# Lane, E.W. (1935), Security from under-seepage: masonry dams on earth foundations, Trans. ASCE 100,
# 1235-1351, table of recommended (safe) weighted-creep ratios C_w = L_w / H (from memory).
LANE_1935 = {
    "very fine sand or silt": 8.5,
    "fine sand": 7.0,
    "medium sand": 6.0,
    "coarse sand": 5.0,
    "fine gravel": 4.0,
    "medium gravel": 3.5,
    "coarse gravel including cobbles": 3.0,
    "boulders with some cobbles and gravel": 2.5,
    "soft clay": 3.0,
    "medium clay": 2.0,
    "hard clay": 1.8,
    "very hard clay or hardpan": 1.6,
}


def test_lane_ratios_fall_with_coarser_soil():
    # Lane (1935): the safe ratio falls monotonically from fine to coarse cohesionless soil and from
    # soft to hard clay (the ordering of the table, from memory)
    sands = ["very fine sand or silt", "fine sand", "medium sand", "coarse sand", "fine gravel",
             "medium gravel", "coarse gravel including cobbles", "boulders with some cobbles and gravel"]
    clays = ["soft clay", "medium clay", "hard clay", "very hard clay or hardpan"]
    for seq in (sands, clays):
        r = [hm.LANE_RATIOS[s] for s in seq]
        assert all(a > b for a, b in zip(r, r[1:])), seq
        assert r == [LANE_1935[s] for s in seq]


def test_lane_weighted_creep_of_a_floor_with_a_cutoff():
    # Lane (1935): L_w = sum(L_v) + sum(L_h) / 3, steeper than 45 degrees counts as vertical.
    # A floor 12 m long with a 4 m cutoff at each end, H = 3 m: L_w = 4 * 4 + 12 / 3 = 20 m, C_w = 6.67
    path = [[0, 0], [0, -4], [0, 0], [12, 0], [12, -4], [12, 0]]
    r = hm.lane_creep(path, 3.0)
    assert r["vertical_m"] == pytest.approx(16.0) and r["horizontal_m"] == pytest.approx(12.0)
    assert r["weighted_m"] == pytest.approx(20.0) and r["ratio"] == pytest.approx(20.0 / 3.0)


# ------------------------------------------------------------------------------- default criteria
def test_a_section_without_criteria_gets_the_usace_values():
    # USACE ETL 1110-2-569 (2005), Design guidance for levee underseepage, amending EM 1110-2-1913
    # (2000), Design and Construction of Levees (from memory): factor of safety 1.6 against heave and
    # against uplift at the landside toe, allowable upward gradient 0.5 across the top stratum.
    sec = SectionSpec.model_validate({
        "materials": {"s": {"k": 1e-5}},
        "zones": [{"name": "z", "material": "s", "polygon": [[0, 0], [1, 0], [1, 1], [0, 1]]}],
        "boundaries": [{"name": "b", "polyline": [[0, 0], [1, 0]], "head": 1.0}]})
    got = sec.checks.criteria
    assert (got.fs_heave, got.fs_uplift, got.allowable_gradient) == (1.6, 1.6, 0.5)


def test_default_water_unit_weight():
    # unit weight of fresh water, 9.81 kN/m3 (common practice: 1000 kg/m3 x 9.81 m/s2)
    from seepfe.schema import WaterSpec
    assert WaterSpec().unit_weight == 9.81


# ------------------------------------------------------------------------------- blanket end conditions
def test_blanket_effective_lengths_are_the_three_closed_forms():
    # US Army Corps of Engineers (2000), EM 1110-2-1913, Design and Construction of Levees, App. B
    # (after TM 3-424, 1956; Bennett 1946), from memory: a top stratum of length L beyond the toe
    # acts as a length of pervious substratum
    #   infinite:                        x = 1 / c
    #   open end (substratum exposed):   x = tanh(c L) / c
    #   blocked end (closed to flow):    x = 1 / (c tanh(c L))
    # At c L = 0.5 they differ by a lot: 0.462 / c, 2.164 / c against 1 / c.
    c, L = 2e-3, 250.0
    cl = c * L
    assert hm._x_eff(c, L, "infinite") == pytest.approx(1.0 / c, rel=1e-12)
    assert hm._x_eff(c, L, "open") == pytest.approx(math.tanh(cl) / c, rel=1e-12)
    assert hm._x_eff(c, L, "blocked") == pytest.approx(1.0 / (c * math.tanh(cl)), rel=1e-12)
    # the open end is the short one (a source at the far end), the blocked end the long one
    assert hm._x_eff(c, L, "open") < 0.5 / c < 2.0 / c < hm._x_eff(c, L, "blocked")
    # and all three tend to 1 / c for a long blanket
    for end in ("open", "blocked"):
        assert hm._x_eff(c, 20.0 / c, end) == pytest.approx(1.0 / c, rel=1e-12)


def test_blanket_theory_toe_head_with_an_open_landside_end():
    # EM 1110-2-1913 App. B (from memory): h0 = H x3 / (x1 + L2 + x3); with an open landside end
    # x3 = tanh(c L3) / c; no riverside blanket (x1 = 0, the river meets the substratum at the toe).
    H, d, kf, zb, kb, L2, L3 = 4.0, 20.0, 1e-4, 2.0, 1e-7, 40.0, 300.0
    c = math.sqrt(kb / (kf * zb * d))
    x3 = math.tanh(c * L3) / c
    r = hm.blanket_theory(H, d, kf, zb_land=zb, kb_land=kb, L3=L3, end3="open", L2=L2)
    assert r["x3_m"] == pytest.approx(x3, rel=1e-12)
    assert r["h0_m"] == pytest.approx(H * x3 / (L2 + x3), rel=1e-12)
    assert r["q_m3_s_per_m"] == pytest.approx(kf * H * d / (L2 + x3), rel=1e-12)
