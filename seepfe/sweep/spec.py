"""The sweep file: which values vary, how each case is probed, and optional target and fragility blocks.

A sweep file is JSON (see ``docs/sweeps.md``)::

    {"mode": "one_at_a_time",
     "vary": {"boundaries.river.head": {"from": 3, "to": 6, "step": 0.5},
              "materials.blanket.k":   {"values": [2e-8, 5e-8, 1e-7]}},
     "points": {"toe_sand": [21, -2.5]},
     "exit": ["landside"],
     "criterion": {"fs": 1.5},
     "targets": [...], "fragility": {...}}

Numbers are in the section file's units (its ``"units"``, SI by default) unless the sweep file has
its own ``"units"`` key; then they are converted to the section file's units before they are applied
(and the section's loader turns everything into SI). The unit of a varied key is inferred from the
schema's dimension markers (``seepfe.units``) or given by the entry's ``"unit"``.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass
from typing import Annotated, Literal, Optional, Union

import numpy as np
from pydantic import AfterValidator, BaseModel, ConfigDict, Field, ValidationError, model_validator

from ..errors import SectionError
from ..schema import Name, Text
from ..units import SI, Dim, Units, parse_units
from .values import get_value, unit_and_factor, unit_suffix, with_values

__all__ = ["SweepSpec", "RangeSpec", "TargetSpec", "FragilitySpec", "load_sweep", "values_of", "Case",
           "expand_cases", "column_of", "sweep_units", "to_file_units"]


def _finite(v: float) -> float:
    if not math.isfinite(v):
        raise ValueError(f"must be a finite number, got {v}")
    return v


Finite = Annotated[float, AfterValidator(_finite)]
Length = Annotated[Finite, Dim("length")]
#: default of the sweep key max_cases: most cases (solves) a sweep file may ask for
MAX_CASES = 20_000
_CFG = ConfigDict(extra="forbid", frozen=True)


class RangeSpec(BaseModel):
    """Values of one key: ``values``, or ``from``/``to`` with ``step`` or ``count`` (``scale`` lin or log)."""

    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)
    values: Optional[list[Finite]] = None
    start: Optional[Finite] = Field(None, alias="from")
    stop: Optional[Finite] = Field(None, alias="to")
    step: Optional[Finite] = None
    count: Optional[Annotated[int, Field(ge=1, le=100_000)]] = None
    scale: Literal["linear", "log"] = "linear"
    unit: Optional[Name] = Field(None, description="unit of the values (inferred for known keys)")

    @model_validator(mode="after")
    def _check(self):
        if self.values is not None:
            if self.start is not None or self.stop is not None or self.step is not None or self.count is not None:
                raise ValueError("give either 'values' or 'from'/'to' with 'step' or 'count', not both")
            if not self.values:
                raise ValueError("'values' is empty")
            return self
        if self.start is None or self.stop is None:
            raise ValueError("give 'values' or both 'from' and 'to'")
        if (self.step is None) == (self.count is None):
            raise ValueError("with 'from'/'to' give exactly one of 'step' or 'count'")
        if self.step is not None:
            if self.scale == "log":
                raise ValueError("'scale': 'log' goes with 'count', not 'step'")
            if self.step == 0 or (self.stop - self.start) * self.step < 0:
                raise ValueError(f"'step' {self.step} does not lead from {self.start} to {self.stop}")
            if abs((self.stop - self.start) / self.step) > 100_000:
                raise ValueError("more than 100000 values; use a larger 'step'")
        if self.scale == "log" and (self.start <= 0 or self.stop <= 0):
            raise ValueError("'scale': 'log' needs 'from' and 'to' > 0")
        return self

    def array(self) -> np.ndarray:
        if self.values is not None:
            return np.asarray(self.values, float)
        if self.count is not None:
            if self.scale == "log":
                return np.geomspace(self.start, self.stop, self.count)
            return np.linspace(self.start, self.stop, self.count)
        n = int(math.floor((self.stop - self.start) / self.step + 1e-9)) + 1
        return self.start + self.step * np.arange(n)


class SolveSpec(BaseModel):
    """Solve options for every case (they override the section's own mesh/solver keys)."""

    model_config = _CFG
    order: Optional[Literal[1, 2]] = None
    size: Optional[Annotated[float, Field(gt=0), Dim("length")]] = Field(None, description="element size, m")
    linear: Optional[Literal["auto", "direct", "amg"]] = None


class CriterionSpec(BaseModel):
    model_config = _CFG
    fs: Optional[Annotated[float, Field(gt=0)]] = Field(
        None, description="required factor of safety against heave and uplift at the exit (-); when set it "
                          "replaces checks.criteria.fs_heave and fs_uplift of every case, so each case's verdict is "
                          "what seepfe solve gives with those criteria; default: the section's own criteria")


class TargetSpec(BaseModel):
    """Search one parameter for the smallest (or largest) value that meets a condition."""

    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)
    name: Optional[Name] = None
    parameter: Name
    range: Annotated[list[Finite], Field(min_length=2, max_length=2)]
    find: Literal["smallest", "largest"] = "smallest"
    quantity: Optional[Name] = Field(None, description="result to bound: fs, exit_gradient_max, "
                                    "flow_<boundary>_m3_s_per_m, head_<point>_m, ...; default: fs when 'at_least' or "
                                    "'at_most' is given, else the verdict against the section's criteria")
    at_least: Optional[Finite] = None
    at_most: Optional[Finite] = None
    tolerance: Annotated[float, Field(gt=0)]
    unit: Optional[Name] = None
    fixed: dict[Name, Union[Finite, Text, bool]] = Field(default_factory=dict,
                                                         description="other values held for the search")

    @model_validator(mode="after")
    def _check(self):
        if self.at_least is not None and self.at_most is not None:
            raise ValueError("give 'at_least' or 'at_most', not both")
        if self.range[0] >= self.range[1]:
            raise ValueError(f"'range' must be [low, high] with low < high, got {self.range}")
        if self.tolerance >= self.range[1] - self.range[0]:
            raise ValueError("'tolerance' must be smaller than the range")
        far = max(abs(self.range[0]), abs(self.range[1]))
        if self.tolerance < 16 * math.ulp(far):
            raise ValueError(f"'tolerance' {self.tolerance:g} is finer than floating-point numbers can tell apart "
                             f"near {far:g} (their spacing there is {math.ulp(far):.1e}); use a larger tolerance")
        return self


