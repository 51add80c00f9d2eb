"""``tonewright modes``: the table, the JSON shape, --count, tubes, strings and inch units."""

import json
from pathlib import Path

import numpy as np
import pytest
import tomli_w
from tonewright.forward import solve
from typer.testing import CliRunner

from tonewright.cli import app
from tonewright.partfile import load_part

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "examples" / "workshop-f4-bar.toml"
RUNNER = CliRunner()
REL_F = 6e-6  # the solves' 0.01-cent bound, 2^(0.01/1200) - 1 = 5.8e-6
MODE_KEYS = {"family", "order", "frequency_hz", "ratio", "note", "cents", "error_cents", "nodes_mm"}


def _modes_json(*args, model="beam"):
    # the beam route unless asked: these tests check the beam solve's own contract
    result = RUNNER.invoke(app, ["modes", *map(str, args), "--json", "--model", model])
    assert result.exit_code == 0, result.output
    return json.loads(result.stdout)


def _write(path, raw):
    path.write_text(tomli_w.dumps(raw), encoding="utf-8")
    return path


def test_table_for_the_demo_bar():
    result = RUNNER.invoke(app, ["modes", str(DEMO), "--model", "beam"])
    assert result.exit_code == 0, result.output
    assert "model: beam model" in result.stdout
    out = result.stdout
    for header in ("family", "Hz", "ratio", "note", "cents", "nodes (mm)"):
        assert header in out
    assert "Workshop marimba, F4 bar" in out  # the file's title
    for family in ("bending", "lateral", "torsion", "axial"):
        assert family in out
    assert "converged" in out and "A4 = 440 Hz" in out


@pytest.fixture(scope="module")
def demo_payload():
    return _modes_json(DEMO)


def test_json_shape_and_values_for_the_demo_bar(demo_payload):
    payload = demo_payload
    assert set(payload) >= {"modes", "converged", "max_error_cents", "a4_hz"}
    assert payload["converged"] is True and payload["a4_hz"] == 440.0
    modes = payload["modes"]
    assert all(set(m) == MODE_KEYS for m in modes)
    # default --count 4 of each of a bar's four families, sorted by frequency
    assert sorted({m["family"] for m in modes}) == ["axial", "bending", "lateral", "torsion"]
    assert all(sum(m["family"] == f for m in modes) == 4 for f in {m["family"] for m in modes})
    freqs = [m["frequency_hz"] for m in modes]
    assert freqs == sorted(freqs)
    # the same numbers as the library (JSON rounds Hz to 6 decimals, nodes to 1 micrometre)
    part_file, base = load_part(DEMO)
    result = solve(
        part_file.to_part(base), dict.fromkeys(("bending", "lateral", "torsion", "axial"), 4)
    )
    for m in modes:
        ref = next(r for r in result.modes if (r.family, r.order) == (m["family"], m["order"]))
        assert m["frequency_hz"] == pytest.approx(ref.frequency_hz, abs=1e-6)
        assert m["nodes_mm"] == pytest.approx(np.array(ref.nodes_m) * 1e3, abs=1e-3)
    first = next(m for m in modes if m["family"] == "bending" and m["order"] == 1)
    assert first["ratio"] == 1.0
    # A free-free bar's first bending mode has two nodes, symmetric on a symmetric bar (the
    # demo's cords sit symmetrically at 90 and 310 mm of 400 mm).
    left, right = first["nodes_mm"]
    assert left + right == pytest.approx(400.0, abs=2e-3)
    # Notes: 12-TET names at A4 = 440 Hz (ISO 16:1975 standard pitch); offset in [-50, 50).
    f = first["frequency_hz"]
    semitones = 12 * np.log2(f / 440.0)
    assert first["cents"] == pytest.approx(100 * (semitones - np.round(semitones)), abs=1e-3)


def test_count_option():
    payload = _modes_json(DEMO, "--count", 2)
    families = [m["family"] for m in payload["modes"]]
    assert len(families) == 8 and all(families.count(f) == 2 for f in set(families))


@pytest.mark.parametrize("args", [["--count", "0"], ["--count", "51"], ["--a4", "1000"]])
def test_bad_options_exit_2_with_one_line(args):
    result = RUNNER.invoke(app, ["modes", str(DEMO), *args])
    assert result.exit_code == 2
    assert result.stderr.startswith("error: ") and result.stderr.count("\n") == 1
    assert args[0] in result.stderr  # the message names the option


def test_tube_file(tmp_path):
    # A brass chime, Euler-Bernoulli theory chosen in the file's [model] table: the first
    # partial follows the free-free beam with I = pi (Do^4 - Di^4)/64 (second moment of an annulus,
    # standard), beta L =
    # 4.73004074 (Thomson, App. D). Library brass is read back from the library itself.
    raw = {
        "title": "Chime for the workshop door",
        "material": "brass-c26000",
        "tube": {"length": 900, "outer_diameter": 22, "wall": 1.2},
        "model": {"theory": "euler-bernoulli"},
    }
    path = _write(tmp_path / "chime.toml", raw)
    payload = _modes_json(path, "-n", 2)
    assert sorted({m["family"] for m in payload["modes"]}) == ["axial", "bending", "torsion"]
    part_file, base = load_part(path)
    mat = part_file.to_part(base).material
    Do, Di, L = 0.022, 0.022 - 2.4e-3, 0.9
    I_over_A = (Do**2 + Di**2) / 16  # pi (Do^4 - Di^4)/64 over pi (Do^2 - Di^2)/4
    f1 = 4.73004074**2 / (2 * np.pi * L**2) * np.sqrt(mat.E * I_over_A / mat.rho)
    bending = [m for m in payload["modes"] if m["family"] == "bending"]
    assert bending[0]["frequency_hz"] == pytest.approx(f1, rel=REL_F)
    # hung at the first mode's nodes, 0.22416 L from each end (derived from the exact
    # Euler-Bernoulli mode shape)
    assert bending[0]["nodes_mm"] == pytest.approx([0.22416 * 900, 0.77584 * 900], abs=0.01)


