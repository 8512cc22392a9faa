"""Units of section and sweep files: the factor table against an independent units library, conversion at
load (after parameters), the range check in the file's unit, sweep unit inference, '$schema'."""

from __future__ import annotations

import copy
import json
from pathlib import Path

import numpy as np
import pytest

import seepfe
from seepfe import units as U
from seepfe.sweep.spec import expand_cases, load_sweep
from seepfe.sweep.values import infer_unit, key_dimension

ROOT = Path(__file__).resolve().parent.parent
BLANKET = json.loads((ROOT / "sections" / "levee_blanket.json").read_text())

FT = 0.3048


# ------------------------------------------------------------------ the factor table
# pint's definitions (pint 0.2x default registry: international foot, avoirdupois pound, standard
# gravity for lbf) are independent of seepfe; NIST SP 811 (2008), Appendix B.8 gives the same
# factors (1 ft = 0.3048 m exactly; 1 lbf/ft3 = 157.0875 N/m3; 1 lbf/ft2 = 47.88026 Pa).
PINT_NAMES = {"m": "m", "ft": "ft", "m/s": "m/s", "cm/s": "cm/s", "m/day": "m/day", "ft/day": "ft/day",
              "ft/min": "ft/min", "kN/m3": "kN/m**3", "pcf": "lbf/ft**3", "kPa": "kPa", "psf": "lbf/ft**2"}
SI_PINT = {"length": "m", "conductivity": "m/s", "unit_weight": "kN/m**3", "pressure": "kPa"}


@pytest.fixture(scope="module")
def ureg():
    pint = pytest.importorskip("pint")
    return pint.UnitRegistry()


@pytest.mark.parametrize("dim,unit", [(d, u) for d, t in U.FACTORS.items() for u in t])
def test_factors_agree_with_pint(dim, unit, ureg):
    want = ureg.Quantity(1.0, PINT_NAMES[unit]).to(SI_PINT[dim]).magnitude
    assert U.FACTORS[dim][unit] == pytest.approx(want, rel=1e-14)


def test_factors_against_nist_sp811():
    # NIST SP 811 (2008), Appendix B.8, factors for conversion (exact where so marked)
    assert U.FACTORS["length"]["ft"] == 0.3048
    assert U.FACTORS["unit_weight"]["pcf"] * 1000 == pytest.approx(157.0875, rel=1e-6)
    assert U.FACTORS["pressure"]["psf"] * 1000 == pytest.approx(47.88026, rel=1e-6)
    assert U.FACTORS["conductivity"]["ft/day"] == pytest.approx(3.527777777777778e-06, rel=1e-15)


def test_presets_and_objects_parse():
    assert U.parse_units(None) == U.SI and U.parse_units("SI") == U.SI
    assert U.parse_units("US") == U.Units("ft", "ft/day", "pcf", "psf")
    assert U.parse_units({"conductivity": "cm/s"}) == U.Units(conductivity="cm/s")
    with pytest.raises(seepfe.SectionError, match=r"units\.length: unknown unit \"feet\" \(did you mean 'ft'"):
        U.parse_units({"length": "feet"}, "x.json")
    with pytest.raises(seepfe.SectionError, match="unknown key 'lenght' \\(did you mean 'length'"):
        U.parse_units({"lenght": "ft"}, "x.json")
    with pytest.raises(seepfe.SectionError, match="unknown preset 'metric'"):
        U.parse_units("metric", "x.json")


# ------------------------------------------------------------------ sections in US units
def _to_us(d: dict) -> dict:
    """The levee_blanket section rewritten by hand in ft, ft/day and pcf (independent of the converter)."""
    d = copy.deepcopy(d)
    ft = lambda v: v / FT                                          # noqa: E731
    kfd = lambda v: v / (FT / 86400)                               # noqa: E731
    pcf = lambda v: v / 0.157087463846246                          # noqa: E731
    for m in d["materials"].values():
        for k in ("k", "kx", "ky"):
            if k in m:
                m[k] = kfd(m[k])
        m["unit_weight"] = pcf(m["unit_weight"])
        if "d70" in m:
            m["d70"] = ft(m["d70"])
    for z in d["zones"]:
        z["polygon"] = [[ft(x), ft(y)] for x, y in z["polygon"]]
    for b in d["boundaries"]:
        b["polyline"] = [[ft(x), ft(y)] for x, y in b["polyline"]]
        if "head" in b:
            b["head"] = ft(b["head"])
    d["mesh"]["size"] = ft(d["mesh"]["size"])
    for r in d["mesh"]["refine"]:
        r["polyline"] = [[ft(x), ft(y)] for x, y in r["polyline"]]
        r["size"], r["width"] = ft(r["size"]), ft(r["width"])
    d["water"] = {"unit_weight": 9.80665 / 0.157087463846246}      # pcf (about 62.43)
    d["units"] = "US"
    return d


