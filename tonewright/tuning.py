"""Tuning targets: library profiles, the ``[target]`` table of a part file, and resolution to Hz.

A *profile* lists the partials to tune as ratios to the fundamental (fundamental = 1) or as
cents above it, each with a tolerance in cents and a mode family (``bending`` by default, or
``torsion``). The ``order`` of a partial is its 1-based rank within its family in the list:
``[1, 4, 10]`` are bending modes 1, 2 and 3.

Resolution (``resolve``) turns a target into frequencies:

1. nominal fundamental ``f_nom``: a note name in equal temperament referred to ``a4_hz``
   (ISO 16: A4 = 440 Hz by default), or a number in Hz, or the first of ``notes``;
2. octave stretch (``tonewright.acoustics.pitch.stretch_cents``, this project's rule):
   ``s * max(0, log2(f_nom / f_from))`` cents, ``f_from`` the note ``stretch_from``;
3. temperature: a part meant to sound at ``temperature_c`` but modelled with material data for
   ``reference_temperature_c`` is aimed ``-k (temperature_c - reference_temperature_c)`` cents
   off, ``k`` the material's temperature coefficient of pitch (cents/K, negative: warmer is
   flatter), so that it lands on pitch when played at ``temperature_c``;
4. ``f_0 = f_nom * 2^((stretch + temperature) / 1200)`` and partial ``i`` at ``ratio_i * f_0``:
   the whole bar moves, the ratios between partials stay.

Strike targets (profile ``kind = "strike"``, for chimes and tubular bells) resolve to a single
partial of family ``"strike"``: the optimizer computes the strike note with
``tonewright.acoustics.pitch.strike_note_hz`` from the part's free-free bending modes 1..6 and
drives it to that partial's frequency; no bending mode is itself a target.
"""

from __future__ import annotations

import itertools
import math
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass
from functools import cache
from pathlib import Path
from typing import Any, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, ValidationError, model_validator

from tonewright.acoustics.pitch import (
    cents_to_ratio,
    note_to_hz,
    stretch_cents,
    temperature_correction_cents,
)
from tonewright.errors import InputError, from_validation_error, read_text_input
from tonewright.targets import targets_dir

__all__ = [
    "DEFAULT_TOLERANCE_CENTS",
    "Family",
    "ResolvedTarget",
    "TargetPartial",
    "TargetProfile",
    "TargetSpec",
    "list_targets",
    "load_target",
    "parse_target",
    "resolve",
]

Family = Literal["bending", "torsion"]
ProfileKind = Literal["partials", "strike"]

DEFAULT_TOLERANCE_CENTS = (1.0, 3.0)
"""Fundamental, then every overtone, when no tolerance is given (common practice, no source)."""

_RATIO_ONE_TOL = 1e-9
_HZ_RE = re.compile(r"^\s*([0-9]*\.?[0-9]+(?:[eE][+-]?[0-9]+)?)\s*hz\s*$", re.IGNORECASE)


def _default_tolerances(n: int) -> list[float]:
    first, rest = DEFAULT_TOLERANCE_CENTS
    return [first] + [rest] * (n - 1)


def _check_partials(ratios: list[float], families: list[str], what: str) -> None:
    """Positive, fundamental first at exactly 1, strictly increasing within each family."""
    if not ratios:
        raise ValueError(f"{what} is empty; give at least the fundamental")
    bad = [r for r in ratios if not (math.isfinite(r) and r > 0)]
    if bad:
        raise ValueError(f"{what} must be positive and finite, got {bad[0]!r}")
    if abs(ratios[0] - 1.0) > _RATIO_ONE_TOL or families[0] != "bending":
        raise ValueError(
            f"{what} must start with the bending fundamental (ratio 1 / 0 cents), got {ratios[0]!r}"
        )
    for family in set(families):
        seq = [r for r, f in zip(ratios, families, strict=True) if f == family]
        if any(b <= a for a, b in itertools.pairwise(seq)):
            raise ValueError(f"{what} of family {family!r} must increase strictly, got {seq}")


