"""analyze(): a recording in, a measured and flagged beat table out, chunked over the cores.

The modules below are private to this package; import from here."""


from analysis.pipeline._analyze import AnalysisResult, analyze, flag_and_reject
from analysis.pipeline._channel import choose_channel, looks_like_membrane_potential
from analysis.pipeline._stages import STAGES, stage_of_change, stage_of_field
from analysis.pipeline._sweep import MEASURING_QUALITY_FIELDS

__all__ = [
    "STAGES", "AnalysisResult", "MEASURING_QUALITY_FIELDS", "analyze", "choose_channel", "flag_and_reject",
    "looks_like_membrane_potential", "stage_of_change", "stage_of_field",
]
