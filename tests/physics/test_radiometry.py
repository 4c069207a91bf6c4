"""Landsat radiometry against Planck's law, published relations, hand computations and a real scene.

Planck's law is written here from scipy.constants (CODATA), independently of the module:
:math:`B_\\lambda(T) = c_1 \\lambda^{-5} / (\\exp(c_2 / \\lambda T) - 1)` with
:math:`c_1 = 2hc^2` and :math:`c_2 = hc/k`, λ in µm and B in W m-2 sr-1 µm-1.

Values marked "from memory" were recalled, not read in the cited document (CHECKS.md rule).
The real-scene tests read ``../shared/real/landsat7_etm_p015r032_20020720`` (PROVENANCE.md there)
and fail, not skip, when it is missing.
"""

import hashlib
import json
import math
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import rasterio
from pvlib.irradiance import get_extra_radiation
from scipy import constants

from rasterbudget.physics import radiation, radiometry, solar

C1 = 2.0 * constants.h * constants.c**2 * 1e24  # 2hc² [W m-2 sr-1 µm-1 · µm^5]
C2 = constants.h * constants.c / constants.k * 1e6  # hc/k [µm K]

INPUT_KINDS = ["scalar", "ndarray"]

THERMAL_BANDS = [
    (sensor, band) for sensor, bands in radiometry.THERMAL_CONSTANTS.items() for band in bands
]

# Thermal band edges (µm), from memory: TM and ETM+ band 6 10.40–12.50 (Chander et al. 2009
# tables); TIRS band 10 10.60–11.19 and band 11 11.50–12.51 (USGS Landsat 8 handbook).
THERMAL_BAND_EDGES = {
    ("TM4", 6): (10.40, 12.50),
    ("TM5", 6): (10.40, 12.50),
    ("ETM+", 6): (10.40, 12.50),
    ("TIRS", 10): (10.60, 11.19),
    ("TIRS", 11): (11.50, 12.51),
}


def as_type(value, kind):
    return np.full(3, value) if kind == "ndarray" else value


def planck(wavelength_um, temperature):
    """Planck spectral radiance [W m-2 sr-1 µm-1] from scipy.constants, written independently."""
    return C1 / wavelength_um**5 / np.expm1(C2 / (wavelength_um * temperature))


def planck_constants(k2):
    """Effective wavelength λ = c2/K2 [µm] and the monochromatic K1 = 2hc²/λ⁵ there."""
    wavelength = C2 / k2
    return wavelength, C1 / wavelength**5


# ---------------------------------------------------------------------------------------
# Tables
# ---------------------------------------------------------------------------------------


def test_tables_are_read_only():
    with pytest.raises(TypeError):
        radiometry.ESUN["ETM+"] = {}
    with pytest.raises(TypeError):
        radiometry.ESUN["ETM+"][3] = 1.0
    with pytest.raises(TypeError):
        radiometry.THERMAL_CONSTANTS["TIRS"][10] = radiometry.ThermalConstants(1.0, 1.0)


def test_checks_md_thermal_constants():
    # CHECKS.md "Landsat products" (from memory there too): TM5, ETM+, TIRS band 10
    assert radiometry.THERMAL_CONSTANTS["TM5"][6] == (607.76, 1260.56)
    assert radiometry.THERMAL_CONSTANTS["ETM+"][6] == (666.09, 1282.71)
    assert radiometry.THERMAL_CONSTANTS["TIRS"][10] == (774.8853, 1321.0789)


@pytest.mark.parametrize(("sensor", "band"), THERMAL_BANDS)
def test_k1_k2_against_planck(sensor, band):
    # Planck's law: with λ = c2/K2, K1 should be 2hc²/λ⁵. The published constants are fits of
    # the band-averaged Planck function over each band's spectral response, not a single
    # wavelength, so they agree only to a tolerance: 1.5 % (largest measured: TM5, 1.17 %).
    k1, k2 = radiometry.THERMAL_CONSTANTS[sensor][band]
    wavelength, k1_planck = planck_constants(k2)
    low, high = THERMAL_BAND_EDGES[(sensor, band)]
    assert low < wavelength < high
    np.testing.assert_allclose(k1, k1_planck, rtol=0.015)


