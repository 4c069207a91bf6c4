"""Hourly standardized reference ET, every hour of a real July, against an independent code.

What is validated
-----------------
``rasterbudget.physics.reference_et.reference_et_hourly_series`` for both reference surfaces
("short" grass and "tall" alfalfa), on the 744 hours of July of the Greensboro, North
Carolina TMY3 file that pvlib ships (``723170TYA.CSV``, 36.1° N, 79.95° W, 273 m, time zone
UTC-5; every July hour of the file is from 1981). The reference is
:func:`asce_hourly_reference_et` below, written in this file from the hourly procedure of
ASCE-EWRI (2005) with ``math`` only, one hour after the other; nothing of ``rasterbudget``
is used by it.

Requirements: every hour within :data:`HOURLY_TOLERANCE` of the reference for both surfaces,
the July total within :data:`TOTAL_TOLERANCE`, and a check that the low-sun rule (the
cloudiness function of hours whose sun is below 0.3 rad is carried from the last hour above
it) changes the result by more than the hourly tolerance on real hours.

From TMY3 to hourly inputs
--------------------------
TMY3 stamps are local standard time and mark the *end* of each hour, 01:00 to 24:00 (Wilcox
& Marion 2008). The hour's start is the stamp - 1 h, taken from the file's own ``Date`` and
``Time`` columns (pvlib moves the 24:00 stamps to 00:00 of the next day, so its index would
put 30 June 24:00 into July); July is the 744 rows whose ``Date`` is in July, 07/01 01:00 to
07/31 24:00. The start in UTC is that minus the header's TZ hours (UTC = local + 5). Per hour:

- T = dry-bulb temperature [°C];
- ea = e°(Tdew), FAO-56 eq. 14 with e° of FAO-56 eq. 11 (computed once here, the same array
  given to both sides);
- Rs = GHI [Wh m-2] x 0.0036 [MJ m-2 h-1];
- u2 = u10 4.87 / ln(67.8 z - 5.42), FAO-56 eq. 47 (ASCE-EWRI eq. 33, from memory), the TMY3
  wind taken as measured at z = 10 m (the usual airport anemometer height, common practice;
  factor 0.748); the same array given to both sides;
- P = 101.3 ((293 - 0.0065 z) / 293)^5.26 from the elevation (FAO-56 eq. 7, ASCE-EWRI eq. 3
  from memory), computed by each side on its own.

The series starts at the first hour of July (local midnight). Its first hours have the sun
below 0.3 rad and no earlier hour above it, so both sides start from the same f_cd = 0.73,
which is 1.35 x 0.8 - 0.35 (Rs/Rso = 0.8): the package's default ``initial_cloudiness``,
passed explicitly, and :data:`INITIAL_CLOUDINESS` here.

Conventions aligned
-------------------
- sigma: ASCE-EWRI's hourly 2.042e-10 MJ K-4 m-2 h-1 (from memory) on both sides; the
  package's default is CODATA (``STEFAN_BOLTZMANN_HOURLY``, 2.0413e-10), so it is given
  ``stefan_boltzmann_hourly=ASCE_SIGMA_HOURLY``.
- Kelvin: the package takes kelvin and subtracts 273.15 (``scipy.constants.zero_Celsius``)
  wherever a formula is in °C, and uses the kelvin input itself in sigma T^4. It is given
  T = °C + 273.15, and the reference here evaluates sigma T^4 with T + 273.15 as well
  (ASCE-EWRI prints 273.16 in its longwave equation, from memory; that 0.01 K is
  about 1.3e-4 relative in Rnl).
- Time: the package receives the true UTC start of the hour (0-23 h) with the day of year
  of the UTC date; the reference works as ASCE-EWRI writes it, in local standard clock time
  at the *midpoint* of the hour with the day of year of the local date, Lz = 75° W (the
  zone meridian, -15 x TZ) and Lm = 79.95° W. The two differ only in J for the five
  evening hours of each day (19:00-24:00 local fall on the next UTC date). In July those
  hours all have the sun below 0.3 rad (highest mid-hour beta 0.018 rad, asserted), where
  Ra is not used (f_cd is carried), so the J convention changes nothing here: giving the
  package local J and local hour + 5 h instead leaves its output bit-for-bit unchanged.
- The package writes Delta = 4098 e°(T) / (T + 237.3)^2 (FAO-56 eq. 13), i.e. the
  coefficient 4098 x 0.6108 = 2503.17, against ASCE-EWRI's rounded 2503 used here
  (7e-5 relative); and it turns clock time into solar time with 1/15 h per degree where
  ASCE-EWRI writes 0.06667 (here Lz - Lm = -4.95°, 0.06 s apart). Both are left as they
  are: they are the whole of the measured difference (with 2503.17, 1/15 and the package
  given local time, the two sides agree to 1e-15 mm h-1 on every hour).
- Daytime is Rn > 0 on both sides; ET is not clipped at zero on either side.

Measured (pvlib 0.16.1, numpy float64)
--------------------------------------
==========================================  ============  ============
                                            short         tall
==========================================  ============  ============
max abs hourly difference [mm h-1]          4.4e-6        4.9e-6
mean abs hourly difference [mm h-1]         8.7e-7        9.1e-7
July total, package series [mm]             152.453       184.550
July total, reference here [mm]             152.452       184.550
July total difference, package - here [mm]  +1.9e-4       -1.6e-4
==========================================  ============  ============

Evaluating sigma T^4 with T + 273.16 in the reference instead (ASCE-EWRI's printed form)
would give max 1.2e-5 / 1.3e-5 mm h-1 and +2.4e-3 / +2.3e-3 mm on the totals.

Low-sun rule
------------
403 of the 744 hours have the mid-hour sun below 0.3 rad; 124 of them have Rs > 0 (dawn and
dusk, four a day), the rest are nights. The first hour of July above 0.3 rad is 07:00-08:00;
the seven hours before it use the initial 0.73 on both sides. The same inputs through
``reference_et_hourly`` with its default, fixed ``low_sun_cloudiness`` (0.73 on every
low-sun hour, nothing carried; called with the same sigma so that only the rule differs)
give, against the series:

==========================================  ============  ============
                                            short         tall
==========================================  ============  ============
max abs difference, those 124 [mm h-1]      0.0463        0.1073
mean abs difference, same hours [mm h-1]    0.0100        0.0135
those hours above 0.005 mm h-1 (of 124)     65            70
all July hours above 0.005 mm h-1           179           211
July total, fixed rule [mm]                 149.801       180.931
July total, carried rule (series) [mm]      152.453       184.550
==========================================  ============  ============

The carried f_cd averages 0.48 over the low-sun hours (cloudy July afternoons), against the
fixed 0.73. With the package's own default sigma (CODATA) the fixed-rule totals are 149.807
and 180.938 mm. Hours with the sun above 0.3 rad are identical under both rules (asserted).

Tolerance
---------
:data:`HOURLY_TOLERANCE` = 5e-5 mm h-1 on every hour, about 10 times the largest measured
difference and 100 times tighter than the 0.005 mm h-1 first asked for; the low-sun rule
moves 122 of the 124 dawn/dusk hours by more than it. :data:`TOTAL_TOLERANCE` = 0.005 mm on
the July total (asked: 0.1 mm), against 2.65 and 3.62 mm for the rule.

Sources
-------
- Allen, R. G., Walter, I. A., Elliott, R. L., Howell, T. A., Itenfisu, D., Jensen, M. E.
  and Snyder, R. L. (eds.) (2005). The ASCE Standardized Reference Evapotranspiration
  Equation. ASCE-EWRI, Reston. Hourly procedure; equation numbers cited below are from
  memory.
- Allen, R. G., Pereira, L. S., Raes, D. and Smith, M. (1998). Crop evapotranspiration.
  FAO Irrigation and Drainage Paper 56, FAO, Rome. Eqs. 7, 11, 14, 47.
- Wilcox, S. and Marion, W. (2008). Users Manual for TMY3 Data Sets. NREL/TP-581-43156,
  National Renewable Energy Laboratory, Golden (as pvlib's ``read_tmy3`` cites it).
"""

