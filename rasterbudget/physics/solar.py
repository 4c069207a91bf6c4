"""Sun–Earth geometry: distance, declination, solar time, zenith and incidence angles.

Angles are in radians except longitude, which is in degrees east (positive east of
Greenwich) because that is how coordinates arrive from a raster's CRS. Day of year runs
from 1 (1 January) to 365 or 366.

Sources
-------
- Allen, R. G., Pereira, L. S., Raes, D. and Smith, M. (1998). Crop evapotranspiration:
  guidelines for computing crop water requirements. FAO Irrigation and Drainage Paper 56.
  FAO, Rome.
- Duffie, J. A. and Beckman, W. A. (2013). Solar Engineering of Thermal Processes,
  4th edition. Wiley, Hoboken.
- Allen, R. G., Trezza, R. and Tasumi, M. (2006). Analytical integrated functions for
  daily solar radiation on slopes. Agricultural and Forest Meteorology 139, 55–73.
- Reda, I. and Andreas, A. (2004). Solar position algorithm for solar radiation
  applications. Solar Energy 76, 577–589 (NREL SPA), through pvlib (Anderson et al. 2023,
  Journal of Open Source Software 8(92), 5994).

FAO-56's declination (eq. 24) and seasonal correction (eq. 32) serve the daily sums and the
standardized reference ET, whose worked examples are written with them; the instantaneous
overpass geometry uses :func:`solar_ephemeris` (NREL SPA), because FAO-56's forms put the sun
up to 1.4° away from its true position.
"""

from datetime import UTC, datetime, timedelta
from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike

from .constants import FAO_SOLAR_CONSTANT

__all__ = [
    "SolarEphemeris",
    "cos_incidence",
    "cos_incidence_on_normal",
    "cos_solar_zenith",
    "daylight_hours",
    "extraterrestrial_radiation_daily",
    "hour_angle",
    "inverse_relative_distance",
    "local_hour_angle",
    "local_solar_day_of_year",
    "seasonal_correction",
    "slope_aspect",
    "solar_declination",
    "solar_ephemeris",
    "sun_direction",
    "sunset_hour_angle",
    "surface_normal",
    "time_from_sun_angles",
]


class SolarEphemeris(NamedTuple):
    """Where the sun is at one instant, for the whole scene (see :func:`solar_ephemeris`)."""

    declination: float
    """Solar declination, :math:`\\delta`. [rad]"""
    greenwich_hour_angle: float
    """Hour angle at longitude 0, zero at solar noon there, wrapped to [-π, π]; add the
    longitude for the local hour angle (:func:`local_hour_angle`). [rad]"""
    inverse_distance: float
    """Inverse squared Earth–Sun distance :math:`(1\\,\\mathrm{au}/R)^2`, the factor of the
    solar constant (the quantity FAO-56 eq. 23 approximates). [-]"""
    equation_of_time: float
    """Apparent minus mean solar time. [min]"""
    zenith: float
    """Zenith angle at the reference place, without refraction. [degrees]"""
    azimuth: float
    """Azimuth at the reference place, clockwise from north. [degrees]"""


