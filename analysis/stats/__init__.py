"""Per-condition summaries: means, beat-to-beat variability and the ensemble-averaged beat.

The modules below are private to this package; import from here."""


from analysis.stats._ensemble import GROUP_BEATS, Ensemble, RobustAverage, ensemble_average, measure_cycle
from analysis.stats._summary import PARAMETERS, SUMMARY_COLUMNS, SUMMARY_DECIMALS, Summary, eligible_mask, suggest_steady_state, summarize, summary_columns, summary_csv
from analysis.stats._variability import CellTypeRule, cell_type_hint, coefficient_of_variation_pct, linear_relation, poincare_sd1_sd2, rmssd, sdnn, successive_pairs, stv

__all__ = ["CellTypeRule", "Ensemble", "GROUP_BEATS", "RobustAverage", "PARAMETERS", "SUMMARY_COLUMNS", "SUMMARY_DECIMALS", "Summary", "cell_type_hint", "coefficient_of_variation_pct", "eligible_mask", "ensemble_average", "linear_relation", "measure_cycle", "poincare_sd1_sd2", "rmssd", "sdnn", "stv", "successive_pairs", "suggest_steady_state", "summarize", "summary_columns", "summary_csv"]
