"""Planning a whole instrument: notes, blank dimensions, targets per bar, blanks and resonators.

An *instrument file* (TOML, validated here) names a range of notes, a pitch standard, the
target profile by sub-range, one material, the blank dimensions and the design limits shared by
every bar. :func:`plan_instrument` turns it into one :class:`BarPlan` per note: a complete part
table (``[bar]``, ``[target]``, ``[design]``) that ``tonewright design`` would accept as is.

Equations
---------
- Notes are numbered by MIDI number ``m`` (A4 = 69) in twelve-tone equal temperament, so
  ``log2 f = log2 a4 + (m - 69) / 12``: a straight line in ``m`` is a straight line in
  log-frequency.
- Dimensions from anchors (:func:`interpolate_log_frequency`): between two anchors at ``m_a``
  and ``m_b`` a dimension ``d`` follows a power law of frequency, i.e. ``log d`` is linear in
  ``log f`` (equivalently in ``m``):
  ``log d(m) = log d_a + (m - m_a) / (m_b - m_a) * (log d_b - log d_a)``.
  A uniform free-free bar has ``f ~ h / L^2`` (Euler-Bernoulli), so a length law ``L ~ f^-1/2``
  at constant thickness is exactly such a power law: halving every 24 semitones.
- Dimensions from stock (:class:`StockTable`): ``optimizer.blanks.blank_schedule`` chooses a
  thickness and a width from the stock for every bar and lengths on a smooth curve, within
  the keyboard's rules (never thicker or wider toward the treble), and says why.
- Dimensions from a scaling rule (:func:`scaled_dimension`): ``d(m) = d_0 2^(-(m - m_0) / N)``,
  ``N`` the number of semitones over which ``d`` halves (no ``N``: constant).
- Blanks (:func:`blank_volume_m3`): rough sizes are the finished blank plus the trimming
  allowances; volume ``V = (L + a_L)(W + a_W)(T + a_T)`` and mass ``rho V``.
- Quarter-wave resonator (:func:`quarter_wave_length_m`): a tube stopped at the bottom resonates
  at ``f = c / (4 (L + delta))``, so ``L = c / (4 f) - delta``; the end correction of the open
  end is ``delta = 0.6133 r`` unflanged (Levine, H. & Schwinger, J. (1948), "On the radiation of
  sound from an unflanged circular pipe", Phys. Rev. 73(4), 383-406; the low-frequency limit,
  ka -> 0) or ``delta = 0.8216 r`` with an infinite flange (Norris, A.N. & Sheng, I.C. (1989),
  "Acoustic radiation from a circular pipe with an infinite flange", J. Sound Vib. 135(1),
  85-93, from memory). Speed of sound in air ``c = 331.3 + 0.606 T`` m/s, ``T`` in degrees C
  (the usual linearisation of ``c = 331.3 sqrt(1 + T / 273.15)`` about 0 C).

The file (lengths in mm unless a unit is written; notes in scientific pitch notation)::

    title = "Workshop marimba"
    lowest = "C4"                 # the range, both ends included
    highest = "C6"
    a4_hz = 440                   # optional: stretch_cents_per_octave, stretch_from
    material = "honduras-rosewood"   # library name, material file, or inline table
    attempts = 3                  # seeds tried per bar until one meets its target
    max_narrowing = 0.15          # share of its planned width a bar may lose to keep
                                  # torsion and lateral modes out of the partials' bands
    [[profile]]                   # target profile by sub-range; together they cover the range
    from = "C4"
    to = "B4"
    profile = "marimba-1-4-10"
    [[anchor]]                    # two or more, spanning the range ...
    note = "C4"
    length = 380
    width = 60
    thickness = 22
    [stock]                       # ... or neither: the tool sizes the blanks from stock
    thicknesses = [20, 22, 25]    # or thickness_range = [18, 26] (thickness_step = 1)
    width_range = [30, 65]        # or widths = [35, 40, 45] (width_step = 2.5 for a range)
    length_range = [150, 600]     # the lengths the keyboard may use
    max_width_step = 5            # optional: largest change between neighbouring bars
    max_thickness_step = 3
    share_thickness = "octave"    # optional: bars of one octave share a thickness
    [scaling]                     # ... or a rule: sizes at one note, and the
    note = "C4"                   # semitones over which each halves (none: constant)
    length = 380
    width = 60
    thickness = 22
    length_halves_every = 24
    [design]                      # limits shared by every bar: the part file's [design]
    end_keep = 15                 # table (free_length and length_range excluded)
    [[bar]]                       # optional per-note overrides: sizes, profile, design
    note = "A4"
    design = { min_thickness = 6 }
    [blanks]                      # trimming allowances for the cut list
    length_allowance = 10
    [resonators]                  # optional: stopped tubes tuned to each fundamental
    inner_diameter = [["C4", 50], ["C6", 30]]   # or one diameter
    temperature_c = 22
    end = "unflanged"             # or "flanged"

The numerical kernels take and return plain arrays; the pydantic models only validate files.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Annotated, Any, Literal

import numpy as np
from numpy.typing import ArrayLike
from pydantic import (
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Field,
    ValidationError,
    field_validator,
    model_validator,
)

from tonewright.acoustics.pitch import hz_to_note, note_to_midi
from tonewright.errors import InputError, from_validation_error, read_text_input
from tonewright.materials import MaterialSpec, resolve_material
from tonewright.optimizer.blanks import BarNeeds, BlankChoice, StockRules, blank_schedule
from tonewright.partfile import DesignTable, parse_part
from tonewright.tuning import ResolvedTarget, resolve
from tonewright.units import Length, PositionLength

__all__ = [
    "END_CORRECTION",
    "AnchorTable",
    "BarOverride",
    "BarPlan",
    "BlanksTable",
    "InstrumentFile",
    "InstrumentPlan",
    "NoteName",
    "ProfileRange",
    "ResonatorPlan",
    "ResonatorsTable",
    "ScalingTable",
    "StockTable",
    "blank_volume_m3",
    "end_correction_m",
    "interpolate_log_frequency",
    "load_instrument",
    "midi_to_note",
    "parse_instrument",
    "plan_instrument",
    "quarter_wave_length_m",
    "scaled_dimension",
    "speed_of_sound_m_s",
]

END_CORRECTION: Mapping[str, float] = {"unflanged": 0.6133, "flanged": 0.8216}
"""End correction of an open pipe end as a multiple of the inner radius (see module docstring)."""

MAX_BARS = 120  # far beyond any mallet instrument; catches a range typed the wrong way round


# ---------------------------------------------------------------------------------------------
# Numerical kernels (pure, vectorised)


def interpolate_log_frequency(
    anchor_midi: ArrayLike, anchor_values: ArrayLike, midi: ArrayLike
) -> np.ndarray:
    """Piecewise power law through anchors: ``log d`` linear in ``m`` between neighbours.

    ``anchor_midi`` strictly increasing; every ``midi`` must lie within the anchors (the caller
    checks, so no extrapolation happens here).
    """
    m_a = np.asarray(anchor_midi, float)
    log_d = np.log(np.asarray(anchor_values, float))
    return np.exp(np.interp(np.asarray(midi, float), m_a, log_d))


def scaled_dimension(
    d0: float, midi0: float, halves_every: float | None, midi: ArrayLike
) -> np.ndarray:
    """``d0 * 2 ** (-(m - m0) / N)``; ``N = None`` keeps the dimension constant."""
    m = np.asarray(midi, float)
    if halves_every is None:
        return np.full_like(m, float(d0))
    return float(d0) * 2.0 ** (-(m - float(midi0)) / float(halves_every))


def speed_of_sound_m_s(temperature_c: ArrayLike) -> np.ndarray:
    """Speed of sound in air, ``331.3 + 0.606 T`` m/s (T in degrees C)."""
    return 331.3 + 0.606 * np.asarray(temperature_c, float)


def end_correction_m(radius_m: ArrayLike, end: str = "unflanged") -> np.ndarray:
    """End correction of the open end: 0.6133 r unflanged, 0.8216 r flanged."""
    return END_CORRECTION[end] * np.asarray(radius_m, float)


def quarter_wave_length_m(
    f_hz: ArrayLike, radius_m: ArrayLike, temperature_c: float = 20.0, end: str = "unflanged"
) -> np.ndarray:
    """Length of a stopped tube resonating at ``f_hz``: ``c / (4 f) - delta``."""
    c = speed_of_sound_m_s(temperature_c)
    return c / (4.0 * np.asarray(f_hz, float)) - end_correction_m(radius_m, end)


def blank_volume_m3(
    length_m: ArrayLike, width_m: ArrayLike, thickness_m: ArrayLike, allowance_m=(0.0, 0.0, 0.0)
) -> np.ndarray:
    """Volume of rough blanks: each size plus its trimming allowance, multiplied out."""
    a_L, a_W, a_T = allowance_m
    return (
        (np.asarray(length_m, float) + a_L)
        * (np.asarray(width_m, float) + a_W)
        * (np.asarray(thickness_m, float) + a_T)
    )


def midi_to_note(midi: int, a4_hz: float = 440.0) -> str:
    """The note name (sharps) of a MIDI number: 60 -> 'C4'."""
    return hz_to_note(a4_hz * 2.0 ** ((midi - 69) / 12.0), a4_hz)[0]


# ---------------------------------------------------------------------------------------------
# The instrument file

_FROZEN = ConfigDict(extra="forbid", frozen=True)


def _note(value: Any) -> str:
    if not isinstance(value, str):
        raise ValueError(f"expected a note name like 'C4' or 'F#5', got {value!r}")
    try:
        note_to_midi(value)
    except InputError as exc:
        raise ValueError(str(exc)) from None
    return value.strip()


NoteName = Annotated[str, BeforeValidator(_note)]
"""A note name such as 'C4', 'F#5' or 'Bb3' (checked at the door)."""


class ProfileRange(BaseModel):
    """``[[profile]]``: the target profile for the notes ``from`` .. ``to`` (inclusive)."""

    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)
    from_: NoteName = Field(alias="from")
    to: NoteName
    profile: str = Field(min_length=1)

    @model_validator(mode="after")
    def _order(self) -> ProfileRange:
        if note_to_midi(self.to) < note_to_midi(self.from_):
            raise ValueError(f"'from' {self.from_} lies above 'to' {self.to}")
        return self


class AnchorTable(BaseModel):
    """``[[anchor]]``: blank sizes at one note (lengths in mm unless a unit is written)."""

    model_config = _FROZEN
    note: NoteName
    length: Length
    width: Length
    thickness: Length


class ScalingTable(BaseModel):
    """``[scaling]``: sizes at one note and the semitones over which each halves."""

    model_config = _FROZEN
    note: NoteName
    length: Length
    width: Length
    thickness: Length
    length_halves_every: float = Field(gt=0, le=240, allow_inf_nan=False)
    width_halves_every: float | None = Field(default=None, gt=0, le=1000, allow_inf_nan=False)
    thickness_halves_every: float | None = Field(default=None, gt=0, le=1000, allow_inf_nan=False)


MAX_STOCK = 60  # stock sizes per dimension: the schedule solves every bar on each thickness


class StockTable(BaseModel):
    """``[stock]``: the sizes a maker can buy and the keyboard's rules (mm unless a unit is
    written). Thickness and width each as a list or as a range with a step."""

    model_config = _FROZEN
    thicknesses: tuple[Length, ...] | None = None
    thickness_range: tuple[Length, Length] | None = None
    thickness_step: Length = 0.001
    widths: tuple[Length, ...] | None = None
    width_range: tuple[Length, Length] | None = None
    width_step: Length = 0.0025
    length_range: tuple[Length, Length] = (0.100, 1.000)
    max_thickness_step: Length | None = None
    max_width_step: Length | None = None
    share_thickness: Literal["none", "octave"] = "none"

    @model_validator(mode="after")
    def _sizes(self) -> StockTable:
        for name in ("thickness", "width"):
            self.sizes(name)
        lo, hi = self.length_range
        if hi <= lo:
            raise ValueError("length_range: give [shortest, longest] with shortest < longest")
        return self

    def sizes(self, name: str) -> tuple[float, ...]:
        """The stock sizes of ``name`` ("thickness" or "width"), metres, ascending."""
        listed = self.thicknesses if name == "thickness" else self.widths
        span = getattr(self, f"{name}_range")
        if (listed is None) == (span is None):
            plural = "thicknesses" if name == "thickness" else "widths"
            raise ValueError(f"give {plural} = [...] or {name}_range = [min, max], not both")
        if listed is not None:
            values = sorted(set(listed))
        else:
            lo, hi = span
            if hi < lo:
                raise ValueError(f"{name}_range: give [min, max] with min <= max")
            step = getattr(self, f"{name}_step")
            values = list(np.round(np.arange(lo, hi + 1e-9, step), 7))  # 0.1 um: exact mm
        if not values or len(values) > MAX_STOCK:
            raise ValueError(f"{name}: give 1 to {MAX_STOCK} stock sizes (got {len(values)})")
        return tuple(float(v) for v in values)


class BarOverride(BaseModel):
    """``[[bar]]``: one note's own sizes, profile or design limits (merged over the shared)."""

    model_config = _FROZEN
    note: NoteName
    length: Length | None = None
    width: Length | None = None
    thickness: Length | None = None
    profile: str | None = None
    design: dict[str, Any] = Field(default_factory=dict)