@pytest.mark.parametrize(("sensor", "band"), THERMAL_BANDS)
def test_brightness_temperature_of_planck_radiance(sensor, band):
    # A blackbody's radiance at the effective wavelength λ = c2/K2, converted with the table's
    # K1/K2, returns its temperature to within 1.1 K over 250–340 K (the K1 departure of the
    # previous test; largest measured: TM5, 1.04 K).
    k1, k2 = radiometry.THERMAL_CONSTANTS[sensor][band]
    wavelength, _ = planck_constants(k2)
    temperature = np.linspace(250.0, 340.0, 91)
    t_b = radiometry.brightness_temperature(planck(wavelength, temperature), k1, k2)
    np.testing.assert_allclose(t_b, temperature, rtol=0, atol=1.1)


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_brightness_temperature_inverts_planck_exactly(kind):
    # With the monochromatic constants K2 = c2/λ and K1 = c1/λ⁵, T = K2/ln(K1/L + 1) is the exact
    # inverse of Planck's law (independent Planck above).
    wavelength = 10.9  # [µm]
    k1, k2 = C1 / wavelength**5, C2 / wavelength
    for temperature in (200.0, 273.15, 300.0, 350.0):
        radiance = planck(wavelength, as_type(temperature, kind))
        t_b = radiometry.brightness_temperature(radiance, k1, k2)
        np.testing.assert_allclose(t_b, temperature, rtol=1e-12)
        assert np.shape(t_b) == np.shape(radiance)
        np.testing.assert_allclose(  # and the module's forward form is Planck's law
            radiometry.thermal_radiance(temperature, k1, k2), planck(wavelength, temperature)
        )


@pytest.mark.parametrize(("sensor", "band"), THERMAL_BANDS)
def test_thermal_radiance_round_trip(sensor, band):
    k1, k2 = radiometry.THERMAL_CONSTANTS[sensor][band]
    temperature = np.linspace(200.0, 350.0, 16)
    radiance = radiometry.thermal_radiance(temperature, k1, k2)
    np.testing.assert_allclose(
        radiometry.brightness_temperature(radiance, k1, k2), temperature, rtol=1e-12
    )


def test_brightness_temperature_of_non_positive_radiance_is_nan():
    k1, k2 = radiometry.THERMAL_CONSTANTS["ETM+"][6]
    t_b = radiometry.brightness_temperature(np.array([-1.0, 0.0, 10.0]), k1, k2)
    assert np.isnan(t_b[:2]).all()
    assert np.isfinite(t_b[2])


def test_esun_against_a_blackbody_sun():
    # Plausibility, not a published check: a 5772 K blackbody of radius 6.957e8 m (IAU 2015
    # nominal solar values, from memory) at 1 au, averaged over each ETM+ band's limits
    # (metadata.json of the real scene, from the source's R/DOS.R). The real solar spectrum
    # departs from a blackbody by up to about 22 % here (computed: band 5), so 25 % is the
    # bound; it catches a misplaced decimal point or a swapped band, not small errors. The
    # same blackbody integrates to 1361 W m-2, the total solar irradiance (Kopp & Lean 2011,
    # 1360.8 ± 0.5 W m-2, from memory).
    def blackbody_sun(wavelength_um):
        return math.pi * planck(wavelength_um, 5772.0) * (6.957e8 / constants.au) ** 2

    wavelength = np.linspace(0.1, 100.0, 2_000_001)
    total = np.sum(blackbody_sun(wavelength)) * (wavelength[1] - wavelength[0])
    np.testing.assert_allclose(total, 1361.0, atol=2.0)

    limits = read_metadata()["facts"]["band_wavelength_limits"]["bands"]
    for band, (low, high) in limits.items():
        band_wavelengths = np.linspace(low, high, 1001)
        mean = np.mean(blackbody_sun(band_wavelengths))
        np.testing.assert_allclose(radiometry.ESUN["ETM+"][int(band)], mean, rtol=0.25)


# ---------------------------------------------------------------------------------------
# Digital numbers to radiance
# ---------------------------------------------------------------------------------------


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_radiance_from_dn_round_trip(kind):
    # L = M_L Q + A_L, then Q = (L - A_L)/M_L recovers every 8- and 16-bit DN used
    dn = np.arange(1, 65536, 97) if kind == "ndarray" else 31415
    mult, add = 3.3420e-4, 0.1  # OLI/TIRS-like magnitudes
    radiance = radiometry.radiance_from_dn(dn, mult, add)
    np.testing.assert_allclose((radiance - add) / mult, dn, rtol=1e-12)
    # 8-bit DN are not multiplied in 8-bit arithmetic
    np.testing.assert_allclose(radiometry.radiance_from_dn(np.uint8(200), 2, -1), 399.0)


