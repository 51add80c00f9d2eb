"""Partials of a struck bar or tube from a recording of one tap.

Model
-----
After the strike (onset ``n0``) and a short skip past the mallet contact and the click, the
sound is a sum of exponentially decaying sinusoids in noise. In per-sample units, over the
analysed record ``n = 0 .. N-1``,

    x[n] = sum_k Re(C_k z_k^n) + c + e[n],   z_k = exp(u_k),  u_k = -alpha_k + i omega_k,

with complex amplitude ``C_k = A_k exp(i phi_k)``, decay rate ``alpha_k`` (1/sample) and
angular frequency ``omega_k`` (rad/sample). ``decay_s`` reported below is the 1/e amplitude
time ``tau = 1 / alpha`` in seconds; ``T60 = tau ln(1000)``.

Detection
---------
The record minus its mean is tapered by a falling half-Hann window ``cos^2(pi n / 2N)``
(full weight at the strike, where the signal is strongest; smooth at the end so truncation
leaves no sidelobes), zero-padded four times and transformed. A local maximum is a candidate
partial when it stands ``min_snr_db`` above the noise floor, has ``min_prominence_db`` of
prominence and lies within ``dynamic_range_db`` of the strongest peak. The noise floor is the
median of the dB spectrum in bands 1/6 octave or 25 Hz wide, whichever is wider, lowered to
what the neighbouring bands show on both sides (the higher of the smallest median within two
bands to the left and within two to the right), so that a broad line cannot raise its own
floor while a steep slope of the noise (lower on one side only) cannot lower it. Quadratic
interpolation of the dB spectrum gives a first frequency (Smith 2011, "quadratic interpolated
FFT").

Refinement
----------
The unwindowed N-point DFT of one truncated decaying sinusoid is a geometric series:

    X[m] = (C G(u) + conj(C) G(conj(u))) / 2,   G(u) = expm1(N u) / expm1(u - 2 pi i m / N),

exact at every bin, with no window and no edge approximation (Bertocco, Offelli & Petri 1994).
For each group of nearby peaks, this closed form plus a complex linear background (the tails of
everything outside the group) is fitted to the DFT bins around the group by nonlinear least
squares, with the fitted contributions of the other groups subtracted (two Gauss-Seidel
sweeps), so a loud neighbour does not bias a weak partial. The amplitudes ``Re C_k``,
``Im C_k`` and the background enter linearly: for given ``omega_k`` and ``log alpha_k`` they
are the linear least-squares solution, and the solver (MINPACK's Levenberg-Marquardt through
``scipy.optimize.leastsq``) sees only those 2K nonlinear parameters, with Kaufman's
Jacobian of the projected residual (variable projection: Golub & Pereyra 1973; Kaufman 1975).
Their bounds (a frequency near its detected peak, a decay between 1000 records and a line
four times wider than its band) enter through ``theta = lo + (hi - lo)(1 + sin phi) / 2``
(James & Roos 1975). The decays start from the best of a grid of shared trial decays.
Two lines that the detection window merged leave a structured residual in
their group: a component is added at the residual's largest bin while that halves the residual
(at most twice per group). A weak line hidden under a loud line's skirt is found by
subtracting all fitted partials in the time domain and running the detection again on what
remains (at most three rounds).

White noise gives independent, equal-variance DFT bins, so the parameter covariance is
``s^2 (J^T J)^{-1}`` with ``s^2`` the residual variance; ``frequency_uncertainty_hz`` is the
resulting standard deviation of ``f = omega rate / 2 pi``. For a slowly decaying tone it comes
within about 15 % of the Cramer-Rao bound ``var(omega) = 24 sigma^2 / (A^2 N (N^2 - 1))``
(Rife & Boorstyn 1974; only bins near each peak are fitted), checked in the tests.

References
----------
- Rife, D.C. & Boorstyn, R.R. (1974), "Single-tone parameter estimation from discrete-time
  observations", IEEE Trans. Inf. Theory 20(5), 591-598.
- Bertocco, M., Offelli, C. & Petri, D. (1994), "Analysis of damped sinusoidal signals via a
  frequency-domain interpolation algorithm", IEEE Trans. Instrum. Meas. 43(2), 245-250
  (from memory).
- Golub, G.H. & Pereyra, V. (1973), "The differentiation of pseudo-inverses and nonlinear
  least squares problems whose variables separate", SIAM J. Numer. Anal. 10(2), 413-432.
- Kaufman, L. (1975), "A variable projection method for solving separable nonlinear least
  squares problems", BIT 15, 49-57.
- James, F. & Roos, M. (1975), "MINUIT: a system for function minimization and analysis of
  the parameter errors and correlations", Comput. Phys. Commun. 10, 343-367 (the sine
  transform of bounded parameters; from memory).
- Smith, J.O. (2011), *Spectral Audio Signal Processing*, W3K Publishing, "Quadratic
  Interpolation of Spectral Peaks" (from memory).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from itertools import pairwise

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import fft as sp_fft
from scipy.optimize import leastsq
from scipy.signal import find_peaks
from threadpoolctl import threadpool_limits
from tonewright.acoustics.decay import band_energy_decay, t60_from_edc
from tonewright.acoustics.pitch import ratio_to_cents

from tonewright.errors import InputError

__all__ = ["Partial", "TapResult", "damped_sinusoid_dft", "find_partials", "find_strikes"]

LN_1000 = float(np.log(1000.0))
MIN_ANALYSED_S = 0.05  # shortest record after the strike that can be analysed at all
MIN_PERIODS_AT_FMIN = 3.0  # the record must hold this many periods of the lowest frequency
FEW_CYCLES = 10.0  # fewer cycles than this in the record: warn
ONSET_FRACTION = 0.2  # onset = first sample above this fraction of the peak level
PAD = 4  # zero-padding factor for detection
MAX_ROUNDS = 3  # fit, search the residual, refit
# A well-posed group converges in a few tens of evaluations; one that needs more is not the
# model (reverberation, a sample's envelope) and is reported from its spectral peak instead.
MAX_FIT_EVALUATIONS = 60
MAX_GROUP = 3  # peaks fitted together at most
MAX_CANDIDATES = 40  # peaks taken from one detection pass, strongest first
# A fitted line weaker than this many standard deviations of its amplitude is noise: pure
# noise exceeds 4 sd with probability exp(-8) = 3e-4 (Rayleigh), while a line that passed the
# 15 dB detection test stands about 4.7 sd above the noise in a single bin, more over many.
MIN_AMPLITUDE_SD = 4.0
# The analysed record: the early, bar-dominated part of the chosen strike. It ends where the
# envelope has fallen ``TAIL_DB`` below its peak (later, a room's reverberation and the noise
# outweigh the bar) or after ``MAX_ANALYSED_S`` (1 s already resolves 1 Hz; 2 s bounds the
# cost), but never before ``MIN_RECORD_S``.
TAIL_DB = 45.0
MAX_ANALYSED_S = 1.0
MIN_RECORD_S = 0.5
MAX_LONGER_S = 3.0  # a close pair may lengthen the record up to this (it costs time)
ENVELOPE_HOP_S = 0.002  # envelope frames for finding strikes and the tail
STRIKE_RISE_DB = 12.0  # a new strike: the envelope jumps this much within STRIKE_RISE_S ...
STRIKE_RISE_S = 0.02
STRIKE_WITHIN_DB = 20.0  # ... to within this much of the loudest frame
CLIP_FRACTION = 0.999  # samples this close to the recording's peak, in runs, are clipped
CLIP_RUN = 3


@dataclass(frozen=True)
class Partial:
    """One fitted partial. ``decay_s`` is the 1/e amplitude time tau; ``amplitude`` is in
    full-scale units, extrapolated back to the detected onset; ``level_db`` is relative to the
    strongest partial of the same recording; the uncertainties are one standard deviation
    from the fit (noise only: not the effect of temperature, mounting or the model)."""

    frequency_hz: float
    level_db: float
    decay_s: float
    frequency_uncertainty_hz: float
    amplitude: float
    decay_uncertainty_s: float = float("nan")
    method: str = "fit"
    """``fit``: the decaying-sinusoid fit; ``peak``: the fit did not settle, so the frequency
    is the interpolated spectral peak (larger uncertainty, level from the peak height, decay
    from the line width: rough)."""
    band_t60_s: float = float("nan")
    """T60 from the backward-integrated energy of the partial's band (``acoustics.decay``:
    not one exponential assumed; what a listener hears over the first 25 dB), NaN where the
    ring does not fall 15 dB above the noise or the line is more than 40 dB down."""

    @property
    def t60_s(self) -> float:
        """Time for the partial to fall by 60 dB: ``tau ln(1000)``."""
        return self.decay_s * LN_1000


@dataclass(frozen=True)
class TapResult:
    """Partials sorted by frequency, notes for the user, where the analysis started (the
    onset of the analysed strike), how long a record was analysed, and the onsets of every
    strike found (s)."""

    partials: tuple[Partial, ...]
    warnings: tuple[str, ...]
    onset_s: float
    analysed_s: float
    strikes_s: tuple[float, ...] = ()

    @property
    def frequencies_hz(self) -> tuple[float, ...]:
        return tuple(p.frequency_hz for p in self.partials)


# --------------------------------------------------------------------------- kernels


def damped_sinusoid_dft(
    u: complex | NDArray[np.complex128], N: int, m: NDArray[np.float64]
) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
    """``G(u) = sum_{n<N} exp(u n) exp(-2 pi i m n / N)`` and ``dG/du`` at bins ``m``.

    ``G = expm1(N u) / expm1(u_m)`` with ``u_m = u - 2 pi i m / N`` (geometric series);
    expm1 keeps precision when ``u_m`` is small (a slow decay close to a bin). An array of
    ``u`` gives one row per ``u``.
    """
    u = np.asarray(u, dtype=complex)[..., None]
    um = u - 2j * np.pi * m / N
    Em = np.expm1(um)
    EN = np.expm1(N * u)
    G = EN / Em
    dG = (N * (EN + 1.0) * Em - EN * (Em + 1.0)) / (Em * Em)
    return G, dG


def _prev_smooth_length(n: int) -> int:
    """Largest 2^a 3^b 5^c not above ``n``: a fast, exact DFT length."""
    best = 1
    p5 = 1
    while p5 <= n:
        p35 = p5
        while p35 <= n:
            v = p35
            while v * 2 <= n:
                v *= 2
            best = max(best, v)
            p35 *= 3
        p5 *= 5
    return best


def _onset_index(x: NDArray[np.float64]) -> int:
    env = np.abs(x - np.median(x))
    return int(np.argmax(env >= ONSET_FRACTION * env.max()))


def _envelope_db(x: NDArray[np.float64], hop: int) -> NDArray[np.float64]:
    """Peak level (dB) of ``x`` minus its median in frames of ``hop`` samples."""
    n = x.size // hop
    frames = np.abs(x[: n * hop] - np.median(x)).reshape(n, hop)
    return 20.0 * np.log10(frames.max(axis=1) + 1e-300)


def find_strikes(x: NDArray[np.float64], rate: float) -> list[int]:
    """Onset samples of every strike in the recording.

    A strike raises many octave bands at once (the click and every partial it excites),
    whereas the beating of a doublet or the decay of a resonator moves one band slowly. In
    frames of ``ENVELOPE_HOP_S``, a frame starts a strike when, within ``STRIKE_RISE_S``, its
    level rose ``STRIKE_RISE_DB`` in at least two active octave bands (bands within 30 dB of
    the loudest band; one when only one is active) and the frame is within
    ``STRIKE_WITHIN_DB`` of the loudest frame. Each onset is then the first sample reaching
    ``ONSET_FRACTION`` of the strike's own peak, so noise before the strike (pre-roll) does
    not move it."""
    hop = max(1, round(ENVELOPE_HOP_S * rate))
    frame = 4 * hop
    n_frames = (x.size - frame) // hop + 1
    centre = np.median(x)
    if n_frames < 4:
        return [_onset_index(x)]
    idx = np.arange(frame)[None, :] + hop * np.arange(n_frames)[:, None]
    frames = x[idx]
    frames = frames - frames.mean(axis=1, keepdims=True)  # a DC offset is no strike
    spec = np.abs(np.fft.rfft(frames * np.hanning(frame), axis=1)) ** 2
    f = np.fft.rfftfreq(frame, 1.0 / rate)
    edges = [0.0, 200.0]
    while edges[-1] * 2 < rate / 2:
        edges.append(edges[-1] * 2)
    edges.append(rate / 2 + 1)
    band = np.searchsorted(edges, f, side="right") - 1
    bands = np.stack([spec[:, band == k].sum(axis=1) for k in range(len(edges) - 1)], axis=1)
    level = 10.0 * np.log10(bands + 1e-300)
    active = level.max(axis=0) >= level.max() - 30.0
    level = level[:, active]
    lag = max(1, round(STRIKE_RISE_S * rate / hop))
    before = np.full_like(level, np.inf)
    for k in range(lag, level.shape[0]):
        before[k] = level[k - lag : k].mean(axis=0)
    # a band counts when it rose and is loud for that band (not noise stirring near its floor)
    band_loud = level >= level.max(axis=0) - STRIKE_WITHIN_DB
    rising = ((level - before >= STRIKE_RISE_DB) & band_loud).sum(axis=1)
    total = 10.0 * np.log10(bands.sum(axis=1) + 1e-300)
    loud = total >= total.max() - STRIKE_WITHIN_DB
    first = int(np.argmax(loud))  # the first strike rises from whatever was before it
    hits = np.flatnonzero(loud & (rising >= min(2, level.shape[1])))
    starts = [first]
    for i in hits:
        if i - starts[-1] > 3 * lag:
            starts.append(int(i))
    onsets = []
    for i in starts:
        a = max(0, (i - lag) * hop)
        b = min(x.size, i * hop + frame + lag * hop)
        env = np.abs(x[a:b] - centre)
        # a later strike rises out of the earlier one's ring: count from that level
        base = env[: max(1, (lag - 4) * hop)].max() if i > starts[0] else 0.0
        level = max(ONSET_FRACTION * env.max(), base + ONSET_FRACTION * (env.max() - base))
        onsets.append(a + int(np.argmax(env >= level)))
    return sorted(set(onsets))


def _choose_strike(
    x: NDArray[np.float64], rate: float, onsets: list[int], need: int
) -> tuple[int, int]:
    """(onset, end) of the strike to analyse: the first whose clean ring (up to the next
    strike) is long enough and within 6 dB of the loudest strike, else the longest ring."""
    ends = [*onsets[1:], x.size]
    centre = np.median(x)
    peaks = np.array(
        [
            np.max(np.abs(x[a : min(b, a + need)] - centre))
            for a, b in zip(onsets, ends, strict=True)
        ]
    )
    for k, (a, b) in enumerate(zip(onsets, ends, strict=True)):
        if b - a >= need and peaks[k] >= 0.5 * peaks.max():
            return a, b
    k = int(np.argmax([b - a for a, b in zip(onsets, ends, strict=True)]))
    return onsets[k], ends[k]


def _record_end(x: NDArray[np.float64], rate: float, start: int, end: int) -> int:
    """End of the analysed record: the envelope ``TAIL_DB`` below its peak, or the cap."""
    hop = max(1, round(ENVELOPE_HOP_S * rate))
    env = _envelope_db(x[start:end], hop)
    if env.size == 0:
        return end
    # smooth over 20 ms so a beat's minimum is not taken for the end of the ring
    w = max(1, round(0.02 * rate / hop))
    smooth = np.convolve(env, np.ones(w) / w, mode="same")
    below = np.flatnonzero(smooth < env.max() - TAIL_DB)
    stop = end if below.size == 0 else start + int(below[0]) * hop
    stop = max(stop, start + round(MIN_RECORD_S * rate))
    return min(end, stop, start + round(MAX_ANALYSED_S * rate))


def _clipped_until(x: NDArray[np.float64], start: int, stop: int) -> int:
    """Last sample (+1) of a clipped run (``CLIP_RUN`` samples at the peak) in ``x[start:stop]``
    or ``start`` when none is there."""
    seg = x[start:stop]
    if seg.size <= CLIP_RUN:
        return start
    peak = np.max(np.abs(seg))
    # a flat top: at the peak, and equal to its neighbour (a sine's top is never that flat
    # above about 12 Hz at 96 kHz)
    flat = (np.abs(seg[1:]) >= CLIP_FRACTION * peak) & (np.abs(np.diff(seg)) <= 1e-6 * peak)
    run = np.convolve(flat.astype(float), np.ones(CLIP_RUN - 1), mode="valid") >= CLIP_RUN - 1
    idx = np.flatnonzero(run)
    return start if idx.size == 0 else start + int(idx[-1]) + CLIP_RUN


def _noise_floor_db(f: NDArray[np.float64], P_db: NDArray[np.float64]) -> NDArray[np.float64]:
    """Noise floor: medians of the dB spectrum in bands max(25 Hz, 1/6 octave) wide."""
    edges = [0.0]
    while edges[-1] < f[-1]:
        edges.append(edges[-1] + max(25.0, 0.12 * edges[-1]))
    edges_a = np.asarray(edges)
    idx = np.searchsorted(f, edges_a)
    centres, medians = [], []
    for i0, i1 in pairwise(idx):
        if i1 - i0 >= 4:
            centres.append(0.5 * (f[i0] + f[i1 - 1]))
            medians.append(np.median(P_db[i0:i1]))
    if not centres:
        return np.full_like(P_db, np.median(P_db))
    # A broad (short-ringing) line can fill its own band, but not the bands either side: lower
    # the floor to what the bands on both sides show (the higher of the lowest two to the left
    # and the lowest two to the right), so a steep slope of the noise itself (a recorder's
    # anti-aliasing roll-off), lower on one side only, does not lower its own floor.
    med = np.asarray(medians)
    low = np.empty(med.size)
    for i in range(med.size):
        sides = [side.min() for side in (med[max(0, i - 2) : i], med[i + 1 : i + 3]) if side.size]
        low[i] = min(med[i], max(sides)) if sides else med[i]
    return np.interp(f, np.asarray(centres), low)


def _detect(
    seg: NDArray[np.float64],
    rate: float,
    fmin: float,
    fmax: float,
    min_snr_db: float,
    min_prominence_db: float,
    dynamic_range_db: float,
    top_db: float | None = None,
) -> tuple[NDArray[np.float64], NDArray[np.float64], float]:
    """Peak frequencies (Hz), -6 dB half-widths (Hz) and the top level (dB) of candidates.

    ``top_db`` is the level that ``dynamic_range_db`` counts down from (default: the
    strongest candidate here; given when searching a residual).
    """
    N = seg.size
    window = np.cos(0.5 * np.pi * np.arange(N) / N) ** 2
    nfft = sp_fft.next_fast_len(PAD * N, real=True)
    S = np.abs(sp_fft.rfft((seg - seg.mean()) * window, nfft))
    P_db = 20.0 * np.log10(S + 1e-300)
    df = rate / nfft
    f = np.arange(S.size) * df
    floor_db = _noise_floor_db(f, P_db)

    # The height test runs before the (costlier) prominence test inside find_peaks.
    idx, _ = find_peaks(P_db, height=floor_db + min_snr_db, prominence=min_prominence_db)
    idx = idx[(f[idx] >= fmin) & (f[idx] <= fmax)]
    if idx.size == 0:
        return np.empty(0), np.empty(0), -np.inf
    if top_db is None:
        top_db = float(P_db[idx].max())
    idx = idx[P_db[idx] >= top_db - dynamic_range_db]
    if idx.size > MAX_CANDIDATES:  # the strongest only: weak junk costs fits, not answers
        idx = np.sort(idx[np.argsort(-P_db[idx])[:MAX_CANDIDATES]])

    a, b, c = P_db[idx - 1], P_db[idx], P_db[idx + 1]
    den = a - 2.0 * b + c
    delta = np.where(den < 0, 0.5 * (a - c) / np.where(den < 0, den, -1.0), 0.0)
    f_peak = (idx + np.clip(delta, -0.5, 0.5)) * df

    half_widths = np.empty(idx.size)
    for j, i in enumerate(idx):
        level = P_db[i] - 6.0
        lo = i
        while lo > 0 and P_db[lo] > level and i - lo < 4096:
            lo -= 1
        hi = i
        while hi < P_db.size - 1 and P_db[hi] > level and hi - i < 4096:
            hi += 1
        half_widths[j] = 0.5 * (hi - lo) * df
    return f_peak, half_widths, top_db


# --------------------------------------------------------------------------- fitting


@dataclass(frozen=True)
class _GroupFit:
    omega: NDArray[np.float64]  # rad/sample
    alpha: NDArray[np.float64]  # 1/sample
    C: NDArray[np.complex128]  # complex amplitude at n = 0
    sd_omega: NDArray[np.float64]
    sd_log_alpha: NDArray[np.float64]
    sd_amp: NDArray[np.float64]
    at_bound: NDArray[np.bool_]
    omega_lo: NDArray[np.float64]
    omega_hi: NDArray[np.float64]
    residual: NDArray[np.complex128]  # data minus model on the group's bins
    omega_start: NDArray[np.float64]  # where the fit started (the detected peak)
    band: tuple[int, int]  # first and last DFT bin fitted


def _partials_dft(
    omega: NDArray[np.float64],
    alpha: NDArray[np.float64],
    C: NDArray[np.complex128],
    N: int,
    m: NDArray[np.float64],
) -> NDArray[np.complex128]:
    """DFT at bins ``m`` of ``sum_k Re(C_k exp(u_k n))``, ``n < N``."""
    if omega.size == 0:
        return np.zeros(m.shape, dtype=complex)
    G, _ = damped_sinusoid_dft(np.concatenate([-alpha + 1j * omega, -alpha - 1j * omega]), N, m)
    return 0.5 * (np.concatenate([C, np.conj(C)]) @ G)


def _design(
    omega: NDArray[np.float64],
    log_alpha: NDArray[np.float64],
    N: int,
    m: NDArray[np.float64],
) -> tuple[NDArray[np.complex128], tuple]:
    """Linear basis (bins x (2K + 4)) and the pieces needed for the nonlinear derivatives:
    ``(alpha, G, dG, Gc, dGc)``, one row per partial for ``u`` and for ``conj(u)``."""
    K = omega.size
    al = np.exp(log_alpha)
    G_all, dG_all = damped_sinusoid_dft(np.concatenate([-al + 1j * omega, -al - 1j * omega]), N, m)
    G, Gc, dG, dGc = G_all[:K], G_all[K:], dG_all[:K], dG_all[K:]
    # x[n] = a e^{-alpha n} cos(omega n) - b e^{-alpha n} sin(omega n), C = a + i b
    B = np.concatenate([0.5 * (G + Gc), 0.5j * (G - Gc), _background(m)])
    return B.T, (al, G, dG, Gc, dGc)


def _background(m: NDArray[np.float64]) -> NDArray[np.complex128]:
    """The linear background's four basis rows over bins ``m``: a complex constant and a
    complex slope in the centred, scaled bin index."""
    mu = (m - 0.5 * (m[0] + m[-1])) / max(1.0, 0.5 * (m[-1] - m[0]))
    ones = np.ones_like(mu, dtype=complex)
    return np.stack([ones, 1j * ones, mu + 0j, 1j * mu])


def _stack(z: NDArray[np.complex128]) -> NDArray[np.float64]:
    return np.concatenate([z.real, z.imag], axis=0)


def _linear_solve(B: NDArray[np.complex128], D: NDArray[np.complex128]):
    coef, *_ = np.linalg.lstsq(_stack(B), _stack(D), rcond=None)
    resid = _stack(D) - _stack(B) @ coef
    return coef, float(resid @ resid)


def _nonlinear_columns(parts: tuple, coef: NDArray[np.float64], K: int) -> NDArray[np.complex128]:
    """d(model)/d(omega_k) and d(model)/d(log alpha_k) at fixed linear coefficients."""
    al, _G, dG, _Gc, dGc = parts
    a, b = coef[:K, None], coef[K : 2 * K, None]
    # d/d omega: dG/du * i for u, dGc/du * (-i) for conj(u)
    dGw, dGcw = 1j * dG, -1j * dGc
    # d/d log(alpha) = alpha d/d alpha, and du/d alpha = -1 for both
    dGl, dGcl = -al[:, None] * dG, -al[:, None] * dGc
    Jw = a * 0.5 * (dGw + dGcw) + b * 0.5j * (dGw - dGcw)
    Jl = a * 0.5 * (dGl + dGcl) + b * 0.5j * (dGl - dGcl)
    return np.concatenate([Jw, Jl]).T


def _start_decays(
    D: NDArray[np.complex128],
    m: NDArray[np.float64],
    N: int,
    omega: NDArray[np.float64],
    log_alpha_hi: float,
) -> NDArray[np.float64]:
    """Starting decays: the shared trial decay on a 12-point grid whose linear least-squares
    fit leaves the smallest residual (all trials in one batch: one DFT kernel call and one
    stacked QR; the basis has full rank, its columns being distinct lines and a background)."""
    K = omega.size
    grid = np.linspace(np.log(0.3 / N), log_alpha_hi - np.log(8.0), 12)
    al = np.exp(grid)[:, None] * np.ones(K)  # (12, K)
    u = np.concatenate([-al + 1j * omega, -al - 1j * omega], axis=1)  # (12, 2K)
    G_all, _ = damped_sinusoid_dft(u, N, m)  # (12, 2K, bins)
    G, Gc = G_all[:, :K], G_all[:, K:]
    background = np.broadcast_to(_background(m), (12, 4, m.size))
    B = np.concatenate([0.5 * (G + Gc), 0.5j * (G - Gc), background], axis=1)  # (12, 2K+4, bins)
    Bst = np.concatenate([B.real, B.imag], axis=2).transpose(0, 2, 1)  # (12, 2 bins, 2K+4)
    Dst = _stack(D)
    Q = np.linalg.qr(Bst)[0]
    projected = np.einsum("tij,i->tj", Q, Dst)
    rss = Dst @ Dst - np.einsum("tj,tj->t", projected, projected)
    return np.full(K, grid[int(np.argmin(rss))])


def _fit_group(
    D: NDArray[np.complex128],
    m: NDArray[np.float64],
    N: int,
    omega_lo: NDArray[np.float64],
    omega_hi: NDArray[np.float64],
    omega0: NDArray[np.float64],
    log_alpha0: NDArray[np.float64] | None,
    omega_start: NDArray[np.float64] | None = None,
) -> _GroupFit:
    """Fit K decaying sinusoids plus a linear background to DFT bins ``D`` at ``m``.

    Variable projection (Golub & Pereyra 1973): for given frequencies and decays the
    amplitudes and the background are the linear least-squares solution, so the solver sees
    only the 2K nonlinear parameters, with Kaufman's (1975) Jacobian of the projected
    residual. The bounds enter through theta = lo + (hi - lo)(1 + sin phi) / 2 (James & Roos
    1975), so MINPACK's Levenberg-Marquardt needs none."""
    K = omega0.size
    nb = m.size
    log_alpha_lo = np.log(1e-3 / N)  # tau up to 1000 records
    log_alpha_hi = np.log(4.0 * np.pi * nb / N)  # a line four times wider than the band
    Dst = _stack(D)

    if log_alpha0 is None:
        log_alpha0 = _start_decays(D, m, N, omega0, log_alpha_hi)
    lo = np.concatenate([omega_lo, np.full(K, log_alpha_lo)])
    hi = np.concatenate([omega_hi, np.full(K, log_alpha_hi)])
    half = 0.5 * (hi - lo)
    theta0 = np.clip(np.concatenate([omega0, log_alpha0]), lo, hi)
    phi0 = np.arcsin(np.clip((theta0 - lo) / half - 1.0, -1.0, 1.0))

    last: list = [None, None]  # the solver asks for the Jacobian where it just evaluated

    def projection_at(phi):
        if last[0] is None or not np.array_equal(last[0], phi):
            theta = lo + half * (1.0 + np.sin(phi))
            B, parts = _design(theta[:K], theta[K:], N, m)
            U, s, Vt = np.linalg.svd(_stack(B), full_matrices=False)
            rank = int(np.sum(s > s[0] * 1e-12 * max(U.shape)))
            U, s, Vt = U[:, :rank], s[:rank], Vt[:rank]
            Ud = U.T @ Dst
            coef = Vt.T @ (Ud / s)
            last[0], last[1] = phi.copy(), (parts, U, coef, U @ Ud - Dst)
        return last[1]

    def residual(phi):
        return projection_at(phi)[3]

    def jacobian(phi):
        parts, U, coef, _ = projection_at(phi)
        Jn = _stack(_nonlinear_columns(parts, coef, K))
        Jn -= U @ (U.T @ Jn)
        return Jn * (half * np.cos(phi))

    # MINPACK's lmder through its thin wrapper (``least_squares(method="lm")`` calls the same
    # routine with more bookkeeping per evaluation); diag=None scales by the Jacobian's columns
    phi = leastsq(
        residual,
        phi0,
        Dfun=jacobian,
        xtol=1e-12,
        ftol=1e-12,
        gtol=1e-12,
        maxfev=MAX_FIT_EVALUATIONS,
        full_output=True,  # reports a capped fit instead of warning: the caller judges it
    )[0]
    theta = lo + half * (1.0 + np.sin(phi))
    w, la = theta[:K], theta[K:]
    B, parts = _design(w, la, N, m)
    coef, _ = _linear_solve(B, D)
    # covariance of all parameters from the full Jacobian at the solution
    J = np.concatenate([_stack(_nonlinear_columns(parts, coef, K)), _stack(B)], axis=1)
    r = _stack(B) @ coef - Dst
    n_nl = 2 * K
    dof = max(1, r.size - J.shape[1])
    s2 = float(r @ r) / dof
    scale = np.linalg.norm(J, axis=0)
    scale[scale == 0] = 1.0
    Js = J / scale
    cov = s2 * np.linalg.pinv(Js.T @ Js) / np.outer(scale, scale)
    sd = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    C = coef[:K] + 1j * coef[K : 2 * K]
    sd_amp = np.hypot(sd[n_nl : n_nl + K], sd[n_nl + K : n_nl + 2 * K]) / np.sqrt(2.0)
    tol = 1e-6 * (omega_hi - omega_lo)
    at_bound = (w - omega_lo < tol) | (omega_hi - w < tol)
    return _GroupFit(
        omega=w,
        alpha=np.exp(la),
        C=C,
        sd_omega=sd[:K],
        sd_log_alpha=sd[K:n_nl],
        sd_amp=sd_amp,
        at_bound=at_bound,
        omega_lo=omega_lo,
        omega_hi=omega_hi,
        residual=-(r[:nb] + 1j * r[nb:]),
        omega_start=np.asarray(omega0 if omega_start is None else omega_start, float).copy(),
        band=(int(m[0]), int(m[-1])),
    )


