"""The shipped emissivity tables: they parse, list exactly their classification's classes, and hold
physically plausible values for each class's cover."""

from __future__ import annotations

from pathlib import Path

import pytest

from radledger.io.tables import read_emissivity_table

CONFIGS = Path(__file__).resolve().parents[1] / "configs" / "emissivity"

# Broadband emissivity ranges by cover (common practice): open water 0.98-0.99; snow and ice 0.98-0.99;
# green vegetation (forest, grass, crops, wetland vegetation) 0.95-0.99; bare soil, sand and rock
# 0.90-0.97; built-up mixes 0.90-0.95; a mosaic of vegetation and open soil lies between its parts,
# 0.90-0.99 (linear mixing of the two, common practice).
BANDS = {
    "water": (0.98, 0.99),
    "snow": (0.98, 0.99),
    "vegetation": (0.95, 0.99),
    "soil": (0.90, 0.97),
    "built": (0.90, 0.95),
    "mixed": (0.90, 0.99),
}

# NLCD class legend (USGS / MRLC, "National Land Cover Database Class Legend and Description");
# the cover of each class follows the legend's description.
NLCD = {
    11: "water",       # Open Water
    12: "snow",        # Perennial Ice/Snow
    21: "vegetation",  # Developed, Open Space: "mostly vegetation in the form of lawn grasses", < 20 % impervious
    22: "built",       # Developed, Low Intensity (20-49 % impervious)
    23: "built",       # Developed, Medium Intensity (50-79 %)
    24: "built",       # Developed, High Intensity (80-100 %)
    31: "soil",        # Barren Land (Rock/Sand/Clay)
    41: "vegetation",  # Deciduous Forest
    42: "vegetation",  # Evergreen Forest
    43: "vegetation",  # Mixed Forest
    51: "vegetation",  # Dwarf Scrub (Alaska)
    52: "mixed",       # Shrub/Scrub
    71: "vegetation",  # Grassland/Herbaceous
    72: "vegetation",  # Sedge/Herbaceous (Alaska)
    73: "vegetation",  # Lichens (Alaska)
    74: "vegetation",  # Moss (Alaska)
    81: "vegetation",  # Pasture/Hay
    82: "vegetation",  # Cultivated Crops
    90: "vegetation",  # Woody Wetlands
    95: "vegetation",  # Emergent Herbaceous Wetlands
}

# CORINE Land Cover nomenclature, level 3 (EEA, CLC illustrated nomenclature guidelines): 44 classes.
CORINE = {
    111: "built", 112: "built", 121: "built", 122: "built", 123: "built", 124: "built",
    131: "soil", 132: "soil", 133: "soil",                     # mine, dump, construction sites
    141: "vegetation", 142: "built",                           # green urban areas; sport and leisure
    211: "vegetation", 212: "vegetation", 213: "vegetation",   # arable land
    221: "mixed", 222: "vegetation", 223: "mixed",             # vineyards, orchards, olive groves
    231: "vegetation",                                         # pastures
    241: "vegetation", 242: "vegetation", 243: "vegetation", 244: "mixed",  # heterogeneous agriculture
    311: "vegetation", 312: "vegetation", 313: "vegetation",   # forests
    321: "vegetation", 322: "vegetation", 323: "mixed", 324: "vegetation",  # shrub and herbaceous
    331: "soil", 332: "soil", 333: "mixed", 334: "soil",       # beaches/sands, rock, sparse, burnt
    335: "snow",                                               # glaciers and perpetual snow
    411: "vegetation", 412: "vegetation",                      # inland marshes, peat bogs
    421: "vegetation", 422: "water", 423: "soil",              # salt marshes, salines, intertidal flats
    511: "water", 512: "water", 521: "water", 522: "water", 523: "water",
}


@pytest.mark.parametrize("path", sorted(CONFIGS.glob("*.csv")), ids=lambda p: p.name)
def test_every_shipped_table_parses_with_labels(path):
    table = read_emissivity_table(path)
    assert table and all(table.labels[code] for code in table)


@pytest.mark.parametrize("name, classes", [("nlcd.csv", NLCD), ("corine.csv", CORINE)])
def test_table_lists_exactly_the_classification_and_plausible_values(name, classes):
    table = read_emissivity_table(CONFIGS / name)
    assert sorted(table) == sorted(classes)
    for code, cover in classes.items():
        low, high = BANDS[cover]
        assert low <= table[code] <= high, f"{name}: class {code} ({table.labels[code]}) = {table[code]}, {cover}"


def test_corine_has_the_44_level3_classes():
    # CLC nomenclature: 44 level-3 classes in 5 level-1 groups (artificial, agricultural, forest and
    # semi-natural, wetlands, water).
    assert len(CORINE) == 44
    assert sorted({code // 100 for code in CORINE}) == [1, 2, 3, 4, 5]


def test_labels_carry_the_legend_names():
    assert read_emissivity_table(CONFIGS / "nlcd.csv").labels[21] == "Developed, Open Space"
    assert read_emissivity_table(CONFIGS / "corine.csv").labels[331] == "Beaches, dunes, sands"
