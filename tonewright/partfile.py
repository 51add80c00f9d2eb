"""Part files: a bar, tube or string described in TOML, validated at the door.

Lengths are millimetres unless written with a unit ("15.75 in", "0.4 m"); moduli GPa;
density kg/m^3; tension N; linear density kg/m; masses grams; spring stiffness N/mm.
Every problem is reported as ``field: what is wrong (got value)`` through InputError.

    title = "F4 bar for the workshop marimba"      # optional
    material = "honduras-rosewood"                  # or a [material] table, or a file path
    [bar]
    length = 400
    width = 55
    thickness = 22
    profile = [[0, 22], [120, 22], [160, 7], [240, 7], [280, 22], [400, 22]]
    holes = [{ at = 90, diameter = 5 }]
    [bar.undercut]         # or a designed cut in its own terms (UndercutTable), not both
    [[support]]
    kind = "cord"          # clamp | pin | cord | spring | mass | touch
    at = 90
    stiffness = 2.0        # N/mm (cord, spring)
    [target]               # optional: what to tune to (tonewright.tuning.TargetSpec)
    [design]               # optional: the limits of a design (DesignTable)

Sizes are held to the range the models handle (``SIZE_LIMITS``): a part outside it is refused
with the field, the value and the allowed range, not solved into nonsense.
"""

from __future__ import annotations

import itertools
import json
import tomllib
from pathlib import Path
from typing import Annotated, Any, Literal

import numpy as np
from pydantic import (
    AfterValidator,
    BaseModel,
    ConfigDict,
    Field,
    ValidationError,
    ValidationInfo,
    field_validator,
    model_validator,
)

from tonewright.errors import InputError, from_validation_error, read_text_input
from tonewright.forward.geometry import (
    Bar,
    Hole,
    PiecewiseLinear,
    String,
    Support,
    Tube,
    constant,
    hole_centre_height,
)
from tonewright.materials import MaterialEntry, MaterialSpec, material_value, resolve_material
from tonewright.optimizer.spaces import undercut_thickness
from tonewright.tuning import TargetSpec
from tonewright.units import Length, PositionLength, parse_length, parse_position

__all__ = [
    "SIZE_LIMITS",
    "BarTable",
    "DesignTable",
    "ModelTable",
    "PartFile",
    "StringTable",
    "SupportTable",
    "TubeTable",
    "UndercutTable",
    "load_part",
    "parse_part",
]

_FROZEN = ConfigDict(extra="forbid", frozen=True)

# Sizes the models handle, in metres or as a share of the part's length.
SIZE_LIMITS = {
    # 10 mm: a 1 mm thick steel bar that short already rings near 50 kHz, past hearing; shorter
    # parts only make the eigenproblem ill-conditioned. 5 m: twice the longest tubular bell or
    # bass string; the outputs sample the part every millimetre, so kilometres exhaust memory.
    "length": (0.010, 5.0),
    # 0.5 mm: the thinnest tongue or tine a workshop files; below it a part is foil.
    "section": (0.5e-3, None),
    # 0.05 mm: half the finest musical wire.
    "wire": (0.05e-3, None),
    # thickness (and a tube's outer diameter) <= L/4: against the 2D model of a uniform
    # rosewood bar the Timoshenko beam's bending modes 1-3 are within 4 cents at h/L = 0.2,
    # 16 cents at 0.25, 28 cents at 0.33 (measured with forward.plane.plane_modes); the 2D/3D
    # correction closes gaps of that size, not larger ones.
    "depth_share": 0.25,
    # width <= L/2: bending across the width behaves as a free beam of length W, near
    # (L/W)^2 f1 = 4 f1 at W = L/2, already inside the partials; a wider part is a plate and
    # the beam has none of those modes.
    "width_share": 0.5,
    # a string's diameter <= L/20: the string model keeps bending stiffness EI but not shear
    # or rotary inertia, which stay negligible only for a slender wire.
    "string_diameter_share": 0.05,
}


def _within(limits: str) -> AfterValidator:
    def check(value: float, info: ValidationInfo) -> float:
        _check_size(info.field_name or "size", value, limits)
        return value

    return AfterValidator(check)


PartLength = Annotated[Length, _within("length")]
SectionLength = Annotated[Length, _within("section")]
WireLength = Annotated[Length, _within("wire")]