class LognormalSpec(BaseModel):
    model_config = _CFG
    cov: Annotated[float, Field(ge=0, le=20)] = Field(description="coefficient of variation of k (-)")
    median: Optional[Annotated[float, Field(gt=0), Dim("conductivity")]] = Field(
        None, description="median k, m/s (default: the section's value; kx for anisotropic, ky keeps its ratio)")


class FragilitySpec(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)
    stage: Name = Field(description="key of the river stage (a parameter name or a dotted path)")
    stages: RangeSpec
    conductivity: Annotated[dict[Name, LognormalSpec], Field(min_length=1)]
    correlation: Optional[list[list[Finite]]] = Field(
        None, description="correlation of ln k between the materials, in the order of 'conductivity'")
    samples: Annotated[int, Field(ge=1, le=100_000)] = 50
    sampling: Literal["latin_hypercube", "monte_carlo"] = "latin_hypercube"
    seed: Annotated[int, Field(ge=0, le=2**64 - 1)] = Field(
        0, description="seed of the random numbers (a whole number >= 0): the same seed gives the same samples")
    quantity: Name = Field("fs", description="result whose distribution is counted (default: fs, the least FS)")
    criterion: Optional[Annotated[float, Field(gt=0)]] = Field(None, description="default: criterion.fs")
    confidence: Annotated[float, Field(gt=0, lt=1)] = 0.95
    interval: Literal["wilson", "clopper_pearson"] = "wilson"
    fixed: dict[Name, Union[Finite, Text, bool]] = Field(default_factory=dict)

    @model_validator(mode="after")
    def _check(self):
        n = len(self.conductivity)
        if self.correlation is not None:
            C = np.asarray(self.correlation, float) if all(len(r) == n for r in self.correlation) else None
            if C is None or C.shape != (n, n):
                raise ValueError(f"'correlation' must be {n} x {n} (one row per entry of 'conductivity')")
            if not np.allclose(C, C.T) or not np.allclose(np.diag(C), 1.0) or np.abs(C).max() > 1:
                raise ValueError("'correlation' must be symmetric with ones on the diagonal and |r| <= 1")
            if np.linalg.eigvalsh(C).min() < -1e-12:
                raise ValueError("'correlation' is not positive semi-definite")
        return self


