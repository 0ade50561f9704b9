"""Files from the main window: open by dialog or drop, save, save as and revert to saved, CSV and
figure export.

Saving goes through the core's session (an atomic write of the results file); exports write a
temporary file and move it over the target, so a failed export never leaves half a file.
"""

from __future__ import annotations

import os
from pathlib import Path

from PySide6 import QtGui, QtWidgets

from analysis.errors import InputError

from .loading import RESULTS_EXTENSIONS

__all__ = ["FilesMixin", "open_filter"]

def open_filter() -> str:
    """The open dialog's filter: every extension the core's readers register, and results files."""
    from analysis.readers import supported_extensions

    patterns = " ".join(f"*{ext}" for ext in (*supported_extensions(), *RESULTS_EXTENSIONS))
    return f"Recordings and results ({patterns});;All files (*)"


class FilesMixin:
    """Opening, saving and exporting for :class:`~app.gui.main_window.MainWindow`."""

    def _open_dialog(self) -> None:
        path, _ = QtWidgets.QFileDialog.getOpenFileName(self, "Open a recording or results", "", open_filter())
        if path:
            self.open_path(path)

    def dragEnterEvent(self, event: QtGui.QDragEnterEvent) -> None:  # noqa: N802
        if event.mimeData().hasUrls() and any(u.isLocalFile() for u in event.mimeData().urls()):
            event.acceptProposedAction()

    def dropEvent(self, event: QtGui.QDropEvent) -> None:  # noqa: N802
        files = [u.toLocalFile() for u in event.mimeData().urls() if u.isLocalFile()]
        if files:
            event.acceptProposedAction()
            self.open_path(files[0])

    def save(self) -> bool:
        if self.results_path:
            return self.save_results(self.results_path)
        return self.save_as()

    def save_as(self) -> bool:
        if not self.interactive:
            return False
        start = str(Path(self.origin).with_suffix(".h5")) if self.origin and os.path.exists(os.path.dirname(self.origin) or ".") else "results.h5"
        path, _ = QtWidgets.QFileDialog.getSaveFileName(self, "Save results", start, "Upstroke results (*.h5)")
        return bool(path) and self.save_results(path if Path(path).suffix.lower() in RESULTS_EXTENSIONS else path + ".h5")

    def save_results(self, path: str | os.PathLike) -> bool:
        """Save the session (atomically) and forget the autosave journals of its reviews: those
        of every recording the file holds, not only the one shown."""
        if self.key is None:
            self.show_error("nothing to save yet: open a recording and let the analysis finish")
            return False
        try:
            self.session.save(path)
        except InputError as exc:
            self.show_error(exc.one_line())
            return False
        self.results_path = os.fspath(path)
        self._discard_review_journals()
        self._journal_follows(self.results_path)
        self.recent.add(path)
        self._fill_recent_menu()
        self.status(f"saved {path}")
        return True

    def revert_to_saved(self) -> bool:
        """Throw away every change since the results file was saved and show it as saved.

        The autosave journals of the file's recordings go too: the changes were discarded on
        purpose, so the next start must not offer to recover them. The file is read before
        anything is let go; when it cannot be read, nothing changes. True when reverted.
        """
        path = self.results_path
        if not path:
            self.show_error("nothing to revert to: the review has not been saved to a results file yet")
            return False
        if self.interactive and self.session.modified:
            answer = QtWidgets.QMessageBox.question(
                self, "Upstroke",
                f"Revert to {os.path.basename(path)} as it was saved? The changes made since are lost, "
                "and undo cannot bring them back.",
                QtWidgets.QMessageBox.Yes | QtWidgets.QMessageBox.Cancel, QtWidgets.QMessageBox.Cancel,
            )
            if answer != QtWidgets.QMessageBox.Yes:
                return False
        from analysis.session import Session

        from .autosave import Journal

        try:
            saved = Session.open(path)
        except InputError as exc:
            self.show_error(exc.one_line())
            return False
        shown, row = self.key, self.current_row
        if self.journal is not None:
            self.journal.discard()
        for key in {*self.session.recordings, *saved.recordings}:
            Journal(path, key).discard()
        self.open_results(path, session=saved)
        if shown in saved.recordings and shown != self.key:
            self.select_recording(shown)
            self._fill_recording_combo()
        if self.key == shown and self.beats is not None and 0 <= row < len(self.beats):
            self.select_beat(row, follow=False)  # the same recording, as saved: the beat stays
        self.status(f"reverted to {path} as saved")
        return True

    def export_beats_csv(self, path: str | os.PathLike) -> None:
        """The reviewed beats of the recording, in the beats CSV's columns."""
        from analysis.results import atomic_output

        with atomic_output(path) as tmp:
            with open(tmp, "w", encoding="utf-8", newline="") as fh:
                self.session.beats(self.key).to_csv(fh)

    def export_summary_csv(self, path: str | os.PathLike) -> None:
        from analysis.results import atomic_output
        from analysis.stats import summary_csv

        text = summary_csv(self.session.summary_table([self.key]))
        with atomic_output(path) as tmp:
            with open(tmp, "w", encoding="utf-8", newline="") as fh:
                fh.write(text)

    def export_figures(self, folder: str | os.PathLike, fmt: str = "png") -> list[str]:
        if self.key is not None:
            self.session.summaries(self.key)  # current, so that the figures use the summaries' beats
        self.figures.set_input(self._figure_input())
        stem = Path(self.session.label(self.key)).stem if self.key else ""
        return self.figures.export_all(folder, fmt=fmt, stem=stem)

    def _export_dialog(self, what: str) -> None:
        if self.key is None:
            self.show_error("nothing to export yet: open a recording and let the analysis finish")
            return
        base = Path(self.session.label(self.key)).stem
        try:
            if what == "figures":
                folder = QtWidgets.QFileDialog.getExistingDirectory(self, "Export figures into")
                if folder:
                    paths = self.export_figures(folder, "png")
                    self.export_figures(folder, "svg")
                    self.status(f"{len(paths)} figures written to {folder} (PNG and SVG)")
                return
            path, _ = QtWidgets.QFileDialog.getSaveFileName(self, f"Export {what} CSV", f"{base}_{what}.csv", "CSV (*.csv)")
            if path:
                (self.export_beats_csv if what == "beats" else self.export_summary_csv)(path)
                self.status(f"wrote {path}")
        except (OSError, InputError) as exc:
            self.show_error(f"{exc}")

    def _confirm_discard(self) -> bool:
        """Ask before an unsaved review is dropped; True to go on."""
        if not self.interactive or self.key is None or not self.session.modified:
            return True
        answer = QtWidgets.QMessageBox.question(
            self, "Upstroke", "The review has unsaved changes. Save them first?",
            QtWidgets.QMessageBox.Save | QtWidgets.QMessageBox.Discard | QtWidgets.QMessageBox.Cancel,
        )
        if answer == QtWidgets.QMessageBox.Save:
            return self.save()
        if answer == QtWidgets.QMessageBox.Discard:
            self._discard_review_journals()
        return answer == QtWidgets.QMessageBox.Discard

    def _discard_review_journals(self) -> None:
        """Delete the journals whose review the session holds (it has just been saved, or the
        user discarded it): the one shown and every other recording's this window wrote or
        replayed. A journal another run left for a recording not shown since stays: its
        review is not in the session, so it is still offered for recovery."""
        from .autosave import Journal

        if self.journal is not None:
            self.journal.discard()
        for key in self.journaled_keys & set(self.session.recordings):
            Journal(self.origin or key, key).discard()
        self.journaled_keys.clear()
