"""Tap analysis on realistic recordings: the corpus of ``tap_corpus`` (made here: doublets,
beating, two strikes, clipping, hum, rumble, noise at several SNRs, reverberation from
synthetic room impulse responses, stereo), tubular bells, bad audio, other file formats, the
plot, and notes rendered from an open General MIDI sound bank when it is installed.

Acceptance on the corpus: every partial within 30 dB of the strongest is found within 1 cent
(0.5 cent at SNR >= 30 dB), bending 1 is never lost, and labels against the expected modes
are right for at least 95 % of the lines.
"""

import json
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
from tap_corpus import Line, corpus, have_sound_bank, render_note, ring, tuned_bar
from tonewright.acoustics.identify import free_free_ratios, label_lines, tube_strike_note
from tonewright.acoustics.pitch import cents
from tonewright.acoustics.tap import find_partials
from typer.testing import CliRunner

from tonewright.audio import to_mono
from tonewright.cli import app

CASES = {c.name: c for c in corpus()}
# Fast enough (< 1 s each) for the everyday subset; the reverberant ones are slow.
QUICK = [n for n in CASES if "reverb" not in n and "rumble" not in n and n != "everything"]
# Cases known to miss the goal, kept visible as strict xfails. None at present: lateral 1 in
# the 1.5 s room, once 0.69 cent off, meets it since the fit projects out the
# amplitudes and fits only the new lines of each residual round (0.17 cent now).
KNOWN_MISS: set[str] = set()


def _mono(case):
    return case.samples if case.samples.ndim == 1 else to_mono(case.samples, case.rate)[0]


def _check_case(case):
    result = find_partials(_mono(case), case.rate)
    got = np.array(result.frequencies_hz)
    tol = 0.5 if case.snr_db >= 30 else 1.0
    errors = {}
    for line in case.strong():
        if line.label == "electrical":
            continue
        errors[f"{line.label} {line.f_hz:.1f}"] = float(
            np.min(np.abs(cents(got, line.f_hz))) if got.size else np.inf
        )
    b1 = next(ln for ln in case.lines if ln.label == "bending 1")
    assert np.min(np.abs(cents(got, b1.f_hz))) < 1.0, "the fundamental was lost"
    worst = max(errors.values())
    assert worst < tol, f"{case.name}: {errors}"
    return result


def _label_score(case, result):
    """Right labels among the reported lines nearest each true line (a pair half counts)."""
    f1 = next(ln.f_hz for ln in case.lines if ln.label == "bending 1")
    # expected modes 4 % off, as for an uncalibrated blank
    predicted = [
        (ln.label.split()[0], int(ln.label.split()[1]), ln.f_hz / 1.04) for ln in tuned_bar(f1)
    ]
    ps = result.partials
    ident = label_lines(
        [p.frequency_hz for p in ps], [p.level_db for p in ps], [p.decay_s for p in ps], predicted
    )
    got = np.array(result.frequencies_hz)
    right = total = 0
    for line in case.lines:
        i = int(np.argmin(np.abs(got - line.f_hz)))
        if abs(float(cents(got[i], line.f_hz))) > 5.0:
            continue  # not found (checked above for the strong ones)
        lab = ident.labels[i]
        total += 1
        if line.label in ("electrical", "resonator", "room"):
            right += lab.kind == line.label
        else:
            right += f"{lab.kind} {lab.order}" == line.label
    return right, total


@pytest.mark.parametrize("name", QUICK)
def test_realistic_quick(name):
    case = CASES[name]
    result = _check_case(case)
    right, total = _label_score(case, result)
    assert right == total


@pytest.mark.slow
@pytest.mark.parametrize(
    "name",
    [
        pytest.param(n, marks=pytest.mark.xfail(strict=True, reason="known miss, see KNOWN_MISS"))
        if n in KNOWN_MISS
        else n
        for n in CASES
        if n not in QUICK
    ],
)
def test_realistic_slow(name):
    _check_case(CASES[name])


@pytest.mark.slow
def test_labels_right_in_95_percent_of_lines():
    right = total = 0
    for case in CASES.values():
        result = find_partials(_mono(case), case.rate)
        r, t = _label_score(case, result)
        right, total = right + r, total + t
    assert right >= 0.95 * total, f"{right} of {total}"


def test_without_a_part_the_bending_series_is_named_by_its_ratios():
    case = CASES["resonator"]
    result = find_partials(_mono(case), case.rate)
    ps = result.partials
    ident = label_lines(
        [p.frequency_hz for p in ps], [p.level_db for p in ps], [p.decay_s for p in ps]
    )
    names = {round(p.frequency_hz): lab.text for p, lab in zip(ps, ident.labels, strict=True)}
    assert "1:4:10" in ident.basis
    assert names[262] == "bending 1" and names[1039] == "bending 2" and names[2598] == "bending 3"
    assert names[787] == "not from the bar (resonator)"


