"""Data layer: the :class:`Signal` container, file loaders, sample-rate inference from
timestamps, and the built-in demo scenarios.

Importing this package registers a converter so that every estimator also accepts
pandas and xarray objects; pandas and xarray themselves are imported only when such an
object is converted.
"""

from ..estimators._input import register_converter
from ._demos import demo, demos
from ._frames import convert as _convert
from ._frames import from_pandas, from_xarray
from ._load import load
from ._signal import Signal
from ._timebase import DEFAULT_MAX_JITTER
from ._truth import Truth

__all__ = ["Signal", "load", "demo", "demos", "from_pandas", "from_xarray", "Truth",
           "DEFAULT_MAX_JITTER"]

register_converter(_convert)