def solar_ephemeris(
    time_utc: datetime, latitude: float, longitude: float, elevation: float = 0.0
) -> SolarEphemeris:
    r"""The sun's declination, hour angle and distance at one instant, by NREL's SPA.

    Parameters
    ----------
    time_utc : datetime.datetime
        The instant, timezone-aware (any zone) or naive UTC.
    latitude : float
        Latitude of the reference place (a scene's centre), positive north. [degrees]
    longitude : float
        Longitude of the reference place, positive east. [degrees]
    elevation : float, default 0
        Height of the reference place above sea level (for the parallax). [m]

    Returns
    -------
    SolarEphemeris

    Notes
    -----
    The solar position algorithm of Reda & Andreas (2004) [1]_, through
    :func:`pvlib.solarposition.get_solarposition` (``method="nrel_numpy"``, ΔT from the
    date) and :func:`pvlib.solarposition.nrel_earthsun_distance`. SPA gives the zenith
    :math:`\theta` and azimuth :math:`\Gamma` at the reference place; rotating the unit
    vector towards the sun, :math:`(s_e, s_n, s_u) = (\sin\theta \sin\Gamma,
    \sin\theta\cos\Gamma, \cos\theta)`, from horizon to equatorial axes (the inverse of
    :func:`sun_direction`) gives the declination and the local hour angle exactly:

    .. math::

        \sin\delta = s_n \cos\varphi + s_u \sin\varphi, \qquad
        \omega = \operatorname{atan2}(-s_e,\; s_u \cos\varphi - s_n \sin\varphi)

    and :math:`\omega - \lambda` is the hour angle at Greenwich. Elsewhere in a scene the
    hour angle is that plus the pixel's longitude: the declination and hour angle seen from
    another place of the scene differ from these only by the parallax of the sun, at most
    8.8″ (0.0024°).

    References
    ----------
    .. [1] Reda, I. and Andreas, A. (2004). Solar position algorithm for solar radiation
       applications. Solar Energy 76, 577–589.
    """
    import pandas as pd  # pvlib's interface; both imported here, once per scene
    from pvlib.solarposition import get_solarposition, nrel_earthsun_distance

    stamp = pd.Timestamp(time_utc)
    stamp = stamp.tz_localize("UTC") if stamp.tzinfo is None else stamp.tz_convert("UTC")
    times = pd.DatetimeIndex([stamp])
    position = get_solarposition(
        times, latitude, longitude, altitude=elevation, method="nrel_numpy"
    ).iloc[0]
    distance = float(nrel_earthsun_distance(times).iloc[0])  # [au]
    zenith, azimuth = np.radians(position["zenith"]), np.radians(position["azimuth"])
    east = np.sin(zenith) * np.sin(azimuth)
    north = np.sin(zenith) * np.cos(azimuth)
    up = np.cos(zenith)
    phi = np.radians(latitude)
    declination = np.arcsin(np.clip(north * np.cos(phi) + up * np.sin(phi), -1.0, 1.0))
    omega = np.arctan2(-east, up * np.cos(phi) - north * np.sin(phi))
    greenwich = omega - np.radians(longitude)
    return SolarEphemeris(
        declination=float(declination),
        greenwich_hour_angle=float(greenwich - 2.0 * np.pi * np.rint(greenwich / (2.0 * np.pi))),
        inverse_distance=1.0 / distance**2,
        equation_of_time=float(position["equation_of_time"]),
        zenith=float(position["zenith"]),
        azimuth=float(position["azimuth"]),
    )


def time_from_sun_angles(
    date: datetime,
    latitude: float,
    longitude: float,
    sun_elevation: float,
    sun_azimuth: float,
) -> tuple[datetime, float]:
    r"""The instant of a day at which the sun stood at the given elevation and azimuth.

    For products whose metadata give the sun's angles but not the acquisition time.

    Parameters
    ----------
    date : datetime.datetime or datetime.date
        The UTC day of the acquisition (its time of day, if any, is ignored).
    latitude, longitude : float
        The place the angles refer to (a scene's centre), positive north and east. [degrees]
    sun_elevation : float
        Sun elevation above the horizon, without refraction. [degrees]
    sun_azimuth : float
        Sun azimuth, clockwise from north. [degrees]

    Returns
    -------
    time : datetime.datetime
        The UTC instant (timezone-aware) whose NREL SPA sun direction at the place is closest to
        the given one, to about a second.
    mismatch : float
        The angle between the given and the solved sun directions. A few hundredths of a degree
        when the angles are the place's own; more when they refer elsewhere (the centre of a full
        scene for a subset: about 0.25 degrees of sun per 0.25 degrees of longitude). [degrees]

    Notes
    -----
    The day's SPA positions (:func:`pvlib.solarposition.get_solarposition`, Reda & Andreas
    2004) are sampled every 5 minutes; the closest sample is refined by a bounded scalar search
    (:func:`scipy.optimize.minimize_scalar`) on the great-circle angle between the two sun
    directions. Elevation and azimuth together fix one instant of the day: elevation alone has
    a morning and an afternoon solution.
    """
    import pandas as pd
    from pvlib.solarposition import get_solarposition
    from scipy.optimize import minimize_scalar

    day = pd.Timestamp(date.year, date.month, date.day, tz="UTC")
    wanted = _unit_vector(np.radians(sun_elevation), np.radians(sun_azimuth))

    def mismatch(seconds) -> np.ndarray:
        times = pd.DatetimeIndex(day + pd.to_timedelta(np.atleast_1d(seconds), unit="s"))
        position = get_solarposition(times, latitude, longitude, method="nrel_numpy")
        got = _unit_vector(
            np.radians(90.0 - position["zenith"].to_numpy()),
            np.radians(position["azimuth"].to_numpy()),
        )
        cosine = np.clip(np.tensordot(wanted, got, axes=(0, 0)), -1.0, 1.0)
        return np.degrees(np.arccos(cosine))

    step = 300.0  # [s]
    samples = np.arange(0.0, 86400.0 + step, step)
    best = samples[int(np.argmin(mismatch(samples)))]
    refined = minimize_scalar(
        lambda t: float(mismatch(t)[0]),
        bounds=(max(best - step, 0.0), min(best + step, 86400.0)),
        method="bounded",
        options={"xatol": 0.5},
    )
    instant = (day + pd.Timedelta(seconds=round(float(refined.x)))).to_pydatetime()
    return instant, float(refined.fun)