def test_hum_is_electrical_and_below_the_bar_is_the_room():
    rng = np.random.default_rng(2)
    rate = 22050
    lines = tuned_bar(400.0, torsion=False)
    y = ring(lines, rate, 1.5, rng)
    t = np.arange(y.size) / rate
    y += 0.05 * np.sin(2 * np.pi * 50.0 * t) + 0.03 * np.sin(2 * np.pi * 150.0 * t)
    y += 0.05 * np.exp(-t / 1.0) * np.sin(2 * np.pi * 37.0 * t)  # a rumble of the bench
    y += rng.normal(0.0, 1e-3, y.size)
    result = find_partials(y, rate)
    ps = result.partials
    ident = label_lines(
        [p.frequency_hz for p in ps], [p.level_db for p in ps], [p.decay_s for p in ps]
    )
    names = {round(p.frequency_hz): lab.text for p, lab in zip(ps, ident.labels, strict=True)}
    assert names[50] == names[150] == "not from the bar (electrical)"
    assert names[37] == "not from the bar (room)"
    assert names[400] == "bending 1"


# --- tubular bells --------------------------------------------------------------------------


def test_tubular_bell_strike_note_ignores_rumble():
    # A free-free tube: modes in the Euler-Bernoulli ratios (Rayleigh 1894, sec. 174; roots
    # of cos x cosh x = 1 computed in free_free_ratios), strike near C5 by the published rule
    # (Rossing 2000, ch. 3, from memory): an octave below mode 4. Low room rumble at 45 Hz
    # and hum, louder than the low modes, must not move it.
    ratios = np.array(free_free_ratios(6))
    f1 = 2 * 523.25 / ratios[3]
    lines = [
        Line(f1 * r, a, tau, f"bending {k}")
        for k, (r, a, tau) in enumerate(
            zip(ratios, [0.1, 0.3, 0.6, 1.0, 0.8, 0.6], [4, 3.5, 3, 2.5, 2, 1.5], strict=True),
            start=1,
        )
    ]
    rng = np.random.default_rng(4)
    rate = 44100
    y = ring(lines, rate, 2.0, rng)
    t = np.arange(y.size) / rate
    y += 0.5 * np.exp(-t / 3.0) * np.sin(2 * np.pi * 45.8 * t) + 0.1 * np.sin(2 * np.pi * 60 * t)
    y += rng.normal(0.0, 1e-3, y.size)
    result = find_partials(y, rate)
    strike = tube_strike_note(result.frequencies_hz, [p.level_db for p in result.partials])
    assert strike is not None
    assert abs(float(cents(strike.f_hz, lines[3].f_hz / 2))) < 25.0  # the acceptance
    assert abs(float(cents(strike.f_hz, 523.25))) < 1.0  # and in fact to the fit's accuracy
    for used, line in zip(strike.modes_hz, lines[3:], strict=True):
        assert abs(float(cents(used, line.f_hz))) < 1.0


# --- command line: bad audio, formats, the picture ------------------------------------------

runner = CliRunner()


def _one_line_error(result, text):
    assert result.exit_code == 2
    err = result.stderr.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("error:") and text in err[0], result.stderr


def test_bad_audio_is_one_line_and_exit_2(tmp_path):
    rate = 22050
    cases = {
        "silence.wav": (np.zeros(rate), "silent"),
        "noise.wav": (np.random.default_rng(0).normal(0, 0.1, rate), "no partials"),
        "short.wav": (0.5 * np.sin(np.arange(200) / 3.0), "after the strike"),
    }
    for name, (y, text) in cases.items():
        sf.write(tmp_path / name, y, rate)
        _one_line_error(runner.invoke(app, ["listen", str(tmp_path / name)]), text)
    (tmp_path / "notes.wav").write_text("not audio")
    _one_line_error(runner.invoke(app, ["listen", str(tmp_path / "notes.wav")]), "not a readable")


@pytest.mark.parametrize(
    ("ext", "fmt", "subtype", "cents_tol"),
    [
        ("flac", "FLAC", "PCM_24", 0.2),
        ("ogg", "OGG", "VORBIS", 1.0),  # lossy: 1 cent, the bound for realistic audio
        ("mp3", "MP3", "MPEG_LAYER_III", 1.0),
    ],
)
def test_other_formats(tmp_path, ext, fmt, subtype, cents_tol):
    if fmt not in sf.available_formats():
        pytest.skip(f"this libsndfile ({sf.__libsndfile_version__}) cannot write {fmt}")
    case = CASES["clean snr 45"]
    path = tmp_path / f"tap.{ext}"
    sf.write(path, case.samples, case.rate, format=fmt, subtype=subtype)
    out = json.loads(runner.invoke(app, ["listen", str(path), "--json"]).stdout)
    got = np.array([p["frequency_hz"] for p in out["partials"]])
    for line in case.strong():
        assert np.min(np.abs(cents(got, line.f_hz))) < cents_tol


def test_plot_is_written_and_not_overwritten(tmp_path):
    case = CASES["resonator"]
    wav = tmp_path / "tap.wav"
    sf.write(wav, case.samples, case.rate, subtype="PCM_24")
    png = tmp_path / "tap.png"
    r = runner.invoke(app, ["listen", str(wav), "--plot", str(png)])
    assert r.exit_code == 0, r.stderr
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert "bending 1" in r.stdout and "resonator" in r.stdout
    _one_line_error(runner.invoke(app, ["listen", str(wav), "--plot", str(png)]), "--force")


