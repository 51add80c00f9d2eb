"""Every validation rule at the door, through every command that reads the input: exit code 2,
one ``error:`` line naming the field, and no traceback.

The part files are invented workshop scenarios (a rosewood bar about F5, 400 x 55 x 22 mm).
"""

from __future__ import annotations

from pathlib import Path

import pytest
from typer.testing import CliRunner

from tonewright.cli import app
from tonewright.materials import load_material

runner = CliRunner()
CUT_BAR = Path(__file__).resolve().parents[1] / "examples" / "workshop-f4-bar.toml"

BAR = """\
material = "honduras-rosewood"
[bar]
length = 400
width = 55
thickness = 22
[target]
fundamental = "E5"
ratios = [1, 4]
"""

# A uniform bar's bending modes 1 and 2 (Hz), as `tonewright modes` gives them: calibration
# fits them exactly, so a calibrate run gets as far as writing its --out file.
CALIBRATION_PARTIALS = "666.261,1705.766"


def _bar(bar: dict[str, str] | None = None, design: str = "") -> str:
    text = BAR
    for key, value in (bar or {}).items():
        text = text.replace(f"\n{key} = ", f"\n{key} = {value}\n#", 1)
    return text + ("[design]\n" + design + "\n" if design else "")


def _string(table: str, extra: str = "") -> str:
    return f"[string]\n{table}\n{extra}"


def _tube(table: str) -> str:
    return f'material = "aluminium-6061-t6"\n[tube]\n{table}\n'


# (rule, file text, text the error must name)
PART_RULES = [
    ("shape-bogus", _bar(design='shape = "bogus"'), "design.shape"),
    ("end_keep-nan", _bar(design="end_keep = nan"), "design.end_keep"),
    ("end_keep-negative", _bar(design="end_keep = -5"), "design.end_keep"),
    ("end_keep-over-half", _bar(design="end_keep = 250"), "design.end_keep"),
    ("cutter_radius-nan", _bar(design="cutter_radius = nan"), "design.cutter_radius"),
    ("cutter_radius-negative", _bar(design="cutter_radius = -1"), "design.cutter_radius"),
    ("node_zone-nan", _bar(design="node_zone = nan"), "design.node_zone"),
    ("node_zone-negative", _bar(design="node_zone = -2"), "design.node_zone"),
    ("min_thickness-nan", _bar(design="min_thickness = nan"), "design.min_thickness"),
    ("min_thickness-negative", _bar(design="min_thickness = -3"), "design.min_thickness"),
    ("min_thickness-over-blank", _bar(design="min_thickness = 22"), "design.min_thickness"),
    ("max_depth-nan", _bar(design="max_depth = nan"), "design.max_depth"),
    ("max_depth-negative", _bar(design="max_depth = -1"), "design.max_depth"),
    ("max_depth-over-blank", _bar(design="max_depth = 30"), "design.max_depth"),
    ("length_range-too-short", _bar(design="length_range = [1, 400]"), "design.length_range"),
    ("bar-1-mm", _bar({"length": "1"}), "bar.length"),
    ("bar-1-km", _bar({"length": "1e6"}), "bar.length"),
    ("bar-1-km-wide", _bar({"width": "1e6"}), "width 1e+06 mm"),
    ("bar-wider-than-half", _bar({"width": "250"}), "width 250 mm"),
    ("bar-thicker-than-long", _bar({"thickness": "500"}), "thickness 500 mm"),
    ("bar-thicker-than-quarter", _bar({"thickness": "120"}), "thickness 120 mm"),
    ("bar-foil", _bar({"thickness": "0.1"}), "bar.thickness"),
    ("material-unknown", _bar().replace("honduras-rosewood", "unobtainium"), "material"),
    ("material-table-unit-slip", _bar().replace('"honduras-rosewood"', "{ E = 12e9 }"), "E ="),
    ("target-bad-profile", _bar().replace("ratios = [1, 4]", 'profile = "nope"'), "target"),
    ("tube-wider-than-quarter", _tube("length = 200\nouter_diameter = 80\nwall = 2"), "outer_"),
    ("tube-6-m", _tube("length = 6000\nouter_diameter = 38\nwall = 2"), "tube.length"),
    ("string-6-m", _string("length = 6000\ntension = 70\nlinear_density = 0.001"), "string.le"),
    ("string-tension-huge", _string("length = 650\ntension = 1e7\nlinear_density = 1e-3"), "ten"),
    (
        "string-rod",
        _string("length = 100\ntension = 70\ndiameter = 10\n[material]\nE = 200\ndensity = 7850"),
        "diameter 10 mm",
    ),
]

