"""Band-energy decay times (``acoustics.decay``) against closed forms.

Schroeder (1965), "New method of measuring reverberation time", JASA 37(3), 409-412: the
backward integral of a decay's energy; for one exponential of amplitude time constant tau it
is itself exponential and falls 60 dB in tau ln(1000). A double-slope ring is checked
against the same definition (ISO 3382-1:2009 T20: a line through -5 to -25 dB) applied to
its exact energy curve.
"""

import numpy as np
from tonewright.acoustics.decay import band_energy_decay, t60_from_edc
from tonewright.acoustics.tap import find_partials

RATE = 44100


def _exact_t20(a: np.ndarray, dt: float) -> float:
    """T20 of the exact backward-integrated energy of an amplitude envelope ``a``."""
    e = 0.5 * a**2
    edc = np.cumsum(e[::-1])[::-1] * dt
    t = np.arange(a.size) * dt
    return t60_from_edc(t, 10.0 * np.log10(edc / edc[0]))[0]


def test_one_exponential_falls_60_db_in_tau_ln_1000():
    rng = np.random.default_rng(1)
    t = np.arange(3 * RATE) / RATE
    x = np.exp(-t / 0.3) * np.cos(2 * np.pi * 523.0 * t)
    x += 0.3 * np.exp(-t / 0.1) * np.cos(2 * np.pi * 1567.0 * t)  # a neighbour, rejected
    x += rng.normal(0.0, 1e-4, t.size)
    tt, edc, range_db = band_energy_decay(x, RATE, 523.0, 1044.0, rng.normal(0, 1e-4, RATE // 2))
    t60, kind = t60_from_edc(tt, edc, range_db)
    assert kind == "T20"
    assert abs(t60 / (0.3 * np.log(1000.0)) - 1.0) < 0.01


def test_a_double_slope_ring_gets_its_heard_decay_not_a_single_exponential():
    # Fast then slow (two modes of one pitch, or a coupled resonator): amplitude
    # exp(-t/0.06) + 0.15 exp(-t/0.6). The T20 of the exact curve is the reference.
    rng = np.random.default_rng(2)
    t = np.arange(3 * RATE) / RATE
    a = np.exp(-t / 0.06) + 0.15 * np.exp(-t / 0.6)
    ring = a * np.cos(2 * np.pi * 440.0 * t + 0.3)
    pre = rng.normal(0.0, 1e-5, RATE // 10)
    x = np.concatenate([pre, ring + rng.normal(0.0, 1e-5, t.size)])
    reference = _exact_t20(a, 1.0 / RATE)
    result = find_partials(x, RATE, skip_s=0.0)
    (p,) = [q for q in result.partials if abs(q.frequency_hz - 440.0) < 1.0]
    assert abs(p.band_t60_s / reference - 1.0) < 0.03
    # the decaying-sinusoid fit describes neither slope: the band decay is what says so
    assert abs(p.t60_s / reference - 1.0) > 0.2


def test_a_ring_the_record_cuts_off_has_no_band_decay():
    rng = np.random.default_rng(3)
    t = np.arange(RATE // 4) / RATE
    x = 1e-3 * np.exp(-t / 5.0) * np.cos(2 * np.pi * 700.0 * t) + rng.normal(0, 1e-5, t.size)
    tt, edc, range_db = band_energy_decay(x, RATE, 700.0, 100.0)
    assert range_db < 25.0  # the record ends 0.4 dB down: no range fits
    assert np.isnan(t60_from_edc(tt, edc, range_db)[0])