def _check_size(
    name: str, value: float, limits: str = "section", length: float | None = None, share: float = 0
) -> None:
    """``name`` within ``SIZE_LIMITS[limits]`` and, with ``length``, at most ``share`` of it."""
    lo, hi = SIZE_LIMITS[limits]
    if value < lo or (hi is not None and value > hi):
        allowed = f"{lo * 1e3:g} mm to {hi * 1e3:g} mm" if hi else f"at least {lo * 1e3:g} mm"
        raise ValueError(f"{name} {value * 1e3:g} mm is outside the models' range: {allowed}")
    if length is not None and value > share * length * (1 + 1e-12):
        raise ValueError(
            f"{name} {value * 1e3:g} mm is too large for a {length * 1e3:g} mm long part: at most "
            f"{share:g} of the length ({share * length * 1e3:g} mm) for the beam model"
        )


def _stations(value: Any, what: str) -> tuple[tuple[float, float], ...]:
    """[[x, value], ...] with x a length; values parsed by the caller."""
    if not isinstance(value, list | tuple) or len(value) < 2:
        raise ValueError(f"{what} needs at least two [position, value] pairs")
    out = []
    for i, pair in enumerate(value):
        if not isinstance(pair, list | tuple) or len(pair) != 2:
            raise ValueError(f"{what}[{i}] must be a [position, value] pair, got {pair!r}")
        out.append((pair[0], pair[1]))
    return tuple(out)


def _length_stations(
    value: Any, what: str, allow_zero: bool = False
) -> tuple[tuple[float, float], ...]:
    pairs = _stations(value, what)
    out = []
    for i, (x, y) in enumerate(pairs):
        xm = parse_position(x, f"{what}[{i}] position")
        ym = (
            parse_position(y, f"{what}[{i}] value")
            if allow_zero
            else parse_length(y, f"{what}[{i}] value")
        )
        out.append((xm, ym))
    xs = [p[0] for p in out]
    if any(b <= a for a, b in itertools.pairwise(xs)):
        raise ValueError(f"{what}: positions must increase from one station to the next")
    return tuple(out)


def _check_within(stations: tuple[tuple[float, float], ...], length: float, what: str) -> None:
    if stations and stations[-1][0] > length * (1 + 1e-9):
        raise ValueError(
            f"{what}: station at {stations[-1][0] * 1e3:g} mm lies beyond the length "
            f"{length * 1e3:g} mm"
        )


def _field(stations: tuple[tuple[float, float], ...] | None, uniform: float) -> PiecewiseLinear:
    if not stations:
        return constant(uniform)
    x, y = np.array(stations).T
    return PiecewiseLinear(x, y)


class HoleTable(BaseModel):
    """A suspension hole drilled across the width."""

    model_config = _FROZEN
    at: PositionLength
    diameter: Length
    height: PositionLength | None = None  # centre above the bottom face; default mid-thickness


# A written station table may differ from its undercut by the rounding of its two decimals.
STATION_SLACK = 0.0051e-3


class UndercutTable(BaseModel):
    """``[bar.undercut]``: a designed cut in the design's own terms, as ``design`` writes it
    (``tonewright.optimizer.spaces.undercut_thickness`` evaluates it exactly).

    ``shape`` spline | arch | steps; ``symmetric``; ``cut_from``: where the shape's region
    begins, from each end (mm; the cut itself may start further in, where its depth leaves
    zero); ``depths`` (mm): a spline's control depths (B-spline coefficients, the centre's
    first when symmetric), the depth of each step, or an arch's flat depth; ``flat``: an
    arch's flat bottom as a share of the region's half-length; ``stations``: optional
    ``[[x, thickness to leave], ...]`` for reading, checked against the shape."""

    model_config = _FROZEN
    shape: Literal["spline", "arch", "steps"]
    symmetric: bool = True
    cut_from: PositionLength
    depths: tuple[PositionLength, ...] = Field(min_length=1, max_length=24)
    flat: float | None = Field(default=None, ge=0.0, lt=0.9)
    stations: tuple[tuple[float, float], ...] | None = None

    @field_validator("stations", mode="before")
    @classmethod
    def _stations(cls, v: Any) -> Any:
        return None if v is None else _length_stations(v, "undercut.stations")

    @model_validator(mode="after")
    def _terms(self) -> UndercutTable:
        n = len(self.depths)
        if self.shape == "arch" and (n != 1 or self.flat is None):
            raise ValueError("an arch undercut needs one depth and flat (a share, 0 to 0.9)")
        if self.shape != "arch" and self.flat is not None:
            raise ValueError(f"flat is for an arch; a {self.shape} undercut has none")
        if self.shape == "spline" and n < (2 if self.symmetric else 4):
            raise ValueError("a spline undercut needs at least 2 depths (4 when asymmetric)")
        if not self.symmetric and self.shape != "arch" and n % 2:
            raise ValueError(f"an asymmetric {self.shape} undercut needs an even number of depths")
        return self

    def thickness_field(self, length: float, thickness: float):
        return undercut_thickness(
            length,
            thickness,
            self.shape,
            self.symmetric,
            self.cut_from,
            tuple(self.depths),
            self.flat,
        )