def _groups(
    lo: NDArray[np.int64], hi: NDArray[np.int64], centre: NDArray[np.float64]
) -> list[list[int]]:
    """Indices of peaks (sorted by frequency) whose bin intervals overlap, chained; a chain
    of more than ``MAX_GROUP`` is split at its widest gaps (the split parts still see each
    other through the Gauss-Seidel subtraction), since the cost of a fit grows steeply with
    its size and a long chain is a reverberant hump, not a cluster of modes."""
    groups: list[list[int]] = []
    end = -1
    for j in range(lo.size):
        if groups and lo[j] <= end:
            groups[-1].append(j)
            end = max(end, hi[j])
        else:
            groups.append([j])
            end = hi[j]
    out: list[list[int]] = []
    todo = groups
    while todo:
        g = todo.pop()
        if len(g) <= MAX_GROUP:
            out.append(g)
            continue
        cut = 1 + int(np.argmax(np.diff(centre[g])))
        todo += [g[:cut], g[cut:]]
    return sorted(out)


def _record_spectrum(
    seg: NDArray[np.float64], rate: float
) -> tuple[NDArray[np.complex128], NDArray[np.float64]]:
    """The record's DFT and the expected noise power in each bin (the median of ``|X|^2`` is
    ln 2 times its mean for Gaussian noise)."""
    X = sp_fft.rfft(seg)
    f = np.arange(X.size) * rate / seg.size
    power_db = 10.0 * np.log10(np.abs(X) ** 2 + 1e-300)
    return X, 10.0 ** (_noise_floor_db(f, power_db) / 10.0) / np.log(2.0)


