"""Writing a batch's results: the results file and the CSV tables, all or nothing."""

from __future__ import annotations

import contextlib
import json
import os
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

from analysis.batch._task import stored_from_outcome
from analysis.batch._types import BatchResult
from analysis.decisions import REJECTED, TO_REVIEW
from analysis.errors import ResultsFileError
from analysis.results import ResultsFile, atomic_output, load_results, save_results
from analysis.settings import Settings
from analysis.stats import summary_csv as summary_text
from analysis.table import BeatTable

__all__ = ["SavedBatch", "prepare_existing", "save_batch"]


@dataclass(frozen=True)
class SavedBatch:
    """What :func:`save_batch` wrote: the results file, the other outputs, and counts.

    ``n_accepted`` beats are used by the summaries, ``n_rejected`` were rejected and
    ``n_to_review`` wait for review (of ``n_beats``).
    """

    out: str
    extra: tuple[str, ...]
    n_files: int
    n_beats: int
    n_accepted: int
    n_rejected: int = 0
    n_to_review: int = 0


def save_batch(
    result: "BatchResult",
    *,
    out: str | os.PathLike,
    csv: str | os.PathLike | None = None,
    summary_csv: str | os.PathLike | None = None,
    settings: Any = None,
) -> SavedBatch:
    """Write the good files' results: the results file and, if asked, the beats and summary CSVs.

    The recordings go in input order. An existing results file keeps its other recordings; a
    recording of the same source is replaced by the new analysis, where it stood (check the file
    first with :func:`prepare_existing`). Every output is written to a
    temporary file first and all of them replace their targets only once all are complete, so an
    error or Ctrl-C leaves the previous files as they were and no partial file behind.

    Parameters
    ----------
    result : BatchResult
    out : str or path
        The results file (HDF5).
    csv, summary_csv : str or path or None
        The beats CSV and the summary CSV (CONTRACT.md); None writes none.
    settings : Settings or None
        Stored as the file's default settings (for recordings added later), as ``upstroke
        analyze --out`` does.

    Raises
    ------
    ResultsFileError
        When an existing results file cannot be read, or the outputs cannot be written.
    """


    stored = [stored_from_outcome(o) for o in result.succeeded]
    if settings is None:
        settings = Settings()
    if isinstance(settings, Mapping):
        settings = Settings.from_dict(settings)
    default_json = json.dumps(settings.to_dict(), sort_keys=True, indent=1, allow_nan=False)
    recordings = stored
    if os.path.exists(out):
        previous = load_results(out, verify_sources=False)
        # As in a session: a recording of the same source is replaced where it stands, new
        # ones follow those already there.
        fresh = {_source_key(r.source_path): r for r in stored}
        old_keys = {_source_key(r.source_path) for r in previous.recordings}
        recordings = [fresh.get(_source_key(r.source_path), r) for r in previous.recordings]
        recordings += [r for r in stored if _source_key(r.source_path) not in old_keys]
    with contextlib.ExitStack() as stack:
        extra = []
        if csv is not None:
            tmp = stack.enter_context(atomic_output(csv))
            with open(tmp, "w", encoding="utf-8", newline="") as fh:
                BeatTable.concat([r.beats for r in stored]).to_csv(fh)
            extra.append(os.fspath(csv))
        if summary_csv is not None:
            tmp = stack.enter_context(atomic_output(summary_csv))
            with open(tmp, "w", encoding="utf-8", newline="") as fh:
                fh.write(summary_text([r.summary for r in stored]))
            extra.append(os.fspath(summary_csv))
        # The results file goes last: its own save is atomic, and the CSVs replace their
        # targets only after it succeeded.
        save_results(out, ResultsFile(recordings, default_json))
    n_beats = sum(len(r.beats) for r in stored)
    n_acc = sum(int(np.sum(r.beats["accepted"])) for r in stored if len(r.beats))
    n_rej = n_wait = 0
    for r in stored:
        if len(r.beats) and "verdict" in r.beats:
            verdict = np.asarray(r.beats["verdict"], dtype=object)
            n_rej += int(np.count_nonzero(verdict == REJECTED))
            n_wait += int(np.count_nonzero(verdict == TO_REVIEW))
    return SavedBatch(os.fspath(out), tuple(extra), len(stored), n_beats, n_acc, n_rej, n_wait)


def _source_key(path: str) -> str:
    return os.path.normcase(os.path.abspath(path))


def prepare_existing(
    out: str | os.PathLike, paths: "list[str]", conditions: "tuple[str, ...]" = (),
) -> "dict[str, tuple[str, ...]]":
    """Check an existing results file before a batch adds to it; the conditions each file keeps.

    A recording of the same source is replaced by the new analysis and, when no conditions are
    given, keeps its saved conditions (as ``upstroke analyze --out`` does). A recording with
    review decisions is not re-analysed by a batch, so that no decision is lost.

    Parameters
    ----------
    out : str or path
        The results file; nothing is checked when it does not exist.
    paths : list of str
        The batch's recordings.
    conditions : tuple of str
        The conditions given for every file.

    Returns
    -------
    dict of str to tuple of str
        Per path whose source the file already holds, the conditions its task should use.

    Raises
    ------
    ResultsFileError
        When the file is damaged or foreign (it is never replaced then), or holds review
        decisions for one of the recordings.
    """

    if not os.path.exists(out):
        return {}
    previous = {_source_key(r.source_path): r for r in load_results(out, verify_sources=False).recordings}
    keep: dict[str, tuple[str, ...]] = {}
    for path in paths:
        old = previous.get(_source_key(path))
        if old is None:
            continue
        if len(old.decisions):
            raise ResultsFileError(
                out, f"already holds {len(old.decisions)} review decision(s) for {path}, which a batch would replace",
                "re-analyse reviewed recordings with `upstroke analyze --out`, or write the batch to a new results file",
            )
        keep[path] = tuple(conditions) if conditions else tuple(c.text() for c in old.conditions)
    return keep
