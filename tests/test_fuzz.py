"""Property test: mutated sections either solve with a balanced result or raise a seepfe error.

Valid sections are broken at random (keys dropped, duplicated or misspelt; vertices moved; values
swapped for other types; NaN, infinite, huge and tiny numbers) and loaded and solved.  The outcome
must be one of two: a result whose boundary flows balance (inflow equals outflow to 1e-8 relative,
the consistent nodal-reaction method conserves mass exactly up to round-off; common practice), or a
:class:`seepfe.SeepfeError` (normally :class:`seepfe.SectionError`) with a one-line message.
Never another exception, never a hang.

Meshes are kept small (coarse ``mesh.size`` and a low ``mesh.max_elements``) so the whole file runs
in well under a minute.  ``SEEPFE_FUZZ_EXAMPLES`` raises the number of cases for a longer local run.
CI also runs the slow-marked ``..._at_scale`` tests: 3000 cases on the fixed seed 2
(``SEEPFE_FUZZ_CI_EXAMPLES`` changes the count).
"""

from __future__ import annotations

import copy
import faulthandler
import json
import math
import os

import numpy as np
import pytest
from hypothesis import HealthCheck, given, seed, settings
from hypothesis import strategies as st

import seepfe

EXAMPLES = int(os.environ.get("SEEPFE_FUZZ_EXAMPLES", "60"))
MAX_ELEMENTS = 3000

_FUZZ = settings(max_examples=EXAMPLES, deadline=None, derandomize="SEEPFE_FUZZ_EXAMPLES" not in os.environ,
                 suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large], database=None)
#: the CI run: many more cases on a fixed seed (the seed and count at which issue 15 found a balance of
#: 1.55e-8 against the 1e-8 bound below)
_FUZZ_CI = settings(_FUZZ, max_examples=int(os.environ.get("SEEPFE_FUZZ_CI_EXAMPLES", "3000")), derandomize=False)


def _levee() -> dict:
    """Invented levee on a blanket over anisotropic sand, with a seepage face and a flux boundary."""
    return {
        "title": "Invented fuzz levee",
        "materials": {"fill": {"k": 1e-7, "unit_weight": 19.0},
                      "blanket": {"k": 5e-8},
                      "sand": {"kx": 1e-4, "ky": 2.5e-5, "angle": 15.0}},
        "zones": [
            {"name": "embankment", "material": "fill", "polygon": [[-12, 0], [12, 0], [2, 4], [-2, 4]]},
            {"name": "blanket", "material": "blanket", "polygon": [[-40, 0], [40, 0], [40, -1], [-40, -1]]},
            {"name": "foundation", "material": "sand", "polygon": [[-40, -1], [40, -1], [40, -10], [-40, -10]]},
        ],
        "boundaries": [
            {"name": "river", "polyline": [[-40, 0], [-12, 0], [-7, 2]], "head": 3.0},
            {"name": "landside", "polyline": [[12, 0], [40, 0]], "seepage_face": True},
            {"name": "crest", "polyline": [[-2, 4], [2, 4]], "flux": 1e-9},
        ],
        "mesh": {"size": 5.0, "order": 2, "refine": [{"polyline": [[12, 0], [20, 0]], "size": 1.5}]},
    }


def _dam() -> dict:
    """Invented homogeneous dam with a cutoff, a drain and a river stage on a dry slope."""
    return {
        "materials": {"core": {"k": 2e-8}, "base": {"k": 1e-5}},
        "zones": [
            {"name": "dam", "material": "core", "polygon": [[0, 0], [30, 0], [18, 6], [12, 6]]},
            {"name": "cutoff", "material": "core", "polygon": [[13, 0], [17, 0], [17, -4], [13, -4]]},
            {"name": "base", "material": "base",
             "polygon": [[-20, 0], [0, 0], [13, 0], [13, -4], [17, -4], [17, 0], [30, 0], [50, 0], [50, -8], [-20, -8]]},
        ],
        "boundaries": [
            {"name": "reservoir", "polyline": [[-20, 0], [0, 0], [12, 6]], "head": 5.0, "dry_above_level": True},
            {"name": "drain", "polyline": [[30, 0], [50, 0]], "drain": True},
        ],
        "mesh": {"size": 4.0, "order": 1},
        "solver": {"linear": "direct"},
    }