from __future__ import annotations

import functools
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pvlib
import pytest

from rasterbudget.physics.reference_et import reference_et_hourly, reference_et_hourly_series

TMY3_FILE = Path(pvlib.__file__).parent / "data" / "723170TYA.CSV"  # Greensboro NC
MONTH = 7
HOURS_IN_JULY = 31 * 24

WIND_HEIGHT = 10.0  # TMY3 anemometer height taken as 10 m (common practice) [m]
WH_TO_MJ = 0.0036  # 1 Wh = 3600 J [MJ Wh-1]
KELVIN_OFFSET = 273.15  # °C -> K on both sides (the package's convention) [K]

ASCE_SIGMA_HOURLY = 2.042e-10  # ASCE-EWRI (2005) hourly sigma, from memory [MJ K-4 m-2 h-1]
ASCE_SOLAR_CONSTANT_HOURLY = 4.92  # Gsc, ASCE-EWRI (2005), from memory [MJ m-2 h-1]
ALBEDO = 0.23  # reference surfaces, ASCE-EWRI (2005) eq. 43 (from memory) [-]
LOW_SUN = 0.3  # sun angle below which f_cd is carried, ASCE-EWRI (2005) [rad]
INITIAL_CLOUDINESS = 1.35 * 0.8 - 0.35  # f_cd of Rs/Rso = 0.8, the package's default [-]

