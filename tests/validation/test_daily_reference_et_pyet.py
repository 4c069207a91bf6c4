"""Daily grass reference ET against pyet on a year of real station weather.

What is validated
-----------------
``rasterbudget.physics.reference_et.reference_et_daily`` (short/grass reference) against
``pyet.pm_fao56`` on every day of the two typical meteorological years (TMY3) that pvlib
ships: Greensboro, North Carolina (``723170TYA.CSV``, 36.1° N, 273 m) and Sand Point, Alaska
(``703165TY.csv``, 55.317° N, 7 m). Requirement: every one of the 365 days of both stations
within 0.02 mm d-1 of pyet.

A second test works one value of the bounded net longwave radiation by hand.

From hourly TMY3 to daily inputs
--------------------------------
TMY3 stamps are local standard time and mark the *end* of each hour, from 01:00 to 24:00
(Wilcox & Marion 2008). Each hour is therefore shifted by -1 h to its start before grouping
by date, so that 24:00 belongs to the day it ends and 01:00 to the day it starts. The shift
is applied to the file's own ``Date`` and ``Time`` columns rather than to pvlib's index,
because pvlib moves the 24:00 stamp that ends 28 February of a leap year to 1 March.
Per day:

- Tmax, Tmin: maximum and minimum hourly dry-bulb temperature [°C];
- RHmax, RHmin: maximum and minimum hourly relative humidity [%];
- Rs = sum of hourly GHI [Wh m-2] x 0.0036 [MJ m-2 d-1];
- u2: mean hourly wind speed, taken as measured at 10 m (the usual airport anemometer
  height, common practice), brought to 2 m with FAO-56 eq. 47,
  u2 = uz 4.87 / ln(67.8 z - 5.42) (``turbulence.wind_speed_at_2m``; factor 0.748 at 10 m);
- elevation and latitude from the file's header line.

TMY3 months come from different years (Greensboro's January is from 1988, its February from
1996, ...), but every day lies within one month, so daily aggregation is unaffected. The
dates are re-stamped to one non-leap calendar year (2001; TMY3 has no 29 February) and both
libraries get the same dates: pyet reads the day of year from the pandas index, the
package receives ``index.dayofyear``.

Conventions aligned
-------------------
Both sides: G = 0, albedo 0.23, Cn = 900 and Cd = 0.34, es as the mean of e°(Tmax) and
e°(Tmin) (FAO-56 eqs. 11-12), ea from RHmax and RHmin (FAO-56 eq. 17), P from elevation
(FAO-56 eq. 7) and gamma = 0.665e-3 P (eq. 8), Ra, Rso by FAO-56 eqs. 21 and 37, Rs/Rso
bounded to [0.3, 1.0] and fcd to [0.05, 1.0] (ASCE-EWRI 2005). pyet is called with
``clip_zero=False`` (the package does not clip negative ET) and latitude in radians.

- sigma: pyet uses FAO-56's rounded 4.903e-9 MJ m-2 d-1 K-4 in eq. 39; the package is
  given ``stefan_boltzmann=FAO_STEFAN_BOLTZMANN_DAILY`` (its default is CODATA, 4.899e-9).
- Kelvin: pyet adds 273.16 in the longwave term (as FAO-56 eq. 39 writes it) and works in
  °C everywhere else; the package takes kelvin and subtracts 273.15 for e°, Delta and the
  T + 273 of eq. 6. The package is NOT insensitive to the offset: passing °C + 273.16 moves
  e°(T), Delta and es by 0.01 K and gave max differences of 0.0020 (Greensboro) and
  0.0021 mm d-1 (Sand Point). Passing °C + 273.15 aligns everything except pyet's longwave
  term; re-running the package's own pieces with only Rnl evaluated at T + 0.01 K
  reproduces pyet to 2e-10 mm d-1, so the residual below is entirely that 0.01 K. This test
  uses °C + 273.15 (``scipy.constants.zero_Celsius``).
- The package's polar-winter rule (Rs/Rso = 0.6 where Rso < 1 MJ m-2 d-1) never acts here:
  the smallest daily Rso is 12.0 (Greensboro) and 3.3 MJ m-2 d-1 (Sand Point), asserted.

Measured (pyet 1.5.0, pvlib 0.16.1)
-----------------------------------
====================================  ==============  ==============
                                      Greensboro NC   Sand Point AK
====================================  ==============  ==============
max abs difference [mm d-1]           0.00022         0.00018
mean abs difference [mm d-1]          0.00010         0.00004
days with Rs/Rso < 0.3                20              101
unbounded form on those days, max     0.173           0.163
unbounded form on those days, mean    0.063           0.057
====================================  ==============  ==============

"Unbounded form" is FAO-56 eq. 39 as printed, Rs/Rso capped at 1 only: on the dark days it
gives fcd = 1.35 Rs/Rso - 0.35 down to -0.14 (Rs/Rso reaches 0.164 at Greensboro, 0.153 at
Sand Point), a net longwave *gain* on 13 and 57 of them, and up to 1.03 (Greensboro) and
1.35 MJ m-2 d-1 (Sand Point) less Rnl than the bounded form; the resulting ETo differences
(exact, through pyet's Penman-Monteith with that Rn) are the last two rows. It is computed
inline below from the formula, only to show that the 0.02 mm d-1 tolerance would detect the
unbounded form; no code of the package's earlier version is used.

Tolerance
---------
0.02 mm d-1 on every day, the requirement of the issue; the measured agreement is about
100 times tighter, the remainder being pyet's 273.16 in the longwave term (0.01 K in
T^4, about 1e-4 relative in Rnl).

Sources
-------
- Allen, R. G., Pereira, L. S., Raes, D. and Smith, M. (1998). Crop evapotranspiration:
  guidelines for computing crop water requirements. FAO Irrigation and Drainage Paper 56.
  FAO, Rome. Eqs. 6 (Penman-Monteith), 7 (pressure), 17 (ea from RHmax, RHmin), 39 (net
  longwave), 47 (wind speed at 2 m).
- Allen, R. G., Walter, I. A., Elliott, R. L., Howell, T. A., Itenfisu, D., Jensen, M. E.
  and Snyder, R. L. (eds.) (2005). The ASCE Standardized Reference Evapotranspiration
  Equation. ASCE-EWRI, Reston: bounds of Rs/Rso and fcd.
- Vremec, M., Collenteur, R. A. and Birk, S. (2024). PyEt v1.3.1: a Python package for the
  estimation of potential evapotranspiration. Geoscientific Model Development 17,
  7083-7103, doi:10.5194/gmd-17-7083-2024 (as pyet's package metadata cites it).
- Wilcox, S. and Marion, W. (2008). Users Manual for TMY3 Data Sets. NREL/TP-581-43156,
  National Renewable Energy Laboratory, Golden (as pvlib's ``read_tmy3`` cites it).
"""