class BlanksTable(BaseModel):
    """``[blanks]``: trimming allowances added to each finished blank size for the cut list."""

    model_config = _FROZEN
    length_allowance: PositionLength = 0.010  # common practice, no source: ends squared last
    width_allowance: PositionLength = 0.003  # common practice, no source: edges jointed
    thickness_allowance: PositionLength = 0.003  # common practice, no source: faces planed


class ResonatorsTable(BaseModel):
    """``[resonators]``: stopped tubes under the bars.

    ``inner_diameter``: one length for all tubes, or ``[[note, diameter], ...]`` anchors
    interpolated like the blank sizes; ``temperature_c`` the air temperature the instrument is
    played at; ``end`` the open end, ``"unflanged"`` or ``"flanged"``.
    """

    model_config = _FROZEN
    inner_diameter: Length | tuple[tuple[NoteName, Length], ...]
    temperature_c: float = Field(default=20.0, ge=-30.0, le=50.0, allow_inf_nan=False)
    end: Literal["unflanged", "flanged"] = "unflanged"

    @field_validator("inner_diameter", mode="before")
    @classmethod
    def _pairs(cls, v: Any) -> Any:
        if isinstance(v, list | tuple):
            if len(v) < 2 or any(not isinstance(p, list | tuple) or len(p) != 2 for p in v):
                raise ValueError("give one diameter, or two or more [note, diameter] pairs")
            return tuple(tuple(p) for p in v)
        return v


