"""The ``listen`` command and WAV input/output, on WAV files the tests write themselves."""

import json
import math

import numpy as np
import pytest
import soundfile as sf
import typer
from tonewright.acoustics.pitch import strike_note_hz
from tonewright.acoustics.synth import modal_strike
from typer.testing import CliRunner

from tonewright.audio import read_tap, read_wav, to_mono, write_wav
from tonewright.commands.listen import register
from tonewright.errors import InputError

app = typer.Typer()
register(app)


@app.callback()
def _root() -> None:
    """A group, so that the command is invoked by name as in the real tool."""


runner = CliRunner()

# An invented xylophone-like bar (1 : 3 : 6.1), 0.3 ms mallet.
BAR_F = [523.0, 1569.0, 3190.0]
BAR_A = [1.0, 0.6, 0.4]
BAR_TAU = [1.2, 0.5, 0.25]


def bar_strike(rate, dur=1.2):
    return modal_strike(BAR_F, BAR_A, BAR_TAU, rate=rate, duration_s=dur, mallet_contact_s=3e-4)


def listen(*args):
    return runner.invoke(app, ["listen", *map(str, args)])


def cents_off(f, f_ref):
    return 1200.0 * math.log2(f / f_ref)


@pytest.mark.parametrize("rate", [22050, 44100, 96000])
@pytest.mark.parametrize("subtype", ["PCM_16", "PCM_24", "FLOAT"])
@pytest.mark.parametrize("channels", [1, 2])
def test_json_from_every_format(tmp_path, rate, subtype, channels):
    y = bar_strike(rate, dur=0.8 if rate == 96000 else 1.2)
    data = y if channels == 1 else np.column_stack([y, 0.7 * y])
    path = tmp_path / "bar.wav"
    sf.write(path, data, rate, subtype=subtype)
    result = listen(path, "--json")
    assert result.exit_code == 0, result.stderr
    out = json.loads(result.stdout)  # stdout holds the JSON and nothing else
    # no strike note for a bar
    assert set(out) == {
        "a4_hz",
        "partials",
        "warnings",
        "identified_by",
        "strikes_s",
        "onset_s",
        "analysed_s",
    }
    assert out["warnings"] == []
    got = [p["frequency_hz"] for p in out["partials"]]
    assert len(got) == 3
    for g, f in zip(got, BAR_F, strict=True):
        # 0.2 cent: project target; 16-bit quantisation noise is near -98 dBFS.
        assert abs(cents_off(g, f)) < 0.2
    first = out["partials"][0]
    assert set(first) == {
        "frequency_hz",
        "note",
        "cents",
        "level_db",
        "t60_s",
        "band_t60_s",
        "uncertainty_hz",
        "mode",
        "method",
    }
    assert first["method"] == "fit"
    assert first["level_db"] == 0.0
    # one decay measure, T60 = tau ln(1000): the time to fall by 60 dB (20 log10 e^-t/tau)
    t60 = BAR_TAU[0] * math.log(1000.0)
    assert first["t60_s"] == pytest.approx(t60, rel=0.02)  # noise-free: CRB << 1 %
    # the record ends long before this ring falls 35 dB: no band decay is claimed
    # (tests/test_decay.py checks it where the ring dies)
    assert first["band_t60_s"] is None


def test_table_shows_notes_cents_and_ratios(tmp_path):
    # A4 = 440 Hz (ISO 16:1975) and a partial three octaves and a major third up (ratio 10,
    # the marimba third-partial target; common practice, no source).
    path = tmp_path / "a4.wav"
    y = modal_strike([440.0, 4400.0], [1.0, 0.3], [1.0, 0.4], rate=22050, duration_s=1.0)
    sf.write(path, y, 22050, subtype="PCM_24")
    result = listen(path)
    assert result.exit_code == 0, result.stderr
    lines = result.stdout.splitlines()
    row1 = next(line for line in lines if " A4 " in line)
    row2 = next(line for line in lines if " C#8 " in line)
    assert "440.000" in row1 and "1.000" in row1
    assert "10.000" in row2
    # C#8 is 40 semitones above A4 (equal temperament): 4400 Hz lies 13.7 cents below it.
    cents_from_c_sharp_8 = 1200 * math.log2(4400 / (440 * 2 ** (40 / 12)))
    assert f"{cents_from_c_sharp_8:+.1f}" in row2


