"""Emissivity tables: the shipped CSVs, the lookup they build, and every error text."""

from __future__ import annotations

from pathlib import Path

import dask.array as da
import numpy as np
import pytest

from radledger import physics as p
from radledger.errors import InputError, RadledgerError
from radledger.io.tables import EmissivityTable, read_emissivity_table

CONFIGS = Path(__file__).resolve().parents[1] / "configs" / "emissivity"


def write(tmp_path, text, name="table.csv"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_worldcover_table_lists_every_class():
    table = read_emissivity_table(CONFIGS / "worldcover.csv")
    # ESA WorldCover 2020/2021 class codes (product user manual).
    assert sorted(table) == [10, 20, 30, 40, 50, 60, 70, 80, 90, 95, 100]
    assert table.labels[80] == "Permanent water bodies"
    assert isinstance(table, dict) and isinstance(table, EmissivityTable)
    assert table.source.endswith("worldcover.csv")


def test_shipped_tables_are_plausible():
    # Common practice: water 0.96-0.99, crops and green leaves
    # 0.94-0.99, soils about 0.90-0.97, metals far lower.
    worldcover = read_emissivity_table(CONFIGS / "worldcover.csv")
    assert 0.96 <= worldcover[80] <= 0.99  # water
    assert 0.94 <= worldcover[40] <= 0.99  # cropland
    assert 0.90 <= worldcover[60] <= 0.97  # bare / sparse
    generic = read_emissivity_table(CONFIGS / "generic.csv")
    assert sorted(generic) == list(range(1, 12))
    assert 0.96 <= generic[1] <= 0.99  # water
    assert generic[11] < 0.5  # metal roof
    igbp = read_emissivity_table(CONFIGS / "igbp.csv")
    assert sorted(igbp) == list(range(1, 18))


def test_good_table_with_comments_blank_lines_and_optional_labels(tmp_path):
    path = write(
        tmp_path,
        "# source: test\n\nclass, emissivity ,label\n# a comment between rows\n"
        '10,0.95,Tree cover\n80,0.98\n 40 , 0.985 ,"Crops, irrigated"\n',
    )
    table = read_emissivity_table(path)
    assert table == {10: 0.95, 80: 0.98, 40: 0.985}
    assert table.labels == {10: "Tree cover", 80: "", 40: "Crops, irrigated"}


def test_two_column_table(tmp_path):
    table = read_emissivity_table(write(tmp_path, "class,emissivity\n1,0.97\n"))
    assert table == {1: 0.97} and table.labels == {1: ""}


def test_table_feeds_lookup_and_lazy_classes(no_compute):
    table = read_emissivity_table(CONFIGS / "worldcover.csv")
    lookup = p.build_lookup(table)
    classes = da.from_array(np.array([[10, 80], [255, 100]], dtype=np.uint8), chunks=1)
    eps = p.emissivity_from_classes(classes, lookup)
    assert isinstance(eps, da.Array)
    import dask

    with dask.config.set(scheduler="sync"):
        values = eps.compute()
    np.testing.assert_allclose(values[0], [table[10], table[80]], rtol=1e-6)
    assert np.isnan(values[1, 0]) and values[1, 1] == np.float32(table[100])
    assert p.missing_classes([10, 255, 80], table) == [255]


@pytest.mark.parametrize(
    "text, fragments",
    [
        ("# only comments\n\n", ["no header found", "class,emissivity"]),
        ("code,value\n10,0.9\n", ["line 1", "header must be", "'code,value'"]),
        ("class,emissivity\n", ["lists no classes"]),
        ("class,emissivity\n10,0.9\nforest,0.95\n", ["line 3", "class 'forest'", "whole number"]),
        ("class,emissivity\n10.5,0.9\n", ["line 2", "class '10.5'", "whole number"]),
        ("class,emissivity\n-3,0.9\n", ["line 2", "class -3", "outside 0..65535"]),
        ("class,emissivity\n10,high\n", ["line 2", "emissivity 'high'", "not a number"]),
        ("class,emissivity\n10,97\n", ["line 2", "emissivity 97", "(0, 1]", "not a percentage"]),
        ("class,emissivity\n10,0\n", ["line 2", "emissivity 0", "(0, 1]"]),
        ("class,emissivity\n10,nan\n", ["line 2", "emissivity nan", "(0, 1]"]),
        ("# c\nclass,emissivity\n10,0.9\n20,0.9\n10,0.95\n",
         ["line 5", "class 10 is listed twice", "first on line 3", "keep one row"]),
        ("class,emissivity\n10,0.9,Forest\n", ["line 2", "expected 2", "found 3"]),
        ("class,emissivity,label\n10,0.9,a,b\n", ["line 2", "expected 2 or 3", "found 4",
                                                  "quote a label"]),
        ("class,emissivity\n10\n", ["line 2", "found 1"]),
    ],
)
def test_bad_tables_name_file_line_and_fix(tmp_path, text, fragments):
    path = write(tmp_path, text, name="bad_table.csv")
    with pytest.raises(InputError) as err:
        read_emissivity_table(path)
    message = str(err.value)
    assert "\n" not in message  # one line
    assert "bad_table.csv" in message
    for fragment in fragments:
        assert fragment in message, message
    assert isinstance(err.value, RadledgerError)


def test_missing_file_says_what_to_check(tmp_path):
    with pytest.raises(InputError, match="file not found; check emissivity.table"):
        read_emissivity_table(tmp_path / "nope.csv")


def test_unreadable_file_is_an_input_error(tmp_path):
    path = tmp_path / "latin1.csv"
    path.write_bytes("class,emissivity,label\n10,0.9,For\xeat\n".encode("latin-1"))
    with pytest.raises(InputError, match="cannot be read"):
        read_emissivity_table(path)
