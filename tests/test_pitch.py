"""Pitch arithmetic checked against standards, published formulas and textbook facts."""

import math

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq
from tonewright.acoustics.pitch import (
    CENTS_PER_LN,
    cents,
    cents_to_ratio,
    critical_bandwidth_hz,
    equivalent_rectangular_bandwidth_hz,
    hz_to_note,
    note_to_hz,
    note_to_midi,
    ratio_to_cents,
    stretch_cents,
    strike_note_hz,
    temperature_correction_cents,
)

from tonewright.errors import InputError

CI = settings(deadline=None, derandomize=True, database=None, max_examples=200)


# --- note names --------------------------------------------------------------------------------


def test_standard_pitch_and_middle_c():
    # ISO 16:1975: A4 = 440 Hz. C4 = 440 * 2^(-9/12) = 261.6256 Hz (equal-temperament formula,
    # tabulated to 4 decimals); the tolerance is half a unit in the 4th decimal.
    assert note_to_hz("A4") == 440.0
    assert note_to_hz("C4") == pytest.approx(261.6256, abs=5e-5)


@pytest.mark.parametrize(
    ("name", "hz"),
    [
        # Piano range A0..C8 as commonly tabulated for A4 = 440 (equal temperament, 2-3 decimals).
        ("A0", 27.5),
        ("C8", 4186.009),
        ("F4", 349.228),
        ("Bb3", 233.082),
        # MIDI note 0 (C-1) is 8.1758 Hz in the usual MIDI tuning tables (from memory).
        ("C-1", 8.1758),
    ],
)
def test_tabulated_notes(name, hz):
    # The tabulated values are rounded to their last printed digit: allow half of it.
    decimals = len(str(hz).split(".")[1]) if "." in str(hz) else 0
    assert note_to_hz(name) == pytest.approx(hz, abs=0.5 * 10.0**-decimals + 1e-12)


@pytest.mark.parametrize(
    ("a", "b"),
    [
        ("C#5", "Db5"),
        ("C♯5", "D♭5"),
        ("B#3", "C4"),
        ("Cb4", "B3"),
        ("E#4", "F4"),
        ("a4", "A4"),
        (" Gb2 ", "F#2"),
    ],
)
def test_enharmonic_spellings_agree(a, b):
    assert note_to_hz(a) == pytest.approx(note_to_hz(b), rel=1e-14)


def test_midi_numbers_and_low_octave():
    # MIDI numbering (MIDI 1.0 spec): A4 = 69, middle C = 60, C-1 = 0.
    assert note_to_midi("A4") == 69
    assert note_to_midi("C4") == 60
    assert note_to_midi("C-1") == 0
    assert note_to_midi("Bb-1") == 10
    assert note_to_midi("B9") == 131


def test_other_pitch_standard_scales_every_note():
    for name in ("C2", "F#4", "A4", "Eb7"):
        assert note_to_hz(name, a4_hz=442.0) / note_to_hz(name) == pytest.approx(442 / 440)


@pytest.mark.parametrize("bad", ["H4", "C10", "C#", "A4.5", "", "C##4", "Cb-2", "4A", "Dx4"])
def test_bad_note_names(bad):
    with pytest.raises(InputError, match="not a note name"):
        note_to_hz(bad)


def test_bad_a4():
    with pytest.raises(InputError, match="a4_hz"):
        note_to_hz("A4", a4_hz=-440)


@CI
@given(
    st.sampled_from("CDEFGAB"),
    st.sampled_from(["", "#", "b"]),
    st.integers(min_value=-1, max_value=9),
    st.floats(min_value=415.0, max_value=466.0),
)
def test_note_round_trip(letter, accidental, octave, a4):
    name = f"{letter}{accidental}{octave}"
    assume(name not in ("Cb-1", "B#9"))  # their enharmonics B-2 and C10 are outside -1..9
    f = note_to_hz(name, a4)
    back, offset = hz_to_note(f, a4, flats=accidental == "b")
    assert note_to_hz(back, a4) == pytest.approx(f, rel=1e-12)
    assert abs(offset) < 1e-9  # exact up to rounding of log2


@CI
@given(st.floats(min_value=8.5, max_value=15000.0), st.floats(min_value=-49.0, max_value=49.0))
def test_hz_to_note_offset(f_hz, detune):
    name, offset = hz_to_note(f_hz)
    assert -50.0 <= offset < 50.0
    assert cents(f_hz, note_to_hz(name)) == pytest.approx(offset, abs=1e-9)
    # Detuning a note by less than 50 cents keeps its name and reports the detune.
    name2, offset2 = hz_to_note(note_to_hz(name) * float(cents_to_ratio(detune)))
    assert (name2, offset2) == (name, pytest.approx(detune, abs=1e-8))