# ASCE-EWRI (2005) Table 1, hourly time step (from memory):
# Cn [K mm s3 Mg-1 h-1], Cd by day and by night [s m-1], G/Rn by day and by night [-].
ASCE_HOURLY_CONSTANTS = {
    "short": {"cn": 37.0, "cd_day": 0.24, "cd_night": 0.96, "g_day": 0.1, "g_night": 0.5},
    "tall": {"cn": 66.0, "cd_day": 0.25, "cd_night": 1.7, "g_day": 0.04, "g_night": 0.2},
}

HOURLY_TOLERANCE = 5e-5  # [mm h-1], measured max 4.9e-6 (see the module docstring)
REQUESTED_HOURLY_TOLERANCE = 0.005  # [mm h-1], the tolerance first asked for
TOTAL_TOLERANCE = 0.005  # [mm per July], measured 1.9e-4


# --- the independent reference: ASCE-EWRI (2005), hourly, math only ---------------------


def saturation_vapour_pressure_kpa(t_celsius: float) -> float:
    """e°(T) = 0.6108 exp(17.27 T / (T + 237.3)), T in °C (FAO-56 eq. 11)."""
    return 0.6108 * math.exp(17.27 * t_celsius / (t_celsius + 237.3))


def wind_at_2m(wind_speed: float, height: float) -> float:
    """u2 = uz 4.87 / ln(67.8 z - 5.42) (FAO-56 eq. 47; ASCE-EWRI eq. 33 from memory)."""
    return wind_speed * 4.87 / math.log(67.8 * height - 5.42)


def asce_hourly_sun(
    j: float, clock_start: float, phi: float, lz_west: float, lm_west: float
) -> tuple[float, float]:
    """Ra of one hour [MJ m-2 h-1] and the sun angle beta at its midpoint [rad].

    ASCE-EWRI (2005) hourly (equation numbers from memory): J the day of year, the hour
    starting at local standard clock time ``clock_start`` [h], latitude ``phi`` [rad], Lz
    and Lm in degrees WEST of Greenwich.
    """
    dr = 1.0 + 0.033 * math.cos(2.0 * math.pi / 365.0 * j)  # eq. 50
    delta = 0.409 * math.sin(2.0 * math.pi / 365.0 * j - 1.39)  # eq. 51
    b = 2.0 * math.pi * (j - 81.0) / 364.0  # eq. 58
    sc = 0.1645 * math.sin(2.0 * b) - 0.1255 * math.cos(b) - 0.025 * math.sin(b)  # eq. 57
    t = clock_start + 0.5  # standard clock time at the midpoint of the hour [h]
    omega = math.pi / 12.0 * ((t + 0.06667 * (lz_west - lm_west) + sc) - 12.0)  # eq. 55
    omega_s = math.acos(-math.tan(phi) * math.tan(delta))  # eq. 59
    omega_1 = omega - math.pi / 24.0  # eq. 53
    omega_2 = omega + math.pi / 24.0  # eq. 54
    # eq. 56: integrate over the daylight arc only, with omega_1 <= omega_2.
    omega_1 = min(max(omega_1, -omega_s), omega_s)
    omega_2 = min(max(omega_2, -omega_s), omega_s)
    omega_1 = min(omega_1, omega_2)
    ra = (  # eq. 48
        12.0
        / math.pi
        * ASCE_SOLAR_CONSTANT_HOURLY
        * dr
        * (
            (omega_2 - omega_1) * math.sin(phi) * math.sin(delta)
            + math.cos(phi) * math.cos(delta) * (math.sin(omega_2) - math.sin(omega_1))
        )
    )
    sin_beta = math.sin(phi) * math.sin(delta) + math.cos(phi) * math.cos(delta) * math.cos(
        omega
    )  # eq. 62
    return ra, math.asin(sin_beta)


