"""At-surface reflectance (Tasumi et al. 2008) and the thermal band's atmosphere (Qin et al.
2001), checked against independent computations: Rayleigh scattering (Hansen & Travis 1974),
Planck's law with scipy.constants, and the forward radiative-transfer equations they invert."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import constants

from rasterbudget.catalog.inputs import INPUTS, derive_inputs
from rasterbudget.physics import atmosphere, radiometry

#: TM/ETM+ band centres [um] (Chander et al. 2009 band limits, from memory).
CENTRES = {1: 0.485, 2: 0.56, 3: 0.66, 4: 0.835, 5: 1.65, 7: 2.215}


def test_precipitable_water_follows_asce_ewri_appendix_d():
    # ASCE-EWRI (2005) eq. D.3 form: W = 0.14 ea P + 2.1 [mm]; a humid sea-level day
    assert atmosphere.precipitable_water(2.0, 101.3) == pytest.approx(0.14 * 2.0 * 101.3 + 2.1)
    assert 20.0 < atmosphere.precipitable_water(2.0, 101.3) < 35.0  # mid-latitude summer range


@pytest.mark.parametrize("band", [1, 2, 3])
def test_visible_transmittance_lies_within_rayleigh_bounds(band):
    """Independent bound (Hansen & Travis 1974 Rayleigh depth): in clean dry air the one-way
    transmittance of a visible band cannot exceed that of molecular scattering alone with half
    of the scattered light still reaching the ground, and must exceed the direct beam through
    molecules and a light aerosol (optical depth 0.1)."""
    pressure, cos_zenith = 101.325, math.cos(math.radians(30.0))
    tau = atmosphere.band_transmittance(atmosphere.TASUMI_2008[band], pressure, 5.0, cos_zenith)
    depth = float(atmosphere.rayleigh_optical_depth(CENTRES[band], pressure))
    upper = math.exp(-0.5 * depth / cos_zenith)
    lower = math.exp(-(depth + 0.1) / cos_zenith)
    assert lower < tau <= upper + 0.005, (lower, tau, upper)


def test_rayleigh_depth_at_550_nm_is_the_textbook_value():
    # about 0.097 at 0.55 um at sea level (Hansen & Travis 1974; common textbook value)
    assert float(atmosphere.rayleigh_optical_depth(0.55)) == pytest.approx(0.097, abs=0.003)


@pytest.mark.parametrize("band", sorted(atmosphere.TASUMI_2008))
def test_transmittance_falls_with_water_vapour_pressure_and_zenith(band):
    c = atmosphere.TASUMI_2008[band]
    base = atmosphere.band_transmittance(c, 95.0, 20.0, 0.8)
    assert 0.6 < base < 1.0
    assert atmosphere.band_transmittance(c, 95.0, 40.0, 0.8) <= base
    assert atmosphere.band_transmittance(c, 100.0, 20.0, 0.8) < base
    assert atmosphere.band_transmittance(c, 95.0, 20.0, 0.5) < base
    assert atmosphere.band_transmittance(c, 95.0, 20.0, 0.8, clearness=0.6) < base


@pytest.mark.parametrize("band", sorted(atmosphere.TASUMI_2008))
def test_at_surface_reflectance_inverts_the_forward_model(band):
    """Forward: rho_t = rho_s tau_in tau_out + rho_a (Tasumi et al. 2008, eq. 1 rearranged)."""
    c = atmosphere.TASUMI_2008[band]
    rho_s = np.array([0.02, 0.1, 0.3, 0.5])
    tau_in = atmosphere.band_transmittance(c, 97.0, 25.0, 0.85)
    tau_out = atmosphere.band_transmittance(c, 97.0, 25.0, 1.0)
    rho_t = rho_s * tau_in * tau_out + atmosphere.path_reflectance(c, tau_in)
    got = atmosphere.at_surface_reflectance(rho_t, c, 97.0, 25.0, 0.85)
    np.testing.assert_allclose(got, rho_s, rtol=1e-12)


def test_thermal_transmittance_pieces_meet_and_fall_with_water_vapour():
    # Qin et al. (2001), Table 4: the two linear pieces meet at w = 1.6 g cm-2 (a check that
    # the coefficients, recalled from memory, are consistent with each other)
    for air in (291.0, 308.0):
        below = atmosphere.thermal_transmittance(1.5999, air)
        above = atmosphere.thermal_transmittance(1.6001, air)
        assert abs(below - above) < 0.001
    w = np.linspace(0.4, 3.0, 27)
    tau = atmosphere.thermal_transmittance(w, 295.0)
    assert np.all(np.diff(tau) < 0)
    assert 0.6 < tau[-1] < tau[0] < 0.95
    assert atmosphere.thermal_transmittance(9.0, 295.0) == 0.3  # bounded


def _planck_band_radiance(temperature: float, wavelength_um: float) -> float:
    """Planck's spectral radiance at one wavelength [W m-2 sr-1 um-1] (scipy.constants)."""
    lam = wavelength_um * 1e-6
    h, c, k = constants.h, constants.c, constants.k
    per_metre = 2 * h * c**2 / lam**5 / math.expm1(h * c / (lam * k * temperature))
    return per_metre * 1e-6


def test_path_radiance_is_the_emission_of_the_mean_atmosphere():
    """(1 - tau) B(Ta) with B from K1/K2 equals Planck's law at the band's effective
    wavelength (11.27 um for ETM+ band 6, where K1/K2 and Planck agree) within 1 %."""
    k1, k2 = radiometry.THERMAL_CONSTANTS["ETM+"][6]
    ta = atmosphere.effective_atmospheric_temperature(300.0)
    assert ta == pytest.approx(16.0110 + 0.92621 * 300.0)  # Qin et al. 2001 (from memory)
    got = atmosphere.thermal_path_radiance(0.8, ta, k1, k2)
    expected = 0.2 * _planck_band_radiance(ta, 11.27)
    assert got == pytest.approx(expected, rel=0.01)


def test_level1_surface_temperature_from_the_registry_inverts_the_forward_equation():
    """The registry's derived surface temperature (thermal radiance, NDVI, red, and the scene's
    K1, K2, tau, L_up, L_down) returns the temperature the forward radiative-transfer equation
    (Barsi et al. 2003; Sobrino et al. 2004) was run with."""
    k1, k2 = radiometry.THERMAL_CONSTANTS["ETM+"][6]
    ts = np.array([290.0, 300.0, 315.0, 330.0])
    ndvi = np.array([0.8, 0.4, 0.1, -0.2])
    red = np.array([0.04, 0.08, 0.15, 0.05])
    emissivity = np.where(ndvi < 0, 0.99, radiometry.thermal_emissivity_from_ndvi(ndvi, red))
    tau, up, down = 0.82, 1.1, 1.8
    radiance = (
        tau * (emissivity * radiometry.thermal_radiance(ts, k1, k2) + (1 - emissivity) * down) + up
    )
    facts = {
        "thermal_k1": k1,
        "thermal_k2": k2,
        "thermal_transmittance": tau,
        "upwelling_radiance": up,
        "downwelling_radiance": down,
    }
    data = derive_inputs({"thermal_radiance": radiance, "ndvi": ndvi, "red": red}, facts)
    np.testing.assert_allclose(data["surface_temperature"], ts, atol=1e-9)
    assert "thermal_k1" in INPUTS["surface_temperature"].facts


def test_without_the_scene_facts_no_temperature_is_derived():
    data = derive_inputs({"thermal_radiance": np.ones(3), "ndvi": np.ones(3), "red": np.ones(3)})
    assert "surface_temperature" not in data
