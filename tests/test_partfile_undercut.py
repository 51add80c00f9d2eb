"""[bar.undercut]: a designed cut written in the design's own terms is read back exactly, its
reading stations are checked against it, and it is refused where it cannot apply."""

from __future__ import annotations

import numpy as np
import pytest
from tonewright.forward import Bar, Material
from tonewright.forward.geometry import constant
from tonewright.optimizer import BarUndercut
from tonewright.optimizer.spaces import undercut_terms, undercut_thickness

from tonewright.errors import InputError
from tonewright.partfile import parse_part

BASE = {"title": "t", "material": "honduras-rosewood"}


def _space(shape: str, symmetric: bool = True, n: int = 5) -> BarUndercut:
    blank = Bar(0.4, constant(0.06), constant(0.022), Material(20e9, 1.5e9, 1000.0, 0.3))
    return BarUndercut(
        blank,
        0.022,
        shape,
        control_points=n,
        steps=3,
        symmetric=symmetric,
        min_thickness=0.004,
        end_keep=0.02,
    )


@pytest.mark.parametrize(
    ("shape", "symmetric"), [("spline", True), ("spline", False), ("steps", True), ("arch", True)]
)
def test_terms_give_back_the_designed_thickness(shape, symmetric):
    space = _space(shape, symmetric)
    rng = np.random.default_rng(3)
    u = rng.uniform(0.05, 0.95, space.n)
    terms = undercut_terms(space, u)
    field = undercut_thickness(
        0.4, 0.022, shape, symmetric, terms["cut_edge"], terms["depths"], terms.get("flat")
    )
    x = np.linspace(0.0, 0.4, 3001)
    designed = space.part(u).thickness(x)
    # the same shape functions: equal to rounding (1e-12 m)
    assert np.max(np.abs(field(x) - designed)) < 1e-12
    assert np.allclose(np.sort(field.breakpoints), np.sort(space.kinks(u)))


def _bar(undercut: dict, **extra) -> dict:
    return {
        **BASE,
        "bar": {"length": 400, "width": 60, "thickness": 22, "undercut": undercut, **extra},
    }


CUT = {"shape": "spline", "cut_from": 20, "depths": [12.0, 17.0, 0.9, 0.0, 0.0]}


def test_a_part_file_reads_the_undercut_and_checks_its_stations():
    part = parse_part(_bar(CUT)).to_part()
    field = undercut_thickness(0.4, 0.022, "spline", True, 0.02, (0.012, 0.017, 0.0009, 0, 0))
    x = np.linspace(0, 0.4, 401)
    assert np.allclose(part.thickness(x), field(x), atol=1e-15)
    good = [[round(v * 1e3, 2), round(float(field(np.array([v]))[0]) * 1e3, 2)] for v in x[::20]]
    parse_part(_bar({**CUT, "stations": good}))
    bad = [list(p) for p in good]
    bad[10][1] += 0.05  # a 0.05 mm slip of the pen is caught, not cut
    with pytest.raises(InputError, match=r"undercut\.stations.*disagrees"):
        parse_part(_bar({**CUT, "stations": bad}))


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ({"cut_from": 250}, "under half the length"),
        ({"depths": [22.0, 1.0]}, "leaves under"),
        ({"shape": "arch", "depths": [5.0]}, "arch undercut needs"),
        ({"flat": 0.3}, "flat is for an arch"),
        ({"symmetric": False, "depths": [1, 2, 3, 4, 5]}, "even number"),
    ],
)
def test_bad_undercuts_are_refused_by_name(change, message):
    with pytest.raises(InputError, match=message):
        parse_part(_bar({**CUT, **change}))


def test_profile_and_undercut_together_are_refused():
    with pytest.raises(InputError, match="profile or undercut"):
        parse_part(_bar(CUT, profile=[[0, 22], [400, 22]]))
