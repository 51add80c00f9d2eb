"""Modal synthesis checked against numerical integration, published damping relations, and the
tap analyser (a round trip)."""

import math

import numpy as np
import pytest
from scipy.integrate import quad
from tonewright.acoustics.synth import (
    decay_from_loss_factor,
    half_sine_spectrum,
    modal_strike,
    t60_from_decay,
)
from tonewright.acoustics.tap import find_partials

from tonewright.errors import InputError

# --- the half-sine pulse spectrum ---------------------------------------------------------------


def pulse_ft_by_quadrature(f, T):
    """int_0^T sin(pi t / T) exp(-2 pi i f t) dt / (2 T / pi), by adaptive quadrature."""
    w = 2 * np.pi * f
    re = quad(lambda t: np.sin(np.pi * t / T) * np.cos(w * t), 0, T, limit=200)[0]
    im = quad(lambda t: -np.sin(np.pi * t / T) * np.sin(w * t), 0, T, limit=200)[0]
    return complex(re, im) / (2 * T / np.pi)


@pytest.mark.parametrize("fT", [0.0, 0.1, 0.5, 0.5 + 1e-9, 0.5 - 1e-6, 1.0, 1.5, 2.2, 7.3, -0.3])
def test_half_sine_spectrum_matches_quadrature(fT):
    # Closed form (Harris & Piersol 2002, Shock and Vibration Handbook, ch. 8, half-sine pulse
    # spectrum; from memory) against scipy's adaptive quadrature of the Fourier integral.
    # Quadrature is accurate to ~1e-12 here; 1e-9 leaves margin near the removable singularity.
    T = 1e-3
    P = half_sine_spectrum(fT / T, T)
    assert abs(P - pulse_ft_by_quadrature(fT / T, T)) < 1e-9


def test_half_sine_spectrum_landmarks():
    T = 2e-3
    # Unit at DC, pi/4 at f = 1/(2T), first zero at f = 1.5/T (Harris & Piersol, as above).
    assert abs(half_sine_spectrum(0.0, T)) == pytest.approx(1.0)
    assert abs(half_sine_spectrum(0.5 / T, T)) == pytest.approx(np.pi / 4, rel=1e-9)
    assert abs(half_sine_spectrum(1.5 / T, T)) < 1e-12
    # Trade fact (common practice, no source): a harder mallet (shorter contact) brings out the
    # upper partials. At 2 kHz a 0.2 ms contact passes more than a 1 ms one.
    assert abs(half_sine_spectrum(2000.0, 0.2e-3)) > abs(half_sine_spectrum(2000.0, 1e-3))


# --- damping relations ---------------------------------------------------------------------------


def test_t60_from_loss_factor():
    # Cremer, Heckl & Petersson (2005), Structure-Borne Sound, 3rd ed., ch. 2 (from memory):
    # reverberation time T60 = 2.2 / (f eta). 2.2 rounds 3 ln(10) / pi = 2.1988 (0.06 %).
    f = np.array([100.0, 440.0, 3000.0])
    eta = np.array([0.02, 0.005, 0.001])
    t60 = t60_from_decay(decay_from_loss_factor(f, eta))
    assert np.allclose(t60, 2.2 / (f * eta), rtol=1e-3)


def test_half_power_bandwidth_is_f_times_eta():
    # Q = f / (half-power bandwidth) = 1 / eta (standard definition; Fletcher & Rossing 1998,
    # ch. 1, from memory). Measured from the spectrum of a synthesised mode: 1000 Hz, eta = 0.01,
    # so the -3 dB power width should be 10 Hz. A 4 s record and 16x zero padding resolve it
    # to 1/64 Hz; the 0.3 ms pulse tilts the spectrum by <0.1 % across the line.
    f0, eta, rate = 1000.0, 0.01, 16000
    tau = float(decay_from_loss_factor(f0, eta))
    y = modal_strike([f0], [1.0], [tau], rate=rate, duration_s=4.0, mallet_contact_s=3e-4)
    nfft = 16 * y.size
    power = np.abs(np.fft.rfft(y, nfft)) ** 2
    f = np.fft.rfftfreq(nfft, 1 / rate)
    above = f[power >= power.max() / 2]
    assert above.max() - above.min() == pytest.approx(f0 * eta, rel=0.02)


# --- the waveform --------------------------------------------------------------------------------


