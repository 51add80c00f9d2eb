"""Material library and material tables: from files in GPa to the beam model's SI values.

What the beam model takes (``forward.geometry.Material``): ``E`` along the axis, a shear
modulus ``G``, the density ``rho`` and a Poisson ratio ``nu``.

- Wood is orthotropic. Its axes are L (along the grain), R (radial), T (tangential). The beam
  uses ``E = E_L``, ``G = G_LT`` and ``nu = nu_LT``; the full set (E_L, E_R, E_T, G_LR, G_LT,
  G_RT, nu_LR, nu_LT, nu_RT) is kept for 3D models. Handbook moduli are ratios to E_L (USDA FPL
  *Wood Handbook*, FPL-GTR-190, 2010, ch. 5, Tables 5-1 and 5-2), so the library stores
  ``E_L`` times those ratios.
- Poisson convention (Wood Handbook): ``nu_ij = -eps_j / eps_i`` under a stress along ``i``.
  The compliance matrix in Voigt order (L, R, T, RT, LT, LR) is
  ``S = [[1/E_L, -nu_LR/E_L, -nu_LT/E_L], [., 1/E_R, -nu_RT/E_R], [., ., 1/E_T]]`` (symmetric)
  with the shear block ``diag(1/G_RT, 1/G_LT, 1/G_LR)``; it must be positive definite
  (Lekhnitskii, *Theory of Elasticity of an Anisotropic Body*, 1963 - strain energy > 0).
- Isotropic assumption: when a shear modulus is not given and no library ``base`` supplies
  one, ``G = E / (2 (1 + nu))``. That is right for metals and WRONG for wood (E_L/G_LT is 10 to
  16, not 2.6) and for fibre composites: give ``G`` or a ``base`` for those.
- A ``base`` with overrides: values not given come from the base; moduli not given are scaled
  with ``E / E_base`` (shear moduli with ``G / G_base``) so the base's ratios are kept, since a
  tap calibration usually changes E while handbooks publish ratios.

Units at the door: library and part files give moduli in GPa and density in kg/m^3; every
object returned here holds SI values (Pa, kg/m^3).
"""

from __future__ import annotations

import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from functools import cache
from importlib import resources
from pathlib import Path
from types import MappingProxyType
from typing import Annotated, Any, Literal

from pydantic import (
    AfterValidator,
    BaseModel,
    ConfigDict,
    Discriminator,
    Field,
    Tag,
    ValidationError,
    model_validator,
)

from tonewright.errors import InputError, from_validation_error, read_text_input, union_tag
from tonewright.forward.geometry import Material
from tonewright.forward.orthotropic import Orthotropic as SolidMaterial
from tonewright.forward.orthotropic import OrthotropicConstants
from tonewright.forward.orthotropic import isotropic as solid_isotropic

__all__ = [
    "LibraryName",
    "MaterialEntry",
    "MaterialFile",
    "MaterialKind",
    "MaterialSpec",
    "MaterialTable",
    "isotropic_shear_modulus",
    "list_materials",
    "load_material",
    "load_material_file",
    "material_value",
    "resolve_material",
]

GPA = 1e9
DEFAULT_POISSON = 0.3
DEFAULT_LOSS_FACTOR = 0.01

MaterialKind = Literal["wood", "metal", "composite", "custom"]

# Plausible ranges catch unit slips (E typed in Pa or MPa, density in g/cm^3).
_E_GPA_RANGE = (0.1, 1500.0)
_G_GPA_RANGE = (0.01, 600.0)
_DENSITY_RANGE = (50.0, 25000.0)


def isotropic_shear_modulus(E: float, nu: float) -> float:
    """Shear modulus of an isotropic solid, ``G = E / (2 (1 + nu))``."""
    return E / (2.0 * (1.0 + nu))


