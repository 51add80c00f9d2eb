"""Material library and material tables, checked against handbook values and elasticity rules."""

import math
import re
from pathlib import Path

import numpy as np
import pytest
from pydantic import BaseModel, ConfigDict, ValidationError
from tonewright.forward.geometry import Material
from tonewright.forward.orthotropic import compliance_matrix, stiffness_matrix

from tonewright.errors import InputError, from_validation_error
from tonewright.materials import (
    MaterialEntry,
    MaterialTable,
    isotropic_shear_modulus,
    list_materials,
    load_material,
    load_material_file,
    material_value,
    resolve_material,
)

GPA = 1e9
WOODS = ["sugar-maple", "honduras-rosewood", "african-padauk"]
METALS = ["aluminium-6061-t6", "aluminium-6063-t5", "brass-c26000", "structural-steel"]

# Forest Products Laboratory (2010), Wood Handbook, FPL-GTR-190, ch. 5, Table 5-1 (elastic
# ratios) and Table 5-2 (Poisson ratios), sugar maple (table numbers, E_T/E_L, E_R/E_L and nu_RT
# from memory); G_RT/E_L of yellow birch (none given for sugar maple; from memory).
MAPLE_RATIOS = {"E_T": 0.065, "E_R": 0.132, "G_LR": 0.111, "G_LT": 0.063, "G_RT": 0.017}
MAPLE_POISSON = {"nu_LR": 0.424, "nu_LT": 0.476, "nu_RT": 0.774}


def test_library_has_the_required_materials():
    assert set(WOODS + METALS + ["glass-fibre-composite"]) <= set(list_materials())
    assert list_materials() == sorted(list_materials())


def test_sugar_maple_matches_wood_handbook():
    maple = load_material("sugar-maple")
    # Forest Products Laboratory (2010), Wood Handbook, FPL-GTR-190, ch. 5, Table 5-3a (table
    # number from memory): E_L 12.6 GPa at 12 % moisture; values are stored in SI, so only float
    # rounding may differ.
    assert maple.E == pytest.approx(12.6 * GPA, rel=1e-12)
    # Specific gravity 0.63 (oven-dry weight, volume at 12 % MC) -> density at 12 % MC by
    # rho = G_m * 1000 * (1 + 0.12) (Wood Handbook ch. 4, from memory).
    assert maple.rho == pytest.approx(0.63 * 1000 * 1.12, rel=1e-9)
    ortho = maple.orthotropic
    for key, ratio in MAPLE_RATIOS.items():
        # Stored to 4-5 significant digits: 1e-3 relative covers the rounding.
        assert getattr(ortho, key) / ortho.E_L == pytest.approx(ratio, rel=1e-3), key
    for key, nu in MAPLE_POISSON.items():
        assert getattr(ortho, key) == nu


@pytest.mark.parametrize("name", WOODS)
def test_woods_use_handbook_ratios_and_beam_takes_L_and_LT(name):
    spec = load_material(name)
    ortho = spec.orthotropic
    assert spec.kind == "wood"
    for key, ratio in MAPLE_RATIOS.items():
        # Rosewood and padauk have no Table 5-1 row: sugar maple's ratios are the stand-in.
        assert getattr(ortho, key) / ortho.E_L == pytest.approx(ratio, rel=1e-3), key
    assert (spec.E, spec.G, spec.nu) == (ortho.E_L, ortho.G_LT, ortho.nu_LT)
    # Woods have E_L/G_LT of 10 to 16 (derived from the Wood Handbook, FPL-GTR-190, Table 5-1
    # ratios G_LT/E_L; shear matters for the third partial).
    assert 10.0 <= spec.E / spec.G <= 16.0
    # Wood's pitch falls about 1 cent per degree C when warmed (common practice, no source).
    assert spec.temp_coeff_cents_per_K == pytest.approx(-1.0)