def _refine(
    seg: NDArray[np.float64],
    rate: float,
    f_peak: NDArray[np.float64],
    half_width_hz: NDArray[np.float64],
    min_snr_db: float,
    previous: list[_GroupFit] | None = None,
    spectrum: tuple[NDArray[np.complex128], NDArray[np.float64]] | None = None,
) -> list[_GroupFit]:
    """Fit every detected peak, group by group; add components the residual still shows.

    With ``previous`` (the fits of an earlier round on the same record) only the new peaks
    are fitted: a previous group whose band overlaps a new peak's is fitted again together
    with it, from where it was; the others are kept as they are (a weak new line moves a
    group it does not overlap by a small fraction of its uncertainty). ``spectrum``: the
    record's ``_record_spectrum``, when it is already known."""
    N = seg.size
    X, noise_power = _record_spectrum(seg, rate) if spectrum is None else spectrum
    m_all = np.arange(X.size, dtype=float)
    bins_per_hz = N / rate
    m_peak = f_peak * bins_per_hz
    # Band: the line's own width several times over, and never fewer than 8 bins a side.
    h = np.maximum(8.0, np.ceil(4.0 * half_width_hz * bins_per_hz))
    lo = np.clip(np.floor(m_peak - h), 1, X.size - 2).astype(int)
    hi = np.clip(np.ceil(m_peak + h), 1, X.size - 2).astype(int)
    groups = _groups(lo, hi, m_peak)
    kept = list(previous or [])
    bands, starts = [], []
    for g in groups:
        reach = 2.0 * np.pi * 0.75 * h[g].min() / N
        omega_det = 2.0 * np.pi * m_peak[g] / N
        a, b = lo[g[0]], max(hi[j] for j in g)
        joined = [
            f
            for f in kept
            if f.band[0] <= b and f.band[1] >= a and f.omega.size + len(g) <= MAX_GROUP + 1
        ][:1]
        start = (omega_det - reach, omega_det + reach, omega_det, None, omega_det)
        if joined:
            old = joined[0]
            kept = [f for f in kept if f is not old]
            a, b = min(a, old.band[0]), max(b, old.band[1])
            la_new = np.full(len(g), np.median(np.log(old.alpha)))
            start = tuple(
                np.concatenate([o, n])
                for o, n in zip(
                    (old.omega_lo, old.omega_hi, old.omega, np.log(old.alpha), old.omega_start),
                    (*start[:3], la_new, start[4]),
                    strict=True,
                )
            )
        bands.append(np.arange(a, b + 1))
        starts.append(start)
    # Expected noise power per bin: median of |X|^2 is ln 2 times its mean for Gaussian noise.
    detect_ratio = 10.0 ** (min_snr_db / 10.0) * np.log(2.0)

    def data(gi: int, fits: list[_GroupFit | None]) -> NDArray[np.complex128]:
        others = kept + [f for gj, f in enumerate(fits) if gj != gi and f is not None]
        if not others:
            return X[bands[gi]].copy()
        omega, alpha, C = (
            np.concatenate([getattr(f, k) for f in others]) for k in "omega alpha C".split()
        )
        return X[bands[gi]] - _partials_dft(omega, alpha, C, N, m_all[bands[gi]])

    fits: list[_GroupFit | None] = [None] * len(groups)
    for _sweep in range(2):
        for gi in range(len(groups)):
            prev = fits[gi]
            if prev is None:
                start = starts[gi]
            else:
                start = (prev.omega_lo, prev.omega_hi, prev.omega, np.log(prev.alpha))
                start += (prev.omega_start,)
            fits[gi] = _fit_group(data(gi, fits), m_all[bands[gi]], N, *start)

    # Two lines closer than the detection window resolves show up as one peak whose fit
    # leaves a structured residual: add a component at the residual's peak while that pays.
    for gi in range(len(groups)):
        for _extra in range(2):
            fit = fits[gi]
            assert fit is not None
            if fit.omega.size >= MAX_GROUP:
                break
            band = bands[gi]
            ratio = np.abs(fit.residual) ** 2 / noise_power[band]
            if ratio.mean() < 4.0 or ratio.max() < detect_ratio:
                break
            j = int(np.argmax(ratio))
            reach = 2.0 * np.pi * 2.0 / N
            omega_new = 2.0 * np.pi * m_all[band][j] / N
            trial = _fit_group(
                data(gi, fits),
                m_all[band],
                N,
                np.append(fit.omega_lo, omega_new - reach),
                np.append(fit.omega_hi, omega_new + reach),
                np.append(fit.omega, omega_new),
                np.log(np.append(fit.alpha, np.median(fit.alpha))),
                np.append(fit.omega_start, omega_new),
            )
            rss_old = float(np.sum(np.abs(fit.residual) ** 2))
            rss_new = float(np.sum(np.abs(trial.residual) ** 2))
            if rss_new > 0.5 * rss_old or abs(trial.C[-1]) < MIN_AMPLITUDE_SD * trial.sd_amp[-1]:
                break
            fits[gi] = trial
    return kept + [f for f in fits if f is not None]


