"""Part files: one failing input per validation rule, and the command line's one-line errors.

Every rule of ``tonewright.partfile`` is broken once here. The message must name the field, and
``tonewright modes`` must print exactly one line ``error: ...`` on stderr, nothing on stdout,
and exit with code 2 (no traceback).
"""

import copy
import json
from pathlib import Path

import numpy as np
import pytest
import tomli_w
from tonewright.forward import Bar, String, Tube
from typer.testing import CliRunner

from tonewright.cli import app
from tonewright.errors import InputError
from tonewright.materials import MaterialTable
from tonewright.partfile import DesignTable, load_part, parse_part
from tonewright.tuning import TargetSpec

BAR = {"material": "sugar-maple", "bar": {"length": 400, "width": 50, "thickness": 20}}
TUBE = {"material": "sugar-maple", "tube": {"length": 1000, "outer_diameter": 25, "wall": 1.5}}
STRING = {"string": {"length": 650, "tension": 70, "linear_density": 0.0004}}


def _with(base, **tables):
    """A copy of ``base`` with tables merged in (None deletes a key)."""
    out = copy.deepcopy(base)
    for key, value in tables.items():
        if isinstance(value, dict) and isinstance(out.get(key), dict):
            for k, v in value.items():
                if v is None:
                    out[key].pop(k, None)
                else:
                    out[key][k] = v
        elif value is None:
            out.pop(key, None)
        else:
            out[key] = value
    return out