@dataclass(frozen=True)
class MaterialSpec:
    """A resolved material, SI units.

    ``E`` (Pa) along the grain or axis, ``G`` (Pa) the beam's shear modulus (G_LT for wood),
    ``rho`` (kg/m^3), ``nu`` the beam's Poisson ratio, ``loss_factor`` (dimensionless),
    ``temp_coeff_cents_per_K`` the pitch change of a free bar per kelvin (None: unknown),
    ``orthotropic`` the full set for wood, ``sources`` where each value comes from.
    """

    key: str
    name: str
    kind: MaterialKind
    E: float
    G: float
    rho: float
    nu: float
    loss_factor: float
    temp_coeff_cents_per_K: float | None = None
    orthotropic: OrthotropicConstants | None = None
    sources: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))
    note: str = ""

    def to_beam(self) -> Material:
        """The beam model's material (all SI). For wood (quarter-sawn, thickness along T) the
        width-plane shear is G_LR: ``shear_ratio`` = G_LR / G_LT, the handbook ratio."""
        o = self.orthotropic
        ratio = o.G_LR / o.G_LT if o is not None else 1.0
        return Material(
            E=self.E,
            G=self.G,
            rho=self.rho,
            nu=self.nu,
            loss_factor=self.loss_factor,
            shear_ratio=ratio,
        )

    def to_solid(self, thickness_axis: str = "T") -> SolidMaterial:
        """The 2D/3D models' material: the full orthotropic set for wood, isotropic for metals.

        ``thickness_axis`` "T" (quarter-sawn, rings vertical seen end-on) or "R" (flat-sawn).
        """
        o = self.orthotropic
        if o is not None:
            return SolidMaterial.from_constants(o, self.rho, thickness_axis)
        if (
            self.kind in ("metal", "isotropic")
            or abs(self.G - isotropic_shear_modulus(self.E, self.nu)) <= 0.02 * self.G
        ):
            return solid_isotropic(self.E, self.nu, self.rho)
        raise InputError(
            f"material {self.name!r} has no orthotropic data for the 2D/3D models: "
            "give base = '<library wood>' in [material] so its ratios can be used"
        )


# ---------------------------------------------------------------------------------------------
# Library file


class _Sourced(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)
    value: float = Field(allow_inf_nan=False)
    source: str = Field(min_length=3)


_WOOD_KEYS = ("E_L", "E_R", "E_T", "G_LR", "G_LT", "G_RT", "nu_LR", "nu_LT", "nu_RT")


class _LibraryEntry(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)
    name: str = Field(min_length=1)
    kind: Literal["wood", "metal", "composite"]
    note: str = ""
    density: _Sourced
    loss_factor: _Sourced
    temp_coeff_cents_per_K: _Sourced
    E: _Sourced | None = None
    G: _Sourced | None = None
    nu: _Sourced | None = None
    E_L: _Sourced | None = None
    E_R: _Sourced | None = None
    E_T: _Sourced | None = None
    G_LR: _Sourced | None = None
    G_LT: _Sourced | None = None
    G_RT: _Sourced | None = None
    nu_LR: _Sourced | None = None
    nu_LT: _Sourced | None = None
    nu_RT: _Sourced | None = None
    modulus_temp_coeff_per_K: _Sourced | None = None
    thermal_expansion_per_K: _Sourced | None = None

    @model_validator(mode="after")
    def _keys_fit_kind(self) -> _LibraryEntry:
        if self.kind == "wood":
            missing = [k for k in _WOOD_KEYS if getattr(self, k) is None]
            stray = [k for k in ("E", "G", "nu") if getattr(self, k) is not None]
            if missing or stray:
                raise ValueError(f"wood needs {', '.join(_WOOD_KEYS)} and not E, G, nu")
        else:
            stray = [k for k in _WOOD_KEYS if getattr(self, k) is not None]
            if self.E is None or self.nu is None or stray:
                raise ValueError(f"{self.kind} needs E and nu (G optional), not {stray}")
        return self

    def to_spec(self, key: str) -> MaterialSpec:
        values = {k: v.value for k, v in self if isinstance(v, _Sourced)}
        sources = MappingProxyType({k: v.source for k, v in self if isinstance(v, _Sourced)})
        ortho = None
        if self.kind == "wood":
            ortho = OrthotropicConstants(
                **{k: values[k] * (GPA if k[0] in "EG" else 1.0) for k in _WOOD_KEYS}
            )
            E, G, nu = ortho.E_L, ortho.G_LT, ortho.nu_LT
        else:
            E, nu = values["E"] * GPA, values["nu"]
            G = values["G"] * GPA if "G" in values else isotropic_shear_modulus(E, nu)
        return MaterialSpec(
            key=key,
            name=self.name,
            kind=self.kind,
            E=E,
            G=G,
            rho=values["density"],
            nu=nu,
            loss_factor=values["loss_factor"],
            temp_coeff_cents_per_K=values["temp_coeff_cents_per_K"],
            orthotropic=ortho,
            sources=sources,
            note=self.note,
        )


