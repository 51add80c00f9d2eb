"""A chime and a wound string end to end (design, shop, sound, listen): the chime is shown by
its strike note everywhere a pitch is, the string in its own words and units, and every CSV
reads back with as many fields in each row as in its header."""

from __future__ import annotations

import csv
import io
import json
import math
from pathlib import Path

import pytest
from typer.testing import CliRunner

from tonewright.cli import app

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
runner = CliRunner()
C5 = 440.0 * 2 ** (3 / 12)  # C5 in equal temperament at A4 = 440 Hz (ISO 16:1975 reference)


def run(*args: str):
    result = runner.invoke(app, list(args))
    assert result.exit_code == 0, result.output
    return result


def read_csv(text: str) -> tuple[list[str], list[list[str]]]:
    body = [line for line in text.splitlines() if not line.startswith("#")]
    rows = list(csv.reader(io.StringIO("\n".join(body))))
    return rows[0], rows[1:]


@pytest.fixture(scope="module")
def chime(tmp_path_factory):
    root = tmp_path_factory.mktemp("chime")
    # a title with a comma: the CSV must quote it
    run("design", str(EXAMPLES / "workshop-chime-c5.toml"), "--out", str(root / "d"))
    run("shop", str(root / "d" / "result.json"), "--out", str(root / "s"))
    return root


def test_chime_cut_sheet_gives_the_strike_note(chime):
    head, rows = read_csv((chime / "s" / "tube_cut_list.csv").read_text())
    assert all(len(r) == len(head) for r in rows) and len(rows) == 1
    row = dict(zip(head, rows[0], strict=True))
    assert row["name"] == "Workshop chime, C5 (designed)"
    assert float(row["strike_target_hz"]) == pytest.approx(C5, abs=0.01)
    assert abs(float(row["strike_cents_off"])) <= 3.0  # the chime-strike profile's tolerance
    assert row["strike_note"].startswith("C5 ")
    # mode 1 is more than two octaves below the strike note: it is not the pitch
    assert float(row["mode1_hz"]) < C5 / 4
    # the hanging hole at the mode-1 node: 0.2242 L on a uniform tube (Thomson, App. D)
    assert float(row["hole_from_top_mm"]) == pytest.approx(
        0.22416 * float(row["cut_length_mm"]), rel=2e-3
    )
    sheet = (chime / "s" / "tube_cut_sheet.txt").read_text()
    assert "strike note" in sheet and "target 523.25 Hz" in sheet
    assert "deburr" in sheet and "tonewood" not in sheet  # brass: metal cautions


def test_chime_modes_sound_and_listen_agree_on_the_strike_note(chime):
    modes = json.loads(run("modes", str(chime / "d" / "part.toml"), "--json").output)
    assert modes["strike_note"]["note"] == "C5"
    wav = chime / "chime.wav"
    shown = run("sound", str(chime / "d" / "result.json"), "--out", str(wav)).output
    assert "strike at" in shown and "T60 s" in shown
    heard = json.loads(run("listen", str(wav), "--kind", "chime", "--json").output)
    # struck near the top end, modes 4-6 sound, and the strike note is read back as C5
    assert 1200 * abs(math.log2(heard["strike_hz"] / C5)) < 3.0


@pytest.fixture(scope="module")
def string(tmp_path_factory):
    root = tmp_path_factory.mktemp("string")
    out = run("design", str(EXAMPLES / "workshop-string-a2.toml"), "--out", str(root / "d"))
    run("shop", str(root / "d" / "result.json"), "--out", str(root / "s"))
    return root, out.output


def test_string_summary_is_in_its_own_words(string):
    _, output = string
    text = " ".join(output.split())
    assert "mode 1" in text and "string model" in text
    assert "beam" not in text and "kg m " not in text and "g/m" in text
    assert "limits that bind" not in text  # it met its target


def test_string_winding_schedule_uses_the_parts_core(string):
    root, _ = string
    text = (root / "s" / "winding_schedule.csv").read_text()
    assert "# core 0.400 mm" in text  # the part's 0.4 mm core wire, not a derived one
    assert "tonewood" not in text and "tension" in text
    head, rows = read_csv(text)
    assert all(len(r) == len(head) for r in rows)
    # 650 mm in 10 mm segments, not one per millimetre of the design's sampling
    assert len(rows) == 65
    x = [float(r[0]) for r in rows]
    assert x[0] == 0.0 and x[1] == 10.0


def test_string_sound_and_listen(string, tmp_path):
    root, _ = string
    wav = tmp_path / "s.wav"
    run("sound", str(root / "d" / "result.json"), "--out", str(wav), "--a4", "442")
    heard = json.loads(run("listen", str(wav), "--json", "--a4", "442").output)
    f = sorted(p["frequency_hz"] for p in heard["partials"])
    assert f[0] == pytest.approx(110.0, rel=2e-3)  # A2 at A4 = 440, as designed
    # struck 1/8 in from an end, not at the centre: mode 2 (220 Hz) sounds too
    assert any(abs(v - 220.0) < 0.5 for v in f)
    assert heard["a4_hz"] == 442.0
    # at A4 = 442 Hz, 110 Hz is A2 about 7.9 cents flat: 1200 log2(440 / 442)
    first = min(heard["partials"], key=lambda p: p["frequency_hz"])
    assert first["note"] == "A2" and first["cents"] == pytest.approx(-7.85, abs=0.1)


def test_advise_reads_the_target_at_the_given_a4():
    args = ["advise", str(EXAMPLES / "workshop-half-finished.toml")]
    args += ["--partials", "307.47, 482.82, 1221.78, 2983.25", "--json"]
    at_440 = json.loads(run(*args).output)
    at_442 = json.loads(run(*args, "--a4", "442").output)
    assert at_440["a4_hz"] == 440.0 and at_442["a4_hz"] == 442.0
    t440 = at_440["partials"][0]["target_hz"]
    assert at_442["partials"][0]["target_hz"] == pytest.approx(
        t440 * 442 / 440, abs=1e-3
    )  # printed to 0.1 mHz


def test_a4_outside_the_range_is_one_clear_error(tmp_path):
    result = runner.invoke(app, ["listen", str(tmp_path / "none.wav"), "--a4", "44"])
    assert result.exit_code == 2 and "--a4" in result.output
