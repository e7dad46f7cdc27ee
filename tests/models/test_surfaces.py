"""Surface UV albedos against published figures, and the vectorised lookup."""

import json

import numpy as np
import pytest

from uvdose.models.surfaces import SURFACE_TYPES, albedo_for, catalogue

EXPECTED = {"fresh_snow", "old_snow", "dry_sand", "wet_sand", "sea_surf_foam", "water",
            "grass", "bare_soil", "asphalt", "concrete", "crop_canopy"}


def test_registry_names_and_physical_range():
    assert set(SURFACE_TYPES) == EXPECTED
    for name, surface in SURFACE_TYPES.items():
        assert surface.name == name
        assert 0.0 < surface.uv_albedo < 1.0
        assert surface.source


@pytest.mark.parametrize("name, low, high", [
    # WHO/WMO Global Solar UV Index guide (2002): fresh snow up to ~80 %, dry beach sand
    # ~15 %, sea foam ~25 %, grass, soil and water under 10 %. Safe Work Australia table:
    # new snow 88 %, old snow 50 %, dry sand 15-18 %, foam 25-30 %, concrete 8.2-12 %,
    # asphalt 4.1-8.9 %, wet sand 7.1 %, lawn 2-5 %, soil 4-6 %, open ocean 8 %.
    ("fresh_snow", 0.75, 0.95),
    ("old_snow", 0.40, 0.60),
    ("dry_sand", 0.15, 0.18),
    ("sea_surf_foam", 0.25, 0.30),
    ("concrete", 0.082, 0.12),
    ("asphalt", 0.041, 0.089),
    ("wet_sand", 0.06, 0.08),
    ("grass", 0.008, 0.05),
    ("bare_soil", 0.04, 0.06),
    ("water", 0.033, 0.10),
])
def test_albedo_within_published_ranges(name, low, high):
    assert low <= SURFACE_TYPES[name].uv_albedo <= high


def test_ordering_of_the_trade_facts():
    # Snow reflects far more UV than sand, sand than natural vegetated ground
    # (WHO 2002 guide).
    a = {name: s.uv_albedo for name, s in SURFACE_TYPES.items()}
    assert a["fresh_snow"] > a["old_snow"] > a["sea_surf_foam"] > a["dry_sand"] > a["wet_sand"]
    assert max(a["grass"], a["bare_soil"], a["water"], a["crop_canopy"]) < 0.10


def test_albedo_for_is_vectorised_and_keeps_shape_and_order():
    types = np.array(["grass", "fresh_snow", "grass", "concrete", "water"], dtype=object)
    np.testing.assert_array_equal(
        albedo_for(types),
        [SURFACE_TYPES[t].uv_albedo for t in types])
    assert albedo_for(np.array([], dtype=object)).shape == (0,)


def test_unknown_surface_types_are_listed_with_their_records():
    with pytest.raises(KeyError) as info:
        albedo_for(["grass", "lava", "grass", "tarmacadam"])
    message = str(info.value)
    assert "lava" in message and "tarmacadam" in message
    assert "[1, 3]" in message


def test_catalogue_is_plain_json():
    entries = catalogue()
    assert {entry["name"] for entry in entries} == EXPECTED
    json.dumps(entries)
