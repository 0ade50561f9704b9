"""Autosave of the review in the app's own folder: the core's journal with its default place.

The journal itself is Qt-free, in :mod:`analysis.session._journal` (its module docstring documents
the API and its durability: every write is fsynced, file and folder, before it returns). Here it
gets the app's folder, ``autosave/`` in :func:`~app.gui.window.recent.config_dir`, so that

* the window writes ``Journal(origin, key)`` after every decision, condition or settings change,
  before any view redraws (the session bridge forwards ``changed`` first);
* saving the results, or discarding the review on purpose, deletes it;
* opening the same recording or results file again replays it (settings re-analysed in a
  worker, then conditions and verdicts), and at start the app offers every journal left behind
  (:func:`pending_reviews`).
"""

from __future__ import annotations

import os
from pathlib import Path

from analysis.session import JOURNAL_VERSION, JournalError, JournalReview, PendingReview, RestoreReport, write_durably
from analysis.session import Journal as _Journal
from analysis.session import pending_reviews as _pending_reviews

from .recent import config_dir

__all__ = [
    "JOURNAL_VERSION", "Journal", "JournalError", "JournalReview", "PendingReview", "RestoreReport",
    "autosave_folder", "pending_reviews", "write_durably",
]


def autosave_folder() -> Path:
    """Where the app keeps its journals: ``autosave`` in the app's folder."""
    return config_dir() / "autosave"


class Journal(_Journal):
    """:class:`analysis.session.Journal` in the app's folder unless told otherwise."""

    def __init__(self, origin: str, key: str, folder: str | os.PathLike | None = None) -> None:
        super().__init__(origin, key, autosave_folder() if folder is None else folder)


def pending_reviews(folder: str | os.PathLike | None = None) -> list[PendingReview]:
    """Every journal in the app's autosave folder (or ``folder``), newest first."""
    return _pending_reviews(autosave_folder() if folder is None else folder)
