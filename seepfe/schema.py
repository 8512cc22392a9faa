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

from .units import K_RANGE, Dim

__all__ = ["Name", "Text", "ProjectSpec", "MaterialSpec", "ZoneSpec", "BoundarySpec", "BarrierSpec", "RefineSpec",
           "MeshSpec", "WaterSpec", "SectionSpec", "K_RANGE", "Length", "PositiveLength", "Point", "Conductivity",
           "Flux", "UnitWeight"]


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

_CFG = ConfigDict(extra="forbid", strict=True, frozen=True)


class UnsaturatedSpec(BaseModel):
    """van Genuchten (1980) retention with Mualem relative conductivity, for flow above the phreatic surface."""

    model_config = _CFG
    alpha: PerLength = Field(description="van Genuchten alpha, 1/m")
    n: Annotated[float, AfterValidator(_finite), Field(gt=1.0)] = Field(
        description="van Genuchten n (> 1)")
    kr_min: Annotated[float, Field(gt=0.0, lt=1.0)] = Field(
        1e-6, description="floor of the relative conductivity (-), keeps the system regular")


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
        False, description="with 'head': the part of the polyline above the water level (y > head) is dry "
                           "and acts as a seepage face instead (for river-stage sweeps on a fixed slope)")

    @model_validator(mode="after")
    def _one_kind(self):
        kinds = [k for k, on in (("head", self.head is not None), ("seepage_face", self.seepage_face),
                                 ("flux", self.flux is not None), ("drain", self.drain)) if on]
        if len(kinds) != 1:
            if not kinds:
                raise ValueError("give one of 'head', 'seepage_face', 'flux' or 'drain'")
            raise ValueError(f"give only one of {', '.join(repr(k) for k in kinds)}")
        if self.dry_above_level and self.head is None:
            raise ValueError("'dry_above_level' goes with 'head'")
        return self

    @property
    def kind(self) -> str:
        if self.head is not None:
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
