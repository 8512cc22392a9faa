"""The output files' data model: summary.json and the sweep's case record, as pydantic models.

:meth:`seepfe.analysis.Analysis.to_dict` writes data that validates against :class:`Summary`; its
JSON Schema is published as ``docs/summary.schema.json`` (``scripts/write_schema.py``; a test fails
while the file and the code disagree). A sweep case record (:class:`CaseRecord`) is a projection of
the same data, so the sweep table's governing columns are what ``seepfe solve`` prints.

Units: SI, one ``units`` block per file; keys carry their unit as a suffix (``_m``, ``_m3_s_per_m``,
``_m_s``, ``_kPa``); gradients are m/m and factors of safety dimensionless (-). A value that could
not be computed is ``null`` and the record says why beside it (``why``); infinities never appear.
"""

from __future__ import annotations

import math
from typing import Any, Literal, Optional

from pydantic import BaseModel, ConfigDict, Field

__all__ = ["Units", "Governing", "HandRecord", "ExitSummary", "Summary", "CaseRecord", "UNITS", "SUMMARY_FORMAT",
           "summary_schema", "fs_value", "VERDICTS", "CalibrationRecord", "calibration_schema", "CALIBRATION_FORMAT"]

#: the format id written into summary.json; bump the number when a key changes meaning
SUMMARY_FORMAT = "seepfe-summary/1"
VERDICTS = ("pass", "fail", "not checked")

_STRICT = ConfigDict(extra="forbid")
_num = Optional[float]


class Units(BaseModel):
    """The units of every number in the file (SI)."""

    model_config = _STRICT
    length: Literal["m"] = "m"
    head: Literal["m"] = "m"
    pressure: Literal["kPa"] = "kPa"
    flow: Literal["m3/s per m (+ into the section)"] = "m3/s per m (+ into the section)"
    conductivity: Literal["m/s"] = "m/s"
    gradient: Literal["m/m"] = "m/m"
    factor_of_safety: Literal["-"] = "-"
    unit_weight: Literal["kN/m3"] = "kN/m3"
    time: Literal["s"] = "s"


UNITS = Units().model_dump()


class Criteria(BaseModel):
    model_config = _STRICT
    fs_heave: float = Field(description="required factor of safety against heave (-)")
    fs_uplift: float = Field(description="required factor of safety against uplift (-)")
    allowable_gradient: float = Field(description="largest allowable exit gradient (m/m)")
    source: str = Field(description="where the values come from")


class Governing(BaseModel):
    """The values an engineer signs, over every checked exit surface (pinned keys: docs/checks.md)."""

    model_config = _STRICT
    fs: _num = Field(description="least factor of safety (heave or uplift) over the checked exit surfaces (-); "
                                 "null where none could be computed or none arises (see why)")
    mode: Optional[Literal["heave", "uplift"]] = Field(description="what governs the least FS")
    boundary: Optional[str] = Field(description="exit surface of the least FS")
    x_m: _num = Field(description="x of the least FS, m")
    distance_from_toe_m: _num = Field(None, description="distance of the least FS from the toe, m (+ away from the "
                                                        "embankment)")
    top_stratum_thickness_m: _num = Field(description="top-stratum thickness under the least FS, m (null: none)")
    exit_gradient_max: _num = Field(description="largest exit gradient (across the top stratum where there is "
                                                "one, else at the surface) where water leaves, m/m")
    exit_gradient_x_m: _num = Field(description="x of the largest exit gradient, m")
    exit_gradient_boundary: Optional[str] = Field(None, description="exit surface of the largest exit gradient")
    fails_within_m_of_toe: _num = Field(None, description="distance from the toe of the far end of the failing "
                                                          "stretches, m (docs/checks.md: failing stretches)")
    failing_length_m: _num = Field(None, description="total length of the failing stretches over the checked exit "
                                                     "surfaces, m (horizontal; the same number the figures shade)")
    verdict: Literal["pass", "fail", "not checked"] = Field(description="against the section's criteria")
    why: str = Field(description="why the verdict, in words")
    criteria: Optional[Criteria] = None


class ExitGoverning(BaseModel):
    model_config = _STRICT
    boundary: str
    points: int
    failing_points: int
    unknown_points: int = Field(description="points where a check arises but cannot be computed")
    fs: _num
    mode: Optional[Literal["heave", "uplift"]]
    x_m: _num
    y_m: _num
    distance_from_toe_m: _num
    top_stratum_thickness_m: _num
    exit_gradient_max: _num
    exit_gradient_x_m: _num
    surface_gradient_max: _num = Field(description="largest vertical gradient at the surface where water leaves "
                                                   "(singular at a toe: grows with refinement), m/m")
    surface_gradient_x_m: _num
    top_stratum_gradient_max: _num = Field(description="largest mean gradient across the top stratum, m/m")
    top_stratum_gradient_x_m: _num
    fails_within_m_of_toe: _num = Field(description="distance from the toe of the far end of the failing stretches, m")
    failing_length_m: _num = Field(None, description="total horizontal length of the failing stretches, m")
    failing_stretches_m: list[list[float]] = Field(
        default_factory=list, description="[from, to] distances from the toe of each stretch that fails the criteria, "
                                          "each run of failing check points extended half-way to its neighbours, m")
    verdict: Literal["pass", "fail", "not checked"]
    why: str


