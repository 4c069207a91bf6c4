"""Incoming longwave from the two sky-emissivity models against a real tower month (DE-Tha).

What is compared
----------------
The package offers two clear-sky emissivities for the incoming (atmospheric) longwave
``longwave_emitted(eps_a, Ta) = eps_a sigma Ta^4``:

- transmissivity-based, Bastiaanssen (1995): ``eps_a = 0.85 (-ln tau)^0.09``. Without measured
  shortwave the tool takes tau as the clear-sky transmissivity 0.75 + 2e-5 z (FAO-56 eq. 37
  form); at the tower's 380 m that is tau = 0.7576 and eps_a = 0.7574 for every half-hour.
- vapour-pressure-based, Brutsaert (1975): ``eps_a = 1.24 (ea / Ta)^(1/7)``, ea in hPa. Here
  ea = es(Ta) - VPD, es from FAO-56 eq. 11 (``turbulence.saturation_vapour_pressure``), VPD as
  measured at the tower (kPa).

Both are run on the tower's air temperature and VPD and compared with the tower's measured
incoming longwave ``LW_down`` (FLUXNET2015 LW_IN_F), half-hour by half-hour. Bias = model -
measured, W m-2.

How the tower is treated
------------------------
``LW_down`` is a direct measurement by an upward-looking radiometer (pyrgeometer). FLUXNET2015's
LW_IN_F is gap-filled where the measurement is missing, and the file carries no flag for it, so
gap-filled values cannot be excluded here (Tair and VPD, which have flags, are all measured).
It is not derived from the turbulent fluxes, so the tower's energy-balance non-closure does not
touch it, and no closure correction is applied. The air temperature and humidity are measured
at the tower top (42 m over a 26.5 m spruce canopy, bigleaf vignette), higher than the
screen level both formulas were written for; that is part of what is being tested, not
corrected.

Selection of "clear mid-mornings"
---------------------------------
Time stamps are local standard time (UTC+1) and ``hour`` is the START of the half-hour
(PROVENANCE.md of the data set). For each half-hour the midpoint (start + 15 min) is taken, and:

1. *Mid-morning*: the local apparent solar time of the midpoint, UTC + longitude/15 h + the
   equation of time (pvlib's ``get_solarposition``), lies in [08:30, 11:30]. On every day of
   the month exactly the six half-hours starting 08:30 ... 11:00 clock time qualify (their
   midpoints fall at solar 08:36 ... 11:11); no midpoint is within 5 min of either edge.
2. *Clear*: estimated incoming shortwave >= 0.72 x the clear-sky global horizontal irradiance.
   The shortwave is estimated from PPFD as PPFD / 2.04 umol J-1 (the ratio of PAR photons to
   global shortwave joules; 2.04 is a common-practice value, from memory, measured values scatter
   around 1.9-2.3). The clear-sky reference is pvlib's Ineichen-Perez model with pvlib's bundled
   monthly Linke-turbidity climatology (``Location.get_clearsky(model="ineichen")``): it is an
   instantaneous model that follows the air mass through the morning, whereas the 0.75 Ra-type
   reference of FAO-56 eq. 37 is a daily relation that, applied at a single mid-morning instant,
   lies 37-71 W m-2 above it in the selected half-hours. 0.72 rather than the round 0.7: one
   half-hour (4 June, 11:00) has a ratio of 0.70003, so at 0.7 a rounding-level change in pvlib
   would flip the count; no mid-morning half-hour has a ratio between 0.704 and 0.736. At 0.7
   the figures below change by less than 0.3 W m-2.
3. *Quality*: Tair_qc and VPD_qc in {0, 1} (bigleaf's ``good.quality = c(0, 1)``; in this month
   every flag is 0), and PPFD present.

Of 180 mid-morning half-hours (30 days x 6) 93 pass, on 21 days.

Measured (written while making this test; model - measured LW_down, W m-2)
----------------------------------------------------------------------------
================================  ==  =========  ====  =====  =====
model                              n  mean bias    SD    min    max
================================  ==  =========  ====  =====  =====
Bastiaanssen, tau = 0.7576        93      -21.6  13.9  -65.5   +6.8
Brutsaert, ea = es(Ta) - VPD      93      -13.8  14.1  -46.2  +17.3
Bastiaanssen, tau from PPFD (*)   93      -13.1  11.0  -40.8   +8.4
================================  ==  =========  ====  =====  =====

(*) secondary: tau = (PPFD / 2.04) / (Gsc dr cos(zenith)), the half-hour's own shortwave
over the extraterrestrial shortwave on a horizontal surface (0.51-0.80 in the selection).

Both clear-sky models read low on average; the vapour-pressure model by about 8 W m-2 less
than the transmissivity model. Part of the negative bias is cloud the PPFD test cannot see
(clouds away from the sun add longwave but hardly dim the direct beam); the largest
deficits (-65 and -53 W m-2) are on 11 June, a humid morning with LW_down above 400 W m-2.
Sensitivity, measured the same way: keeping only the 10 days whose six mid-morning half-hours
all pass gives n = 60, Bastiaanssen -18.6 (-37.3 to +6.8), Brutsaert -10.1. Taking the stamps
as UTC instead (sun positions computed for an hour later, so the window moves to 07:30-10:30
clock time)
gives n = 84, Bastiaanssen -15.8 (-47.4 to +5.1), Brutsaert -7.6. An earlier estimate
(Bastiaanssen about -15, range -31 to +5; Brutsaert about -6) is not reproduced by the rule
above; it is close to the stamps-as-UTC variant, which PROVENANCE.md's time-stamp check rules
out.

Asserted
--------
- n = 93 half-hours on 21 days (any change of the selection shows up here first).
- each mean bias within +-3 W m-2 of the figure above. The data are fixed, so the figures are
  reproducible to rounding; 3 W m-2 is about a fifth of the half-hour SD and well below the
  8 W m-2 that separates the two models. It leaves room for changes that matter little, such as
  273.15 vs 273.16 K or a sigma to fewer digits (each < 0.1 W m-2), and catches real ones: an
  exponent or coefficient changed, ea in kPa given where hPa is meant (Brutsaert eps_a down by
  1 - 10^(-1/7) = 28 %, about -90 W m-2) or tau as 0.75 + 2e-4 z (tau 0.826, eps_a 0.732,
  about -10 W m-2); taking tau at sea level (0.75, eps_a up by 0.0024, about +1 W m-2) passes.
- |mean bias| of the vapour-pressure model < |mean bias| of the transmissivity model.

Sources
-------
- Pastorello, G. et al. (2020). The FLUXNET2015 dataset and the ONEFlux processing pipeline for
  eddy covariance data. Scientific Data 7, 225. doi:10.1038/s41597-020-0534-3.
- Knauer, J., El-Madany, T. S., Zaehle, S., Migliavacca, M. (2018). Bigleaf - An R package for
  the calculation of physical and physiological ecosystem properties from eddy covariance data.
  PLoS ONE 13(8): e0201114. doi:10.1371/journal.pone.0201114. (Source of the CSV: data set
  DE_Tha_Jun_2014; site DE-Tha, 50.96256 N, 13.56515 E, 380 m, ICOS station page.)
- Brutsaert, W. (1975). On a derivable formula for long-wave radiation from clear skies. Water
  Resources Research 11(5), 742-744.
- Bastiaanssen, W. G. M. (1995). Regionalization of surface flux densities and moisture
  indicators in composite terrain. PhD thesis, Wageningen Agricultural University.
- Allen, R. G. et al. (1998). FAO Irrigation and Drainage Paper 56, eqs. 11, 23, 37.
- Ineichen, P., Perez, R. (2002). A new airmass independent formulation for the Linke turbidity
  coefficient. Solar Energy 73, 151-157 (as implemented in pvlib; citation from memory).
"""