class BarTable(BaseModel):
    model_config = _FROZEN
    length: PartLength
    width: SectionLength
    thickness: SectionLength
    profile: tuple[tuple[float, float], ...] | None = None
    undercut: UndercutTable | None = None
    width_profile: tuple[tuple[float, float], ...] | None = None
    holes: tuple[HoleTable, ...] = ()

    @field_validator("profile", mode="before")
    @classmethod
    def _profile(cls, v: Any) -> Any:
        return None if v is None else _length_stations(v, "profile")

    @field_validator("width_profile", mode="before")
    @classmethod
    def _width_profile(cls, v: Any) -> Any:
        return None if v is None else _length_stations(v, "width_profile")

    @model_validator(mode="after")
    def _consistent(self) -> BarTable:
        _check_size("thickness", self.thickness, "section", self.length, SIZE_LIMITS["depth_share"])
        widths = [self.width] + [w for _, w in self.width_profile or ()]
        _check_size("width", max(widths), "section", self.length, SIZE_LIMITS["width_share"])
        _check_size("width_profile width", min(widths))
        for name in ("profile", "width_profile"):
            _check_within(getattr(self, name) or (), self.length, name)
        if self.undercut is not None:
            self._check_undercut(self.undercut)
        if self.profile:
            too_thick = [y for _, y in self.profile if y > self.thickness * (1 + 1e-9)]
            if too_thick:
                raise ValueError(
                    f"profile thickness {max(too_thick) * 1e3:g} mm exceeds the blank thickness "
                    f"{self.thickness * 1e3:g} mm (material can only be removed)"
                )
        for i, hole in enumerate(self.holes):
            r = 0.5 * hole.diameter
            if hole.at - r < 0 or hole.at + r > self.length:
                raise ValueError(f"holes[{i}] at {hole.at * 1e3:g} mm does not fit inside the bar")
            h_local = float(self.thickness_field()(np.array([hole.at]))[0])
            z = hole_centre_height(hole.height, h_local)
            if z - r <= 0 or z + r >= h_local:
                raise ValueError(
                    f"holes[{i}]: a {hole.diameter * 1e3:g} mm hole at height {z * 1e3:g} mm "
                    f"breaks out of the {h_local * 1e3:g} mm thick section"
                )
        spans = sorted((h.at - 0.5 * h.diameter, h.at + 0.5 * h.diameter) for h in self.holes)
        if any(b[0] < a[1] for a, b in itertools.pairwise(spans)):
            raise ValueError("holes overlap: move them apart")
        return self

    def _check_undercut(self, cut: UndercutTable) -> None:
        if self.profile:
            raise ValueError("give profile or undercut, not both")
        if cut.cut_from >= 0.5 * self.length:
            raise ValueError(
                f"undercut.cut_from {cut.cut_from * 1e3:g} mm must be under half the length "
                f"({0.5 * self.length * 1e3:g} mm)"
            )
        room = self.thickness - SIZE_LIMITS["section"][0]
        if max(cut.depths) > room:
            raise ValueError(
                f"undercut.depths {max(cut.depths) * 1e3:g} mm leaves under "
                f"{SIZE_LIMITS['section'][0] * 1e3:g} mm of the {self.thickness * 1e3:g} mm blank"
            )
        if cut.stations:
            _check_within(cut.stations, self.length, "undercut.stations")
            x, t = np.array(cut.stations).T
            off = np.abs(cut.thickness_field(self.length, self.thickness)(x) - t)
            if off.max() > STATION_SLACK:
                i = int(np.argmax(off))
                raise ValueError(
                    f"undercut.stations: {t[i] * 1e3:g} mm at x = {x[i] * 1e3:g} mm disagrees "
                    f"with the shape by {off[i] * 1e3:.3f} mm; the shape is what is cut: fix or "
                    "drop the stations"
                )

    def thickness_field(self):
        """The thickness along the bar: the undercut's, the profile's, or uniform."""
        if self.undercut is not None:
            return self.undercut.thickness_field(self.length, self.thickness)
        return _field(self.profile, self.thickness)

    def width_field(self) -> PiecewiseLinear:
        return _field(self.width_profile, self.width)