@pytest.mark.parametrize(("qcal_min", "qcal_max"), [(0.0, 255.0), (1.0, 255.0)])
def test_lmin_lmax_form(qcal_min, qcal_max):
    # Chander et al. (2009) eq. 1: LMIN at QCALMIN, LMAX at QCALMAX, linear between; the same
    # line as eq. 2 with Grescale = (LMAX - LMIN)/(QCALMAX - QCALMIN) and
    # Brescale = LMIN - Grescale QCALMIN
    lmin, lmax = -5.0, 152.9
    dn = np.arange(0, 256)
    radiance = radiometry.radiance_from_dn_lmin_lmax(
        dn, lmin, lmax, qcal_min=qcal_min, qcal_max=qcal_max
    )
    np.testing.assert_allclose(radiance[int(qcal_min)], lmin, rtol=1e-12)
    np.testing.assert_allclose(radiance[int(qcal_max)], lmax, rtol=1e-12)
    grescale = (lmax - lmin) / (qcal_max - qcal_min)
    brescale = lmin - grescale * qcal_min
    np.testing.assert_allclose(
        radiance, radiometry.radiance_from_dn(dn, grescale, brescale), rtol=1e-12, atol=1e-12
    )
    # DN -> radiance -> DN
    np.testing.assert_allclose(
        (radiance - lmin) * (qcal_max - qcal_min) / (lmax - lmin) + qcal_min, dn, atol=1e-9
    )


def test_lmin_lmax_reproduce_the_scene_rescaling():
    # ETM+ LMIN/LMAX after July 2000 (Chander et al. 2009 ETM+ table, from memory): bands 1-5,
    # 7 high gain; band 6 low gain (6-1) and high gain (6-2). With QCALMIN = 0, QCALMAX = 255
    # they give the scene's documented reflective Grescale/Brescale, and with QCALMIN = 1 the
    # thermal gain/bias (metadata.json, from the source's man/july.Rd and R/thermalband.R),
    # to half a unit of the printed last digit. This confirms the recalled LMIN/LMAX and shows
    # which QCALMIN each set of documented coefficients assumes.
    recalled = {
        "1": (-6.2, 191.6),
        "2": (-6.4, 196.5),
        "3": (-5.0, 152.9),
        "4": (-5.1, 157.4),
        "5": (-1.0, 31.06),
        "7": (-0.35, 10.80),
        "61": (0.0, 17.04),
        "62": (3.2, 12.65),
    }
    facts = read_metadata()["facts"]
    for band, (lmin, lmax) in recalled.items():
        if band in ("61", "62"):
            documented = facts["thermal_rescaling"]["bands"][band]
            gain, bias, qcal = documented["gain"], documented["bias"], (1.0, 255.0)
            gain_tol, bias_tol = 5e-7, 0.005
        else:
            documented = facts["reflective_rescaling"]["bands"][band]
            gain, bias, qcal = documented["Grescale"], documented["Brescale"], (0.0, 255.0)
            gain_tol, bias_tol = 5e-6, 0.005
        line = radiometry.radiance_from_dn_lmin_lmax(
            np.array([0.0, 1.0]), lmin, lmax, qcal_min=qcal[0], qcal_max=qcal[1]
        )
        np.testing.assert_allclose(line[1] - line[0], gain, rtol=0, atol=gain_tol, err_msg=band)
        np.testing.assert_allclose(line[0], bias, rtol=0, atol=bias_tol, err_msg=band)


# ---------------------------------------------------------------------------------------
# Top-of-atmosphere reflectance and the Earth–Sun distance
# ---------------------------------------------------------------------------------------


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_toa_reflectance_from_radiance(kind):
    # independent computation of Chander et al. (2009) eq. 5: π L d² / (ESUN cos θs)
    radiance, esun, distance, zenith = as_type(80.0, kind), 1039.0, 1.0160, math.radians(28.6)
    expected = math.pi * 80.0 * 1.0160**2 / (1039.0 * math.cos(math.radians(28.6)))
    rho = radiometry.toa_reflectance_from_radiance(radiance, esun, distance, zenith)
    np.testing.assert_allclose(rho, expected, rtol=1e-14)
    assert np.shape(rho) == np.shape(radiance)
    # a white Lambertian surface above the atmosphere reflects L = ESUN cos θs / (π d²): ρ = 1
    white = esun * math.cos(zenith) / (math.pi * distance**2)
    np.testing.assert_allclose(
        radiometry.toa_reflectance_from_radiance(white, esun, distance, zenith), 1.0, rtol=1e-14
    )


