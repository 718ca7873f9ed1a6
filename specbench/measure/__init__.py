"""Measurements with uncertainty on a :class:`~specbench.Spectrum`, and the settings advisor.

numpy/scipy only (no widgets).  The Spectrum methods (``spec.band_power`` ...) are thin
wrappers over the functions here.
"""

from ..estimators._results import register_method as _register_method
from ._advise import Advice, Candidate, advise
from ._bands import band_power, band_rms, differentiate, iec_bands, integrate, noise_floor, octave_bands
from ._results import Measurement, MeasurementError, OctaveBands, Tone, Tones
from ._structure import structure_of
from ._tones import local_floor, tones

__all__ = ["band_power", "band_rms", "noise_floor", "octave_bands", "integrate", "differentiate",
           "iec_bands", "structure_of", "tones", "local_floor", "Measurement", "MeasurementError", "OctaveBands",
           "Tone", "Tones", "advise", "Advice", "Candidate"]

# the Spectrum methods (spec.band_power, ...) call these: specbench.estimators never imports measure
for _name in ("band_power", "band_rms", "noise_floor", "tones", "octave_bands", "integrate", "differentiate"):
    _register_method(_name, globals()[_name])
del _name