# --------------------------------------------------------------------------- public


def _validate(
    samples: ArrayLike,
    rate: float,
    count: int | None,
    fmin: float,
    fmax: float | None,
    skip_s: float,
) -> tuple[NDArray[np.float64], float]:
    x = np.asarray(samples, dtype=float)
    if x.ndim != 1:
        raise InputError(f"samples: got shape {x.shape}; give one channel (a 1-D array)")
    if x.size == 0:
        raise InputError("samples: the recording is empty")
    if not np.all(np.isfinite(x)):
        raise InputError("samples: the recording holds NaN or infinite values")
    if not np.isfinite(rate) or rate <= 0:
        raise InputError(f"rate: got {rate}; must be a positive sample rate in Hz")
    if count is not None and (int(count) != count or count < 1):
        raise InputError(f"count: got {count}; must be a positive whole number")
    nyquist = rate / 2.0
    fmax_eff = 0.98 * nyquist if fmax is None else float(fmax)
    if not np.isfinite(fmin) or fmin <= 0 or fmin >= nyquist:
        raise InputError(f"fmin: got {fmin} Hz; must be above 0 and below {nyquist:g} Hz")
    if not np.isfinite(fmax_eff) or fmax_eff <= fmin or fmax_eff > nyquist:
        raise InputError(
            f"fmax: got {fmax} Hz; must be above fmin ({fmin:g} Hz) and at most "
            f"the Nyquist frequency {nyquist:g} Hz"
        )
    if not np.isfinite(skip_s) or skip_s < 0:
        raise InputError(f"skip_s: got {skip_s}; must be zero or positive")
    return x, fmax_eff