class SweepSpec(BaseModel):
    """A whole sweep file."""

    model_config = ConfigDict(extra="forbid", frozen=True)
    schema_: Optional[str] = Field(None, alias="$schema", description="address of the JSON Schema (ignored)")
    units: Optional[Union[str, dict[str, str]]] = Field(
        None, description="units of the sweep's numbers (default: the section file's units)")
    title: Text = ""
    mode: Literal["one_at_a_time", "grid"] = "one_at_a_time"
    vary: dict[Name, Union[list[Finite], RangeSpec]] = Field(default_factory=dict)
    fixed: dict[Name, Union[Finite, Text, bool]] = Field(default_factory=dict,
                                                       description="values applied to every case")
    solve: SolveSpec = Field(default_factory=SolveSpec)
    points: dict[Name, Annotated[list[Length], Field(min_length=2, max_length=2)]] = Field(
        default_factory=dict, description="probe points [x, y], m: total head reported at each")
    exit: Optional[list[Name]] = Field(None, description="boundaries where exit gradients are checked "
                                                        "(default: every seepage face and drain)")
    criterion: CriterionSpec = Field(default_factory=CriterionSpec)
    targets: list[TargetSpec] = Field(default_factory=list)
    fragility: Optional[FragilitySpec] = None
    max_cases: Annotated[int, Field(ge=1)] = Field(
        MAX_CASES, description="most cases the table and the fragility may ask for together (each case is one "
                               "solve); raise it to run a larger sweep on purpose")

    @model_validator(mode="after")
    def _something(self):
        if not self.vary and not self.targets and self.fragility is None:
            raise ValueError("nothing to do: give 'vary', 'targets' or 'fragility'")
        parts, total = [], 0
        if self.vary:
            counts = [_count(v) for v in self.vary.values()]
            n = math.prod(counts) if self.mode == "grid" else sum(counts)
            joined = (" x " if self.mode == "grid" else " + ").join(map(str, counts))
            parts.append(f"table: {joined}")
            total += n
        if self.fragility is not None:
            n_st = _count(self.fragility.stages)
            parts.append(f"fragility: {self.fragility.samples} samples x {n_st} stages")
            total += self.fragility.samples * n_st
        if total > self.max_cases:
            shown = f"{total:,}" if total < 10**15 else "more than 10^15"
            raise ValueError(f"the sweep asks for {shown} cases ({'; '.join(parts)}), more than max_cases = "
                             f"{self.max_cases:,}; each case is one solve: raise \"max_cases\" in the sweep file "
                             "if you mean it")
        return self


def _count(v) -> int:
    """Number of values of a 'vary' entry or a range, without making them."""
    if isinstance(v, list):
        return len(v)
    if v.values is not None:
        return len(v.values)
    if v.count is not None:
        return v.count
    return int(math.floor((v.stop - v.start) / v.step + 1e-9)) + 1


def _format(e: ValidationError, label: str) -> str:
    err = e.errors(include_url=False)[0]
    loc = ".".join(str(x) for x in err["loc"] if not str(x).startswith(("function-", "constrained-")))
    msg = str(err["msg"]).removeprefix("Value error, ")
    if err["type"] == "extra_forbidden":
        msg = "unknown key"
    elif err["type"] == "missing":
        msg = "missing key"
    more = f" (and {len(e.errors()) - 1} more)" if len(e.errors()) > 1 else ""
    return f"{label}: {loc + ': ' if loc else ''}{msg}{more}"


def load_sweep(path_or_dict) -> tuple[SweepSpec, str]:
    """Read and validate a sweep file (path or dict); returns (spec, label)."""
    from ..jsonin import check_tree, json_type, read_json
    if isinstance(path_or_dict, dict):
        data, label = path_or_dict, "<sweep>"
        try:
            check_tree(data)
        except SectionError as e:
            raise SectionError(f"{label}: {e}") from None
    else:
        label = str(path_or_dict)
        data = read_json(path_or_dict, "sweep file")
        if not isinstance(data, dict):
            raise SectionError(f"{label}: the top level must be a JSON object {{...}}, got {json_type(data)}")
    try:
        spec = SweepSpec.model_validate(data)
    except ValidationError as e:
        raise SectionError(_format(e, label)) from None
    if spec.units is not None:
        parse_units(spec.units, label)
    return spec, label