@cache
def _library() -> Mapping[str, MaterialSpec]:
    text = resources.files("tonewright").joinpath("data", "materials.toml").read_text("utf-8")
    raw = tomllib.loads(text)
    specs = {}
    for key, entry in raw.items():
        try:
            specs[key] = _LibraryEntry.model_validate(entry).to_spec(key)
        except ValidationError as exc:  # a broken shipped file is a bug, not user input
            raise RuntimeError(f"materials.toml entry {key!r}: {exc}") from exc
    return MappingProxyType(specs)


def list_materials() -> list[str]:
    """Names of the library materials, sorted."""
    return sorted(_library())


def load_material(name: str) -> MaterialSpec:
    """A library material by name, e.g. ``"sugar-maple"``."""
    library = _library()
    if name not in library:
        raise InputError(
            f"material {name!r} is not in the library; available: {', '.join(sorted(library))}"
        )
    return library[name]


# ---------------------------------------------------------------------------------------------
# Inline tables and calibration files


def _in_range(name: str, value: float | None, bounds: tuple[float, float], unit: str) -> None:
    lo, hi = bounds
    if value is not None and not lo <= value <= hi:
        raise ValueError(f"{name} = {value} is outside {lo}..{hi} {unit}; {name} is in {unit}")


_ORTHOTROPIC_KEYS = ("E_L", "E_R", "E_T", "G_LR", "G_LT", "G_RT", "nu_LR", "nu_LT", "nu_RT")