def _check_lengths(name: str, values: list[Any] | None, n: int) -> None:
    if values is not None and len(values) != n:
        raise ValueError(f"{name} has {len(values)} entries, but there are {n} partials")


class TargetProfile(BaseModel):
    """One library profile file (see the module docstring)."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    name: str = Field(min_length=1)
    description: str = Field(min_length=1)
    partials: list[float] | None = None
    cents: list[float] | None = None
    tolerance_cents: list[float]
    families: list[Family] | None = None
    source: str = Field(min_length=3)
    kind: ProfileKind = "partials"

    @model_validator(mode="after")
    def _consistent(self) -> TargetProfile:
        if (self.partials is None) == (self.cents is None):
            raise ValueError("give exactly one of 'partials' (ratios) and 'cents'")
        n = len(self.ratios)
        _check_lengths("families", self.families, n)
        _check_lengths("tolerance_cents", self.tolerance_cents, n)
        if any(not (math.isfinite(t) and t > 0) for t in self.tolerance_cents):
            raise ValueError(f"tolerance_cents must be positive, got {self.tolerance_cents}")
        _check_partials(list(self.ratios), list(self.family_list), "partials")
        if self.kind == "strike" and (n != 1 or self.families is not None):
            raise ValueError("a strike profile has exactly one partial, [1], and no families")
        return self

    @property
    def ratios(self) -> tuple[float, ...]:
        """Ratios to the fundamental, whichever way the file gave them."""
        if self.partials is not None:
            return tuple(float(r) for r in self.partials)
        return tuple(float(r) for r in cents_to_ratio(self.cents or []))

    @property
    def family_list(self) -> tuple[str, ...]:
        return tuple(self.families or ["bending"] * len(self.ratios))


def list_targets() -> list[str]:
    """Names of the library profiles, sorted."""
    return sorted(p.stem for p in targets_dir().glob("*.toml"))


def _is_path(name_or_path: str | Path) -> bool:
    text = str(name_or_path)
    return isinstance(name_or_path, Path) or text.endswith(".toml") or "/" in text or "\\" in text


@cache
def _read_profile(path: Path) -> TargetProfile:
    try:
        raw = tomllib.loads(read_text_input(path))
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path}: not valid TOML ({exc})") from None
    try:
        return TargetProfile.model_validate(raw)
    except ValidationError as exc:
        raise from_validation_error(exc, str(path)) from None


def load_target(name_or_path: str | Path) -> TargetProfile:
    """A library profile by name (``"marimba-1-4-10"``) or a profile file by path."""
    if _is_path(name_or_path):
        return _read_profile(Path(name_or_path).resolve())
    path = targets_dir() / f"{name_or_path}.toml"
    if not path.is_file():
        raise InputError(
            f"target profile {name_or_path!r} is not in the library; "
            f"available: {', '.join(list_targets())}"
        )
    return _read_profile(path)


class TargetSpec(BaseModel):
    """The ``[target]`` table of a part file.

    ``fundamental``: note name ("F4") or Hz (not needed with ``notes``); ``a4_hz``: pitch
    standard; exactly one of ``profile`` (library name or path), ``ratios``, ``cents`` or
    ``notes``; ``families`` only with the inline forms; ``tolerance_cents`` a scalar for all
    partials or one per partial; ``weights`` one per partial (default 1); ``temperature_c`` the
    temperature the pitch is meant at; ``stretch_cents_per_octave`` above ``stretch_from``.
    """

    model_config = ConfigDict(extra="forbid", frozen=True)

    fundamental: str | float | None = None
    a4_hz: float = Field(default=440.0, ge=380.0, le=500.0)
    profile: str | None = None
    ratios: list[float] | None = None
    cents: list[float] | None = None
    notes: list[str] | None = None
    families: list[Family] | None = None
    tolerance_cents: float | list[float] | None = None
    weights: list[float] | None = None
    temperature_c: float | None = Field(default=None, ge=-40.0, le=60.0)
    stretch_cents_per_octave: float = Field(default=0.0, ge=-50.0, le=50.0)
    stretch_from: str = "C6"

    @model_validator(mode="before")
    @classmethod
    def _no_bools(cls, data: Any) -> Any:
        if isinstance(data, Mapping) and isinstance(data.get("fundamental"), bool):
            raise ValueError(
                f"fundamental must be a note name like 'F4' or a frequency in Hz, "
                f"got {data['fundamental']!r}"
            )
        return data

    @model_validator(mode="after")
    def _consistent(self) -> TargetSpec:
        given = [k for k in ("profile", "ratios", "cents", "notes") if getattr(self, k) is not None]
        if len(given) != 1:
            raise ValueError(
                "give exactly one of profile, ratios, cents, notes"
                + (f" (got {', '.join(given)})" if given else "")
            )
        if self.profile is not None and self.families is not None:
            raise ValueError(
                "families come from the profile; give them only with ratios/cents/notes"
            )
        note_to_hz(self.stretch_from, self.a4_hz)  # raises on a bad name
        if self.notes is None:
            if self.fundamental is None:
                raise ValueError("fundamental is required: a note name like 'F4' or Hz")
        f_nom = self.nominal_fundamental_hz()
        ratios, families = self._ratios_families()
        n = len(ratios)
        _check_lengths("families", self.families, n)
        _check_partials(ratios, families, given[0])
        if isinstance(self.tolerance_cents, list):
            _check_lengths("tolerance_cents", self.tolerance_cents, n)
        tolerances = self._tolerances(n)
        if any(not (math.isfinite(t) and t > 0) for t in tolerances):
            raise ValueError(f"tolerance_cents must be positive, got {self.tolerance_cents}")
        _check_lengths("weights", self.weights, n)
        if self.weights is not None and (
            any(not (math.isfinite(w) and w >= 0) for w in self.weights) or max(self.weights) <= 0
        ):
            raise ValueError(f"weights must be >= 0 with at least one > 0, got {self.weights}")
        if self.notes is not None and self.fundamental is not None:
            given_f = self._fundamental_hz()
            if abs(1200 * math.log2(given_f / f_nom)) > 0.5:
                raise ValueError(
                    f"fundamental {self.fundamental!r} differs from the first note "
                    f"{self.notes[0]!r}"
                )
        return self

    # -- helpers used by the validator and by resolve --------------------------------------

    def _fundamental_hz(self) -> float:
        value = self.fundamental
        if isinstance(value, str):
            hz = _HZ_RE.match(value)
            if hz is None:
                return note_to_hz(value, self.a4_hz)
            value = float(hz[1])
        if value is None or not (math.isfinite(value) and value > 0):
            raise ValueError(
                f"fundamental must be a note name or a positive frequency, got {value!r}"
            )
        return float(value)

    def nominal_fundamental_hz(self) -> float:
        """Fundamental before stretch and temperature corrections, Hz."""
        if self.notes is not None:
            return note_to_hz(self.notes[0], self.a4_hz)
        return self._fundamental_hz()

    def _profile(self) -> TargetProfile | None:
        return None if self.profile is None else load_target(self.profile)

    def profile_kind(self) -> ProfileKind:
        profile = self._profile()
        return "partials" if profile is None else profile.kind

    def _ratios_families(self) -> tuple[list[float], list[str]]:
        profile = self._profile()
        if profile is not None:
            return list(profile.ratios), list(profile.family_list)
        if self.ratios is not None:
            ratios = [float(r) for r in self.ratios]
        elif self.cents is not None:
            ratios = [float(r) for r in cents_to_ratio(self.cents)]
        else:
            f = [note_to_hz(name, self.a4_hz) for name in self.notes or []]
            ratios = [fi / f[0] for fi in f]
        return ratios, list(self.families or ["bending"] * len(ratios))

    def _tolerances(self, n: int) -> list[float]:
        if isinstance(self.tolerance_cents, int | float):
            return [float(self.tolerance_cents)] * n
        if isinstance(self.tolerance_cents, list):
            return [float(t) for t in self.tolerance_cents]
        profile = self._profile()
        return list(profile.tolerance_cents) if profile is not None else _default_tolerances(n)


def parse_target(value: Mapping[str, Any], where: str = "target") -> TargetSpec:
    """A part file's ``[target]`` table; errors as one-line InputError naming the field."""
    if not isinstance(value, Mapping):
        raise InputError(f"{where}: expected a table, got {value!r}")
    try:
        return TargetSpec.model_validate(dict(value))
    except ValidationError as exc:
        raise from_validation_error(exc, where) from None


