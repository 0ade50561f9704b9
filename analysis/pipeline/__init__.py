"""analyze(): a recording in, a measured and flagged beat table out, chunked over the cores.

The modules below are private to this package; import from here."""


from analysis.pipeline._analyze import (
    AnalysisResult,
    analyze,
    choose_channel,
    flag_and_reject,
    looks_like_membrane_potential,
)

__all__ = ["AnalysisResult", "analyze", "choose_channel", "flag_and_reject", "looks_like_membrane_potential"]
