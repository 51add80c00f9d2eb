"""Pitch arithmetic: note names, cents, hearing bandwidths, stretch, temperature, strike notes.

Equations
---------
- Twelve-tone equal temperament referred to A4 (MIDI number 69):
  ``f = a4 * 2 ** ((m - 69) / 12)`` with ``m = 12 (octave + 1) + semitone``; A4 = 440 Hz is the
  standard pitch of ISO 16:1975. Octaves are numbered in scientific pitch notation (C4 = middle
  C), from -1 to 9.
- Interval in cents: ``c = 1200 log2(f / f_ref) = (1200 / ln 2) ln(f / f_ref)``; a ratio ``r``
  is ``1200 log2 r`` cents. ``CENTS_PER_LN = 1200 / ln 2`` turns derivatives of ``ln f`` into
  cents.
- Critical bandwidth (Zwicker, E. & Terhardt, E. (1980), "Analytical expressions for
  critical-band rate and critical bandwidth as a function of frequency", J. Acoust. Soc. Am.
  68(5), 1523-1525, eq. 2): ``CB = 25 + 75 (1 + 1.4 (f/kHz)^2)^0.69`` Hz.
- Equivalent rectangular bandwidth (Glasberg, B.R. & Moore, B.C.J. (1990), "Derivation of
  auditory filter shapes from notched-noise data", Hearing Research 47, 103-138, eq. 3):
  ``ERB = 24.7 (4.37 f/kHz + 1)`` Hz.
- Octave stretch (this project's rule, not a published one): above a reference frequency
  ``f_s`` the pitch is raised by ``s`` cents per octave, ``stretch = s * max(0, log2(f / f_s))``;
  below ``f_s`` nothing changes. The stretch is continuous and grows linearly in octaves.
- Temperature: a part whose pitch changes by ``k`` cents per kelvin moves by ``k * dT`` cents
  when warmed by ``dT``. Wood: ``k`` about -1 cent/K (pitch rises when colder; common practice,
  no source). Metals: ``k = (1200 / ln 2) * (dlnE/dT + alpha) / 2`` for a free bar (f is
  proportional to h / L^2 * sqrt(E / rho); all lengths grow by ``alpha dT`` and rho falls by
  ``3 alpha dT``).

Strike note of chimes and tubular bells
---------------------------------------
Published (Fletcher, N.H. & Rossing, T.D. (1998), *The Physics of Musical Instruments*, 2nd
ed., ch. 19; Rossing, T.D. (2000), *Science of Percussion Instruments*): the free-free bending
modes 4, 5 and 6 of a tubular bell lie near 81 : 121 : 169, close to 2 : 3 : 4, and the
perceived strike note is about an octave below mode 4 (a virtual pitch built from those
near-harmonic modes).

The rule used everywhere here (design, modes, shop sheets, sound and listen) is that published
one, taken literally: the strike note is ``f4 / 2``. (An earlier rule of this project, a 2:3:4
fit to modes 4-6, lay about 22 cents higher on the ideal ratios and is no longer used.)
"""

from __future__ import annotations

import math
import re

import numpy as np
from numpy.typing import ArrayLike

from tonewright.errors import InputError

__all__ = [
    "CENTS_PER_LN",
    "STRIKE_MODES",
    "cents",
    "cents_to_ratio",
    "critical_bandwidth_hz",
    "equivalent_rectangular_bandwidth_hz",
    "hz_to_note",
    "note_to_hz",
    "note_to_midi",
    "ratio_to_cents",
    "stretch_cents",
    "strike_note_hz",
    "temperature_correction_cents",
]

_CENTS_PER_OCTAVE = 1200.0

STRIKE_MODES: tuple[tuple[int, float], ...] = ((4, 2.0),)
"""The strike-note rule's (bending mode, harmonic number) pairs: the strike note is the
geometric mean of f_mode / harmonic over these; the published rule is mode 4 an octave down
(see the module docstring)."""
_A4_MIDI = 69

CENTS_PER_LN = float(_CENTS_PER_OCTAVE / np.log(2.0))
"""Cents per unit of natural log: ``c = CENTS_PER_LN * ln(f / f_ref)``, ``1200 / ln 2``."""

_SEMITONE = {"C": 0, "D": 2, "E": 4, "F": 5, "G": 7, "A": 9, "B": 11}
_ACCIDENTAL = {"": 0, "#": 1, "♯": 1, "b": -1, "♭": -1}
_SHARP_NAMES = ("C", "C#", "D", "D#", "E", "F", "F#", "G", "G#", "A", "A#", "B")
_FLAT_NAMES = ("C", "Db", "D", "Eb", "E", "F", "Gb", "G", "Ab", "A", "Bb", "B")
_NOTE_RE = re.compile(r"^([A-Ga-g])([#♯b♭]?)(-?\d+)$")


def _check_a4(a4_hz: float) -> float:
    if not (math.isfinite(a4_hz) and a4_hz > 0):
        raise InputError(f"a4_hz: {a4_hz!r} is not allowed; give a positive frequency in Hz")
    return float(a4_hz)


def note_to_midi(name: str) -> int:
    """MIDI note number of a note name: 'A4' -> 69, 'C#5' -> 73, 'Bb-1' -> 10.

    Letter A-G, an optional sharp ('#', '♯') or flat ('b', '♭'), then the octave -1..9.
    """
    text = name.strip() if isinstance(name, str) else ""
    match = _NOTE_RE.match(text)
    if match is None or not -1 <= int(match[3]) <= 9:
        raise InputError(
            f"note {name!r} is not a note name; write a letter A-G, an optional # or b, "
            "and an octave -1..9, e.g. 'F3', 'C#5', 'Bb4'"
        )
    letter, accidental, octave = match[1].upper(), match[2], int(match[3])
    return 12 * (octave + 1) + _SEMITONE[letter] + _ACCIDENTAL[accidental]