class ExitSummary(BaseModel):
    """The checks along one exit surface."""

    model_config = _STRICT
    boundary: str
    gradient_method: str
    top_stratum: str = Field(description="how the top stratum was found")
    toe_x_m: float
    toe_from: str
    criteria: Criteria
    governing: ExitGoverning
    notes: list[str]


class HandRecord(BaseModel):
    """One quantity of one hand method beside the FE (pinned keys)."""

    model_config = _STRICT
    method: Literal["blanket_theory", "lane", "khosla", "terzaghi_prism", "sellmeijer", "kozeny", "casagrande"]
    quantity: str = Field(pattern=r"^[a-z][a-z0-9_]*$", description="snake_case id, unit-suffixed where it has one")
    unit: str
    hand: _num = Field(description="the hand method's value (null where it does not apply)")
    fe: _num = Field(description="the finite-element value beside it (null where there is none)")
    applies: bool
    why: str = Field(description="why it does not apply, or what it was applied to")


class HandDetail(BaseModel):
    model_config = _STRICT
    method: str
    title: str
    applies: bool
    why: str
    inputs: dict[str, dict[str, Any]] = Field(description="name -> {value, unit, meaning}")
    assumptions: str
    details: dict[str, Any]
    notes: list[str]


class ExitBoundaries(BaseModel):
    model_config = _STRICT
    names: list[str]
    rule: str = Field(description="checks.boundaries, or the documented default")


class Summary(BaseModel):
    """summary.json: everything a run computed about one section, SI units."""

    model_config = _STRICT
    format: Literal["seepfe-summary/1"] = SUMMARY_FORMAT
    seepfe_version: str
    title: str
    source: str
    input_sha256: str
    units: Units
    display_units: Optional[dict[str, str]] = Field(
        None, description="the units printed tables, figures, the report and the extra CSV columns were shown in "
                          "(the section file's 'units'); every number of this file is SI")
    flows_m3_s_per_m: dict[str, float] = Field(description="boundary or drain zone -> flow, + into the section")
    balance: dict[str, float]
    head_range_m: list[float]
    mesh: dict[str, Any]
    solver: dict[str, Any]
    phreatic: dict[str, Any]
    exit_boundaries: ExitBoundaries
    exits: dict[str, ExitSummary]
    governing: Governing
    hand_methods: list[HandRecord]
    hand_method_details: list[HandDetail]
    cutoffs: list[dict[str, Any]]
    remedies: list[dict[str, Any]]
    flow_net: Optional[dict[str, Any]] = None
    notes: list[str]
    accuracy: Optional[dict[str, Any]] = Field(
        None, description="estimated discretisation error of the seepage quantity and the governing exit values: "
                          "estimates {name: {value, error_estimate, relative, observed_order, method, ...}}, "
                          "excluded {name: why}, method")
    provenance: Optional[dict[str, Any]] = Field(
        None, description="versions of seepfe, gmsh, numpy, scipy and Python that wrote the file (the same file "
                          "meshes identically only within one gmsh version)")
    caution: str
    transient: Optional[dict[str, Any]] = Field(
        None, description="a moment of a transient solve under a hydrograph (docs/transient.md): its time (s) and "
                          "stages (m), and the run's stored times, least FS over time and when, peak toe head, "
                          "seepage volumes and water balance")


class ExitProfile(BaseModel):
    model_config = _STRICT
    x_m: list[float]
    exit_gradient: list[Optional[float]] = Field(description="m/m (null where none)")
    fs: list[Optional[float | Literal["inf"]]] = Field(description="- ('inf': no check arises, null: unknown)")


class CaseRecord(BaseModel):
    """One case of a sweep (``DIR/cases/<hash>.json``): a projection of summary.json."""

    model_config = _STRICT
    status: str = Field(pattern=r"^(ok|not converged|error: .*)$")
    flows_m3_s_per_m: dict[str, float] = Field(default_factory=dict)
    heads_m: dict[str, Optional[float]] = Field(default_factory=dict)
    governing: Optional[Governing] = None
    hand_methods: list[HandRecord] = Field(default_factory=list)
    exit: dict[str, ExitProfile] = Field(default_factory=dict)
    warnings: list[str] = Field(default_factory=list)
    nodes: int = 0
    balance_relative_error: _num = None
    time_s: float = 0.0
    transient: Optional[dict[str, Any]] = Field(
        None, description="a case under a hydrograph: when the least FS occurs (s), the stages then (m), its lag "
                          "behind the crest (s), the peak toe head (m) and the seepage volumes (m3 per m)")


