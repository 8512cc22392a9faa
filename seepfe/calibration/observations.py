"""The observations file of a calibration: readings, the values of the observed events, what to fit.

::

    {
      "units": "SI",                                   optional; default: the section file's units
      "fixed": {"boundaries.river.head": 5.2},         values of the observed event (dotted keys or parameters)
      "heads": [{"name": "P1", "x": 25.0, "y": -4.0, "head": 1.92, "sigma": 0.05}],
      "flows": [{"boundary": "ditch", "value": -2.1e-6, "sigma": 4e-7}],     optional; + into the section
      "fit": {"k_blanket": {"min": 1e-9, "max": 1e-5}, "k_sand": {"min": 1e-6, "max": 1e-3}},
      "events": [{"name": "rising limb", "fixed": {...}, "heads": [...], "flows": [...]}],   optional, more events
      "design": {"name": "design flood", "fixed": {"boundaries.river.head": 6.5}},             optional
      "reference": "k_sand"                            optional: the conductivity held when heads fix only ratios
    }

Units: every number is in the file's ``"units"`` (by default the section file's): x, y, head and sigma of
a head in its length unit (m for an SI file), a flow in length x conductivity (m3/s per m of section for
SI), ``min``/``max`` and ``fixed`` values in the unit of their key (a conductivity in its conductivity unit);
an entry of ``"fit"`` may name its own ``"unit"``. They are converted once, here: readings to SI, bounds and
fixed values to the section file's units (the section's loader turns those into SI).

Top-level ``"heads"``/``"flows"`` are the readings of one event whose values are the top-level ``"fixed"``;
each entry of ``"events"`` is another event fitted together with it (its own ``"fixed"`` is applied over
the top-level one). Every fault is a one-line :class:`~seepfe.errors.SectionError` naming the file and item.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from typing import Annotated, Literal, Optional, Union

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, ValidationError, model_validator

from ..errors import SectionError
from ..schema import Finite, Name, Positive
from ..units import SI, Units, parse_units

__all__ = ["ObservationsSpec", "Observations", "Event", "FitKey", "load_observations", "read_json"]


_CFG = ConfigDict(extra="forbid", frozen=True)
FixedValues = dict[str, Union[Finite, str, bool]]


class HeadReading(BaseModel):
    """One piezometer reading: where its tip is and the total head it read."""

    model_config = _CFG
    name: Name
    x: Finite = Field(description="x of the piezometer tip (length unit of the file)")
    y: Finite = Field(description="elevation of the piezometer tip (length unit of the file)")
    head: Finite = Field(description="total head read (length unit of the file)")
    sigma: Positive = Field(description="standard uncertainty of the reading (length unit of the file)")


class FlowReading(BaseModel):
    """One measured flow across a boundary (or out of a drain zone)."""

    model_config = _CFG
    boundary: Name
    value: Finite = Field(description="flow per length of section (length x conductivity unit of the file; "
                                      "m3/s per m for SI), positive into the section")
    sigma: Positive = Field(description="standard uncertainty of the flow (same unit)")


class FitRange(BaseModel):
    """The bounds of one fitted value (conductivities are fitted in log space)."""

    model_config = _CFG
    min: Finite
    max: Finite
    scale: Optional[Literal["log", "linear"]] = Field(
        None, description="log (default for conductivities and for any key with min > 0 that is not a length or "
                          "an angle) or linear")
    unit: Optional[str] = Field(None, description="unit of min and max (default: inferred from the key)")

    @model_validator(mode="after")
    def _order(self):
        if not self.min < self.max:
            raise ValueError(f"bounds reversed or empty: min {self.min:g} is not below max {self.max:g}")
        if self.scale == "log" and self.min <= 0:
            raise ValueError(f"'scale': 'log' needs min > 0, got {self.min:g}")
        return self


class EventSpec(BaseModel):
    model_config = _CFG
    name: Name
    fixed: FixedValues = Field(default_factory=dict)
    heads: list[HeadReading] = Field(default_factory=list)
    flows: list[FlowReading] = Field(default_factory=list)


class DesignSpec(BaseModel):
    model_config = _CFG
    name: Name = "design"
    fixed: FixedValues = Field(default_factory=dict, description="values of the design event, applied to the "
                                                                 "calibrated section")


class ObservationsSpec(BaseModel):
    """A whole observations file."""

    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)
    schema_: Optional[str] = Field(None, alias="$schema")
    title: str = ""
    units: Optional[Union[str, dict[str, str]]] = Field(
        None, description="units of the file's numbers (default: the section file's units)")
    fixed: FixedValues = Field(default_factory=dict, description="values of the observed event (every event)")
    heads: list[HeadReading] = Field(default_factory=list)
    flows: list[FlowReading] = Field(default_factory=list)
    fit: Annotated[dict[str, FitRange], Field(min_length=1)]
    events: list[EventSpec] = Field(default_factory=list)
    design: Optional[DesignSpec] = None
    reference: Optional[str] = Field(None, description="fitted conductivity held at its section value when "
                                                       "heads alone fix only ratios (default: the first that can)")
    event_name: Name = Field("observed", description="name of the event of the top-level readings")


# ---------------------------------------------------------------------------- loaded form
@dataclass
class Event:
    """One observed event: the values applied (section file's units) and the readings (SI)."""

    name: str
    fixed: dict
    head_names: list
    points: np.ndarray          # (n, 2) m
    heads: np.ndarray           # (n,) m
    head_sigma: np.ndarray      # (n,) m
    flow_boundaries: list
    flows: np.ndarray           # (k,) m3/s per m
    flow_sigma: np.ndarray
    where: str = ""             # its place in the file: "" (top level) or "events[1] 'name'."


@dataclass
class FitKey:
    """One fitted key: bounds and start in the section file's units, the transform and unit factors."""

    key: str
    scale: str                  # "log" or "linear"
    lo: float
    hi: float
    start: float                # the section's own value (may lie outside the bounds)
    dim: Optional[str]          # dimension of the key ('conductivity', 'length', ... or None)
    file_unit: str              # unit of the section file
    si_factor: float            # SI value = file value x si_factor
    si_unit: str

    def to_theta(self, v):
        return np.log(v) if self.scale == "log" else np.asarray(v, float)

    def from_theta(self, t):
        return float(np.exp(t)) if self.scale == "log" else float(t)


@dataclass
class Observations:
    spec: ObservationsSpec
    label: str
    units: Units
    events: list
    fit: list
    design: Optional[dict] = None
    design_name: str = "design"
    reference: Optional[str] = None
    data: dict = field(default_factory=dict, repr=False)
    sha256: str = ""

    @property
    def n_readings(self) -> int:
        return sum(len(e.heads) + len(e.flows) for e in self.events)


# ---------------------------------------------------------------------------- reading
def read_json(path_or_dict, what: str = "observations") -> tuple[dict, str]:
    """(data, label) of a JSON file or a dict; one-line errors."""
    if isinstance(path_or_dict, dict):
        return path_or_dict, f"<{what}>"
    from ..jsonin import read_json as _read
    label = str(path_or_dict)
    data = _read(path_or_dict, f"{what} file")      # size cap, UTF-8, duplicate keys, nesting, NaN refused
    if not isinstance(data, dict):
        from ..jsonin import json_type
        raise SectionError(f"{label}: the top level must be a JSON object {{...}}, got {json_type(data)}")
    return data, label


def _where(data: dict, loc: tuple) -> str:
    """'heads[2] 'P3'.sigma' from a pydantic location."""
    out, node = "", data
    for i, k in enumerate(loc):
        if isinstance(k, int):
            item = node[k] if isinstance(node, list) and k < len(node) and isinstance(node[k], dict) else {}
            nm, bd = item.get("name"), item.get("boundary")
            lab = nm if isinstance(nm, str) else bd if isinstance(bd, str) else None
            out += f"[{k}]" + (f" '{lab}'" if lab else "")
        else:
            out += ("." if out else "") + str(k)
        try:
            node = node[k]
        except (KeyError, IndexError, TypeError):
            node = None
    return out


def _format(e: ValidationError, data: dict, label: str) -> str:
    errs = e.errors(include_url=False)
    err = errs[0]
    loc = tuple(x for x in err["loc"] if not (isinstance(x, str) and x.startswith(("function-", "constrained-"))))
    t = err["type"]
    if t == "extra_forbidden":
        where, msg = _where(data, loc[:-1]), f"unknown key '{loc[-1]}'"
    elif t == "missing":
        where, msg = _where(data, loc[:-1]), f"missing key '{loc[-1]}'"
    else:
        where = _where(data, loc)
        msg = str(err["msg"]).removeprefix("Value error, ")
        got = err.get("input")
        if t.endswith("_type") or t.endswith("_parsing"):
            shown = json.dumps(got) if isinstance(got, (int, float, str, bool)) else type(got).__name__
            msg = f"{msg.lower()}, got {shown}"
        if loc and loc[-1] == "fit" and t == "too_short":
            msg = ("nothing to fit: name at least one key with its bounds, e.g. "
                   "{\"k_sand\": {\"min\": 1e-6, \"max\": 1e-3}}")
    more = f" (and {len(errs) - 1} more)" if len(errs) > 1 else ""
    return f"{label}: {where + ': ' if where else ''}{msg}{more}"


def _raw(data: dict, key: str):
    """The value of a key as the section file writes it (expressions kept), or raise naming the step."""
    params = data.get("parameters") if isinstance(data.get("parameters"), dict) else {}
    if "." not in key:
        if key in params:
            return params[key]
        import difflib
        near = difflib.get_close_matches(key, list(params), n=1)
        hint = f" (did you mean '{near[0]}'?)" if near else (
            f" (declared parameters: {', '.join(params)})" if params else " (the section declares no parameters)")
        raise SectionError(f"'{key}': not a declared parameter of the section and not a dotted path{hint}")
    from ..sweep.values import _step
    node = data
    for part in key.split("."):
        node = _step(node, part, key)
    return node


def load_observations(path_or_dict, section_data: dict, section_label: str = "<section>",
                      section_units: Optional[Units] = None) -> Observations:
    """Read and check an observations file against the section dict it calibrates (one-line errors)."""
    import hashlib

    from ..sweep.values import key_dimension, unit_and_factor
    from ..units import parse_units as _pu
    data, label = read_json(path_or_dict)
    try:
        spec = ObservationsSpec.model_validate(data)
    except ValidationError as e:
        raise SectionError(_format(e, data, label)) from None
    fu = section_units if section_units is not None else _pu(section_data.get("units"), section_label)
    ou = fu if spec.units is None else parse_units(spec.units, label)
    fL, fQ = ou.factor("length"), ou.factor("flow")

    # ---- what to fit
    fit: list[FitKey] = []
    for key, rng in spec.fit.items():
        where = f"{label}: fit '{key}'"
        if key in spec.fixed or any(key in ev.fixed for ev in spec.events) or (
                spec.design is not None and key in spec.design.fixed):
            raise SectionError(f"{where}: also given in 'fixed'; a key is either fitted or fixed")
        try:
            raw = _raw(section_data, key)
        except SectionError as e:
            raise SectionError(f"{label}: fit {e}") from None
        if isinstance(raw, str) and raw.startswith("="):
            raise SectionError(f"{where}: the section computes it from an expression ({raw!r}); fit a parameter "
                               "that expression uses instead")
        if isinstance(raw, bool) or not isinstance(raw, (int, float)):
            raise SectionError(f"{where}: not a number in the section (got {json.dumps(raw)[:60]}); only numbers "
                               "can be fitted")
        dim = key_dimension(section_data, key)
        unit, f_obs = unit_and_factor(section_data, key, rng.unit, ou, fu, label)
        lo, hi = rng.min * f_obs, rng.max * f_obs
        scale = rng.scale or ("log" if dim == "conductivity" or (lo > 0 and dim not in ("length", "head", "angle"))
                              else "linear")
        if scale == "log" and lo <= 0:
            raise SectionError(f"{where}: fitted in log space, so min must be > 0, got {rng.min:g}")
        if dim is None:
            fdim_unit, si = "-", 1.0
        else:
            fdim_unit, si = fu.label(dim), fu.factor(dim)
        fit.append(FitKey(key=key, scale=scale, lo=lo, hi=hi, start=float(raw), dim=dim, file_unit=fdim_unit,
                          si_factor=si, si_unit="-" if dim is None else SI.label(dim)))
    if spec.reference is not None and spec.reference not in spec.fit:
        raise SectionError(f"{label}: reference '{spec.reference}': not a key of 'fit' "
                           f"(fitted: {', '.join(spec.fit)})")

    # ---- the events
    from ..sweep.spec import to_file_units

    def fixed_values(values: dict, where: str) -> dict:
        for k in values:
            try:
                _raw(section_data, k)
            except SectionError as e:
                raise SectionError(f"{label}: {where} {e}") from None
        try:
            return to_file_units(section_data, dict(values), ou, f"{label}: {where}")
        except SectionError as e:
            raise SectionError(str(e)) from None

    common = fixed_values(spec.fixed, "fixed")
    raw_events = []
    if spec.heads or spec.flows:
        raw_events.append((spec.event_name, {}, spec.heads, spec.flows, ""))
    for i, ev in enumerate(spec.events):
        raw_events.append((ev.name, ev.fixed, ev.heads, ev.flows, f"events[{i}] '{ev.name}'."))
    names = [r[0] for r in raw_events]
    for n in names:
        if names.count(n) > 1:
            raise SectionError(f"{label}: event name '{n}' is used {names.count(n)} times; name each event once")
    events = []
    for name, fx, heads, flows, pre in raw_events:
        fixed = {**common, **fixed_values(fx, f"{pre}fixed")}
        hn = [h.name for h in heads]
        for n in hn:
            if hn.count(n) > 1:
                raise SectionError(f"{label}: {pre}heads: piezometer '{n}' is listed {hn.count(n)} times in one event")
        hv = np.array([h.head for h in heads], float) * fL
        if len(hv) >= 2 and np.ptp(hv) == 0.0:
            raise SectionError(f"{label}: {pre}heads: all {len(hv)} readings are identical ({heads[0].head:g} "
                               f"{ou.length}): they carry no information on the conductivities (a copied column?)")
        events.append(Event(
            name=name, fixed=fixed, head_names=hn,
            points=np.array([[h.x, h.y] for h in heads], float).reshape(-1, 2) * fL, heads=hv,
            head_sigma=np.array([h.sigma for h in heads], float) * fL,
            flow_boundaries=[q.boundary for q in flows], flows=np.array([q.value for q in flows], float) * fQ,
            flow_sigma=np.array([q.sigma for q in flows], float) * fQ, where=pre))
    if not events or sum(len(e.heads) + len(e.flows) for e in events) == 0:
        raise SectionError(f"{label}: no readings: give 'heads' (piezometers: name, x, y, head, sigma) or 'flows' "
                           "(boundary, value, sigma), at the top level or in 'events'")
    design = None
    if spec.design is not None:
        design = fixed_values(spec.design.fixed, "design.fixed")
    canon = json.dumps(data, sort_keys=True, separators=(",", ":"), default=str)
    return Observations(spec=spec, label=label, units=ou, events=events, fit=fit, design=design,
                        design_name=spec.design.name if spec.design is not None else "design",
                        reference=spec.reference, data=data, sha256=hashlib.sha256(canon.encode()).hexdigest())
