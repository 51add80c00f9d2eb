"""Accuracy and speed of ``find_partials`` on synthetic strikes (run: python benchmarks/tap.py).

Each scenario is an invented strike: decaying sinusoids with known frequencies and decays,
white noise at the stated SNR (RMS of the strike over the record / RMS of the noise), a DC
offset and a 2 ms broadband click. Reports the worst frequency error in cents, the worst
relative decay error, the median reported uncertainty in cents, and the time per analysis.

Then the speed goal: 5 s stereo recordings read and analysed end to end in under 1 s each,
against a peer route in the same run (a plain 8x zero-padded FFT of the whole mixed record
with peak picking: no fit, no uncertainty), as a ratio. Cases: an invented bar 1:4:10 at
262 Hz (noise at 30 dB, two channels with a delay and a sign flip) with a 10 cent doublet,
hum and a 0.6 s room; in a T60 1.5 s room; with an 8 cent doublet in a 0.8 s room and a
10 cent doublet in a 1.5 s room; and, when fluidsynth and the FluidR3 GM bank are installed,
General-MIDI marimba, xylophone, glockenspiel, vibraphone and tubular-bell notes cut or padded
to 5 s, dry and with fluidsynth's reverb.
"""

from __future__ import annotations

import time

import numpy as np
from tonewright.acoustics.pitch import CENTS_PER_LN, cents, cents_to_ratio
from tonewright.acoustics.tap import find_partials

SCENARIOS = {
    "5 partials 110 Hz-4.9 kHz, 44.1 kHz, 2 s": (
        44100,
        2.0,
        [110.0, 440.0, 1100.0, 2600.0, 4900.0],
        [1, 0.6, 0.4, 0.3, 0.2],
        [3.0, 1.5, 0.8, 0.4, 0.2],
    ),
    "same, 96 kHz, 1 s": (
        96000,
        1.0,
        [110.0, 440.0, 1100.0, 2600.0, 4900.0],
        [1, 0.6, 0.4, 0.3, 0.2],
        [3.0, 1.5, 0.8, 0.4, 0.2],
    ),
    "marimba-like 1:4:10 at 262 Hz, 22.05 kHz, 1.5 s": (
        22050,
        1.5,
        [262.0, 1048.0, 2620.0],
        [1, 0.5, 0.3],
        [1.5, 0.5, 0.2],
    ),
    "two bars 30 cents apart at 440 Hz, 44.1 kHz, 2 s": (
        44100,
        2.0,
        [440.0, 440.0 * float(cents_to_ratio(30.0))],
        [1, 0.5],
        [1.0, 0.8],
    ),
    "two bars a semitone apart at 110 Hz, 44.1 kHz, 2 s": (
        44100,
        2.0,
        [110.0, 110.0 * float(cents_to_ratio(100.0))],
        [1, 1],
        [2.0, 2.0],
    ),
}


def strike(rate, dur, f, a, tau, snr_db, rng):
    t = np.arange(int(dur * rate)) / rate
    y = sum(
        ak * np.exp(-t / tk) * np.cos(2 * np.pi * fk * t + rng.uniform(0, 2 * np.pi))
        for fk, ak, tk in zip(f, a, tau, strict=True)
    )
    n = int(0.002 * rate)
    y[:n] += 3.0 * rng.normal(0, 1, n) * np.hanning(n)
    y = np.concatenate([np.zeros(int(0.05 * rate)), y])
    y = y + rng.normal(0, np.sqrt(np.mean(y**2)) * 10 ** (-snr_db / 20), y.size) + 0.05
    return 0.9 * y / np.max(np.abs(y))