def test_two_strikes_say_which_was_analysed(tmp_path):
    case = CASES["two strikes"]
    wav = tmp_path / "two.wav"
    sf.write(wav, case.samples, case.rate, subtype="PCM_24")
    out = json.loads(runner.invoke(app, ["listen", str(wav), "--json"]).stdout)
    assert len(out["strikes_s"]) == 2
    assert abs(out["strikes_s"][1] - out["strikes_s"][0] - 0.9) < 0.01
    assert any("2 strikes found" in w and "analysed the one at" in w for w in out["warnings"])


# --- sample-based notes from an open sound bank ---------------------------------------------


@pytest.mark.slow
@pytest.mark.parametrize(
    ("instrument", "note", "reverb"),
    [
        *[(i, n, r) for i, n in (("marimba", 60), ("marimba", 72)) for r in (False, True)],
        # Known miss: the xylophone C5 sample's upper lines ring for 15-45 ms, line half-widths
        # of 4-15 Hz (up to 8 cents), so where the peak of such a line lies depends on the
        # window: dry, the line at 3034 Hz is 1.3 cents from the 0.5 s Hann reference (our own
        # spectrum's peak is 0.8 cent from it); with reverb, lines at 2969-3102 Hz are 4-27
        # cents off, the room's tail outlasting the note. Not resolved; kept visible.
        *[
            pytest.param("xylophone", 72, r, marks=pytest.mark.xfail(strict=True, reason="known"))
            for r in (False, True)
        ],
        *[(i, n, r) for i, n in (("vibraphone", 60), ("glockenspiel", 84)) for r in (False, True)],
    ],
)
def test_sound_bank_notes(tmp_path, instrument, note, reverb):
    reason = have_sound_bank()
    if reason:
        pytest.skip(reason)
    wav = render_note(tmp_path / "n.wav", instrument, note, reverb=reverb)
    data, rate = sf.read(wav, always_2d=True)
    x, _ = to_mono(data, rate)
    result = find_partials(x, rate)
    # Reference (independent of the fit): the peak of a 16x zero-padded, Hann-windowed FFT of
    # the first 0.5 s after the onset, refined by quadratic interpolation of the dB spectrum
    # (Smith 2011, "Quadratic Interpolation of Spectral Peaks", from memory), for each line
    # within 30 dB of the strongest. Its own error is a few hundredths of a bin, 0.1 Hz here,
    # so the check is 1 cent plus that.
    a = round(result.onset_s * rate) + round(0.01 * rate)
    seg = x[a : a + rate // 2]
    nfft = 16 * seg.size
    S = 20 * np.log10(np.abs(np.fft.rfft(seg * np.hanning(seg.size), nfft)) + 1e-300)
    df = rate / nfft
    from scipy.signal import find_peaks

    idx, _ = find_peaks(S, prominence=20.0)
    idx = idx[(S[idx] >= S[idx].max() - 30.0) & (idx * df > 40.0)]
    got = np.array(result.frequencies_hz)
    assert got.size, "no partials"
    for i in idx:
        den = S[i - 1] - 2 * S[i] + S[i + 1]
        f_ref = (i + 0.5 * (S[i - 1] - S[i + 1]) / den) * df
        off = np.min(np.abs(cents(got, f_ref)))
        limit = 1.0 + float(cents(f_ref + 0.1, f_ref))
        assert off < limit, f"{instrument} {note}: {f_ref:.2f} Hz missing ({off:.2f} cents)"


def test_part_names_the_lines_and_the_plot_shows_its_modes(tmp_path):
    # The workshop C4 bar's own modes, 3 % sharp (an uncalibrated blank), as a tap with hum.
    from tonewright.bench import expected_modes

    part = Path(__file__).resolve().parent.parent / "examples" / "workshop-marimba-c4.toml"
    modes = [m for m in expected_modes(part) if m[2] < 8000.0][:6]
    lines = [
        Line(1.03 * f, 1.0 / k, 0.5, f"{fam} {order}")
        for k, (fam, order, f) in enumerate(modes, start=1)
    ]
    rng = np.random.default_rng(8)
    y = ring(lines, 44100, 1.2, rng)
    y += 0.02 * np.sin(2 * np.pi * 50.0 * np.arange(y.size) / 44100)
    y = 0.8 * (y + rng.normal(0.0, 1e-3, y.size)) / np.max(np.abs(y))
    wav = tmp_path / "tap.wav"
    sf.write(wav, y, 44100, subtype="PCM_24")
    png = tmp_path / "tap.png"
    r = runner.invoke(app, ["listen", str(wav), "--json", "--part", str(part), "--plot", str(png)])
    assert r.exit_code == 0, r.stderr
    out = json.loads(r.stdout)
    assert out["identified_by"] == "the expected part's modes"
    named = {round(p["frequency_hz"]): p["mode"] for p in out["partials"]}
    for line in lines:
        assert named[round(line.f_hz)] == line.label
    assert {e["mode"] for e in out["expected"]} >= {ln.label for ln in lines}
    assert png.stat().st_size > 10_000