BASES = [_levee, _dam]


def _paths(node, prefix=()):
    """Every path (tuple of keys/indices) in a nested dict/list, the root included."""
    out = [prefix]
    if isinstance(node, dict):
        for k, v in node.items():
            out += _paths(v, prefix + (k,))
    elif isinstance(node, list):
        for i, v in enumerate(node):
            out += _paths(v, prefix + (i,))
    return out


def _get(d, path):
    for k in path:
        d = d[k]
    return d


_numbers = st.sampled_from([math.nan, math.inf, -math.inf, 1e300, -1e300, 1e-300, -1e-300, 0.0, -1.0, 1e-12,
                            1e12, 3, 2**63, 0.5])
# every draw is a fresh object (a deep copy): one list or dict handed out twice and put in two places
# would make the mutated section share, or even contain, itself
_values = st.one_of(
    _numbers,
    st.sampled_from(["", "x", "1e-7", None, True, False, [], {}, [1.0], [[0.0, 0.0]], [1.0, 2.0, 3.0],
                     {"k": 1e-7}, "sand", "fill", [[0, 0], [1, 0], [0, 1]]]).map(copy.deepcopy),
    st.floats(allow_nan=True, allow_infinity=True),
    st.integers(min_value=-10, max_value=10),
)
_ops = st.sampled_from(["drop", "duplicate", "rename", "replace", "move", "scale", "swap"])
_mutation = st.tuples(_ops, st.integers(0, 10**6), st.integers(0, 10**6), _values,
                      st.floats(-50, 50, allow_nan=False), st.floats(-50, 50, allow_nan=False))


