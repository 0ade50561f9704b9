"""The definitions panel: a form generated from the settings dataclasses.

Every field of every section of :class:`analysis.settings.Settings` gets an editor chosen by its
kind (number with bounds and unit, whole number, switch, list of choices, optional value, list of
numbers) and a tooltip with its description, its allowed values and the published source of the
definition it selects. Nothing here is written per field: a new setting in the core appears in
the form by itself.
"""

from __future__ import annotations

import html
import math
import re
from typing import Any

from PySide6 import QtCore, QtWidgets

from analysis.errors import SettingsError
from analysis.settings import FieldInfo, Settings, describe, range_text

__all__ = ["SettingsForm", "field_label", "field_tooltip"]

_UNIT_SUFFIX = re.compile(r"_(mV_per_s|V_per_s|mV|ms|s|hz|Hz|bpm|pct)$")
_SECTION_TITLES = {"preprocess": "Before detection", "detection": "Finding beats", "measurement": "Definitions of each parameter"}


def field_label(info: FieldInfo) -> str:
    """The field's name for people: its unit (shown by the editor) dropped, words spaced."""
    return _UNIT_SUFFIX.sub("", info.name).replace("_", " ")


def _bounds_text(info: FieldInfo) -> str:
    if info.choices:
        return "one of: " + ", ".join(str(c) for c in info.choices)
    return range_text(info.min, info.max, info.unit)


def field_tooltip(info: FieldInfo) -> str:
    """Rich-text tooltip: what the field means, allowed values, default, published source."""
    default = (", ".join(v if isinstance(v, str) else f"{v:g}" for v in info.default)
               if isinstance(info.default, tuple) else info.default)
    parts = [f"<b>{html.escape(info.path)}</b>", html.escape(info.doc)]
    bounds = _bounds_text(info)
    if bounds:
        parts.append(f"allowed: {html.escape(bounds)}")
    parts.append(f"default: {html.escape(str('none' if default is None else default))}")
    parts.append(f"<i>source:</i> {html.escape(info.source or 'not stated')}")
    return "<p style='white-space:pre-wrap'>" + "<br>".join(parts) + "</p>"


def _decimals(info: FieldInfo) -> int:
    lo = info.min if info.min is not None else 0.0
    return 3 if lo and abs(lo) < 0.1 else 2


class _Editor:
    """One field's editor widget with get/set of the value in the field's type."""

    def __init__(self, info: FieldInfo) -> None:
        self.info = info
        kind = info.kind
        if kind == "bool":
            self.widget = QtWidgets.QCheckBox()
        elif kind == "str" or (kind == "optional float" and info.choices):
            self.widget = QtWidgets.QComboBox()
            if kind == "optional float":
                self.widget.addItem("none", None)
            for c in info.choices or ():
                self.widget.addItem(f"{c:g} {info.unit}".strip() if isinstance(c, float) else str(c), c)
        elif kind == "int":
            self.widget = QtWidgets.QSpinBox()
            self.widget.setRange(int(info.min if info.min is not None else -10**9), int(info.max if info.max is not None else 10**9))
        elif kind in ("float", "optional float"):
            spin = QtWidgets.QDoubleSpinBox()
            spin.setDecimals(_decimals(info))
            spin.setRange(info.min if info.min is not None else -1e9, info.max if info.max is not None else 1e9)
            spin.setSingleStep(_step(info))
            if info.unit:
                spin.setSuffix(f" {info.unit}")
            if kind == "optional float":
                # The lowest value stands for "none" (TOML has no null; the core reads it as unset).
                spin.setMinimum((info.min if info.min is not None else 0.0) - _step(info))
                spin.setSpecialValueText("none")
            self.widget = spin
        elif kind == "float list":
            self.widget = QtWidgets.QLineEdit()
            self.widget.setPlaceholderText("e.g. 20, 50, 90")
        elif kind == "text list":
            self.widget = QtWidgets.QLineEdit()
            self.widget.setPlaceholderText("e.g. " + ", ".join((info.choices or ("word",))[:2]))
        else:  # pragma: no cover - the core declares only the kinds above
            raise TypeError(kind)
        self.widget.setObjectName(f"setting_{info.path}")
        self.widget.setToolTip(field_tooltip(info))

    def set(self, value: Any) -> None:
        w, kind = self.widget, self.info.kind
        if kind == "bool":
            w.setChecked(bool(value))
        elif isinstance(w, QtWidgets.QComboBox):
            w.setCurrentIndex(max(0, w.findData(value)))
        elif kind == "float list":
            w.setText(", ".join(f"{v:g}" for v in value))
        elif kind == "text list":
            w.setText(", ".join(value))
        elif kind == "optional float":
            w.setValue(w.minimum() if value is None else float(value))
        else:
            w.setValue(value)

    def get(self) -> Any:
        w, kind = self.widget, self.info.kind
        if kind == "bool":
            return w.isChecked()
        if isinstance(w, QtWidgets.QComboBox):
            return w.currentData()
        if kind == "float list":
            text = w.text().replace(";", ",")
            try:
                return tuple(float(p) for p in text.split(",") if p.strip())
            except ValueError:
                raise SettingsError(None, f"setting {self.info.path} = {text!r} is not a list of numbers", "write numbers separated by commas, e.g. 20, 50, 90") from None
        if kind == "text list":
            return tuple(p.strip() for p in w.text().replace(";", ",").split(",") if p.strip())
        if kind == "optional float":
            return None if w.value() == w.minimum() else float(w.value())
        return w.value()

    def changed_signal(self):
        w = self.widget
        if isinstance(w, QtWidgets.QCheckBox):
            return w.toggled
        if isinstance(w, QtWidgets.QComboBox):
            return w.currentIndexChanged
        if isinstance(w, QtWidgets.QLineEdit):
            return w.textEdited
        return w.valueChanged