def test_us_section_loads_to_the_same_si_values():
    si = seepfe.load_section(BLANKET)
    us = seepfe.load_section(_to_us(BLANKET))
    assert us.units == U.US and si.units == U.SI
    a, b = si.spec.model_dump(), us.spec.model_dump()
    a["water"]["unit_weight"] = 9.80665
    flat_a, flat_b = _flat(a), _flat(b)
    assert flat_a.keys() == flat_b.keys()
    for k, v in flat_a.items():
        if isinstance(v, float):
            assert flat_b[k] == pytest.approx(v, rel=1e-9, abs=1e-12), k
        else:
            assert flat_b[k] == v, k
    assert us.extent == pytest.approx(si.extent, rel=1e-12)


def _flat(d, pre=""):
    out = {}
    if isinstance(d, dict):
        for k, v in d.items():
            out.update(_flat(v, f"{pre}.{k}"))
    elif isinstance(d, list):
        for i, v in enumerate(d):
            out.update(_flat(v, f"{pre}[{i}]"))
    else:
        out[pre] = d
    return out


def test_us_section_solves_to_the_same_flow():
    si = seepfe.solve(seepfe.load_section(BLANKET), order=1, size=15.0)
    us = seepfe.solve(seepfe.load_section(_to_us(BLANKET)), order=1, size=15.0)
    # the coordinates differ in their last bits after the round trip through ft, so gmsh may place a
    # node a little differently: the flows agree to the discretisation, not to round-off
    assert us.flows["river"] == pytest.approx(si.flows["river"], rel=1e-3)
    assert us.flows["river"] != pytest.approx(si.flows["river"] / FT, rel=1e-3)   # (a missed factor shows)


def test_parameters_are_resolved_before_conversion():
    d = copy.deepcopy(BLANKET)
    d["units"] = {"length": "ft"}
    d["parameters"] = {"stage": 2.0, "freeboard": "=stage + 2"}       # 4 ft: below the 6 ft crest
    d["boundaries"][0]["head"] = "=freeboard"
    sec = seepfe.load_section(d)
    assert sec.spec.boundaries[0].head == pytest.approx(4.0 * FT, rel=1e-15)
    # only lengths change with a length unit: conductivities stay m/s
    assert sec.spec.materials["sand"].kx == 6e-5


def test_remedies_are_converted_too():
    d = json.loads((ROOT / "sections" / "levee_remedies.json").read_text())
    si = seepfe.load_section(d)
    d2 = copy.deepcopy(d)
    d2["units"] = {"conductivity": "cm/s"}
    for m in d2["materials"].values():
        for k in ("k", "kx", "ky"):
            if k in m:
                m[k] = m[k] * 100
    for r in d2.get("remedies", []):
        if "k" in r:
            r["k"] = r["k"] * 100
    cm = seepfe.load_section(d2)
    ka = si.zone_tensors()
    assert np.allclose(cm.zone_tensors(), ka, rtol=1e-12, atol=0)


# ------------------------------------------------------------------ range check in the file's unit
def test_range_check_speaks_the_file_unit_and_spots_cm_s():
    d = copy.deepcopy(BLANKET)
    d["materials"]["sand"]["kx"] = 40.0            # 40 "m/s": a cm/s value typed into a m/s file
    with pytest.raises(seepfe.SectionError) as e:
        seepfe.load_section(d)
    msg = str(e.value)
    assert msg.startswith("<dict>: material 'sand'.kx: 40 m/s is outside the range of soils and rocks")
    assert "in cm/s" in msg and '"conductivity": "cm/s"' in msg
    d["units"] = {"conductivity": "cm/s"}
    d["materials"]["sand"]["kx"] = 5e3             # 50 m/s
    with pytest.raises(seepfe.SectionError, match=r"5000 cm/s is outside .* \(1e-18 to 1e\+03 cm/s\)"):
        seepfe.load_section(d)
    d["materials"]["sand"]["kx"] = 5e-2            # fine in cm/s
    d["materials"]["sand"]["ky"] = 1e-2
    for m in ("fill", "blanket"):
        d["materials"][m]["k"] = 1e-5
    assert seepfe.load_section(d).spec.materials["sand"].kx == pytest.approx(5e-4)


