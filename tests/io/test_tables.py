"""The one CSV table reader of the edges (stressmap.io.tables): comments, spaces, missing
columns and unreadable files, read with pandas (the independent parser it wraps)."""

from __future__ import annotations

import pytest

from stressmap.errors import InputError
from stressmap.io.tables import read_csv_table


def test_comments_and_spaces_after_commas(tmp_path):
    path = tmp_path / "t.csv"
    path.write_text("# a comment line\ntop_km, density_kg_m3\n0, 2400\n3, 2700  # deeper\n")
    frame = read_csv_table(path, ("top_km", "density_kg_m3"))
    assert frame["top_km"].tolist() == [0, 3]
    assert frame["density_kg_m3"].astype(float).tolist() == [2400.0, 2700.0]


def test_missing_columns_are_each_named(tmp_path):
    path = tmp_path / "t.csv"
    path.write_text("name,dip_deg\nA,60\n")
    with pytest.raises(InputError, match=r"fault table .* lacks column\(s\) strike_deg") as err:
        read_csv_table(path, ("strike_deg", "dip_deg", "lon"), what="fault table")
    assert [p["field"] for p in err.value.problems] == ["strike_deg", "lon"]


@pytest.mark.parametrize("content", [b"", b"\xff\xfe\x00bad\x00"])
def test_unreadable_file_names_the_option(tmp_path, content):
    path = tmp_path / "t.csv"
    path.write_bytes(content)
    with pytest.raises(InputError, match="cannot read density profile") as err:
        read_csv_table(path, ("top_km",), what="density profile", field="--density-profile")
    assert err.value.problems[0]["field"] == "--density-profile"