def _unit_vector(elevation: np.ndarray, azimuth: np.ndarray) -> np.ndarray:
    """East, north, up components of directions given by elevation and azimuth. [-]"""
    return np.array(
        [
            np.cos(elevation) * np.sin(azimuth),
            np.cos(elevation) * np.cos(azimuth),
            np.sin(elevation),
        ]
    )


def local_hour_angle(greenwich_hour_angle: ArrayLike, longitude: ArrayLike) -> np.ndarray | float:
    r"""Hour angle at a longitude from the hour angle at Greenwich.

    Parameters
    ----------
    greenwich_hour_angle : array_like
        Hour angle at longitude 0 (:attr:`SolarEphemeris.greenwich_hour_angle`). [rad]
    longitude : array_like
        Longitude, positive east. [degrees]

    Returns
    -------
    numpy.ndarray or float
        :math:`\omega = \omega_G + \lambda`, negative in the morning; not wrapped (every
        trigonometric function of it is unchanged by a turn). [rad]
    """
    return greenwich_hour_angle + np.radians(longitude)


def local_solar_day_of_year(time_utc: datetime, longitude: float) -> int:
    """Day of the year of the local mean solar date at a longitude.

    Parameters
    ----------
    time_utc : datetime.datetime
        The instant, timezone-aware or naive UTC.
    longitude : float
        Longitude, positive east. [degrees]

    Returns
    -------
    int
        Day of the year (1 to 366) of the date at ``time_utc + longitude / 15`` hours: the
        day a daily sum around a morning overpass belongs to, which the UTC date is not
        everywhere (a 10:30 overpass at 170° E is at 22:40 UTC the day before).
    """
    if time_utc.tzinfo is not None:
        time_utc = time_utc.astimezone(UTC).replace(tzinfo=None)
    return (time_utc + timedelta(hours=longitude / 15.0)).timetuple().tm_yday


def inverse_relative_distance(day_of_year: ArrayLike) -> np.ndarray | float:
    r"""Inverse relative distance Earth–Sun.

    Parameters
    ----------
    day_of_year : array_like
        Day of the year, 1 to 365 or 366. [-]

    Returns
    -------
    numpy.ndarray or float
        Inverse relative distance Earth–Sun, :math:`d_r`. [-]

    Notes
    -----
    FAO-56 eq. 23 [1]_:

    .. math:: d_r = 1 + 0.033 \cos\left(\frac{2\pi}{365} J\right)

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eq. 23.
    """
    return 1.0 + 0.033 * np.cos((2.0 * np.pi / 365.0) * day_of_year)  # FAO-56 eq. 23