def test_description_hints_catch_a_unit_slip():
    d = copy.deepcopy(BLANKET)
    d["materials"]["blanket"]["k"] = 1e-5          # a clay at 1e-5 "m/s": far off, fits a clay in cm/s
    w = seepfe.load_section(d).warnings
    assert len(w) == 1 and "material 'blanket'" in w[0] and "typed in cm/s" in w[0]
    d = copy.deepcopy(BLANKET)
    d["materials"]["sand"]["description"] = "sand, kx = 6e-5 cm/s from pumping test"
    w = seepfe.load_section(d).warnings
    assert len(w) == 1 and "mentions cm/s" in w[0]
    # the example as written raises nothing; nor does the same file in cm/s with cm/s values
    assert seepfe.load_section(BLANKET).warnings == ()
    d["units"] = {"conductivity": "cm/s"}
    for m in d["materials"].values():
        for k in ("k", "kx", "ky"):
            if k in m:
                m[k] *= 100
    assert seepfe.load_section(d).warnings == ()


def test_schema_key_is_accepted():
    d = {**copy.deepcopy(BLANKET), "$schema": "../docs/section.schema.json"}
    assert seepfe.load_section(d).spec.title == BLANKET["title"]
    d["$schema"] = 3
    with pytest.raises(seepfe.SectionError, match=r"\$schema: expected a string"):
        seepfe.load_section(d)


# ------------------------------------------------------------------ sweeps
def test_dimensions_come_from_the_schema_markers():
    d = json.loads((ROOT / "sections" / "levee_remedies.json").read_text())
    assert key_dimension(d, "materials.sand.kx") == "conductivity"
    assert key_dimension(d, "boundaries.river.head") == "length"
    assert key_dimension(d, "materials.sand.angle") == "angle"
    assert key_dimension(d, "mesh.order") == "-"
    assert key_dimension(d, "remedies.slurry wall.bottom") == "length"
    assert key_dimension(d, "no.such.key") is None
    # parameters take the dimension of the fields they are added into
    assert key_dimension(d, "cutoff_depth") == "length"
    us = {**d, "units": "US"}
    assert infer_unit(us, "materials.sand.kx") == "ft/day" and infer_unit(us, "stage") == "ft"


def test_parameter_dimension_needs_a_sum_not_a_product():
    d = copy.deepcopy(BLANKET)
    d["parameters"] = {"ratio": 4.0, "k_sand": 6e-5, "stage": 5.0, "top": "=stage - 1"}
    d["materials"]["sand"]["kx"] = "=k_sand * ratio"
    d["materials"]["sand"]["ky"] = "=k_sand"
    d["boundaries"][0]["head"] = "=top + 1"
    assert key_dimension(d, "k_sand") == "conductivity"
    assert key_dimension(d, "ratio") is None
    assert key_dimension(d, "stage") == "length"         # through 'top'