from __future__ import annotations

import functools
from pathlib import Path

import numpy as np
import pandas as pd
import pvlib
import pyet
import pytest

from rasterbudget.physics.constants import (
    FAO_STEFAN_BOLTZMANN_DAILY,
    STEFAN_BOLTZMANN_DAILY,
    ZERO_CELSIUS,
)
from rasterbudget.physics.radiation import (
    MIN_CLEAR_SKY_SHORTWAVE_DAILY,
    clear_sky_shortwave_daily,
    net_longwave_daily,
)
from rasterbudget.physics.reference_et import reference_et_daily
from rasterbudget.physics.solar import extraterrestrial_radiation_daily
from rasterbudget.physics.turbulence import wind_speed_at_2m

TMY3_DIR = Path(pvlib.__file__).parent / "data"
STATIONS = ("723170TYA.CSV", "703165TY.csv")  # Greensboro NC, Sand Point AK

WIND_HEIGHT = 10.0  # TMY3 wind speed height, the usual anemometer height (common practice) [m]
WH_TO_MJ = 0.0036  # 1 Wh = 3600 J [MJ Wh-1]
CALENDAR_YEAR = 2001  # one non-leap year for all months, given to both libraries
ALBEDO = 0.23  # FAO-56 grass reference [-]

TOLERANCE = 0.02  # [mm d-1], the requirement on every day


