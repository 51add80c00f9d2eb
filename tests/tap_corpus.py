"""A realistic corpus of bar and chime taps, made here (nothing binary is committed).

Each case is an invented strike on an invented bar with its true lines and their labels:
bending partials of a tuned bar, a torsional and a lateral mode, close doublets that beat,
the harmonics of a tuned resonator tube, mains hum, room rumble, noise at a stated SNR,
reverberation from a synthetic room impulse response, a second strike, clipping and stereo
channels with a delay and a sign flip. The room impulse response is exponentially decaying
Gaussian noise with the stated T60 (the statistical model of a diffuse late field:
Schroeder, M.R. (1962), "Frequency-correlation functions of frequency responses in rooms",
J. Acoust. Soc. Am. 34(12), 1819-1823, from memory) after a direct path of weight 1.

Rendering sample-based notes needs ``fluidsynth`` and the FluidR3 GM sound bank (Debian
packages ``fluidsynth`` and ``fluid-soundfont-gm``, MIT licence); ``render_note`` writes a
one-note MIDI file and renders it.
"""

from __future__ import annotations

import shutil
import struct
import subprocess
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy.signal import fftconvolve

SF2 = Path("/usr/share/sounds/sf2/FluidR3_GM.sf2")
GM_PROGRAM = {"glockenspiel": 9, "vibraphone": 11, "marimba": 12, "xylophone": 13, "tubular": 14}


@dataclass(frozen=True)
class Line:
    f_hz: float
    amplitude: float
    tau_s: float
    label: str  # "bending 1", "torsion 1", "resonator", "electrical", ...


@dataclass
class Case:
    name: str
    rate: int
    samples: np.ndarray  # (n,) or (n, channels)
    lines: list[Line]
    snr_db: float
    notes: list[str] = field(default_factory=list)

    def strong(self, within_db: float = 30.0) -> list[Line]:
        """Lines within ``within_db`` of the strongest (by initial amplitude, as heard)."""
        top = max(ln.amplitude for ln in self.lines)
        return [ln for ln in self.lines if 20 * np.log10(ln.amplitude / top) >= -within_db]


def ring(lines: list[Line], rate: int, dur: float, rng: np.random.Generator) -> np.ndarray:
    t = np.arange(int(dur * rate)) / rate
    y = np.zeros_like(t)
    for ln in lines:
        y += (
            ln.amplitude
            * np.exp(-t / ln.tau_s)
            * np.cos(2 * np.pi * ln.f_hz * t + rng.uniform(0, 6.3))
        )
    return y


def room_impulse(rate: int, t60_s: float, rng: np.random.Generator, wet: float = 0.5) -> np.ndarray:
    """Direct path plus exponentially decaying noise (amplitude -60 dB at ``t60_s``)."""
    n = int(1.2 * t60_s * rate)
    t = np.arange(n) / rate
    h = rng.normal(0.0, 1.0, n) * np.exp(-np.log(1000.0) * t / t60_s)
    h[: int(0.003 * rate)] = 0.0  # first reflections arrive a few ms after the direct sound
    h *= wet / np.sqrt(np.sum(h**2))
    h[0] = 1.0
    return h


def tuned_bar(f1: float, *, doublet_cents: float = 0.0, torsion: bool = True) -> list[Line]:
    """A marimba-style bar tuned 1 : 4 : 10 with a torsional and a lateral mode between
    (invented values of the kind a tap shows); ``doublet_cents`` splits bending 2 into two
    lines of equal strength (a bar whose width and thickness modes nearly coincide)."""
    lines = [
        Line(f1, 1.0, 0.9, "bending 1"),
        Line(3.97 * f1, 0.5, 0.35, "bending 2"),
        Line(9.93 * f1, 0.25, 0.12, "bending 3"),
    ]
    if torsion:
        lines += [Line(2.61 * f1, 0.08, 0.3, "torsion 1"), Line(5.7 * f1, 0.06, 0.2, "lateral 1")]
    if doublet_cents:
        b2 = lines[1]
        split = 2 ** (doublet_cents / 1200)
        lines[1] = Line(b2.f_hz, 0.35, b2.tau_s, "bending 2")
        lines.append(Line(b2.f_hz * split, 0.35, 0.8 * b2.tau_s, "bending 2"))
    return lines


