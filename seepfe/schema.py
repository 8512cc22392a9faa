"""The section-file format as pydantic models.

These models check types, ranges and which keys may appear; geometry (polygons, tiling, boundaries on
the outline) is checked afterwards in :mod:`seepfe.geometry`. ``docs/section.schema.json`` is written
from these models by ``scripts/write_schema.py``.

Units: the models hold SI values: lengths m, conductivities m/s, unit weights kN/m3, fluxes m/s (m3/s per
m2), angles degrees. A file written in other units (its ``"units"`` key) is converted by
:mod:`seepfe.units` before these models see it, by the dimension markers declared beside each field.
"""

from __future__ import annotations

import math
import unicodedata
from typing import Annotated, Literal, Optional

from pydantic import AfterValidator, BaseModel, ConfigDict, Field, model_validator

from .units import K_RANGE, Dim, Dims

__all__ = ["Name", "Text", "ProjectSpec", "MaterialSpec", "ZoneSpec", "BoundarySpec", "BarrierSpec", "RefineSpec",
           "MeshSpec", "WaterSpec", "SectionSpec", "TransientSpec", "TIME_UNITS", "K_RANGE", "Length", "PositiveLength",
           "Point", "Conductivity", "Flux", "UnitWeight"]


def _finite(v: float) -> float:
    if not math.isfinite(v):
        raise ValueError(f"must be a finite number, got {v}")
    return v


def _positive(v: float) -> float:
    _finite(v)
    if v <= 0:
        raise ValueError(f"must be > 0, got {v}")
    return v


#: bidirectional embeddings, overrides and isolates: they reorder what a terminal shows
_BIDI = frozenset("\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069")


def _plain(v: str) -> str:
    """Names and titles are one line of plain text: no control characters (ESC, newline, tab, ...), line or
    paragraph separators, bidirectional overrides or lone surrogates (they forge lines and colours on a terminal)."""
    for ch in v:
        if ch in _BIDI or unicodedata.category(ch) in ("Cc", "Cs", "Zl", "Zp"):
            raise ValueError(f"holds the control character U+{ord(ch):04X}; names and titles are one line of "
                             "plain text")
    return v


#: one line of plain text (titles, descriptions), at most 2000 characters
Text = Annotated[str, Field(max_length=2000), AfterValidator(_plain)]
#: a name (zones, materials, boundaries, barriers, remedies, sweep entries): plain text, 1 to 200 characters
Name = Annotated[str, Field(min_length=1, max_length=200), AfterValidator(_plain)]

Finite = Annotated[float, AfterValidator(_finite)]
Positive = Annotated[float, AfterValidator(_positive), Field(json_schema_extra={"exclusiveMinimum": 0})]


def _conductivity(v: float) -> float:
    _positive(v)
    if not K_RANGE[0] <= v <= K_RANGE[1]:
        raise ValueError(f"{v:g} m/s is outside the range of soils and rocks ({K_RANGE[0]:g} to {K_RANGE[1]:g} m/s)")
    return v


# ---- dimensioned numbers: the one place a field's dimension is declared (seepfe.units converts the
# file's units to SI by these markers, labels the JSON Schema and tells sweeps the unit of a key).
# The models below hold SI values (m, m/s, kN/m3); the range in the JSON Schema is unit-free (> 0).
Length = Annotated[Finite, Dim("length")]
PositiveLength = Annotated[Positive, Dim("length")]
Point = Annotated[list[Length], Field(min_length=2, max_length=2)]
Flux = Annotated[Finite, Dim("flux")]
UnitWeight = Annotated[Positive, Dim("unit_weight")]
PerLength = Annotated[Positive, Dim("per_length")]
Conductivity = Annotated[float, AfterValidator(_conductivity), Field(json_schema_extra={"exclusiveMinimum": 0}),
                         Dim("conductivity", k_range=True)]