def asce_hourly_reference_et(
    t_celsius: np.ndarray,
    ea: np.ndarray,
    rs: np.ndarray,
    u2: np.ndarray,
    day_of_year: np.ndarray,
    local_clock_start: np.ndarray,
    latitude_deg: float,
    lz_west: float,
    lm_west: float,
    elevation: float,
    surface: str,
    initial_cloudiness: float = INITIAL_CLOUDINESS,
) -> dict[str, np.ndarray]:
    """ASCE-EWRI (2005) hourly standardized reference ET of consecutive hours.

    Parameters are one value per hour in time order: T [°C], ea [kPa], Rs [MJ m-2 h-1],
    u2 [m s-1], J [-] and the local standard clock time at the start of the hour [h]; the
    site's latitude [degrees north], Lz and Lm [degrees WEST of Greenwich], elevation [m]
    and the surface ("short" or "tall"). Returns ET [mm h-1] and, per hour, the mid-hour sun
    angle beta [rad], f_cd [-] and Rn [MJ m-2 h-1]. Equation numbers are from memory.
    """
    constants = ASCE_HOURLY_CONSTANTS[surface]
    phi = math.radians(latitude_deg)
    pressure = 101.3 * ((293.0 - 0.0065 * elevation) / 293.0) ** 5.26  # eq. 3
    gamma = 0.000665 * pressure  # eq. 4
    clear_sky_factor = 0.75 + 2e-5 * elevation  # eq. 47: Rso = (0.75 + 2e-5 z) Ra

    n = len(t_celsius)
    et = np.empty(n)
    beta_out = np.empty(n)
    fcd_out = np.empty(n)
    rn_out = np.empty(n)
    fcd_last_high_sun = initial_cloudiness  # before the first hour with beta >= 0.3 rad
    for i in range(n):
        j = float(day_of_year[i])
        t = float(t_celsius[i])
        ra, beta = asce_hourly_sun(j, float(local_clock_start[i]), phi, lz_west, lm_west)
        rso = clear_sky_factor * ra  # eq. 47

        # Cloudiness function, carried through the low-sun hours.
        if beta >= LOW_SUN:
            relative = min(max(float(rs[i]) / rso, 0.3), 1.0)  # Rs/Rso in [0.3, 1.0]
            fcd = min(max(1.35 * relative - 0.35, 0.05), 1.0)  # eq. 45
            fcd_last_high_sun = fcd
        else:
            fcd = fcd_last_high_sun

        # Net radiation, ground heat flux and the standardized equation.
        rns = (1.0 - ALBEDO) * float(rs[i])  # eq. 43
        t_kelvin = t + KELVIN_OFFSET  # ASCE-EWRI writes + 273.16 (from memory), see docstring
        rnl = ASCE_SIGMA_HOURLY * t_kelvin**4 * (0.34 - 0.14 * math.sqrt(ea[i])) * fcd  # eq. 44
        rn = rns - rnl  # eq. 42
        daytime = rn > 0.0
        g = (constants["g_day"] if daytime else constants["g_night"]) * rn  # eqs. 65, 66
        cd = constants["cd_day"] if daytime else constants["cd_night"]
        es = saturation_vapour_pressure_kpa(t)  # eq. 6 for an hour: e°(T_hr)
        slope = 2503.0 * math.exp(17.27 * t / (t + 237.3)) / (t + 237.3) ** 2  # eq. 5
        numerator = 0.408 * slope * (rn - g) + gamma * constants["cn"] / (t + 273.0) * u2[i] * (
            es - ea[i]
        )
        et[i] = numerator / (slope + gamma * (1.0 + cd * u2[i]))  # eq. 1
        beta_out[i], fcd_out[i], rn_out[i] = beta, fcd, rn
    return {"et": et, "beta": beta_out, "fcd": fcd_out, "rn": rn_out}