def test_waveform_matches_numerical_convolution():
    # Response to the half-sine force, y_k(t) = int_0^min(t,T) F(u) h_k(t - u) du / (2T/pi),
    # h_k = e^{-t/tau} sin(2 pi f t), evaluated by quadrature at times during and after the
    # contact, against the closed form. The output is normalised, so compare after a
    # least-squares scale; 1e-6 relative is far above quadrature error (~1e-12).
    f, a, tau = [700.0, 1900.0], [1.0, -0.4], [0.5, 0.2]
    rate, T = 48000, 1e-3
    y = modal_strike(f, a, tau, rate=rate, duration_s=0.1, mallet_contact_s=T, fade_s=0.0)
    idx = np.array([3, 10, 25, 47, 48, 60, 200, 1234, 4000])

    def ref(t):
        total = 0.0
        for fk, ak, tk in zip(f, a, tau, strict=True):
            g = lambda u, fk=fk, tk=tk: (  # noqa: E731
                np.sin(np.pi * u / T) * np.exp(-(t - u) / tk) * np.sin(2 * np.pi * fk * (t - u))
            )
            total += ak * quad(g, 0, min(t, T), limit=200, epsabs=1e-14)[0] / (2 * T / np.pi)
        return total

    r = np.array([ref(i / rate) for i in idx])
    scale = (y[idx] @ r) / (r @ r)
    assert np.max(np.abs(y[idx] - scale * r)) < 1e-6 * np.max(np.abs(y))


def test_normalised_faded_and_deterministic():
    args = ([220.0, 880.0, 1980.0], [1.0, 0.5, 0.2], [1.0, 0.4, 0.2])
    y = modal_strike(*args, rate=22050, duration_s=1.0)
    assert y.size == 22050
    assert np.max(np.abs(y)) == pytest.approx(10 ** (-1 / 20))  # -1 dBFS peak
    assert y[-1] == 0.0  # the fade ends in silence: no click at the end of the file
    assert np.array_equal(y, modal_strike(*args, rate=22050, duration_s=1.0))


# --- round trip through the tap analyser ---------------------------------------------------------


def test_round_trip_through_find_partials():
    # An invented marimba-like bar (1 : 3.99 : 9.92) struck with a 0.4 ms mallet, plus noise
    # at 30 dB SNR. After contact the modes are exact decaying sinusoids, so the analyser
    # should return them: 0.2 cent (project target) and 2 % on decays (the Cramer-Rao bound on
    # the relative decay at this SNR is under 0.5 %). Levels: a_k |P(f_k)| relative to the
    # strongest, within 0.2 dB (the pulse transform at the damped, complex frequency differs
    # from |P(f_k)| by O(1/(2 pi f tau)^2)).
    f = np.array([262.0, 262.0 * 3.99, 262.0 * 9.92])
    a = np.array([1.0, 0.5, 0.35])
    tau = decay_from_loss_factor(f, np.array([0.004, 0.006, 0.009]))
    rate, T = 44100, 4e-4
    y = modal_strike(f, a, tau, rate=rate, duration_s=2.0, mallet_contact_s=T)
    rng = np.random.default_rng(11)
    y = y + rng.normal(0.0, np.sqrt(np.mean(y**2)) * 10 ** (-30 / 20), y.size)
    result = find_partials(y, rate)
    assert len(result.partials) == 3
    expected_db = 20 * np.log10(a * np.abs(half_sine_spectrum(f, T)))
    expected_db -= expected_db.max()
    for p, fk, tk, lk in zip(result.partials, f, tau, expected_db, strict=True):
        assert abs(1200 * math.log2(p.frequency_hz / fk)) < 0.2
        assert p.decay_s == pytest.approx(tk, rel=0.02)
        assert p.level_db == pytest.approx(lk, abs=0.2)


# --- bad input -----------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"frequencies_hz": []}, "frequencies_hz"),
        ({"amplitudes": [1.0]}, "amplitudes"),
        ({"frequencies_hz": [100.0, 30000.0]}, "frequencies_hz"),
        ({"decays_s": [1.0, -0.1]}, "decays_s"),
        ({"amplitudes": [1.0, np.nan]}, "amplitudes"),
        ({"rate": 44100.5}, "rate"),
        ({"duration_s": 0.0}, "duration_s"),
        ({"mallet_contact_s": 0.0}, "mallet_contact_s"),
        ({"fade_s": 5.0}, "fade_s"),
        ({"amplitudes": [0.0, 0.0]}, "mallet_contact_s"),
    ],
)
def test_bad_input_names_the_field(kwargs, field):
    args = {
        "frequencies_hz": [100.0, 400.0],
        "amplitudes": [1.0, 0.5],
        "decays_s": [1.0, 0.5],
        "rate": 44100,
        "duration_s": 1.0,
        **kwargs,
    }
    with pytest.raises(InputError, match=field):
        modal_strike(**args)