@dataclass(frozen=True)
class TargetPartial:
    """One resolved target partial.

    ``family`` "bending", "torsion" or "strike"; ``order`` its 1-based rank within the family;
    ``ratio`` to the fundamental; ``f_hz`` the target frequency.
    """

    family: Literal["bending", "torsion", "strike"]
    order: int
    ratio: float
    f_hz: float
    tolerance_cents: float
    weight: float


@dataclass(frozen=True)
class ResolvedTarget:
    """Target frequencies after pitch conventions (stretch, temperature), ready for an objective.

    For ``kind == "strike"`` there is one partial of family ``"strike"``: compare
    ``tonewright.acoustics.pitch.strike_note_hz(bending modes 1..6)`` with its ``f_hz``.
    """

    kind: ProfileKind
    name: str
    a4_hz: float
    nominal_fundamental_hz: float
    fundamental_hz: float
    stretch_cents: float
    temperature_cents: float
    partials: tuple[TargetPartial, ...]

    @property
    def f_hz(self) -> np.ndarray:
        return np.array([p.f_hz for p in self.partials])

    @property
    def tolerance_cents(self) -> np.ndarray:
        return np.array([p.tolerance_cents for p in self.partials])

    @property
    def weights(self) -> np.ndarray:
        return np.array([p.weight for p in self.partials])

    def of_family(self, family: str) -> tuple[TargetPartial, ...]:
        """The partials of one family, in order."""
        return tuple(p for p in self.partials if p.family == family)


