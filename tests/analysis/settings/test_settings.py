"""Settings: MEASUREMENTS.md's defaults, bounds with the allowed range, TOML, hash, replace."""

from __future__ import annotations

import subprocess
import sys
import tomllib

import pytest

from analysis.errors import SettingsError
from analysis.settings import SCHEMA_VERSION, MeasurementSettings, Settings, describe, load_settings, save_settings


def test_defaults_are_the_published_definitions():
    m = Settings().measurement
    assert m.top_method == "dvdt_criterion" and m.top_dvdt_V_per_s == 0.5  # MEASUREMENTS.md: TOP at 0.5 V/s
    assert m.top_fraction == 0.1  # MEASUREMENTS.md: 10 % of dV/dt max is common
    assert m.ddr_method == "linear" and m.ddr100_window_ms == 100.0  # Verkerk et al. 2007: first 100 ms
    assert m.apd_reference == "dvdt_max" and m.apd_percent == (20.0, 50.0, 90.0)  # MEASUREMENTS.md
    assert m.upstroke_time_method == "dvdt_max"  # MEASUREMENTS.md: time of dV/dt max
    assert 0.5 <= m.top_derivative_window_ms <= 2.0  # MEASUREMENTS.md: about 1 ms
    assert Settings().preprocess.ljp_mV == 0.0


def test_every_alternative_definition_is_a_choice():
    info = {f.path: f for f in describe()}
    assert set(info["measurement.top_method"].choices) == {"dvdt_criterion", "dvdt_fraction", "d2v_max", "linear_fits"}
    assert set(info["measurement.ddr_method"].choices) == {"linear", "early_late", "exponential"}
    assert set(info["measurement.apd_reference"].choices) == {"dvdt_max", "top", "peak"}
    assert set(info["measurement.upstroke_time_method"].choices) == {"dvdt_max", "voltage_level"}
    assert info["preprocess.notch_hz"].choices == (50.0, 60.0)


def test_every_field_has_a_doc_and_a_source_and_numbers_have_bounds():
    for f in describe():
        assert f.doc and f.source, f.path
        if f.kind in ("float", "int"):
            assert f.min is not None and f.max is not None, f.path
            assert f.min <= f.default <= f.max, f.path


@pytest.mark.parametrize(
    "path, value, words",
    [
        ("detection.min_width_ms", -1.0, "from 0 to 1000 ms"),
        ("measurement.top_dvdt_V_per_s", 500.0, "from 0.01 to 100 V/s"),
        ("measurement.apd_percent", [20.0, 150.0], "from 1 to 100 %"),
        ("measurement.top_method", "steepest", "dvdt_criterion, dvdt_fraction"),
        ("preprocess.notch_hz", 55.0, "50, 60"),
        ("preprocess.lowpass_order", 2.5, "whole number"),
        ("measurement.top_dvdt_V_per_s", "fast", "not a number"),
        ("measurement.top_dvdt_V_per_s", True, "not a number"),
        ("measurement.apd_percent", [], "empty"),
    ],
)
def test_bad_values_name_the_key_and_the_allowed_range(path, value, words):
    with pytest.raises(SettingsError) as err:
        Settings().replace(path, value)
    assert path in str(err.value) and words in str(err.value)


def test_unknown_keys_and_sections_are_refused():
    with pytest.raises(SettingsError, match="unknown setting measurement.top_mv"):
        Settings.from_dict({"measurement": {"top_mv": 1}})
    with pytest.raises(SettingsError, match="unknown settings section 'measure'"):
        Settings.from_dict({"measure": {}})
    with pytest.raises(SettingsError, match="newer"):
        Settings.from_dict({"schema_version": SCHEMA_VERSION + 1})


def test_direct_construction_is_validated_too():
    with pytest.raises(SettingsError, match="measurement.ddr100_window_ms"):
        MeasurementSettings(ddr100_window_ms=0.0)


def test_dict_round_trip_and_missing_keys_take_defaults():
    s = Settings().updated({"measurement.apd_percent": (30, 75), "preprocess.notch_hz": 60, "detection.chunk_s": 10})
    assert s.measurement.apd_percent == (30.0, 75.0)
    assert Settings.from_dict(s.to_dict()) == s
    assert Settings.from_dict({"measurement": {"top_fraction": 0.2}}).detection == Settings().detection


def test_toml_round_trip(tmp_path):
    s = Settings().updated({"measurement.top_method": "linear_fits", "preprocess.ljp_mV": 13.2, "preprocess.lowpass_hz": 2000})
    path = tmp_path / "cell.toml"
    save_settings(s, path)
    with open(path, "rb") as fh:
        data = tomllib.load(fh)  # reference reader: the standard library's TOML parser
    assert data["measurement"]["top_method"] == "linear_fits" and "notch_hz" not in data["preprocess"]
    assert load_settings(path) == s
    assert load_settings(path).short_hash() == s.short_hash()


def test_load_settings_errors_name_the_file(tmp_path):
    with pytest.raises(SettingsError, match="does not exist"):
        load_settings(tmp_path / "missing.toml")
    bad = tmp_path / "bad.toml"
    bad.write_text("[measurement\ntop_method = 1\n")
    with pytest.raises(SettingsError, match="not valid TOML") as err:
        load_settings(bad)
    assert str(bad) in str(err.value)
    wrong = tmp_path / "wrong.toml"
    wrong.write_text("[detection]\nmin_interval_ms = 0\n")
    with pytest.raises(SettingsError, match="detection.min_interval_ms") as err:
        load_settings(wrong)
    assert str(wrong) in str(err.value)


def test_short_hash_is_stable_across_processes_and_changes_with_any_field():
    code = "from analysis.settings._settings import Settings; print(Settings().short_hash())"
    other = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.strip()
    h = Settings().short_hash()
    assert other == h and len(h) == 10 and int(h, 16) >= 0
    assert Settings().replace("measurement.top_dvdt_V_per_s", 1.0).short_hash() != h
    assert Settings().replace("measurement.top_dvdt_V_per_s", 0.5).short_hash() == h


def test_replace_and_get():
    s = Settings().replace("measurement.apd_reference", "peak")
    assert s.get("measurement.apd_reference") == "peak" and Settings().measurement.apd_reference == "dvdt_max"
    with pytest.raises(SettingsError, match="unknown setting"):
        s.replace("measurement.nothing", 1)
    with pytest.raises(SettingsError, match="unknown setting"):
        s.get("nothing.here")