def test_toa_reflectance_from_dn_agrees_with_the_radiance_path():
    # A reflectance rescaling derived from a radiance rescaling, M_ρ = π d² M_L / ESUN and
    # A_ρ = π d² A_L / ESUN, with sin(elevation) = cos(zenith), must give the same reflectance
    # by both routes (USGS L8 handbook form against Chander et al. 2009 eq. 5).
    dn = np.arange(1, 256)
    mult_l, add_l, esun, distance = 0.63725, -5.1, 1039.0, 0.9833
    elevation = math.radians(35.0)
    scale = math.pi * distance**2 / esun
    from_dn = radiometry.toa_reflectance_from_dn(dn, scale * mult_l, scale * add_l, elevation)
    from_radiance = radiometry.toa_reflectance_from_radiance(
        radiometry.radiance_from_dn(dn, mult_l, add_l), esun, distance, math.pi / 2 - elevation
    )
    np.testing.assert_allclose(from_dn, from_radiance, rtol=1e-12)
    # and by hand for one DN: (2e-5 · 10000 - 0.1) / sin 35°
    np.testing.assert_allclose(
        radiometry.toa_reflectance_from_dn(10000, 2.0e-5, -0.1, elevation),
        0.1 / math.sin(elevation),
        rtol=1e-12,
    )


def test_earth_sun_distance_against_spencer():
    # Independent series: Spencer (1971) for (r0/r)², through pvlib.irradiance.
    # get_extra_radiation(method="spencer"); a fit by day of year that ignores the year's phase,
    # so it agrees with the ephemeris to 6e-4 au (measured 4.9e-4 in 2002)
    for day in pd.date_range("2002-01-01 15:30", "2002-12-31 15:30", freq="7D", tz="UTC"):
        spencer = get_extra_radiation(day.dayofyear, solar_constant=1.0, method="spencer") ** -0.5
        distance = radiometry.earth_sun_distance(day.to_pydatetime())
        np.testing.assert_allclose(distance, spencer, rtol=0, atol=6e-4)


def test_earth_sun_distance_extremes():
    # Perihelion and aphelion distances a(1 ∓ e) with a = 1 au and e = 0.0167086 (J2000,
    # from memory), to 5e-5 au (the Moon moves the Earth up to 3e-5 au off the Earth–Moon
    # barycentre's orbit); perihelion in the first days of January, aphelion in early July
    # (each found strictly inside the window searched).
    for start, end, expected, first, last in (
        ("2002-01-01", "2002-01-12", 1.0 - 0.0167086, 1, 6),
        ("2002-06-28", "2002-07-12", 1.0 + 0.0167086, 182, 189),
    ):
        days = pd.date_range(f"{start} 12:00", f"{end} 12:00", freq="D", tz="UTC")
        distance = np.array([radiometry.earth_sun_distance(day) for day in days])
        extreme = distance.argmin() if expected < 1.0 else distance.argmax()
        np.testing.assert_allclose(distance[extreme], expected, rtol=0, atol=5e-5)
        assert first <= days[extreme].dayofyear <= last
        assert 0 < extreme < len(days) - 1


def test_earth_sun_distance_matches_solar_ephemeris():
    # the package's NREL SPA ephemeris gives 1/d² for the same instant
    instant = datetime(2002, 7, 20, 15, 30, tzinfo=UTC)
    inverse_distance = solar.solar_ephemeris(instant, 40.5, -76.2).inverse_distance
    np.testing.assert_allclose(
        radiometry.earth_sun_distance(instant), inverse_distance**-0.5, rtol=1e-12
    )
    naive = radiometry.earth_sun_distance(datetime(2002, 7, 20, 15, 30))
    assert naive == radiometry.earth_sun_distance(instant)