def solar_declination(day_of_year: ArrayLike) -> np.ndarray | float:
    r"""Solar declination.

    Parameters
    ----------
    day_of_year : array_like
        Day of the year, 1 to 365 or 366. [-]

    Returns
    -------
    numpy.ndarray or float
        Solar declination, :math:`\delta`. [rad]

    Notes
    -----
    FAO-56 eq. 24 [1]_:

    .. math:: \delta = 0.409 \sin\left(\frac{2\pi}{365} J - 1.39\right)

    This simple form departs from an ephemeris declination by up to about 1.5° (0.026 rad,
    in October, against Spencer's 1971 series in this package's tests); at a zenith angle
    of 60° that changes :math:`\cos\theta_z` by up to about 2 %.

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eq. 24.
    """
    return 0.409 * np.sin((2.0 * np.pi / 365.0) * day_of_year - 1.39)  # FAO-56 eq. 24


def seasonal_correction(day_of_year: ArrayLike) -> np.ndarray | float:
    r"""Seasonal correction for solar time (equation of time).

    Parameters
    ----------
    day_of_year : array_like
        Day of the year, 1 to 365 or 366. [-]

    Returns
    -------
    numpy.ndarray or float
        Seasonal correction, :math:`S_c`; add it to clock time to get solar time. [h]

    Notes
    -----
    FAO-56 eqs. 32–33 [1]_:

    .. math::

        b = \frac{2\pi (J - 81)}{364}

        S_c = 0.1645 \sin 2b - 0.1255 \cos b - 0.025 \sin b

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eqs. 32 and 33.
    """
    b = 2.0 * np.pi * (day_of_year - 81.0) / 364.0  # FAO-56 eq. 33
    return 0.1645 * np.sin(2.0 * b) - 0.1255 * np.cos(b) - 0.025 * np.sin(b)  # FAO-56 eq. 32


def hour_angle(
    utc_hour: ArrayLike, longitude: ArrayLike, day_of_year: ArrayLike
) -> np.ndarray | float:
    r"""Solar hour angle from UTC time.

    Parameters
    ----------
    utc_hour : array_like
        Time of day in UTC, fractional hours since midnight (e.g. 10.5 for 10:30 UTC). [h]
    longitude : array_like
        Longitude, positive east of Greenwich. [degrees]
    day_of_year : array_like
        Day of the year, 1 to 365 or 366. [-]

    Returns
    -------
    numpy.ndarray or float
        Hour angle :math:`\omega`, zero at solar noon, negative in the morning and positive
        in the afternoon, wrapped to :math:`[-\pi, \pi]`. [rad]

    Notes
    -----
    FAO-56 eq. 31 [1]_ reads

    .. math:: \omega = \frac{\pi}{12}\left[\left(t + 0.06667 (L_z - L_m) + S_c\right) - 12\right]

    with :math:`L_z` the longitude of the centre of the time zone and :math:`L_m` the
    longitude of the site, both in degrees *west* of Greenwich. For UTC clock time
    :math:`L_z = 0`, and with an east-positive longitude :math:`\lambda = -L_m` the term
    :math:`0.06667 (L_z - L_m)` becomes :math:`\lambda / 15` (0.06667 being 1/15
    rounded), so this function computes the
    equivalent form

    .. math::

        \omega = \frac{\pi}{12}\left[\left(t_{UTC} + \frac{\lambda}{15} + S_c\right) - 12\right]

    with :math:`S_c` from :func:`seasonal_correction`. Values outside :math:`[-\pi, \pi]`
    (UTC date differing from the local date) are shifted by :math:`2\pi`, which changes no
    trigonometric function of :math:`\omega`.

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eqs. 31–33.
    """
    solar_time = utc_hour + longitude / 15.0 + seasonal_correction(day_of_year)
    omega = np.pi / 12.0 * (solar_time - 12.0)  # FAO-56 eq. 31 with Lz = 0, Lm = -longitude
    return omega - 2.0 * np.pi * np.rint(omega / (2.0 * np.pi))  # exact no-op inside [-pi, pi]


