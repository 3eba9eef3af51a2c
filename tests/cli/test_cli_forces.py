"""``stressmap forces``: the calculator's JSON and table against the force-law checks of issue 2.

Reference magnitudes: Turcotte & Schubert, Geodynamics ("T&S", from memory) for ridge push and
slab buoyancy; common practice for basal drag of about 1e13 N/m.
"""

from __future__ import annotations

import argparse
import json

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap.cli import build_parser, main


def run_json(capsys, *args) -> dict:
    assert main(["forces", *args, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def test_age_100_json_gives_the_issue_magnitudes(capsys):
    out = run_json(capsys, "--age-myr", "100")
    f = out["forces_n_per_m"]
    # T&S (from memory): ridge push about 3.9e12 N/m at 100 Myr ("about 4e12" in issue 2)
    assert_allclose(f["ridge_push"], 3.9e12, rtol=0.1)
    # the pressure-integral route agrees with the closed form within 0.5 % (issue 2)
    assert_allclose(f["ridge_push_numeric"], f["ridge_push"], rtol=0.005)
    # common practice: drag about 1e13 N/m for 1e20 Pa s, 50 mm/yr, 100 km channel, 6000 km plate
    assert abs(np.log10(f["basal_drag"]) - 13.0) < 0.3
    # T&S (from memory): full slab buoyancy a few 1e13 N/m; transmitted pull comparable to ridge push
    assert 1e13 < f["slab_pull_full"] < 1e14
    assert 1e12 < f["slab_pull"] < 1e13
    assert out["inputs"]["age_myr"] == 100.0
    # T&S ch. 4 (from memory): thermal thickness 2.32 sqrt(kappa t) = 130 km at 100 Myr
    assert_allclose(out["derived"]["thermal_thickness_km"], 2.32 * np.sqrt(1e-6 * 100 * 3.15576e13) / 1e3, rtol=3e-3)
    # Parsons & Sclater 1977 (from memory): 2500 + 350 sqrt(100) = 6000 m
    assert_allclose(out["derived"]["seafloor_depth_km"], 6.0, rtol=0.03)


def test_options_reach_the_force_laws(capsys):
    base = run_json(capsys)["forces_n_per_m"]
    changed = run_json(capsys, "--pull-fraction", "0.2", "--length-km", "3000", "--velocity-mm-yr", "100",
                       "--collision-depth-km", "20", "--transform-stress-mpa", "40", "--suction-stress-mpa", "5")
    changed = changed["forces_n_per_m"]
    # linear laws: doubling/halving a linear parameter doubles/halves the force
    assert_allclose(changed["slab_pull"], 2 * base["slab_pull"], rtol=1e-12)
    assert_allclose(changed["basal_drag"], base["basal_drag"], rtol=1e-12)  # half length, double speed
    assert_allclose(changed["collision_resistance"], base["collision_resistance"] / 2, rtol=1e-12)
    assert_allclose(changed["transform_resistance"], 2 * base["transform_resistance"], rtol=1e-12)
    assert_allclose(changed["trench_suction"], base["trench_suction"] / 2, rtol=1e-12)


def test_plate_cooling_model_flattens_the_ridge_push(capsys):
    # Plate model (GDH1): at 200 Myr ridge push is well below half-space cooling's linear growth.
    hs = run_json(capsys, "--age-myr", "200")
    plate = run_json(capsys, "--age-myr", "200", "--cooling-model", "plate")
    assert plate["inputs"]["cooling_model"] == "plate"
    assert plate["forces_n_per_m"]["ridge_push"] < 0.7 * hs["forces_n_per_m"]["ridge_push"]
    assert_allclose(plate["forces_n_per_m"]["ridge_push_numeric"], plate["forces_n_per_m"]["ridge_push"], rtol=0.005)
    # GDH1 (Stein & Stein 1992, from memory): 5651 - 2473 exp(-0.0278 * 200) m
    assert_allclose(plate["derived"]["seafloor_depth_km"], (5651 - 2473 * np.exp(-0.0278 * 200)) / 1e3, rtol=0.005)


def test_table_lists_forces_with_units(capsys):
    assert main(["forces", "--age-myr", "50"]) == 0
    text = capsys.readouterr().out
    for label in ("ridge push", "slab pull", "basal drag", "collision resistance", "transform resistance",
                  "trench suction", "thermal thickness", "seafloor depth"):
        assert label in text
    assert "N/m" in text and " km" in text
    assert "50 Myr" in text


def test_params_file_overrides_defaults_and_options_win(tmp_path, capsys):
    path = tmp_path / "physics.toml"
    path.write_text("[half_space]\nmantle_temperature_c = 1350.0\n[drag]\nlength_km = 3000.0\n")
    base = run_json(capsys)
    out = run_json(capsys, "--params", str(path))
    # ridge push grows with (Tm - T0) (closed form: dT (1 + c dT)); 1350/1300 at least
    assert out["forces_n_per_m"]["ridge_push"] > 1350 / 1300 * base["forces_n_per_m"]["ridge_push"]
    assert out["inputs"]["length_km"] == 3000.0
    out = run_json(capsys, "--params", str(path), "--length-km", "9000")
    assert out["inputs"]["length_km"] == 9000.0
    jpath = tmp_path / "physics.json"
    jpath.write_text(json.dumps({"slab_pull": {"pull_fraction": 0.3}}))
    assert run_json(capsys, "--params", str(jpath))["inputs"]["pull_fraction"] == 0.3


def test_bad_params_file_names_the_key(tmp_path, capsys):
    path = tmp_path / "physics.toml"
    path.write_text("[half_space]\nkappa = 1e-6\n")
    assert main(["forces", "--params", str(path)]) == 2
    err = capsys.readouterr().err
    assert "half_space.kappa" in err
    path.write_text("[half_space\n")
    assert main(["forces", "--params", str(path)]) == 2
    assert "not valid TOML" in capsys.readouterr().err
    assert main(["forces", "--params", str(tmp_path / "missing.toml")]) == 2
    assert "cannot read" in capsys.readouterr().err


@pytest.mark.parametrize(
    ("option", "value", "message"),
    [("--age-myr", "-5", "must be >= 0"), ("--pull-fraction", "1.5", "must be <= 1"),
     ("--channel-km", "0", "must be > 0"), ("--viscosity-pa-s", "abc", "must be a number"),
     ("--length-km", "nan", "must be finite")],
)
def test_bad_option_values_are_rejected_with_the_option_named(capsys, option, value, message):
    with pytest.raises(SystemExit) as exc:
        main(["forces", option, value])
    assert exc.value.code == 2
    err = capsys.readouterr().err
    assert option in err and message in err


def test_every_option_has_help_text(capsys):
    parser = build_parser()
    sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    forces_parser = sub.choices["forces"]
    for action in forces_parser._actions:
        assert action.help, action.option_strings
    with pytest.raises(SystemExit):
        main(["--help"])
    assert "forces" in capsys.readouterr().out
    with pytest.raises(SystemExit):
        main(["forces", "--help"])
    text = capsys.readouterr().out
    for option in ("--age-myr", "--slab-age-myr", "--slab-depth-km", "--pull-fraction", "--viscosity-pa-s",
                   "--channel-km", "--velocity-mm-yr", "--length-km", "--cooling-model", "--json", "--params"):
        assert option in text