# ---------------------------------------------------------------------------------------
# Surface temperature (single-channel radiative transfer)
# ---------------------------------------------------------------------------------------


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_surface_temperature_round_trip_through_the_rte(kind):
    # Forward radiative transfer written in the test from Planck's law at λ = 10.9 µm:
    # L = τ [ε B(Ts) + (1 - ε) L↓] + L↑, with τ = 0.78, an isothermal-layer path radiance
    # L↑ = (1 - τ) B(285 K) and sky radiance L↓ = B(262 K); the retrieval must return Ts.
    wavelength = 10.9
    k1, k2 = C1 / wavelength**5, C2 / wavelength
    transmittance = 0.78
    upwelling = (1.0 - transmittance) * planck(wavelength, 285.0)
    downwelling = planck(wavelength, 262.0)
    for emissivity in (0.95, 0.973, 0.99):
        surface = np.linspace(270.0, 330.0, 7) if kind == "ndarray" else 301.7
        at_sensor = (
            transmittance
            * (emissivity * planck(wavelength, surface) + (1.0 - emissivity) * downwelling)
            + upwelling
        )
        t_s = radiometry.surface_temperature(
            at_sensor, k1, k2, emissivity, transmittance, upwelling, downwelling
        )
        np.testing.assert_allclose(t_s, surface, rtol=1e-12)
        assert np.shape(t_s) == np.shape(surface)


def test_surface_temperature_defaults_reduce_to_brightness_temperature():
    k1, k2 = radiometry.THERMAL_CONSTANTS["TIRS"][10]
    radiance = np.array([6.0, 9.5, 12.0])
    t_b = radiometry.brightness_temperature(radiance, k1, k2)
    np.testing.assert_allclose(radiometry.surface_temperature(radiance, k1, k2, 1.0), t_b)
    # ε < 1 without atmosphere: B(Ts) = L/ε, the emissivity-corrected brightness temperature
    t_s = radiometry.surface_temperature(radiance, k1, k2, 0.97)
    np.testing.assert_allclose(
        t_s, radiometry.brightness_temperature(radiance / 0.97, k1, k2), rtol=1e-12
    )
    assert (t_s > t_b).all()


def test_surface_temperature_without_surface_signal_is_nan():
    # path radiance alone (R_c <= 0) has no surface temperature
    k1, k2 = radiometry.THERMAL_CONSTANTS["ETM+"][6]
    t_s = radiometry.surface_temperature(np.array([1.0, 9.0]), k1, k2, 0.98, 0.8, 2.0, 5.0)
    assert np.isnan(t_s[0]) and np.isfinite(t_s[1])


# ---------------------------------------------------------------------------------------
# Vegetation indices, emissivity and albedo
# ---------------------------------------------------------------------------------------


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_ndvi_and_savi_known_values(kind):
    red, nir = as_type(0.05, kind), as_type(0.45, kind)
    np.testing.assert_allclose(radiometry.ndvi(red, nir), 0.8, rtol=1e-15)  # 0.40 / 0.50
    # Huete (1988): (1 + 0.5)(0.40)/(0.50 + 0.5) = 0.6
    np.testing.assert_allclose(radiometry.savi(red, nir), 0.6, rtol=1e-15)
    # L = 0 gives NDVI (Huete 1988)
    np.testing.assert_allclose(radiometry.savi(red, nir, soil_factor=0.0), 0.8, rtol=1e-15)
    np.testing.assert_allclose(radiometry.ndvi(0.3, 0.1), -0.5, rtol=1e-15)
    assert np.isnan(radiometry.ndvi(0.0, 0.0))


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_lai_from_savi(kind):
    # by hand: LAI = -ln((0.69 - 0.4)/0.59)/0.91 = 0.780477...
    expected = -math.log((0.69 - 0.4) / 0.59) / 0.91
    np.testing.assert_allclose(radiometry.lai_from_savi(as_type(0.4, kind)), expected, rtol=1e-13)
    # inverse of the Baret & Guyot (1991) form SAVI = 0.69 + (0.10 - 0.69) exp(-0.91 LAI)
    lai = np.linspace(0.0, 5.5, 12)
    forward = 0.69 + (0.10 - 0.69) * np.exp(-0.91 * lai)
    np.testing.assert_allclose(radiometry.lai_from_savi(forward), lai, rtol=1e-9, atol=1e-12)
    # bounds: 0 at and below bare ground, lai_max at and above the dense-canopy asymptote
    np.testing.assert_array_equal(
        radiometry.lai_from_savi(np.array([-0.2, 0.05, 0.10, 0.69, 0.8])), [0, 0, 0, 6, 6]
    )
    assert radiometry.lai_from_savi(0.6875, lai_max=5.0) == 5.0