class TubeTable(BaseModel):
    model_config = _FROZEN
    length: PartLength
    outer_diameter: SectionLength
    wall: Length
    wall_profile: tuple[tuple[float, float], ...] | None = None

    @field_validator("wall_profile", mode="before")
    @classmethod
    def _wall_profile(cls, v: Any) -> Any:
        return None if v is None else _length_stations(v, "wall_profile")

    @model_validator(mode="after")
    def _consistent(self) -> TubeTable:
        depth_share = SIZE_LIMITS["depth_share"]
        _check_size("outer_diameter", self.outer_diameter, "section", self.length, depth_share)
        walls = [self.wall] + [w for _, w in self.wall_profile or ()]
        if max(walls) * 2 >= self.outer_diameter:
            raise ValueError(
                f"wall {max(walls) * 1e3:g} mm is too thick for a {self.outer_diameter * 1e3:g} mm "
                "tube (wall must be under half the outer diameter)"
            )
        _check_within(self.wall_profile or (), self.length, "wall_profile")
        return self


class StringTable(BaseModel):
    model_config = _FROZEN
    length: PartLength
    # 100 kN: ten times a piano's bass string; more is a cable, not a musical string
    tension: float = Field(gt=0, le=1e5, allow_inf_nan=False, description="N")
    # 10 kg/m: a steel rod of 40 mm diameter; more is not a string
    linear_density: float | None = Field(default=None, gt=0, le=10.0, allow_inf_nan=False)
    diameter: WireLength | None = None
    density_profile: tuple[tuple[float, float], ...] | None = None
    bending_stiffness: float | None = Field(default=None, ge=0, allow_inf_nan=False)

    @field_validator("density_profile", mode="before")
    @classmethod
    def _density_profile(cls, v: Any) -> Any:
        if v is None:
            return None
        pairs = _stations(v, "density_profile")
        out = []
        for i, (x, mu) in enumerate(pairs):
            if not isinstance(mu, int | float) or not mu > 0:
                raise ValueError(f"density_profile[{i}] value must be a positive kg/m, got {mu!r}")
            out.append((parse_position(x, f"density_profile[{i}] position"), float(mu)))
        return tuple(out)

    @model_validator(mode="after")
    def _consistent(self) -> StringTable:
        if self.diameter is not None:
            share = SIZE_LIMITS["string_diameter_share"]
            _check_size("diameter", self.diameter, "wire", self.length, share)
        given = [n for n in ("linear_density", "diameter", "density_profile") if getattr(self, n)]
        if not given:
            raise ValueError("give linear_density (kg/m), or diameter with a material")
        if self.linear_density is not None and self.diameter is not None:
            raise ValueError("give linear_density or diameter, not both")
        _check_within(self.density_profile or (), self.length, "density_profile")
        return self


SupportKind = Literal["clamp", "pin", "cord", "spring", "mass", "touch"]


class SupportTable(BaseModel):
    model_config = _FROZEN
    kind: SupportKind
    at: PositionLength
    stiffness: float | None = Field(default=None, gt=0, allow_inf_nan=False, description="N/mm")
    grams: float | None = Field(default=None, gt=0, allow_inf_nan=False)

    @model_validator(mode="after")
    def _values(self) -> SupportTable:
        if self.kind in ("cord", "spring") and self.stiffness is None:
            raise ValueError(f"a {self.kind} needs stiffness (N/mm)")
        if self.kind == "mass" and self.grams is None:
            raise ValueError("a mass needs grams")
        return self

    def to_support(self) -> Support:
        if self.kind in ("cord", "spring"):
            return Support("spring", self.at, self.stiffness * 1e3)
        if self.kind == "mass":
            return Support("mass", self.at, self.grams * 1e-3)
        return Support(self.kind, self.at)


class ModelTable(BaseModel):
    """How to model the part (optional)."""

    model_config = _FROZEN
    theory: Literal["timoshenko", "euler-bernoulli"] = "timoshenko"
    tolerance_cents: float = Field(default=0.01, gt=0, le=10)


