"""Named parameters, the expression language and with_values paths (issue 6).

The language is our own; the checks here are against plain arithmetic (common practice) and against
the series (harmonic-mean) conductivity of a layered column under Darcy's law for an end-to-end
solve (Harr, M.E. (1962), Groundwater and Seepage, ch. 1: exact for 1D flow across layers).
"""

import copy
import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import seepfe
from seepfe import params
from seepfe.errors import SectionError


def _column(order=1):
    return {
        "title": "=not an expression, free text",
        "parameters": {"k_low": 1e-5, "k_high": "=k_low * 100", "t1": 3.0, "t2": "=4 - t1",
                       "h_top": 20.0, "h_bottom": "=h_top - 10"},
        "materials": {"a": {"k": "=k_low"}, "b": {"k": "=k_high / 10000"}},
        "zones": [{"name": "lower", "material": "a", "polygon": [[0, 0], [2, 0], [2, "=t1"], [0, "=t1"]]},
                  {"name": "upper", "material": "b",
                   "polygon": [[0, "=t1"], [2, "=t1"], [2, "=t1 + t2"], [0, "=t1 + t2"]]}],
        "boundaries": [{"name": "bottom", "polyline": [[0, 0], [2, 0]], "head": "=h_bottom"},
                       {"name": "top", "polyline": [[0, "=t1 + t2"], [2, "=t1 + t2"]], "head": "=h_top"}],
        "mesh": {"size": 0.5, "order": order},
    }


def test_resolve_substitutes_and_keeps_input():
    d = _column()
    before = copy.deepcopy(d)
    r = params.resolve(d)
    assert d == before                                     # the input is not changed
    assert "parameters" not in r
    assert r["title"] == "=not an expression, free text"   # free text is never an expression
    assert r["materials"]["b"]["k"] == pytest.approx(1e-7)
    assert r["zones"][1]["polygon"][2] == [2, pytest.approx(4.0)]
    assert r["boundaries"][0]["head"] == 10.0


def test_solve_with_parameters_matches_series_darcy():
    d = _column()
    res = seepfe.solve(d)
    k1, k2, t1, t2 = 1e-5, 1e-7, 3.0, 1.0
    q = (t1 + t2) / (t1 / k1 + t2 / k2) * 10.0 / (t1 + t2) * 2.0   # Darcy, series layers (Harr 1962)
    assert res.boundary_flow("top") == pytest.approx(q, rel=1e-9)
    # a changed parameter changes the flow and the input hash; the same value gives the same hash
    d2 = params.with_values(d, {"h_top": 30.0, "h_bottom": 10.0})
    assert seepfe.solve(d2).boundary_flow("top") == pytest.approx(2 * q, rel=1e-9)
    h1, h2 = seepfe.load_section(d).input_hash, seepfe.load_section(d2).input_hash
    assert h1 != h2
    assert seepfe.load_section(params.with_values(d, {"h_top": 20.0})).input_hash == h1


def test_with_values_paths():
    d = _column()
    out = params.with_values(d, {
        "t1": 2.5,                                   # a parameter
        "materials.a.k": 3e-5,                       # a dict path
        "boundaries.top.head": "=h_top + 1",         # a list item by name, an expression value
        "zones.upper.polygon.2.1": 5.0,              # list items by name and by index
        "boundaries.1.name": "crest",                # a list item by index
        "mesh.order": 2,
    })
    assert d == _column()                            # deep copy: the input is untouched
    assert out["parameters"]["t1"] == 2.5
    assert out["materials"]["a"]["k"] == 3e-5
    assert out["boundaries"][1]["head"] == "=h_top + 1"
    assert out["boundaries"][1]["name"] == "crest"
    assert out["zones"][1]["polygon"][2][1] == 5.0
    assert out["mesh"]["order"] == 2
    r = params.resolve(out)
    assert r["zones"][0]["polygon"][2][1] == 2.5 and r["boundaries"][1]["head"] == 21.0


@pytest.mark.parametrize("key, fragment", [
    ("stag", "no parameter or top-level key"),
    ("t_1", "did you mean 't1'"),
    ("materials.sandd.kx", "no key 'sandd' in materials"),
    ("boundaries.rivr.head", "has no item 'rivr'"),
    ("boundaries.tpo.head", "did you mean 'top'"),
    ("zones.upper.polygon.9.1", "has no item '9'"),
    ("zones.upper.polygon.1.1.0", "is a value"),
    ("", "expected a parameter name"),
])
def test_with_values_bad_paths(key, fragment):
    with pytest.raises(SectionError) as e:
        params.with_values(_column(), {key: 1.0})
    msg = str(e.value)
    assert fragment in msg and "\n" not in msg


