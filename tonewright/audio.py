"""Reading and writing WAV files for tap analysis and synthesised strikes.

Reading goes through libsndfile (``soundfile``; WAV, FLAC, OGG/Vorbis, and MP3 from
libsndfile 1.1), which normalises 16-bit, 24-bit, 32-bit and
float files to float64 in [-1, 1]. For analysis a recording is reduced to one channel (channels
holding the same sound aligned, sign-corrected and averaged; otherwise the loudest alone, see
``to_mono``) and checked: not silent, long enough after the strike, not badly clipped.
Writing produces 24-bit PCM through a temporary file and a rename, so a half-written file
never appears under the final name.
"""

from __future__ import annotations

import errno
import io
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import soundfile as sf
from numpy.typing import ArrayLike, NDArray

from tonewright.cli_support import atomic_write_bytes
from tonewright.errors import InputError

__all__ = [
    "TapRecording",
    "check_recording",
    "clipped_runs",
    "read_tap",
    "read_wav",
    "to_mono",
    "write_wav",
]

SILENCE_DBFS = -80.0  # quieter than this is no strike at all
MIN_AFTER_ONSET_S = 0.05  # shortest sound after the strike that can be analysed
CLIP_LEVEL = 0.999  # a sample this close to full scale counts as clipped
CLIP_RUN = 3  # this many clipped samples in a row make a clipped run
SEVERE_CLIP_FRACTION = 0.5  # more than this share of the sound clipped is an error
SAME_SOUND = 0.8  # correlation above which two channels hold the same sound
MAX_LAG_S = 0.003  # microphones up to 1 m apart (about 3 ms of sound travel)


@dataclass(frozen=True)
class TapRecording:
    """One channel ready for analysis, its rate, and notes for the user."""

    samples: NDArray[np.float64]
    rate: int
    channels: int
    warnings: tuple[str, ...]

    @property
    def duration_s(self) -> float:
        return self.samples.size / self.rate


def read_wav(path: Path | str) -> tuple[NDArray[np.float64], int]:
    """Samples as float64 (shape ``(n,)`` for mono, ``(n, channels)`` otherwise) and the rate."""
    path = Path(path)
    if not path.exists():
        raise FileNotFoundError(errno.ENOENT, "no such file", str(path))
    if path.is_dir():
        raise IsADirectoryError(errno.EISDIR, "is a folder", str(path))
    try:
        data, rate = sf.read(str(path), dtype="float64", always_2d=True)
    except (sf.LibsndfileError, RuntimeError, ValueError) as exc:
        detail = str(exc).split(":", 1)[-1].strip() or type(exc).__name__
        raise InputError(f"WAV {path}: not a readable sound file ({detail})") from None
    if data.size == 0:
        raise InputError(f"WAV {path}: holds no samples")
    if not np.all(np.isfinite(data)):
        raise InputError(f"WAV {path}: holds NaN or infinite samples")
    if data.shape[1] == 1:
        data = data[:, 0]
    return data, int(rate)


def to_mono(samples: ArrayLike, rate: float = 48000.0) -> tuple[NDArray[np.float64], str | None]:
    """One channel for analysis, and a note when it is not a plain mix of all channels.

    Channels holding the same sound (correlation above ``SAME_SOUND`` with the loudest one,
    after the best lag up to ``MAX_LAG_S`` and its sign) are aligned, sign-corrected and
    averaged, so an inverted or delayed microphone cannot cancel a partial. Otherwise (two
    microphones at different places, or different takes) the loudest channel alone is used:
    mixing different sounds would superpose two sets of phases per partial.
    """
    x = np.asarray(samples, dtype=float)
    if x.ndim == 1:
        return x, None
    if x.shape[1] == 1:
        return x[:, 0].copy(), None
    x = x - np.median(x, axis=0)
    rms = np.sqrt(np.mean(x**2, axis=0))
    loudest = int(np.argmax(rms))
    ref = x[:, loudest]
    n = x.shape[0]
    size = 1 << int(np.ceil(np.log2(2 * n)))
    R = np.fft.rfft(ref, size)
    max_lag = max(1, int(MAX_LAG_S * rate))
    mix = ref.copy()
    notes = []
    used = 1
    for c in range(x.shape[1]):
        if c == loudest or rms[c] == 0:
            continue
        xc = np.fft.irfft(np.fft.rfft(x[:, c], size) * np.conj(R), size)
        lags = np.concatenate([np.arange(0, max_lag + 1), np.arange(-max_lag, 0)])
        vals = xc[lags % size]
        k = int(np.argmax(np.abs(vals)))
        lag, corr = int(lags[k]), vals[k] / (rms[c] * rms[loudest] * n)
        if abs(corr) < SAME_SOUND:
            return ref.copy(), (
                f"the channels hold different sounds; analysed channel {loudest + 1} of "
                f"{x.shape[1]} (the loudest) alone"
            )
        aligned = np.roll(x[:, c], -lag) * np.sign(corr) * rms[loudest] / rms[c]
        mix += aligned
        used += 1
        if corr < 0:
            notes.append(
                f"channel {c + 1} is out of phase with channel {loudest + 1} (a plain mix "
                "would cancel); flipped it before mixing"
            )
    return mix / used, ("; ".join(notes) or None)


