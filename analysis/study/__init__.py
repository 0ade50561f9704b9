"""A study: cells x conditions (and groups), its per cell x condition table and the comparison.

The layout (which file is which cell, condition and group) is :class:`StudyLayout`; the table
with one row per cell x condition is :func:`cell_condition_table`; each condition against the
baseline, cell by cell and per group with paired tests, is :func:`compare`.

The modules below are private to this package; import from here."""

from analysis.study._compare import COMPARISON_COLUMNS, compare
from analysis.study._table import (
    VARIABILITY,
    cell_condition_table,
    condition_means,
    group_values,
    parameter_columns,
    table_csv,
)
from analysis.study_layout import StudyEntry, StudyError, StudyLayout

__all__ = ["COMPARISON_COLUMNS", "VARIABILITY", "StudyEntry", "StudyError", "StudyLayout", "cell_condition_table", "compare", "condition_means", "group_values", "parameter_columns", "table_csv"]