def summary_schema() -> dict:
    """The JSON Schema of summary.json (docs/summary.schema.json)."""
    s = Summary.model_json_schema()
    s["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    s["$id"] = "https://seepfe.example/summary.schema.json"
    return s


def fs_value(governing: dict | None) -> float:
    """The least FS of a governing block as a number: inf where none arises (verdict pass, fs null), nan
    where it is not known."""
    if not governing:
        return math.nan
    fs = governing.get("fs")
    if fs is not None:
        return float(fs)
    return math.inf if governing.get("verdict") == "pass" else math.nan


# ---------------------------------------------------------------------------- calibration.json (issue 16)
CALIBRATION_FORMAT = "seepfe-calibration/1"


class CalibrationParameter(BaseModel):
    """One key of 'fit': the fitted value and an approximate 95 % interval (SI; null where not determined)."""

    model_config = _STRICT
    value: float = Field(description="fitted value (held: the section's value), SI unit in 'unit'")
    low: _num = Field(description="lower end of the linearised 95 % interval; null where the readings do not "
                                  "determine the value (see identifiable_why)")
    high: _num = Field(description="upper end of the linearised 95 % interval; null where not determined")
    unit: str
    start: float = Field(description="value the fit started from (the section's, inside the bounds)")
    min: float
    max: float
    scale: Literal["log", "linear"] = Field(description="the coordinate the fit moves in (log: ln of the value)")
    at_bound: Optional[Literal["min", "max"]] = Field(description="the bound the value rests on, if any")
    held: bool = Field(description="held at the section's value because heads alone cannot fix it")
    file_unit: str = Field(description="unit of the section file for this key")
    value_file_units: float = Field(description="the value as written into section.calibrated.json")


class CalibrationRatio(BaseModel):
    model_config = _STRICT
    value: float
    low: _num
    high: _num
    identifiable: bool
    why: str


class CalibrationScale(BaseModel):
    """Whether the readings fix the level of the conductivities (heads alone fix only their ratios)."""

    model_config = _STRICT
    determined: bool
    mode: Literal["determined", "ratio", "held"] = Field(
        description="determined: a measured flow or a prescribed flux fixes it; ratio: one fitted conductivity (the "
                    "reference) is held and the others fitted as ratios; held: the conductivities not fitted fix it")
    why: str
    reference: Optional[str] = None
    held: list[str] = Field(default_factory=list, description="materials whose held conductivity fixes the level")
    ratios: dict[str, CalibrationRatio] = Field(default_factory=dict)


class CalibrationResidual(BaseModel):
    model_config = _STRICT
    event: str
    kind: Literal["head", "flow"]
    name: str = Field(description="piezometer, or the boundary of a flow")
    x_m: _num
    y_m: _num
    unit: str = Field(description="m for heads; m3/s per m (+ into the section) for flows")
    observed: float
    computed: float = Field(description="at the fitted values")
    computed_start: float = Field(description="at the start values")
    sigma: float
    residual: float = Field(description="observed - computed")
    normalised: float = Field(description="(observed - computed) / sigma")


class CalibrationCheckValues(BaseModel):
    model_config = _STRICT
    fs: _num
    mode: Optional[Literal["heave", "uplift"]]
    boundary: Optional[str]
    x_m: _num
    exit_gradient_max: _num
    verdict: Literal["pass", "fail", "not checked"]
    why: str
    flows_m3_s_per_m: dict[str, float]
    flows_determined: bool = Field(description="false where the level of the conductivities is not determined")


class CalibrationCheck(BaseModel):
    model_config = _STRICT
    case: str
    kind: Literal["event", "design"]
    fixed: dict[str, Any]
    before: CalibrationCheckValues = Field(description="at the section's own values")
    after: CalibrationCheckValues = Field(description="at the fitted values")


class CalibrationRecord(BaseModel):
    """calibration.json, written by ``seepfe calibrate`` and ``seepfe.calibrate(...).to_dict()`` (SI units)."""

    model_config = _STRICT
    format: Literal["seepfe-calibration/1"] = CALIBRATION_FORMAT
    seepfe_version: str
    title: str
    section: str
    section_sha256: str
    observations: str
    observations_sha256: str
    units: dict[str, str]
    display_units: Optional[dict[str, str]] = None
    parameters: dict[str, CalibrationParameter]
    identifiable: dict[str, bool] = Field(description="per key of 'fit': whether the readings determine its value")
    identifiable_why: dict[str, str] = Field(description="per key: why (the interval's spread, a bound, the scale)")
    correlations: dict[str, Any] = Field(description="keys (the fitted ones) and the correlation matrix of their "
                                                     "fit coordinates (null where not determined)")
    scale: CalibrationScale
    residuals: list[CalibrationResidual]
    events: list[dict[str, Any]]
    design: Optional[dict[str, Any]]
    fit: dict[str, Any] = Field(description="method, sensitivities, status, chi2 before and after, degrees of "
                                            "freedom, the objective during the fit")
    checks: list[CalibrationCheck] = Field(description="underseepage checks at each observed event and the design "
                                                       "event, before and after calibration")
    warnings: list[str]
    notes: list[str]
    caution: str


def calibration_schema() -> dict:
    """The JSON Schema of calibration.json (docs/calibration.schema.json)."""
    s = CalibrationRecord.model_json_schema()
    s["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    s["$id"] = "https://seepfe.example/calibration.schema.json"
    return s