PART_COMMANDS = {
    "modes": lambda f, d: ["modes", f],
    "design": lambda f, d: ["design", f, "--out", str(d / "out"), "--beam-only"],
    "verify": lambda f, d: ["verify", f, "--mesh", "coarse"],
    "shop": lambda f, d: ["shop", f, "--out", str(d / "shop")],
    "advise": lambda f, d: ["advise", f, "--partials", "660,1690"],
    "sound": lambda f, d: ["sound", f, "--out", str(d / "strike.wav")],
    "calibrate": lambda f, d: ["calibrate", f, "--partials", CALIBRATION_PARTIALS],
}


def _one_error_line(result, needle: str) -> str:
    """Exit 2, exactly one ``error:`` line on stderr naming ``needle``, no traceback."""
    assert result.exit_code == 2, (result.exit_code, result.output, result.exception)
    errors = [line for line in result.stderr.splitlines() if line.startswith("error:")]
    assert len(errors) == 1, result.stderr
    assert needle in errors[0], errors[0]
    assert "Traceback" not in result.output and "Traceback" not in result.stderr
    assert not isinstance(result.exception, Exception) or isinstance(
        result.exception, SystemExit
    ), result.exception
    return errors[0]


@pytest.mark.parametrize("command", list(PART_COMMANDS))
@pytest.mark.parametrize(("rule", "text", "needle"), PART_RULES, ids=[r[0] for r in PART_RULES])
def test_part_file_rule_refused_by_every_command(tmp_path, command, rule, text, needle):
    path = tmp_path / "part.toml"
    path.write_text(text, encoding="utf-8")
    result = runner.invoke(app, PART_COMMANDS[command](str(path), tmp_path))
    _one_error_line(result, needle)


ENCODINGS = {
    "latin-1": "title = 'Érable, planche 3'\n".encode("latin-1") + BAR.encode("ascii"),
    "binary": bytes(range(256)) * 4,
}


@pytest.mark.parametrize("command", list(PART_COMMANDS))
@pytest.mark.parametrize("encoding", list(ENCODINGS))
def test_part_file_not_utf8_refused_by_every_command(tmp_path, command, encoding):
    path = tmp_path / "part.toml"
    path.write_bytes(ENCODINGS[encoding])
    result = runner.invoke(app, PART_COMMANDS[command](str(path), tmp_path))
    line = _one_error_line(result, "not UTF-8")
    assert str(path) in line


@pytest.mark.parametrize("command", list(PART_COMMANDS))
def test_part_file_that_is_a_folder(tmp_path, command):
    folder = tmp_path / "part.toml"
    folder.mkdir()
    result = runner.invoke(app, PART_COMMANDS[command](str(folder), tmp_path))
    _one_error_line(result, "folder")


# -- instrument files -------------------------------------------------------------------------

INSTRUMENT = """\
title = "Workshop glockenspiel stub"
lowest = "C5"
highest = "D5"
material = "honduras-rosewood"
[[profile]]
from = "C5"
to = "D5"
profile = "fundamental"
[scaling]
note = "C5"
length = 190
width = 30
thickness = 11
length_halves_every = 24
"""

INSTRUMENT_RULES = [
    ("shape-bogus", '[design]\nshape = "bogus"\n', "design.shape"),
    ("bar-shape-bogus", '[[bar]]\nnote = "D5"\ndesign = { shape = "bogus" }\n', "design.shape"),
    ("end_keep-negative", "[design]\nend_keep = -5\n", "design.end_keep"),
    ("cutter_radius-nan", "[design]\ncutter_radius = nan\n", "design.cutter_radius"),
    ("max_depth-over-blank", "[design]\nmax_depth = 12\n", "design.max_depth"),
    ("min_thickness-over-blank", "[design]\nmin_thickness = 11\n", "design.min_thickness"),
    ("bar-too-thick", '[[bar]]\nnote = "D5"\nthickness = 100\n', "thickness 100 mm"),
]