class InstrumentFile(BaseModel):
    """A whole instrument file (see the command's help for an example)."""

    model_config = ConfigDict(extra="forbid", frozen=True)
    title: str = "instrument"
    lowest: NoteName
    highest: NoteName
    a4_hz: float = Field(default=440.0, ge=380.0, le=500.0)
    stretch_cents_per_octave: float = Field(default=0.0, ge=-50.0, le=50.0)
    stretch_from: NoteName = "C6"
    material: str | dict[str, Any]
    profile: tuple[ProfileRange, ...] = Field(min_length=1)
    anchor: tuple[AnchorTable, ...] = ()
    scaling: ScalingTable | None = None
    stock: StockTable | None = None
    design: dict[str, Any] = Field(default_factory=dict)
    attempts: int = Field(default=3, ge=1, le=10)
    # a bar that misses because a torsion or lateral mode sits in a partial's band is
    # designed again narrower (never wider: a blank cannot grow), by at most this share
    max_narrowing: float = Field(default=0.15, ge=0.0, le=0.3)
    bar: tuple[BarOverride, ...] = ()
    blanks: BlanksTable = BlanksTable()
    resonators: ResonatorsTable | None = None

    @model_validator(mode="after")
    def _consistent(self) -> InstrumentFile:
        lo, hi = note_to_midi(self.lowest), note_to_midi(self.highest)
        if hi < lo:
            raise ValueError(f"highest {self.highest} lies below lowest {self.lowest}")
        if hi - lo + 1 > MAX_BARS:
            raise ValueError(
                f"{hi - lo + 1} bars from {self.lowest} to {self.highest}; at most {MAX_BARS}"
            )
        given = (len(self.anchor) > 0) + (self.scaling is not None) + (self.stock is not None)
        if given != 1:
            raise ValueError(
                "give the blank sizes either as [[anchor]] tables or as [scaling], or let the "
                "tool size them from [stock] (one of the three)"
            )
        if self.anchor:
            m = [note_to_midi(a.note) for a in self.anchor]
            if len(m) < 2 or len(set(m)) != len(m):
                raise ValueError("anchor: give two or more anchors at different notes")
            if min(m) > lo or max(m) < hi:
                raise ValueError(
                    f"anchor: the anchors span {midi_to_note(min(m), self.a4_hz)} to "
                    f"{midi_to_note(max(m), self.a4_hz)} but the bars run {self.lowest} to "
                    f"{self.highest}; add anchors at (or beyond) both ends"
                )
        covered: dict[int, int] = {}
        for i, p in enumerate(self.profile):
            for k in range(note_to_midi(p.from_), note_to_midi(p.to) + 1):
                if k in covered:
                    raise ValueError(
                        f"profile[{i}] overlaps profile[{covered[k]}] at "
                        f"{midi_to_note(k, self.a4_hz)}"
                    )
                covered[k] = i
        missing = [k for k in range(lo, hi + 1) if k not in covered]
        if missing:
            raise ValueError(
                f"profile: no [[profile]] covers {midi_to_note(missing[0], self.a4_hz)}"
                + (f" (and {len(missing) - 1} more notes)" if len(missing) > 1 else "")
            )
        seen: set[int] = set()
        for b in self.bar:
            k = note_to_midi(b.note)
            if not lo <= k <= hi:
                raise ValueError(f"bar: {b.note} lies outside {self.lowest} to {self.highest}")
            if k in seen:
                raise ValueError(f"bar: {b.note} is given twice")
            seen.add(k)
        for name in ("free_length", "length_range", "width", "thickness"):
            if name in self.design or any(name in b.design for b in self.bar):
                raise ValueError(
                    f"design.{name}: not used in an instrument; the anchors, the scaling rule "
                    "or the [stock] schedule set each bar's size"
                )
        return self