@pytest.mark.parametrize("text, value", [
    ("=1 + 2 * 3", 7.0), ("=(1 + 2) * 3", 9.0), ("=-2 ** 2", -4.0), ("=2 ** -1", 0.5),
    ("=2 ** 3 ** 2", 512.0), ("=10 / 4 - 1", 1.5), ("=-(-3)", 3.0), ("=+4", 4.0),
    ("=min(3, a, 7)", 2.0), ("=max(a, 1) * 2", 4.0), ("=abs(-a)", 2.0), ("=sqrt(a * 8)", 4.0),
    ("=1.5e-3 * 2", 3e-3), ("= .5 + a", 2.5), ("=a*a/a-a", 0.0),
])
def test_expression_values(text, value):
    # ordinary arithmetic precedence (common practice): ** binds tighter than unary minus, right-assoc
    assert params.evaluate(text, {"a": 2.0}) == pytest.approx(value, rel=1e-15)


@pytest.mark.parametrize("text, fragment", [
    ("=a.__class__", "attribute access ('.') is not allowed at column 3"),
    ("=__import__('os')", "unknown function '__import__'"),
    ("=eval(1)", "unknown function 'eval'"),
    ("=exec(1)", "unknown function 'exec'"),
    ("=open(1)", "unknown function 'open'"),
    ("=sqr(4)", "did you mean 'sqrt'"),
    ("=a[0]", "'[' is not allowed"),
    ("=lambda: 1", "unexpected character ':'"),
    ("='a'", "unexpected character"),
    ("=b + 1", "unknown parameter 'b'"),
    ("=aa + 1", "did you mean 'a'"),
    ("=1 / (a - 2)", "division by zero at column 4"),
    ("=0 ** -1", "division by zero"),
    ("=(1 + 2", "expected ')'"),
    ("=1 +", "expression ends too early at column 5"),
    ("=1 2", "unexpected number 2 at column 4"),
    ("=2 ^ 3", "write '**'"),
    ("=sqrt(-a)", "sqrt of a negative number"),
    ("=(-a) ** 0.5", "non-integer power"),
    ("=10 ** 400", "result too large"),
    ("=", "empty expression"),
    ("=min", "is a function"),
    ("=abs(1, 2)", "abs() takes 1 argument"),
    ("=" + "(" * 60 + "1" + ")" * 60, "nested more than"),
    ("=" + "1+" * 300 + "1", "longer than"),
])
def test_expression_faults(text, fragment):
    with pytest.raises(SectionError) as e:
        params.evaluate(text, {"a": 2.0})
    msg = str(e.value)
    assert fragment in msg and "\n" not in msg


@settings(max_examples=300, deadline=None)
@given(st.text(alphabet="=ab0123456789.+-*/()_ ,^eEsqrtminx[]'\"", max_size=40))
def test_expression_never_crashes(text):
    """Any string gives a float or a one-line SectionError, never another exception."""
    try:
        v = params.evaluate("=" + text, {"a": 2.0, "b": -1.0})
    except SectionError as e:
        assert "\n" not in str(e)
    else:
        assert isinstance(v, float) and math.isfinite(v)


def test_parameter_faults_name_the_item():
    d = _column()
    d["parameters"]["t2"] = "=t3 - 1"
    with pytest.raises(SectionError, match=r"parameter 't2'.*unknown parameter 't3' \(did you mean 't1'\?\)"):
        seepfe.load_section(d)
    d = _column()
    d["parameters"].update(p="=q + 1", q="=p * 2")
    with pytest.raises(SectionError, match=r"circular definition (p -> q -> p|q -> p -> q)"):
        seepfe.load_section(d)
    d = _column()
    d["zones"][0]["polygon"][2] = [2, "=t1 / (t2 - 1)"]
    with pytest.raises(SectionError, match=r"^<dict>: zones\.'lower'\.polygon\.2\.1: .*division by zero"):
        seepfe.load_section(d)
    d = _column()
    d["materials"]["a"]["k"] = "=kk_low"
    with pytest.raises(SectionError, match=r"materials\.a\.k: .*did you mean 'k_low'"):
        seepfe.load_section(d)
    for bad, frag in [({"1x": 1.0}, "not a valid parameter name"), ({"sqrt": 1.0}, "name of a function"),
                      ({"x": "3"}, "expected a number or an '=' expression"), ({"x": [1]}, "expected a number"),
                      ({"x": True}, "expected a number")]:
        d = _column()
        d["parameters"] = bad
        with pytest.raises(SectionError, match=frag):
            seepfe.load_section(d)


def test_sections_without_parameters_unchanged():
    d = _column()
    r = params.resolve(d)
    # resolving a resolved dict is the identity
    assert params.resolve(r) == r
