"""Target profiles and the [target] table: library contents, resolution to Hz, every error rule."""

import re
import tomllib

import numpy as np
import pytest
from pydantic import ValidationError
from tonewright.acoustics.pitch import note_to_hz, ratio_to_cents, strike_note_hz
from tonewright.targets import targets_dir

from tonewright.errors import InputError
from tonewright.tuning import (
    TargetProfile,
    TargetSpec,
    list_targets,
    load_target,
    parse_target,
    resolve,
)

REQUIRED = {
    "marimba-1-4-10": (1, 4, 10),
    "marimba-1-4": (1, 4),
    "xylophone-1-3-6": (1, 3, 6),
    "xylophone-1-3": (1, 3),
    "vibraphone-1-4": (1, 4),
    "vibraphone-1-4-10": (1, 4, 10),
    "harmonic-1-2-3-4": (1, 2, 3, 4),
    "fundamental": (1,),
    "chime-strike": (1,),
}


def test_targets_dir_holds_the_library():
    folder = targets_dir()
    assert folder.is_dir()
    assert {p.stem for p in folder.glob("*.toml")} == set(list_targets())
    assert set(REQUIRED) <= set(list_targets())


@pytest.mark.parametrize("name", sorted(REQUIRED))
def test_library_profiles(name):
    profile = load_target(name)
    # Trade targets (common practice, no source; Fletcher & Rossing (1998), The Physics of Musical
    # Instruments, 2nd ed., ch. 19, from memory): marimba
    # 1:4:10, xylophone 1:3(:6), vibraphone 1:4, strings the harmonic series (ideal string).
    assert profile.ratios == REQUIRED[name]
    assert profile.name == name  # the file name and the name inside agree
    assert len(profile.tolerance_cents) == len(profile.ratios)
    assert profile.source and profile.description
    # About 1 cent on the fundamental is what tuners quote (common practice, no source); a
    # chime's strike note is a perceived pitch fitted to three modes, so it gets a few cents.
    assert profile.tolerance_cents[0] <= (1.0 if profile.kind == "partials" else 3.0)
    raw = tomllib.loads((targets_dir() / f"{name}.toml").read_text(encoding="utf-8"))
    assert "source" in raw


def test_marimba_third_partial_is_three_octaves_and_a_just_third():
    # 10 = 2^3 * 5/4: 3600 + 386.31 cents (just major third, standard interval tables).
    ratios = load_target("marimba-1-4-10").ratios
    assert ratio_to_cents(ratios[2]) == pytest.approx(3600 + 386.314, abs=1e-3)
    # Xylophone's 3 is a twelfth: an octave and a just fifth, 1901.955 cents.
    assert ratio_to_cents(load_target("xylophone-1-3").ratios[1]) == pytest.approx(
        1901.955, abs=1e-3
    )


def test_chime_profile_is_a_strike_target():
    profile = load_target("chime-strike")
    assert profile.kind == "strike"
    resolved = resolve(parse_target({"fundamental": "C5", "profile": "chime-strike"}))
    assert resolved.kind == "strike"
    assert [(p.family, p.order) for p in resolved.partials] == [("strike", 1)]
    assert resolved.partials[0].f_hz == pytest.approx(note_to_hz("C5"))
    # The contract: strike_note_hz(bending modes 1..6) must equal that frequency. A uniform
    # tube scaled so that its strike is on C5 meets it exactly (f_n ~ (beta_n L)^2, Thomson).
    beta = np.array([4.73004074, 7.85320462, 10.99560784, 14.13716549, 17.27875966, 20.42035225])
    f = beta**2
    f *= resolved.partials[0].f_hz / strike_note_hz(f)
    assert strike_note_hz(f) == pytest.approx(resolved.partials[0].f_hz, rel=1e-12)


def test_resolve_marimba_f4():
    # F4 = 440 * 2^(-4/12) = 349.2282 Hz (ISO 16 pitch, equal temperament).
    resolved = resolve(parse_target({"fundamental": "F4", "profile": "marimba-1-4-10"}))
    np.testing.assert_allclose(resolved.f_hz, 349.2282 * np.array([1, 4, 10]), rtol=2e-7)
    assert [(p.family, p.order) for p in resolved.partials] == [
        ("bending", 1),
        ("bending", 2),
        ("bending", 3),
    ]
    np.testing.assert_array_equal(resolved.tolerance_cents, [1.0, 3.0, 5.0])
    np.testing.assert_array_equal(resolved.weights, [1.0, 1.0, 1.0])
    assert resolved.name == "marimba-1-4-10" and resolved.kind == "partials"