def note_to_hz(name: str, a4_hz: float = 440.0) -> float:
    """Equal-tempered frequency of a note name, referred to ``a4_hz``."""
    midi = note_to_midi(name)
    return _check_a4(a4_hz) * 2.0 ** ((midi - _A4_MIDI) / 12.0)


def hz_to_note(f_hz: float, a4_hz: float = 440.0, *, flats: bool = False) -> tuple[str, float]:
    """Nearest equal-tempered note and the offset of ``f_hz`` from it in cents.

    Returns e.g. ``("A4", 0.0)`` for 440 Hz, ``("C#5", -12.3)`` for a slightly flat C#5. Sharps
    are used unless ``flats`` is true. Offsets lie in [-50, 50). Any positive frequency gets a
    name, even outside the octaves -1..9 that :func:`note_to_hz` reads.
    """
    a4 = _check_a4(a4_hz)
    if not (math.isfinite(f_hz) and f_hz > 0):
        raise InputError(f"frequency {f_hz!r} is not allowed; give a positive frequency in Hz")
    semitones = 12.0 * math.log2(f_hz / a4) + _A4_MIDI
    midi = math.floor(semitones + 0.5)
    offset = 100.0 * (semitones - midi)
    names = _FLAT_NAMES if flats else _SHARP_NAMES
    return f"{names[midi % 12]}{midi // 12 - 1}", offset


def cents(f_hz: ArrayLike, f_ref_hz: ArrayLike) -> np.ndarray:
    """Interval from ``f_ref_hz`` up to ``f_hz`` in cents (negative when ``f_hz`` is lower)."""
    return _CENTS_PER_OCTAVE * np.log2(np.asarray(f_hz, float) / np.asarray(f_ref_hz, float))


def ratio_to_cents(ratio: ArrayLike) -> np.ndarray:
    """A frequency ratio in cents: 2 -> 1200, 3/2 -> 701.955."""
    return _CENTS_PER_OCTAVE * np.log2(np.asarray(ratio, float))


def cents_to_ratio(c: ArrayLike) -> np.ndarray:
    """Inverse of :func:`ratio_to_cents`."""
    return 2.0 ** (np.asarray(c, float) / _CENTS_PER_OCTAVE)


def critical_bandwidth_hz(f_hz: ArrayLike) -> np.ndarray:
    """Critical bandwidth by Zwicker & Terhardt (1980): 25 + 75 (1 + 1.4 (f/kHz)^2)^0.69."""
    f_khz = np.asarray(f_hz, float) / 1e3
    return 25.0 + 75.0 * (1.0 + 1.4 * f_khz**2) ** 0.69


def equivalent_rectangular_bandwidth_hz(f_hz: ArrayLike) -> np.ndarray:
    """Equivalent rectangular bandwidth by Glasberg & Moore (1990): 24.7 (4.37 f/kHz + 1)."""
    f_khz = np.asarray(f_hz, float) / 1e3
    return 24.7 * (4.37 * f_khz + 1.0)


def stretch_cents(
    f_hz: ArrayLike, cents_per_octave: float, reference_hz: float = 1046.502261202395
) -> np.ndarray:
    """Octave stretch: ``cents_per_octave`` for every octave above ``reference_hz``, else 0.

    The default reference is C6 at A4 = 440 Hz. This is the project's own simple rule (see the
    module docstring); with ``cents_per_octave = 0`` it is identically zero.
    """
    octaves_above = np.log2(np.asarray(f_hz, float) / float(reference_hz))
    return float(cents_per_octave) * np.maximum(octaves_above, 0.0)


def temperature_correction_cents(delta_T: ArrayLike, coeff_cents_per_K: float) -> np.ndarray:
    """Pitch change in cents of a part warmed by ``delta_T`` kelvin: ``coeff * delta_T``.

    ``coeff_cents_per_K`` is the material's temperature coefficient of pitch (negative for wood
    and metals: warmer is flatter). To tune in the shop at ``T_shop`` a part meant to sound at
    ``T_play``, aim ``-temperature_correction_cents(T_play - T_shop, coeff)`` cents off nominal.
    """
    return float(coeff_cents_per_K) * np.asarray(delta_T, float)


def strike_note_hz(partials_hz: ArrayLike) -> float:
    """Strike note of a chime from its free-free bending partials (mode 1 first, at least 4):
    an octave below bending mode 4, the published rule (see the module docstring)."""
    f = np.asarray(partials_hz, float)
    need = max(m for m, _ in STRIKE_MODES)
    if f.ndim != 1 or f.size < need:
        raise InputError(
            f"partials_hz: got {f.size} value(s); the strike note needs bending modes 1..{need}"
        )
    if not np.all(np.isfinite(f)) or np.any(f <= 0) or np.any(np.diff(f) <= 0):
        raise InputError("partials_hz: give positive frequencies sorted upward, mode 1 first")
    modes = np.array([m for m, _ in STRIKE_MODES]) - 1
    harmonic = np.array([h for _, h in STRIKE_MODES])
    return float(np.exp(np.mean(np.log(f[modes] / harmonic))))