def cos_solar_zenith(
    latitude: ArrayLike, declination: ArrayLike, hour_angle: ArrayLike
) -> np.ndarray | float:
    r"""Cosine of the solar zenith angle (incidence on a horizontal surface).

    Parameters
    ----------
    latitude : array_like
        Latitude, positive north. [rad]
    declination : array_like
        Solar declination, see :func:`solar_declination`. [rad]
    hour_angle : array_like
        Solar hour angle, see :func:`hour_angle`. [rad]

    Returns
    -------
    numpy.ndarray or float
        :math:`\cos\theta_z`; negative when the sun is below the horizon (not clipped). [-]

    Notes
    -----
    Duffie & Beckman (2013) eq. 1.6.5 [2]_, the integrand of FAO-56 eq. 28 [1]_:

    .. math:: \cos\theta_z = \cos\varphi \cos\delta \cos\omega + \sin\varphi \sin\delta

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eq. 28.
    .. [2] Duffie and Beckman (2013), Solar Engineering of Thermal Processes, eq. 1.6.5.
    """
    return (  # Duffie & Beckman (2013) eq. 1.6.5
        np.cos(declination) * np.cos(latitude) * np.cos(hour_angle)
        + np.sin(declination) * np.sin(latitude)
    )


def cos_incidence(
    latitude: ArrayLike,
    declination: ArrayLike,
    hour_angle: ArrayLike,
    slope: ArrayLike,
    aspect: ArrayLike,
) -> np.ndarray | float:
    r"""Cosine of the angle of incidence of direct sunlight on a sloping surface.

    Parameters
    ----------
    latitude : array_like
        Latitude, positive north. [rad]
    declination : array_like
        Solar declination, see :func:`solar_declination`. [rad]
    hour_angle : array_like
        Solar hour angle, see :func:`hour_angle`. [rad]
    slope : array_like
        Surface slope from the horizontal, 0 for flat ground. [rad]
    aspect : array_like
        Direction the slope faces (downslope), clockwise from north: 0 north,
        :math:`\pi/2` east, :math:`\pi` south, :math:`3\pi/2` west. [rad]

    Returns
    -------
    numpy.ndarray or float
        :math:`\cos\theta`; negative when the sun is behind the slope or below the horizon
        (not clipped). [-]

    Notes
    -----
    Duffie & Beckman (2013) eq. 1.6.2 [1]_, as used for terrain by Allen, Trezza & Tasumi
    (2006, eq. 7) [2]_ (equation number from memory):

    .. math::

        \cos\theta = \sin\delta \sin\varphi \cos\beta
                   - \sin\delta \cos\varphi \sin\beta \cos\gamma
                   + \cos\delta \cos\varphi \cos\beta \cos\omega
                   + \cos\delta \sin\varphi \sin\beta \cos\gamma \cos\omega
                   + \cos\delta \sin\beta \sin\gamma \sin\omega

    with slope :math:`\beta` and the surface azimuth :math:`\gamma` of Duffie & Beckman
    (zero facing south, west positive, east negative), here :math:`\gamma = a - \pi` for
    the clockwise-from-north aspect :math:`a`. For :math:`\beta = 0` it reduces to
    :func:`cos_solar_zenith`.

    References
    ----------
    .. [1] Duffie and Beckman (2013), Solar Engineering of Thermal Processes, eq. 1.6.2.
    .. [2] Allen, Trezza and Tasumi (2006), Agricultural and Forest Meteorology 139, 55–73.
    """
    gamma = aspect - np.pi  # clockwise from north -> D&B surface azimuth (0 south, west +)
    sin_d, cos_d = np.sin(declination), np.cos(declination)
    sin_p, cos_p = np.sin(latitude), np.cos(latitude)
    sin_b, cos_b = np.sin(slope), np.cos(slope)
    sin_g, cos_g = np.sin(gamma), np.cos(gamma)
    sin_w, cos_w = np.sin(hour_angle), np.cos(hour_angle)
    return (  # Duffie & Beckman (2013) eq. 1.6.2
        sin_d * sin_p * cos_b
        - sin_d * cos_p * sin_b * cos_g
        + cos_d * cos_p * cos_b * cos_w
        + cos_d * sin_p * sin_b * cos_g * cos_w
        + cos_d * sin_b * sin_g * sin_w
    )


