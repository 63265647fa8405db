"""One parser of unit names (trackscan.units), and the measured-unit fix."""

import math

import numpy as np
import pytest

from trackscan.io.manifest import Coordinate
from trackscan.units import (BOHR_IN_ANGSTROM, UNIT_ALIASES, angle_factor, canonical_unit,
                             length_factor, unit_symbol)


@pytest.mark.parametrize("name, alias", [(n, a) for n, aliases in UNIT_ALIASES.items()
                                         for a in aliases])
def test_every_alias_maps_to_its_unit(name, alias):
    assert canonical_unit(alias) == name
    assert canonical_unit(alias.upper()) == name
    assert canonical_unit(f"  {alias} ") == name


def test_other_text_is_not_a_unit():
    assert canonical_unit("fraction") is None
    assert unit_symbol("fraction") == "fraction"
    with pytest.raises(ValueError):
        length_factor("degree")
    with pytest.raises(ValueError):
        angle_factor("bohr")


def test_symbols():
    assert [unit_symbol(u) for u in ("Ångström", "angstroms", "bohr", "deg", "radians")] == \
        ["Å", "Å", "bohr", "°", "rad"]


@pytest.mark.parametrize("unit", ["angstrom", "angstroms", "Ångström", "Å", "ANG"])
def test_measured_distance_follows_the_unit(unit):
    # a coordinate written in angstrom under any spelling is measured in angstrom
    # (it was measured in bohr and labelled Å for 'angstroms' and 'ångström')
    pos = np.array([[0.0, 0.0, 0.0], [2.0, 0.0, 0.0]])
    c = Coordinate(label="d", unit=unit, kind="distance", atoms=(1, 2))
    assert c.measure(pos) == pytest.approx(2.0 * BOHR_IN_ANGSTROM, rel=1e-15)
    assert unit_symbol(unit) == "Å"


def test_measured_angle_in_radians():
    pos = np.array([[1.0, 0.0, 0.0], [0.0, 0.0, 0.0], [0.0, 1.0, 0.0]])
    c = Coordinate(label="a", unit="rad", kind="angle", atoms=(1, 2, 3))
    assert c.measure(pos) == pytest.approx(math.pi / 2)
