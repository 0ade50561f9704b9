"""The HDF5 results file (documented layout, schema version) and all-or-nothing output files.

The modules below are private to this package; import from here."""


from analysis.results._atomic import (
    WriteError,
    atomic_output,
    atomic_outputs,
    fsync_folder,
    remove_stale_temps,
    temp_prefix,
    write_text_atomic,
)
from analysis.results._facts import RecordingFacts, facts_values
from analysis.results._study import read_study, write_study
from analysis.results._store import (
    FORMAT_NAME,
    SCHEMA_VERSION,
    ResultsFile,
    StoredRecording,
    load_results,
    provenance_now,
    save_results,
)

__all__ = ["FORMAT_NAME", "RecordingFacts", "ResultsFile", "SCHEMA_VERSION", "StoredRecording", "WriteError", "atomic_output", "atomic_outputs", "facts_values", "fsync_folder", "load_results", "provenance_now", "read_study", "remove_stale_temps", "save_results", "temp_prefix", "write_study", "write_text_atomic"]
