"""Calendar dates to the data's time system: UTC instants as BJD_TDB, with the target's
coordinates and the observing site given, never guessed.

BJD_TDB = JD(TDB) + the light-travel time from the site to the solar-system barycentre
toward the target (Eastman, Siverd & Gaudi 2010), computed with astropy: ``Time`` for
UTC -> TDB (leap seconds bundled with astropy) and ``Time.light_travel_time`` with its
built-in ephemeris (no download). Dates past astropy's bundled Earth-rotation tables
use UT1 = UTC; that moves the site by under half a kilometre, the light time by
microseconds.

The data's own times are BJD_TDB minus an offset (0 for full BJDs, 2,450,000 for the
common reduced form, 2,400,000.5 for MJD-like values...). A full BJD needs no offset;
for any other, the offset must be stated (``--time-offset``), since a 5e4-sized time
can be JD - 2,400,000 or an MJD, half a day apart.

References
----------
.. [1] Eastman, J., Siverd, R. & Gaudi, B. S. (2010), PASP 122, 935.
"""

from __future__ import annotations

import contextlib

import numpy as np

from rvkep.errors import OptionError

__all__ = [
    "looks_like_date",
    "check_request",
    "dates_to_bjd_tdb",
    "parse_site",
    "data_offset",
    "offline_astropy",
    "site_location",
    "utc_to_bjd_tdb",
]


def looks_like_date(text: str) -> bool:
    """True for an ISO calendar date such as ``2026-12-10`` or ``2026-12-10T03:30``.

    Parameters
    ----------
    text : str
        A time as the user wrote it.

    Returns
    -------
    bool
        Whether it reads as a calendar date (not a number).
    """
    text = text.strip()
    return len(text) >= 8 and text[:4].isdigit() and text[4] == "-"


def parse_site(text: str) -> tuple[float, float, float]:
    """``LAT,LON,HEIGHT`` (degrees north, degrees east, metres) checked.

    Parameters
    ----------
    text : str
        The ``--site`` value.

    Returns
    -------
    tuple of float
        Latitude, longitude and height.
    """
    try:
        lat, lon, height = (float(x) for x in text.split(","))
    except ValueError:
        raise OptionError(f"--site must be LAT,LON,HEIGHT (degrees, degrees east, metres), "
                          f"got {text!r}") from None  # fmt: skip
    if not (-90 <= lat <= 90 and -360 <= lon <= 360 and -500 <= height <= 9000):
        raise OptionError(f"--site {text}: latitude within +-90, longitude within +-360, "
                          "height between -500 and 9000 m")  # fmt: skip
    return lat, lon, height


def data_offset(data_time: np.ndarray, given: float | None) -> float:
    """The offset between BJD_TDB and the data's times: ``given``, or 0 when the data
    are full Julian dates (about 2.4e6); anything else must be stated.

    Parameters
    ----------
    data_time : ndarray
        The run's times.
    given : float, optional
        The ``--time-offset`` value.

    Returns
    -------
    float
        BJD_TDB minus the data's times.
    """
    if given is not None:
        return float(given)
    if float(np.median(data_time)) > 2_000_000:
        return 0.0
    raise OptionError("the run's times are not full Julian dates: give --time-offset D "
                      "(the number subtracted from BJD_TDB in your data, e.g. 2450000 or "
                      "2400000.5) to use calendar dates")  # fmt: skip


def check_request(dates: list[str], ra_deg: float | None, dec_deg: float | None,
                  site: tuple[float, float, float] | None) -> None:  # fmt: skip
    """Refuse, in one line, a conversion that lacks the target's coordinates or the
    site (never guessed), has them out of range, or holds a date that is not ISO 8601.

    Parameters
    ----------
    dates : list of str
        The dates asked for (UTC).
    ra_deg, dec_deg : float
        The target's ICRS right ascension and declination (degrees).
    site : tuple of float
        The observatory: latitude (degrees north), longitude (degrees east), height (m).
    """
    if ra_deg is None or dec_deg is None or site is None:
        raise OptionError("calendar dates need the target's coordinates and the site: "
                          "--ra DEG --dec DEG --site LAT,LON,HEIGHT (never guessed)")  # fmt: skip
    if not (0 <= ra_deg < 360 and -90 <= dec_deg <= 90):
        raise OptionError(f"--ra must lie in [0, 360) and --dec in [-90, 90], got {ra_deg:g}, "
                          f"{dec_deg:g}")  # fmt: skip
    bad = next((d for d in dates if not _is_iso(d)), None)
    if bad is not None:
        raise OptionError(f"{bad!r} is not an ISO date (YYYY-MM-DD or YYYY-MM-DDTHH:MM[:SS], "
                          "UTC)")  # fmt: skip