#: a time in the unit its object names ("time_unit": hour or day); the file's "units" do not convert it
Time = Annotated[Finite, Dim("time")]
PositiveTime = Annotated[Positive, Dim("time")]
#: a hydrograph point [time, total head]: time in the boundary's time_unit, head a length
HydroPoint = Annotated[list[Finite], Field(min_length=2, max_length=2), Dims(("time", "length"))]
#: seconds per time unit of a hydrograph (exact)
TIME_UNITS = {"hour": 3600.0, "day": 86400.0}

_CFG = ConfigDict(extra="forbid", strict=True, frozen=True)


class UnsaturatedSpec(BaseModel):
    """van Genuchten (1980) retention with Mualem relative conductivity, for flow above the phreatic surface."""

    model_config = _CFG
    alpha: PerLength = Field(description="van Genuchten alpha, 1/m")
    n: Annotated[float, AfterValidator(_finite), Field(gt=1.0)] = Field(
        description="van Genuchten n (> 1)")
    kr_min: Annotated[float, Field(gt=0.0, lt=1.0)] = Field(
        1e-6, description="floor of the relative conductivity (-), keeps the system regular")
    theta_s: Optional[Annotated[float, Field(gt=0.0, le=1.0)]] = Field(
        None, description="saturated volumetric water content (-), for the moisture capacity of transient solves "
                          "(default: by soil type, docs/transient.md)")
    theta_r: Optional[Annotated[float, Field(ge=0.0, lt=1.0)]] = Field(
        None, description="residual volumetric water content (-), for the moisture capacity of transient solves "
                          "(default: by soil type, docs/transient.md)")

    @model_validator(mode="after")
    def _contents(self):
        if self.theta_s is not None and self.theta_r is not None and not self.theta_r < self.theta_s:
            raise ValueError(f"'theta_r' ({self.theta_r:g}) must be below 'theta_s' ({self.theta_s:g})")
        return self


class MaterialSpec(BaseModel):
    """A soil: isotropic ``k`` or principal ``kx``, ``ky`` with ``angle``; optional unit weight."""

    model_config = _CFG
    description: Optional[Text] = None
    k: Optional[Conductivity] = Field(None, description="isotropic saturated conductivity, m/s")
    kx: Optional[Conductivity] = Field(None, description="principal conductivity along angle, m/s")
    ky: Optional[Conductivity] = Field(None, description="principal conductivity across angle, m/s")
    angle: Annotated[Finite, Dim("angle")] = Field(0.0, description="direction of kx, degrees counter-clockwise from +x")
    unit_weight: Optional[UnitWeight] = Field(None, description="saturated unit weight, kN/m3")
    specific_gravity: Optional[Positive] = Field(None, description="Gs of the solids (-)")
    void_ratio: Optional[Positive] = Field(None, description="void ratio e (-)")
    d70: Optional[PositiveLength] = Field(None, description="grain size d70, m (piping checks)")
    soil_class: Optional[Literal[
        "very fine sand or silt", "fine sand", "medium sand", "coarse sand", "fine gravel", "medium gravel",
        "coarse gravel including cobbles", "boulders with some cobbles and gravel", "soft clay", "medium clay",
        "hard clay", "very hard clay or hardpan"]] = Field(
        None, description="soil class of Lane's (1935) weighted-creep table, to compare a creep ratio with "
                          "its safe value (docs/checks.md)")
    unsaturated: Optional[UnsaturatedSpec] = None
    specific_storage: Optional[PerLength] = Field(
        None, description="specific storage Ss, 1/m: water released from a unit volume of saturated soil per unit "
                          "fall of pressure head (transient solves; default by soil type, docs/transient.md)")

    @model_validator(mode="after")
    def _one_conductivity(self):
        has_k = self.k is not None
        has_xy = self.kx is not None or self.ky is not None
        if has_k and has_xy:
            raise ValueError("give either 'k' or 'kx' and 'ky', not both")
        if not has_k and not has_xy:
            raise ValueError("missing conductivity: give 'k' or 'kx' and 'ky' (m/s)")
        if has_xy and (self.kx is None or self.ky is None):
            raise ValueError("'kx' and 'ky' go together: give both (m/s)")
        if has_k and self.angle != 0.0:
            raise ValueError("'angle' needs 'kx' and 'ky'; an isotropic 'k' has no direction")
        return self