def test_ratios_cents_and_notes_agree():
    # 4 = 2400 cents; 10 = 3986.3137 cents (1200 log2 10).
    by_ratio = resolve(parse_target({"fundamental": "F3", "ratios": [1, 4, 10]}))
    by_cents = resolve(parse_target({"fundamental": "F3", "cents": [0, 2400, 3986.3137]}))
    np.testing.assert_allclose(by_cents.f_hz, by_ratio.f_hz, rtol=1e-7)  # 4 decimals of cents
    # Notes F3, F5, A6: the third partial is an equal-tempered major third, 2^(40/12) = 10.079.
    by_notes = resolve(parse_target({"notes": ["F3", "F5", "A6"]}))
    assert by_notes.partials[2].ratio == pytest.approx(2 ** (40 / 12), rel=1e-12)
    assert by_notes.f_hz[2] == pytest.approx(1760.0, rel=1e-12)  # A6 = 4 * 440
    # Default tolerances: 1 cent fundamental, 3 cents overtones (common practice, no source).
    np.testing.assert_array_equal(by_notes.tolerance_cents, [1.0, 3.0, 3.0])
    same = parse_target({"notes": ["F3", "F5"], "fundamental": "F3"})
    assert resolve(same).fundamental_hz == pytest.approx(note_to_hz("F3"))


def test_fundamental_in_hz_and_pitch_standard():
    assert resolve(parse_target({"fundamental": 261.0, "ratios": [1]})).fundamental_hz == 261.0
    assert resolve(parse_target({"fundamental": "261 Hz", "ratios": [1]})).fundamental_hz == 261
    high = resolve(parse_target({"fundamental": "C5", "a4_hz": 442, "profile": "marimba-1-4"}))
    low = resolve(parse_target({"fundamental": "C5", "profile": "marimba-1-4"}))
    np.testing.assert_allclose(high.f_hz / low.f_hz, 442 / 440, rtol=1e-12)


def test_tolerance_and_weights_overrides():
    scalar = resolve(
        parse_target({"fundamental": "C5", "profile": "xylophone-1-3-6", "tolerance_cents": 2})
    )
    np.testing.assert_array_equal(scalar.tolerance_cents, [2.0, 2.0, 2.0])
    listed = parse_target(
        {
            "fundamental": "C5",
            "profile": "xylophone-1-3-6",
            "tolerance_cents": [1, 2, 4],
            "weights": [3, 1, 0],
        }
    )
    resolved = resolve(listed)
    np.testing.assert_array_equal(resolved.tolerance_cents, [1.0, 2.0, 4.0])
    np.testing.assert_array_equal(resolved.weights, [3.0, 1.0, 0.0])


def test_families_and_orders():
    # A torsion mode between bending partials 1 and 2 (about 1.85 f1 on marimba bars, trade):
    # orders count within each family, and increase is required only within a family.
    spec = parse_target(
        {"fundamental": "A3", "ratios": [1, 1.85, 4], "families": ["bending", "torsion", "bending"]}
    )
    resolved = resolve(spec)
    assert [(p.family, p.order) for p in resolved.partials] == [
        ("bending", 1),
        ("torsion", 1),
        ("bending", 2),
    ]
    assert [p.order for p in resolved.of_family("bending")] == [1, 2]


def test_stretch_above_reference_only():
    # Project rule: s cents per octave above `stretch_from` (default C6).
    c7 = resolve(
        parse_target({"fundamental": "C7", "ratios": [1, 4], "stretch_cents_per_octave": 3})
    )
    assert c7.stretch_cents == pytest.approx(3.0, abs=1e-12)
    assert c7.fundamental_hz == pytest.approx(note_to_hz("C7") * 2 ** (3 / 1200), rel=1e-12)
    np.testing.assert_allclose(c7.f_hz / c7.fundamental_hz, [1, 4], rtol=1e-12)  # ratios kept
    low = resolve(parse_target({"fundamental": "C4", "ratios": [1], "stretch_cents_per_octave": 3}))
    assert low.stretch_cents == 0.0
    moved = parse_target(
        {"fundamental": "C5", "ratios": [1], "stretch_cents_per_octave": 3, "stretch_from": "C4"}
    )
    assert resolve(moved).stretch_cents == pytest.approx(3.0, abs=1e-12)


def test_temperature_convention():
    # A wooden bar goes about 1 cent flat per degree C warmer (common practice, no source).
    # Meant to sound at 25 C, tuned with 20 C data: aim 5 cents sharp.
    spec = parse_target({"fundamental": "A4", "ratios": [1, 4], "temperature_c": 25})
    warm = resolve(spec, material_temp_coeff=-1.0, reference_temperature_c=20.0)
    assert warm.temperature_cents == pytest.approx(5.0, abs=1e-12)
    assert warm.fundamental_hz == pytest.approx(440 * 2 ** (5 / 1200), rel=1e-12)
    cold = parse_target({"fundamental": "A4", "ratios": [1], "temperature_c": 15})
    assert resolve(cold, material_temp_coeff=-1.0).temperature_cents == pytest.approx(-5.0)
    with pytest.raises(InputError, match=r"temperature_c = 25\.0 needs the material"):
        resolve(spec)