@functools.cache
def daily_weather(filename: str) -> tuple[pd.DataFrame, float, float]:
    """Daily Tmax, Tmin [°C], RHmax, RHmin [%], Rs [MJ m-2 d-1], u2 [m s-1] of a TMY3 file.

    Returns the table indexed by date in :data:`CALENDAR_YEAR`, the latitude [rad] and the
    elevation [m].
    """
    hourly, meta = pvlib.iotools.read_tmy3(TMY3_DIR / filename, map_variables=True)
    # Hour-ending stamps 01:00..24:00 -> the start of each hour, from the file's own columns.
    date = pd.to_datetime(hourly["Date (MM/DD/YYYY)"], format="%m/%d/%Y")
    hour_end = hourly["Time (HH:MM)"].str.slice(0, 2).astype(int)
    hour_start = pd.DatetimeIndex(date + pd.to_timedelta(hour_end - 1, unit="h"))
    day = pd.DatetimeIndex(
        pd.to_datetime({"year": CALENDAR_YEAR, "month": hour_start.month, "day": hour_start.day})
    )
    by_day = hourly.set_index(day).groupby(level=0)
    daily = pd.DataFrame(
        {
            "tmax": by_day["temp_air"].max(),
            "tmin": by_day["temp_air"].min(),
            "rhmax": by_day["relative_humidity"].max(),
            "rhmin": by_day["relative_humidity"].min(),
            "rs": by_day["ghi"].sum() * WH_TO_MJ,
            "u2": wind_speed_at_2m(by_day["wind_speed"].mean(), WIND_HEIGHT),  # FAO-56 eq. 47
            "hours": by_day.size(),
        }
    )
    assert len(daily) == 365 and (daily["hours"] == 24).all()
    return daily, np.deg2rad(meta["latitude"]), meta["altitude"]


def clear_sky_ratio(
    daily: pd.DataFrame, latitude: float, elevation: float
) -> tuple[np.ndarray, np.ndarray]:
    """Unbounded Rs/Rso of each day and Rso itself [MJ m-2 d-1], FAO-56 eqs. 21 and 37."""
    ra = extraterrestrial_radiation_daily(latitude, daily.index.dayofyear.to_numpy())
    rso = clear_sky_shortwave_daily(ra, elevation)
    return daily["rs"].to_numpy() / rso, rso


def pyet_eto(daily: pd.DataFrame, latitude: float, elevation: float, **kwargs) -> pd.Series:
    """pyet's FAO-56 Penman-Monteith on the daily table, unclipped."""
    return pyet.pm_fao56(
        (daily["tmax"] + daily["tmin"]) / 2.0,
        daily["u2"],
        tmax=daily["tmax"],
        tmin=daily["tmin"],
        rhmax=daily["rhmax"],
        rhmin=daily["rhmin"],
        elevation=elevation,
        lat=latitude,
        albedo=ALBEDO,
        clip_zero=False,
        **kwargs,
    )