def test_fractional_vegetation_cover():
    # Carlson & Ripley (1997) with Sobrino et al.'s (2004) thresholds 0.2 and 0.5
    ndvi = np.array([-0.1, 0.2, 0.35, 0.5, 0.8])
    np.testing.assert_allclose(
        radiometry.fractional_vegetation_cover(ndvi), [0.0, 0.0, 0.25, 1.0, 1.0], atol=1e-15
    )
    # the Pv inside radiation.surface_emissivity_from_ndvi: ε = εs + (εv - εs) Pv
    eps = radiation.surface_emissivity_from_ndvi(ndvi)
    np.testing.assert_allclose(
        (eps - 0.97) / (0.99 - 0.97), radiometry.fractional_vegetation_cover(ndvi), atol=1e-12
    )


def test_thermal_emissivity_from_ndvi():
    # Sobrino et al. (2004), from memory: the mixed-pixel line m Pv + n with
    # m = εv - εs - (1 - εs) F εv and n = εs + (1 - εs) F εv, εs = 0.97, εv = 0.99, F = 0.55,
    # rounds to 0.004 Pv + 0.986 (computed here)
    eps_s, eps_v, shape = 0.97, 0.99, 0.55
    assert round(eps_v - eps_s - (1 - eps_s) * shape * eps_v, 3) == 0.004
    assert round(eps_s + (1 - eps_s) * shape * eps_v, 3) == 0.986

    ndvi = np.array([0.1, 0.2, 0.35, 0.5, 0.7])
    red = np.array([0.2, 0.1, 0.08, 0.05, 0.03])
    eps = radiometry.thermal_emissivity_from_ndvi(ndvi, red)
    np.testing.assert_allclose(
        eps,
        [
            0.979 - 0.035 * 0.2,  # bare soil: red-reflectance rule
            0.986,  # Pv = 0
            0.004 * 0.25 + 0.986,  # Pv = 0.25
            0.990,  # Pv = 1
            0.990,  # full cover
        ],
        rtol=0,
        atol=1e-12,
    )
    assert radiometry.thermal_emissivity_from_ndvi(0.35, 0.08) == pytest.approx(0.987)


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_broadband_emissivity_from_lai(kind):
    # ε0 = 0.95 + 0.01 LAI up to LAI 3, then 0.98 (CHECKS.md, from memory)
    for lai, expected in ((0.0, 0.95), (1.5, 0.965), (3.0, 0.98), (4.0, 0.98), (8.0, 0.98)):
        eps = radiometry.broadband_emissivity_from_lai(as_type(lai, kind))
        np.testing.assert_allclose(eps, expected, rtol=0, atol=1e-15)
        assert np.shape(eps) == np.shape(as_type(lai, kind))


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_liang_albedo_by_hand(kind):
    # Liang (2001) TM/ETM+ weights on a made-up reflectance vector, by hand:
    # 0.356·0.10 + 0.130·0.08 + 0.373·0.30 + 0.085·0.20 + 0.072·0.10 - 0.0018
    # = 0.0356 + 0.0104 + 0.1119 + 0.0170 + 0.0072 - 0.0018 = 0.1803
    bands = [as_type(value, kind) for value in (0.10, 0.08, 0.30, 0.20, 0.10)]
    np.testing.assert_allclose(radiometry.albedo_liang_tm_etm(*bands), 0.1803, rtol=1e-13)
    # the OLI adaptation (bands 2, 4, 5, 6, 7) uses the same weights
    np.testing.assert_allclose(radiometry.albedo_liang_oli_adapted(*bands), 0.1803, rtol=1e-13)
    # a flat spectrum: weights sum to 1.016
    np.testing.assert_allclose(
        radiometry.albedo_liang_tm_etm(0.5, 0.5, 0.5, 0.5, 0.5), 1.016 * 0.5 - 0.0018
    )


# ---------------------------------------------------------------------------------------
# Real data: Landsat 7 ETM+, WRS-2 path 15 row 32, 2002-07-20 (south-eastern Pennsylvania)
# ---------------------------------------------------------------------------------------