def sweep_units(spec: SweepSpec, file_units: Units = SI, label: str = "<sweep>") -> Units:
    """The units the sweep's numbers are in: its own ``"units"``, else the section file's."""
    return file_units if spec.units is None else parse_units(spec.units, label)


def _units_of(data: dict) -> Units:
    try:
        return parse_units(data.get("units"))
    except SectionError:
        return SI


def values_of(v) -> np.ndarray:
    return np.asarray(v, float) if isinstance(v, list) else v.array()


def _unit_of(v) -> Optional[str]:
    return None if isinstance(v, list) else v.unit


def column_of(data: dict, key: str, unit: Optional[str], label: str, units: Optional[Units] = None) -> str:
    """Table column of a varied key, unit included: 'boundaries.river.head_m' (``units``: the sweep's)."""
    fu = _units_of(data)
    u, _ = unit_and_factor(data, key, unit, units or fu, fu, label)
    if u is None:
        raise SectionError(f"{label}: '{key}': cannot tell its unit; add \"unit\": \"m\" (or \"-\") "
                           "to its entry")
    return f"{key}_{unit_suffix(u)}"


def to_file_units(data: dict, values: dict, units: Units, label: str, explicit: Optional[dict] = None) -> dict:
    """{key: value} from the sweep's units to the section file's (numbers only; text and booleans kept)."""
    fu = _units_of(data)
    out = {}
    for k, v in values.items():
        if isinstance(v, (int, float)) and not isinstance(v, bool):
            _, f = unit_and_factor(data, k, (explicit or {}).get(k), units, fu, label)
            v = float(v) * f if f != 1.0 else v
        out[k] = v
    return out


@dataclass(frozen=True)
class Case:
    """One case of a table sweep: the overrides, the key that varies (one-at-a-time) and the resolved dict."""

    index: int
    varied: str
    params: dict          # {key: value} shown in the table (base values for keys not varied here)
    section: dict


def _plain(x: float):
    """A float as JSON keeps it; whole numbers stay floats (the section format wants numbers)."""
    return float(x)


def expand_cases(spec: SweepSpec, data: dict, label: str) -> tuple[list[Case], dict[str, str]]:
    """The cases of the 'vary' block, resolved into section dicts, and {key: column name}.

    The table shows the values as the sweep writes them (its units); the section gets them in its own.
    """
    keys = list(spec.vary)
    su = sweep_units(spec, _units_of(data), label)
    columns = {k: column_of(data, k, _unit_of(spec.vary[k]), label, su) for k in keys}
    explicit = {k: _unit_of(spec.vary[k]) for k in keys}
    fixed = to_file_units(data, spec.fixed, su, label)
    base = {}
    for k in keys:
        try:
            b = get_value(data, k)
        except SectionError as e:
            raise SectionError(f"{label}: vary {e}") from None
        _, f = unit_and_factor(data, k, explicit[k], su, _units_of(data), label)
        base[k] = float(b) / f if isinstance(b, (int, float)) and not isinstance(b, bool) else float("nan")
    combos: list[tuple[str, dict, dict]] = []      # (varied, overrides, shown)
    if spec.mode == "grid":
        arrays = [values_of(spec.vary[k]) for k in keys]
        for vals in itertools.product(*arrays):
            ov = {k: _plain(v) for k, v in zip(keys, vals)}
            combos.append(("grid", ov, ov))
    else:
        for k in keys:
            for v in values_of(spec.vary[k]):
                combos.append((k, {k: _plain(v)}, {**base, k: _plain(v)}))
    cases = []
    for i, (varied, ov, shown) in enumerate(combos):
        try:
            sec = with_values(data, {**fixed, **to_file_units(data, ov, su, label, explicit)}, label)
        except SectionError as e:
            raise SectionError(f"{label}: vary: {e}") from None
        cases.append(Case(index=i, varied=varied, params=shown, section=sec))
    return cases, columns