def find_partials(
    samples: ArrayLike,
    rate: float,
    count: int | None = None,
    fmin: float = 20.0,
    fmax: float | None = None,
    *,
    skip_s: float = 0.01,
    min_snr_db: float = 15.0,
    min_prominence_db: float = 10.0,
    dynamic_range_db: float = 80.0,
) -> TapResult:
    """Frequencies, levels and decay times of the partials in a recording of one strike.

    ``samples`` is one channel in full-scale units; ``count`` keeps only the strongest
    partials (then sorted by frequency); ``fmin``/``fmax`` bound the search (Hz); ``skip_s``
    is the time skipped after the onset to leave out the mallet contact and the click.

    With several strikes in the recording, the first that rings clean (up to the next one)
    for the analysed length and is within 6 dB of the loudest is analysed, and a warning says
    which. The record is the early part of the ring (see ``TAIL_DB``, ``MAX_ANALYSED_S``); a
    clipped start is skipped. A peak whose fit does not settle is reported from the spectrum
    (``Partial.method == "peak"``) rather than dropped.
    """
    # hundreds of tiny least-squares problems: one BLAS thread is fastest (threads that wait
    # on each other cost more than the sums)
    with threadpool_limits(limits=1, user_api="blas"):
        return _find_partials(
            samples,
            rate,
            count,
            fmin,
            fmax,
            skip_s,
            min_snr_db,
            min_prominence_db,
            dynamic_range_db,
        )