class ZoneSpec(BaseModel):
    """A simple polygon of one material. Zones tile the section."""

    model_config = _CFG
    name: Name
    material: Name
    polygon: list[Point] = Field(description="vertices [[x, y], ...] in m, either orientation")
    drain: bool = Field(False, description="a drain zone (toe, blanket or chimney drain) at atmospheric "
                                           "pressure: takes water out, never puts it in")


class BoundarySpec(BaseModel):
    """A condition on the outline edges that lie on ``polyline``. Exactly one kind is given."""

    model_config = _CFG
    name: Name
    polyline: Annotated[list[Point], Field(min_length=2)]
    head: Optional[Length] = Field(None, description="prescribed total head, m")
    seepage_face: bool = Field(False, description="h = y where water leaves, no flow where it would enter")
    flux: Optional[Flux] = Field(None, description="normal inflow, m/s (positive into the section)")
    drain: bool = Field(False, description="a drain at atmospheric pressure: takes water out, never in")
    dry_above_level: bool = Field(
        False, description="with 'head' or 'hydrograph': the part of the polyline above the water level (y > head) "
                           "is dry and acts as a seepage face instead (for river-stage sweeps on a fixed slope, and "
                           "for a river slope under a hydrograph)")
    hydrograph: Optional[Annotated[list[HydroPoint], Field(min_length=2)]] = Field(
        None, description="in place of 'head': total head against time, [[time, head], ...], linear between the "
                          "points (a repeated time is a step); time in 'time_unit', head a length (transient solve, "
                          "docs/transient.md)")
    time_unit: Optional[Literal["hour", "day"]] = Field(
        None, description="unit of the hydrograph's times, its 'output_times' and 'duration'")
    output_times: Optional[Annotated[list[Time], Field(min_length=1)]] = Field(
        None, description="times at which the whole field is stored, in 'time_unit' (default: the hydrograph's own "
                          "points and its crest)")
    peak: Optional[Length] = Field(
        None, description="stage at the crest: the rise of the hydrograph above its first stage is scaled so that "
                          "its highest point is this head (for sweeps of the flood peak)")
    duration: Optional[PositiveTime] = Field(
        None, description="length of the hydrograph in 'time_unit': its times and output_times are stretched from its "
                          "first point so that it lasts this long (for sweeps of the flood duration)")

    @model_validator(mode="after")
    def _one_kind(self):
        if self.head is not None and self.hydrograph is not None:
            raise ValueError("give 'head' (steady) or 'hydrograph' (transient), not both")
        kinds = [k for k, on in (("head", self.head is not None or self.hydrograph is not None),
                                 ("seepage_face", self.seepage_face),
                                 ("flux", self.flux is not None), ("drain", self.drain)) if on]
        if len(kinds) != 1:
            if not kinds:
                raise ValueError("give one of 'head', 'hydrograph', 'seepage_face', 'flux' or 'drain'")
            raise ValueError(f"give only one of {', '.join(repr(k) for k in kinds)}")
        if self.dry_above_level and self.kind != "head":
            raise ValueError("'dry_above_level' goes with 'head' or 'hydrograph'")
        if self.hydrograph is None:
            for key in ("time_unit", "output_times", "peak", "duration"):
                if getattr(self, key) is not None:
                    raise ValueError(f"'{key}' goes with 'hydrograph'")
            return self
        if self.time_unit is None:
            raise ValueError("'hydrograph' needs 'time_unit': \"hour\" or \"day\" (the unit of its times)")
        t = [p[0] for p in self.hydrograph]
        for i in range(1, len(t)):
            if t[i] < t[i - 1]:
                raise ValueError(f"hydrograph[{i}]: time {t[i]:g} {self.time_unit} comes before the previous point's "
                                 f"{t[i - 1]:g}: times must not decrease")
            if i >= 2 and t[i] == t[i - 1] == t[i - 2]:
                raise ValueError(f"hydrograph[{i}]: three points at time {t[i]:g} {self.time_unit}: a step takes two")
        if not t[-1] > t[0]:
            raise ValueError("hydrograph: the last time must be later than the first")
        for v in self.output_times or ():
            if not t[0] <= v:
                raise ValueError(f"output_times: {v:g} {self.time_unit} is before the hydrograph starts ({t[0]:g})")
        if self.peak is not None:
            h = [p[1] for p in self.hydrograph]
            if not max(h) > h[0]:
                raise ValueError("'peak' scales the rise of the hydrograph above its first stage, and this "
                                 "hydrograph never rises above it")
        return self

    @property
    def kind(self) -> str:
        if self.head is not None or self.hydrograph is not None:
            return "head"
        if self.flux is not None:
            return "flux"
        return "drain" if self.drain else "seepage_face"