def strike_case(
    name: str,
    f1: float = 261.6,
    *,
    rate: int = 44100,
    dur: float = 2.0,
    snr_db: float = 40.0,
    doublet_cents: float = 0.0,
    t60_s: float | None = None,
    hum_hz: float | None = None,
    rumble: float = 0.0,
    resonator: bool = False,
    second_strike_s: float | None = None,
    clip: float | None = None,
    stereo: bool = False,
    pre_s: float = 0.1,
    seed: int = 0,
) -> Case:
    rng = np.random.default_rng(seed)
    lines = tuned_bar(f1, doublet_cents=doublet_cents)
    if resonator:
        # a closed tube under the bar rings at its odd harmonics, the first tuned to f1 a few
        # cents off; it rings longer and weaker than the bar
        lines += [Line(3.0 * f1 * 1.003, 0.04, 0.6, "resonator")]
    y = ring(lines, rate, dur, rng)
    n = int(0.002 * rate)
    y[:n] += 0.3 * rng.normal(0.0, 1.0, n) * np.hanning(n)  # the mallet's click
    if second_strike_s is not None:
        k = int(second_strike_s * rate)
        y[k:] += 0.7 * ring(lines, rate, dur, rng)[: y.size - k]
    if t60_s is not None:
        h = room_impulse(rate, t60_s, rng)
        y = fftconvolve(y, h)[: y.size]
    y = np.concatenate([np.zeros(int(pre_s * rate)), y])
    t = np.arange(y.size) / rate
    rms = np.sqrt(np.mean(y**2))
    if hum_hz is not None:
        for k, a in ((1, 0.03), (2, 0.01), (3, 0.02)):
            y += a * np.max(np.abs(y)) * np.sin(2 * np.pi * k * hum_hz * t + k)
        lines += [Line(hum_hz, 0.0, np.inf, "electrical")]
    if rumble:
        # room rumble: noise below 40 Hz (a fan, traffic), well above the line noise
        spec = np.fft.rfft(rng.normal(0.0, 1.0, y.size))
        fr = np.fft.rfftfreq(y.size, 1.0 / rate)
        spec *= 1.0 / (1.0 + (fr / 25.0) ** 8)
        r = np.fft.irfft(spec, y.size)
        y += rumble * np.max(np.abs(y)) * r / np.max(np.abs(r))
    y = y + rng.normal(0.0, rms * 10 ** (-snr_db / 20), y.size)
    y = 0.8 * y / np.max(np.abs(y))
    if clip is not None:
        y = np.clip(y / clip, -0.999, 0.999) * 0.999  # hot gain, flattened at full scale
    if stereo:
        lag = int(0.0007 * rate)  # a second microphone 24 cm further away, wired inverted
        right = -0.8 * np.concatenate([np.zeros(lag), y[: y.size - lag]])
        right += rng.normal(0.0, rms * 10 ** (-snr_db / 20), y.size) * 0.8 / np.max(np.abs(y))
        y = np.column_stack([y, right])
    return Case(name, rate, y, [ln for ln in lines if ln.amplitude > 0], snr_db)


def corpus() -> list[Case]:
    """The cases the acceptance test runs (seeds fixed, so the corpus is the same each run)."""
    cases = []
    for snr in (20.0, 30.0, 45.0):
        cases.append(strike_case(f"clean snr {snr:g}", snr_db=snr, seed=int(snr)))
    for t60 in (0.3, 0.8, 1.5):
        cases.append(strike_case(f"reverb T60 {t60:g} s", t60_s=t60, seed=int(10 * t60)))
    cases += [
        strike_case("doublet 8 cents beating", doublet_cents=8.0, seed=3),
        strike_case("two strikes", second_strike_s=0.9, seed=4),
        strike_case("hum 50 Hz and rumble", hum_hz=50.0, rumble=0.3, seed=5),
        strike_case("hum 60 Hz, low bar", f1=110.0, hum_hz=60.0, seed=6),
        strike_case("clipped", clip=0.4, seed=7),
        strike_case("stereo inverted and delayed", stereo=True, seed=8),
        strike_case("resonator", resonator=True, seed=9),
        strike_case("high bar, reverb, noise", f1=1046.5, t60_s=0.8, snr_db=25.0, seed=10),
        strike_case(
            "everything",
            t60_s=0.6,
            hum_hz=50.0,
            doublet_cents=10.0,
            resonator=True,
            stereo=True,
            snr_db=30.0,
            seed=11,
        ),
    ]
    return cases


# --------------------------------------------------------------------------- sound bank


def have_sound_bank() -> str | None:
    """None when notes can be rendered, else the reason they cannot."""
    if shutil.which("fluidsynth") is None:
        return "fluidsynth is not installed (apt-get install fluidsynth fluid-soundfont-gm)"
    if not SF2.exists():
        return f"{SF2} is missing (apt-get install fluid-soundfont-gm)"
    return None


def _midi_one_note(path: Path, program: int, note: int, velocity: int, hold_s: float) -> None:
    """A type-0 MIDI file: tempo 120, program change, one note held ``hold_s``."""
    tpq, tempo_us = 480, 500_000

    def vlq(n: int) -> bytes:
        out = [n & 0x7F]
        n >>= 7
        while n:
            out.append((n & 0x7F) | 0x80)
            n >>= 7
        return bytes(reversed(out))

    ticks = int(hold_s * 1e6 / tempo_us * tpq)
    events = b"".join(
        [
            vlq(0) + b"\xff\x51\x03" + tempo_us.to_bytes(3, "big"),
            vlq(0) + bytes([0xC0, program]),
            vlq(0) + bytes([0x90, note, velocity]),
            vlq(ticks) + bytes([0x80, note, 0]),
            vlq(0) + b"\xff\x2f\x00",
        ]
    )
    header = b"MThd" + struct.pack(">IHHH", 6, 0, 1, tpq)
    path.write_bytes(header + b"MTrk" + struct.pack(">I", len(events)) + events)


def render_note(
    out: Path, instrument: str, note: int, *, reverb: bool, rate: int = 44100, hold_s: float = 3.0
) -> Path:
    """Render one General MIDI note of ``instrument`` to a stereo WAV with fluidsynth."""
    mid = out.with_suffix(".mid")
    _midi_one_note(mid, GM_PROGRAM[instrument], note, 100, hold_s)
    subprocess.run(
        [
            "fluidsynth",
            "-ni",
            "-q",
            "-R",
            "1" if reverb else "0",
            "-C",
            "0",
            "-g",
            "0.5",
            "-r",
            str(rate),
            "-F",
            str(out),
            str(SF2),
            str(mid),
        ],
        check=True,
        capture_output=True,
        timeout=60,
    )
    return out