def test_string_file(tmp_path):
    # An ideal string tuned to A4: f1 = (1/2L) sqrt(T / mu) = 440 Hz (closed form), so its
    # modes are the harmonic series and the first is named A4 with 0 cents (A4 = 440 Hz).
    L, mu = 0.65, 4e-4
    T = mu * (2 * L * 440.0) ** 2
    raw = {"string": {"length": L * 1e3, "tension": T, "linear_density": mu}}
    payload = _modes_json(_write(tmp_path / "a4.toml", raw), "-n", 3)
    modes = payload["modes"]
    assert [m["family"] for m in modes] == ["transverse"] * 3
    assert [m["frequency_hz"] for m in modes] == pytest.approx([440.0, 880.0, 1320.0], rel=REL_F)
    assert [m["note"] for m in modes] == ["A4", "A5", "E6"]
    assert modes[0]["cents"] == pytest.approx(0.0, abs=0.01)
    # 1320 Hz is a just fifth above A5: +1.955 cents from equal-tempered E6 (3/2 = 701.955 c)
    assert modes[2]["cents"] == pytest.approx(1.955, abs=0.01)
    assert modes[1]["nodes_mm"] == pytest.approx([325.0], abs=1e-3)
    # at A4 = 442 Hz the same string reads 1200 log2(440/442) = -7.85 cents from A4
    shifted = _modes_json(tmp_path / "a4.toml", "-n", 1, "--a4", 442)
    assert shifted["modes"][0]["cents"] == pytest.approx(1200 * np.log2(440 / 442), abs=0.01)


def test_inch_units_give_the_same_modes_as_millimetres(tmp_path):
    # 1 in = 25.4 mm exactly (international yard and pound agreement, 1959).
    inch = {
        "material": "sugar-maple",
        "bar": {
            "length": "14 in",
            "width": "2 1/4 in",
            "thickness": '7/8"',
            "profile": [
                [0, "7/8 in"],
                ["4 in", "7/8 in"],
                ["6 in", "3/8 in"],
                ["8 in", "3/8 in"],
                ["10 in", "7/8 in"],
                ["14 in", "7/8 in"],
            ],
        },
        "support": [
            {"kind": "cord", "at": "3.1 in", "stiffness": 1.0},
            {"kind": "cord", "at": "10.9 in", "stiffness": 1.0},
        ],
    }
    mm = {
        "material": "sugar-maple",
        "bar": {
            "length": 355.6,
            "width": 57.15,
            "thickness": 22.225,
            "profile": [
                [0, 22.225],
                [101.6, 22.225],
                [152.4, 9.525],
                [203.2, 9.525],
                [254.0, 22.225],
                [355.6, 22.225],
            ],
        },
        "support": [
            {"kind": "cord", "at": 78.74, "stiffness": 1.0},
            {"kind": "cord", "at": 276.86, "stiffness": 1.0},
        ],
    }
    a = _modes_json(_write(tmp_path / "inch.toml", inch), "-n", 2)["modes"]
    b = _modes_json(_write(tmp_path / "mm.toml", mm), "-n", 2)["modes"]
    assert [m["frequency_hz"] for m in a] == pytest.approx([m["frequency_hz"] for m in b], rel=1e-9)
    for ma, mb in zip(a, b, strict=True):
        assert ma["nodes_mm"] == pytest.approx(mb["nodes_mm"], abs=1e-3)  # reported in mm


def test_a_bar_is_solved_in_3d_by_default_and_says_so(tmp_path):
    # a uniform aluminium bar 300 x 40 x 12 mm: the 3D model's first bending mode lies within
    # 1 % of the free-free Euler-Bernoulli value f = (4.730^2 / 2 pi) sqrt(E I / (rho A L^4))
    # (Blevins 1979, Formulas for Natural Frequency and Mode Shape, table 8-1), a little
    # below it (shear and rotary inertia lower it), and below the beam's first torsion mode
    raw = {
        "title": "uniform aluminium",
        "material": "aluminium-6061-t6",
        "bar": {"length": 300, "width": 40, "thickness": 12},
    }
    payload = _modes_json(_write(tmp_path / "al.toml", raw), "-n", 2, model="auto")
    assert payload["model"] == "3D solid (p-version)"
    first = next(m for m in payload["modes"] if m["family"] == "bending" and m["order"] == 1)
    part_file, base = load_part(tmp_path / "al.toml")
    mat = part_file.to_part(base).material
    E, rho = mat.E, mat.rho
    L, h = 0.3, 0.012
    f_eb = 4.7300408**2 / (2 * np.pi) * np.sqrt(E * h**2 / 12 / (rho * L**4))
    assert 0.99 * f_eb < first["frequency_hz"] < f_eb
    assert first["error_cents"] < 0.1  # the error estimate of the converged model
    assert len(first["nodes_mm"]) == 2