SCENE_DIR = (
    Path(__file__).resolve().parents[2].parent
    / "shared"
    / "real"
    / "landsat7_etm_p015r032_20020720"
)
SCENE_STEM = "L7ETM_p015r032_20020720"
CLOUD_BAND1_DN = 130  # B1 brighter than this: cloud (PROVENANCE.md's rule, blue part only)


def read_metadata() -> dict:
    path = SCENE_DIR / "metadata.json"
    if not path.is_file():
        pytest.fail(f"scene metadata missing: {path} (CI expects ../shared beside the repo)")
    return json.loads(path.read_text())


def read_band(band: str) -> np.ndarray:
    """One band's DN as stored, after checking its SHA-256 against metadata.json."""
    path = SCENE_DIR / f"{SCENE_STEM}_B{band}.tif"
    if not path.is_file():
        pytest.fail(f"scene band missing: {path} (CI expects ../shared beside the repo)")
    listed = {entry["file"]: entry["sha256"] for entry in read_metadata()["files"]}
    assert hashlib.sha256(path.read_bytes()).hexdigest() == listed[path.name]
    with rasterio.open(path) as dataset:
        return dataset.read(1)


@pytest.fixture(scope="module")
def scene():
    """The scene's bands 1, 3, 4, 6-1 and 6-2 converted with the facts of metadata.json."""
    facts = read_metadata()["facts"]
    assert facts["sensor"]["value"] == "Landsat 7 ETM+"
    reflective = facts["reflective_rescaling"]["bands"]
    thermal = facts["thermal_rescaling"]["bands"]
    # The acquisition time is not documented; 15:30 UTC is the typical overpass
    # (metadata.json "typical_note"). d changes by under 3e-4 au a day, so the time is moot.
    day = datetime.fromisoformat(facts["acquisition_date"]["value"])
    distance = radiometry.earth_sun_distance(day.replace(hour=15, minute=30, tzinfo=UTC))
    zenith = math.radians(90.0 - facts["sun_elevation_deg"]["value"])

    out = {"distance": distance, "band1": read_band("1")}
    for band in ("3", "4"):
        radiance = radiometry.radiance_from_dn(
            read_band(band), reflective[band]["Grescale"], reflective[band]["Brescale"]
        )
        out[f"L{band}"] = radiance
        out[f"rho{band}"] = radiometry.toa_reflectance_from_radiance(
            radiance, radiometry.ESUN["ETM+"][int(band)], distance, zenith
        )
    k1, k2 = radiometry.THERMAL_CONSTANTS["ETM+"][6]
    for band in ("61", "62"):
        radiance = radiometry.radiance_from_dn(
            read_band(band), thermal[band]["gain"], thermal[band]["bias"]
        )
        out[f"L{band}"] = radiance
        out[f"T{band}"] = radiometry.brightness_temperature(radiance, k1, k2)
    out["ndvi"] = radiometry.ndvi(out["rho3"], out["rho4"])
    out["clear"] = out["band1"] <= CLOUD_BAND1_DN
    return out


def test_scene_conversion_regression(scene):
    # (computed) values measured with this module on 2002-07-20, regression only, not published
    np.testing.assert_allclose(scene["distance"], 1.01608, atol=5e-5)
    expected_means = {
        "L3": 28.801,  # [W m-2 sr-1 µm-1]
        "L4": 60.639,
        "rho3": 0.06940,  # [-]
        "rho4": 0.21560,
        "ndvi": 0.5231,
        "T61": 297.41,  # [K]
        "T62": 297.63,
    }
    for name, expected in expected_means.items():
        np.testing.assert_allclose(np.mean(scene[name]), expected, rtol=2e-4, err_msg=name)