class MaterialTable(BaseModel):
    """An inline ``[material]`` table of a part file (moduli in GPa, density in kg/m^3).

    Without ``base``: ``E`` and ``density`` are required; ``poisson`` defaults to 0.3; a missing
    ``G`` is the isotropic ``E / (2 (1 + poisson))`` (fine for metals, wrong for wood: give G).
    With ``base`` (a library name): missing values come from the base, missing moduli scaled to
    keep the base's ratios (see the module docstring); ``poisson`` then sets the beam's Poisson
    ratio only, the base's orthotropic Poisson ratios stay.
    Or the full orthotropic set of a wood: ``E_L, E_R, E_T, G_LR, G_LT, G_RT`` (GPa) and
    ``nu_LR, nu_LT, nu_RT`` with ``density`` (and no ``E``, ``G``, ``poisson`` or ``base``);
    which of R and T lies through the bar's thickness is ``[design] thickness_axis``.
    """

    model_config = ConfigDict(extra="forbid", frozen=True)

    E: float | None = Field(default=None, gt=0, allow_inf_nan=False)
    G: float | None = Field(default=None, gt=0, allow_inf_nan=False)
    density: float | None = Field(default=None, gt=0, allow_inf_nan=False)
    poisson: float | None = Field(default=None, gt=-1.0, lt=0.5)
    loss_factor: float | None = Field(default=None, ge=0.0, lt=1.0)
    base: str | None = None
    # the full orthotropic set of a wood (GPa; Poisson ratios in the Wood Handbook convention)
    E_L: float | None = Field(default=None, gt=0, allow_inf_nan=False)
    E_R: float | None = Field(default=None, gt=0, allow_inf_nan=False)
    E_T: float | None = Field(default=None, gt=0, allow_inf_nan=False)
    G_LR: float | None = Field(default=None, gt=0, allow_inf_nan=False)
    G_LT: float | None = Field(default=None, gt=0, allow_inf_nan=False)
    G_RT: float | None = Field(default=None, gt=0, allow_inf_nan=False)
    nu_LR: float | None = Field(default=None, gt=-1.0, lt=1.5, allow_inf_nan=False)
    nu_LT: float | None = Field(default=None, gt=-1.0, lt=1.5, allow_inf_nan=False)
    nu_RT: float | None = Field(default=None, gt=-1.0, lt=1.5, allow_inf_nan=False)

    @model_validator(mode="after")
    def _complete(self) -> MaterialTable:
        _in_range("E", self.E, _E_GPA_RANGE, "GPa")
        _in_range("G", self.G, _G_GPA_RANGE, "GPa")
        _in_range("density", self.density, _DENSITY_RANGE, "kg/m^3")
        given = [k for k in _ORTHOTROPIC_KEYS if getattr(self, k) is not None]
        if given:
            missing = [k for k in _ORTHOTROPIC_KEYS if k not in given]
            if missing:
                raise ValueError(
                    f"the orthotropic set needs all nine constants; missing {', '.join(missing)}"
                )
            for k in ("E_L", "E_R", "E_T"):
                _in_range(k, getattr(self, k), _E_GPA_RANGE, "GPa")
            for k in ("G_LR", "G_LT", "G_RT"):
                _in_range(k, getattr(self, k), _G_GPA_RANGE, "GPa")
            clash = [k for k in ("E", "G", "poisson", "base") if getattr(self, k) is not None]
            if clash:
                raise ValueError(
                    f"give either the nine orthotropic constants or {', '.join(clash)}, not both"
                    " (E is E_L, the beam's G is G_LT)"
                )
            if self.density is None:
                raise ValueError("give density (kg/m^3) with the orthotropic constants")
            try:
                self.orthotropic_constants()
            except ValueError as exc:
                raise ValueError(str(exc).removeprefix("material ")) from None
            return self
        if self.base is None:
            missing = [k for k in ("E", "density") if getattr(self, k) is None]
            if missing:
                raise ValueError(f"give {' and '.join(missing)}, or a library 'base' to fill them")
        elif self.base not in _library():
            raise ValueError(
                f"base {self.base!r} is not in the library; "
                f"available: {', '.join(list_materials())}"
            )
        return self

    def orthotropic_constants(self) -> OrthotropicConstants | None:
        """The nine constants in SI (Pa), or None when the table does not give them."""
        if self.E_L is None:
            return None
        return OrthotropicConstants(
            *(getattr(self, k) * GPA for k in _ORTHOTROPIC_KEYS[:6]),
            *(getattr(self, k) for k in _ORTHOTROPIC_KEYS[6:]),
        )

    def to_spec(self, key: str = "inline", name: str | None = None) -> MaterialSpec:
        """Resolve against the base (if any) into SI values."""
        ortho = self.orthotropic_constants()
        if ortho is not None:
            return MaterialSpec(
                key=key,
                name=name or "custom wood",
                kind="wood",
                E=ortho.E_L,
                G=ortho.G_LT,  # vertical bending of a quarter-sawn bar shears in the LT plane
                rho=self.density,
                nu=ortho.nu_LT,
                loss_factor=DEFAULT_LOSS_FACTOR if self.loss_factor is None else self.loss_factor,
                orthotropic=ortho,
                sources=MappingProxyType(
                    {k: "given in the part or material file" for k in _ORTHOTROPIC_KEYS}
                ),
            )
        if self.base is None:
            E = self.E * GPA
            nu = DEFAULT_POISSON if self.poisson is None else self.poisson
            G = isotropic_shear_modulus(E, nu) if self.G is None else self.G * GPA
            return MaterialSpec(
                key=key,
                name=name or "custom material",
                kind="custom",
                E=E,
                G=G,
                rho=self.density,
                nu=nu,
                loss_factor=DEFAULT_LOSS_FACTOR if self.loss_factor is None else self.loss_factor,
                sources=MappingProxyType({"G": "isotropic E/(2(1+nu))"} if self.G is None else {}),
            )
        base = load_material(self.base)
        E = base.E if self.E is None else self.E * GPA
        G = base.G * (E / base.E) if self.G is None else self.G * GPA
        ortho = base.orthotropic.scaled(E / base.E, G / base.G) if base.orthotropic else None
        overridden = {
            k: "given in the part or material file"
            for k in ("E", "G", "density", "poisson", "loss_factor")
            if getattr(self, k) is not None
        }
        return replace(
            base,
            key=key,
            name=name or (f"{base.name} (adjusted)" if overridden else base.name),
            E=E,
            G=G,
            rho=base.rho if self.density is None else self.density,
            nu=base.nu if self.poisson is None else self.poisson,
            loss_factor=base.loss_factor if self.loss_factor is None else self.loss_factor,
            orthotropic=ortho,
            sources=MappingProxyType({**base.sources, **overridden}),
        )

    def to_beam(self) -> Material:
        return self.to_spec().to_beam()