class BarrierSpec(BaseModel):
    """A zero-thickness impervious line inside the section (sheet pile, thin cutoff wall).

    The mesh is split along it: no water crosses it, and the head may jump across it. It may start
    on the outline (a sheet pile driven from the ground surface) or lie fully inside the section.
    """

    model_config = _CFG
    name: Name
    polyline: Annotated[list[Point], Field(min_length=2)] = Field(
        description="vertices [[x, y], ...] in m along the barrier")


class RefineSpec(BaseModel):
    """A smaller element size near a polyline or a point."""

    model_config = _CFG
    polyline: Optional[Annotated[list[Point], Field(min_length=2)]] = None
    point: Optional[Point] = None
    size: PositiveLength = Field(description="element size on the polyline or at the point, m")
    width: Optional[PositiveLength] = Field(
        None, description="distance over which the small size holds before it grows, m (default: size)")

    @model_validator(mode="after")
    def _one_place(self):
        if (self.polyline is None) == (self.point is None):
            raise ValueError("give either 'polyline' or 'point'")
        return self


class MeshSpec(BaseModel):
    """Mesh controls. Every key is optional."""

    model_config = _CFG
    size: Optional[PositiveLength] = Field(None, description="element size, m (default: extent / 60)")
    refine: list[RefineSpec] = Field(default_factory=list)
    order: Literal[1, 2] = Field(2, description="1: linear triangles, 2: quadratic triangles")
    max_elements: Annotated[int, Field(gt=0)] = Field(
        2_000_000, description="refuse meshes estimated larger than this")
    split: Optional[Annotated[int, Field(ge=0, le=4)]] = Field(
        None, description="mesh at size*2^split and split each triangle in 4, split times "
                          "(default: chosen from the estimated size)")


class WaterSpec(BaseModel):
    model_config = _CFG
    unit_weight: UnitWeight = Field(9.81, description="unit weight of water, kN/m3")


class SolverSpec(BaseModel):
    model_config = _CFG
    linear: Literal["auto", "direct", "amg"] = "auto"
    tolerance: Positive = Field(1e-10, description="relative residual for the iterative solver")
    max_iterations: Annotated[int, Field(gt=0)] = Field(
        200, description="hard cap on seepage-face / nonlinear iterations (the unconfined iteration also stops "
                         "earlier when its flow residual stops falling)")
    phreatic: Literal["auto", "off"] = Field(
        "auto", description="auto: find the phreatic surface when part of the section lies above it "
                            "(saturated-unsaturated solve); off: treat the whole section as saturated")
    accuracy: Optional[Positive] = Field(
        None, description="requested relative discretisation error of the seepage quantity (flow per boundary), "
                          "e.g. 0.01: seepfe refines the mesh uniformly until the estimate (seepfe.accuracy, from "
                          "coarser meshes) meets it; values at singular corners are not part of it")
    nonlinear: Literal["newton", "picard"] = Field(
        "newton", description="iteration of the unconfined solve: newton (line search) or picard "
                              "(under-relaxed)")


