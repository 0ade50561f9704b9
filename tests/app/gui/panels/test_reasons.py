"""Reject reasons keep their numbers for good; the user's own get the next ones and are remembered;
the picker opens beside the beat, not over it."""

from __future__ import annotations

import pytest

pytest.importorskip("pytestqt")

from PySide6 import QtCore
from PySide6.QtTest import QTest

from app.gui.panels.beat_card import REASONS, ReasonBook, ReasonPicker


def _numbers(picker: ReasonPicker) -> dict[str, int]:
    return {a.data(): int(a.text().split()[0]) for a in picker.reason_actions() if a.data()}


def test_numbers_stay_put_whatever_was_picked_last(qtbot, tmp_path):
    picker = ReasonPicker(book=ReasonBook(tmp_path))
    qtbot.addWidget(picker)
    got = []
    picker.picked.connect(got.append)
    picker.open_at(QtCore.QPoint(10, 10))
    before = _numbers(picker)
    assert before == {r: i for i, r in enumerate(REASONS, start=1)}  # built-in order, 1 up
    QTest.keyClick(picker, QtCore.Qt.Key_3)
    assert got == ["noise"]
    picker.open_at(QtCore.QPoint(10, 10))
    assert _numbers(picker) == before  # the last reason used does not move to 1
    QTest.keyClick(picker, QtCore.Qt.Key_2)
    assert got[-1] == "seal or access trouble"


def test_own_reasons_get_the_next_numbers_and_are_remembered(qtbot, tmp_path):
    book = ReasonBook(tmp_path)
    assert book.remember("bubble in the bath line") == len(REASONS) + 1
    assert book.remember("perfusion switch") == len(REASONS) + 2
    assert book.remember("noise") == 3  # a built-in one keeps its own
    again = ReasonBook(tmp_path)  # another session of the app
    assert again.number_of("bubble in the bath line") == 9 and again.number_of("perfusion switch") == 10
    picker = ReasonPicker(book=again)
    qtbot.addWidget(picker)
    got = []
    picker.picked.connect(got.append)
    picker.open_at(QtCore.QPoint(10, 10))
    QTest.keyClick(picker, QtCore.Qt.Key_1)  # 1 could start 10: the picker waits for the next digit
    assert got == []
    QTest.keyClick(picker, QtCore.Qt.Key_0)
    assert got == ["perfusion switch"]
    picker.open_at(QtCore.QPoint(10, 10))
    QTest.keyClick(picker, QtCore.Qt.Key_9)
    assert got[-1] == "bubble in the bath line"


def test_the_picker_opens_beside_the_beat(qtbot, tmp_path):
    picker = ReasonPicker(book=ReasonBook(tmp_path))
    qtbot.addWidget(picker)
    beat = QtCore.QRect(200, 100, 120, 300)  # the beat from its MDP to its APD90, the plot's height
    corner = picker.place(beat.topRight(), beat)
    placed = QtCore.QRect(corner, picker.sizeHint())
    assert not placed.intersects(beat)