def parse_instrument(raw: Mapping[str, Any], where: str = "instrument") -> InstrumentFile:
    """Validate an instrument table (parsed TOML); errors as one-line InputError."""
    try:
        return InstrumentFile.model_validate(dict(raw))
    except ValidationError as exc:
        raise from_validation_error(exc, where) from None


def load_instrument(path: str | Path) -> tuple[InstrumentFile, Path]:
    """Read an instrument file; returns it and its folder (for relative material paths)."""
    import tomllib

    path = Path(path)
    try:
        raw = tomllib.loads(read_text_input(path))
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path}: not valid TOML ({exc})") from None
    return parse_instrument(raw, where=path.name), path.parent


# ---------------------------------------------------------------------------------------------
# The plan


@dataclass(frozen=True)
class BarPlan:
    """One bar of the instrument: its note, blank (metres), target and complete part table."""

    note: NoteName
    midi: int
    length_m: float
    width_m: float
    thickness_m: float
    profile: str
    target: ResolvedTarget
    part: Mapping[str, Any]  # a part-file table, mm, with [target] and [design]
    design: DesignTable  # its [design] table, validated


@dataclass(frozen=True)
class ResonatorPlan:
    note: NoteName
    f_hz: float
    inner_diameter_m: float
    end_correction_m: float
    length_m: float


