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
    [[support]]
    kind = "cord"          # clamp | pin | cord | spring | mass | touch
    at = 90
    stiffness = 2.0        # N/mm (cord, spring)
"""

from __future__ import annotations

import itertools
import json
import tomllib
from pathlib import Path
from typing import Any, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator, model_validator

from tonewright.errors import InputError, from_validation_error
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
from tonewright.materials import MaterialSpec, resolve_material
from tonewright.units import Length, PositionLength, parse_length, parse_position

__all__ = [
    "BarTable",
    "ModelTable",
    "PartFile",
    "StringTable",
    "SupportTable",
    "TubeTable",
    "load_part",
    "parse_part",
]

_FROZEN = ConfigDict(extra="forbid", frozen=True)


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


class BarTable(BaseModel):
    model_config = _FROZEN
    length: Length
    width: Length
    thickness: Length
    profile: tuple[tuple[float, float], ...] | None = None
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
        for name in ("profile", "width_profile"):
            _check_within(getattr(self, name) or (), self.length, name)
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

    def thickness_field(self) -> PiecewiseLinear:
        return _field(self.profile, self.thickness)

    def width_field(self) -> PiecewiseLinear:
        return _field(self.width_profile, self.width)


class TubeTable(BaseModel):
    model_config = _FROZEN
    length: Length
    outer_diameter: Length
    wall: Length
    wall_profile: tuple[tuple[float, float], ...] | None = None

    @field_validator("wall_profile", mode="before")
    @classmethod
    def _wall_profile(cls, v: Any) -> Any:
        return None if v is None else _length_stations(v, "wall_profile")

    @model_validator(mode="after")
    def _consistent(self) -> TubeTable:
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
    length: Length
    tension: float = Field(gt=0, allow_inf_nan=False, description="N")
    linear_density: float | None = Field(default=None, gt=0, allow_inf_nan=False)
    diameter: Length | None = None
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


class PartFile(BaseModel):
    """A whole part file. Exactly one of [bar], [tube], [string]."""

    model_config = ConfigDict(extra="forbid", frozen=True, arbitrary_types_allowed=True)
    title: str = ""
    bar: BarTable | None = None
    tube: TubeTable | None = None
    string: StringTable | None = None
    material: Any = None
    support: tuple[SupportTable, ...] = ()
    model: ModelTable = ModelTable()
    target: dict[str, Any] | None = None
    design: dict[str, Any] | None = None

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
        return self

    @property
    def kind(self) -> str:
        return "bar" if self.bar else "tube" if self.tube else "string"

    @property
    def length(self) -> float:
        return (self.bar or self.tube or self.string).length

    def material_spec(self, base_dir: Path | None = None) -> MaterialSpec | None:
        if self.material is None:
            return None
        value = self.material
        if isinstance(value, str) and base_dir is not None and value.endswith(".toml"):
            candidate = base_dir / value
            value = str(candidate) if candidate.exists() else value
        return resolve_material(value)

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
    text = path.read_text(encoding="utf-8")
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