class DesignTable(BaseModel):
    """The ``[design]`` table: the design space and the shop's limits (see ``tonewright.design``).

    The shop limits are lengths (mm unless a unit is written): ``end_keep``, ``node_zone`` and
    ``cutter_radius`` zero or more, ``min_thickness`` and ``max_depth`` positive and, for a
    bar, under the blank thickness (checked by ``PartFile``).
    """

    model_config = _FROZEN
    shape: Literal["spline", "arch", "steps"] = "spline"
    control_points: int = Field(default=5, ge=2, le=12)
    steps: int = Field(default=3, ge=1, le=8)
    symmetric: bool = True
    free_length: bool = False
    length_range: tuple[PartLength, PartLength] | None = None
    width: tuple[Length, Length] | None = None  # bars: the width is a design variable
    thickness: tuple[Length, ...] | None = None  # bars: stock thicknesses to choose from
    min_thickness: Length | None = None
    max_depth: Length | None = None
    end_keep: PositionLength = 0.0
    node_zone: PositionLength = 0.0
    cutter_radius: PositionLength = 0.0
    clearance: Literal["critical-band", "off"] = "critical-band"
    clearance_bands: float = Field(default=1.0, gt=0.0, le=4.0)
    coincidence_hz: float = Field(default=3.0, ge=0.0, le=50.0)
    wall_range: tuple[Length, Length] | None = None
    density_range: tuple[float, float] | None = None
    seed: int = Field(default=1, ge=0)
    budget: int = Field(default=2000, ge=50, le=100000)
    fidelity: Literal["beam", "plane", "solid"] | None = None  # bars: solid (3D) by default
    thickness_axis: Literal["T", "R"] = "T"  # wood: T quarter-sawn, R flat-sawn (2D/3D models)

    @model_validator(mode="after")
    def _ranges(self) -> DesignTable:
        for name in ("length_range", "wall_range", "density_range", "width"):
            r = getattr(self, name)
            if r is not None and not 0 < r[0] < r[1]:
                raise ValueError(f"{name} must be [smaller, larger] positive values")
        if self.free_length and self.length_range is None:
            raise ValueError("free_length needs length_range = [shortest, longest]")
        return self


def _check_design(design: DesignTable, part: BarTable | TubeTable | StringTable) -> None:
    """The [design] limits against the part they cut."""
    L = part.length
    for name in ("end_keep", "node_zone"):
        value = getattr(design, name)
        if value >= 0.5 * L:
            raise ValueError(
                f"design.{name} {value * 1e3:g} mm leaves nothing to cut: it must be under half "
                f"the length ({0.5 * L * 1e3:g} mm)"
            )
    if design.width is not None:
        if not isinstance(part, BarTable):
            raise ValueError("design.width: a width range is for bars")
        if part.width_profile:
            raise ValueError("design.width: give a constant-width blank (drop bar.width_profile)")
        if design.width[1] > 0.5 * L:
            raise ValueError(
                f"design.width: {design.width[1] * 1e3:g} mm is over half the length "
                f"({0.5 * L * 1e3:g} mm), beyond what the beam models handle"
            )
    if design.thickness is not None:
        if not isinstance(part, BarTable):
            raise ValueError("design.thickness: a stock list of thicknesses is for bars")
        if not 1 <= len(design.thickness) <= 20:
            raise ValueError("design.thickness: give 1 to 20 stock thicknesses")
        for t in design.thickness:
            _check_size("design.thickness", t, "section", L, SIZE_LIMITS["depth_share"])
            for name in ("min_thickness", "max_depth"):
                value = getattr(design, name)
                if value is not None and value >= t:
                    raise ValueError(
                        f"design.{name} {value * 1e3:g} mm must be under every stock thickness "
                        f"(design.thickness has {t * 1e3:g} mm)"
                    )
    if isinstance(part, BarTable):
        t0 = part.thickness
        for name in ("min_thickness", "max_depth"):
            value = getattr(design, name)
            if value is not None and value >= t0:
                raise ValueError(
                    f"design.{name} {value * 1e3:g} mm must be under the blank thickness "
                    f"{t0 * 1e3:g} mm"
                )
    if isinstance(part, TubeTable) and design.wall_range is not None:
        if 2 * design.wall_range[1] >= part.outer_diameter:
            raise ValueError(
                f"design.wall_range: {design.wall_range[1] * 1e3:g} mm walls do not fit a "
                f"{part.outer_diameter * 1e3:g} mm tube (under half the outer diameter)"
            )