class CriteriaSpec(BaseModel):
    """Pass/fail criteria of the underseepage checks (:mod:`seepfe.checks`).

    Defaults after USACE ETL 1110-2-569 (2005), Design guidance for levee underseepage, which
    amends EM 1110-2-1913 (2000), Design and Construction of Levees: factor of safety 1.6 against
    heave/uplift at the landside toe and an allowable average gradient of about 0.5 across the
    top stratum (values recalled from memory; check them against the current edition and local
    agency criteria).
    """

    model_config = _CFG
    fs_heave: Positive = Field(1.6, description="least factor of safety against heave, i_c / i (-) "
                                                "(ETL 1110-2-569, from memory)")
    fs_uplift: Positive = Field(1.6, description="least factor of safety against uplift of the top stratum (-) "
                                                 "(ETL 1110-2-569, from memory)")
    allowable_gradient: Positive = Field(0.5, description="largest upward gradient across the top stratum, "
                                                          "or at the surface where there is none (m/m) "
                                                          "(USACE practice, from memory)")


class ChecksSpec(BaseModel):
    """Underseepage checks along exit surfaces. Every key is optional."""

    model_config = _CFG
    boundaries: Optional[list[Name]] = Field(
        None, description="names of the boundaries to check (default: every seepage face, and head "
                          "boundaries at the lowest prescribed head)")
    spacing: Optional[PositiveLength] = Field(None, description="extra check points every this many m along "
                                                          "each boundary (besides every mesh node)")
    top_stratum: Optional[list[Name]] = Field(
        None, description="names of the zones that make up the landside top stratum (default: found where "
                          "the soil turns markedly more pervious, see 'contrast'); the base of the deepest "
                          "of them is the base of the top stratum")
    top_stratum_depth: Optional[PositiveLength] = Field(
        None, description="depth of the base of the top stratum below the surface, m (default: found "
                          "from the zones)")
    contrast: Annotated[float, AfterValidator(_finite), Field(gt=1.0)] = Field(
        10.0, description="the substratum is 'markedly more pervious' than the top stratum when its "
                          "vertical conductivity is at least this ratio times the equivalent (series) "
                          "vertical conductivity of the layers above it (-)")
    toe_x: Optional[Length] = Field(None, description="x of the landside toe, m (default: inferred)")
    riverside_toe_x: Optional[Length] = Field(None, description="x of the riverside toe, m (default: inferred)")
    landside_water_level: Optional[Length] = Field(
        None, description="landside water level (total head), m (default: the ground surface)")
    cutoff: Optional[Annotated[list[Point], Field(min_length=2, max_length=2)]] = Field(
        None, description="a cutoff or sheet pile as [[x, y_top], [x, y_tip]], m, when it is not a "
                          "zone or barrier of the section")
    criteria: CriteriaSpec = Field(default_factory=CriteriaSpec)


_Text = Optional[Annotated[str, Field(max_length=200), AfterValidator(_plain)]]


class ProjectSpec(BaseModel):
    """The title block of the report: who the analysis is for and who prepared and checked it. Every key
    is optional; a key left out prints as a blank line to fill in by hand."""

    model_config = _CFG
    project: _Text = Field(None, description="project name, as on the drawings")
    document: _Text = Field(None, description="document or calculation number")
    reach: _Text = Field(None, description="levee reach, dam or structure the section belongs to")
    station: _Text = Field(None, description="station (chainage) of the section, as written on the drawings, "
                                             "e.g. '4+150'")
    datum: _Text = Field(None, description="vertical datum of the elevations and heads, e.g. 'local datum, m'")
    prepared_by: _Text = Field(None, description="who prepared the analysis")
    checked_by: _Text = Field(None, description="who checked it")
    date: _Text = Field(None, description="date of the issue, as it should print")
    revision: _Text = Field(None, description="revision mark, e.g. 'A' or '0'")
    structure: Optional[Literal["levee", "dam"]] = Field(
        None, description="what the section is: 'levee' (riverside and landside, landside toe) or 'dam' (upstream "
                          "and downstream, downstream toe); default: 'dam' when the title or a boundary name says "
                          "dam, reservoir, upstream or downstream, else 'levee'")