@dataclass(frozen=True)
class InstrumentPlan:
    title: str
    material: MaterialSpec
    bars: tuple[BarPlan, ...]
    attempts: int  # seeds tried per bar (seed, seed + 1, ...) until one meets its target
    allowance_m: tuple[float, float, float]
    resonators: tuple[ResonatorPlan, ...]
    resonator_temperature_c: float | None
    resonator_end: str | None
    schedule: tuple[BlankChoice, ...] = ()  # the blanks the tool chose from [stock]
    max_narrowing: float = 0.0  # share of a bar's width it may lose to clear unwanted modes

    def bar(self, note: str) -> BarPlan:
        for b in self.bars:
            if b.note == note:
                return b
        raise KeyError(note)


def _mm(x_m: float) -> float:
    # rounded so that a plan repeats bit for bit (fingerprints) and reads cleanly
    return round(float(x_m) * 1e3, 6)


def _dimensions(spec: InstrumentFile, midi: np.ndarray) -> dict[str, np.ndarray]:
    if spec.scaling is not None:
        s = spec.scaling
        m0 = note_to_midi(s.note)
        return {
            "length": scaled_dimension(s.length, m0, s.length_halves_every, midi),
            "width": scaled_dimension(s.width, m0, s.width_halves_every, midi),
            "thickness": scaled_dimension(s.thickness, m0, s.thickness_halves_every, midi),
        }
    anchors = sorted(spec.anchor, key=lambda a: note_to_midi(a.note))
    m_a = [note_to_midi(a.note) for a in anchors]
    return {
        name: interpolate_log_frequency(m_a, [getattr(a, name) for a in anchors], midi)
        for name in ("length", "width", "thickness")
    }


