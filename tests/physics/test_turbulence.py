"""Air properties, wind and Monin–Obukhov stability against FAO-56 and published forms.

Published values are checked to half a unit of their last printed digit (CHECKS.md).
"""

import warnings

import numpy as np
import pytest
import scipy.constants
from scipy.integrate import quad

from rasterbudget.physics import turbulence
from rasterbudget.physics.constants import (
    GRAVITY,
    SPECIFIC_HEAT_AIR,
    VON_KARMAN,
    ZERO_CELSIUS,
)

INPUT_KINDS = ["scalar", "ndarray"]


def as_type(value, kind):
    return np.full(3, value) if kind == "ndarray" else value


def kelvin(celsius):
    return celsius + ZERO_CELSIUS


# ---------------------------------------------------------------------------------------
# FAO-56 (Allen et al. 1998) worked examples
# ---------------------------------------------------------------------------------------


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_fao56_example_2_pressure_and_psychrometric_constant(kind):
    # FAO-56 (Allen et al. 1998) Example 2: z = 1800 m
    pressure = turbulence.air_pressure(as_type(1800.0, kind))
    np.testing.assert_allclose(pressure, 81.8, rtol=0, atol=0.05)  # FAO-56 Example 2
    gamma = turbulence.psychrometric_constant(pressure)
    np.testing.assert_allclose(gamma, 0.054, rtol=0, atol=0.0005)  # FAO-56 Example 2


def test_asce_ewri_2005_table_c2_pressure():
    # ASCE-EWRI (2005) Table C-2: station at 1462.4 m
    pressure = turbulence.air_pressure(1462.4)
    np.testing.assert_allclose(pressure, 85.17, rtol=0, atol=0.005)  # ASCE-EWRI Table C-2
    np.testing.assert_allclose(  # ASCE-EWRI Table C-2
        turbulence.psychrometric_constant(pressure), 0.0566, rtol=0, atol=0.00005
    )


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_fao56_example_3_saturation_vapour_pressure(kind):
    # FAO-56 (Allen et al. 1998) Example 3: Tmax 24.5 °C, Tmin 15 °C
    e_max = turbulence.saturation_vapour_pressure(as_type(kelvin(24.5), kind))
    e_min = turbulence.saturation_vapour_pressure(as_type(kelvin(15.0), kind))
    np.testing.assert_allclose(e_max, 3.075, rtol=0, atol=0.0005)  # FAO-56 Example 3
    np.testing.assert_allclose(e_min, 1.705, rtol=0, atol=0.0005)  # FAO-56 Example 3
    np.testing.assert_allclose((e_max + e_min) / 2, 2.39, rtol=0, atol=0.005)  # Example 3


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_fao56_example_5_vapour_pressure_from_rh_extremes(kind):
    # FAO-56 (Allen et al. 1998) Example 5: Tmin 18, Tmax 25 °C, RHmax 82 %, RHmin 54 %
    ea = turbulence.vapour_pressure_from_rh_extremes(
        as_type(kelvin(18.0), kind), kelvin(25.0), 82.0, as_type(54.0, kind)
    )
    np.testing.assert_allclose(ea, 1.70, rtol=0, atol=0.005)  # FAO-56 Example 5


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_fao56_example_14_wind_speed_at_2m(kind):
    # FAO-56 (Allen et al. 1998) Example 14: 3.2 m/s at 10 m
    u2 = turbulence.wind_speed_at_2m(as_type(3.2, kind), 10.0)
    np.testing.assert_allclose(u2, 2.4, rtol=0, atol=0.05)  # FAO-56 Example 14