def test_hz_to_note_examples():
    assert hz_to_note(440.0) == ("A4", pytest.approx(0.0, abs=1e-12))
    name, offset = hz_to_note(445.0)
    # 1200 log2(445/440) = 19.56 cents (definition of the cent, Ellis 1885).
    assert name == "A4" and offset == pytest.approx(19.56, abs=0.005)
    assert hz_to_note(466.1637615)[0] == "A#4"
    assert hz_to_note(466.1637615, flats=True)[0] == "Bb4"
    with pytest.raises(InputError):
        hz_to_note(0.0)


# --- cents -------------------------------------------------------------------------------------


def test_cents_of_standard_intervals():
    # Octave = 1200 cents by definition (Ellis 1885). Just fifth 3/2 = 701.955 cents, just major
    # third 5/4 = 386.314 cents (standard tables, e.g. Benson, Music: a Mathematical Offering,
    # 2006, ch. 5). The marimba's third partial, 10 = 3 octaves + 5/4, is 3986.314 cents.
    assert cents(880.0, 440.0) == pytest.approx(1200.0, abs=1e-12)
    assert cents(220.0, 440.0) == pytest.approx(-1200.0, abs=1e-12)
    assert ratio_to_cents(1.5) == pytest.approx(701.955, abs=5e-4)
    assert ratio_to_cents(1.25) == pytest.approx(386.314, abs=5e-4)
    assert ratio_to_cents(10.0) == pytest.approx(3986.314, abs=5e-4)


def test_cents_vectorised_and_inverse():
    f = np.array([440.0, 880.0, 1760.0])
    np.testing.assert_allclose(cents(f, 440.0), [0, 1200, 2400], atol=1e-12)
    c = np.linspace(-3000, 5000, 17)
    np.testing.assert_allclose(ratio_to_cents(cents_to_ratio(c)), c, atol=1e-9)


def test_cents_per_natural_log():
    # 1200 log2 r = (1200 / ln 2) ln r (definition of the cent, Ellis 1885): 1731.234 cents per
    # unit of ln f, the factor that turns d ln f into cents.
    assert CENTS_PER_LN == pytest.approx(1731.2340490667, abs=1e-9)
    assert CENTS_PER_LN * math.log(2.0) == pytest.approx(1200.0, abs=1e-12)
    f = np.array([261.63, 523.25, 1046.5])
    np.testing.assert_allclose(CENTS_PER_LN * np.log(f / 440.0), cents(f, 440.0), atol=1e-9)


# --- hearing bandwidths ------------------------------------------------------------------------


def test_critical_band_at_1khz():
    # Zwicker & Terhardt (1980), JASA 68, 1523, eq. 2 evaluated at 1 kHz:
    # 25 + 75 * 2.4^0.69 = 162.2 Hz.
    assert critical_bandwidth_hz(1000.0) == pytest.approx(162.2, abs=0.05)


def test_critical_band_follows_zwicker_table():
    # Zwicker, E. (1961), "Subdivision of the audible frequency range into critical bands",
    # JASA 33, 248: centre frequencies and bandwidths (from memory; band 1 omitted: its lower
    # edge differs between versions). Zwicker & Terhardt state their formula matches the table
    # within about +-10 %, which is the tolerance used.
    fc = [150, 250, 350, 450, 570, 700, 840, 1000, 1170, 1370, 1600, 1850, 2150, 2500, 2900]
    bw = [100, 100, 100, 110, 120, 140, 150, 160, 190, 210, 240, 280, 320, 380, 450]
    fc += [3400, 4000, 4800, 5800, 7000, 8500, 10500, 13500]
    bw += [550, 700, 900, 1100, 1300, 1800, 2500, 3500]
    np.testing.assert_allclose(critical_bandwidth_hz(np.array(fc)), bw, rtol=0.10)


def test_erb():
    # Glasberg & Moore (1990), Hearing Research 47, 103, eq. 3 at 1 kHz: 24.7 * 5.37 = 132.6 Hz.
    assert equivalent_rectangular_bandwidth_hz(1000.0) == pytest.approx(132.64, abs=0.005)
    # ERBs are narrower than the classical critical bands, most of all at low frequency
    # (Moore, An Introduction to the Psychology of Hearing, ch. 3; from memory).
    f = np.geomspace(50, 15000, 40)
    assert np.all(equivalent_rectangular_bandwidth_hz(f) < critical_bandwidth_hz(f))