def _resolve_material_entry(material: str | Mapping[str, Any], base_dir: Path | None):
    """The material as resolved, and the value to write into each bar's part table (file
    paths made absolute so a bar's part file can be read from its own folder)."""
    value: Any = material
    if isinstance(material, str) and (material.endswith(".toml") or "/" in material):
        path = Path(material)
        if not path.is_absolute() and base_dir is not None:
            path = base_dir / path
        value = str(path.resolve())
    elif isinstance(material, Mapping):
        value = dict(material)
    return resolve_material(value), value


def _bar_tables(spec: InstrumentFile, midi: np.ndarray, material_value):
    """Per note: its name, profile, [design] and [target] tables and size overrides."""
    overrides = {note_to_midi(b.note): b for b in spec.bar}
    profiles = {
        k: p.profile
        for p in spec.profile
        for k in range(note_to_midi(p.from_), note_to_midi(p.to) + 1)
    }
    out = []
    for m in midi.tolist():
        note = midi_to_note(m, spec.a4_hz)
        profile = profiles[m]
        design = dict(spec.design)
        sizes: dict[str, float] = {}
        if m in overrides:
            o = overrides[m]
            sizes = {k: getattr(o, k) for k in ("length", "width", "thickness")}
            sizes = {k: v for k, v in sizes.items() if v is not None}
            profile = o.profile or profile
            design.update(o.design)
        target_table: dict[str, Any] = {
            "fundamental": note,
            "profile": profile,
            "a4_hz": spec.a4_hz,
        }
        if spec.stretch_cents_per_octave:
            target_table["stretch_cents_per_octave"] = spec.stretch_cents_per_octave
            target_table["stretch_from"] = spec.stretch_from
        out.append((m, note, profile, design, target_table, sizes))
    return out


def _part_table(spec, note, material_value, size, target_table, design) -> dict[str, Any]:
    return {
        "title": f"{spec.title}, {note}",
        "material": material_value,
        "bar": {k: _mm(size[k]) for k in ("length", "width", "thickness")},
        "target": target_table,
        "design": design,
    }


