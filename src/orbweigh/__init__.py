"""orbweigh: apparent orbits and dynamical masses of visual binary stars."""
from .elements import CampbellElements, campbell_from_thiele_innes, thiele_innes_from_campbell
from .ephemeris import ephemeris
from .errors import FitError, InputError, LogFormatError, OrbweighError
from .kepler import eccentric_anomaly, true_anomaly
from .measurements import MeasurementSet

__version__ = "0.1.0"

__all__ = [
    "CampbellElements", "campbell_from_thiele_innes", "thiele_innes_from_campbell",
    "ephemeris", "eccentric_anomaly", "true_anomaly", "MeasurementSet",
    "OrbweighError", "InputError", "LogFormatError", "FitError", "__version__",
]
