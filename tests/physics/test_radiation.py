"""Radiation terms against FAO-56 worked examples and computed reference values.

Published values are checked to half a unit of their last printed digit (CHECKS.md).
FAO examples are reproduced with FAO's own constants: sigma = 4.903e-9 MJ K-4 m-2 d-1 and
T + 273.16 in the longwave term.
"""

import numpy as np
import pytest

from rasterbudget.physics import radiation, solar, turbulence
from rasterbudget.physics.constants import (
    FAO_STEFAN_BOLTZMANN_DAILY,
    SOLAR_CONSTANT,
    STEFAN_BOLTZMANN,
    STEFAN_BOLTZMANN_DAILY,
    ZERO_CELSIUS,
)

FAO_KELVIN = 273.16  # FAO-56 eq. 39 writes T + 273.16
INPUT_KINDS = ["scalar", "ndarray"]


def as_type(value, kind):
    return np.full(3, value) if kind == "ndarray" else value


def dms(degrees, minutes=0.0):
    return np.radians(np.sign(degrees) * (abs(degrees) + minutes / 60.0))


# ---------------------------------------------------------------------------------------
# FAO-56 (Allen et al. 1998) Examples 10, 11, 12
# ---------------------------------------------------------------------------------------


def example_10_shortwave():
    # FAO-56 Example 10: 22°54' S, 15 May (J = 135), n = 7.1 h; Ra and N computed
    latitude = dms(-22, 54)
    ra = solar.extraterrestrial_radiation_daily(latitude, 135)  # FAO-56: 25.1
    n_max = solar.daylight_hours(latitude, 135)  # FAO-56: 10.9
    return radiation.shortwave_daily_from_sunshine(ra, 7.1, n_max)


def test_fao56_example_10_shortwave_from_sunshine():
    # FAO-56 (Allen et al. 1998) Example 10
    np.testing.assert_allclose(example_10_shortwave(), 14.5, rtol=0, atol=0.05)


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_fao56_example_10_with_printed_inputs(kind):
    # FAO-56 Example 10 with its printed Ra = 25.1 and N = 10.9 gives 14.45; FAO carries
    # unrounded Ra and N, so this is checked to 0.01 of the exact product instead.
    rs = radiation.shortwave_daily_from_sunshine(as_type(25.1, kind), 7.1, as_type(10.9, kind))
    np.testing.assert_allclose(rs, (0.25 + 0.50 * 7.1 / 10.9) * 25.1, rtol=1e-12)
    np.testing.assert_allclose(rs, 14.45, rtol=0, atol=0.005)


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_fao56_example_11_net_longwave(kind):
    # FAO-56 (Allen et al. 1998) Example 11: Tmax 25.1 °C, Tmin 19.1 °C, ea 2.1 kPa,
    # Rs 14.5, Rso 18.8 MJ m-2 d-1
    rs, rso = as_type(14.5, kind), 18.8
    np.testing.assert_allclose(rs / rso, 0.77, rtol=0, atol=0.005)  # FAO-56 Example 11
    rnl = radiation.net_longwave_daily(
        25.1 + FAO_KELVIN, 19.1 + FAO_KELVIN, 2.1, rs, rso, FAO_STEFAN_BOLTZMANN_DAILY
    )
    np.testing.assert_allclose(rnl, 3.5, rtol=0, atol=0.05)  # FAO-56 Example 11


def test_fao56_example_12_net_radiation():
    # FAO-56 (Allen et al. 1998) Example 12: alpha = 0.23, Rs from Example 10, Rnl from
    # Example 11. FAO carries the unrounded Rs (14.46): with the printed 14.5 Rns would be
    # 11.17, not the printed 11.1.
    rs = example_10_shortwave()
    rnl = radiation.net_longwave_daily(
        25.1 + FAO_KELVIN, 19.1 + FAO_KELVIN, 2.1, 14.5, 18.8, FAO_STEFAN_BOLTZMANN_DAILY
    )
    rns = radiation.net_radiation_daily(0.23, rs, 0.0)
    np.testing.assert_allclose(rns, 11.1, rtol=0, atol=0.05)  # FAO-56 Example 12
    rn = radiation.net_radiation_daily(0.23, rs, rnl)
    np.testing.assert_allclose(rn, 7.6, rtol=0, atol=0.05)  # FAO-56 Example 12 (memory)


# ---------------------------------------------------------------------------------------
# FAO-56 Examples 17 and 18: radiation parts of the ETo calculation
# ---------------------------------------------------------------------------------------