def clipped_runs(x: NDArray[np.float64], level: float = CLIP_LEVEL) -> NDArray[np.int64]:
    """Lengths of the runs of at least ``CLIP_RUN`` consecutive samples at full scale."""
    hot = np.abs(x) >= level
    if not hot.any():
        return np.empty(0, dtype=np.int64)
    edges = np.diff(np.concatenate([[0], hot.astype(np.int8), [0]]))
    starts, ends = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
    runs = ends - starts
    return runs[runs >= CLIP_RUN]


def check_recording(x: NDArray[np.float64], rate: int, name: str = "WAV") -> tuple[str, ...]:
    """Raise InputError for recordings that cannot be analysed; return warnings otherwise.

    ``x`` holds the original full-scale channels (1-D or 2-D), so clipping is judged on what
    the recorder wrote, not on a mix.
    """
    x = np.asarray(x, dtype=float)
    peak = float(np.max(np.abs(x)))
    peak_dbfs = 20.0 * np.log10(peak) if peak > 0 else -np.inf
    if peak_dbfs < SILENCE_DBFS:
        raise InputError(
            f"{name}: silent (peak {peak_dbfs:.0f} dBFS); need a strike louder than "
            f"{SILENCE_DBFS:.0f} dBFS"
        )
    channels = x.reshape(x.shape[0], -1)
    env = np.max(np.abs(channels - np.median(channels, axis=0)), axis=1)
    onset = int(np.argmax(env >= 0.2 * env.max()))
    after_s = (x.shape[0] - onset) / rate
    if after_s < MIN_AFTER_ONSET_S:
        raise InputError(
            f"{name}: only {after_s:.3f} s of sound after the strike; need at least "
            f"{MIN_AFTER_ONSET_S:.2f} s (1-3 s recommended)"
        )
    runs = np.concatenate([clipped_runs(channels[:, c]) for c in range(channels.shape[1])])
    if runs.size == 0:
        return ()
    share = runs.sum() / (channels.shape[1] * (x.shape[0] - onset))
    if share > SEVERE_CLIP_FRACTION:
        raise InputError(
            f"{name}: badly clipped ({100 * share:.1f} % of the samples after the strike at "
            "full scale); record again with less gain"
        )
    return (
        f"{runs.size} clipped run(s), longest {int(runs.max())} samples: levels may be off "
        "and clipping adds false partials at sums and multiples; record with less gain",
    )


def read_tap(path: Path | str) -> TapRecording:
    """Read a tap recording, check it, and reduce it to one channel."""
    data, rate = read_wav(path)
    warnings = list(check_recording(data, rate, name=f"WAV {Path(path).name}"))
    mono, note = to_mono(data, rate)
    if note:
        warnings.append(note)
    channels = 1 if data.ndim == 1 else data.shape[1]
    return TapRecording(mono, rate, channels, tuple(warnings))


def write_wav(path: Path | str, samples: ArrayLike, rate: int, *, overwrite: bool = False) -> None:
    """Write 24-bit PCM WAV atomically; refuse to replace a file unless ``overwrite``."""
    x = np.asarray(samples, dtype=float)
    if x.ndim not in (1, 2) or x.size == 0:
        raise InputError(f"samples: got shape {x.shape}; give (n,) or (n, channels)")
    if not np.all(np.isfinite(x)):
        raise InputError("samples: hold NaN or infinite values")
    peak = float(np.max(np.abs(x)))
    if peak > 1.0:
        raise InputError(f"samples: peak {peak:.3g} exceeds full scale 1.0; normalise first")
    if int(rate) != rate or not 1 <= rate <= 768_000:
        raise InputError(f"rate: got {rate}; give a whole number of Hz up to 768000")
    buffer = io.BytesIO()
    sf.write(buffer, x, int(rate), format="WAV", subtype="PCM_24")
    atomic_write_bytes(Path(os.fspath(path)), buffer.getvalue(), overwrite=overwrite)
