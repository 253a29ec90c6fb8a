"""The physical constants of orbweigh, as the IAU defines them: one place for them.

Written as numbers rather than taken from astropy.constants, so that a mass costs no
import of astropy's units (0.13 s); tests/test_masses.py checks them against
astropy.constants.
"""
from __future__ import annotations

import math

__all__ = ["AU_M", "AU_KM", "GM_SUN_M3_S2", "GM_SUN_KM3_S2", "DAY_S", "JULIAN_YEAR_D",
           "JULIAN_YEAR_S", "KMS_PER_AU_YR", "THIRD_LAW_FACTOR"]

AU_M = 149_597_870_700.0        #: astronomical unit [m], exact (IAU 2012 Resolution B2)
AU_KM = AU_M / 1e3
GM_SUN_M3_S2 = 1.3271244e20     #: nominal solar mass parameter (IAU 2015 Resolution B3)
GM_SUN_KM3_S2 = GM_SUN_M3_S2 / 1e9
DAY_S = 86400.0                 #: the day of the Julian calendar [s]
JULIAN_YEAR_D = 365.25          #: Julian year [d], orbweigh's internal unit of time
JULIAN_YEAR_S = JULIAN_YEAR_D * DAY_S
#: 1 au per Julian year in km/s.
KMS_PER_AU_YR = AU_KM / JULIAN_YEAR_S
#: 4 pi^2 au^3 / (GM_sun yr^2): the third law's factor in solar units, Julian year.
THIRD_LAW_FACTOR = 4.0 * math.pi**2 * AU_M**3 / (GM_SUN_M3_S2 * JULIAN_YEAR_S**2)