class PartFile(BaseModel):
    """A whole part file. Exactly one of [bar], [tube], [string]."""

    model_config = _FROZEN
    title: str = ""
    bar: BarTable | None = None
    tube: TubeTable | None = None
    string: StringTable | None = None
    material: MaterialEntry | None = None
    support: tuple[SupportTable, ...] = ()
    model: ModelTable = ModelTable()
    target: TargetSpec | None = None
    design: DesignTable = DesignTable()

    @model_validator(mode="after")
    def _one_part(self) -> PartFile:
        given = [n for n in ("bar", "tube", "string") if getattr(self, n) is not None]
        if len(given) != 1:
            raise ValueError(
                "a part file needs exactly one of [bar], [tube], [string]"
                + (f"; found {', '.join(given)}" if given else "")
            )
        if (self.bar or self.tube) and self.material is None:
            raise ValueError("material is missing: give a library name or a [material] table")
        if self.string and self.string.diameter is not None and self.material is None:
            raise ValueError("a string given by diameter needs a material")
        length = self.length
        for i, s in enumerate(self.support):
            if s.at > length * (1 + 1e-9):
                raise ValueError(f"support[{i}] at {s.at * 1e3:g} mm lies beyond the part")
        _check_design(self.design, self.bar or self.tube or self.string)
        return self

    @property
    def kind(self) -> str:
        return "bar" if self.bar else "tube" if self.tube else "string"

    @property
    def length(self) -> float:
        return (self.bar or self.tube or self.string).length

    def material_spec(self, base_dir: Path | None = None) -> MaterialSpec | None:
        """The resolved material; a relative material file is looked for beside the part
        file first (``base_dir``), then in the working folder."""
        if self.material is None:
            return None
        value = self.material
        if isinstance(value, Path) and base_dir is not None and not value.is_absolute():
            candidate = base_dir / value
            value = candidate if candidate.exists() else value
        return resolve_material(value)

    def material_value(self) -> str | dict[str, Any] | None:
        """The material entry as written to a part file (None: a string without one)."""
        return None if self.material is None else material_value(self.material)

    def target_value(self) -> dict[str, Any] | None:
        """The [target] table as the user gave it (defaults left out), for writing back."""
        return None if self.target is None else self.target.model_dump(exclude_unset=True)

    def to_part(self, base_dir: Path | None = None) -> Bar | Tube | String:
        """The forward model's immutable part, in SI units."""
        spec = self.material_spec(base_dir)
        supports = tuple(s.to_support() for s in self.support)
        if self.bar is not None:
            b = self.bar
            holes = tuple(Hole(h.at, h.diameter, h.height) for h in b.holes)
            return Bar(
                b.length, b.width_field(), b.thickness_field(), spec.to_beam(), holes, supports
            )
        if self.tube is not None:
            t = self.tube
            return Tube(
                t.length,
                constant(t.outer_diameter),
                _field(t.wall_profile, t.wall),
                spec.to_beam(),
                supports,
            )
        s = self.string
        if s.diameter is not None:
            mu = spec.rho * np.pi * s.diameter**2 / 4.0
            EI = spec.E * np.pi * s.diameter**4 / 64.0
        else:
            mu, EI = s.linear_density or 0.0, 0.0
        if s.bending_stiffness is not None:
            EI = s.bending_stiffness
        if s.density_profile:
            x, y = np.array(s.density_profile).T
            density = PiecewiseLinear(x, y)
        else:
            density = constant(mu)
        if not any(sp.kind in ("clamp", "pin") for sp in supports):
            supports = (Support("pin", 0.0), Support("pin", s.length), *supports)
        return String(s.length, s.tension, density, constant(EI), supports)


def parse_part(raw: dict[str, Any], where: str = "part") -> PartFile:
    """Validate a part table (already parsed from TOML or JSON)."""
    try:
        return PartFile.model_validate(raw)
    except ValidationError as exc:
        raise from_validation_error(exc, where) from None


def load_part(path: str | Path) -> tuple[PartFile, Path]:
    """Read a part file (.toml) or a design result (.json with a "part" table).

    Returns the validated part and the folder it came from (for relative material paths).
    """
    path = Path(path)
    text = read_text_input(path)
    if path.suffix.lower() == ".json":
        try:
            raw = json.loads(text)
        except json.JSONDecodeError as exc:
            raise InputError(f"{path}: not valid JSON ({exc.msg} at line {exc.lineno})") from None
        if not isinstance(raw, dict) or not isinstance(raw.get("part"), dict):
            raise InputError(f'{path}: a result file needs a "part" table')
        raw = raw["part"]
    else:
        try:
            raw = tomllib.loads(text)
        except tomllib.TOMLDecodeError as exc:
            raise InputError(f"{path}: not valid TOML ({exc})") from None
    return parse_part(raw, where=path.name), path.parent