from __future__ import annotations

import functools
import hashlib
from pathlib import Path

import numpy as np
import pandas as pd
import pvlib
import pytest

from rasterbudget.physics import radiation, solar, turbulence
from rasterbudget.physics.constants import ZERO_CELSIUS

DATA_DIR = (
    Path(__file__).resolve().parents[2].parent / "shared" / "real" / "flux_tower_DE-Tha_2014-06"
)
CSV = DATA_DIR / "DE_Tha_Jun_2014.csv"
CSV_SHA256 = "75b11baaf6c6405362f3bd3e3efae69e40ccd1fb412010d0433559bf48bf333b"  # PROVENANCE.md

# Site: ICOS station page, via PROVENANCE.md
LATITUDE = 50.96256  # [deg N]
LONGITUDE = 13.56515  # [deg E]
ELEVATION = 380.0  # [m]
UTC_OFFSET_H = 1.0  # time stamps are local standard time, UTC+1 [h]

PPFD_PER_SHORTWAVE = 2.04  # PAR photons per joule of global shortwave, common practice [umol J-1]
CLEAR_FRACTION = 0.72  # estimated shortwave / clear-sky GHI, at least [-]; see module docstring
SOLAR_WINDOW_H = (8.5, 11.5)  # mid-morning, local apparent solar time of the midpoint [h]
GOOD_QC = (0, 1)  # bigleaf's good.quality