class MaterialFile(MaterialTable):
    """A material TOML file (e.g. written by calibration): a table's fields plus name and note."""

    name: str = Field(min_length=1)
    note: str = ""


def load_material_file(path: str | Path) -> MaterialSpec:
    """A material file: top-level keys, or the same keys under a single ``[material]`` table."""
    path = Path(path)
    try:
        raw: dict[str, Any] = tomllib.loads(read_text_input(path))
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path}: not valid TOML ({exc})") from None
    if set(raw) == {"material"} and isinstance(raw["material"], dict):
        raw = raw["material"]
    try:
        model = MaterialFile.model_validate(raw)
    except ValidationError as exc:
        raise from_validation_error(exc, str(path)) from None
    spec = model.to_spec(key=path.stem, name=model.name)
    return replace(spec, note=model.note or spec.note)


def _library_name(name: str) -> str:
    load_material(name)  # InputError (a ValueError) names the library's materials
    return name


LibraryName = Annotated[str, AfterValidator(_library_name)]
"""A material of the shipped library, checked at the door."""


def _looks_like_path(text: str) -> bool:
    return text.endswith(".toml") or "/" in text or "\\" in text


def _entry_kind(value: Any) -> str | None:
    if isinstance(value, Mapping | MaterialTable):
        return union_tag("table")
    if isinstance(value, Path):
        return union_tag("file")
    if isinstance(value, str):
        return union_tag("file") if _looks_like_path(value) else union_tag("library")
    return None


MaterialEntry = Annotated[
    Annotated[LibraryName, Tag(union_tag("library"))]
    | Annotated[Path, Tag(union_tag("file"))]
    | Annotated[MaterialTable, Tag(union_tag("table"))],
    Discriminator(
        _entry_kind,
        custom_error_type="material_entry",
        custom_error_message="expected a library name, a material file (.toml) or a table",
    ),
]
"""A part file's ``material``: a library name (str), a material file (Path, ending in .toml
or holding a folder separator) or an inline table (MaterialTable)."""


def material_value(entry: str | Path | MaterialTable) -> str | dict[str, Any]:
    """The entry as written to a part file (TOML or JSON)."""
    if isinstance(entry, MaterialTable):
        return entry.model_dump(exclude_none=True)
    return str(entry)


def resolve_material(
    value: str | Path | MaterialTable | Mapping[str, Any], where: str = "material"
) -> MaterialSpec:
    """A part file's material entry: a library name, a path to a material file, or a table."""
    if isinstance(value, MaterialTable):
        return value.to_spec()
    if isinstance(value, Path):
        return load_material_file(value)
    if isinstance(value, str):
        if _looks_like_path(value):
            return load_material_file(value)
        return load_material(value)
    if isinstance(value, Mapping):
        try:
            return MaterialTable.model_validate(dict(value)).to_spec()
        except ValidationError as exc:
            raise from_validation_error(exc, where) from None
    raise InputError(f"{where}: expected a library name or a table, got {value!r}")
