"""Scenario file: the demo, the template, and strict checking of keys, types and ranges."""
from __future__ import annotations

import dataclasses
from importlib import resources

import pytest

from optimiser.cli import app
from optimiser.errors import InputError
from optimiser.scenario import FIELDS, Scenario, load_scenario, render_template

SPEC_ATTRIBUTES = [
    "name", "currency", "battery_nominal_V", "battery_charging_V", "battery_resistance_ohm",
    "diode_forward_drop_V", "sailing_rpm", "max_rpm", "bilge_air_C", "max_rotor_diameter_m",
    "max_axial_length_m", "shaft_diameter_m", "hub_clearance_m", "running_clearance_m",
    "coil_hole_clearance_m", "min_coil_leg_m", "coil_fill_factor", "resin_skin_m",
    "resin_conductivity_W_mK", "bearing_drag_Nm", "temperature_margin_K",
    "back_iron_saturation_T", "turns_min", "turns_max", "strands_min", "strands_max",
    "ring_radius_min_m", "ring_radius_max_m", "ring_radius_step_m", "wire_margin",
]


def write(tmp_path, text, name="boat.toml"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def problems_of(path):
    with pytest.raises(InputError) as info:
        load_scenario(path)
    return info.value.problems


def test_scenario_has_the_spec_attributes():
    names = {f.name for f in dataclasses.fields(Scenario)}
    assert set(SPEC_ATTRIBUTES) <= names
    # added beside the original interface by the propeller issue
    assert names - set(SPEC_ATTRIBUTES) == {"source", "fastest_sailing_rpm", "fastest_boat_speed_kn", "objectives", "coil_shapes", "propeller_diameter_m",
                                            "propeller_pitch_m", "propeller_blades",
                                            "propeller_area_ratio", "wake_fraction",
                                            "shaft_line_friction_Nm", "water_density_kg_m3",
                                            "profile_boat_speed_kn", "profile_hours_per_day",
                                            # the shaft-line calibration (issue 14)
                                            "measured_free_wheel_rpm", "measured_free_wheel_boat_speed_kn",
                                            "shaft_line_friction_fitted",
                                            # radiation from the surfaces (issue 13)
                                            "surface_emissivity",
                                            # build tolerances (issue 14)
                                            "spread_remanence_pct", "spread_fill_factor_pct",
                                            "spread_running_clearance_m", "spread_bilge_air_C",
                                            "spread_resin_conductivity_pct", "robust_samples",
                                            "robust_constraints"}


def test_demo_is_kittiwake_in_si():
    s = load_scenario(None)
    assert s.name == "Kittiwake" and s.currency == "EUR"
    assert (s.battery_nominal_V, s.battery_charging_V) == (12.0, 14.0)
    assert s.shaft_diameter_m == pytest.approx(0.025)
    assert (s.sailing_rpm, s.max_rpm, s.bilge_air_C) == (180.0, 1500.0, 35.0)
    assert s.max_rotor_diameter_m == pytest.approx(0.320)
    assert s.max_axial_length_m == pytest.approx(0.110)
    assert s.running_clearance_m == pytest.approx(1.5e-3)
    assert s.coil_hole_clearance_m == pytest.approx(1e-3)
    assert s.min_coil_leg_m == pytest.approx(4e-3)
    assert s.resin_skin_m == pytest.approx(0.8e-3)
    assert (s.coil_fill_factor, s.resin_conductivity_W_mK, s.bearing_drag_Nm) == (0.8, 0.25, 0.25)
    assert (s.temperature_margin_K, s.back_iron_saturation_T) == (20.0, 1.6)
    assert (s.turns_min, s.turns_max, s.strands_min, s.strands_max) == (10, 400, 1, 8)
    assert isinstance(s.turns_max, int)
    assert (s.ring_radius_min_m, s.ring_radius_max_m, s.ring_radius_step_m) == pytest.approx(
        (0.060, 0.150, 0.0025))
    assert (s.wire_margin, s.diode_forward_drop_V, s.battery_resistance_ohm) == (0.10, 0.8, 0.03)


def test_packaged_demo_file_is_the_rendered_template():
    # the reasons live once, in FIELDS; the data file must not drift from them
    packaged = resources.files("optimiser").joinpath("data", "demo_scenario.toml").read_text("utf-8")
    assert packaged == render_template()
    for f in FIELDS:
        assert f"\n{f.key} = " in packaged and f"# {f.reason}\n{f.key} = " in packaged


def test_scenario_new_writes_a_loadable_template(runner, tmp_path):
    path = tmp_path / "my_boat.toml"
    result = runner.invoke(app, ["scenario", "new", str(path)])
    assert result.exit_code == 0, result.output
    loaded = load_scenario(path)
    assert dataclasses.replace(loaded, source="x") == dataclasses.replace(load_scenario(None),
                                                                          source="x")
    assert loaded.source == str(path)


def test_scenario_new_refuses_to_overwrite(runner, tmp_path):
    path = write(tmp_path, "keep me\n")
    result = runner.invoke(app, ["scenario", "new", str(path)])
    assert result.exit_code == 2
    assert f"{path}: already exists" in result.stderr
    assert path.read_text() == "keep me\n"


def test_missing_keys_take_defaults(tmp_path):
    s = load_scenario(write(tmp_path, 'name = "Petrel"\nshaft_diameter_mm = 30\n'))
    assert s.name == "Petrel" and s.shaft_diameter_m == pytest.approx(0.030)
    assert s.sailing_rpm == 180.0 and isinstance(s.shaft_diameter_m, float)


def test_unknown_key_suggests_the_close_name(runner, tmp_path):
    path = write(tmp_path, 'name = "Petrel"\n\nsailing_rmp = 200\n')
    result = runner.invoke(app, ["scenario", "check", str(path)])
    assert result.exit_code == 2
    assert f"{path}: line 3, key sailing_rmp: unknown key; did you mean sailing_rpm?" \
        in result.stderr
    assert "Traceback" not in result.output


@pytest.mark.parametrize("line, message", [
    ('shaft_diameter_mm = "25"', "must be a number (got '25')"),
    ("turns_max = 10.5", "must be a whole number (got 10.5)"),
    ("turns_max = true", "must be a whole number (got True)"),
    ("name = 3", "must be a non-empty text in quotes"),
    ("coil_fill_factor = 0", "must be > 0 and <= 1 (got 0)"),
    ("coil_fill_factor = 1.2", "must be > 0 and <= 1 (got 1.2)"),
    ("shaft_diameter_mm = 2500", "must be >= 5 and <= 200 (got 2500)"),
    ("max_rpm = 100", "must be > sailing_rpm (180) (got 100)"),
    ("battery_charging_V = 11", "must be >= battery_nominal_V (12) (got 11)"),
    ("turns_min = 500", "must be <= turns_max (400) (got 500)"),
    ("sailing_rpm = 2000", "must be < max_rpm (1500) (got 2000)"),
    ("hub_clearance_mm = 150", "shaft radius + hub_clearance_mm (162.5) must be < ring_radius_max_mm (150)"),
    ("ring_radius_max_mm = 170", "must be < max_rotor_diameter_mm / 2 (160)"),
    ("ring_radius_step_mm = 0", "must be > 0"),
    ("ring_radius_step_mm = 95", "must be <= ring_radius_max_mm - ring_radius_min_mm (90)"),
])
def test_bad_values_name_line_key_and_limit(tmp_path, line, message):
    path = write(tmp_path, f"# my boat\n{line}\n")
    (p,) = problems_of(path)
    # a clash between two keys is reported on the one the user wrote
    assert str(p) == f"{path}: line 2, key {line.split(' =')[0]}: " + p.message
    assert message in p.message


def test_axial_length_must_hold_clearances_and_resin(tmp_path):
    path = write(tmp_path, "running_clearance_mm = 5\nmax_axial_length_mm = 10\n")
    (p,) = problems_of(path)
    assert (p.row, p.column) == (2, "max_axial_length_mm")
    assert "must be > 2 x (running_clearance_mm + resin_skin_mm) (11.6) (got 10)" in p.message


def test_all_problems_at_once(tmp_path):
    path = write(tmp_path, "sailing_rmp = 1\nturns_max = 'x'\nresin_skin_mm = -1\n")
    assert [p.column for p in problems_of(path)] == ["sailing_rmp", "turns_max", "resin_skin_mm"]


def test_invalid_toml_gives_the_line(tmp_path):
    path = write(tmp_path, 'name = "Petrel"\nsailing_rpm = = 3\n')
    (p,) = problems_of(path)
    assert p.row == 2 and "not valid TOML" in str(p)


def test_missing_file_points_to_the_template_command(tmp_path):
    (p,) = problems_of(tmp_path / "none.toml")
    assert "file not found" in p.message and "afpm scenario new" in p.message


def test_scenario_check_shows_values_in_file_units(runner):
    result = runner.invoke(app, ["scenario", "check"])
    assert result.exit_code == 0
    assert "shaft_diameter_mm" in result.stdout and "Kittiwake" in result.stdout


def test_list_keys_profile_and_objectives(tmp_path):
    s = load_scenario(write(tmp_path, 'propeller_diameter_mm = 406\nprofile_boat_speed_kn = [5, 6]\n'
                                      'profile_hours_per_day = [10, 4]\n'
                                      'objectives = ["amp_hours_per_day", "mean_added_drag_N", "magnet_cost"]\n'))
    assert s.has_propeller and s.propeller_diameter_m == pytest.approx(0.406)
    assert s.profile_boat_speed_kn == (5.0, 6.0) and s.profile_hours_per_day == (10.0, 4.0)
    assert s.objectives == ("amp_hours_per_day", "mean_added_drag_N", "magnet_cost")
    assert not load_scenario(None).has_propeller


@pytest.mark.parametrize("text,key,words", [
    ('profile_boat_speed_kn = [5, 6]\nprofile_hours_per_day = [1, 2, 3]\n', "profile_hours_per_day",
     "one number of hours per speed"),
    ('objectives = ["charge_current_A", "drag_torqe_Nm"]\n', "objectives", "did you mean drag_torque_Nm"),
    ('objectives = ["amp_hours_per_day", "magnet_cost"]\n', "objectives", "needs a propeller"),
    ('objectives = ["magnet_cost"]\n', "objectives", "at least two"),
    ('profile_hours_per_day = [1, 30, 2, 2]\n', "profile_hours_per_day", "each entry must be"),
    ('profile_boat_speed_kn = 6\n', "profile_boat_speed_kn", "must be a non-empty list"),
])
def test_bad_list_values_name_line_and_key(tmp_path, runner, text, key, words):
    path = write(tmp_path, text)
    result = runner.invoke(app, ["scenario", "check", str(path)])
    assert result.exit_code == 2
    out = result.output + (result.stderr if result.stderr_bytes else "")
    line = [ln for ln in out.splitlines() if f"key {key}" in ln]
    assert line and words in line[0] and str(path) in line[0] and "line " in line[0], out