def _find_partials(
    samples: ArrayLike,
    rate: float,
    count: int | None,
    fmin: float,
    fmax: float | None,
    skip_s: float,
    min_snr_db: float,
    min_prominence_db: float,
    dynamic_range_db: float,
) -> TapResult:
    x, fmax_eff = _validate(samples, rate, count, fmin, fmax, skip_s)
    need_s = max(MIN_ANALYSED_S, MIN_PERIODS_AT_FMIN / fmin)
    warnings: list[str] = []
    onsets = find_strikes(x, rate)
    want = round(max(need_s, MIN_RECORD_S) * rate) + round(skip_s * rate)
    onset, end = _choose_strike(x, rate, onsets, want)
    if len(onsets) > 1:
        others = ", ".join(f"{o / rate:.3f}" for o in onsets)
        warnings.append(
            f"{len(onsets)} strikes found (at {others} s); analysed the one at "
            f"{onset / rate:.3f} s"
            + (f", up to the next at {end / rate:.3f} s" if end < x.size else "")
        )
    start = onset + round(skip_s * rate)
    available_s = max(0, end - start) / rate
    if available_s < need_s:
        raise InputError(
            f"recording: {available_s:.3f} s of sound after the strike; need at least "
            f"{need_s:.3f} s to measure down to fmin={fmin:g} Hz (record longer, or raise fmin)"
        )
    clip_end = _clipped_until(x, onset, end)
    if clip_end > start:
        if (end - clip_end) / rate >= max(need_s, 0.5 * MIN_RECORD_S):
            warnings.append(
                f"the strike is clipped until {clip_end / rate:.3f} s; analysed from there "
                "(levels are referred to the onset from the fitted decays)"
            )
            start = clip_end
        else:
            warnings.append(
                "the strike is clipped and too short to skip the clipped part: clipping adds "
                "false partials at sums and multiples; record with less gain"
            )
    stop = _record_end(x, rate, start, end)
    first = start  # where the record of the reported lines starts
    detect_args = (rate, fmin, fmax_eff, min_snr_db, min_prominence_db, dynamic_range_db)
    strikes_s = tuple(o / rate for o in onsets)
    N = _prev_smooth_length(max(stop - start, round(need_s * rate)))
    raw, notes = _analyse(x[start : start + N], detect_args, min_snr_db)
    # A room's own response to each partial rings close beside it and dies fast (its
    # reverberation time): once that has died away, a later start sees the bar's line alone.
    late = _room_settling(raw, rate)
    if late and (end - start - late) / rate >= MIN_RECORD_S:
        N2 = _prev_smooth_length(min(N, end - start - late))
        raw2, notes2 = _analyse(x[start + late : start + late + N2], detect_args, min_snr_db)
        if raw2:
            # refer the later record's amplitudes to the earlier start; keep the early-only
            # lines (short partials that have died by then). A late line that would have been
            # more than 20 dB louder at the start has mostly died before the late record:
            # the early record measured it better (and its extrapolation would swamp the
            # levels of everything else).
            raw2 = [
                (f, sd, a * np.exp(late / (tau * rate)) if np.isfinite(tau) else a, tau, sdt, how)
                for f, sd, a, tau, sdt, how in raw2
                if not (np.isfinite(tau) and late / (tau * rate) > LATE_GAIN_LN)
            ]
            f2 = np.array([r[0] for r in raw2])
            early = [r for r in raw if not f2.size or np.min(np.abs(f2 - r[0])) > 2.0 * rate / N2]
            raw, notes = raw2 + early, notes2
            warnings.append(
                f"reverberation beside the partials: analysed from {(start + late) / rate:.3f} s, "
                "after the room's own response died away"
            )
            first = start + late
    # Two strong lines closer than the record resolves: analyse the band around each such
    # pair over a longer record (the rest keep the short record's fits).
    resolved = _resolve_close_pairs(x, start, first, end, N, raw, detect_args, min_snr_db)
    if resolved is not None:
        raw, bands, extra_notes, T_long = resolved
        notes += extra_notes
        names = ", ".join(f"{lo:.0f}-{hi:.0f} Hz" for lo, hi in bands)
        warnings.append(f"close pairs: {names} analysed over {T_long:.2f} s")
    else:
        bands, T_long = [], N / rate
    T = N / rate
    warnings += notes
    if raw is None:
        return TapResult((), tuple(warnings), onset / rate, T, strikes_s)

    # amplitude back at the onset, so that levels compare the strike itself
    raw = [
        (
            f,
            sd_f,
            a * np.exp((start - onset) / (tau * rate)) if np.isfinite(tau) else a,
            tau,
            sd_tau,
            how,
        )
        for f, sd_f, a, tau, sd_tau, how in raw
    ]
    raw.sort(key=lambda r: r[0])
    raw = _merge_duplicates(raw, 0.25 / T)
    if count is not None:
        raw = sorted(sorted(raw, key=lambda r: -r[2])[:count], key=lambda r: r[0])
    if not raw:
        warnings.append("no partial survived the fit")
        return TapResult((), tuple(warnings), onset / rate, T, strikes_s)

    a_max = max(r[2] for r in raw)
    partials = tuple(
        Partial(
            frequency_hz=float(f),
            level_db=float(20.0 * np.log10(a / a_max)),
            decay_s=float(tau),
            frequency_uncertainty_hz=float(sd_f),
            amplitude=float(a),
            decay_uncertainty_s=float(sd_tau),
            method=how,
        )
        for f, sd_f, a, tau, sd_tau, how in raw
    )
    partials = _with_band_decays(partials, x, rate, onset, first, end)
    for p in partials:
        ring = 3.0 * p.decay_s if np.isfinite(p.decay_s) else T
        cycles = p.frequency_hz * min(T, ring)
        if cycles < FEW_CYCLES:
            warnings.append(
                f"partial at {p.frequency_hz:.2f} Hz rings for only {cycles:.0f} cycles; "
                "its frequency is rough"
            )
    for p, q in pairwise(partials):
        gap = q.frequency_hz - p.frequency_hz
        long = any(lo <= p.frequency_hz and q.frequency_hz <= hi for lo, hi in bands)
        if gap * (T_long if long else T) < 2.0:
            warnings.append(
                f"partials at {p.frequency_hz:.2f} and {q.frequency_hz:.2f} Hz are too close "
                f"for this record; a recording of at least {2.0 / gap:.2f} s after the strike "
                "would separate them"
            )
    return TapResult(partials, tuple(warnings), onset / rate, T, strikes_s)