@pytest.mark.parametrize("name", WOODS)
def test_wood_compliance_is_symmetric_positive_definite(name):
    # Strain energy must be positive: the orthotropic compliance is symmetric positive definite
    # (Lekhnitskii, Theory of Elasticity of an Anisotropic Body, 1963; Bodig & Jayne, Mechanics
    # of Wood and Wood Composites, 1982 - from memory).
    solid = load_material(name).to_solid()
    S = compliance_matrix(solid)
    np.testing.assert_array_equal(S, S.T)
    assert np.linalg.eigvalsh(S).min() > 0
    C = stiffness_matrix(solid)
    np.testing.assert_allclose(C @ S, np.eye(6), atol=1e-9)


def test_tropical_woods_within_usda_ranges():
    # USDA Forest Products Laboratory, Wood Technical Fact Sheets for Pterocarpus soyauxii and
    # Dalbergia stevensonii, compiled from Chudnoff, M. (1984), Tropical Timbers of the World,
    # USDA Agriculture Handbook 607: air-dry 42-51 and 58-68 pcf, padauk MOE 1560-1750 kpsi.
    padauk = load_material("african-padauk")
    assert 673 <= padauk.rho <= 817
    assert 10.8 * GPA <= padauk.E <= 12.1 * GPA
    rosewood = load_material("honduras-rosewood")
    assert 930 <= rosewood.rho <= 1090
    # No published stiffness; makers report tap-calibrated values around 24 GPa (trade).
    assert 20 * GPA <= rosewood.E <= 28 * GPA


@pytest.mark.parametrize("name", ["aluminium-6061-t6", "aluminium-6063-t5"])
def test_aluminium_typical_values(name):
    # Aluminum Association, Aluminum Standards and Data, typical properties (from memory).
    al = load_material(name)
    assert (al.rho, al.E, al.G, al.nu) == (2700.0, 68.9 * GPA, 26.0 * GPA, 0.33)
    # Handbook G agrees with isotropic elasticity, E / (2 (1 + nu)) = 25.9 GPa, to within 1 %.
    assert al.G == pytest.approx(isotropic_shear_modulus(al.E, al.nu), rel=0.01)


def test_brass_steel_composite_values():
    # Copper Development Association, C26000 data sheet: 110 GPa (from memory); reported
    # 110-117 GPa and nu 0.31-0.34 for alpha brass (from memory).
    brass = load_material("brass-c26000")
    assert brass.rho == 8530.0
    assert 110 * GPA <= brass.E <= 117 * GPA and 0.31 <= brass.nu <= 0.34
    steel = load_material("structural-steel")  # AISC 360-16: E = 29,000 ksi (from memory)
    assert (steel.E, steel.nu, steel.rho) == (200 * GPA, 0.29, 7850.0)
    for metal in (brass, steel):  # no G listed: isotropic rule
        assert metal.G == pytest.approx(isotropic_shear_modulus(metal.E, metal.nu), rel=1e-12)
    # Unidirectional E-glass composites (from memory, low confidence; see materials.toml).
    gfrp = load_material("glass-fibre-composite")
    assert 30 * GPA <= gfrp.E <= 45 * GPA and 1800 <= gfrp.rho <= 2000
    # A unidirectional composite is far from isotropic: its G must not be E / (2 (1 + nu)).
    assert gfrp.E / gfrp.G > 5.0


@pytest.mark.parametrize("name", METALS)
def test_metal_temperature_coefficient_follows_from_modulus_and_expansion(name):
    # Free bar: f ~ h / L^2 sqrt(E / rho) -> dln f/dT = (dlnE/dT + alpha) / 2 (derived).
    # Inputs: ASME B31.1 modulus-temperature table and handbook expansion (see materials.toml).
    raw = load_material(name)
    beta = _raw_value(name, "modulus_temp_coeff_per_K")
    alpha = _raw_value(name, "thermal_expansion_per_K")
    expected = 1200 / math.log(2) * (beta + alpha) / 2
    # The library stores 3 decimals: 0.001 cent/K.
    assert raw.temp_coeff_cents_per_K == pytest.approx(expected, abs=1e-3)
    assert raw.temp_coeff_cents_per_K < 0  # metals go flat when warm