def main(trials: int = 10, snr_db: float = 30.0) -> None:
    print(f"{'scenario':52s} {'max |err| c':>11s} {'max decay err':>13s} {'sd c':>8s} {'ms':>6s}")
    for name, (rate, dur, f, a, tau) in SCENARIOS.items():
        err_c, err_tau, sd_c, times, missed = [], [], [], [], 0
        for seed in range(trials):
            x = strike(rate, dur, f, a, tau, snr_db, np.random.default_rng(seed))
            t0 = time.perf_counter()
            result = find_partials(x, rate)
            times.append(time.perf_counter() - t0)
            got = np.array(result.frequencies_hz)
            if got.size != len(f):
                missed += 1
                continue
            for p, fk, tk in zip(result.partials, f, tau, strict=True):
                err_c.append(abs(float(cents(p.frequency_hz, fk))))
                err_tau.append(abs(p.decay_s / tk - 1))
                sd_c.append(CENTS_PER_LN * p.frequency_uncertainty_hz / fk)
        note = f"  ({missed} runs with a wrong count)" if missed else ""
        print(
            f"{name:52s} {max(err_c):11.4f} {max(err_tau):13.2%} {np.median(sd_c):8.4f} "
            f"{1000 * np.median(times):6.0f}{note}"
        )


def _timed_pair(path, repeats: int) -> tuple[float, float, object]:
    """Median seconds of (read + find_partials, read + plain padded FFT peak picking)."""
    import soundfile as sf
    from scipy.signal import find_peaks

    from tonewright.audio import read_tap

    ours, peer = [], []
    result = None
    for _ in range(repeats):
        t0 = time.perf_counter()
        rec = read_tap(path)
        result = find_partials(rec.samples, rec.rate)
        ours.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        data, _rate = sf.read(str(path), always_2d=True)
        x = data.mean(axis=1)
        S = 20 * np.log10(np.abs(np.fft.rfft(x * np.hanning(x.size), 8 * x.size)) + 1e-300)
        find_peaks(S, prominence=10.0)
        peer.append(time.perf_counter() - t0)
    return float(np.median(ours)), float(np.median(peer)), result


def _print_line(name: str, a: float, b: float, result) -> None:
    mark = "met" if a < 1.0 else "MISSED"
    print(
        f"{name:44s} {a:7.2f} s ({mark}; {len(result.partials):3d} partials, "
        f"{result.analysed_s:.2f} s record)  peer {b:5.2f} s  ratio {a / b:6.1f}"
    )


def stereo_five_seconds(repeats: int = 3) -> None:
    """The speed goal: each 5 s stereo recording read and analysed in under 1 s."""
    import sys
    import tempfile
    from pathlib import Path

    import soundfile as sf

    sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))
    from tap_corpus import have_sound_bank, render_note, strike_case

    synthetic = {
        "bar + doublet 10 c, hum, 0.6 s room": {
            "t60_s": 0.6,
            "hum_hz": 50.0,
            "doublet_cents": 10.0,
        },
        "bar, T60 1.5 s room": {"t60_s": 1.5},
        "bar + doublet 8 c, T60 0.8 s room": {"t60_s": 0.8, "doublet_cents": 8.0},
        "bar + doublet 10 c, T60 1.5 s room": {"t60_s": 1.5, "doublet_cents": 10.0},
    }
    print("\n5 s stereo, 44.1 kHz, read + analysed (goal < 1 s each); peer: plain padded FFT")
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "tap.wav"
        for seed, (name, kw) in enumerate(synthetic.items(), start=11):
            case = strike_case(name, dur=5.0, stereo=True, snr_db=30.0, seed=seed, **kw)
            sf.write(path, case.samples, case.rate, subtype="PCM_24")
            _print_line(name, *_timed_pair(path, repeats))
        reason = have_sound_bank()
        if reason:
            print(f"sound-bank notes skipped: {reason}")
            return
        notes = [
            ("marimba", 60),
            ("xylophone", 72),
            ("glockenspiel", 84),
            ("vibraphone", 60),
            ("tubular", 60),
        ]
        for instrument, note in notes:
            for reverb in (False, True):
                wav = render_note(Path(tmp) / "note.wav", instrument, note, reverb=reverb)
                data, rate = sf.read(wav, always_2d=True)
                n = 5 * rate  # exactly 5 s: cut the render, or pad it with silence
                data = np.vstack([data, np.zeros((max(0, n - data.shape[0]), data.shape[1]))])[:n]
                sf.write(path, data, rate, subtype="PCM_24")
                label = f"sound bank {instrument} {note}" + (", reverb" if reverb else ", dry")
                _print_line(label, *_timed_pair(path, 1))


if __name__ == "__main__":
    main()
    stereo_five_seconds()