BAND_DECAY_DB = 40.0  # band decays for the lines this close to the strongest


def _with_band_decays(
    partials: tuple[Partial, ...],
    x: NDArray[np.float64],
    rate: float,
    onset: int,
    first: int,
    end: int,
) -> tuple[Partial, ...]:
    """Each strong line with the T60 of its band's energy from ``first`` to ``end``; the
    band's noise from the pre-roll when there is one (20 ms up to 5 ms before the onset)."""
    pre = onset - round(0.005 * rate)
    noise = x[:pre] if pre >= round(0.02 * rate) else None
    f = np.array([p.frequency_hz for p in partials])
    out = []
    for i, p in enumerate(partials):
        if p.level_db < -BAND_DECAY_DB:
            out.append(p)
            continue
        # lines closer than a record's resolution ring as one (a doublet beats in its band)
        others = np.abs(np.delete(f, i) - p.frequency_hz)
        others = others[others > 2.0]
        neighbour = float(np.min(others)) if others.size else 100.0
        t, edc_db, range_db = band_energy_decay(
            x[first:end], rate, p.frequency_hz, min(neighbour, 100.0), noise
        )
        out.append(replace(p, band_t60_s=t60_from_edc(t, edc_db, range_db)[0]))
    return tuple(out)


ROOM_NEIGHBOUR_CENTS = 40.0  # a room's response to a partial lies this close to it ...
ROOM_DECAY_RATIO = 0.25  # ... and dies at least this much faster
MAX_LATE_START_S = 0.25
LATE_GAIN_LN = float(np.log(10.0))  # 20 dB: see find_partials


def _room_settling(raw: list[tuple] | None, rate: float) -> int:
    """Samples to wait for the room's own response: three times the longest decay of the
    short lines that stand beside a stronger, longer line (0: none)."""
    if not raw:
        return 0
    taus = []
    for f, _, a, tau, _, _ in raw:
        for g, _, b, tau_g, _, _ in raw:
            close = abs(float(ratio_to_cents(f / g))) < ROOM_NEIGHBOUR_CENTS
            if close and g != f and b > a and np.isfinite(tau) and tau < ROOM_DECAY_RATIO * tau_g:
                taus.append(tau)
    if not taus:
        return 0
    return round(min(3.0 * max(taus), MAX_LATE_START_S) * rate)


def _strong_pairs(raw: list[tuple] | None) -> list[tuple[tuple, tuple]]:
    """Neighbouring lines that are both within 30 dB of the strongest and within 20 dB of
    each other, with decays within a factor 4: a pair worth a longer record (a doublet),
    unlike a weak or short ripple beside a loud line (a room's reverberation)."""
    if not raw:
        return []
    rows = sorted(raw, key=lambda r: r[0])
    top = max(r[2] for r in rows)
    return [
        (p, q)
        for p, q in pairwise(rows)
        if min(p[2], q[2]) >= top * 10 ** (-30 / 20)
        and min(p[2], q[2]) >= 0.1 * max(p[2], q[2])
        and min(p[3], q[3]) >= ROOM_DECAY_RATIO * max(p[3], q[3])  # not a room's response
    ]


def _resolve_close_pairs(
    x: NDArray[np.float64],
    start: int,
    first: int,
    end: int,
    N: int,
    raw: list[tuple] | None,
    detect_args: tuple,
    min_snr_db: float,
) -> tuple[list[tuple], list[tuple[float, float]], list[str], float] | None:
    """Lines with the bands of close strong pairs re-analysed over a longer record.

    A pair ``g`` Hz apart needs about ``2 / g`` s of record (up to ``MAX_LONGER_S``, and what
    the strike offers after ``first``, where the reported lines' record starts); only the
    band around each pair (ten resolutions of the short record beyond it) is analysed again,
    so the cost follows the pairs, not the whole spectrum. Amplitudes are referred to
    ``start``. None: no pair needs it, or the strike offers no longer record."""
    rate, fmin, fmax_eff = detect_args[:3]
    T = N / rate
    close = [(p, q) for p, q in _strong_pairs(raw) if (q[0] - p[0]) * T < 2.0]
    if raw is None or not close or end - first <= N:
        return None
    gap = min(q[0] - p[0] for p, q in close)
    longer = min(end - first, round(1.1 * 2.0 / gap * rate), round(MAX_LONGER_S * rate))
    if longer <= N:
        return None
    N_long = _prev_smooth_length(longer)
    margin = 10.0 / T
    bands: list[list[float]] = []
    for p, q in close:
        lo, hi = max(fmin, p[0] - margin), min(fmax_eff, q[0] + margin)
        if bands and lo <= bands[-1][1]:
            bands[-1][1] = hi
        else:
            bands.append([lo, hi])
    out, notes, done = list(raw), [], []
    seg = x[first : first + N_long]
    spectrum = _record_spectrum(seg, rate)
    for lo, hi in bands:
        args = (rate, lo, hi, *detect_args[3:])
        found, band_notes = _analyse(seg, args, min_snr_db, spectrum)
        if not found:
            continue
        shift = first - start
        found = [
            (f, sd, a * np.exp(shift / (tau * rate)) if np.isfinite(tau) else a, tau, sdt, how)
            for f, sd, a, tau, sdt, how in found
        ]
        out = [r for r in out if not lo <= r[0] <= hi] + found
        notes += band_notes
        done.append((lo, hi))
    return (out, done, notes, N_long / rate) if done else None


def _analyse(
    seg: NDArray[np.float64],
    detect_args: tuple,
    min_snr_db: float,
    spectrum: tuple[NDArray[np.complex128], NDArray[np.float64]] | None = None,
) -> tuple[list[tuple] | None, list[str]]:
    """Detect, fit and search the residual of one record: (f, sd_f, amplitude at the
    record's start, tau, sd_tau, method) per line (None: no peak at all), and notes.
    ``spectrum``: the record's ``_record_spectrum``, when it is already known."""
    rate, fmin, fmax_eff = detect_args[:3]
    N = seg.size
    T = N / rate
    notes: list[str] = []

    f_peak, half_width, top_db = _detect(seg, *detect_args)
    if f_peak.size == 0:
        notes.append(
            f"no partials found between {fmin:g} and {fmax_eff:g} Hz "
            f"at {min_snr_db:g} dB above the noise floor"
        )
        return None, notes

    fits: list[_GroupFit] | None = None
    for _round in range(MAX_ROUNDS):
        spectrum = spectrum or _record_spectrum(seg, rate)
        fits = _refine(seg, rate, f_peak, half_width, min_snr_db, fits, spectrum)
        raw, dropped, weak = _accepted(fits, rate, fmin, fmax_eff)
        # A weak partial masked by a loud neighbour's skirt appears once the fitted
        # partials are subtracted: search the residual and refit with what it reveals.
        residual = seg - _synthesize(fits, N)
        f_new, hw_new, _ = _detect(residual, *detect_args, top_db=top_db)
        f_fit = np.array([r[0] for r in raw])
        if f_fit.size:
            f_new_ok = np.array([np.min(np.abs(f_fit - fn)) > 1.0 / T for fn in f_new], bool)
            f_new, hw_new = f_new[f_new_ok], hw_new[f_new_ok]
        if f_new.size == 0:
            break
        order = np.argsort(f_new)
        f_peak, half_width = f_new[order], hw_new[order]

    peaks = _SpectrumPeaks(seg, rate, min_snr_db)
    raw = _contradicted_fits(raw, peaks, T, notes)
    # A peak whose fit did not settle is still a line: report it from the spectrum.
    fitted_f = np.array([r[0] for r in raw])
    # a weak fit is only a line when the spectrum shows it clearly (10 dB over detection)
    candidates = [(f_d, 0.0) for f_d in dropped] + [(f_d, 10.0) for f_d in weak]
    for f_d, margin_db in sorted(candidates):
        if not fmin <= f_d <= fmax_eff:
            continue
        if fitted_f.size and np.min(np.abs(fitted_f - f_d)) < 1.0 / T:
            continue
        line = peaks.line_near(f_d, 1.0 / T, margin_db)
        if line is None or any(abs(r[0] - line[0]) < 0.5 / T for r in raw if r[5] == "peak"):
            continue
        raw.append(line)
        notes.append(
            f"the fit near {line[0]:.1f} Hz did not settle; reported the spectral peak "
            f"(+- {line[1]:.2g} Hz)"
        )

    return raw, notes


