"""`tonewright verify`: the 3D check of a bar from a part file or a design result.

The 3D models' own evidence (closed forms, scikit-fem cross-check, convergence) is in
tests/test_solid.py and tests/test_psolid.py; here: the command's output, its comparison
with the beam model, and its error paths.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from tonewright.cli import app

runner = CliRunner()


def _write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "p.toml"
    path.write_text(text)
    return path


def test_tubes_are_refused_with_one_line(tmp_path):
    path = _write(
        tmp_path,
        'material = "aluminium-6061-t6"\n[tube]\nlength = 800\nouter_diameter = 32\nwall = 1.5\n',
    )
    result = runner.invoke(app, ["verify", str(path), "--json"])
    assert result.exit_code == 2
    assert "for bars" in result.output and "Traceback" not in result.output


def test_bad_mesh_option(tmp_path):
    path = _write(
        tmp_path, 'material = "sugar-maple"\n[bar]\nlength = 300\nwidth = 40\nthickness = 20\n'
    )
    result = runner.invoke(app, ["verify", str(path), "--mesh", "huge"])
    assert result.exit_code == 2
    result = runner.invoke(app, ["verify", str(path), "--model", "fem"])
    assert result.exit_code == 2 and "psolid or hex27" in result.output


def test_the_default_is_the_certifying_model_with_an_error_estimate(tmp_path):
    # the p-version model that certifies designs, each mode with its error estimate
    # (extrapolated over three degrees, never above the change from one degree lower:
    # tests/test_psolid.py); on this
    # uniform maple blank under 0.1 cent for bending 1-3, under 0.5 cent for every mode
    path = _write(
        tmp_path, 'material = "sugar-maple"\n[bar]\nlength = 400\nwidth = 50\nthickness = 22\n'
    )
    result = runner.invoke(app, ["verify", str(path), "--json"])
    assert result.exit_code == 0, result.output
    payload = json.loads(result.output)
    assert "p-version" in payload["model"]
    wanted = [m for m in payload["modes"] if m["family"] in ("bending", "torsion", "lateral")]
    assert len(wanted) >= 7
    bending = [m for m in wanted if m["family"] == "bending" and m["order"] <= 3]
    assert len(bending) == 3 and all(m["error_cents"] < 0.1 for m in bending)
    assert all(m["error_cents"] is not None and m["error_cents"] < 0.5 for m in wanted)
    assert payload["mesh"]["max_error_cents"] < 0.5


@pytest.mark.slow
def test_uniform_bar_3d_against_beam(tmp_path):
    # uniform sugar-maple blank: the Timoshenko beam with orthotropic torsion agrees with the
    # 3D model within a few cents on bending 1-2 (measured ~0.3-1 cent) and torsion 1
    path = _write(
        tmp_path, 'material = "sugar-maple"\n[bar]\nlength = 400\nwidth = 50\nthickness = 22\n'
    )
    result = runner.invoke(
        app, ["verify", str(path), "--json", "--model", "hex27", "--mesh", "coarse"]
    )
    assert result.exit_code == 0, result.output
    payload = json.loads(result.output)
    modes = {(m["family"], m["order"]): m for m in payload["modes"]}
    for key, tol in ((("bending", 1), 5.0), (("bending", 2), 5.0), (("torsion", 1), 10.0)):
        assert abs(modes[key]["beam_minus_3d_cents"]) < tol, (key, modes[key])
    assert modes[("bending", 1)]["nodes_mm"][0] == pytest.approx(0.2242 * 400, abs=3.0)