def test_steel_modulus_coefficient_matches_asme_row():
    # ASME B31.1 (1995) carbon steel C <= 0.3 %: 29.5 Msi at 70 F, 28.8 Msi at 200 F.
    beta = (28.8 / 29.5 - 1) / ((200 - 70) / 1.8)
    assert _raw_value("structural-steel", "modulus_temp_coeff_per_K") == pytest.approx(
        beta, rel=2e-3
    )


def _raw_value(name: str, key: str) -> float:
    import tomllib
    from importlib import resources

    text = resources.files("tonewright").joinpath("data", "materials.toml").read_text("utf-8")
    return tomllib.loads(text)[name][key]["value"]


@pytest.mark.parametrize("name", WOODS + METALS + ["glass-fibre-composite"])
def test_every_value_has_a_source(name):
    spec = load_material(name)
    required = {"density", "loss_factor", "temp_coeff_cents_per_K"}
    if spec.kind == "wood":
        required |= {"E_L", *MAPLE_RATIOS, *MAPLE_POISSON}
    else:
        required |= {"E", "nu"}
    assert required <= set(spec.sources)
    assert all(len(text) > 10 for text in spec.sources.values())
    assert 0 < spec.loss_factor < 0.05
    for key, text in spec.sources.items():
        # A source is the publication itself: not a notes file of this project, not a path.
        assert not _cites_notes_or_path(text), (key, text)


# A path such as /home/..., ~/notes or C:\docs, standing alone or after a bracket or quote.
_ABSOLUTE_PATH = re.compile(r"""(?:^|[\s("'])(?:/|~/|[A-Za-z]:[\\/])\w""")


def _cites_notes_or_path(text: str) -> bool:
    """A source that points at a notes file (REFERENCES...) or a path instead of a publication."""
    return "REFERENCES" in text.upper() or _ABSOLUTE_PATH.search(text) is not None


@pytest.mark.parametrize(
    "text",
    [
        "Wood Handbook, via REFERENCES.md",
        "see references.md",
        "E_L 12.6 GPa (via /work/notes/values.md)",
        "from ~/notes/wood.txt",
        "C:\\data\\wood.xlsx",
    ],
)
def test_source_rule_refuses_notes_files_and_paths(text):
    assert _cites_notes_or_path(text)


def test_source_rule_accepts_ratios_and_units():
    for text in ("E_L * 0.111, G_LR/E_L", "(1200/ln 2) * (dlnE/dT + alpha) / 2", "kg/m^3"):
        assert not _cites_notes_or_path(text)


def test_library_file_names_no_notes_file():
    from importlib import resources

    text = resources.files("tonewright").joinpath("data", "materials.toml").read_text("utf-8")
    assert not _cites_notes_or_path(text)


def test_to_beam_gives_forward_material_in_si():
    beam = load_material("sugar-maple").to_beam()
    assert isinstance(beam, Material)
    assert beam.E == pytest.approx(12.6e9) and beam.G == pytest.approx(0.7938e9)
    assert beam.rho == pytest.approx(705.6) and beam.nu == 0.476


def test_unknown_material_lists_names():
    with pytest.raises(InputError, match=r"'oak' is not in the library; available: .*sugar-maple"):
        load_material("oak")


# --- inline tables ------------------------------------------------------------------------------