def daily_radiation_chain(latitude, day, elevation, sunshine, tmax_c, tmin_c, ea, sigma, kelvin):
    ra = solar.extraterrestrial_radiation_daily(latitude, day)
    n_max = solar.daylight_hours(latitude, day)
    rs = radiation.shortwave_daily_from_sunshine(ra, sunshine, n_max)
    rso = radiation.clear_sky_shortwave_daily(ra, elevation)
    rnl = radiation.net_longwave_daily(tmax_c + kelvin, tmin_c + kelvin, ea, rs, rso, sigma)
    rn = radiation.net_radiation_daily(0.23, rs, rnl)
    return {"Ra": ra, "N": n_max, "Rs": rs, "Rso": rso, "Rnl": rnl, "Rn": rn}


def example_17(sigma=FAO_STEFAN_BOLTZMANN_DAILY, kelvin=FAO_KELVIN):
    # FAO-56 Example 17: 13°44' N, z = 2 m, April (J = 105, from memory), Tmax 34.8 °C,
    # Tmin 25.6 °C, ea 2.85 kPa, n = 8.5 h
    return daily_radiation_chain(dms(13, 44), 105, 2.0, 8.5, 34.8, 25.6, 2.85, sigma, kelvin)


def example_18(sigma=FAO_STEFAN_BOLTZMANN_DAILY, kelvin=FAO_KELVIN):
    # FAO-56 Example 18: 50°48' N, z = 100 m, 6 July (J = 187), Tmax 21.5 °C, Tmin 12.3 °C,
    # RHmax 84 %, RHmin 63 %, n = 9.25 h
    ea = turbulence.vapour_pressure_from_rh_extremes(
        12.3 + ZERO_CELSIUS, 21.5 + ZERO_CELSIUS, 84.0, 63.0
    )
    return daily_radiation_chain(dms(50, 48), 187, 100.0, 9.25, 21.5, 12.3, ea, sigma, kelvin)


@pytest.mark.parametrize(
    ("term", "expected", "atol"),
    [  # FAO-56 (Allen et al. 1998) Example 17
        ("Ra", 38.06, 0.005),
        ("Rs", 22.65, 0.005),
        ("Rso", 28.54, 0.005),
        ("Rnl", 3.11, 0.005),
        ("Rn", 14.33, 0.005),
    ],
)
def test_fao56_example_17_radiation(term, expected, atol):
    np.testing.assert_allclose(example_17()[term], expected, rtol=0, atol=atol)


@pytest.mark.parametrize(
    ("term", "expected", "atol"),
    [  # FAO-56 (Allen et al. 1998) Example 18
        ("Ra", 41.09, 0.005),
        ("N", 16.1, 0.05),
        ("Rs", 22.07, 0.005),
        ("Rso", 30.90, 0.005),
        ("Rnl", 3.71, 0.005),
        ("Rn", 13.28, 0.005),
    ],
)
def test_fao56_example_18_radiation(term, expected, atol):
    np.testing.assert_allclose(example_18()[term], expected, rtol=0, atol=atol)


def test_fao56_example_18_net_longwave_from_printed_inputs():
    # FAO-56 Example 18 step by step: ea 1.409, Rs 22.07, Rso 30.90 -> Rnl 3.71, Rn 13.28
    rnl = radiation.net_longwave_daily(
        21.5 + FAO_KELVIN, 12.3 + FAO_KELVIN, 1.409, 22.07, 30.90, FAO_STEFAN_BOLTZMANN_DAILY
    )
    np.testing.assert_allclose(rnl, 3.71, rtol=0, atol=0.005)  # FAO-56 Example 18
    rn = radiation.net_radiation_daily(0.23, 22.07, 3.71)
    np.testing.assert_allclose(rn, 13.28, rtol=0, atol=0.005)  # FAO-56 Example 18


@pytest.mark.parametrize("example", [example_17, example_18])
def test_codata_stefan_boltzmann_path_close_to_fao(example):
    # the tool's default (CODATA sigma, T + 273.15) stays within 0.2 % of FAO's constants
    fao = example()
    codata = example(sigma=STEFAN_BOLTZMANN_DAILY, kelvin=ZERO_CELSIUS)
    np.testing.assert_allclose(codata["Rnl"], fao["Rnl"], rtol=2e-3)
    np.testing.assert_allclose(codata["Rn"], fao["Rn"], rtol=2e-3)


def test_net_longwave_caps_relative_shortwave_at_one():
    # FAO-56 eq. 39: Rs/Rso <= 1.0
    args = (30.0 + ZERO_CELSIUS, 15.0 + ZERO_CELSIUS, 1.2)
    capped = radiation.net_longwave_daily(*args, np.array([25.0, 30.0]), 25.0)
    np.testing.assert_allclose(capped[0], capped[1], rtol=1e-15)