def sun_direction(
    latitude: ArrayLike, declination: ArrayLike, hour_angle: ArrayLike
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    r"""Unit vector towards the sun in local east, north, up components.

    Parameters
    ----------
    latitude : array_like
        Latitude, positive north. [rad]
    declination : array_like
        Solar declination, see :func:`solar_declination`. [rad]
    hour_angle : array_like
        Solar hour angle, negative before solar noon, see :func:`hour_angle`. [rad]

    Returns
    -------
    east, north, up : numpy.ndarray
        Components of the unit vector; ``up`` is :math:`\cos\theta_z` of
        :func:`cos_solar_zenith`. [-]

    Notes
    -----
    The horizon-coordinate form of the sun's position (e.g. Duffie & Beckman 2013, sec. 1.6):

    .. math::

        s_e = -\cos\delta \sin\omega, \quad
        s_n = \sin\delta \cos\varphi - \cos\delta \sin\varphi \cos\omega, \quad
        s_u = \sin\delta \sin\varphi + \cos\delta \cos\varphi \cos\omega

    Its dot product with a surface's unit normal (:func:`surface_normal`) is Duffie & Beckman's
    eq. 1.6.2 term by term (:func:`cos_incidence`), without the trigonometry of slope and aspect.
    """
    sin_d, cos_d = np.sin(declination), np.cos(declination)
    sin_p, cos_p = np.sin(latitude), np.cos(latitude)
    sin_w, cos_w = np.sin(hour_angle), np.cos(hour_angle)
    return (
        -cos_d * sin_w,
        sin_d * cos_p - cos_d * sin_p * cos_w,
        sin_d * sin_p + cos_d * cos_p * cos_w,
    )


def surface_normal(
    elevation: ArrayLike, pixel_width: float, pixel_height: float
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    r"""Unit upward normal of gridded terrain, in east, north, up components.

    Parameters
    ----------
    elevation : array_like
        2-D elevation grid, row 0 along the north edge (north-up raster layout). [m]
    pixel_width, pixel_height : float
        Pixel size east–west and north–south, positive. [m]

    Returns
    -------
    east, north, up : numpy.ndarray
        Components of the unit normal :math:`(-\partial z/\partial x, -\partial z/\partial y, 1)
        / \sqrt{1 + |\nabla z|^2}`; equal to :math:`(\sin\beta \sin a, \sin\beta \cos a,
        \cos\beta)` with the slope and aspect of :func:`slope_aspect` (same central
        differences, so the same block-by-block invariance with a one-pixel halo). [-]
    """
    dz_drow, dz_dcol = np.gradient(
        np.asarray(elevation, dtype=np.float64), pixel_height, pixel_width
    )
    dz_dx = dz_dcol  # columns increase eastwards
    dz_dy = -dz_drow  # rows increase southwards
    up = 1.0 / np.sqrt(1.0 + dz_dx * dz_dx + dz_dy * dz_dy)
    return -dz_dx * up, -dz_dy * up, up


def cos_incidence_on_normal(
    normal: tuple[ArrayLike, ArrayLike, ArrayLike], sun: tuple[ArrayLike, ArrayLike, ArrayLike]
) -> np.ndarray:
    r"""Cosine of the angle of incidence: the dot product of the unit surface normal and the unit
    vector towards the sun (:func:`surface_normal`, :func:`sun_direction`); equals
    Duffie & Beckman (2013) eq. 1.6.2 (:func:`cos_incidence`). Not clipped. [-]
    """
    return normal[0] * sun[0] + normal[1] * sun[1] + normal[2] * sun[2]


def slope_aspect(
    elevation: ArrayLike, pixel_width: float, pixel_height: float
) -> tuple[np.ndarray, np.ndarray]:
    r"""Terrain slope and aspect from a gridded elevation model.

    Parameters
    ----------
    elevation : array_like
        2-D elevation grid, row 0 along the north edge, column 0 along the west edge
        (the usual north-up raster layout). [m]
    pixel_width : float
        Pixel size in the east–west direction, positive. [m]
    pixel_height : float
        Pixel size in the north–south direction, positive. [m]

    Returns
    -------
    slope : numpy.ndarray
        Slope from the horizontal. [rad]
    aspect : numpy.ndarray
        Downslope direction clockwise from north in :math:`[0, 2\pi)`; 0 where the ground is
        flat. [rad]

    Notes
    -----
    Gradients are central differences (:func:`numpy.gradient`; one-sided on the outer
    rows and columns). With :math:`\partial z/\partial x` towards east and
    :math:`\partial z/\partial y` towards north,

    .. math::

        \beta = \arctan\sqrt{(\partial z/\partial x)^2 + (\partial z/\partial y)^2}

        a = \operatorname{atan2}(-\partial z/\partial x, -\partial z/\partial y) \bmod 2\pi

    Each interior value depends only on its four direct neighbours, so results computed
    block by block with a one-pixel halo equal those on the whole grid.
    """
    dz_drow, dz_dcol = np.gradient(np.asarray(elevation), pixel_height, pixel_width)
    dz_dx = dz_dcol  # columns increase eastwards
    dz_dy = -dz_drow  # rows increase southwards
    slope = np.arctan(np.hypot(dz_dx, dz_dy))
    aspect = np.mod(np.arctan2(-dz_dx, -dz_dy), 2.0 * np.pi)
    aspect = np.where((slope == 0.0) | (aspect >= 2.0 * np.pi), 0.0, aspect)
    return slope, aspect


def sunset_hour_angle(latitude: ArrayLike, declination: ArrayLike) -> np.ndarray | float:
    r"""Sunset hour angle.

    Parameters
    ----------
    latitude : array_like
        Latitude, positive north. [rad]
    declination : array_like
        Solar declination, see :func:`solar_declination`. [rad]

    Returns
    -------
    numpy.ndarray or float
        Sunset hour angle :math:`\omega_s`; :math:`\pi` during polar day, 0 during polar
        night. [rad]

    Notes
    -----
    FAO-56 eq. 25 [1]_:

    .. math:: \omega_s = \arccos(-\tan\varphi \tan\delta)

    The argument is clipped to :math:`[-1, 1]` so that polar day and polar night give
    :math:`\pi` and 0 instead of NaN.

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eq. 25.
    """
    x = -np.tan(latitude) * np.tan(declination)
    return np.arccos(np.clip(x, -1.0, 1.0))  # FAO-56 eq. 25


def extraterrestrial_radiation_daily(
    latitude: ArrayLike, day_of_year: ArrayLike
) -> np.ndarray | float:
    r"""Daily extraterrestrial radiation on a horizontal surface.

    Parameters
    ----------
    latitude : array_like
        Latitude, positive north. [rad]
    day_of_year : array_like
        Day of the year, 1 to 365 or 366. [-]

    Returns
    -------
    numpy.ndarray or float
        Extraterrestrial radiation :math:`R_a`. [MJ m-2 d-1]

    Notes
    -----
    FAO-56 eq. 21 [1]_ with :math:`G_{sc} = 0.0820` MJ m-2 min-1:

    .. math::

        R_a = \frac{24 \cdot 60}{\pi} G_{sc} d_r
              \left[\omega_s \sin\varphi \sin\delta + \cos\varphi \cos\delta \sin\omega_s\right]

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eqs. 21, 23–25.
    """
    dr = inverse_relative_distance(day_of_year)
    delta = solar_declination(day_of_year)
    ws = sunset_hour_angle(latitude, delta)
    return (  # FAO-56 eq. 21
        24.0
        * 60.0
        / np.pi
        * FAO_SOLAR_CONSTANT
        * dr
        * (ws * np.sin(latitude) * np.sin(delta) + np.cos(latitude) * np.cos(delta) * np.sin(ws))
    )


def daylight_hours(latitude: ArrayLike, day_of_year: ArrayLike) -> np.ndarray | float:
    r"""Maximum possible duration of sunshine (daylight hours).

    Parameters
    ----------
    latitude : array_like
        Latitude, positive north. [rad]
    day_of_year : array_like
        Day of the year, 1 to 365 or 366. [-]

    Returns
    -------
    numpy.ndarray or float
        Daylight hours :math:`N`. [h]

    Notes
    -----
    FAO-56 eq. 34 [1]_:

    .. math:: N = \frac{24}{\pi} \omega_s

    References
    ----------
    .. [1] Allen et al. (1998), FAO Irrigation and Drainage Paper 56, eq. 34.
    """
    ws = sunset_hour_angle(latitude, solar_declination(day_of_year))
    return 24.0 / np.pi * ws  # FAO-56 eq. 34