def _stock_schedule(
    spec: InstrumentFile, tables, material_value, base_dir: Path | None, progress=None
) -> tuple[BlankChoice, ...]:
    """The blanks ``optimizer.blanks`` proposes from the [stock] table, for every bar."""
    from threadpoolctl import threadpool_limits

    from tonewright.design import goals_and_clearance

    stock = spec.stock
    needs = []
    material = None
    theory = "timoshenko"
    provisional = {"length": 0.4, "width": 0.05, "thickness": 0.02}  # only to read the tables
    for m, note, _profile, design, target_table, _sizes in tables:
        part = _part_table(spec, note, material_value, provisional, target_table, design)
        part_file = parse_part(part, where=f"bar {note}")
        _, goals, clearance, blank = goals_and_clearance(part_file, base_dir)
        table = part_file.design
        material = blank.material
        theory = part_file.model.theory
        needs.append(
            BarNeeds(
                note=note,
                midi=m,
                goals=tuple(goals),
                clearance=clearance,
                min_thickness=table.min_thickness,
                max_depth=table.max_depth or 0.0,
                end_keep=float(table.end_keep),
                node_zone=float(table.node_zone),
            )
        )
    groups = None
    if stock.share_thickness == "octave":
        groups = tuple(m // 12 for m, *_ in tables)
    rules = StockRules(
        thicknesses=stock.sizes("thickness"),
        widths=stock.sizes("width"),
        length_range=stock.length_range,
        max_thickness_step=stock.max_thickness_step,
        max_width_step=stock.max_width_step,
        groups=groups,
    )
    with threadpool_limits(limits=1, user_api="blas"):  # many tiny eigenproblems
        return blank_schedule(needs, material, rules, theory, progress)


def plan_instrument(
    spec: InstrumentFile, base_dir: Path | None = None, progress=None
) -> InstrumentPlan:
    """One validated part table per note, the blanks and the resonators. With a [stock]
    table the blanks are sized by the tool first (``progress(text)`` is told of each step)."""
    material, material_value = _resolve_material_entry(spec.material, base_dir)
    lo, hi = note_to_midi(spec.lowest), note_to_midi(spec.highest)
    midi = np.arange(lo, hi + 1)
    tables = _bar_tables(spec, midi, material_value)
    schedule: tuple[BlankChoice, ...] = ()
    if spec.stock is not None:
        schedule = _stock_schedule(spec, tables, material_value, base_dir, progress)
        dims = {
            "length": np.array([c.length for c in schedule]),
            "width": np.array([c.width for c in schedule]),
            "thickness": np.array([c.thickness for c in schedule]),
        }
    else:
        dims = _dimensions(spec, midi)
    bars = []
    for j, (m, note, profile, design, target_table, sizes) in enumerate(tables):
        size = {name: float(dims[name][j]) for name in dims}
        size.update(sizes)
        part = _part_table(spec, note, material_value, size, target_table, design)
        # every bar is a valid part file: its [design] and [target] validated here, once
        part_file = parse_part(part, where=f"bar {note}")
        target = resolve(part_file.target)
        bars.append(
            BarPlan(
                note=note,
                midi=m,
                length_m=size["length"],
                width_m=size["width"],
                thickness_m=size["thickness"],
                profile=profile,
                target=target,
                part=part,
                design=part_file.design,
            )
        )
    b = spec.blanks
    allowance = (b.length_allowance, b.width_allowance, b.thickness_allowance)
    resonators: tuple[ResonatorPlan, ...] = ()
    r = spec.resonators
    if r is not None:
        resonators = _plan_resonators(r, bars, spec.a4_hz)
    return InstrumentPlan(
        title=spec.title,
        material=material,
        bars=tuple(bars),
        attempts=spec.attempts,
        allowance_m=allowance,
        resonators=resonators,
        resonator_temperature_c=r.temperature_c if r else None,
        resonator_end=r.end if r else None,
        schedule=schedule,
        max_narrowing=spec.max_narrowing,
    )


def _plan_resonators(
    r: ResonatorsTable, bars: Sequence[BarPlan], a4_hz: float
) -> tuple[ResonatorPlan, ...]:
    midi = np.array([b.midi for b in bars])
    if isinstance(r.inner_diameter, tuple):
        pairs = sorted((note_to_midi(n), d) for n, d in r.inner_diameter)
        m_a = [p[0] for p in pairs]
        if len(set(m_a)) != len(m_a) or m_a[0] > midi[0] or m_a[-1] < midi[-1]:
            raise InputError(
                "resonators.inner_diameter: give anchors at different notes spanning "
                f"{bars[0].note} to {bars[-1].note}"
            )
        diameter = interpolate_log_frequency(m_a, [p[1] for p in pairs], midi)
    else:
        diameter = np.full(midi.shape, float(r.inner_diameter))
    f = np.array([b.target.fundamental_hz for b in bars])
    radius = 0.5 * diameter
    length = quarter_wave_length_m(f, radius, r.temperature_c, r.end)
    short = np.flatnonzero(length <= radius)
    if short.size:
        k = int(short[0])
        raise InputError(
            f"resonators.inner_diameter: a {diameter[k] * 1e3:.3g} mm tube is too wide for "
            f"{bars[k].note} ({f[k]:.1f} Hz): the tube would be {length[k] * 1e3:.1f} mm long; "
            "give a smaller diameter for the high notes"
        )
    delta = end_correction_m(radius, r.end)
    return tuple(
        ResonatorPlan(b.note, float(f[i]), float(diameter[i]), float(delta[i]), float(length[i]))
        for i, b in enumerate(bars)
    )