# --- July of the Greensboro TMY3 file ---------------------------------------------------


@functools.cache
def july() -> dict:
    """The 744 hours of July, as arrays, and the station's header values."""
    hourly, meta = pvlib.iotools.read_tmy3(TMY3_FILE, map_variables=True)
    date = pd.to_datetime(hourly["Date (MM/DD/YYYY)"], format="%m/%d/%Y")
    in_month = (date.dt.month == MONTH).to_numpy()
    rows = hourly[in_month]
    hour_end = rows["Time (HH:MM)"].str.slice(0, 2).astype(int).to_numpy()
    local_start = pd.DatetimeIndex(date[in_month]) + pd.to_timedelta(hour_end - 1, unit="h")
    utc_start = local_start - pd.Timedelta(hours=meta["TZ"])  # TZ = -5: UTC = local + 5 h
    assert len(rows) == HOURS_IN_JULY
    assert local_start.is_monotonic_increasing and local_start.is_unique
    assert local_start[0].hour == 0 and local_start[0].day == 1

    t_celsius = rows["temp_air"].to_numpy(dtype=float)
    ea = np.array([saturation_vapour_pressure_kpa(x) for x in rows["temp_dew"]])  # FAO-56 eq. 14
    u2 = np.array([wind_at_2m(x, WIND_HEIGHT) for x in rows["wind_speed"]])
    return {
        "t_celsius": t_celsius,
        "ea": ea,
        "rs": rows["ghi"].to_numpy(dtype=float) * WH_TO_MJ,
        "u2": u2,
        "local_doy": local_start.dayofyear.to_numpy(),
        "local_hour": local_start.hour.to_numpy(dtype=float),
        "utc_doy": utc_start.dayofyear.to_numpy(),
        "utc_hour": utc_start.hour.to_numpy(dtype=float),
        "latitude": float(meta["latitude"]),  # degrees north
        "longitude": float(meta["longitude"]),  # degrees east (negative: west)
        "elevation": float(meta["altitude"]),
        "tz": float(meta["TZ"]),
    }


@functools.cache
def reference(surface: str) -> dict[str, np.ndarray]:
    """The independent ASCE-EWRI (2005) hourly series of July."""
    w = july()
    return asce_hourly_reference_et(
        w["t_celsius"],
        w["ea"],
        w["rs"],
        w["u2"],
        w["local_doy"],
        w["local_hour"],
        latitude_deg=w["latitude"],
        lz_west=-15.0 * w["tz"],  # 75° W, the meridian of UTC-5
        lm_west=-w["longitude"],  # 79.95° W
        elevation=w["elevation"],
        surface=surface,
    )


def package_inputs() -> dict:
    """Keyword arguments shared by the package's hourly functions."""
    w = july()
    return {
        "temperature": w["t_celsius"] + KELVIN_OFFSET,
        "wind_speed_2m": w["u2"],
        "shortwave": w["rs"],
        "latitude": math.radians(w["latitude"]),
        "longitude": w["longitude"],
        "day_of_year": w["utc_doy"],
        "utc_hour_start": w["utc_hour"],
        "elevation": w["elevation"],
        "vapour_pressure": w["ea"],
        "stefan_boltzmann_hourly": ASCE_SIGMA_HOURLY,
    }


@functools.cache
def package_series(surface: str) -> np.ndarray:
    return reference_et_hourly_series(
        **package_inputs(), reference=surface, initial_cloudiness=INITIAL_CLOUDINESS
    )


# --- tests ------------------------------------------------------------------------------


