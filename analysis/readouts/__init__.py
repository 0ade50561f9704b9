"""The numbers behind the app's drawings: cursor readouts and plot data.

The modules below are private to this package; import from here."""


from analysis.readouts._cursors import CursorReadout, readout, readout_samples
from analysis.readouts._plotdata import (
    AlignedBeats,
    LineFit,
    aligned_beats,
    consecutive_mask,
    dvdt_window_of,
    fit_line,
    phase_plane,
    poincare_pairs,
    recording_times_s,
    take_off_window_ms,
)

__all__ = ["AlignedBeats", "CursorReadout", "LineFit", "aligned_beats", "consecutive_mask", "dvdt_window_of", "fit_line", "phase_plane", "poincare_pairs", "readout", "readout_samples", "recording_times_s", "take_off_window_ms"]