def test_table_without_base_uses_isotropic_shear():
    spec = MaterialTable(E=70.0, density=2700.0).to_spec()
    assert spec.E == 70e9 and spec.rho == 2700.0 and spec.nu == 0.3
    # Isotropic assumption documented in the module: G = E / (2 (1 + nu)).
    assert spec.G == pytest.approx(70e9 / 2.6, rel=1e-12)
    assert "isotropic" in spec.sources["G"]
    spec = MaterialTable(E=12.0, G=0.8, density=700, poisson=0.4, loss_factor=0.01).to_spec()
    assert (spec.G, spec.nu, spec.loss_factor) == (0.8e9, 0.4, 0.01)


def test_table_with_base_fills_and_keeps_ratios():
    maple = load_material("sugar-maple")
    same = MaterialTable(base="sugar-maple").to_spec()
    assert (same.E, same.G, same.rho, same.nu) == (maple.E, maple.G, maple.rho, maple.nu)
    tapped = MaterialTable(base="sugar-maple", E=14.0, density=720).to_spec()
    assert tapped.E == 14e9 and tapped.rho == 720.0
    # G not given: the base's E/G (Wood Handbook ratio) is kept.
    assert tapped.E / tapped.G == pytest.approx(maple.E / maple.G, rel=1e-12)
    assert tapped.orthotropic.E_R / tapped.orthotropic.E_L == pytest.approx(0.132, rel=1e-3)
    assert tapped.temp_coeff_cents_per_K == maple.temp_coeff_cents_per_K
    assert tapped.sources["E"] != maple.sources["E_L"]
    both = MaterialTable(base="sugar-maple", E=14.0, G=1.0).to_spec()
    assert both.G == 1e9 and both.orthotropic.G_LT == pytest.approx(1e9)


@pytest.mark.parametrize(
    ("table", "fragment"),
    [
        ({"density": 700}, "give E"),
        ({"E": 12}, "give density"),
        ({"E": 12.6e9, "density": 700}, "E is in GPa"),
        ({"E": 12.6, "density": 0.7}, "density is in kg/m^3"),
        ({"E": -1, "density": 700}, "greater than 0"),
        ({"E": 12, "density": 700, "poisson": 0.6}, "less than 0.5"),
        ({"base": "oak"}, "available: "),
        ({"E": 12, "density": 700, "colour": "red"}, "Extra inputs"),
    ],
)
def test_bad_tables(table, fragment):
    with pytest.raises(ValidationError, match=re.escape(fragment)):
        MaterialTable(**table)
    with pytest.raises(InputError, match=re.escape(fragment)):
        resolve_material(table, where="material")


def test_resolve_material_forms(tmp_path):
    assert resolve_material("brass-c26000").key == "brass-c26000"
    assert resolve_material({"E": 200, "density": 7850}).kind == "custom"
    with pytest.raises(InputError, match=r"material\.E: .*got 'x'"):
        resolve_material({"E": "x", "density": 7850})
    with pytest.raises(InputError, match="expected a library name or a table"):
        resolve_material(42)


def test_material_file_round_trip(tmp_path):
    path = tmp_path / "maple-board-7.toml"
    path.write_text(
        'name = "Maple board 7"\nnote = "tapped 2024-03-02"\nbase = "sugar-maple"\n'
        "E = 13.1\ndensity = 712.0\n",
        encoding="utf-8",
    )
    spec = load_material_file(path)
    assert spec.key == "maple-board-7" and spec.name == "Maple board 7"
    assert spec.note == "tapped 2024-03-02" and spec.E == 13.1e9 and spec.rho == 712.0
    assert resolve_material(str(path)).E == spec.E
    nested = tmp_path / "nested.toml"
    nested.write_text('[material]\nname = "x"\nE = 70\ndensity = 2700\n', encoding="utf-8")
    assert load_material_file(nested).E == 70e9