def dates_to_bjd_tdb(dates: list[str], ra_deg: float | None, dec_deg: float | None,
                     site: tuple[float, float, float] | None) -> np.ndarray:  # fmt: skip
    """BJD_TDB of UTC calendar dates (ISO 8601) seen from ``site`` toward (ra, dec).

    Parameters
    ----------
    dates : list of str
        ISO 8601 dates and times, UTC.
    ra_deg, dec_deg : float
        The target's ICRS right ascension and declination (degrees).
    site : tuple of float
        The observatory: latitude (degrees north), longitude (degrees east), height (m).

    Returns
    -------
    ndarray
        BJD_TDB of each date.

    Examples
    --------
    >>> bjd = dates_to_bjd_tdb(["2000-01-01T12:00:00"], 0.0, 90.0, (0.0, 0.0, 0.0))
    >>> round(float(bjd[0] - 2451545.0) * 86400)  # s: TDB - UTC 64.2, light time 191.5
    256
    """
    from astropy.time import Time

    check_request(dates, ra_deg, dec_deg, site)
    with offline_astropy():
        bjd = utc_to_bjd_tdb(Time(list(dates), format="isot", scale="utc"), ra_deg, dec_deg, site)
    if not np.all(np.isfinite(bjd)):  # pragma: no cover - astropy returned nonsense
        raise OptionError("calendar dates could not be converted")
    return np.asarray(bjd, float)


@contextlib.contextmanager
def offline_astropy():
    """astropy without downloads: its bundled Earth-rotation tables, UT1 = UTC past
    them (and no warning about it: the site moves by under half a kilometre)."""
    import warnings

    from astropy.utils import iers

    with (
        iers.conf.set_temp("auto_download", False),
        iers.conf.set_temp("iers_degraded_accuracy", "ignore"),
        warnings.catch_warnings(),
    ):
        warnings.simplefilter("ignore")  # "dubious year", "Tried to get polar motions"
        yield


def site_location(site: tuple[float, float, float]):
    """An astropy ``EarthLocation`` of (latitude deg, longitude deg east, height m).

    Parameters
    ----------
    site : tuple of float
        The observatory: latitude (degrees north), longitude (degrees east), height (m).

    Returns
    -------
    EarthLocation
        The site.
    """
    from astropy import units as u
    from astropy.coordinates import EarthLocation

    lat, lon, height = site
    return EarthLocation.from_geodetic(lon * u.deg, lat * u.deg, height * u.m)


def utc_to_bjd_tdb(t, ra_deg: float, dec_deg: float, site: tuple[float, float, float]):
    """BJD_TDB (array of float) of astropy ``Time`` instants ``t``, seen from ``site``
    toward ICRS (ra, dec); call inside :func:`offline_astropy`.

    Parameters
    ----------
    t : Time
        The instants.
    ra_deg, dec_deg : float
        The target's ICRS right ascension and declination (degrees).
    site : tuple of float
        The observatory: latitude (degrees north), longitude (degrees east), height (m).

    Returns
    -------
    ndarray
        BJD_TDB of each instant.
    """
    from astropy import units as u
    from astropy.coordinates import SkyCoord
    from astropy.time import Time

    target = SkyCoord(ra_deg * u.deg, dec_deg * u.deg, frame="icrs")
    t = Time(t, location=site_location(site))
    ltt = t.light_travel_time(target, kind="barycentric", ephemeris="builtin")
    return np.asarray((t.tdb + ltt).jd, float)


def _is_iso(text: str) -> bool:
    import warnings

    from astropy.time import Time

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # "dubious year": past the leap-second table
            Time(text, format="isot", scale="utc")
    except ValueError:
        return False
    return True
