"""Decay time of a partial from its band's energy, without assuming one exponential.

Method
------
The recording from the analysed start is shifted down by the partial's frequency,
``y[n] = x[n] exp(-2 pi i f n / rate)``, and low-passed by a moving average of ``L`` samples
and a second one sampled at a quarter of that (a kernel whose response is zero at multiples
of ``rate / L``, set to the distance to the nearest other line, so a neighbour falls on a
zero), decimated by ``L / 4``. Its
squared magnitude ``e(t)`` is the band's energy envelope. The mean noise power in the band,
measured before the strike (or, without a pre-roll, over the record's last tenth), is
subtracted (Chu 1978) and ``e`` is integrated backwards up to where it meets the noise
(Schroeder 1965):

    EDC(t) = int_t^{t_end} e(s) ds / int_0^{t_end} e(s) ds,     in dB: 10 log10 EDC.

The decay time T60 is extrapolated from a least-squares line through EDC between -5 and
-25 dB ("T20", ISO 3382-1:2009, 3.6 and A.2); where the ring does not fall 25 dB above the
noise, between -5 and -15 dB ("T10"); where it does not fall 15 dB, NaN. For one exponential
of amplitude time constant tau this is tau ln(1000) exactly; a ring that decays fast and
then slowly (a double slope: two modes, a coupled resonator, a room) gets the slope a
listener hears over its first 25 dB, which a single fitted exponential does not give.

References
----------
- Schroeder, M.R. (1965), "New method of measuring reverberation time", J. Acoust. Soc. Am.
  37(3), 409-412.
- Chu, W.T. (1978), "Comparison of reverberation measurements using Schroeder's impulse
  method and decay-curve averaging method", J. Acoust. Soc. Am. 63(5), 1444-1450 (noise
  subtraction; from memory).
- ISO 3382-1:2009, *Acoustics - Measurement of room acoustic parameters - Part 1:
  Performance spaces* (evaluation ranges of T20 and T10; from memory).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

__all__ = ["band_energy_decay", "t60_from_edc"]

LN_1000 = float(np.log(1000.0))
T20_RANGE_DB = (-5.0, -25.0)
T10_RANGE_DB = (-5.0, -15.0)


def _band_envelope(
    x: NDArray[np.float64], rate: float, f_hz: float, step: int
) -> NDArray[np.float64]:
    """Energy envelope of the band around ``f_hz``, one value per ``step`` samples: the
    shifted signal summed over blocks of ``step``, then two moving sums of four blocks (two
    boxcars of ``L = 4 step`` samples, the second sampled at its quarter length)."""
    nb = x.size // step
    if nb < 16:
        return np.zeros(0)
    blocks = x[: nb * step].reshape(nb, step)
    w = 2.0 * np.pi * f_hz / rate
    inner = np.exp(-1j * w * np.arange(step))
    y = (blocks @ inner.real + 1j * (blocks @ inner.imag)) * np.exp(-1j * w * step * np.arange(nb))
    c = np.concatenate([[0.0], np.cumsum(y)])
    z1 = c[4:] - c[:-4]
    c = np.concatenate([[0.0], np.cumsum(z1)])
    z2 = (c[4:] - c[:-4]) / (16.0 * step * step)
    return np.abs(z2) ** 2


def band_energy_decay(
    x: NDArray[np.float64],
    rate: float,
    f_hz: float,
    neighbour_hz: float,
    noise: NDArray[np.float64] | None = None,
) -> tuple[NDArray[np.float64], NDArray[np.float64], float]:
    """Times (s, from the start of ``x``), the backward-integrated energy (dB, 0 at the
    start) of the band around ``f_hz`` and the decay range available (dB from the
    envelope's peak down to the higher of the noise and the record's end); ``neighbour_hz``
    is the distance to the nearest other line (the kernel's first zero), ``noise`` samples of
    the same channel without the strike (None: the last tenth of ``x``)."""
    x = np.asarray(x, float)
    step = max(1, round(rate / max(neighbour_hz, 1e-9) / 4.0))
    step = min(step, max(1, x.size // 64))
    e = _band_envelope(x, rate, f_hz, step)
    empty = (np.zeros(0), np.zeros(0), 0.0)
    if e.size < 8:
        return empty
    ref = _band_envelope(np.asarray(noise, float), rate, f_hz, step) if noise is not None else e[:0]
    if ref.size < 4:
        ref = e[-max(4, e.size // 10) :]
    noise_power = float(np.mean(ref))
    # integrate up to where the envelope meets the noise (3 dB above it)
    meets = np.flatnonzero(e < 2.0 * noise_power)
    stop = int(meets[0]) if meets.size else e.size
    signal = np.clip(e[:stop] - noise_power, 0.0, None)
    if stop < 4 or not np.sum(signal) > 0:
        return empty
    # a record that ends before the ring meets the noise ends its decay there
    floor = max(noise_power, float(np.mean(e[max(0, stop - 4) : stop])))
    range_db = float(10.0 * np.log10(np.max(e) / max(floor, 1e-300)))
    edc = np.cumsum(signal[::-1])[::-1]
    with np.errstate(divide="ignore"):
        edc_db = 10.0 * np.log10(edc / edc[0])
    # the kernel's centre: value k spans samples k step to (k + 7) step
    t = (np.arange(stop) + 3.5) * step / rate
    return t, edc_db, range_db


def t60_from_edc(
    t: NDArray[np.float64], edc_db: NDArray[np.float64], range_db: float = np.inf
) -> tuple[float, str]:
    """T60 (s) from a decay curve by a line through -5 to -25 dB, or -5 to -15 dB, with the
    range used (``"T20"``, ``"T10"``; NaN and ``""``: neither fits). A range is used only
    when the decay itself (``range_db``, peak to noise or record end) reaches 10 dB past it
    (ISO 3382-1: the noise at least 10 dB under the range's end), since backward integration
    over a cut-off ring bends the curve down near its end."""
    for name, (hi, lo) in (("T20", T20_RANGE_DB), ("T10", T10_RANGE_DB)):
        if edc_db.size and range_db >= 10.0 - lo and np.min(edc_db) <= lo - 1.0:
            inside = (edc_db <= hi) & (edc_db >= lo)
            if np.count_nonzero(inside) >= 3:
                slope = np.polyfit(t[inside], edc_db[inside], 1)[0]  # dB per second
                if slope < 0:
                    return float(-60.0 / slope), name
    return float("nan"), ""