def test_chime_reports_the_strike_note(tmp_path):
    # A free-free tube: bending modes in the ratios (beta_n L)^2 of the uniform free-free beam,
    # 4.73004074, 7.85320462, 10.99560784, 14.13716549, 17.27875966 (Thomson, Theory of
    # Vibration, App. D, Tables D.1-D.2) and the 6th root 20.42035225 (derived, (2n+1) pi / 2).
    beta = np.array([4.73004074, 7.85320462, 10.99560784, 14.13716549, 17.27875966, 20.42035225])
    f = 120.0 * (beta / beta[0]) ** 2
    rng = np.random.default_rng(5)
    y = modal_strike(
        f,
        [0.5, 1.0, 0.9, 0.8, 0.7, 0.6],
        [4.0, 3.0, 2.5, 2.0, 1.5, 1.2],
        rate=22050,
        duration_s=1.5,
        mallet_contact_s=2e-4,
    )
    y += rng.normal(0.0, 1e-3, y.size)
    path = tmp_path / "chime.wav"
    sf.write(path, y, 22050, subtype="PCM_24")
    result = listen(path, "--json", "--kind", "chime")
    assert result.exit_code == 0, result.stderr
    out = json.loads(result.stdout)
    assert len(out["partials"]) == 6
    # Published rule (Rossing 2000, Science of Percussion Instruments, ch. 3; Fletcher &
    # Rossing 1998, sec. 19.2; from memory): the strike note is an octave below mode 4. The
    # measured partials give it to the 0.2 cent target, and name the modes they used.
    assert abs(cents_off(out["strike_hz"], f[3] / 2)) < 0.2
    assert "mode 4" in out["strike_rule"]
    used = out["strike_modes_hz"]
    for k in (4, 5, 6):
        assert abs(cents_off(used[f"bending {k}"], f[k - 1])) < 0.2
    # the design side (acoustics.pitch) uses the same rule: one strike note everywhere
    assert abs(cents_off(strike_note_hz(f), out["strike_hz"])) < 0.2

    table = listen(path, "--kind", "chime")
    assert "strike note:" in table.stdout


def test_count_and_band_options(tmp_path):
    path = tmp_path / "bar.wav"
    sf.write(path, bar_strike(22050), 22050, subtype="PCM_16")
    out = json.loads(listen(path, "--json", "--count", "2").stdout)
    assert [round(p["frequency_hz"]) for p in out["partials"]] == [523, 1569]
    out = json.loads(listen(path, "--json", "--fmin", "1000", "--fmax", "3000").stdout)
    assert [round(p["frequency_hz"]) for p in out["partials"]] == [1569]


def assert_one_line_error(result, fragment):
    assert result.exit_code == 2
    assert result.stdout == ""
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ")
    assert fragment in lines[0]


def test_text_file_named_wav(tmp_path):
    path = tmp_path / "notes.wav"
    path.write_text("bar 1: 523 Hz\n")
    assert_one_line_error(listen(path), "not a readable sound file")


def test_missing_file(tmp_path):
    assert_one_line_error(listen(tmp_path / "nothing.wav"), "file not found")


def test_empty_and_non_finite_files(tmp_path):
    path = tmp_path / "empty.wav"
    sf.write(path, np.zeros(0), 22050, subtype="PCM_16")
    assert_one_line_error(listen(path), "holds no samples")
    path = tmp_path / "nan.wav"
    sf.write(path, np.array([0.0, np.nan, 0.1] * 1000), 22050, subtype="FLOAT")
    assert_one_line_error(listen(path), "NaN")


def test_silence(tmp_path):
    path = tmp_path / "silence.wav"
    sf.write(path, np.zeros(22050), 22050, subtype="PCM_16")
    assert_one_line_error(listen(path), "silent")


def assert_clean_exit_2(result, *fragments):
    """Exit code 2, one ``error:`` line holding every fragment, no partials, no traceback."""
    assert_one_line_error(result, fragments[0])
    line = result.stderr.strip()
    for fragment in fragments[1:]:
        assert fragment in line
    assert isinstance(result.exception, SystemExit)  # typer.Exit(2), not an uncaught error
    assert "Traceback" not in result.output


def test_constant_level_is_no_partial(tmp_path):
    # A DC offset alone (a recorder with a biased input and no strike) rings at no frequency.
    path = tmp_path / "dc.wav"
    sf.write(path, np.full(44100, 0.25), 44100, subtype="PCM_24")
    result = listen(path, "--json")
    assert_clean_exit_2(result, "no partials found", "no clear ringing partial", "record again")


def test_white_noise_is_no_partial(tmp_path):
    # Gaussian noise has a flat spectrum: no line stands 15 dB above its own floor.
    rng = np.random.default_rng(11)
    path = tmp_path / "noise.wav"
    sf.write(path, rng.normal(0.0, 0.1, 2 * 44100), 44100, subtype="PCM_16")
    result = listen(path)
    assert_clean_exit_2(result, "no partials found", "no clear ringing partial", "record again")


def test_sample_rate_below_the_minimum_is_refused(tmp_path):
    # At 1 kHz the band ends at 500 Hz: a bar's second and third partials are lost.
    path = tmp_path / "slow.wav"
    t = np.arange(2000) / 1000.0
    sf.write(path, 0.5 * np.exp(-t) * np.sin(2 * np.pi * 110.0 * t), 1000, subtype="PCM_24")
    result = listen(path, "--json")
    assert_clean_exit_2(result, "sample rate 1000 Hz", "at least 8000 Hz")