# Measured with the rule above (module docstring): W m-2
EXPECTED_HALF_HOURS = 93
EXPECTED_DAYS = 21
BIAS_BASTIAANSSEN = -21.6
BIAS_BRUTSAERT = -13.8
BIAS_BASTIAANSSEN_PPFD_TAU = -13.1
BIAS_MARGIN = 3.0  # [W m-2], see module docstring


def read_tower() -> pd.DataFrame:
    """The tower month as read from the CSV; fails (does not skip) when the file is missing."""
    if not CSV.is_file():
        pytest.fail(f"tower data missing: {CSV} (CI expects ../shared beside the repo)")
    return pd.read_csv(CSV)


def midpoints_utc(tower: pd.DataFrame) -> pd.DatetimeIndex:
    """Midpoint of each half-hour in UTC: local standard time (UTC+1), ``hour`` = start."""
    local_start = (
        pd.Timestamp(int(tower["year"].iloc[0]), 1, 1)
        + pd.to_timedelta(tower["doy"] - 1, unit="D")
        + pd.to_timedelta(tower["hour"], unit="h")
    )
    midpoint = local_start + pd.Timedelta(minutes=15) - pd.Timedelta(hours=UTC_OFFSET_H)
    return pd.DatetimeIndex(midpoint).tz_localize("UTC")


@functools.cache
def clear_mid_mornings() -> pd.DataFrame:
    """The selected half-hours with the modelled incoming longwave of each model.

    Columns added to the tower's: ``solar_time`` [h], ``shortwave`` (from PPFD) and
    ``clear_sky_ghi`` [W m-2], ``vapour_pressure`` [kPa], ``lw_bastiaanssen``,
    ``lw_brutsaert`` and ``lw_bastiaanssen_ppfd_tau`` [W m-2].
    """
    tower = read_tower()
    times = midpoints_utc(tower)

    # The sun at each midpoint (pvlib's SPA), and the local apparent solar time from the
    # equation of time: UTC + longitude / 15 + EoT.
    sun = pvlib.solarposition.get_solarposition(times, LATITUDE, LONGITUDE, altitude=ELEVATION)
    utc_hours = times.hour + times.minute / 60.0
    solar_time = (utc_hours + LONGITUDE / 15.0 + sun["equation_of_time"].to_numpy() / 60.0) % 24.0

    # Clearness: shortwave estimated from PPFD against Ineichen-Perez clear-sky GHI.
    site = pvlib.location.Location(LATITUDE, LONGITUDE, tz="UTC", altitude=ELEVATION)
    clear_sky_ghi = site.get_clearsky(times, model="ineichen", solar_position=sun)["ghi"]
    shortwave = tower["PPFD"].to_numpy() / PPFD_PER_SHORTWAVE

    data = tower.assign(
        solar_time=np.asarray(solar_time),
        shortwave=shortwave,
        clear_sky_ghi=clear_sky_ghi.to_numpy(),
        cos_zenith=np.cos(np.radians(sun["zenith"].to_numpy())),
    )
    keep = (
        data["solar_time"].between(*SOLAR_WINDOW_H)
        & (data["shortwave"] >= CLEAR_FRACTION * data["clear_sky_ghi"])  # NaN PPFD -> False
        & data["Tair_qc"].isin(GOOD_QC)
        & data["VPD_qc"].isin(GOOD_QC)
    )
    sel = data[keep].copy()

    air_temperature = sel["Tair"].to_numpy() + ZERO_CELSIUS  # [K]

    # Transmissivity-based: the tool's default tau without measured shortwave.
    tau_clear = radiation.clear_sky_transmissivity(ELEVATION)
    eps_bastiaanssen = radiation.atmospheric_emissivity_bastiaanssen(tau_clear)
    sel["lw_bastiaanssen"] = radiation.longwave_emitted(eps_bastiaanssen, air_temperature)

    # Vapour-pressure-based: ea = es(Ta) - VPD.
    saturation = turbulence.saturation_vapour_pressure(air_temperature)  # FAO-56 eq. 11 [kPa]
    vapour_pressure = saturation - sel["VPD"].to_numpy()  # [kPa]
    sel["vapour_pressure"] = vapour_pressure
    eps_brutsaert = radiation.atmospheric_emissivity_brutsaert(vapour_pressure, air_temperature)
    sel["lw_brutsaert"] = radiation.longwave_emitted(eps_brutsaert, air_temperature)

    # Secondary: tau from the half-hour's own (PPFD-estimated) shortwave.
    extraterrestrial = radiation.shortwave_in(
        sel["cos_zenith"].to_numpy(),
        solar.inverse_relative_distance(sel["doy"].to_numpy()),
        1.0,
    )
    tau_measured = sel["shortwave"].to_numpy() / extraterrestrial
    sel["tau_ppfd"] = tau_measured
    eps_measured_tau = radiation.atmospheric_emissivity_bastiaanssen(tau_measured)
    sel["lw_bastiaanssen_ppfd_tau"] = radiation.longwave_emitted(eps_measured_tau, air_temperature)
    return sel