class GridSpec(BaseModel):
    """A rectangular grid of points (m) for pore pressures written for a stability analysis."""

    model_config = _CFG
    x: Annotated[list[Length], Field(min_length=2, max_length=2)] = Field(description="[x_min, x_max], m")
    y: Annotated[list[Length], Field(min_length=2, max_length=2)] = Field(description="[y_min, y_max], m")
    spacing: PositiveLength = Field(description="distance between grid points, m")

    @model_validator(mode="after")
    def _order(self):
        for k in ("x", "y"):
            lo, hi = getattr(self, k)
            if not hi > lo:
                raise ValueError(f"'{k}': [{lo:g}, {hi:g}] must run from the smaller to the larger value")
        n = ((self.x[1] - self.x[0]) / self.spacing + 1) * ((self.y[1] - self.y[0]) / self.spacing + 1)
        if n > 2_000_000:
            raise ValueError(f"about {n:.3g} grid points; use a larger 'spacing' (at most 2e6 points)")
        return self


class TransientSpec(BaseModel):
    """Settings of the transient solve of a section with a hydrograph (docs/transient.md). Every key is optional."""

    model_config = _CFG
    time_unit: Optional[Literal["hour", "day"]] = Field(
        None, description="unit of 'end', 'max_step' and 'first_step' (default: the first hydrograph's)")
    end: Optional[Time] = Field(None, description="time the solve ends (default: the last hydrograph point; after "
                                                  "it each stage stays at its last value)")
    max_step: Optional[PositiveTime] = Field(None, description="largest time step (default: the duration / 100)")
    first_step: Optional[PositiveTime] = Field(
        None, description="first time step, and the step after a jump of a stage (default: max_step / 50)")
    initial_water_table: Optional[Length] = Field(
        None, description="start from still water at this elevation, m (total head equal to it everywhere); "
                          "default: the steady solution at the hydrographs' first stages")
    pore_pressure_grid: Optional[GridSpec] = Field(
        None, description="grid on which pore pressures are written at every stored time (default: the riverside "
                          "half of the embankment and the ground below it to the depth of its height)")


class SectionSpec(BaseModel):
    """A whole section file."""

    model_config = ConfigDict(extra="forbid", strict=True, frozen=True,
                              json_schema_extra={"title": "seepfe section"})
    title: Text = ""
    project: Optional[ProjectSpec] = Field(None, description="title block of the report (docs/report.md)")
    materials: Annotated[dict[Name, MaterialSpec], Field(min_length=1)]
    zones: Annotated[list[ZoneSpec], Field(min_length=1)]
    boundaries: list[BoundarySpec] = Field(default_factory=list)
    barriers: list[BarrierSpec] = Field(default_factory=list)
    mesh: MeshSpec = Field(default_factory=MeshSpec)
    water: WaterSpec = Field(default_factory=WaterSpec)
    solver: SolverSpec = Field(default_factory=SolverSpec)
    checks: ChecksSpec = Field(default_factory=ChecksSpec)
    transient: Optional[TransientSpec] = Field(
        None, description="time stepping and outputs of the transient solve (used when a boundary has a hydrograph)")

    @model_validator(mode="after")
    def _transient(self):
        if self.transient is not None and not any(b.hydrograph is not None for b in self.boundaries):
            raise ValueError("'transient' settings need a boundary with a 'hydrograph'")
        return self