def test_fao56_example_18_air_and_humidity_terms():
    # FAO-56 (Allen et al. 1998) Example 18: z = 100 m, Tmax 21.5, Tmin 12.3 °C,
    # RHmax 84 %, RHmin 63 %, u = 10 km/h at 10 m
    u2 = turbulence.wind_speed_at_2m(10.0 / 3.6, 10.0)
    np.testing.assert_allclose(u2, 2.078, rtol=0, atol=0.0005)  # FAO-56 Example 18
    gamma = turbulence.psychrometric_constant(turbulence.air_pressure(100.0))
    np.testing.assert_allclose(gamma, 0.0666, rtol=0, atol=0.00005)  # FAO-56 Example 18
    es = (
        turbulence.saturation_vapour_pressure(kelvin(21.5))
        + turbulence.saturation_vapour_pressure(kelvin(12.3))
    ) / 2
    np.testing.assert_allclose(es, 1.997, rtol=0, atol=0.0005)  # FAO-56 Example 18
    ea = turbulence.vapour_pressure_from_rh_extremes(kelvin(12.3), kelvin(21.5), 84.0, 63.0)
    np.testing.assert_allclose(ea, 1.409, rtol=0, atol=0.0005)  # FAO-56 Example 18


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_vapour_pressure_from_relative_humidity(kind):
    # FAO-56 eq. 19 form: 50 % at 24.5 °C is half of Example 3's e°(24.5) = 3.075
    ea = turbulence.vapour_pressure_from_relative_humidity(as_type(kelvin(24.5), kind), 50.0)
    np.testing.assert_allclose(ea, 3.075 / 2, rtol=0, atol=0.00025)


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_latent_heat_of_vaporization(kind):
    # CHECKS.md / FAO-56 Annex 3 eq. 3-1: 2.45 MJ/kg at 20 °C
    lam = turbulence.latent_heat_of_vaporization(as_type(kelvin(20.0), kind))
    np.testing.assert_allclose(lam, 2.45e6, rtol=0, atol=0.005e6)
    np.testing.assert_allclose(lam, (2.501 - 0.002361 * 20.0) * 1e6, rtol=1e-12)


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_air_density_against_ideal_gas(kind):
    # FAO-56 Annex 3 eq. 3-5 is the ideal gas law for dry air (R = 0.287 kJ kg-1 K-1)
    # with a 1 % virtual-temperature allowance. Dry-air R from scipy's molar gas constant
    # and a molar mass of 28.9647 g/mol (from memory) agrees to 0.1 %.
    pressure, temperature = as_type(101.3, kind), 293.15
    rho = turbulence.air_density(pressure, temperature)
    np.testing.assert_allclose(rho, 101.3 / (1.01 * 293.15 * 0.287), rtol=1e-12)
    r_dry = scipy.constants.R / 0.0289647  # J kg-1 K-1
    np.testing.assert_allclose(rho * 1.01, pressure * 1e3 / (r_dry * temperature), rtol=1e-3)


# ---------------------------------------------------------------------------------------
# Friction velocity, resistance, sensible heat
# ---------------------------------------------------------------------------------------


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_friction_velocity_neutral_log_law(kind):
    u_star = turbulence.friction_velocity(as_type(5.0, kind), 10.0, 0.1)
    np.testing.assert_allclose(u_star, VON_KARMAN * 5.0 / np.log(100.0), rtol=1e-12)
    # an unstable correction (psi_m > 0) raises u*
    assert np.all(turbulence.friction_velocity(5.0, 10.0, 0.1, psi_m=0.5) > u_star)


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_aerodynamic_resistance(kind):
    u_star = as_type(0.4, kind)
    rah = turbulence.aerodynamic_resistance(u_star)
    np.testing.assert_allclose(rah, np.log(2.0 / 0.1) / (VON_KARMAN * 0.4), rtol=1e-12)
    corrected = turbulence.aerodynamic_resistance(u_star, psi_h_z1=0.1, psi_h_z2=0.6)
    np.testing.assert_allclose(
        corrected, (np.log(20.0) - 0.6 + 0.1) / (VON_KARMAN * 0.4), rtol=1e-12
    )


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_sensible_heat_flux(kind):
    h = turbulence.sensible_heat_flux(as_type(1.1, kind), 5.0, 20.0)
    np.testing.assert_allclose(h, 1.1 * SPECIFIC_HEAT_AIR * 5.0 / 20.0, rtol=1e-12)


# ---------------------------------------------------------------------------------------
# Monin–Obukhov length and stability corrections
# ---------------------------------------------------------------------------------------


def test_monin_obukhov_length():
    h = np.array([200.0, -30.0, 0.0])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        length = turbulence.monin_obukhov_length(1.1, 0.3, 310.0, h)
    expected = -1.1 * SPECIFIC_HEAT_AIR * 0.3**3 * 310.0 / (VON_KARMAN * GRAVITY * h[:2])
    np.testing.assert_allclose(length[:2], expected, rtol=1e-12)
    assert length[0] < 0 < length[1]  # unstable when H > 0
    assert length[2] == np.inf