def test_sweep_in_its_own_units_is_converted_to_the_section_units():
    sweep = {"units": {"conductivity": "cm/s"}, "$schema": "../docs/sweep.schema.json",
             "vary": {"materials.blanket.k": [1e-5, 1e-4], "boundaries.river.head": [4.0]},
             "fixed": {"materials.sand.kx": 1e-2}}
    spec, label = load_sweep(sweep)
    cases, cols = expand_cases(spec, BLANKET, label)
    assert cols == {"materials.blanket.k": "materials.blanket.k_cm_s", "boundaries.river.head": "boundaries.river.head_m"}
    assert [c.section["materials"]["blanket"]["k"] for c in cases[:2]] == pytest.approx([1e-7, 1e-6], rel=1e-15)
    assert all(c.section["materials"]["sand"]["kx"] == pytest.approx(1e-4) for c in cases)
    # the table shows the sweep's own numbers; base values of keys not varied are shown in its units too
    assert cases[0].params["materials.blanket.k"] == 1e-5
    assert cases[2].params["materials.blanket.k"] == pytest.approx(1e-5)       # section's 1e-7 m/s
    # an explicit unit of the table converts; one of another dimension is refused
    spec, label = load_sweep({"vary": {"boundaries.river.head": {"values": [10.0], "unit": "ft"}}})
    cases, cols = expand_cases(spec, BLANKET, label)
    assert cases[0].section["boundaries"][0]["head"] == pytest.approx(3.048)
    assert cols["boundaries.river.head"] == "boundaries.river.head_ft"
    spec, label = load_sweep({"vary": {"boundaries.river.head": {"values": [10.0], "unit": "cm/s"}}})
    with pytest.raises(seepfe.SectionError, match="'cm/s' is a unit of conductivity, but 'boundaries.river.head' is a length"):
        expand_cases(spec, BLANKET, label)


# ------------------------------------------------------------------ display units
def test_results_are_shown_in_the_file_units_and_kept_si_in_summary(tmp_path):
    from seepfe.analysis import analyse
    from seepfe.output import write_analysis
    sec = seepfe.load_section(ROOT / "sections" / "levee_us.json")
    a = analyse(seepfe.solve(sec, order=1, size=12.0))
    text = a.text()
    q = a.result.flows["river"]
    # 1 m3/s per m = 86400 / 0.3048**2 ft3/day per ft (exact factors)
    assert f"{q * 86400 / FT ** 2:+.4e}" in text and "flow (ft3/day per ft)" in text
    assert "at x (ft)" in text and "m3/s" not in text
    assert f"{q:+.4e}" in a.text(U.SI)
    d = a.to_dict()
    assert d["units"]["length"] == "m" and d["display_units"] == U.PRESETS["US"]
    names = write_analysis(a, tmp_path)
    nodes = np.genfromtxt(tmp_path / "nodes.csv", delimiter=",", names=True)
    assert np.allclose(nodes["y_ft"] * FT, nodes["y_m"])
    assert np.allclose(nodes["pore_pressure_psf"] * U.FACTORS["pressure"]["psf"], nodes["pore_pressure_kPa"])
    el = np.genfromtxt(tmp_path / "elements.csv", delimiter=",", names=True)
    assert np.allclose(el["vx_ft_day"] * FT / 86400, el["vx_m_s"])
    assert "dh_dx_ft" not in el.dtype.names               # gradients have no unit
    ck = next(n for n in names if n.startswith("checks_"))
    c = np.genfromtxt(tmp_path / ck, delimiter=",", names=True)
    assert np.allclose(c["distance_from_toe_ft"] * FT, c["distance_from_toe_m"], equal_nan=True)


def test_display_text_converts_lengths_only():
    t = "x = 274.32 m (+256.2 m from the toe); gradient 0.5 m/m; q 1e-5 m3/s per m"
    assert U.display_text(t, U.US) == "x = 900.00 ft (+840.6 ft from the toe); gradient 0.5 m/m; q 1e-5 m3/s per m"
    assert U.display_text(t, U.SI) == t


def test_sweep_table_gets_the_file_units_beside_si():
    from seepfe.sweep.api import _with_display_columns
    cols = ["case", "boundaries.river.head_ft", "flow_river_m3_s_per_m", "head_toe_m", "fs", "exit_gradient_max"]
    rows = [{"case": 0, "boundaries.river.head_ft": 398.0, "flow_river_m3_s_per_m": 1e-5, "head_toe_m": 118.0,
             "fs": 1.2, "exit_gradient_max": 0.4}]
    c2, r2 = _with_display_columns(cols, rows, U.US)
    assert c2[:len(cols)] == cols and set(c2[len(cols):]) == {"flow_river_ft3_day_per_ft", "head_toe_ft"}
    assert r2[0]["head_toe_ft"] == pytest.approx(118.0 / FT)
    assert r2[0]["flow_river_ft3_day_per_ft"] == pytest.approx(1e-5 * 86400 / FT ** 2)
    assert _with_display_columns(cols, rows, U.SI) == (cols, rows)