# ---------------------------------------------------------------------------------------
# Instantaneous terms
# ---------------------------------------------------------------------------------------


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_clear_sky_transmissivity(kind):
    # FAO-56 eq. 37 coefficient: 0.75 at sea level, 0.77 at 1000 m
    tau = radiation.clear_sky_transmissivity(as_type(1000.0, kind))
    np.testing.assert_allclose(tau, 0.77, rtol=1e-12)
    np.testing.assert_allclose(radiation.clear_sky_transmissivity(0.0), 0.75, rtol=1e-12)


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_shortwave_in(kind):
    cos_theta = as_type(0.5, kind)
    rs = radiation.shortwave_in(cos_theta, 1.0, 0.75)
    np.testing.assert_allclose(rs, SOLAR_CONSTANT * 0.5 * 0.75, rtol=1e-12)
    np.testing.assert_allclose(
        radiation.shortwave_in(cos_theta, 1.0, 0.75, solar_constant=1366.7), 1366.7 * 0.375
    )


def test_shortwave_in_clips_negative_cosine():
    rs = radiation.shortwave_in(np.array([-0.3, 0.0, 0.2]), 1.02, 0.76)
    np.testing.assert_array_equal(rs[:2], 0.0)
    assert rs[2] > 0.0


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_atmospheric_emissivity_bastiaanssen(kind):
    # CHECKS.md: tau 0.752 -> 0.759202 (computed from Bastiaanssen 1995)
    eps = radiation.atmospheric_emissivity_bastiaanssen(as_type(0.752, kind))
    np.testing.assert_allclose(eps, 0.759202, rtol=0, atol=5e-7)


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_atmospheric_emissivity_brutsaert(kind):
    # CHECKS.md: 15 hPa, 293.15 K -> 0.810949 (computed from Brutsaert 1975)
    eps = radiation.atmospheric_emissivity_brutsaert(as_type(1.5, kind), 293.15)
    np.testing.assert_allclose(eps, 0.810949, rtol=0, atol=5e-7)


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_longwave_emitted(kind):
    # Stefan-Boltzmann law: a black body at 300 K emits 459.3 W m-2
    rl = radiation.longwave_emitted(as_type(1.0, kind), 300.0)
    np.testing.assert_allclose(rl, STEFAN_BOLTZMANN * 300.0**4, rtol=1e-12)
    np.testing.assert_allclose(rl, 459.3, rtol=0, atol=0.05)


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_net_radiation(kind):
    albedo, rs, rl_in, rl_out, eps0 = as_type(0.2, kind), 800.0, 350.0, 450.0, 0.98
    rn = radiation.net_radiation(albedo, rs, rl_in, rl_out, eps0)
    # 0.8 * 800 + 350 - 450 - 0.02 * 350 = 533
    np.testing.assert_allclose(rn, 533.0, rtol=1e-12)


def test_net_radiation_black_body_in_equilibrium():
    # no sun, black surface at the temperature of a black sky -> Rn = 0
    rl = radiation.longwave_emitted(1.0, 290.0)
    rn = radiation.net_radiation(0.3, 0.0, rl, radiation.longwave_emitted(1.0, 290.0), 1.0)
    np.testing.assert_allclose(rn, 0.0, atol=1e-10)


@pytest.mark.parametrize(
    ("ndvi", "expected"),
    [
        (-0.1, 0.97),  # below NDVI_s: soil
        (0.2, 0.97),
        (0.35, 0.97 + 0.02 * 0.25),  # Pv = 0.5**2
        (0.5, 0.99),
        (0.8, 0.99),  # above NDVI_v: vegetation
    ],
)
def test_surface_emissivity_from_ndvi(ndvi, expected):
    # Sobrino, Jiménez-Muñoz & Paolini (2004), without the cavity term
    np.testing.assert_allclose(
        radiation.surface_emissivity_from_ndvi(ndvi), expected, rtol=0, atol=1e-12
    )


def test_surface_emissivity_from_ndvi_array_and_nan():
    eps = radiation.surface_emissivity_from_ndvi(np.array([0.1, np.nan, 0.6]))
    np.testing.assert_allclose(eps[[0, 2]], [0.97, 0.99], atol=1e-12)
    assert np.isnan(eps[1])


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_clear_sky_shortwave_daily(kind):
    # FAO-56 eq. 37: Example 18 Ra 41.09 at 100 m -> Rso 30.90
    rso = radiation.clear_sky_shortwave_daily(as_type(41.09, kind), 100.0)
    np.testing.assert_allclose(rso, 30.90, rtol=0, atol=0.005)