def test_inverse_monin_obukhov_length_is_the_reciprocal_and_zero_when_neutral():
    h = np.array([200.0, -30.0, 0.0, 1e-9])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        inverse = turbulence.inverse_monin_obukhov_length(1.1, 0.3, 310.0, h)
    length = turbulence.monin_obukhov_length(1.1, 0.3, 310.0, h)
    np.testing.assert_allclose(inverse[[0, 1, 3]], 1.0 / length[[0, 1, 3]], rtol=1e-14)
    assert inverse[2] == 0.0
    assert np.ndim(turbulence.inverse_monin_obukhov_length(1.0, 0.25, 300.0, 150.0)) == 0


@pytest.mark.parametrize(("h", "expected_sign"), [(150.0, -1.0), (-20.0, 1.0), (0.0, np.inf)])
def test_monin_obukhov_length_scalar(h, expected_sign):
    length = turbulence.monin_obukhov_length(1.0, 0.25, 300.0, h)
    assert np.ndim(length) == 0
    if np.isinf(expected_sign):
        assert length == np.inf
    else:
        assert np.sign(length) == expected_sign


@pytest.mark.parametrize(
    ("z_over_l", "psi_m", "psi_h"),
    [  # CHECKS.md, computed from Paulson (1970)
        (-0.1, 0.283614, 0.534284),
        (-1.0, 1.116232, 1.881227),
    ],
)
@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_paulson_unstable_values(z_over_l, psi_m, psi_h, kind):
    zl = as_type(z_over_l, kind)
    np.testing.assert_allclose(turbulence.stability_correction_momentum(zl), psi_m, atol=1e-6)
    np.testing.assert_allclose(turbulence.stability_correction_heat(zl), psi_h, atol=1e-6)


@pytest.mark.parametrize("z_over_l", [0.0, 0.05, 0.2, 1.0])
def test_webb_stable_values(z_over_l):
    # Webb (1970): psi = -5 z/L
    for fn in (turbulence.stability_correction_momentum, turbulence.stability_correction_heat):
        np.testing.assert_allclose(fn(z_over_l), -5.0 * z_over_l, rtol=1e-12, atol=1e-15)


def test_stable_cap():
    zl = np.array([0.5, 1.0, 3.0, 50.0, np.inf])
    for fn in (turbulence.stability_correction_momentum, turbulence.stability_correction_heat):
        np.testing.assert_allclose(fn(zl), [-2.5, -5.0, -5.0, -5.0, -5.0], rtol=1e-12)
        np.testing.assert_allclose(fn(zl[:4], max_stable_z_over_l=2.0), [-2.5, -5, -10, -10])
        np.testing.assert_allclose(fn(zl[:4], max_stable_z_over_l=np.inf), -5.0 * zl[:4])


def test_stability_corrections_mixed_array_without_warnings():
    zl = np.array([-50.0, -1.0, -1e-9, 0.0, 1e-9, 0.3, 10.0])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        psi_m = turbulence.stability_correction_momentum(zl)
        psi_h = turbulence.stability_correction_heat(zl)
    assert np.all(np.isfinite(psi_m)) and np.all(np.isfinite(psi_h))
    assert np.all(psi_m[:3] > 0) and np.all(psi_h[:3] > 0)  # unstable side positive
    # continuous through neutral
    np.testing.assert_allclose(psi_m[2:5], 0.0, atol=1e-7)
    np.testing.assert_allclose(psi_h[2:5], 0.0, atol=1e-7)
    assert np.isnan(turbulence.stability_correction_heat(np.nan))


@pytest.mark.parametrize("z_over_l", [-0.01, -0.1, -1.0, -5.0])
def test_paulson_forms_integrate_the_flux_gradient_relations(z_over_l):
    # psi(zeta) = integral_0^zeta (1 - phi(x)) / x dx with the Businger-Dyer forms
    # phi_m = (1 - 16 x)^-1/4 and phi_h = (1 - 16 x)^-1/2 that Paulson (1970) integrated.
    psi_m, _ = quad(lambda x: (1 - (1 - 16 * x) ** -0.25) / x, 0.0, z_over_l)
    psi_h, _ = quad(lambda x: (1 - (1 - 16 * x) ** -0.5) / x, 0.0, z_over_l)
    np.testing.assert_allclose(turbulence.stability_correction_momentum(z_over_l), psi_m, rtol=1e-8)
    np.testing.assert_allclose(turbulence.stability_correction_heat(z_over_l), psi_h, rtol=1e-8)
