"""Files from the main window: open by path, dialog or drop, save, save as and revert to saved,
CSV and figure export, and the reviews a crash left unsaved.

Saving goes through the core's session (an atomic write of the results file); exports write a
temporary file and move it over the target, so a failed export never leaves half a file.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Callable, Sequence

from PySide6 import QtGui, QtWidgets

from analysis import open_recording
from analysis.conditions import Condition
from analysis.errors import InputError

from .autosave import PendingReview, pending_reviews
from .display import Display
from .feedback import Feedback
from .loading import RESULTS_EXTENSIONS, Loader
from .recent import RecentFiles
from .state import WindowState, WindowViews

__all__ = ["Files", "open_filter"]


def open_filter() -> str:
    """The open dialog's filter: every extension the core's readers register, and results files."""
    from analysis.readers import supported_extensions

    patterns = " ".join(f"*{ext}" for ext in (*supported_extensions(), *RESULTS_EXTENSIONS))
    return f"Recordings and results ({patterns});;All files (*)"


class Files:
    """Opening, saving, reverting and exporting, and the recovery of unsaved reviews.

    Parameters
    ----------
    state : WindowState
    views : WindowViews
    loader : Loader
        Opens what is chosen.
    display : Display
    feedback : Feedback
    recent : RecentFiles
        The files opened and saved, newest first.
    parent : QWidget
        Over which file dialogs and questions open (the window).
    recent_changed : callable
        Called after a file is added to the recent files.
    """

    def __init__(self, state: WindowState, views: WindowViews, loader: Loader, display: Display, feedback: Feedback,
                 recent: RecentFiles, parent: QtWidgets.QWidget, *, recent_changed: Callable[[], None]) -> None:
        self.state = state
        self.views = views
        self.loader = loader
        self.display = display
        self.feedback = feedback
        self.recent = recent
        self.parent = parent
        self.recent_changed = recent_changed

    def open_dialog(self) -> None:
        path, _ = QtWidgets.QFileDialog.getOpenFileName(self.parent, "Open a recording or results", "", open_filter())
        if path:
            self.open_path(path)

    def drag_enter(self, event: QtGui.QDragEnterEvent) -> None:
        """Accept a drag that carries a local file."""
        if event.mimeData().hasUrls() and any(u.isLocalFile() for u in event.mimeData().urls()):
            event.acceptProposedAction()

    def drop(self, event: QtGui.QDropEvent) -> None:
        """Open the first local file dropped."""
        files = [u.toLocalFile() for u in event.mimeData().urls() if u.isLocalFile()]
        if files:
            event.acceptProposedAction()
            self.open_path(files[0])

    def open_path(self, path: str | os.PathLike, *, conditions: Sequence[Condition] = ()) -> bool:
        """Open a recording (analysed in the background) or a results file. False on bad input."""
        path = os.fspath(path)
        if not self.confirm_discard():
            return False
        try:
            if Path(path).suffix.lower() in RESULTS_EXTENSIONS:
                self.loader.open_results(path)
            else:
                self.loader.open_recording_file(open_recording(path), origin=path, conditions=conditions)
        except InputError as exc:
            self.feedback.show_error(exc.one_line())
            return False
        self.recent.add(path)
        self.recent_changed()
        return True

    def recoverable_reviews(self, *, skip: Sequence[str | os.PathLike] = ()) -> list[PendingReview]:
        """The unsaved reviews that can be reopened, newest first: every journal in the autosave
        folder whose recording or results file is still there, less those of the ``skip`` origins."""
        skipped = {os.path.abspath(os.fspath(p)) for p in skip}
        return [p for p in pending_reviews() if p.origin not in skipped and os.path.exists(p.origin)]

    def offer_recovery(self, *, choose=None, skip: Sequence[str | os.PathLike] = ()) -> PendingReview | None:
        """Offer the reviews a crash or a kill left unsaved, and reopen the one chosen.

        At start, and from File > Recover unsaved review… (:func:`~app.gui.dialogs.recovery.add_recover_action`).

        Parameters
        ----------
        choose : callable or None
            ``choose(pending) -> PendingReview or None`` picks one; None asks the user in an
            interactive window (:func:`~app.gui.dialogs.recovery.ask_recovery`, where journals can also
            be discarded) and keeps them all otherwise.
        skip : sequence of paths
            Origins not to offer: the file the app was started on, or the file shown now (its
            journal is the review on screen); their reviews come back anyway.

        Returns
        -------
        PendingReview or None
            The review reopened. Its recording (or results file) is opened as usual and the
            journal replayed once the analysis is done; journals whose origin is gone are kept.
        """
        pending = self.recoverable_reviews(skip=skip)
        if not pending:
            return None
        if choose is not None:
            choice = choose(pending)
        elif self.feedback.interactive:
            from ..dialogs.recovery import ask_recovery

            choice = ask_recovery(self.parent, pending)
        else:
            choice = None
        if choice is None:
            left = [p for p in pending if p.path.exists()]
            if left:
                self.feedback.status(f"{len(left)} unsaved review(s) kept; File > Recover unsaved review… "
                                     "(or opening the file again) recovers one")
            return None
        if not self.open_path(choice.origin):
            return None
        if choice.key in self.state.session.recordings and choice.key != self.state.key:
            self.loader.select_recording(choice.key)  # a results file: the recording the review was of
        return choice

    def save(self) -> bool:
        if self.state.results_path:
            return self.save_results(self.state.results_path)
        return self.save_as()

    def save_as(self) -> bool:
        if not self.feedback.interactive:
            return False
        start = str(Path(self.state.origin).with_suffix(".h5")) if self.state.origin and os.path.exists(os.path.dirname(self.state.origin) or ".") else "results.h5"
        path, _ = QtWidgets.QFileDialog.getSaveFileName(self.parent, "Save results", start, "Upstroke results (*.h5)")
        return bool(path) and self.save_results(path if Path(path).suffix.lower() in RESULTS_EXTENSIONS else path + ".h5")

    def save_results(self, path: str | os.PathLike) -> bool:
        """Save the session (atomically) and forget the autosave journals of its reviews: those
        of every recording the file holds, not only the one shown."""
        if self.state.key is None:
            self.feedback.show_error("nothing to save yet: open a recording and let the analysis finish")
            return False
        try:
            self.state.session.save(path)
        except InputError as exc:
            self.feedback.show_error(exc.one_line())
            return False
        self.state.results_path = os.fspath(path)
        self.discard_review_journals()
        self.loader.journal_follows(self.state.results_path)
        self.recent.add(path)
        self.recent_changed()
        self.feedback.status(f"saved {path}")
        return True

    def revert_to_saved(self) -> bool:
        """Throw away every change since the results file was saved and show it as saved.

        The autosave journals of the file's recordings go too: the changes were discarded on
        purpose, so the next start must not offer to recover them. The file is read before
        anything is let go; when it cannot be read, nothing changes. True when reverted.
        """
        path = self.state.results_path
        if not path:
            self.feedback.show_error("nothing to revert to: the review has not been saved to a results file yet")
            return False
        if self.feedback.interactive and self.state.session.modified:
            answer = QtWidgets.QMessageBox.question(
                self.parent, "Upstroke",
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
            self.feedback.show_error(exc.one_line())
            return False
        shown, row = self.state.key, self.state.current_row
        if self.state.journal is not None:
            self.state.journal.discard()
        for key in {*self.state.session.recordings, *saved.recordings}:
            Journal(path, key).discard()
        self.loader.open_results(path, session=saved)
        if shown in saved.recordings and shown != self.state.key:
            self.loader.select_recording(shown)
            self.display.fill_recording_combo()
        if self.state.key == shown and self.state.beats is not None and 0 <= row < len(self.state.beats):
            self.display.select_beat(row, follow=False)  # the same recording, as saved: the beat stays
        self.feedback.status(f"reverted to {path} as saved")
        return True

    def export_beats_csv(self, path: str | os.PathLike) -> None:
        """The reviewed beats of the recording, in the beats CSV's columns."""
        from analysis.results import atomic_output

        with atomic_output(path) as tmp:
            with open(tmp, "w", encoding="utf-8", newline="") as fh:
                self.state.session.beats(self.state.key).to_csv(fh)

    def export_summary_csv(self, path: str | os.PathLike) -> None:
        from analysis.results import atomic_output
        from analysis.stats import summary_csv

        text = summary_csv(self.state.session.summary_table([self.state.key]))
        with atomic_output(path) as tmp:
            with open(tmp, "w", encoding="utf-8", newline="") as fh:
                fh.write(text)

    def export_figures(self, folder: str | os.PathLike, fmt: str = "png") -> list[str]:
        if self.state.key is not None:
            self.state.session.summaries(self.state.key)  # current, so that the figures use the summaries' beats
        self.views.figures.set_input(self.display.figure_input())
        stem = Path(self.state.session.label(self.state.key)).stem if self.state.key else ""
        return self.views.figures.export_all(folder, fmt=fmt, stem=stem)

    def export_dialog(self, what: str) -> None:
        if self.state.key is None:
            self.feedback.show_error("nothing to export yet: open a recording and let the analysis finish")
            return
        base = Path(self.state.session.label(self.state.key)).stem
        try:
            if what == "figures":
                folder = QtWidgets.QFileDialog.getExistingDirectory(self.parent, "Export figures into")
                if folder:
                    paths = self.export_figures(folder, "png")
                    self.export_figures(folder, "svg")
                    self.feedback.status(f"{len(paths)} figures written to {folder} (PNG and SVG)")
                return
            path, _ = QtWidgets.QFileDialog.getSaveFileName(self.parent, f"Export {what} CSV", f"{base}_{what}.csv", "CSV (*.csv)")
            if path:
                (self.export_beats_csv if what == "beats" else self.export_summary_csv)(path)
                self.feedback.status(f"wrote {path}")
        except (OSError, InputError) as exc:
            self.feedback.show_error(f"{exc}")

    def confirm_discard(self) -> bool:
        """Ask before an unsaved review is dropped; True to go on."""
        if not self.feedback.interactive or self.state.key is None or not self.state.session.modified:
            return True
        answer = QtWidgets.QMessageBox.question(
            self.parent, "Upstroke", "The review has unsaved changes. Save them first?",
            QtWidgets.QMessageBox.Save | QtWidgets.QMessageBox.Discard | QtWidgets.QMessageBox.Cancel,
        )
        if answer == QtWidgets.QMessageBox.Save:
            return self.save()
        if answer == QtWidgets.QMessageBox.Discard:
            self.discard_review_journals()
        return answer == QtWidgets.QMessageBox.Discard

    def discard_review_journals(self) -> None:
        """Delete the journals whose review the session holds (it has just been saved, or the
        user discarded it): the one shown and every other recording's this window wrote or
        replayed. A journal another run left for a recording not shown since stays: its
        review is not in the session, so it is still offered for recovery."""
        from .autosave import Journal

        if self.state.journal is not None:
            self.state.journal.discard()
        for key in self.state.journaled_keys & set(self.state.session.recordings):
            Journal(self.state.origin or key, key).discard()
        self.state.journaled_keys.clear()