# (id, raw part table, substrings the message must contain: the field, and the value or rule)
CASES = [
    # [bar] lengths
    ("bar-length-negative", _with(BAR, bar={"length": -400}), ["bar.length", "-400", "positive"]),
    ("bar-width-unit", _with(BAR, bar={"width": "50 furlong"}), ["bar.width", "furlong", "mm"]),
    ("bar-typo", _with(BAR, bar={"lenght": 400}), ["bar.lenght", "Extra inputs"]),
    # profile stations
    (
        "profile-one-station",
        _with(BAR, bar={"profile": [[0, 20]]}),
        ["bar.profile", "at least two"],
    ),
    (
        "profile-not-a-pair",
        _with(BAR, bar={"profile": [[0, 20], [100]]}),
        ["bar.profile", "profile[1]", "pair"],
    ),
    (
        "profile-position-unit",
        _with(BAR, bar={"profile": [[0, 20], ["10 furlong", 20]]}),
        ["profile[1] position", "furlong"],
    ),
    (
        "profile-value-negative",
        _with(BAR, bar={"profile": [[0, 20], [100, -3]]}),
        ["profile[1] value", "-3", "positive"],
    ),
    (
        "profile-order",
        _with(BAR, bar={"profile": [[0, 20], [200, 10], [100, 10]]}),
        ["bar.profile", "increase"],
    ),
    (
        "profile-beyond-length",
        _with(BAR, bar={"profile": [[0, 20], [500, 10]]}),
        ["profile", "500 mm", "400 mm"],
    ),
    (
        "profile-thicker-than-blank",
        _with(BAR, bar={"profile": [[0, 20], [100, 25]]}),
        ["profile thickness", "25 mm", "20 mm"],
    ),
    (
        "width-profile-beyond-length",
        _with(BAR, bar={"width_profile": [[0, 50], [450, 40]]}),
        ["width_profile", "450 mm"],
    ),
    # holes
    (
        "hole-outside-bar",
        _with(BAR, bar={"holes": [{"at": 1, "diameter": 5}]}),
        ["holes[0]", "1 mm", "fit"],
    ),
    (
        "hole-breaks-out",
        _with(BAR, bar={"holes": [{"at": 90, "diameter": 5, "height": 2}]}),
        ["holes[0]", "5 mm", "2 mm", "breaks out"],
    ),
    (
        "holes-overlap",
        _with(BAR, bar={"holes": [{"at": 90, "diameter": 5}, {"at": 93, "diameter": 5}]}),
        ["holes overlap"],
    ),
    (
        "hole-diameter-zero",
        _with(BAR, bar={"holes": [{"at": 90, "diameter": 0}]}),
        ["bar.holes.0.diameter", "positive"],
    ),
    # [tube]
    ("tube-wall-too-thick", _with(TUBE, tube={"wall": 13}), ["wall 13 mm", "25 mm", "half"]),
    (
        "tube-wall-profile-beyond",
        _with(TUBE, tube={"wall_profile": [[0, 1.5], [1200, 1.5]]}),
        ["wall_profile", "1200 mm"],
    ),
    # [string]
    ("string-tension", _with(STRING, string={"tension": 0}), ["string.tension", "greater than 0"]),
    (
        "string-density-negative",
        _with(STRING, string={"linear_density": -1}),
        ["string.linear_density", "-1"],
    ),
    (
        "string-no-density",
        _with(STRING, string={"linear_density": None}),
        ["string", "linear_density", "diameter"],
    ),
    (
        "string-density-and-diameter",
        _with(STRING, string={"diameter": 1}, material="sugar-maple"),
        ["string", "not both"],
    ),
    (
        "string-density-profile-value",
        _with(
            STRING,
            string={"linear_density": None, "density_profile": [[0, 0.001], [100, 0]]},
        ),
        ["density_profile[1]", "positive kg/m"],
    ),
    (
        "string-density-profile-position",
        _with(
            STRING,
            string={"linear_density": None, "density_profile": [[0, 0.001], ["x", 0.001]]},
        ),
        ["density_profile[1] position"],
    ),
    (
        "string-density-profile-beyond",
        _with(
            STRING,
            string={"linear_density": None, "density_profile": [[0, 0.001], [700, 0.001]]},
        ),
        ["density_profile", "700 mm", "650 mm"],
    ),
    (
        "string-bending-stiffness",
        _with(STRING, string={"bending_stiffness": -1}),
        ["string.bending_stiffness", "-1"],
    ),
    (
        "string-diameter-without-material",
        _with(STRING, string={"linear_density": None, "diameter": 1}),
        ["diameter", "material"],
    ),
    # [[support]]
    (
        "support-kind",
        _with(BAR, support=[{"kind": "glue", "at": 10}]),
        ["support.0.kind", "glue", "cord"],
    ),
    (
        "support-cord-stiffness",
        _with(BAR, support=[{"kind": "cord", "at": 10}]),
        ["support.0", "cord needs stiffness"],
    ),
    (
        "support-mass-grams",
        _with(BAR, support=[{"kind": "mass", "at": 10}]),
        ["support.0", "needs grams"],
    ),
    (
        "support-stiffness-negative",
        _with(BAR, support=[{"kind": "spring", "at": 10, "stiffness": -2}]),
        ["support.0.stiffness", "-2"],
    ),
    (
        "support-grams-zero",
        _with(BAR, support=[{"kind": "mass", "at": 10, "grams": 0}]),
        ["support.0.grams", "greater than 0"],
    ),
    (
        "support-beyond-part",
        _with(BAR, support=[{"kind": "pin", "at": 410}]),
        ["support[0]", "410 mm", "beyond"],
    ),
    (
        "support-position-negative",
        _with(BAR, support=[{"kind": "pin", "at": -5}]),
        ["support.0.at"],
    ),
    # [model]
    (
        "model-theory",
        _with(BAR, model={"theory": "bernoulli"}),
        ["model.theory", "bernoulli", "timoshenko"],
    ),
    (
        "model-tolerance-zero",
        _with(BAR, model={"tolerance_cents": 0}),
        ["model.tolerance_cents", "greater than 0"],
    ),
    (
        "model-tolerance-large",
        _with(BAR, model={"tolerance_cents": 50}),
        ["model.tolerance_cents", "50", "10"],
    ),
    # the file as a whole
    ("no-part", {"material": "sugar-maple"}, ["exactly one of [bar], [tube], [string]"]),
    ("two-parts", _with(BAR, string=STRING["string"]), ["exactly one", "found bar, string"]),
    ("bar-without-material", _with(BAR, material=None), ["material is missing"]),
    ("unknown-top-level-key", _with(BAR, colour="red"), ["colour", "Extra inputs"]),
    ("unknown-material", _with(BAR, material="unobtainium"), ["unobtainium", "sugar-maple"]),
    ("material-not-a-name", _with(BAR, material=5), ["material", "library name", "table"]),
    (
        "material-table-field",
        _with(BAR, material={"E": 12.6, "density": 0.7}),
        ["material", "density = 0.7", "kg/m^3"],
    ),
    # sizes the models handle (partfile.SIZE_LIMITS)
    ("bar-too-short", _with(BAR, bar={"length": 5}), ["bar.length", "5 mm", "10 mm to 5000 mm"]),
    ("bar-too-long", _with(BAR, bar={"length": 6000}), ["bar.length", "6000 mm", "5000 mm"]),
    ("bar-too-wide", _with(BAR, bar={"width": 250}), ["bar", "width 250 mm", "200 mm"]),
    ("bar-too-thick", _with(BAR, bar={"thickness": 120}), ["bar", "thickness 120 mm", "100 mm"]),
    ("bar-too-thin", _with(BAR, bar={"thickness": 0.2}), ["bar.thickness", "0.2 mm", "0.5 mm"]),
    (
        "bar-width-profile-too-wide",
        _with(BAR, bar={"width_profile": [[0, 50], [400, 210]]}),
        ["width 210 mm", "200 mm"],
    ),
    ("tube-too-long", _with(TUBE, tube={"length": 5500}), ["tube.length", "5500 mm"]),
    ("tube-too-fat", _with(TUBE, tube={"length": 80}), ["outer_diameter 25 mm", "20 mm"]),
    ("string-too-long", _with(STRING, string={"length": 7000}), ["string.length", "7000 mm"]),
    ("string-tension-huge", _with(STRING, string={"tension": 2e5}), ["string.tension", "100000"]),
    (
        "string-too-thick",
        _with(STRING, material="sugar-maple", string={"linear_density": None, "diameter": 40}),
        ["diameter 40 mm", "32.5 mm"],
    ),
    # [design]: validated with the part, against the part
    ("design-shape", _with(BAR, design={"shape": "bogus"}), ["design.shape", "bogus", "spline"]),
    ("design-typo", _with(BAR, design={"min_thikness": 4}), ["design.min_thikness", "Extra"]),
    ("design-end-keep-nan", _with(BAR, design={"end_keep": "nan"}), ["design.end_keep", "finite"]),
    ("design-end-keep-negative", _with(BAR, design={"end_keep": -5}), ["design.end_keep", "-5"]),
    ("design-end-keep-half", _with(BAR, design={"end_keep": 200}), ["design.end_keep", "half"]),
    ("design-node-zone-negative", _with(BAR, design={"node_zone": -1}), ["design.node_zone"]),
    ("design-cutter-nan", _with(BAR, design={"cutter_radius": "nan"}), ["design.cutter_radius"]),
    ("design-min-thickness-zero", _with(BAR, design={"min_thickness": 0}), ["min_thickness"]),
    (
        "design-min-thickness-blank",
        _with(BAR, design={"min_thickness": 20}),
        ["design.min_thickness 20 mm", "blank thickness 20 mm"],
    ),
    ("design-max-depth-nan", _with(BAR, design={"max_depth": "nan"}), ["design.max_depth"]),
    (
        "design-max-depth-blank",
        _with(BAR, design={"max_depth": 25}),
        ["design.max_depth 25 mm", "blank thickness 20 mm"],
    ),
    (
        "design-free-length-without-range",
        _with(BAR, design={"free_length": True}),
        ["design", "length_range"],
    ),
    (
        "design-wall-range-too-thick",
        _with(TUBE, design={"wall_range": [1, 13]}),
        ["design.wall_range", "13 mm", "25 mm"],
    ),
    # [target]: validated with the part
    ("target-no-partials", _with(BAR, target={"fundamental": "F4"}), ["target", "exactly one"]),
    (
        "target-profile-unknown",
        _with(BAR, target={"fundamental": "F4", "profile": "nope"}),
        ["target", "nope", "not in the library"],
    ),
]


