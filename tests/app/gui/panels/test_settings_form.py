"""The settings form is generated from the settings dataclasses and applies validated changes."""

from __future__ import annotations

import pytest

pytest.importorskip("pytestqt")

from analysis.settings import Settings, describe  # noqa: E402
from app.gui.panels.settings_form import SettingsForm  # noqa: E402


@pytest.fixture
def form(qtbot):
    w = SettingsForm()
    qtbot.addWidget(w)
    return w


def test_every_field_has_an_editor_with_its_source_as_tooltip(form):
    infos = describe()
    assert set(form.editors) == {i.path for i in infos}
    for info in infos:
        tip = form.editors[info.path].widget.toolTip()
        assert info.path in tip and "source:" in tip
    assert "Verkerk" in form.editors["measurement.ddr100_window_ms"].widget.toolTip()


def test_untouched_form_round_trips_the_defaults(form):
    assert Settings().updated(form.values()) == Settings()


def test_apply_emits_the_changed_paths(form, qtbot):
    form.editors["measurement.top_method"].set("dvdt_fraction")
    form.editors["preprocess.lowpass_hz"].set(2000.0)
    form.editors["measurement.apd_percent"].set((30.0, 90.0))
    with qtbot.waitSignal(form.applied) as sig:
        form.apply()
    new, changed = sig.args
    assert new.measurement.top_method == "dvdt_fraction" and new.preprocess.lowpass_hz == 2000.0
    assert new.measurement.apd_percent == (30.0, 90.0)
    assert sorted(changed) == ["measurement.apd_percent", "measurement.top_method", "preprocess.lowpass_hz"]
    assert form.labels["measurement.top_method"].font().bold()  # differs from the default


def test_bad_value_is_refused_with_one_line(form, qtbot):
    form.editors["measurement.apd_percent"].widget.setText("50, fifty")
    with qtbot.assertNotEmitted(form.applied):
        assert form.apply() is None
    assert "not a list of numbers" in form.message.text()


def test_a_range_is_worded_alike_in_the_tooltip_the_error_and_the_measurements_page(form):
    # The bounds are detection.min_width_ms's declared ones (0 and 1000 ms, as the settings test
    # names them); the wording is the project's own (common practice, no source).
    from analysis import docs_measurements
    from analysis.errors import SettingsError

    with pytest.raises(SettingsError) as err:
        Settings().replace("detection.min_width_ms", -1.0)
    assert "allowed: from 0 to 1000 ms" in str(err.value)
    assert "allowed: from 0 to 1000 ms" in form.editors["detection.min_width_ms"].widget.toolTip()
    row = next(r for r in docs_measurements.render().splitlines() if r.startswith("| `detection.min_width_ms` |"))
    assert "| ms | from 0 to 1000 |" in row