def _step(info: FieldInfo) -> float:
    hi = info.max if info.max is not None else 100.0
    lo = info.min if info.min is not None else 0.0
    span = hi - lo
    return 10 ** math.floor(math.log10(span / 100.0)) if span > 0 else 0.1


class SettingsForm(QtWidgets.QWidget):
    """Editors for every setting, Apply and Defaults buttons.

    Signals
    -------
    applied(object, list)
        The new :class:`Settings` and the paths (``"section.field"``) that differ from before.
    """

    applied = QtCore.Signal(object, list)

    def __init__(self, parent: QtWidgets.QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("settings_form")
        self._settings = Settings()
        self.editors: dict[str, _Editor] = {}
        self.labels: dict[str, QtWidgets.QLabel] = {}
        outer = QtWidgets.QVBoxLayout(self)
        outer.setContentsMargins(4, 4, 4, 4)
        scroll = QtWidgets.QScrollArea()
        scroll.setWidgetResizable(True)
        scroll.setFrameShape(QtWidgets.QFrame.NoFrame)
        body = QtWidgets.QWidget()
        column = QtWidgets.QVBoxLayout(body)
        column.setContentsMargins(2, 2, 2, 2)
        infos = describe()
        for key in Settings.sections():
            box = QtWidgets.QGroupBox(_SECTION_TITLES.get(key, key.replace("_", " ").capitalize()))
            form = QtWidgets.QFormLayout(box)
            form.setFieldGrowthPolicy(QtWidgets.QFormLayout.AllNonFixedFieldsGrow)
            form.setLabelAlignment(QtCore.Qt.AlignRight)
            for info in (i for i in infos if i.section == key):
                editor = _Editor(info)
                label = QtWidgets.QLabel(field_label(info))
                label.setToolTip(field_tooltip(info))
                editor.changed_signal().connect(self._mark_pending)
                form.addRow(label, editor.widget)
                self.editors[info.path] = editor
                self.labels[info.path] = label
            column.addWidget(box)
        column.addStretch(1)
        scroll.setWidget(body)
        outer.addWidget(scroll, 1)

        self.message = QtWidgets.QLabel("")
        self.message.setWordWrap(True)
        self.message.setObjectName("settings_message")
        outer.addWidget(self.message)
        row = QtWidgets.QHBoxLayout()
        self.apply_button = QtWidgets.QPushButton("Apply and re-analyse")
        self.apply_button.setEnabled(False)
        self.apply_button.clicked.connect(self.apply)
        self.defaults_button = QtWidgets.QPushButton("Defaults")
        self.defaults_button.setToolTip("Put every definition back to its default (then Apply)")
        self.defaults_button.clicked.connect(lambda: self.show_settings(Settings(), pending=True))
        row.addWidget(self.defaults_button)
        row.addStretch(1)
        row.addWidget(self.apply_button)
        outer.addLayout(row)
        self.show_settings(self._settings)

    @property
    def settings(self) -> Settings:
        """The settings last applied (or shown)."""
        return self._settings

    def show_settings(self, settings: Settings, *, pending: bool = False) -> None:
        """Fill the editors from settings; ``pending`` leaves Apply enabled."""
        if not pending:
            self._settings = settings
        data = settings.to_dict()
        for path, editor in self.editors.items():
            key, _, name = path.partition(".")
            value = data[key][name]
            editor.widget.blockSignals(True)
            editor.set(tuple(value) if isinstance(value, list) else value)
            editor.widget.blockSignals(False)
        self._mark_changed_from_default(settings)
        self.apply_button.setEnabled(pending)
        self.message.setText("")

    def values(self) -> dict[str, Any]:
        """The editors' values as ``{"section.field": value}``."""
        return {path: editor.get() for path, editor in self.editors.items()}

    def apply(self) -> Settings | None:
        """Check the editors' values; emit ``applied`` with what changed. None when invalid."""
        try:
            new = self._settings.updated(self.values())
        except SettingsError as exc:
            self.message.setText(f"<span style='color:#9b2c2c'>{html.escape(exc.one_line())}</span>")
            return None
        before, after = self._settings.to_dict(), new.to_dict()
        changed = [p for p in self.editors if before[p.split('.')[0]][p.split('.')[1]] != after[p.split('.')[0]][p.split('.')[1]]]
        self._settings = new
        self.apply_button.setEnabled(False)
        self._mark_changed_from_default(new)
        self.message.setText(f"settings {new.short_hash()}" + (f": {len(changed)} changed" if changed else ": unchanged"))
        self.applied.emit(new, changed)
        return new

    def _mark_pending(self, *_args) -> None:
        self.apply_button.setEnabled(True)

    def _mark_changed_from_default(self, settings: Settings) -> None:
        default, now = Settings().to_dict(), settings.to_dict()
        for path, label in self.labels.items():
            key, _, name = path.partition(".")
            font = label.font()
            font.setBold(default[key][name] != now[key][name])
            label.setFont(font)
