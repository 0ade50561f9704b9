"""Analysis settings: frozen dataclasses with units, defaults, bounds and sources; TOML in and out.

The modules below are private to this package; import from here."""


from analysis.settings._fields import FieldInfo, Section, range_text, setting, section
from analysis.settings._sections import PreprocessSettings, DetectionSettings, MeasurementSettings, QualitySettings, SummarySettings, TOP_METHODS, DDR_METHODS, APD_REFERENCES, UPSTROKE_TIME_METHODS, DVDT_MAX_METHODS
from analysis.settings._settings import SCHEMA_VERSION, Settings, describe
from analysis.settings._toml import load_settings, save_settings

__all__ = ["APD_REFERENCES", "DDR_METHODS", "DVDT_MAX_METHODS", "DetectionSettings", "FieldInfo", "MeasurementSettings", "PreprocessSettings", "QualitySettings", "SCHEMA_VERSION", "Section", "Settings", "SummarySettings", "TOP_METHODS", "UPSTROKE_TIME_METHODS", "describe", "load_settings", "range_text", "save_settings", "section", "setting"]