def test_ten_millisecond_file(tmp_path):
    path = tmp_path / "short.wav"
    sf.write(path, bar_strike(44100)[:441], 44100, subtype="PCM_24")
    assert_one_line_error(listen(path), "need at least 0.05 s")


def test_bad_kind_and_count(tmp_path):
    path = tmp_path / "bar.wav"
    sf.write(path, bar_strike(22050), 22050)
    assert_one_line_error(listen(path, "--kind", "gong"), "--kind")
    assert_one_line_error(listen(path, "--count", "0"), "count")


def test_out_of_phase_stereo_uses_one_channel(tmp_path):
    y = bar_strike(22050)
    path = tmp_path / "pair.wav"
    sf.write(path, np.column_stack([y, -0.95 * y]), 22050, subtype="PCM_24")
    out = json.loads(listen(path, "--json").stdout)
    assert any("cancel" in w for w in out["warnings"])
    assert len(out["partials"]) == 3
    assert abs(cents_off(out["partials"][0]["frequency_hz"], BAR_F[0])) < 0.2


def test_clipping_warns_or_refuses(tmp_path):
    y = bar_strike(22050)
    mild = y.copy()
    mild[300:306] = 1.0  # one short clipped run
    path = tmp_path / "mild.wav"
    sf.write(path, mild, 22050, subtype="FLOAT")
    out = json.loads(listen(path, "--json").stdout)
    assert any("clipped" in w for w in out["warnings"])
    severe = np.clip(3.0 * y, -1.0, 1.0)  # a hot recording flattened for many cycles
    path = tmp_path / "severe.wav"
    sf.write(path, severe, 22050, subtype="FLOAT")
    out = json.loads(listen(path, "--json").stdout)
    # warned, and analysed after the clipped part: the partials are still found
    assert any("clipped until" in w for w in out["warnings"])
    got = [p["frequency_hz"] for p in out["partials"]]
    for f in BAR_F:
        assert min(abs(cents_off(g, f)) for g in got) < 0.2
    flat = np.full(22050, 1.0)  # nothing but full scale
    flat[::2] = -1.0
    path = tmp_path / "flat.wav"
    sf.write(path, flat, 22050, subtype="FLOAT")
    assert_one_line_error(listen(path), "badly clipped")


# --- audio helpers ------------------------------------------------------------------------------


def test_write_wav_is_24_bit_and_round_trips(tmp_path):
    y = bar_strike(48000, dur=0.3)
    path = tmp_path / "out.wav"
    write_wav(path, y, 48000)
    assert sf.info(str(path)).subtype == "PCM_24"
    back, rate = read_wav(path)
    assert rate == 48000
    assert np.max(np.abs(back - y)) <= 2.0**-23  # one 24-bit step (rounding is half of it)
    with pytest.raises(InputError, match="exists"):
        write_wav(path, y, 48000)
    write_wav(path, 0.5 * y, 48000, overwrite=True)
    assert np.max(np.abs(read_wav(path)[0])) == pytest.approx(0.5 * np.max(np.abs(y)), abs=1e-6)
    assert [p.name for p in tmp_path.iterdir()] == ["out.wav"]  # no temporary file left


def test_write_wav_refuses_bad_samples(tmp_path):
    with pytest.raises(InputError, match="full scale"):
        write_wav(tmp_path / "x.wav", np.array([0.0, 1.5]), 8000)
    with pytest.raises(InputError, match="NaN"):
        write_wav(tmp_path / "x.wav", np.array([0.0, np.nan]), 8000)
    with pytest.raises(InputError, match="rate"):
        write_wav(tmp_path / "x.wav", np.zeros(10), 0)


def test_to_mono_aligns_flips_or_picks_channels():
    rate = 22050
    y = bar_strike(rate)
    lag = 15  # 0.7 ms: a second microphone 23 cm further away
    late = np.concatenate([np.zeros(lag), y[:-lag]])
    mono, note = to_mono(np.column_stack([y, 0.8 * late]), rate)
    assert note is None
    assert np.corrcoef(mono[lag:-lag], y[lag:-lag])[0, 1] > 0.999  # aligned, not smeared
    mono, note = to_mono(np.column_stack([y, -0.9 * late]), rate)
    assert "flipped" in note and "cancel" in note
    assert np.corrcoef(mono[lag:-lag], y[lag:-lag])[0, 1] > 0.999
    other = np.random.default_rng(1).normal(0.0, 0.01, y.size)  # a different sound
    mono, note = to_mono(np.column_stack([other, y]), rate)
    assert "channel 2 of 2" in note and np.allclose(mono, y - np.median(y))


def test_read_tap_reports_channels(tmp_path):
    path = tmp_path / "s.wav"
    y = bar_strike(8000, dur=0.5)
    sf.write(path, np.column_stack([y, y, y]), 8000)
    rec = read_tap(path)
    assert rec.channels == 3 and rec.rate == 8000 and rec.samples.ndim == 1
    assert rec.duration_s == pytest.approx(0.5)
