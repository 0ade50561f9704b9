"""Synthetic cells with exact dV/dt and known truth, for the tests and the invented demo; ABF/NWB writers.

The modules below are private to this package; import from here."""


from analysis.synthetic._cells import CellParams, PRESETS, Synthetic, Truth, preset, synthesize
from analysis.synthetic._events import Artefact, DAD, EAD, Pause, SealTrouble, Stretch
from analysis.synthetic._io import write_abf, write_nwb
from analysis.synthetic._model import Bump, RepolarisationShape, BeatTrain, TOP_CRITERION_MV_PER_S, smooth_window
from analysis.synthetic._truth import beat_truth, TRUTH_GRID_POINTS

__all__ = ["Artefact", "BeatTrain", "Bump", "CellParams", "DAD", "EAD", "PRESETS", "Pause", "RepolarisationShape", "SealTrouble", "Stretch", "Synthetic", "TOP_CRITERION_MV_PER_S", "TRUTH_GRID_POINTS", "Truth", "beat_truth", "preset", "smooth_window", "synthesize", "write_abf", "write_nwb"]
