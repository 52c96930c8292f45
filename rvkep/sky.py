"""When a star can be observed from a site: night (the Sun below a limit, -12 degrees by
default: nautical twilight) and the star above a limiting airmass, on a grid of times
over a run of nights.

Night ``k`` runs from local mean noon of the ``k``-th date after the start to the next
local mean noon (noon at longitude L east falls at 12 h - L/15 h UTC), so a night keeps
its evening's date. Altitudes come from astropy's ``AltAz`` frame without refraction
(the Sun from its built-in ephemeris, topocentric); airmass is sec z (plane-parallel
atmosphere: within 1% of refined formulas below airmass 2.5, e.g. Young 1994). No
file is downloaded: astropy's bundled Earth-rotation tables are used, and UT1 = UTC
past them.

References
----------
.. [1] Young, A. T. (1994), Applied Optics 33, 1108 (air mass and refraction).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rvkep.errors import OptionError
from rvkep.timeconv import offline_astropy, site_location, utc_to_bjd_tdb

__all__ = ["SkyGrid", "observing_grid", "altitudes", "SUN_LIMIT_DEG", "MAX_NIGHTS"]

#: The Sun's altitude below which it is night (nautical twilight), degrees.
SUN_LIMIT_DEG = -12.0
#: Longest window a plan covers (the grid holds every step of every night).
MAX_NIGHTS = 366


@dataclass(frozen=True)
class SkyGrid:
    """Times over a run of nights and what the sky does at each.

    ``utc_jd`` (Julian dates, UTC), ``bjd_tdb`` (toward the target), ``night`` (index of
    the night, 0 = the start date's evening), ``sun_alt`` and ``target_alt`` (degrees),
    ``airmass`` (sec z; inf below the horizon) and ``observable`` (night and airmass
    within the limit) are arrays over the grid; ``night_dates`` gives each night's
    evening date (ISO).
    """

    utc_jd: np.ndarray
    bjd_tdb: np.ndarray
    night: np.ndarray
    night_dates: list[str]
    sun_alt: np.ndarray
    target_alt: np.ndarray
    airmass: np.ndarray
    observable: np.ndarray
    sun_limit: float
    max_airmass: float

    def iso(self, i: int) -> str:
        """The UTC instant of grid point ``i`` (ISO, to the second)."""
        from astropy.time import Time

        with offline_astropy():
            return Time(self.utc_jd[i], format="jd", scale="utc").isot[:19]


def altitudes(utc_jd: np.ndarray, site: tuple[float, float, float], ra_deg: float,
              dec_deg: float) -> tuple[np.ndarray, np.ndarray]:  # fmt: skip
    """Altitudes (degrees, no refraction) of the Sun and of the ICRS target at UTC
    Julian dates ``utc_jd`` from ``site`` (latitude, longitude east, height m).

    Parameters
    ----------
    utc_jd : ndarray
        UTC Julian dates.
    site : (float, float, float)
        Latitude (deg), longitude east (deg), height (m).
    ra_deg, dec_deg : float
        The target's ICRS coordinates (degrees).

    Returns
    -------
    sun, target : ndarray
        Altitudes (degrees).
    """
    from astropy import units as u
    from astropy.coordinates import AltAz, SkyCoord, get_body
    from astropy.time import Time

    with offline_astropy():
        t = Time(np.asarray(utc_jd, float), format="jd", scale="utc")
        where = site_location(site)
        frame = AltAz(obstime=t, location=where)
        sun = get_body("sun", t, location=where, ephemeris="builtin").transform_to(frame)
        star = SkyCoord(ra_deg * u.deg, dec_deg * u.deg, frame="icrs").transform_to(frame)
    return np.asarray(sun.alt.deg, float), np.asarray(star.alt.deg, float)


def observing_grid(
    site: tuple[float, float, float],
    ra_deg: float,
    dec_deg: float,
    start: str,
    nights: int,
    *,
    step_minutes: float = 10.0,
    sun_limit: float = SUN_LIMIT_DEG,
    max_airmass: float = 2.0,
) -> SkyGrid:
    """The grid of candidate times of ``nights`` nights from the evening of ``start``
    (an ISO date), every ``step_minutes``, with the Sun's and the target's altitudes.

    Parameters
    ----------
    site : (float, float, float)
        Latitude (deg), longitude east (deg), height (m).
    ra_deg, dec_deg : float
        The target's ICRS coordinates (degrees).
    start : str
        The first night's date (ISO, local evening).
    nights : int
        Number of nights.
    step_minutes : float, optional
        Spacing of the candidate times.
    sun_limit : float, optional
        The Sun's altitude (degrees) below which it is night.
    max_airmass : float, optional
        The highest airmass observable.

    Returns
    -------
    SkyGrid
        Times (UTC, BJD), night labels and dates, altitudes, airmass and which times are
        observable.

    Raises
    ------
    OptionError
        For a start that is not a date, fewer than 1 or more than :data:`MAX_NIGHTS`
        nights, a step outside 1-120 minutes, a Sun limit above 0 degrees or below -18,
        or an airmass limit below 1.
    """
    from astropy.time import Time

    if not 1 <= nights <= MAX_NIGHTS:
        raise OptionError(f"--nights must lie between 1 and {MAX_NIGHTS}, got {nights}")
    if not 1.0 <= step_minutes <= 120.0:
        raise OptionError(f"the step must lie between 1 and 120 minutes, got {step_minutes:g}")
    if not -18.0 <= sun_limit <= 0.0:
        raise OptionError(f"the Sun's limit must lie between -18 and 0 degrees, got {sun_limit:g}")
    if not max_airmass >= 1.0:
        raise OptionError(f"--max-airmass must be at least 1, got {max_airmass:g}")
    text = start.strip()
    try:
        if len(text) != 10:
            raise ValueError
        with offline_astropy():
            day0 = Time(text, format="iso", scale="utc")
    except ValueError:
        raise OptionError(f"--start {start!r} is not an ISO date (YYYY-MM-DD)") from None
    lon = site[1]
    noon = day0.jd + ((12.0 - lon / 15.0) / 24.0) % 1.0  # local mean noon, UTC
    per_night = int(round(24 * 60 / step_minutes))
    offsets = np.arange(per_night) * step_minutes / 1440.0
    utc = (noon + np.arange(nights)[:, None] + offsets[None, :]).ravel()
    night = np.repeat(np.arange(nights), per_night)
    sun_alt, target_alt = altitudes(utc, site, ra_deg, dec_deg)
    with np.errstate(divide="ignore"):
        airmass = np.where(target_alt > 0, 1.0 / np.sin(np.radians(target_alt)), np.inf)
    observable = (sun_alt < sun_limit) & (airmass <= max_airmass)
    bjd = np.full(utc.size, np.nan)
    if observable.any():
        with offline_astropy():
            bjd[observable] = utc_to_bjd_tdb(Time(utc[observable], format="jd", scale="utc"),
                                             ra_deg, dec_deg, site)  # fmt: skip
    with offline_astropy():
        dates = [d[:10] for d in Time(day0.jd + np.arange(nights), format="jd", scale="utc").iso]
    return SkyGrid(utc, bjd, night, dates, sun_alt, target_alt, airmass, observable,
                   float(sun_limit), float(max_airmass))  # fmt: skip