def test_load_target_from_path(tmp_path):
    path = tmp_path / "my-bars.toml"
    path.write_text(
        'name = "my-bars"\ndescription = "d"\ncents = [0, 2400]\n'
        'tolerance_cents = [1, 2]\nsource = "common practice, no source"\n',
        encoding="utf-8",
    )
    assert load_target(path).ratios == pytest.approx((1.0, 4.0), rel=1e-12)
    resolved = resolve(parse_target({"fundamental": "G4", "profile": str(path)}))
    assert resolved.f_hz[1] == pytest.approx(4 * note_to_hz("G4"), rel=1e-12)


@pytest.mark.parametrize(
    ("table", "fragment"),
    [
        ({"fundamental": "F4", "profile": "nope"}, "'nope' is not in the library; available: "),
        ({"fundamental": "F4", "ratios": [1, 4], "cents": [0, 2400]}, "exactly one of"),
        ({"fundamental": "F4"}, "exactly one of"),
        ({"fundamental": "F4", "ratios": [1, 4, 3]}, "must increase strictly"),
        ({"fundamental": "F4", "cents": [0, 2400, 2400]}, "must increase strictly"),
        ({"fundamental": "F4", "notes": ["F4", "E4"]}, "must increase strictly"),
        ({"fundamental": "F4", "ratios": [1, -4]}, "must be positive"),
        ({"fundamental": "F4", "ratios": [2, 8]}, "must start with the bending fundamental"),
        ({"fundamental": "F4", "ratios": []}, "is empty"),
        ({"fundamental": "H4", "ratios": [1]}, "not a note name"),
        ({"notes": ["F3", "X5"]}, "not a note name"),
        ({"fundamental": 0, "ratios": [1]}, "positive frequency"),
        ({"fundamental": True, "ratios": [1]}, "got True"),
        ({"ratios": [1, 4]}, "fundamental is required"),
        ({"notes": ["F3", "F5"], "fundamental": "F4"}, "differs from the first note"),
        ({"fundamental": "F4", "ratios": [1, 4], "weights": [1]}, "weights has 1 entries"),
        ({"fundamental": "F4", "ratios": [1, 4], "weights": [0, 0]}, "at least one > 0"),
        ({"fundamental": "F4", "ratios": [1, 4], "tolerance_cents": [1]}, "tolerance_cents has"),
        ({"fundamental": "F4", "ratios": [1, 4], "tolerance_cents": 0}, "must be positive"),
        ({"fundamental": "F4", "profile": "marimba-1-4", "families": ["bending"]}, "families come"),
        ({"fundamental": "F4", "ratios": [1, 4], "families": ["bending", "lateral"]}, "torsion"),
        ({"fundamental": "F4", "ratios": [1], "a4_hz": 4400}, "a4_hz"),
        ({"fundamental": "F4", "ratios": [1], "stretch_from": "Q6"}, "not a note name"),
        ({"fundamental": "F4", "ratios": [1], "colour": "red"}, "target.colour: Extra inputs"),
    ],
)
def test_every_rule_has_an_error(table, fragment):
    with pytest.raises(InputError, match=re.escape(fragment)) as info:
        parse_target(table)
    assert str(info.value).startswith("target")
    assert "\n" not in str(info.value)  # one line for the command line
    with pytest.raises(ValidationError):
        TargetSpec.model_validate(table)


def test_bad_profile_files(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text('name = "bad"\ndescription = "d"\npartials = [1, 4]\n', encoding="utf-8")
    with pytest.raises(InputError, match="tolerance_cents: Field required"):
        load_target(path)
    path2 = tmp_path / "bad2.toml"
    path2.write_text("name = [\n", encoding="utf-8")
    with pytest.raises(InputError, match="not valid TOML"):
        load_target(path2)
    with pytest.raises(ValidationError, match="exactly one partial"):
        TargetProfile(
            name="x",
            description="d",
            partials=[1, 2],
            tolerance_cents=[1, 1],
            source="common practice, no source",
            kind="strike",
        )
    with pytest.raises(InputError, match="expected a table"):
        parse_target("marimba")


def test_profile_file_not_utf8_is_one_line(tmp_path):
    path = tmp_path / "bells.toml"
    path.write_bytes("name = 'cloches'\ndescription = 'été'\n".encode("latin-1"))
    with pytest.raises(InputError, match=r"bells\.toml: not UTF-8 text"):
        load_target(path)