def resolve(
    target: TargetSpec,
    material_temp_coeff: float | None = None,
    reference_temperature_c: float = 20.0,
) -> ResolvedTarget:
    """Target partial frequencies in Hz (see the module docstring for the conventions).

    ``material_temp_coeff``: the material's temperature coefficient of pitch in cents/K,
    needed only when the target sets ``temperature_c``; ``reference_temperature_c``: the
    temperature the material data (or the calibration tap) refer to.
    """
    f_nom = target.nominal_fundamental_hz()
    f_from = note_to_hz(target.stretch_from, target.a4_hz)
    stretch = float(stretch_cents(f_nom, target.stretch_cents_per_octave, f_from))
    temperature = 0.0
    if target.temperature_c is not None:
        if material_temp_coeff is None or not math.isfinite(material_temp_coeff):
            raise InputError(
                f"target.temperature_c = {target.temperature_c} needs the material's temperature "
                "coefficient of pitch (cents/K); use a library material or drop temperature_c"
            )
        delta_T = target.temperature_c - reference_temperature_c
        temperature = -float(temperature_correction_cents(delta_T, material_temp_coeff))
    f0 = f_nom * float(cents_to_ratio(stretch + temperature))

    ratios, families = target._ratios_families()
    n = len(ratios)
    tolerances = target._tolerances(n)
    weights = [float(w) for w in target.weights] if target.weights else [1.0] * n
    kind = target.profile_kind()
    counts: dict[str, int] = {}
    partials = []
    for ratio, family, tol, weight in zip(ratios, families, tolerances, weights, strict=True):
        family_out = "strike" if kind == "strike" else family
        counts[family_out] = counts.get(family_out, 0) + 1
        partials.append(
            TargetPartial(family_out, counts[family_out], ratio, f0 * ratio, tol, weight)
        )
    return ResolvedTarget(
        kind=kind,
        name=target.profile or "inline",
        a4_hz=target.a4_hz,
        nominal_fundamental_hz=f_nom,
        fundamental_hz=f0,
        stretch_cents=stretch,
        temperature_cents=temperature,
        partials=tuple(partials),
    )
