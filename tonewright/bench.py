"""Bench workflows: read a tap or a part file, call the numerics, return an immutable report.

The commands ``listen``, ``calibrate``, ``advise`` and ``sound`` parse their options into one
request, call one function here and print or write what it returns. The numerics live in
``tonewright.acoustics`` (tap analysis, synthesis, preview) and ``tonewright.optimizer``
(calibration, cut planning); this module only reads files, validates what the user typed,
and turns results into report objects (and their JSON form).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from types import MappingProxyType
from typing import Any

import numpy as np
import tomli_w

from tonewright.acoustics import CENTS_PER_LN, TapResult, find_partials
from tonewright.acoustics.identify import (
    Identification,
    LineLabel,
    StrikeNote,
    label_lines,
    tube_strike_note,
)
from tonewright.acoustics.preview import (
    MALLET_CONTACT_S,
    PreviewMode,
    StrikeSound,
    excited_families,
    preview_modes,
    solid_weighted,
    strike_sound,
)
from tonewright.audio import TapRecording, read_tap
from tonewright.cli_support import parse_partials
from tonewright.errors import InputError
from tonewright.forward import Bar, Material, ModalResult, Part, String, Tube, constant, solve
from tonewright.materials import MaterialSpec, MaterialTable, list_materials, load_material
from tonewright.modes_report import part_modes
from tonewright.optimizer import (
    Advice,
    AdviceOptions,
    Calibration,
    Cut,
    CutLimits,
    Goal,
    Step,
    advise,
    calibrate_bar,
)
from tonewright.optimizer.cutplan import apply_cut
from tonewright.partfile import PartFile, load_part
from tonewright.tuning import resolve
from tonewright.units import parse_length, parse_position

__all__ = [
    "ADVICE_CAUTION",
    "MIN_TAP_RATE_HZ",
    "AdviceReport",
    "AdviseRequest",
    "Blank",
    "CalibrateRequest",
    "CalibrationReport",
    "Measurement",
    "SoundReport",
    "SoundRequest",
    "TapReport",
    "advice_payload",
    "advise_bar",
    "blank_from_options",
    "blank_from_part_file",
    "calibrate_blank",
    "calibration_payload",
    "cut_of_step",
    "expected_modes",
    "goals_of",
    "identify_tap",
    "listen_to_tap",
    "mallet_contact_s",
    "material_toml",
    "measure_partials",
    "min_thickness_of",
    "preview_sound",
]

# ---------------------------------------------------------------------------------------------
# Tap recordings

KINDS = ("bar", "chime")
# Tap analysis wants the first partials of a bar with room above: at 8 kHz the band reaches
# 3.9 kHz, the third partial of a bar tuned near C5 (common practice, no source); a lower rate
# loses the partials that tell the modes apart.
MIN_TAP_RATE_HZ = 8000


@dataclass(frozen=True)
class TapReport:
    """A recording's partials, what each one is (``labels``, in the same order), the strike
    note of a chime (None for a bar or when it cannot be given), the expected part's modes
    scaled to the tap (``expected``: label, Hz; empty without a part), the analysed samples
    (for a plot) and every warning of the reading and the analysis."""

    name: str
    rate: int
    kind: str
    result: TapResult
    strike_hz: float | None
    warnings: tuple[str, ...]
    labels: tuple[LineLabel, ...] = ()
    basis: str = "none"
    expected: tuple[tuple[str, float], ...] = ()
    strike: StrikeNote | None = None
    samples: np.ndarray | None = field(default=None, compare=False, repr=False)


def _check_rate(recording: TapRecording, name: str) -> None:
    if recording.rate < MIN_TAP_RATE_HZ:
        raise InputError(
            f"WAV {name}: sample rate {recording.rate} Hz is too low for the partials of a bar; "
            f"need at least {MIN_TAP_RATE_HZ} Hz (record at 44100 or 48000 Hz)"
        )


def _tap(
    wav: Path, count: int | None, fmin: float, fmax: float | None = None
) -> tuple[TapRecording, TapResult]:
    """Read and analyse one tap; a recording without a clear partial is an input error."""
    recording = read_tap(wav)
    _check_rate(recording, wav.name)
    result = find_partials(recording.samples, recording.rate, count=count, fmin=fmin, fmax=fmax)
    if not result.partials:
        top = 0.98 * recording.rate / 2 if fmax is None else fmax
        raise InputError(
            f"WAV {wav.name}: no partials found: the recording holds no clear ringing partial "
            f"between {fmin:g} and {top:g} Hz (only noise, a click or a constant level); tap the "
            "bar firmly with the microphone close to it and record again"
        )
    return recording, result


# Modes solved for the expected part: enough to name what a tap shows.
EXPECTED_COUNTS = {"bending": 6, "torsion": 3, "lateral": 2}
# Below half the expected part's lowest mode nothing is the bar: rumble and hum are ignored.
FLOOR_FRACTION = 0.5


def expected_modes(path: Path) -> tuple[tuple[str, int, float], ...]:
    """(family, order, Hz) of the modes a tap on the part in ``path`` (a part file or a
    design's result.json) can show."""
    part_file, base = load_part(path)
    part = part_file.to_part(base)
    if isinstance(part, String):
        raise InputError(f"--part {path.name}: a string; listen names the modes of bars and tubes")
    families = excited_families(part) + (() if not isinstance(part, Bar) else ("lateral",))
    counts = {fam: EXPECTED_COUNTS[fam] for fam in families if fam in EXPECTED_COUNTS}
    result = solve(
        part, counts, tol_cents=part_file.model.tolerance_cents, theory=part_file.model.theory
    )
    return tuple((m.family, m.order, m.frequency_hz) for m in result.modes)


def identify_tap(
    result: TapResult, predicted: tuple[tuple[str, int, float], ...] | None = None
) -> Identification:
    """Labels of a tap's partials (against the expected modes, or a ratio pattern)."""
    ps = result.partials
    return label_lines(
        [p.frequency_hz for p in ps], [p.level_db for p in ps], [p.decay_s for p in ps], predicted
    )


def listen_to_tap(
    wav: Path,
    *,
    count: int | None = None,
    kind: str = "bar",
    fmin: float | None = None,
    fmax: float | None = None,
    part: Path | None = None,
) -> TapReport:
    """The partials of a recorded tap on a bar or chime, each named (``kind`` chime adds the
    strike note); with ``part`` the names come from that part's modes."""
    if kind not in KINDS:
        raise InputError(f"--kind: got {kind!r}; choose one of {', '.join(KINDS)}")
    predicted = expected_modes(part) if part is not None else None
    if fmin is None:
        fmin = 20.0
        if predicted:
            # the material may move every mode by up to the identification's scale factor
            fmin = max(fmin, FLOOR_FRACTION * min(f for _, _, f in predicted) / 1.6)
    recording, result = _tap(wav, count, fmin, fmax)
    warnings = [*recording.warnings, *result.warnings]
    ident = identify_tap(result, predicted)
    expected: tuple[tuple[str, float], ...] = ()
    if predicted:
        expected = tuple((f"{fam} {k}", ident.scale * f) for fam, k, f in predicted)
    strike_hz, strike = None, None
    if kind == "chime":
        strike = tube_strike_note(
            [p.frequency_hz for p in result.partials], [p.level_db for p in result.partials]
        )
        if strike is None:
            warnings.append(
                "no strike note: no partials in the pattern of free-free bending modes 4, 5, 6 "
                "(81 : 121 : 169); tap the tube near one end and record again"
            )
        else:
            strike_hz = strike.f_hz
    return TapReport(
        wav.name,
        recording.rate,
        kind,
        result,
        strike_hz,
        tuple(warnings),
        ident.labels,
        ident.basis,
        expected,
        strike,
        recording.samples,
    )


@dataclass(frozen=True, eq=False)
class Measurement:
    """Measured partials (Hz), their uncertainties (cents, NaN: unknown; None: typed in
    without one), their 1/e decay times (s; None: typed in) and the reading's warnings."""

    f_hz: np.ndarray
    sd_cents: np.ndarray | None
    decay_s: np.ndarray | None
    warnings: tuple[str, ...]


def measure_partials(
    wav: Path | None,
    partials: str | None,
    *,
    count: int,
    fmin: float,
    sd_cents: float | None = None,
) -> Measurement:
    """The partials from a recording (``--wav``) or typed in (``--partials``)."""
    if (wav is None) == (partials is None):
        raise InputError("--wav/--partials: give one of them (a recording, or typed Hz)")
    if partials is not None:
        f = parse_partials(partials)
        sd = None if sd_cents is None else np.full(f.size, sd_cents)
        return Measurement(f, sd, None, ())
    if sd_cents is not None:
        raise InputError("--sd-cents: only for --partials; a recording gives its own")
    if not 1 <= count <= 50:
        raise InputError(f"--count {count}: give 1 to 50 partials")
    recording, tap = _tap(wav, None, fmin)
    labels = identify_tap(tap).labels
    kept = [p for p, lab in zip(tap.partials, labels, strict=True) if lab.from_bar]
    notes = [
        f"left out {p.frequency_hz:.2f} Hz: {lab.text}"
        for p, lab in zip(tap.partials, labels, strict=True)
        if not lab.from_bar
    ]
    kept = sorted(sorted(kept, key=lambda p: -p.amplitude)[:count], key=lambda p: p.frequency_hz)
    if not kept:
        raise InputError(f"WAV {wav.name}: no partial of the bar found (only {', '.join(notes)})")
    f = np.array([p.frequency_hz for p in kept])
    sd = CENTS_PER_LN * np.array([p.frequency_uncertainty_hz for p in kept]) / f
    sd = np.where(np.isfinite(sd) & (sd > 0), sd, np.nan)
    decay = np.array([p.decay_s for p in kept])
    decay = np.where(np.isfinite(decay) & (decay > 0), decay, np.nan)
    return Measurement(f, sd, decay, (*recording.warnings, *tap.warnings, *notes))


# ---------------------------------------------------------------------------------------------
# Calibration of a blank

# Densities outside this range are unit slips (grams vs kilograms, cm vs mm), not materials:
# balsa is about 100 kg/m^3, tungsten about 19300 (common practice, no source).
DENSITY_RANGE = (50.0, 25000.0)
MIN_SLENDERNESS = 4.0  # a beam model needs a blank this many times longer than wide and thick


@dataclass(frozen=True)
class Blank:
    """A uniform bar to calibrate: geometry (m), holes and supports, starting material, base."""

    bar: Bar
    volume_m3: float
    start: MaterialSpec
    base: str | None  # library name whose ratios the calibrated material keeps
    theory: str = "timoshenko"


def _volume(length: float, width: float, thickness: float, hole_diameters: list[float]) -> float:
    # holes go through the width
    return length * width * thickness - sum(width * math.pi * d * d / 4.0 for d in hole_diameters)


def _check_slender(length: float, width: float, thickness: float) -> None:
    if length < MIN_SLENDERNESS * max(width, thickness):
        raise InputError(
            f"length {length * 1e3:g} mm: too short for a beam model of a {width * 1e3:g} x "
            f"{thickness * 1e3:g} mm section; the blank must be at least {MIN_SLENDERNESS:g} "
            "times as long as it is wide and thick"
        )


def _start_material(name: str | None, fallback: MaterialSpec | None) -> tuple[MaterialSpec, str]:
    if name is not None:
        return load_material(name), name
    if fallback is None:
        raise InputError(
            "--material: give the library material the blank is made of "
            f"({', '.join(list_materials())})"
        )
    return fallback, fallback.key


def blank_from_part_file(path: Path, material: str | None) -> Blank:
    """A blank from a part file: a [bar] of uniform width and thickness (holes allowed)."""
    part_file, base_dir = load_part(path)
    if part_file.bar is None:
        raise InputError(f"{path.name}: calibration needs a [bar] blank, got a [{part_file.kind}]")
    table = part_file.bar
    if table.undercut is not None:
        raise InputError(
            f"{path.name}: bar.undercut is a cut bar; calibration needs the uncut blank "
            "(drop [bar.undercut], or calibrate before cutting)"
        )
    for name, stations, uniform in (
        ("profile", table.profile, table.thickness),
        ("width_profile", table.width_profile, table.width),
    ):
        if stations and any(abs(y - uniform) > 1e-9 for _, y in stations):
            raise InputError(
                f"{path.name}: bar.{name} varies; calibration needs a blank of uniform section "
                "(remove the profile, or calibrate before cutting)"
            )
    _check_slender(table.length, table.width, table.thickness)
    part = part_file.to_part(base_dir)
    if material is not None:
        start, base = load_material(material), material
    else:
        start = part_file.material_spec(base_dir)
        raw = part_file.material
        if isinstance(raw, str) and raw in list_materials():
            base = raw
        elif isinstance(raw, MaterialTable) and raw.base is not None:
            base = raw.base
        else:
            base = None
    volume = _volume(table.length, table.width, table.thickness, [h.diameter for h in table.holes])
    return Blank(part, volume, start, base, part_file.model.theory)


def blank_from_options(
    length: str | None, width: str | None, thickness: str | None, material: str | None
) -> Blank:
    """A free-free blank from typed dimensions (bare numbers are mm)."""
    given = {"--length": length, "--width": width, "--thickness": thickness}
    missing = [k for k, v in given.items() if v is None]
    if missing:
        raise InputError(
            f"{', '.join(missing)}: give a part file, or all of --length, --width, --thickness"
        )
    L = parse_length(length, "--length")
    b = parse_length(width, "--width")
    h = parse_length(thickness, "--thickness")
    _check_slender(L, b, h)
    start, base = _start_material(material, None)
    bar = Bar(L, constant(b), constant(h), start.to_beam())
    return Blank(bar, _volume(L, b, h, []), start, base)


def _density(blank: Blank, mass_g: float | None, density: float | None) -> float:
    if mass_g is not None and density is not None:
        raise InputError("--mass and --density: give one of them, not both")
    if mass_g is None and density is None:
        raise InputError(
            "--mass: weigh the blank and give its mass in grams (or give --density in kg/m^3)"
        )
    if mass_g is not None:
        if not (math.isfinite(mass_g) and mass_g > 0):
            raise InputError(f"--mass {mass_g:g}: give the blank's mass in grams, above zero")
        rho = mass_g * 1e-3 / blank.volume_m3
        what = f"--mass {mass_g:g} g over {blank.volume_m3 * 1e6:.5g} cm^3"
    else:
        if not (math.isfinite(density) and density > 0):
            raise InputError(f"--density {density:g}: give kg/m^3, above zero")
        rho, what = density, f"--density {density:g}"
    lo, hi = DENSITY_RANGE
    if not lo <= rho <= hi:
        raise InputError(
            f"{what} gives a density of {rho:.4g} kg/m^3, outside {lo:g}..{hi:g}; "
            "check the units (grams, millimetres)"
        )
    return rho


@dataclass(frozen=True)
class CalibrateRequest:
    """Everything ``tonewright calibrate`` was asked (the command's options, as typed)."""

    file: Path | None = None
    length: str | None = None
    width: str | None = None
    thickness: str | None = None
    mass: float | None = None
    density: float | None = None
    material: str | None = None
    wav: Path | None = None
    partials: str | None = None
    sd_cents: float | None = None
    tolerance: float = 30.0
    count: int = 12
    fmin: float = 20.0
    out: Path | None = None
    name: str | None = None
    force: bool = False


@dataclass(frozen=True, eq=False)
class CalibrationReport:
    """The fit, the blank it was made on (with the measured density), the warnings of the
    reading and the fit, the material file's text (None without ``--out``) and its JSON."""

    calibration: Calibration
    blank: Blank
    mass_g: float | None
    warnings: tuple[str, ...]
    material_text: str | None
    payload: MappingProxyType

    @property
    def description(self) -> str:
        return _describe_blank(self.blank, self.mass_g)


def _finite(value: float, digits: int = 6) -> float | None:
    return float(f"{value:.{digits}g}") if math.isfinite(value) else None


def _describe_blank(blank: Blank, mass_g: float | None) -> str:
    b = blank.bar
    dims = [b.length, float(b.width(np.array([0.0]))[0]), float(b.thickness(np.array([0.0]))[0])]
    text = " x ".join(f"{d * 1e3:g}" for d in dims) + " mm blank"
    return text + (f" of {mass_g:g} g" if mass_g is not None else "")


def calibration_payload(
    cal: Calibration, blank: Blank, mass_g: float | None, out: Path | None
) -> dict[str, Any]:
    """The JSON form of a calibration (GPa, kg/m^3, Hz, cents; null: not determined)."""
    b = blank.bar
    return {
        "E_GPa": _finite(cal.E / 1e9),
        "E_sd_GPa": _finite(cal.E_sd / 1e9, 3),
        "G_GPa": _finite(cal.G / 1e9),
        "G_sd_GPa": _finite(cal.G_sd / 1e9, 3),
        "G_fitted": cal.G_fitted,
        "density_kg_m3": _finite(cal.rho),
        "poisson": blank.start.nu,
        "loss_factor": _finite(cal.loss_factor, 3),
        "rms_cents": _finite(cal.rms_cents, 3),
        "base": blank.base,
        "blank": {
            "length_mm": round(b.length * 1e3, 4),
            "width_mm": round(float(b.width(np.array([0.0]))[0]) * 1e3, 4),
            "thickness_mm": round(float(b.thickness(np.array([0.0]))[0]) * 1e3, 4),
            "mass_g": mass_g,
        },
        "partials": [
            {
                "frequency_hz": round(p.frequency_hz, 6),
                "mode": None if p.family is None else p.label,
                "model_hz": _finite(p.model_hz, 9),
                "residual_cents": _finite(p.residual_cents, 3),
                "loss_factor": _finite(p.loss_factor, 3),
            }
            for p in cal.partials
        ],
        "model_modes": [
            {"mode": f"{fam} {k}", "frequency_hz": round(f, 4)} for fam, k, f in cal.model_modes
        ],
        "warnings": list(cal.warnings),
        "message": cal.message,
        "out": None if out is None else str(out),
    }


def material_toml(cal: Calibration, blank: Blank, name: str, mass_g: float | None) -> str:
    """A material file that ``load_material_file`` reads (moduli GPa, density kg/m^3)."""
    modes = ", ".join(p.label for p in cal.identified)
    e_sd = f" +- {cal.E_sd / 1e9:.2g}" if math.isfinite(cal.E_sd) else ""
    g_text = (
        f"G {cal.G / 1e9:.4g}{f' +- {cal.G_sd / 1e9:.2g}' if math.isfinite(cal.G_sd) else ''} "
        "GPa fitted"
        if cal.G_fitted
        else "G kept at the base material's G/E ratio (no torsional or third bending partial)"
    )
    note = (
        f"Calibrated from a tap on a {_describe_blank(blank, mass_g)}: {modes}; "
        f"E {cal.E / 1e9:.5g}{e_sd} GPa; {g_text}; rms residual {cal.rms_cents:.2f} cent."
    )
    table: dict[str, Any] = {"name": name, "note": note}
    if blank.base is not None:
        table["base"] = blank.base
    table["E"] = float(f"{cal.E / 1e9:.6g}")
    table["G"] = float(f"{cal.G / 1e9:.6g}")
    table["density"] = float(f"{cal.rho:.6g}")
    table["poisson"] = blank.start.nu
    if math.isfinite(cal.loss_factor):
        table["loss_factor"] = float(f"{cal.loss_factor:.3g}")
        table["note"] += (
            " Loss factor from the recorded decays (median over bending partials; includes "
            "support and radiation losses, so an upper bound)."
        )
    header = (
        "# Material calibrated from a tap by tonewright. Moduli in GPa, density in kg/m^3.\n"
        "# 'base' carries the library material's orthotropic ratios over.\n"
    )
    return header + tomli_w.dumps(table)


def calibrate_blank(request: CalibrateRequest) -> CalibrationReport:
    """Build the blank, read or parse its partials, fit E (and G), and prepare the outputs."""
    r = request
    if r.file is not None:
        if any(v is not None for v in (r.length, r.width, r.thickness)):
            raise InputError(
                "--length/--width/--thickness: give either a part file or the dimensions"
            )
        blank = blank_from_part_file(r.file, r.material)
    else:
        blank = blank_from_options(r.length, r.width, r.thickness, r.material)
    rho = _density(blank, r.mass, r.density)
    material = replace(blank.start.to_beam(), rho=rho)
    blank = replace(blank, bar=replace(blank.bar, material=material))
    if (r.wav is None) == (r.partials is None):
        raise InputError("--wav/--partials: give one of them (a recording, or typed Hz)")
    if not 0.1 <= r.tolerance <= 300:
        raise InputError(f"--tolerance {r.tolerance:g}: give 0.1 to 300 cents")
    if r.sd_cents is not None and not (math.isfinite(r.sd_cents) and r.sd_cents > 0):
        raise InputError(f"--sd-cents {r.sd_cents:g}: give a positive number of cents")
    if r.out is not None and r.out.exists() and not r.force:
        raise InputError(f"--out {r.out} exists already; pass --force to replace it")
    measured = measure_partials(r.wav, r.partials, count=r.count, fmin=r.fmin, sd_cents=r.sd_cents)
    cal = calibrate_bar(
        blank.bar,
        measured.f_hz,
        measured.sd_cents,
        measured.decay_s,
        theory=blank.theory,
        tolerance_cents=r.tolerance,
    )
    warnings = (*measured.warnings, *cal.warnings)
    text = None
    if r.out is not None:
        label = r.name or f"{blank.base or 'material'} (calibrated)"
        text = material_toml(cal, blank, label, r.mass)
    payload = calibration_payload(cal, blank, r.mass, r.out)
    payload["warnings"] = list(warnings)
    return CalibrationReport(cal, blank, r.mass, warnings, text, MappingProxyType(payload))


# ---------------------------------------------------------------------------------------------
# Next-cut advice

ADVICE_CAUTION = (
    "Material cannot be put back: cut no deeper than advised, tap after each step and run "
    "advise again with the new measurements. Use guards and dust extraction (many tonewood "
    "dusts are sensitisers), eye and hearing protection; on a CNC, check the program in a "
    "simulator and air-cut first; follow your machine's manual and local practice."
)


def goals_of(part_file: PartFile, base: Path | None) -> tuple[Goal, ...]:
    """The tuned partials of the file's [target] table, in Hz."""
    if part_file.target is None:
        raise InputError("the part file has no [target] table: say what to tune to")
    spec = part_file.material_spec(base)
    coeff = spec.temp_coeff_cents_per_K if spec is not None else None
    target = resolve(part_file.target, material_temp_coeff=coeff)
    if target.kind == "strike":
        raise InputError(
            f"target.profile {target.name!r} is a strike-note target (chimes, tubes); advise "
            "tunes the partials of a bar: give ratios, cents, notes or a partials profile"
        )
    return tuple(Goal(p.family, p.order, p.f_hz, p.tolerance_cents) for p in target.partials)


DEFAULT_MIN_SHARE = 0.2  # minimum thickness, as a share of the blank, when the file gives none


def min_thickness_of(part_file: PartFile, option_mm: float | None = None) -> float:
    """The thinnest a bar may become (m): ``--min-thickness`` (mm), else the file's
    ``[design] min_thickness``, else a share of the blank."""
    t0 = part_file.bar.thickness
    if option_mm is not None:
        if not (math.isfinite(option_mm) and 0 < option_mm * 1e-3 < t0):
            raise InputError(
                f"--min-thickness {option_mm:g}: give mm above 0 and under the blank thickness "
                f"{t0 * 1e3:g} mm"
            )
        return option_mm * 1e-3
    table = part_file.design
    value = table.min_thickness if table.min_thickness is not None else DEFAULT_MIN_SHARE * t0
    if value >= t0:
        raise InputError(
            f"design.min_thickness {value * 1e3:g} mm must be under the blank thickness "
            f"{t0 * 1e3:g} mm"
        )
    return value


@dataclass(frozen=True)
class AdviseRequest:
    """What ``tonewright advise`` was asked: the bar as it is (part file already read), its
    minimum thickness (m, resolved by the command), the tap, and the cut limits (mm)."""

    part_file: PartFile
    base: Path | None
    title: str
    min_thickness_m: float
    wav: Path | None = None
    partials: str | None = None
    step_depth_mm: float = 0.5
    steps: int = 3
    tool_width_mm: float = 20.0
    one_sided: bool = False
    count: int = 12
    fmin: float = 20.0
    cuts_done: tuple[Cut, ...] = ()  # cuts made since the file's profile was measured


@dataclass(frozen=True, eq=False)
class AdviceReport:
    """The advice, the bar's length (mm), every warning, and the JSON form."""

    advice: Advice
    length_mm: float
    warnings: tuple[str, ...]
    payload: MappingProxyType


def _mm(v: float, digits: int = 3) -> float:
    return round(float(v) * 1e3, digits)


def _rows(goals, f_hz, cents) -> list[dict[str, Any]]:
    return [
        {"partial": g.label, "hz": round(float(f), 4), "cents": round(float(c), 3)}
        for g, f, c in zip(goals, f_hz, cents, strict=True)
    ]


def _step_json(i: int, step: Step, goals) -> dict[str, Any]:
    cut = step.cut
    return {
        "step": i,
        "positions_mm": [_mm(x, 2) for x in cut.positions_m],
        "windows_mm": [[_mm(a, 2), _mm(b, 2)] for a, b in cut.windows_m],
        "depth_mm": _mm(cut.depth_m),
        "length_mm": _mm(cut.length_m, 2),
        "tool_width_mm": _mm(cut.width_m, 2),
        "eased_edge_mm": _mm(min(cut.ramp_m, 0.25 * cut.width_m), 2),
        "serves": step.serves,
        "predicted": _rows(goals, step.predicted_hz, step.predicted_cents),
        # the thinnest point inside this step's windows once the step is cut
        "thinnest_in_window_after_mm": _mm(step.thinnest_m),
    }


def cut_of_step(step: Mapping[str, Any]) -> Cut | None:
    """The cut of a step as ``_step_json`` writes it (mm) or as recorded done at the bench;
    None for a note of a cut without its windows and depth."""
    if not step.get("windows_mm") or step.get("depth_mm") is None:
        return None
    windows = tuple((a * 1e-3, b * 1e-3) for a, b in step["windows_mm"])
    return Cut(
        0.5 * sum(windows[0]),
        (step.get("tool_width_mm") or 0.0) * 1e-3,
        step["depth_mm"] * 1e-3,
        windows,
        (step.get("eased_edge_mm") or 0.0) * 1e-3,
    )


def advice_payload(
    advice: Advice, start: Material, title: str, min_thickness: float, warnings: list[str]
) -> dict[str, Any]:
    """The JSON form of the advice (mm, Hz, cents, GPa); ``start`` is the file's material."""
    cal, plan, goals = advice.calibration, advice.plan, advice.goals
    tmap = plan.tuning_map
    short = plan.shortening
    return {
        "part": title,
        "measured": [
            {
                "frequency_hz": round(p.frequency_hz, 4),
                "mode": None if p.family is None else p.label,
                "model_hz": None if p.family is None else round(p.model_hz, 4),
                "residual_cents": None if p.family is None else round(p.residual_cents, 3),
            }
            for p in cal.partials
        ],
        "material": {
            "E_GPa": round(cal.E / 1e9, 5),
            "G_GPa": round(cal.G / 1e9, 5),
            "G_fitted": cal.G_fitted,
            "density_kg_m3": start.rho,
            "E_change_percent": round(100.0 * (cal.E / start.E - 1.0), 3),
            "G_change_percent": round(100.0 * (cal.G / start.G - 1.0), 3),
            "rms_cents": round(cal.rms_cents, 3),
        },
        "partials": [
            {
                "partial": g.label,
                "target_hz": round(g.f_hz, 4),
                "tolerance_cents": g.tolerance_cents,
                "now_hz": round(float(f), 4),
                "now_cents": round(float(c), 3),
                "from": "measured" if m else "model",
            }
            for g, f, c, m in zip(
                goals, plan.start_hz, plan.start_cents, advice.measured, strict=True
            )
        ],
        "steps": [_step_json(i + 1, s, goals) for i, s in enumerate(plan.steps)],
        "status": plan.status,
        "message": plan.message,
        "flat": list(plan.flat),
        "shortening": None
        if short is None
        else {
            "trim_each_end_mm": _mm(short.trim_m, 2),
            "new_length_mm": _mm(short.length_m, 2),
            "predicted": _rows(goals, short.predicted_hz, short.predicted_cents),
        },
        "min_thickness_mm": _mm(min_thickness),
        "tuning_map": {
            "tool_width_mm": _mm(tmap.width_m, 2),
            "positions_mm": [_mm(x, 2) for x in tmap.positions_m],
            "cents_per_0_1_mm": {
                label: [round(float(v), 4) for v in row]
                for label, row in zip(tmap.labels, tmap.cents_per_tenth_mm, strict=True)
            },
        },
        "notes": list(plan.notes),
        "warnings": warnings,
        "caution": ADVICE_CAUTION,
    }


def advise_bar(request: AdviseRequest) -> AdviceReport:
    """Check the limits, read or parse the tap, fit the material and plan the next cuts."""
    r = request
    part_file = r.part_file
    goals = goals_of(part_file, r.base)
    if not (math.isfinite(r.step_depth_mm) and 0.0 < r.step_depth_mm <= 3.0):
        raise InputError(f"--step-depth {r.step_depth_mm:g}: give mm above 0 and at most 3")
    if not 1 <= r.steps <= 10:
        raise InputError(f"--steps {r.steps}: give 1 to 10 steps")
    length_mm = part_file.bar.length * 1e3
    if not (math.isfinite(r.tool_width_mm) and 2.0 <= r.tool_width_mm <= length_mm / 3.0):
        raise InputError(
            f"--tool-width {r.tool_width_mm:g}: give mm from 2 to a third of the bar length "
            f"({length_mm / 3.0:.0f} mm)"
        )
    h_min = r.min_thickness_m
    measured = measure_partials(r.wav, r.partials, count=r.count, fmin=r.fmin)
    warnings = list(measured.warnings)
    bar: Bar = part_file.to_part(r.base)
    for done in r.cuts_done:
        bar = apply_cut(bar, done)
    if r.cuts_done:
        warnings.append(
            f"the bar is taken as the file gives it with {len(r.cuts_done)} recorded cut(s) "
            "made as advised; if a cut went otherwise, measure with calipers and update the file"
        )
    thinnest_now = float(np.min(bar.thickness(np.linspace(0.0, bar.length, 2001))))
    if thinnest_now < h_min:
        warnings.append(
            f"the bar is already {thinnest_now * 1e3:.2f} mm thick somewhere, under the "
            f"minimum thickness {h_min * 1e3:g} mm: no cut is planned there"
        )
    limits = CutLimits(
        min_thickness=h_min,
        width=r.tool_width_mm * 1e-3,
        max_step_depth=r.step_depth_mm * 1e-3,
        symmetric=not r.one_sided,
    )
    options = AdviceOptions(limits, steps=r.steps, theory=part_file.model.theory)
    advice = advise(bar, goals, measured.f_hz, options, measured.sd_cents)
    warnings += list(advice.calibration.warnings)
    payload = advice_payload(advice, bar.material, r.title, h_min, warnings)
    payload["a4_hz"] = r.part_file.target.a4_hz  # the reference the target's notes use
    return AdviceReport(advice, length_mm, tuple(warnings), MappingProxyType(payload))


# ---------------------------------------------------------------------------------------------
# Sound preview

MODE_COUNTS = {"bending": 12, "torsion": 6, "transverse": 24}
DEFAULT_OFFSET_M = 5e-3  # players strike a little off the centre line (common practice)
# chimes are struck on the rim of the top end (common practice, no source); heard from the
# same distance off the other end
TUBE_STRIKE_SHARE = 0.03
# a string is struck or plucked near one end, about 1/8 of its length in (common practice, no
# source): at its centre every even mode would be silent
STRING_STRIKE_SHARE = 0.125
_CONTACT_MS_RANGE = (0.05, 20.0)


def mallet_contact_s(choice: str) -> float:
    """Contact time (s) of ``soft``, ``medium``, ``hard`` or a number of milliseconds."""
    key = choice.strip().lower()
    if key in MALLET_CONTACT_S:
        return MALLET_CONTACT_S[key]
    try:
        ms = float(key.removesuffix("ms").strip())
    except ValueError:
        ms = float("nan")
    lo, hi = _CONTACT_MS_RANGE
    if not lo <= ms <= hi:
        raise InputError(
            f"--mallet {choice!r}: choose soft, medium, hard or a contact time of "
            f"{lo:g} to {hi:g} ms"
        )
    return ms * 1e-3


@dataclass(frozen=True)
class SoundRequest:
    """What ``tonewright sound`` was asked (positions as typed; None: the default)."""

    file: Path
    strike_at: str | None = None
    strike_offset: str | None = None
    listen_at: str | None = None
    listen_offset: str | None = None
    mallet: str = "medium"
    duration_s: float = 3.0
    rate: int = 44100
    loss_factor: float | None = None
    model: str = "auto"  # auto: the certifying 3D model for a bar of constant width; beam


@dataclass(frozen=True, eq=False)
class SoundReport:
    """The synthesised strike, where it was struck and heard (m), and the solve behind it."""

    title: str
    part: Part
    strike: tuple[float, float]
    listen: tuple[float, float]
    contact_s: float
    duration_s: float
    sound: StrikeSound
    modal: ModalResult
    model: str = "beam model"  # what set the frequencies played

    @property
    def played(self) -> tuple[tuple[PreviewMode, float], ...]:
        return self.sound.played

    @property
    def silent(self) -> tuple[PreviewMode, ...]:
        return self.sound.silent


def _position(text: str | None, default: float, what: str) -> float:
    return default if text is None else parse_position(text, what)


def _check_point(part: Part, x: float, y: float, what: str) -> None:
    L = part.length
    if not 0.0 <= x <= L:
        raise InputError(f"--{what}-at {x * 1e3:g} mm: must lie on the part, 0 to {L * 1e3:g} mm")
    if isinstance(part, Bar):
        half = 0.5 * float(part.width(np.array([x]))[0])
        if abs(y) > half:
            raise InputError(
                f"--{what}-offset {y * 1e3:g} mm: must lie on the bar, within "
                f"{half * 1e3:g} mm of the centre line there"
            )


def preview_sound(request: SoundRequest) -> SoundReport:
    """Solve the part's modes, weigh them for the strike and the listening point, and
    synthesise the strike."""
    r = request
    if not (math.isfinite(r.duration_s) and 0.2 <= r.duration_s <= 30.0):
        raise InputError(f"--duration {r.duration_s:g}: give 0.2 to 30 s")
    if not 8000 <= r.rate <= 192_000:
        raise InputError(f"--rate {r.rate}: give 8000 to 192000 Hz")
    contact = mallet_contact_s(r.mallet)
    part_file, base = load_part(r.file)
    part = part_file.to_part(base)
    L = part.length

    eta = r.loss_factor
    if eta is None:
        if isinstance(part, String):
            spec = part_file.material_spec(base)
            if spec is None:
                raise InputError("--loss-factor: this string has no material; give its loss factor")
            eta = spec.loss_factor
        else:
            eta = part.material.loss_factor
    if not (math.isfinite(eta) and 0.0 < eta < 1.0):
        raise InputError(f"--loss-factor {eta:g}: give a value between 0 and 1")

    # a chime is struck near its top end, where every bending mode moves (at its centre the
    # even modes have nodes, and with them the strike note's modes 4 and 6 would vanish)
    tube = isinstance(part, Tube)
    strike_share = (
        TUBE_STRIKE_SHARE if tube else STRING_STRIKE_SHARE if isinstance(part, String) else 0.5
    )
    x_s = _position(r.strike_at, strike_share * L, "--strike-at")
    x_l = _position(r.listen_at, (1 - TUBE_STRIKE_SHARE if tube else 0.4) * L, "--listen-at")
    if isinstance(part, Bar):
        quarter = 0.25 * float(part.width(np.array([x_s]))[0])
        y_s = _position(r.strike_offset, min(DEFAULT_OFFSET_M, quarter), "--strike-offset")
        y_l = _position(r.listen_offset, y_s, "--listen-offset")
    else:
        y_s = y_l = 0.0
    _check_point(part, x_s, y_s, "strike")
    _check_point(part, x_l, y_l, "listen")

    counts = {fam: MODE_COUNTS[fam] for fam in excited_families(part)}
    result = solve(
        part, counts, tol_cents=part_file.model.tolerance_cents, theory=part_file.model.theory
    )
    modes = preview_modes(part, result, (x_s, y_s), (x_l, y_l), eta)
    model = f"beam model ({part_file.model.theory})"
    if r.model not in ("auto", "beam"):
        raise InputError(f"--model {r.model!r}: choose auto or beam")
    if r.model == "auto" and isinstance(part, Bar):
        modes, model = _certified_modes(part_file, base, modes, model, (x_s, y_s), (x_l, y_l))
    sound = strike_sound(modes, contact, r.rate, r.duration_s)
    title = part_file.title or r.file.stem
    return SoundReport(
        title, part, (x_s, y_s), (x_l, y_l), contact, r.duration_s, sound, result, model
    )


def _certified_modes(
    part_file: PartFile,
    base: Path | None,
    modes: tuple[PreviewMode, ...],
    beam_label: str,
    strike: tuple[float, float],
    listen: tuple[float, float],
) -> tuple[tuple[PreviewMode, ...], str]:
    """The preview's modes as the certifying 3D model gives them (same family and order): its
    frequencies, and strike weights from its own mass-normalised mode shapes under the strike
    and the ear (``acoustics.preview.solid_weighted``); modes the 3D solve did not reach are
    left out. A bar the 3D model cannot take (varying width) keeps the beam's."""
    solid = part_modes(part_file, base, count=4, model="auto", probes=(strike, listen))
    if solid.model == beam_label or not solid.model.startswith("3D"):
        return modes, beam_label
    by_name = {(m.family, m.order): m for m in solid.modes}
    kept = []
    for m in modes:
        s = by_name.get((m.family, m.order))
        if s is not None:
            kept.append(solid_weighted(m, s.frequency_hz, *s.probe_w))
    top = max(m.frequency_hz for m in solid.modes)
    label = (
        f"{solid.model} frequencies up to {top:.0f} Hz (higher modes left out); "
        "strike weights from its mode shapes"
    )
    return tuple(kept), label