def bias_summary(column: str) -> dict[str, float]:
    """n, mean, SD, min and max of model - measured LW_down over the selection. [W m-2]"""
    sel = clear_mid_mornings()
    bias = sel[column] - sel["LW_down"]
    return {
        "n": len(bias),
        "mean": float(bias.mean()),
        "sd": float(bias.std(ddof=1)),
        "min": float(bias.min()),
        "max": float(bias.max()),
    }


def test_tower_file_is_the_documented_one():
    """The CSV exists beside the repo and is byte-identical to the one PROVENANCE.md describes."""
    assert CSV.is_file(), f"tower data missing: {CSV}"
    assert hashlib.sha256(CSV.read_bytes()).hexdigest() == CSV_SHA256


def test_selection_of_clear_mid_mornings():
    """93 half-hours on 21 days pass; all have a sun well up and a plausible transmissivity."""
    sel = clear_mid_mornings()
    assert len(sel) == EXPECTED_HALF_HOURS
    assert sel["doy"].nunique() == EXPECTED_DAYS
    # Sanity of the time handling: mid-morning sun in June at 51 N is 42-61 degrees up.
    elevation_deg = np.degrees(np.arcsin(sel["cos_zenith"]))
    assert elevation_deg.min() > 38.0
    assert elevation_deg.max() < 65.0
    # Clear half-hours let through roughly half to four fifths of the extraterrestrial beam.
    assert sel["tau_ppfd"].between(0.45, 0.85).all()


@pytest.mark.parametrize(
    ("column", "expected"),
    [
        ("lw_bastiaanssen", BIAS_BASTIAANSSEN),
        ("lw_brutsaert", BIAS_BRUTSAERT),
        ("lw_bastiaanssen_ppfd_tau", BIAS_BASTIAANSSEN_PPFD_TAU),
    ],
)
def test_mean_bias_against_measured_longwave(column: str, expected: float):
    """Mean of model - measured LW_down is within BIAS_MARGIN of the figure measured once."""
    summary = bias_summary(column)
    assert summary["n"] == EXPECTED_HALF_HOURS
    assert summary["mean"] == pytest.approx(expected, abs=BIAS_MARGIN), summary


def test_vapour_pressure_model_is_closer_than_transmissivity_model():
    """Brutsaert's ea-based emissivity beats the fixed clear-sky-tau emissivity on average."""
    transmissivity = bias_summary("lw_bastiaanssen")
    vapour = bias_summary("lw_brutsaert")
    assert abs(vapour["mean"]) < abs(transmissivity["mean"]), (vapour, transmissivity)