# --- stretch and temperature -------------------------------------------------------------------


def test_stretch_rule():
    c6 = note_to_hz("C6")
    assert stretch_cents(c6, 3.0) == pytest.approx(0.0, abs=1e-12)  # default reference is C6
    assert stretch_cents(note_to_hz("C7"), 3.0) == pytest.approx(3.0, abs=1e-12)
    assert stretch_cents(note_to_hz("C8"), 3.0) == pytest.approx(6.0, abs=1e-12)
    assert stretch_cents(note_to_hz("A3"), 3.0) == 0.0
    np.testing.assert_array_equal(stretch_cents(np.geomspace(20, 5000, 9), 0.0), 0.0)
    assert stretch_cents(880.0, 2.0, reference_hz=440.0) == pytest.approx(2.0)


def test_temperature_correction_wood():
    # A wooden bar drifts about 1 cent per degree C, rising when colder (common practice,
    # no source): warmed by 5 K it sounds 5 cents flat, cooled by 3 K 3 cents sharp.
    assert temperature_correction_cents(5.0, -1.0) == pytest.approx(-5.0)
    assert temperature_correction_cents(-3.0, -1.0) == pytest.approx(3.0)


# --- strike note -------------------------------------------------------------------------------


def _free_free_beta(n: int) -> float:
    """n-th root of cos x cosh x = 1 (free-free beam), bracketed near (2n+1) pi / 2."""
    guess = (2 * n + 1) * math.pi / 2
    return brentq(lambda x: math.cos(x) * math.cosh(x) - 1.0, guess - 0.3, guess + 0.3, xtol=1e-14)


def test_free_free_roots_match_the_handbook():
    # Thomson, Theory of Vibration with Applications, App. D, Table D.1, and the
    # asymptote (2n+1) pi/2 for n = 6 (exact to about 1e-8 there: cosh x ~ 1e8).
    table = [4.73004074, 7.85320462, 10.99560784, 14.13716549, 17.27875966]
    for n, beta in enumerate(table, start=1):
        assert _free_free_beta(n) == pytest.approx(beta, abs=2e-8)
    assert _free_free_beta(6) == pytest.approx(13 * math.pi / 2, abs=1e-6)


def test_strike_of_uniform_tube_is_half_mode_4():
    # Free tube = free-free beam: f_n proportional to (beta_n L)^2 (Thomson, App. D).
    # Fletcher & Rossing (1998) ch. 19: the strike note is an octave below mode 4 (from memory).
    beta = np.array([_free_free_beta(n) for n in range(1, 9)])
    f = 100.0 * beta**2
    assert strike_note_hz(f) == pytest.approx(f[3] / 2, rel=1e-12)
    # and modes 4-6 lie near 81 : 121 : 169, near 2 : 3 : 4 (ibid.)
    assert f[4] / f[3] == pytest.approx(121 / 81, rel=0.01)
    assert f[5] / f[3] == pytest.approx(169 / 81, rel=0.01)


def test_strike_of_exact_harmonic_series():
    f = np.array([10.0, 30.0, 60.0, 246.0, 369.0, 492.0, 700.0])
    assert strike_note_hz(f) == pytest.approx(123.0, rel=1e-12)


@CI
@given(st.floats(min_value=1e-2, max_value=1e3), st.floats(min_value=0.1, max_value=1.0))
def test_strike_scales_with_frequency_and_ignores_low_modes(scale, low):
    f = np.array([1.0, 2.75, 5.4, 8.93, 13.34, 18.6])
    f_low_moved = np.concatenate([f[:3] * low, f[3:]])  # modes 1-3 do not enter the rule
    # rel=1e-12: exp/log round-off only.
    assert strike_note_hz(scale * f) == pytest.approx(scale * strike_note_hz(f), rel=1e-12)
    assert strike_note_hz(f_low_moved) == pytest.approx(strike_note_hz(f), rel=1e-12)


@pytest.mark.parametrize(
    "bad",
    [[1, 2, 3], [1, 2, 3, 5, 4, 6], [-1, 2, 3, 4, 5, 6], [1, 2, 3, float("nan"), 5]],
)
def test_strike_rejects_bad_partials(bad):
    with pytest.raises(InputError, match="partials_hz"):
        strike_note_hz(bad)