def test_scene_reflectance_and_ndvi_in_published_ranges(scene):
    clear, ndvi = scene["clear"], scene["ndvi"]
    for name in ("rho3", "rho4"):
        assert (scene[name] > 0.0).all() and (scene[name] < 1.0).all(), name
    assert np.isfinite(ndvi).all() and (np.abs(ndvi) <= 1.0).all()
    # July, forested ridges and crops: the clear-sky median NDVI lies above Sobrino et al.'s
    # (2004) full-vegetation threshold 0.5 (measured 0.63), and below 0.9, the top of NDVI for
    # the densest green canopies (common practice; measured maximum 0.77)
    assert 0.5 < np.median(ndvi[clear]) < 0.9
    assert np.max(ndvi) < 0.9
    # green vegetation absorbs red and reflects near-infrared: over NDVI > 0.5 the median TOA
    # red reflectance is below 0.08 and the near-infrared above 0.15 (common practice for
    # top-of-atmosphere values; measured 0.045 and 0.236)
    vegetation = clear & (ndvi > 0.5)
    assert np.median(scene["rho3"][vegetation]) < 0.08
    assert np.median(scene["rho4"][vegetation]) > 0.15
    # clouds (B1 > 130 DN, 3.2 % of the window) are spectrally flat: median NDVI below Sobrino
    # et al.'s bare-soil threshold 0.2 (measured 0.08)
    assert 0.01 < np.mean(~clear) < 0.06
    assert np.median(ndvi[~clear]) < 0.2


def test_scene_brightness_temperatures_in_published_ranges(scene):
    clear, ndvi = scene["clear"], scene["ndvi"]
    t61, t62 = scene["T61"], scene["T62"]
    # The two band 6 datasets (low gain 6-1, high gain 6-2) measure the same radiance through
    # different calibrations: their brightness temperatures agree, median difference 0.22 K
    # (PROVENANCE.md, measured there with the same coefficients) and 5–95 % within ±1 K.
    difference = t62 - t61
    np.testing.assert_allclose(np.median(difference), 0.22, atol=0.05)
    assert np.abs(np.percentile(difference, [5, 95])).max() < 1.0
    # A late-morning July scene in south-central Pennsylvania: the clear-sky median lies within
    # 15–36 °C, the July mean daily minimum (about 20 °C) minus 5 K to the mean daily maximum
    # (about 31 °C) plus 5 K at Harrisburg, PA (NOAA 1991–2020 normals, from memory); at-sensor
    # brightness temperature in a humid summer atmosphere lies a few K below the skin
    # temperature. Measured: 296.5 K (6-1), 296.8 K (6-2).
    for t_b in (t61, t62):
        assert 288.15 < np.median(t_b[clear]) < 309.15
        assert np.isfinite(t_b).all() and 270.0 < t_b.min() and t_b.max() < 330.0
    # Cumulus tops are colder than the ground: at the ICAO standard lapse rate of 6.5 K/km a top
    # 1 km up is 6.5 K colder; 60 m thermal pixels mix cloud edges with ground, so the bound
    # is 4 K between medians (measured 8.4 K).
    assert np.median(t61[clear]) - np.median(t61[~clear]) > 4.0
    # Dense vegetation is cooler than sparse cover by day (the negative surface temperature /
    # NDVI slope, e.g. Sandholt, Rasmussen & Andersen 2002, Remote Sens. Environ. 79, from
    # memory): clear NDVI > 0.5 against NDVI < 0.2, by more than 2 K (measured 7.9 K)
    dense, sparse = clear & (ndvi > 0.5), clear & (ndvi < 0.2)
    assert np.median(t61[sparse]) - np.median(t61[dense]) > 2.0


def test_scene_surface_temperature_with_band_emissivity(scene):
    # Emissivity from NDVI (Sobrino et al. 2004) on top-of-atmosphere reflectance, and the
    # surface temperature without atmospheric correction (τ = 1, no path or sky radiance):
    # ε lies between Sobrino's soil and vegetation values 0.968–0.990 on clear land (measured
    # 0.971–0.990), and the emissivity correction raises the temperature by 0.5–2.5 K (measured
    # 0.64–2.10 K): at 11.2 µm and 300 K, dT/dε = -(T²/K2)(1 - exp(-K2/T)) / ε ≈ -70 K, so
    # ε = 0.99 adds about 0.7 K and ε = 0.971 about 2.0 K (computed from the Planck form).
    clear = scene["clear"]
    k1, k2 = radiometry.THERMAL_CONSTANTS["ETM+"][6]
    eps = radiometry.thermal_emissivity_from_ndvi(scene["ndvi"], scene["rho3"])
    assert (eps[clear] >= 0.968).all() and (eps[clear] <= 0.990).all()
    t_s = radiometry.surface_temperature(scene["L61"], k1, k2, eps)
    lift = (t_s - scene["T61"])[clear]
    assert (lift > 0.5).all() and (lift < 2.5).all()
