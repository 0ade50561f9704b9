"""Many recordings at once: a local process pool or a Dask cluster, merged into one results file.

The modules below are private to this package; import from here."""


from analysis.batch._batch import analyze_file, make_tasks, run_batch
from analysis.batch._find import find_recordings
from analysis.batch._output import SavedBatch, prepare_existing, save_batch
from analysis.batch._task import run_task, stored_from_outcome
from analysis.batch._types import (
    BatchCancelled,
    BatchResult,
    ClusterError,
    FileOutcome,
    FileTask,
)

__all__ = ["BatchCancelled", "BatchResult", "ClusterError", "FileOutcome", "FileTask", "SavedBatch", "analyze_file", "find_recordings", "make_tasks", "prepare_existing", "run_batch", "run_task", "save_batch", "stored_from_outcome"]
