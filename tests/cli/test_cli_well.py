"""``stressmap well ...`` from the command line: reports, files, errors."""

import json

import pandas as pd
import pytest

from stressmap.cli import main
from stressmap.constants import CAUTION

SITE = ["--site", "5,50", "--depth-km", "3", "--regime", "strike-slip",
        "--shmax-azimuth-deg", "30"]


def test_stability_report_and_files(tmp_path, capsys):
    out_json, out_csv = tmp_path / "w.json", tmp_path / "w.csv"
    rc = main(["well", "stability", *SITE, "--ucs-mpa", "60", "--azimuth-deg", "120",
               "--inclination-deg", "30", "--units", "oilfield", "-o", str(out_json),
               "-o", str(out_csv)])
    text = capsys.readouterr().out
    assert rc == 0 and text.startswith(f"CAUTION: {CAUTION}") and "ppg" in text
    doc = json.loads(out_json.read_text())
    assert doc["units"] == "oilfield" and "lower_emw_ppg" in doc["window"]
    table = pd.read_csv(out_csv)
    assert len(table) == 1 and table["well_inclination_deg"][0] == 30


def test_window_chart_and_table(tmp_path, capsys):
    png, csv = tmp_path / "w.png", tmp_path / "w.csv"
    assert main(["well", "window", *SITE, "--ucs-mpa", "60", "--step-deg", "15",
                 "-o", str(png), "-o", str(csv)]) == 0
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    table = pd.read_csv(csv)
    assert len(table) == 24 * 7 and set(table["inclination_deg"]) == {0, 15, 30, 45, 60, 75, 90}


def test_profile_with_sampling(tmp_path, capsys):
    csv = tmp_path / "p.csv"
    assert main(["well", "profile", *SITE, "--max-depth-km", "5", "--count", "51",
                 "--friction-range", "0.5,0.8", "--samples", "200", "-o", str(csv)]) == 0
    table = pd.read_csv(csv)
    assert len(table) == 51 and "shmin_p95_mpa" in table.columns
    assert json.loads(csv.with_suffix(".json").read_text())["caution"].startswith(CAUTION)  # sidecar


def test_path_needs_planes_and_names_the_field(capsys):
    assert main(["well", "path", *SITE]) == 2
    assert "planes" in capsys.readouterr().err


@pytest.mark.parametrize("args, text", [
    (["--ucs-mpa", "-5"], "ucs_mpa"), (["--ucs-mpa", "50", "--inclination-deg", "95"],
                                       "inclination_deg")])
def test_bad_values_exit_2_with_the_field(args, text, capsys):
    assert main(["well", "stability", *SITE, *args]) == 2
    assert text in capsys.readouterr().err


def test_wrong_output_suffix(tmp_path, capsys):
    assert main(["well", "stability", *SITE, "--ucs-mpa", "60", "-o",
                 str(tmp_path / "x.png")]) == 2