def test_material_file_errors(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text("E = = 3\n", encoding="utf-8")
    with pytest.raises(InputError, match="not valid TOML"):
        load_material_file(bad)
    bad.write_text('name = "x"\nE = 70\ndensity = 2700\nmodulus = 3\n', encoding="utf-8")
    with pytest.raises(InputError, match=r"bad.toml: modulus: Extra inputs"):
        load_material_file(bad)
    bad.write_text("E = 70\ndensity = 2700\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"bad.toml: name: Field required"):
        load_material_file(bad)
    with pytest.raises(FileNotFoundError):
        load_material_file(tmp_path / "missing.toml")


class _Part(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)
    material: MaterialEntry


def test_material_entry_kinds_and_their_written_form():
    assert _Part(material="brass-c26000").material == "brass-c26000"
    assert _Part(material="boards/maple.toml").material == Path("boards/maple.toml")
    table = _Part(material={"base": "sugar-maple", "E": 11}).material
    assert isinstance(table, MaterialTable)
    assert material_value(table) == {"base": "sugar-maple", "E": 11.0}
    assert material_value(Path("boards/maple.toml")) == "boards/maple.toml"
    assert resolve_material(table).E == 11e9


@pytest.mark.parametrize(
    ("value", "line"),
    [
        # the union's member tags stay out of the message: the user wrote material.E
        ({"E": "x", "density": 7850}, "part.toml: material.E: Input should be a valid number"),
        ("unobtainium", "part.toml: material: material 'unobtainium' is not in the library"),
        (42, "part.toml: material: expected a library name, a material file (.toml) or a table"),
    ],
)
def test_material_entry_errors_name_the_field(value, line):
    with pytest.raises(ValidationError) as exc:
        _Part(material=value)
    assert str(from_validation_error(exc.value, "part.toml")).startswith(line)


def test_material_file_not_utf8(tmp_path):
    path = tmp_path / "board.toml"
    path.write_bytes('name = "Érable"\nE = 12\ndensity = 700\n'.encode("latin-1"))
    with pytest.raises(InputError, match=r"board\.toml: not UTF-8 text \(byte 0xc9 on line 1\)"):
        load_material_file(path)


# ---------------------------------------------------------------------------------------------
# The full orthotropic set in a [material] table
def _nine(spec) -> dict[str, float]:
    o = spec.orthotropic
    moduli = {k: getattr(o, k) / GPA for k in ("E_L", "E_R", "E_T", "G_LR", "G_LT", "G_RT")}
    return {**moduli, **{k: getattr(o, k) for k in ("nu_LR", "nu_LT", "nu_RT")}}


def test_full_orthotropic_table_gives_the_same_solid_as_the_library_wood():
    maple = load_material("sugar-maple")
    table = MaterialTable(**_nine(maple), density=maple.rho).to_spec()
    for axis in ("T", "R"):
        np.testing.assert_allclose(
            stiffness_matrix(table.to_solid(axis)),
            stiffness_matrix(maple.to_solid(axis)),
            rtol=1e-12,
        )
    # the beam takes E_L and G_LT, and the width-plane shear ratio G_LR / G_LT
    beam = table.to_beam()
    assert beam.E == pytest.approx(maple.orthotropic.E_L)
    assert beam.G == pytest.approx(maple.orthotropic.G_LT)
    assert beam.shear_ratio == pytest.approx(maple.orthotropic.G_LR / maple.orthotropic.G_LT)
    assert table.kind == "wood"


@pytest.mark.parametrize(
    ("change", "fragment"),
    [
        ({"E_R": None}, "missing E_R"),
        ({"E": 12.0}, "not both"),
        ({"base": "sugar-maple"}, "not both"),
        ({"density": None}, "give density"),
        ({"G_LT": 950.0}, "G_LT = 950.0 is outside"),
        ({"nu_LR": 1.4, "nu_LT": 1.4, "nu_RT": 1.4}, "indefinite"),
    ],
)
def test_bad_orthotropic_tables(change, fragment):
    maple = load_material("sugar-maple")
    table = {**_nine(maple), "density": maple.rho, **change}
    table = {k: v for k, v in table.items() if v is not None}
    with pytest.raises(InputError, match=re.escape(fragment)):
        resolve_material(table, where="material")
