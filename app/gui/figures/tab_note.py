"""A note ("updating…") after the title of a figure tab whose figure waits for a redraw."""

from __future__ import annotations

from PySide6 import QtWidgets

__all__ = ["TabNote"]


class TabNote:
    """"updating…" after the title of the tab shown, while its figure waits for a redraw."""

    def __init__(self, tabs: QtWidgets.QTabWidget, titles: list[str]) -> None:
        self.tabs, self.titles, self.shown = tabs, titles, False

    def show(self) -> None:
        self.shown = True
        i = self.tabs.currentIndex()
        self.tabs.setTabText(i, f"{self.titles[i]} (updating…)")

    def hide(self) -> None:
        if self.shown:
            self.shown = False
            for i, title in enumerate(self.titles):
                if self.tabs.tabText(i) != title:
                    self.tabs.setTabText(i, title)

    def isVisible(self) -> bool:  # noqa: N802 (as a widget's)
        return self.shown
