"""The HDF5 results file (documented layout, schema version) and all-or-nothing output files.

The modules below are private to this package; import from here."""


from analysis.results._atomic import (
    WriteError,
    atomic_output,
    atomic_outputs,
    fsync_folder,
    output_mode,
    remove_stale_temps,
    temp_prefix,
    write_text_atomic,
)
from analysis.results._facts import RecordingFacts, facts_values
from analysis.results._records import LAZY_FIELDS, ResultsFile, StoredRecording, provenance_now
from analysis.results._store import FORMAT_NAME, SCHEMA_VERSION, changed_source_warning, load_results, save_results
from analysis.results._lock import DEFAULT_WAIT_S, ResultsBusyError, holder_of, lock_path, results_lock
from analysis.results._study import read_study, write_study

__all__ = ["DEFAULT_WAIT_S", "FORMAT_NAME", "LAZY_FIELDS", "RecordingFacts", "ResultsBusyError", "ResultsFile", "SCHEMA_VERSION", "StoredRecording", "WriteError", "atomic_output", "atomic_outputs", "changed_source_warning", "facts_values", "fsync_folder", "holder_of", "load_results", "lock_path", "output_mode", "provenance_now", "read_study", "remove_stale_temps", "results_lock", "save_results", "temp_prefix", "write_study", "write_text_atomic"]
