"""Calendar dates to BJD_TDB (rvkep/timeconv.py), against an independent low-precision
computation: TDB - UTC from the leap-second count and the Roemer delay from the Sun's
position by Meeus's formulas."""

import math

import numpy as np
import pytest

from rvkep.errors import OptionError
from rvkep.timeconv import data_offset, dates_to_bjd_tdb, parse_site

AU_LIGHT_S = 499.004784  # light time for one astronomical unit, s (IAU 2012; from memory)


def meeus_earth_equatorial(jd: float) -> np.ndarray:
    """The Earth's heliocentric position (AU, equatorial, mean equinox of date) from the
    Sun's geocentric one: Meeus 1998, Astronomical Algorithms, ch. 25, low accuracy
    (0.01 deg) (from memory)."""
    T = (jd - 2451545.0) / 36525.0
    L0 = math.radians(280.46646 + 36000.76983 * T)
    M = math.radians(357.52911 + 35999.05029 * T)
    e = 0.016708634 - 0.000042037 * T
    C = math.radians((1.914602 - 0.004817 * T) * math.sin(M) + 0.019993 * math.sin(2 * M)
                     + 0.000289 * math.sin(3 * M))  # fmt: skip
    lon = L0 + C
    R = 1.000001018 * (1 - e * e) / (1 + e * math.cos(M + C))
    eps = math.radians(23.439291 - 0.0130042 * T)
    sun = R * np.array(
        [math.cos(lon), math.sin(lon) * math.cos(eps), math.sin(lon) * math.sin(eps)]
    )
    return -sun


@pytest.mark.parametrize("date,ra,dec", [
    ("2026-12-10T03:30:00", 10.0, 20.0),
    ("2027-03-21T00:00:00", 250.0, -45.0),
    ("2026-06-30T22:10:00", 120.0, 60.0),
    ("2030-09-01T12:00:00", 300.0, 5.0),
])  # fmt: skip
def test_bjd_tdb_against_leap_seconds_and_the_roemer_delay(date, ra, dec):
    import warnings

    from astropy.time import Time

    bjd = dates_to_bjd_tdb([date], ra, dec, (-24.6, -70.4, 2600.0))[0]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # "dubious year": past the leap-second table
        jd_utc = Time(date, format="isot", scale="utc").jd
    # TT - UTC = 32.184 s + 37 leap seconds since 2017 (IERS Bulletin C; common practice,
    # no source); TDB - TT stays below 2 ms
    tdb_minus_utc = 32.184 + 37.0
    n = np.array([math.cos(math.radians(dec)) * math.cos(math.radians(ra)),
                  math.cos(math.radians(dec)) * math.sin(math.radians(ra)),
                  math.sin(math.radians(dec))])  # fmt: skip
    roemer = float(meeus_earth_equatorial(jd_utc) @ n) * AU_LIGHT_S
    got = (bjd - jd_utc) * 86400.0
    # the Sun is not the barycentre (up to 0.01 AU, 5 s) and Meeus's formulas are good
    # to 0.01 deg; a wrong time scale (69 s) or sign (hundreds of s) cannot pass
    assert got == pytest.approx(tdb_minus_utc + roemer, abs=8.0)


def test_refusals_and_offsets():
    with pytest.raises(OptionError, match="never guessed"):
        dates_to_bjd_tdb(["2026-12-10"], None, 10.0, (0.0, 0.0, 0.0))
    with pytest.raises(OptionError, match="not an ISO date"):
        dates_to_bjd_tdb(["2026-14-10"], 1.0, 10.0, (0.0, 0.0, 0.0))
    with pytest.raises(OptionError, match="LAT,LON,HEIGHT"):
        parse_site("10,20")
    assert data_offset(np.array([2459000.5, 2459100.0]), None) == 0.0
    assert data_offset(np.array([9000.5]), 2450000.0) == 2450000.0
    with pytest.raises(OptionError, match="--time-offset"):
        data_offset(np.array([59000.5]), None)  # MJD or JD - 2400000: not guessed
