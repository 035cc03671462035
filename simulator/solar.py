"""Sun position and irradiance: clear sky, diffuse split and irradiance on a façade.

Pure functions over numpy arrays (floats work too). Angles in degrees,
irradiance in W/m², times as seconds since the Unix epoch (UTC).

Nomenclature
------------
====================  ======  ===================================================
name                  unit    quantity
====================  ======  ===================================================
``zenith``            deg     solar zenith angle, 0 overhead, 90 on the horizon
``solar_azimuth``     deg     solar azimuth, clockwise from north (90 east)
``ghi``               W/m²    global horizontal irradiance
``dni``               W/m²    direct normal irradiance
``dhi``               W/m²    diffuse horizontal irradiance
``tilt``              deg     tilt of a surface from horizontal (90 for a façade)
``facing``            deg     outward normal of a surface, clockwise from north
``albedo``            1       ground reflectance
====================  ======  ===================================================

The formulas are the published ones also found in pvlib (BSD-3), which the
tests use as the reference library.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

__all__ = [
    "clear_sky_ghi",
    "diffuse_fraction",
    "extraterrestrial_irradiance",
    "plane_irradiance",
    "solar_position",
    "split_global",
]

FloatArray = npt.NDArray[np.float64]

_SECONDS_PER_DAY = 86_400.0
_MIN_COS_ZENITH = 0.065  # as pvlib.irradiance.clearness_index: zenith 86.27°
_MAX_ZENITH_DIRECT = 87.0  # as pvlib.irradiance.erbs: no beam this close to the horizon


def solar_position(
    t: FloatArray | float, latitude: float, longitude: float
) -> tuple[FloatArray, FloatArray]:
    r"""Solar zenith and azimuth angles.

    Parameters
    ----------
    t : array or float
        Times [s since the Unix epoch, UTC].
    latitude : float
        Latitude [deg], north positive.
    longitude : float
        Longitude [deg], east positive.

    Returns
    -------
    (zenith, solar_azimuth) : arrays
        Solar zenith angle [deg], without refraction, and solar azimuth [deg]
        clockwise from north.

    Notes
    -----
    The low-precision solar coordinates of Meeus as the NOAA solar calculator
    uses them: the sun's apparent longitude and the obliquity of the ecliptic
    in Julian centuries since J2000 give the declination δ and the equation of
    time; the hour angle h follows from true solar time, then

    .. math::

        \cos z = \sin\phi \sin\delta + \cos\phi \cos\delta \cos h

    About 0.01° from a full ephemeris between 1950 and 2050.

    References
    ----------
    .. [1] Meeus, J. (1991). Astronomical Algorithms, ch. 24 "Solar
       coordinates" (low accuracy) and ch. 27 "Equation of time".
    .. [2] NOAA Global Monitoring Laboratory, "NOAA Solar Calculator" (the
       spreadsheet version of these equations).

    Examples
    --------
    >>> zenith, azimuth = solar_position(1_719_835_200.0, 41.2, -88.1)  # 2024-07-01 12:00 UTC
    >>> round(float(zenith), 1), round(float(azimuth), 1)
    (74.4, 72.8)
    """
    times = np.asarray(t, dtype=np.float64)
    century = (times / _SECONDS_PER_DAY + 2_440_587.5 - 2_451_545.0) / 36_525.0
    mean_longitude = np.mod(280.46646 + century * (36_000.76983 + century * 0.0003032), 360.0)
    mean_anomaly = np.radians(357.52911 + century * (35_999.05029 - 0.0001537 * century))
    eccentricity = 0.016708634 - century * (0.000042037 + 0.0000001267 * century)
    centre = (
        np.sin(mean_anomaly) * (1.914602 - century * (0.004817 + 0.000014 * century))
        + np.sin(2 * mean_anomaly) * (0.019993 - 0.000101 * century)
        + np.sin(3 * mean_anomaly) * 0.000289
    )
    node = np.radians(125.04 - 1934.136 * century)
    apparent_longitude = np.radians(mean_longitude + centre - 0.00569 - 0.00478 * np.sin(node))
    mean_obliquity = (
        23.0
        + (26.0 + (21.448 - century * (46.815 + century * (0.00059 - century * 0.001813))) / 60.0)
        / 60.0
    )
    obliquity = np.radians(mean_obliquity + 0.00256 * np.cos(node))
    declination = np.arcsin(np.sin(obliquity) * np.sin(apparent_longitude))
    y = np.tan(obliquity / 2.0) ** 2
    longitude_rad = np.radians(mean_longitude)
    equation_of_time = 4.0 * np.degrees(
        y * np.sin(2 * longitude_rad)
        - 2 * eccentricity * np.sin(mean_anomaly)
        + 4 * eccentricity * y * np.sin(mean_anomaly) * np.cos(2 * longitude_rad)
        - 0.5 * y * y * np.sin(4 * longitude_rad)
        - 1.25 * eccentricity**2 * np.sin(2 * mean_anomaly)
    )
    minutes_utc = np.mod(times, _SECONDS_PER_DAY) / 60.0
    true_solar_minutes = minutes_utc + equation_of_time + 4.0 * longitude
    hour_angle = np.radians(true_solar_minutes / 4.0 - 180.0)
    phi = np.radians(latitude)
    cos_zenith = np.sin(phi) * np.sin(declination) + np.cos(phi) * np.cos(declination) * np.cos(
        hour_angle
    )
    zenith = np.degrees(np.arccos(np.clip(cos_zenith, -1.0, 1.0)))
    azimuth = np.degrees(
        np.arctan2(
            np.sin(hour_angle),
            np.cos(hour_angle) * np.sin(phi) - np.tan(declination) * np.cos(phi),
        )
    )
    return np.asarray(zenith), np.asarray(np.mod(azimuth + 180.0, 360.0))


def extraterrestrial_irradiance(t: FloatArray | float) -> FloatArray:
    r"""Solar irradiance outside the atmosphere on a plane normal to the sun [W/m²].

    Notes
    -----
    .. math::

        I_0 = 1367 \, (1.00011 + 0.034221\cos\Gamma + 0.00128\sin\Gamma
              + 0.000719\cos 2\Gamma + 0.000077\sin 2\Gamma)

    References
    ----------
    .. [1] Spencer, J. W. (1971). Fourier series representation of the position
       of the sun. Search 2(5), 172.

    Examples
    --------
    >>> round(float(extraterrestrial_irradiance(0.0)))  # 1 January
    1415
    """
    days = np.asarray(t, dtype=np.float64) / _SECONDS_PER_DAY
    dates = np.floor(days).astype("int64").astype("datetime64[D]")
    day_of_year = (dates - dates.astype("datetime64[Y]")).astype(np.float64) + 1.0
    angle = 2.0 * np.pi * (day_of_year - 1.0) / 365.0
    return np.asarray(
        1367.0
        * (
            1.00011
            + 0.034221 * np.cos(angle)
            + 0.00128 * np.sin(angle)
            + 0.000719 * np.cos(2 * angle)
            + 0.000077 * np.sin(2 * angle)
        )
    )


def clear_sky_ghi(zenith: FloatArray | float) -> FloatArray:
    r"""Global horizontal irradiance under a clear sky by Haurwitz's model [W/m²].

    Notes
    -----
    .. math::

        GHI = 1098 \cos z \, \exp(-0.059 / \cos z), \quad 0 \text{ when } \cos z \le 0

    References
    ----------
    .. [1] Haurwitz, B. (1945). Insolation in relation to cloudiness and cloud
       density. Journal of Meteorology 2, 154-166.
    .. [2] Reno, M., Hansen, C. and Stein, J. (2012). Global horizontal
       irradiance clear sky models: implementation and analysis. SAND2012-2389.

    Examples
    --------
    >>> round(float(clear_sky_ghi(30.0)), 1)
    888.3
    """
    cos_zenith = np.cos(np.radians(np.asarray(zenith, dtype=np.float64)))
    safe = np.where(cos_zenith > 0.0, cos_zenith, 1.0)
    return np.asarray(np.where(cos_zenith > 0.0, 1098.0 * safe * np.exp(-0.059 / safe), 0.0))


def diffuse_fraction(clearness_index: FloatArray | float) -> FloatArray:
    r"""Share of global horizontal irradiance that is diffuse, by the Erbs correlation [1].

    Notes
    -----
    .. math::

        DF = \begin{cases}
        1 - 0.09 k_t & k_t \le 0.22 \\
        0.9511 - 0.1604 k_t + 4.388 k_t^2 - 16.638 k_t^3 + 12.336 k_t^4
            & 0.22 < k_t \le 0.80 \\
        0.165 & k_t > 0.80
        \end{cases}

    References
    ----------
    .. [1] Erbs, D. G., Klein, S. A. and Duffie, J. A. (1982). Estimation of the
       diffuse radiation fraction for hourly, daily and monthly-average global
       radiation. Solar Energy 28(4), 293-302, eq. 1.

    Examples
    --------
    >>> round(float(diffuse_fraction(0.5)), 4)
    0.6591
    """
    kt = np.asarray(clearness_index, dtype=np.float64)
    middle = 0.9511 - 0.1604 * kt + 4.388 * kt**2 - 16.638 * kt**3 + 12.336 * kt**4
    return np.asarray(np.where(kt <= 0.22, 1.0 - 0.09 * kt, np.where(kt <= 0.8, middle, 0.165)))


def split_global(
    ghi: FloatArray | float, zenith: FloatArray | float, t: FloatArray | float
) -> tuple[FloatArray, FloatArray]:
    r"""Direct normal and diffuse horizontal irradiance from the global, by Erbs [1].

    Parameters
    ----------
    ghi : array
        Global horizontal irradiance [W/m²].
    zenith : array
        Solar zenith angle [deg].
    t : array
        Times [s since the Unix epoch, UTC], for the extraterrestrial irradiance.

    Returns
    -------
    (dni, dhi) : arrays
        Direct normal and diffuse horizontal irradiance [W/m²]; within 3° of
        the horizon all of it is diffuse.

    Notes
    -----
    :math:`k_t = GHI / (I_0 \max(\cos z, 0.065))`, capped at 1;
    :math:`DHI = DF(k_t)\,GHI`; :math:`DNI = (GHI - DHI)/\cos z`. The guards
    near the horizon are those of ``pvlib.irradiance.erbs``.

    References
    ----------
    .. [1] Erbs, D. G., Klein, S. A. and Duffie, J. A. (1982). Solar Energy
       28(4), 293-302.
    """
    ghi_array = np.asarray(ghi, dtype=np.float64)
    zenith_array = np.asarray(zenith, dtype=np.float64)
    cos_zenith = np.cos(np.radians(zenith_array))
    kt = ghi_array / (extraterrestrial_irradiance(t) * np.maximum(cos_zenith, _MIN_COS_ZENITH))
    kt = np.clip(kt, 0.0, 1.0)
    dhi = diffuse_fraction(kt) * ghi_array
    safe = np.where(cos_zenith > 0.0, cos_zenith, 1.0)
    dni = (ghi_array - dhi) / safe
    bad = (zenith_array > _MAX_ZENITH_DIRECT) | (ghi_array < 0.0) | (dni < 0.0)
    return np.asarray(np.where(bad, 0.0, dni)), np.asarray(np.where(bad, ghi_array, dhi))


def plane_irradiance(
    tilt: float,
    facing: float,
    zenith: FloatArray | float,
    solar_azimuth: FloatArray | float,
    dni: FloatArray | float,
    dhi: FloatArray | float,
    ghi: FloatArray | float,
    albedo: float = 0.2,
) -> FloatArray:
    r"""Total irradiance on a tilted surface, isotropic sky [W/m²].

    Parameters
    ----------
    tilt : float
        Tilt of the surface from horizontal [deg]: 90 for a façade, 0 for a
        flat rooflight.
    facing : float
        Outward normal of the surface [deg clockwise from north].
    zenith, solar_azimuth : array
        Sun position [deg], see :func:`solar_position`.
    dni, dhi, ghi : array
        Direct normal, diffuse horizontal and global horizontal irradiance [W/m²].
    albedo : float, default 0.2
        Ground reflectance [1].

    Notes
    -----
    .. math::

        I = DNI \max(0, \cos\theta) + DHI \frac{1 + \cos\beta}{2}
            + GHI \rho_g \frac{1 - \cos\beta}{2}

    with :math:`\cos\theta = \cos z \cos\beta + \sin z \sin\beta \cos(\gamma_s - \gamma)`,
    and no beam when the sun is below the horizon.

    References
    ----------
    .. [1] Liu, B. Y. H. and Jordan, R. C. (1963). The long-term average
       performance of flat-plate solar-energy collectors. Solar Energy 7(2),
       53-74 (isotropic sky).
    .. [2] Duffie, J. A. and Beckman, W. A., Solar Engineering of Thermal
       Processes, ch. 2 (angle of incidence).

    Examples
    --------
    >>> round(float(plane_irradiance(90.0, 180.0, 30.0, 180.0, 800.0, 100.0, 793.0)), 1)
    529.3
    """
    zenith_rad = np.radians(np.asarray(zenith, dtype=np.float64))
    beta = np.radians(tilt)
    cos_incidence = np.cos(zenith_rad) * np.cos(beta) + np.sin(zenith_rad) * np.sin(beta) * np.cos(
        np.radians(np.asarray(solar_azimuth, dtype=np.float64) - facing)
    )
    sun_up = np.cos(zenith_rad) > 0.0
    beam = np.where(sun_up, np.asarray(dni) * np.maximum(cos_incidence, 0.0), 0.0)
    sky = np.asarray(dhi) * (1.0 + np.cos(beta)) / 2.0
    ground = np.asarray(ghi) * albedo * (1.0 - np.cos(beta)) / 2.0
    return np.asarray(beam + sky + ground)