def test_reference_hourly_ra_sums_to_the_daily_ra():
    """Self-check of the reference's hour-angle limits: 24 hourly Ra make the daily Ra."""
    w = july()
    phi = math.radians(w["latitude"])
    for j in (182, 197, 212):  # 1, 16 and 31 July
        hourly_sum = sum(
            asce_hourly_sun(j, float(hour), phi, -15.0 * w["tz"], -w["longitude"])[0]
            for hour in range(24)
        )
        dr = 1.0 + 0.033 * math.cos(2.0 * math.pi / 365.0 * j)
        delta = 0.409 * math.sin(2.0 * math.pi / 365.0 * j - 1.39)
        omega_s = math.acos(-math.tan(phi) * math.tan(delta))
        daily = (  # FAO-56 eq. 21, Gsc = 0.0820 MJ m-2 min-1 (= 4.92 / 60)
            24.0
            * 60.0
            / math.pi
            * 0.0820
            * dr
            * (
                omega_s * math.sin(phi) * math.sin(delta)
                + math.cos(phi) * math.cos(delta) * math.sin(omega_s)
            )
        )
        assert hourly_sum == pytest.approx(daily, rel=1e-12)
        assert 38.0 < daily < 43.0  # MJ m-2 d-1 at 36° N in July


def test_hours_on_another_utc_date_have_the_sun_below_the_low_sun_angle():
    """The J convention (UTC date for the package, local date here) cannot matter."""
    w = july()
    other_date = w["utc_doy"] != w["local_doy"]
    assert int(other_date.sum()) == 5 * 31  # 19:00-24:00 local, every day
    assert reference("short")["beta"][other_date].max() < LOW_SUN


@pytest.mark.parametrize("surface", ["short", "tall"])
def test_every_july_hour_matches_the_independent_asce_hourly_procedure(surface):
    got = package_series(surface)
    expected = reference(surface)["et"]

    assert got.shape == (HOURS_IN_JULY,)
    assert np.isfinite(got).all() and np.isfinite(expected).all()
    difference = np.abs(got - expected)
    worst = int(np.argmax(difference))
    assert difference.max() <= HOURLY_TOLERANCE <= REQUESTED_HOURLY_TOLERANCE, (
        f"{surface}: hour {worst} differs by {difference[worst]:.2e} mm h-1 "
        f"(package {got[worst]:.6f}, reference {expected[worst]:.6f})"
    )
    # The month is a real one: daytime peaks, nights near zero (dew allowed).
    assert expected.max() > 0.7
    assert expected.min() > -0.1


@pytest.mark.parametrize("surface", ["short", "tall"])
def test_july_total_matches_the_independent_asce_hourly_procedure(surface):
    got = float(package_series(surface).sum())
    expected = float(reference(surface)["et"].sum())

    assert got == pytest.approx(expected, abs=TOTAL_TOLERANCE)
    assert 140.0 < expected < 200.0  # a North Carolina July [mm]


@pytest.mark.parametrize("surface", ["short", "tall"])
def test_the_carried_low_sun_cloudiness_matters_in_july(surface):
    w = july()
    ref = reference(surface)
    low_sun = ref["beta"] < LOW_SUN
    low_sun_daylight = low_sun & (w["rs"] > 0.0)
    assert int(low_sun_daylight.sum()) == 124  # dawn and dusk, four hours a day

    series = package_series(surface)
    # The fixed rule: default low_sun_cloudiness (0.73 on every low-sun hour), no carry;
    # same sigma as the series so that only the rule differs.
    fixed = np.asarray(reference_et_hourly(**package_inputs(), reference=surface))
    effect = np.abs(series - fixed)

    # Only the low-sun hours can change...
    assert effect[~low_sun].max() == 0.0
    # ...and the dawn/dusk ones do, beyond both the tolerance used here and the one asked for,
    assert int((effect[low_sun_daylight] > HOURLY_TOLERANCE).sum()) >= 100
    assert int((effect[low_sun_daylight] > REQUESTED_HOURLY_TOLERANCE).sum()) >= 50
    assert effect[low_sun_daylight].max() > 0.04
    # so the comparison above tells the two rules apart: the reference follows the carry.
    assert np.abs(fixed - ref["et"]).max() > 0.04
    assert abs(fixed.sum() - series.sum()) > 2.0  # mm in July, against TOTAL_TOLERANCE
