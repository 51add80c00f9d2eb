"""End-to-end: `tonewright design` on the bundled demo, its written part reproduced by
`tonewright modes`, `tonewright shop` on the result, and the error paths."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from tonewright.cli import app

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
runner = CliRunner()


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo") / "out"
    result = runner.invoke(
        app, ["design", str(EXAMPLES / "workshop-marimba-c4.toml"), "--out", str(out)]
    )
    return result, out


def test_demo_design_meets_its_target(demo):
    result, out = demo
    assert result.exit_code == 0, result.output
    payload = json.loads((out / "result.json").read_text())
    assert payload["converged"] is True
    assert {"part", "partials", "converged"} <= set(payload)
    assert payload["modes_tracked_by_shape"] is True  # the tuned partials kept their shapes
    for row in payload["partials"]:
        assert {"family", "order", "target_hz", "achieved_hz", "error_cents"} <= set(row)
        assert abs(row["error_cents"]) <= row["tolerance_cents"]
    # marimba 1:4:10 at C4 = 261.626 Hz (equal temperament, A4 = 440 Hz)
    targets = [r["target_hz"] for r in payload["partials"]]
    assert np.allclose(targets, 261.6256 * np.array([1, 4, 10]), rtol=1e-6)
    for name in ("part.toml", "profile.png", "profile.svg", "spectrum.png", "spectrum.svg"):
        assert (out / name).stat().st_size > 0
    # certified in 3D by default: the partials, the clearance of the torsion and lateral
    # modes and the plotted modes are the 3D model's, and the result names it
    assert all(r["certified_by"].startswith("3D solid (p-version)") for r in payload["partials"])
    assert payload["unwanted_modes_model"].startswith("3D model")
    assert payload["modes_model"].startswith("3D solid (p-version)")
    assert {"torsion", "lateral", "bending"} <= {m["family"] for m in payload["modes"]}
    assert "3D solid (p-version)" in " ".join(result.output.split())


def test_written_part_reproduces_the_result(demo):
    _, out = demo
    payload = json.loads((out / "result.json").read_text())
    for model, key, within in (("beam", "beam_hz", 0.01), ("auto", "achieved_hz", 0.3)):
        modes = runner.invoke(
            app, ["modes", str(out / "part.toml"), "--json", "-n", "3", "--model", model]
        )
        assert modes.exit_code == 0, modes.output
        found = {
            (m["family"], m["order"]): m["frequency_hz"] for m in json.loads(modes.output)["modes"]
        }
        for row in payload["partials"]:
            f = found[(row["family"], row["order"])]
            # the beam: same model, same file; 'modes' by default: the certifying 3D model on
            # the written stations with its own mesh, so the design's pitch is what it reads
            assert abs(1200 * np.log2(f / row[key])) < within, (model, row)
    # the cut in the design's own terms, plus a station table to read it by
    cut = payload["part"]["bar"]["undercut"]
    assert cut["shape"] == "spline" and len(cut["depths"]) == 5
    x = np.array([p[0] for p in cut["stations"]])
    assert set(np.arange(0.0, 400.1, 5.0)) <= set(x) and len(x) < 100


def test_written_part_file_is_compact_and_exact(demo):
    _, out = demo
    text = (out / "part.toml").read_text()
    assert len(text.splitlines()) < 60  # it was 5,974 lines, one number a line
    assert "profile = [" not in text
    assert "certified by the 3D solid (p-version)" in text
    # the summary says where the cut starts, not only where it may
    payload = json.loads((out / "result.json").read_text())
    summary = payload["design"]["summary"]
    assert summary["cut_starts_mm"] > summary["shape_from_mm"] + 20
    values = payload["design"]["values"]
    assert all(k.endswith("(mm)") for k in values)
    assert max(values.values()) == pytest.approx(
        max(payload["part"]["bar"]["undercut"]["depths"]), abs=1e-5
    )


def test_result_json_is_a_part_file_too(demo):
    _, out = demo
    modes = runner.invoke(app, ["modes", str(out / "result.json"), "--json"])
    assert modes.exit_code == 0, modes.output


def test_refuses_to_overwrite_without_force(demo):
    _, out = demo
    again = runner.invoke(
        app, ["design", str(EXAMPLES / "workshop-marimba-c4.toml"), "--out", str(out)]
    )
    assert again.exit_code == 2
    assert "--force" in again.output


@pytest.mark.slow
def test_shop_outputs_from_the_design(demo, tmp_path):
    _, out = demo
    shop = runner.invoke(app, ["shop", str(out / "result.json"), "--out", str(tmp_path / "shop")])
    assert shop.exit_code == 0, shop.output
    names = sorted(p.name for p in (tmp_path / "shop").iterdir())
    assert any(n.endswith(".dxf") for n in names)
    assert any(n.endswith("_undercut.nc") for n in names)
    assert any(n.endswith("_template.pdf") for n in names)
    gcode = next((tmp_path / "shop").glob("*.nc")).read_text()
    assert "G21" in gcode and "M30" in gcode and "dust" in gcode.lower()


def _write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "part.toml"
    path.write_text(text)
    return path


def test_missing_target_is_a_clear_error(tmp_path):
    path = _write(
        tmp_path, 'material = "sugar-maple"\n[bar]\nlength = 300\nwidth = 40\nthickness = 20\n'
    )
    result = runner.invoke(app, ["design", str(path), "--out", str(tmp_path / "o")])
    assert result.exit_code == 2
    assert "target" in result.output and "Traceback" not in result.output


@pytest.mark.slow
def test_unreachable_target_exits_nonzero_and_names_the_limit(tmp_path):
    text = (EXAMPLES / "workshop-marimba-c4.toml").read_text()
    text = text.replace('fundamental = "C4"', 'fundamental = "C6"')  # far above the blank
    path = _write(tmp_path, text + "budget = 300\n")
    result = runner.invoke(app, ["design", str(path), "--out", str(tmp_path / "o")])
    assert result.exit_code == 1, result.output
    payload = json.loads((tmp_path / "o" / "result.json").read_text())
    assert payload["converged"] is False and "out of reach" in payload["message"]
    assert payload["binding_limits"]


def test_bad_design_table_is_one_line(tmp_path):
    text = (EXAMPLES / "workshop-marimba-c4.toml").read_text() + "min_thikness = 4\n"
    path = _write(tmp_path, text)
    result = runner.invoke(app, ["design", str(path), "--out", str(tmp_path / "o")])
    assert result.exit_code == 2
    assert "design.min_thikness" in result.output
    assert len(result.output.strip().splitlines()) == 1


@pytest.mark.slow
def test_design_same_seed_same_files(tmp_path):
    src = tmp_path / "p.toml"
    shutil.copy(EXAMPLES / "workshop-marimba-c4.toml", src)
    a = runner.invoke(app, ["design", str(src), "--out", str(tmp_path / "a"), "--seed", "2"])
    b = runner.invoke(app, ["design", str(src), "--out", str(tmp_path / "b"), "--seed", "2"])
    assert a.exit_code == b.exit_code == 0
    assert (tmp_path / "a" / "part.toml").read_bytes() == (
        tmp_path / "b" / "part.toml"
    ).read_bytes()
    assert (tmp_path / "a" / "profile.svg").read_bytes() == (
        tmp_path / "b" / "profile.svg"
    ).read_bytes()


def test_wood_without_orthotropic_data_fails_before_the_search(tmp_path):
    # an inline wood-like material (E/G = 14) has no ratios for the 2D model: say so at once
    text = (
        "[material]\nE = 20\nG = 1.4\ndensity = 900\n[bar]\nlength = 400\nwidth = 50\n"
        'thickness = 22\n[target]\nfundamental = "C4"\nprofile = "marimba-1-4-10"\n'
    )
    path = _write(tmp_path, text)
    result = runner.invoke(app, ["design", str(path), "--out", str(tmp_path / "o")])
    assert result.exit_code == 2
    assert "base =" in result.output and "--beam-only" in result.output


# ---------------------------------------------------------------------------------------------
# All or nothing: the design's files are rendered and staged before any is moved in


@pytest.fixture(scope="module")
def beam_report():
    from tonewright.design import build_problem, design_report
    from tonewright.partfile import load_part

    part_file, base = load_part(EXAMPLES / "workshop-marimba-c4.toml")
    return design_report(build_problem(part_file, base), fidelity="beam")


def _listing(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())}


def test_a_writer_that_fails_leaves_no_folder_and_no_temporary_files(
    beam_report, tmp_path, monkeypatch
):
    import tonewright.design_files as files

    def broken(report):
        raise RuntimeError("figure back-end failed")

    monkeypatch.setattr(
        files, "WRITERS", (files.part_toml, files.result_json, broken, files.spectrum_files)
    )
    out = tmp_path / "new"
    with pytest.raises(RuntimeError, match="back-end"):
        files.write_design(beam_report, out)
    assert not out.exists()
    assert list(tmp_path.iterdir()) == []  # no staging folder left either


def test_a_write_cut_off_midway_leaves_existing_files_as_they_were(
    beam_report, tmp_path, monkeypatch
):
    import tonewright.design_files as files

    out = tmp_path / "out"
    files.write_design(beam_report, out)
    before = _listing(out)
    assert sorted(before) == sorted(files.OUTPUTS)
    calls = []
    real = files.atomic_write_bytes

    def disk_full(path, data, **kwargs):
        calls.append(path)
        if len(calls) == 3:  # two files staged, the third fails
            raise OSError("no space left on device")
        real(path, data, **kwargs)

    monkeypatch.setattr(files, "atomic_write_bytes", disk_full)
    with pytest.raises(OSError, match="no space"):
        files.write_design(beam_report, out, force=True)
    assert len(calls) == 3
    assert _listing(out) == before  # nothing replaced, nothing half-written
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]  # staging removed


def test_existing_files_are_untouched_without_force(beam_report, tmp_path):
    from tonewright.design_files import write_design
    from tonewright.errors import InputError

    out = tmp_path / "out"
    out.mkdir()
    (out / "result.json").write_text("a maker's own notes")
    with pytest.raises(InputError, match="--force"):
        write_design(beam_report, out)
    assert _listing(out) == {"result.json": b"a maker's own notes"}


def test_report_status_and_exit_code_come_from_the_optimizer_table(beam_report):
    from tonewright.optimizer import MET, STATUS_MESSAGES, exit_code

    assert beam_report.status == MET and beam_report.converged
    assert exit_code(beam_report.status) == 0
    assert all(exit_code(s) == 1 for s in STATUS_MESSAGES if s != MET)
    # every miss has its own message in the one table
    assert len(set(STATUS_MESSAGES.values())) == len(STATUS_MESSAGES)


def test_report_crosses_a_process_boundary(beam_report):
    # instrument workers hand reports back to the parent: plain picklable values
    import pickle

    again = pickle.loads(pickle.dumps(beam_report))
    assert again.status == beam_report.status and again.partials == beam_report.partials
    assert again.part == beam_report.part
    from tonewright.design_files import design_files

    assert design_files(again)["part.toml"] == design_files(beam_report)["part.toml"]
