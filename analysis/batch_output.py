"""Writing a batch's results: the results file and the CSV tables, all or nothing."""

from __future__ import annotations

import os
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Mapping

import numpy as np

if TYPE_CHECKING:  # pragma: no cover
    from .batch import BatchResult

__all__ = ["SavedBatch", "save_batch"]


@dataclass(frozen=True)
class SavedBatch:
    """What :func:`save_batch` wrote: the results file, the other outputs, and counts."""

    out: str
    extra: tuple[str, ...]
    n_files: int
    n_beats: int
    n_accepted: int


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
    recording of the same source is replaced by the new analysis. Every output is written to a
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
        Stored as the file's default settings (for recordings added later).

    Raises
    ------
    ResultsFileError
        When an existing results file cannot be read, or the outputs cannot be written.
    """
    import contextlib
    import json

    from ._batch_task import stored_from_outcome
    from .atomic import atomic_output
    from .store import ResultsFile, load_results, save_results
    from .summary import summary_csv as summary_text
    from .table import BeatTable

    stored = [stored_from_outcome(o) for o in result.succeeded]
    if settings is None:
        from .settings import Settings

        settings = Settings()
    if isinstance(settings, Mapping):
        from .settings import Settings

        settings = Settings.from_dict(settings)
    default_json = json.dumps(settings.to_dict(), sort_keys=True, indent=1, allow_nan=False)
    recordings = stored
    if os.path.exists(out):
        previous = load_results(out, verify_sources=False)
        new_keys = {_source_key(r.source_path) for r in stored}
        recordings = [r for r in previous.recordings if _source_key(r.source_path) not in new_keys] + stored
        default_json = previous.default_settings_json or default_json
    beats = BeatTable.concat([r.beats for r in stored])
    with contextlib.ExitStack() as stack:
        extra = []
        if csv is not None:
            tmp = stack.enter_context(atomic_output(csv))
            with open(tmp, "w", encoding="utf-8", newline="") as fh:
                beats.to_csv(fh)
            extra.append(os.fspath(csv))
        if summary_csv is not None:
            tmp = stack.enter_context(atomic_output(summary_csv))
            with open(tmp, "w", encoding="utf-8", newline="") as fh:
                fh.write(summary_text([r.summary for r in stored]))
            extra.append(os.fspath(summary_csv))
        # The results file goes last: its own save is atomic, and the CSVs replace their
        # targets only after it succeeded.
        save_results(out, ResultsFile(recordings, default_json))
    n_acc = int(np.sum(beats["accepted"])) if len(beats) else 0
    return SavedBatch(os.fspath(out), tuple(extra), len(stored), len(beats), n_acc)


def _source_key(path: str) -> str:
    return os.path.normcase(os.path.abspath(path))