def _mutate(d: dict, m) -> None:
    op, i, j, value, dx, dy = m
    paths = _paths(d)[1:]
    if not paths:
        return
    path = paths[i % len(paths)]
    parent, key = _get(d, path[:-1]), path[-1]
    if op == "drop":
        del parent[key]
    elif op == "duplicate":
        if isinstance(parent, list):
            parent.insert(key, copy.deepcopy(parent[key]))
        else:
            parent[f"{key}"[:-1] or "x"] = copy.deepcopy(parent[key])       # a near-miss copy
    elif op == "rename" and isinstance(parent, dict):
        parent[f"{key}_" if j % 2 else str(key).upper()] = parent.pop(key)
    elif op == "replace":
        parent[key] = value
    elif op == "move":
        # a vertex: any [x, y] pair of numbers
        pts = [p for p in _paths(d) if isinstance(_get(d, p), list) and len(_get(d, p)) == 2
               and all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in _get(d, p))]
        if pts:
            p = pts[j % len(pts)]
            x, y = _get(d, p)
            if j % 3 == 0:                                   # snap onto another vertex
                x, y = _get(d, pts[(j // 3) % len(pts)])
            else:
                x, y = x + dx, y + dy
            _get(d, p[:-1])[p[-1]] = [x, y]
    elif op == "scale":
        v = parent[key]
        if isinstance(v, (int, float)) and not isinstance(v, bool):
            parent[key] = v * [1e-12, 1e12, -1.0, 1e200, 1e-200][j % 5]
    elif op == "swap":
        other = paths[j % len(paths)]
        if other[:len(path)] != path and path[:len(other)] != other:
            op_parent = _get(d, other[:-1])
            parent[key], op_parent[other[-1]] = op_parent[other[-1]], parent[key]


def _keep_small(d: dict) -> None:
    """Keep the mesh small whatever the mutation did (coarse size, low element limit)."""
    mesh = d.get("mesh")
    if isinstance(mesh, dict):
        mesh["max_elements"] = MAX_ELEMENTS


def _contrast(sec) -> float:
    """Largest over smallest principal conductivity of the materials in use."""
    k = [v for z in sec.spec.zones for m in [sec.spec.materials[z.material]]
         for v in ((m.k,) if m.k is not None else (m.kx, m.ky))]
    return max(k) / min(k)


def _check(data) -> str:
    """Load and solve; return 'ok' or the error class name; fail on anything else."""
    try:
        sec = seepfe.load_section(data)
        res = seepfe.solve(sec)
    except seepfe.SeepfeError as e:
        msg = str(e)
        assert msg and "\n" not in msg, repr(msg)
        return type(e).__name__
    bal = res.balance
    assert np.all(np.isfinite(res.h)), "non-finite heads in a result"
    if not res.solver_info["converged"]:
        # an iteration cap reached (seepage face or phreatic surface): flagged, never silent; the CLI
        # exits with code 3 and the summary says converged: false
        return "unconverged"
    # Round-off floor: where one zone conducts far better than the zone that limits the flow, heads in
    # the pervious zone differ by ~ q / k_max and double precision resolves flows only to about
    # 1e-16 * contrast (measured: 5e-10 at contrast 2e6, 3e-8 at 1.6e8).  Up to a contrast of 1e6
    # (every ordinary levee or dam) the balance must hold to 1e-8.
    assert bal["relative_error"] < max(1e-8, 1e-15 * _contrast(sec)) or bal["inflow_m3_s_per_m"] == 0.0, bal
    # a result must be usable: every named boundary has a finite flow
    for name in sec.boundary_names:
        assert math.isfinite(res.boundary_flow(name))
    return "ok"


@pytest.fixture(autouse=True)
def _no_hang():
    """A hang (in gmsh or a solver) dumps the stacks and ends the run instead of blocking CI."""
    faulthandler.dump_traceback_later(240, exit=True)
    yield
    faulthandler.cancel_dump_traceback_later()


@pytest.mark.parametrize("base", BASES, ids=lambda f: f.__name__.strip("_"))
def test_bases_are_valid(base):
    assert _check(base()) == "ok"


@settings(max_examples=300, derandomize=True, database=None, deadline=None)
@given(a=_values, b=_values)
def test_value_generator_hands_out_fresh_objects(a, b):
    if isinstance(a, (list, dict)) and isinstance(b, (list, dict)):
        assert a is not b


def _mutated(base, mutations):
    d = base()
    for m in mutations:
        try:
            _mutate(d, m)
        except (KeyError, IndexError, TypeError):
            pass                                  # the mutation itself did not apply: keep what we have
    _keep_small(d)
    _check(d)


@_FUZZ
@given(base=st.sampled_from(BASES), mutations=st.lists(_mutation, min_size=1, max_size=3))
def test_mutated_sections_solve_or_raise_seepfe_error(base, mutations):
    _mutated(base, mutations)


@pytest.mark.slow
@seed(2)
@_FUZZ_CI
@given(base=st.sampled_from(BASES), mutations=st.lists(_mutation, min_size=1, max_size=3))
def test_mutated_sections_at_scale(base, mutations):
    _mutated(base, mutations)


def _corrupted(tmp_path_factory, base, cut, junk):
    text = json.dumps(base(), indent=1).encode()
    k = cut % len(text)
    p = tmp_path_factory.mktemp("fz") / "section.json"
    p.write_bytes(text[:k] + junk + text[k + len(junk):])
    try:
        seepfe.load_section(p)
    except seepfe.SectionError as e:
        assert str(e).startswith(str(p)) and "\n" not in str(e)


@_FUZZ
@given(base=st.sampled_from(BASES), cut=st.integers(0, 10**6), junk=st.binary(min_size=1, max_size=4))
def test_corrupted_file_bytes_load_or_raise_section_error(tmp_path_factory, base, cut, junk):
    _corrupted(tmp_path_factory, base, cut, junk)


@pytest.mark.slow
@seed(2)
@_FUZZ_CI
@given(base=st.sampled_from(BASES), cut=st.integers(0, 10**6), junk=st.binary(min_size=1, max_size=4))
def test_corrupted_file_bytes_at_scale(tmp_path_factory, base, cut, junk):
    _corrupted(tmp_path_factory, base, cut, junk)


def _scaled(d, f=None, shift=0.0):
    for z in d["zones"]:
        z["polygon"] = [[x * f + shift, y * f] for x, y in z["polygon"]]
    for b in d["boundaries"]:
        b["polyline"] = [[x * f + shift, y * f] for x, y in b["polyline"]]
        if "head" in b:
            b["head"] *= f               # water levels are lengths too (else the section is overtopped)
    d["mesh"]["size"] *= f
    d["mesh"]["refine"] = []


# Cases the property test found or that sit at its edges, kept as fixed regressions.
EDGES = {
    "refine size 1e-300 (estimate underflowed)": (lambda d: d["mesh"]["refine"][0].update(size=1e-300), "SectionError"),
    "mesh size 1e-200": (lambda d: d["mesh"].update(size=1e-200), "SectionError"),
    "mesh size 1e300": (lambda d: d["mesh"].update(size=1e300), "ok"),
    "boundary point at 4e200 m (distances overflowed)":
        (lambda d: d["boundaries"][2].update(polyline=[[-2, 4], [2, 4e200]]), "SectionError"),
    # conductivities outside 1e-20..10 m/s are refused (seepfe.schema.K_RANGE); 1e300 broke GMRES.
    # A 1e21 contrast is accepted but cannot balance in double precision: flagged unconverged, with the reason
    "all k 1e-300": (lambda d: d.update(materials={m: {"k": 1e-300} for m in ("fill", "blanket", "sand")}),
                     "SectionError"),
    "all k 1e300": (lambda d: d.update(materials={m: {"k": 1e300} for m in ("fill", "blanket", "sand")}),
                    "SectionError"),
    "all k at the ends of the range": (lambda d: d.update(materials={"fill": {"k": 1e-20}, "blanket": {"k": 1e-20},
                                                                     "sand": {"k": 10.0}}), "unconverged"),
    # above the crest (refused since the water-level checks), or a head far outside the section's elevations,
    # or a flux above any soil's conductivity (issue 15: heads of 1e6 m were accepted, 1e300 broke a figure
    # formatter)
    "head 1e300": (lambda d: d["boundaries"][0].update(head=1e300), "SectionError"),
    "head 1e6": (lambda d: d["boundaries"][0].update(head=1e6), "SectionError"),
    "flux 1e300": (lambda d: d["boundaries"][2].update(flux=1e300), "SectionError"),
    # the case the seed-2, 3000-example run found: balance 1.55e-8 (unconfined Newton stopped at a flow
    # residual of 8e-8); the correction computed at the stop is now applied
    "refine size 3 (balance 1.55e-8)": (lambda d: d["mesh"]["refine"][0].update(size=3.0), "ok"),
    # found by the seed-2 run after the units layer came in: a conductivity-unit hint read every
    # 'materials' as an object (AttributeError)
    "materials NaN": (lambda d: d.update(materials=math.nan), "SectionError"),
    "angle 1e300 deg": (lambda d: d["materials"]["sand"].update(angle=1e300), "ok"),
    "section in micrometres": (lambda d: _scaled(d, 1e-6), "ok"),
    "section in megametres": (lambda d: _scaled(d, 1e6), "ok"),
    "section 5e8 m from the origin": (lambda d: _scaled(d, 1.0, 5e8), "ok"),
    "iteration cap 1": (lambda d: d.update(solver={"max_iterations": 1}), "unconverged"),
    "amg": (lambda d: d.update(solver={"linear": "amg"}), "ok"),
}


@pytest.mark.parametrize("name", list(EDGES))
def test_edge_cases(name):
    mutate, expected = EDGES[name]
    d = _levee()
    d["mesh"]["max_elements"] = MAX_ELEMENTS
    mutate(d)
    assert _check(d) == expected