@pytest.mark.parametrize("filename", STATIONS)
def test_reference_et_daily_matches_pyet_every_day_of_a_tmy3_year(filename):
    daily, latitude, elevation = daily_weather(filename)

    expected = pyet_eto(daily, latitude, elevation, rs=daily["rs"])
    got = reference_et_daily(
        daily["tmax"].to_numpy() + ZERO_CELSIUS,  # °C + 273.15, see "Kelvin" above
        daily["tmin"].to_numpy() + ZERO_CELSIUS,
        daily["u2"].to_numpy(),
        daily["rs"].to_numpy(),
        latitude,
        daily.index.dayofyear.to_numpy(),  # the same dates pyet reads from the index
        elevation,
        rh_max=daily["rhmax"].to_numpy(),
        rh_min=daily["rhmin"].to_numpy(),
        reference="short",
        albedo=ALBEDO,
        stefan_boltzmann=FAO_STEFAN_BOLTZMANN_DAILY,
        ground_heat_flux=0.0,
    )
    difference = np.abs(got - expected.to_numpy())
    assert difference.max() < TOLERANCE, (
        f"{filename}: max |ETo - pyet| {difference.max():.4f} mm/d on "
        f"{daily.index[difference.argmax()].date()}"
    )

    # The comparison covers what it is meant to: no polar-winter rule, and dark days on which
    # the lower bound Rs/Rso >= 0.3 acts.
    ratio, rso = clear_sky_ratio(daily, latitude, elevation)
    assert rso.min() > MIN_CLEAR_SKY_SHORTWAVE_DAILY
    dark = ratio < 0.3
    assert dark.any()

    # Worked comparison figure: FAO-56 eq. 39 as printed (Rs/Rso capped at 1 only), through
    # pyet's Penman-Monteith, differs by far more than the tolerance on the dark days.
    ea = pyet.calc_ea(
        tmax=daily["tmax"], tmin=daily["tmin"], rhmax=daily["rhmax"], rhmin=daily["rhmin"]
    )
    t4 = ((daily["tmax"] + 273.16) ** 4 + (daily["tmin"] + 273.16) ** 4) / 2.0
    fcd_unbounded = 1.35 * np.minimum(ratio, 1.0) - 0.35
    rnl_unbounded = FAO_STEFAN_BOLTZMANN_DAILY * t4 * (0.34 - 0.14 * np.sqrt(ea)) * fcd_unbounded
    rn_unbounded = (1.0 - ALBEDO) * daily["rs"] - rnl_unbounded
    unbounded = pyet_eto(daily, latitude, elevation, rn=rn_unbounded)
    unbounded_difference = np.abs(unbounded - expected).to_numpy()
    assert unbounded_difference[~dark].max() < 1e-9  # the forms agree wherever 0.3 <= Rs/Rso
    assert unbounded_difference[dark].max() > TOLERANCE  # measured 0.173 and 0.163 mm/d


def test_net_longwave_daily_bounds_relative_shortwave_worked_example():
    """Rs/Rso = 3/20 = 0.15 is raised to 0.3, so fcd = 1.35 x 0.3 - 0.35 = 0.055.

    Tmax 288.15 K, Tmin 278.15 K, ea 0.9 kPa, CODATA daily sigma 4.899e-9 MJ m-2 d-1 K-4:
    sigma (Tmax^4 + Tmin^4)/2 = 31.55 MJ m-2 d-1, 0.34 - 0.14 sqrt(0.9) = 0.2072, so
    Rnl = 31.55 x 0.2072 x 0.055 = +0.36 MJ m-2 d-1 (a loss). Unbounded, fcd would be
    1.35 x 0.15 - 0.35 = -0.1475 and Rnl = -0.96 MJ m-2 d-1, a net longwave gain.
    """
    tmax, tmin, ea, rs, rso = 288.15, 278.15, 0.9, 3.0, 20.0
    t4 = (tmax**4 + tmin**4) / 2.0
    humidity_term = 0.34 - 0.14 * np.sqrt(ea)
    ratio = min(max(rs / rso, 0.3), 1.0)  # ASCE-EWRI (2005) bounds
    expected = STEFAN_BOLTZMANN_DAILY * t4 * humidity_term * (1.35 * ratio - 0.35)
    unbounded = STEFAN_BOLTZMANN_DAILY * t4 * humidity_term * (1.35 * rs / rso - 0.35)

    got = net_longwave_daily(tmax, tmin, ea, rs, rso)

    assert abs(got - expected) < 1e-9
    assert round(expected, 2) == 0.36
    assert round(unbounded, 2) == -0.96