@pytest.mark.parametrize(
    ("rule", "extra", "needle"), INSTRUMENT_RULES, ids=[r[0] for r in INSTRUMENT_RULES]
)
def test_instrument_file_rule(tmp_path, rule, extra, needle):
    path = tmp_path / "glock.toml"
    path.write_text(INSTRUMENT + extra, encoding="utf-8")
    result = runner.invoke(app, ["instrument", str(path), "--out", str(tmp_path / "run")])
    _one_error_line(result, needle)
    assert not (tmp_path / "run").exists()  # refused before anything is written


def test_instrument_file_not_utf8(tmp_path):
    path = tmp_path / "glock.toml"
    path.write_bytes(INSTRUMENT.replace("stub", "ébauche").encode("latin-1"))
    result = runner.invoke(app, ["instrument", str(path), "--out", str(tmp_path / "run")])
    _one_error_line(result, "not UTF-8")


# -- output folders -----------------------------------------------------------------------------


def _outputs(tmp_path: Path, where: Path) -> dict[str, list[str]]:
    bar = tmp_path / "bar.toml"
    bar.write_text(BAR, encoding="utf-8")
    blank = tmp_path / "blank.toml"
    blank.write_text(BAR.split("[target]")[0], encoding="utf-8")
    glock = tmp_path / "glock.toml"
    glock.write_text(INSTRUMENT, encoding="utf-8")
    return {
        "design": ["design", str(bar), "--out", str(where / "out"), "--beam-only"],
        "shop": ["shop", str(CUT_BAR), "--out", str(where / "shop")],
        "sound": ["sound", str(bar), "--out", str(where / "strike.wav"), "--duration", "0.2"],
        "advise": ["advise", str(bar), "--partials", "660,1690", "--plot", str(where / "m.png")],
        "calibrate": [
            "calibrate",
            str(blank),
            "--partials",
            CALIBRATION_PARTIALS,
            "--density",
            str(load_material("honduras-rosewood").rho),
            "--out",
            str(where / "maple.toml"),
        ],
        "instrument": ["instrument", str(glock), "--out", str(where / "run"), "--jobs", "1"],
    }


@pytest.mark.parametrize(
    "command", ["design", "shop", "sound", "advise", "calibrate", "instrument"]
)
def test_output_under_a_file(tmp_path, command):
    a_file = tmp_path / "notes.txt"
    a_file.write_text("shop notes\n", encoding="utf-8")
    result = runner.invoke(app, _outputs(tmp_path, a_file)[command])
    line = _one_error_line(result, "notes.txt is a file")
    assert ".tmp" not in line
    assert a_file.read_text(encoding="utf-8") == "shop notes\n"


@pytest.mark.parametrize(
    "command", ["design", "shop", "sound", "advise", "calibrate", "instrument"]
)
def test_output_under_proc(tmp_path, command):
    # /proc refuses new entries even to root, so this place is unwritable for every user
    where = Path("/proc/tonewright-no-such-folder")
    result = runner.invoke(app, _outputs(tmp_path, where)[command])
    line = _one_error_line(result, "/proc/tonewright-no-such-folder")
    assert ".tmp" not in line


# -- a string designed without a material ------------------------------------------------------


def test_string_by_linear_density_designs_without_a_material(tmp_path):
    # a string given by its linear density needs no material: the design runs and writes a
    # part file without one, which reads back as a valid part
    path = tmp_path / "string.toml"
    path.write_text(
        _string(
            "length = 650\ntension = 70\nlinear_density = 0.0012",
            '[target]\nfundamental = "E2"\nratios = [1, 2]\ntolerance_cents = 3\n'
            "[design]\ndensity_range = [0.0008, 0.002]\nbudget = 100\n",
        ),
        encoding="utf-8",
    )
    out = tmp_path / "out"
    result = runner.invoke(app, ["design", str(path), "--out", str(out)])
    assert result.exit_code in (0, 1), (result.output, result.exception)
    assert result.exception is None or isinstance(result.exception, SystemExit)
    written = (out / "part.toml").read_text(encoding="utf-8")
    assert "\nmaterial =" not in written
    modes = runner.invoke(app, ["modes", str(out / "part.toml")])
    assert modes.exit_code == 0, modes.output


def test_string_by_diameter_without_a_material_is_refused(tmp_path):
    path = tmp_path / "string.toml"
    path.write_text(_string("length = 650\ntension = 70\ndiameter = 0.5"), encoding="utf-8")
    result = runner.invoke(app, ["modes", str(path)])
    _one_error_line(result, "needs a material")