def _write(path, raw):
    path.write_text(tomli_w.dumps(raw), encoding="utf-8")
    return path


@pytest.mark.parametrize(("raw", "needles"), [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_every_rule_names_the_field(raw, needles, tmp_path):
    path = _write(tmp_path / "part.toml", raw)
    with pytest.raises(InputError) as err:
        part_file, base = load_part(path)
        part_file.to_part(base)  # material names resolve here
    message = str(err.value)
    assert "\n" not in message
    for needle in needles:
        assert needle in message, f"{needle!r} missing from {message!r}"


RUNNER = CliRunner()


@pytest.mark.parametrize(("raw", "needles"), [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_cli_prints_one_line_and_exits_2(raw, needles, tmp_path):
    path = _write(tmp_path / "part.toml", raw)
    result = RUNNER.invoke(app, ["modes", str(path)])
    assert result.exit_code == 2
    assert result.stdout == ""
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ")
    assert "Traceback" not in result.output
    assert needles[0] in lines[0]


@pytest.mark.parametrize(
    ("name", "text", "needle"),
    [
        ("broken.toml", "[bar\nlength = 400\n", "not valid TOML"),
        ("broken.json", '{"part": ', "not valid JSON"),
        ("result.json", json.dumps({"modes": []}), 'needs a "part" table'),
    ],
)
def test_unreadable_files(name, text, needle, tmp_path):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    with pytest.raises(InputError, match=needle):
        load_part(path)
    result = RUNNER.invoke(app, ["modes", str(path)])
    assert result.exit_code == 2
    assert result.stderr.startswith("error: ") and result.stderr.count("\n") == 1
    assert name in result.stderr


def test_missing_file_exits_2(tmp_path):
    result = RUNNER.invoke(app, ["modes", str(tmp_path / "nowhere.toml")])
    assert result.exit_code == 2
    assert result.stderr.startswith("error: file not found")


def test_valid_files_build_the_right_parts(tmp_path):
    # Unit conversion at the door: mm by default, 1 in = 25.4 mm (1959 agreement); cords in
    # N/mm become N/m, masses in grams become kg.
    bar = _with(
        BAR,
        bar={"length": "15.75 in", "profile": [[0, 20], ["4 in", 20], [200, 8], [300, 20]]},
        support=[
            {"kind": "cord", "at": 90, "stiffness": 2.0},
            {"kind": "mass", "at": "0.2 m", "grams": 12.5},
        ],
    )
    part_file, base = load_part(_write(tmp_path / "bar.toml", bar))
    part = part_file.to_part(base)
    assert isinstance(part, Bar)
    assert part.length == pytest.approx(0.40005, rel=1e-12)  # 15.75 x 25.4 mm
    assert part.thickness(np.array([0.2])) == pytest.approx([0.008], rel=1e-12)
    assert part.thickness.breakpoints[1] == pytest.approx(0.1016, rel=1e-12)
    (cord, mass) = part.supports
    assert (cord.kind, cord.x, cord.value) == ("spring", pytest.approx(0.09), pytest.approx(2000))
    assert (mass.kind, mass.x, mass.value) == ("mass", pytest.approx(0.2), pytest.approx(0.0125))

    tube = load_part(_write(tmp_path / "tube.toml", TUBE))[0].to_part()
    assert isinstance(tube, Tube)
    assert tube.wall(np.array([0.5])) == pytest.approx([0.0015])

    # A string by diameter takes mu = rho pi d^2 / 4 and EI = E pi d^4 / 64 from its material,
    # and is pinned at both ends unless told otherwise.
    wire = {"material": "sugar-maple", "string": {"length": 650, "tension": 70, "diameter": 1}}
    string = load_part(_write(tmp_path / "s.toml", wire))[0].to_part()
    assert isinstance(string, String)
    rho, E = 705.6, 12.6e9  # library sugar-maple (Wood Handbook values, materials.toml)
    assert string.linear_density(np.array([0.0]))[0] == pytest.approx(rho * np.pi * 1e-6 / 4)
    assert string.bending_stiffness(np.array([0.0]))[0] == pytest.approx(E * np.pi * 1e-12 / 64)
    assert [(s.kind, s.x) for s in string.supports] == [("pin", 0.0), ("pin", 0.65)]


def test_design_result_json_is_read_through_its_part_table(tmp_path):
    path = tmp_path / "design.json"
    path.write_text(json.dumps({"part": BAR, "other": 1}), encoding="utf-8")
    part_file, _ = load_part(path)
    assert part_file.kind == "bar" and part_file.length == pytest.approx(0.4)
    assert parse_part(BAR).to_part().length == pytest.approx(0.4)


def test_tables_are_typed_frozen_values(tmp_path):
    raw = _with(
        BAR,
        target={"fundamental": "F4", "ratios": [1, 4]},
        design={"shape": "arch", "end_keep": 10, "cutter_radius": "1 in"},
    )
    part_file = parse_part(raw)
    assert isinstance(part_file.design, DesignTable) and part_file.design.shape == "arch"
    assert part_file.design.end_keep == pytest.approx(0.010)  # mm at the door, metres inside
    assert part_file.design.cutter_radius == pytest.approx(0.0254)  # 1 in = 25.4 mm (1959)
    assert isinstance(part_file.target, TargetSpec) and part_file.target.ratios == [1, 4]
    with pytest.raises(ValueError, match="frozen"):
        part_file.design.shape = "steps"  # type: ignore[misc]
    # no [design] table: the defaults, not None
    assert parse_part(BAR).design == DesignTable()


def test_material_entry_is_a_name_a_file_or_a_table(tmp_path):
    assert parse_part(BAR).material == "sugar-maple"
    table = parse_part(_with(BAR, material={"base": "sugar-maple", "E": 11.0})).material
    assert isinstance(table, MaterialTable) and table.E == 11.0
    maple = tmp_path / "maple.toml"
    maple.write_text('name = "board 3"\nbase = "sugar-maple"\nE = 11.5\n', encoding="utf-8")
    part_file, base = load_part(_write(tmp_path / "bar.toml", _with(BAR, material="maple.toml")))
    assert part_file.material == Path("maple.toml")
    assert part_file.material_spec(base).E == pytest.approx(11.5e9)  # found beside the part


def test_written_back_tables_read_back_the_same(tmp_path):
    # material and target as written by a design (part_table): the same values on reading
    raw = _with(
        BAR,
        material={"base": "sugar-maple", "E": 11.0},
        target={"fundamental": "F4", "profile": "marimba-1-4-10", "tolerance_cents": 2},
    )
    first = parse_part(raw)
    again = parse_part(
        {
            "bar": raw["bar"],
            "material": first.material_value(),
            "target": first.target_value(),
        }
    )
    assert again.material == first.material and again.target == first.target
    assert first.target_value() == raw["target"]  # defaults are not written out
    assert parse_part(STRING).material_value() is None