def _contradicted_fits(
    raw: list[tuple], peaks: _SpectrumPeaks, T: float, notes: list[str]
) -> list[tuple]:
    """Fits that the spectrum contradicts, with their spread widened to the disagreement.

    For one exponentially decaying line the peak of the windowed spectrum lies at the line's
    frequency (the falling half-Hann window is a sum of three exponentials, and their
    Lorentzians add to a magnitude symmetric about it). An isolated line (no other within
    four resolutions, whose skirt would pull the peak) whose fit lies further from that peak
    than two combined standard deviations does not ring as one exponential (a sample's
    envelope, a pair too close to resolve, a room's response): the fit stays (on the
    corpus it is the closer of the two more often), and its spread becomes the
    disagreement."""
    out = []
    for r in raw:
        f, sd = r[0], r[1]
        isolated = all(abs(q[0] - f) > 4.0 / T for q in raw if q is not r)
        line = peaks.line_near(f, 1.5 / T) if isolated and r[5] == "fit" else None
        if line is not None:
            gap = abs(line[0] - f)
            if gap > 2.0 * np.hypot(sd, line[1]):
                out.append((f, gap, *r[2:]))
                notes.append(
                    f"the fit at {f:.2f} Hz lies {gap:.2g} Hz off the spectral peak (the ring "
                    f"is not one exponential): its spread is widened to +- {gap:.2g} Hz"
                )
                continue
        out.append(r)
    return out


class _SpectrumPeaks:
    """Interpolated peaks of the detection spectrum (falling half-Hann, 4x zero padding)."""

    def __init__(self, seg: NDArray[np.float64], rate: float, min_snr_db: float) -> None:
        N = seg.size
        self.N, self.rate = N, rate
        self.window = np.cos(0.5 * np.pi * np.arange(N) / N) ** 2
        nfft = sp_fft.next_fast_len(PAD * N, real=True)
        S = np.abs(sp_fft.rfft((seg - seg.mean()) * self.window, nfft))
        self.P_db = 20.0 * np.log10(S + 1e-300)
        self.S = S
        self.df = rate / nfft
        self.f = np.arange(S.size) * self.df
        self.floor_db = _noise_floor_db(self.f, self.P_db)
        self.min_snr_db = min_snr_db
        # the window's own -6 dB half-width (Hz), for telling the line's width from it
        W = np.abs(sp_fft.rfft(self.window, nfft))
        self.window_hw = float(np.argmax(W < 0.5 * W[0])) * self.df

    def line_near(self, f_hz: float, reach_hz: float, margin_db: float = 0.0) -> tuple | None:
        """(f, sd_f, amplitude, tau, sd_tau, "peak") of the largest peak within ``reach_hz``
        of ``f_hz``, or None when nothing there stands above the noise."""
        lo = max(1, int((f_hz - reach_hz) / self.df))
        hi = min(self.P_db.size - 2, int(np.ceil((f_hz + reach_hz) / self.df)))
        if hi <= lo:
            return None
        i = lo + int(np.argmax(self.P_db[lo : hi + 1]))
        if not (self.P_db[i] >= self.P_db[i - 1] and self.P_db[i] >= self.P_db[i + 1]):
            return None
        snr_db = self.P_db[i] - self.floor_db[i]
        if snr_db < self.min_snr_db + margin_db:
            return None
        a, b, c = self.P_db[i - 1], self.P_db[i], self.P_db[i + 1]
        den = a - 2.0 * b + c
        delta = float(np.clip(0.5 * (a - c) / den, -0.5, 0.5)) if den < 0 else 0.0
        f = (i + delta) * self.df
        level = b - 6.0
        j0 = i
        while j0 > 0 and self.P_db[j0] > level:
            j0 -= 1
        j1 = i
        while j1 < self.P_db.size - 1 and self.P_db[j1] > level:
            j1 += 1
        hw = 0.5 * (j1 - j0) * self.df
        # Lorentzian half-width sqrt(3) alpha / 2 pi on top of the window's own width: rough
        excess = np.sqrt(max(hw * hw - self.window_hw**2, 0.0))
        tau = np.sqrt(3.0) / (2.0 * np.pi * excess) if excess > 0 else float("nan")
        alpha = 0.0 if not np.isfinite(tau) else 1.0 / (tau * self.rate)
        gain = float(np.sum(self.window * np.exp(-alpha * np.arange(self.N))))
        amp = 2.0 * self.S[i] / gain
        # Honest spread: a tenth of the line's width, and never under 0.1 / record: the
        # signal here did not follow the model, so the peak's position is all that is known.
        T = self.N / self.rate
        sd_f = max(0.1 * hw, 0.1 / T)
        return (f, sd_f, amp, tau, float("nan"), "peak")


def _synthesize(fits: list[_GroupFit], N: int, block: int = 512) -> NDArray[np.float64]:
    """Time signal ``sum_k Re(C_k exp((-alpha_k + i omega_k) n))`` of all fitted partials.

    With ``n = b block + j``, ``z^n = z^(b block) z^j``: two short tables of exponentials and
    one matrix product instead of an exponential per partial and sample."""
    u = np.concatenate([-f.alpha + 1j * f.omega for f in fits]) if fits else np.zeros(0)
    C = np.concatenate([f.C for f in fits]) if fits else np.zeros(0)
    if u.size == 0:
        return np.zeros(N)
    starts = np.arange(0, N, block)
    head = np.exp(np.outer(starts, u)) * C  # (blocks, K)
    tail = np.exp(np.outer(u, np.arange(block)))  # (K, block)
    return np.real(head @ tail).reshape(-1)[:N]


def _accepted(
    fits: list[_GroupFit], rate: float, fmin: float, fmax: float
) -> tuple[list[tuple], list[float], list[float]]:
    """(f_hz, sd_f_hz, amplitude, tau_s, sd_tau_s, "fit") of the trustworthy fits, and the
    starting frequencies (Hz) of the fits that did not settle (held by a bound) and of those
    whose fitted amplitude is lost in its own uncertainty."""
    to_hz = rate / (2.0 * np.pi)
    raw, dropped, weak = [], [], []
    for fit in fits:
        for k in range(fit.omega.size):
            f_hz = fit.omega[k] * to_hz
            amp = abs(fit.C[k])
            if fit.at_bound[k] or not (fmin <= f_hz <= fmax):
                dropped.append(float(fit.omega_start[k] * to_hz))
            elif amp < MIN_AMPLITUDE_SD * fit.sd_amp[k]:
                # noise once fitted, or a line the model does not describe: the spectrum decides
                weak.append(float(fit.omega_start[k] * to_hz))
            else:
                tau = 1.0 / (fit.alpha[k] * rate)
                sd_f = fit.sd_omega[k] * to_hz
                raw.append((f_hz, sd_f, amp, tau, fit.sd_log_alpha[k] * tau, "fit"))
    return raw, dropped, weak


def _merge_duplicates(raw: list[tuple], min_gap_hz: float) -> list[tuple]:
    """Keep the stronger of two fits that landed on the same frequency."""
    out: list[tuple] = []
    for r in raw:
        if out and r[0] - out[-1][0] < min_gap_hz:
            if r[2] > out[-1][2]:
                out[-1] = r
        else:
            out.append(r)
    return out
