"""Evaporation from the surface soil layer (FAO-56 ch. 7) as worked examples.

Equations are checked against hand arithmetic; the daily series against an independent closed
form of the two drying stages. Soil water contents and ranges marked "(from memory)" are
recalled from FAO-56 Table 19 (typical soil water characteristics) and were not re-read
against the book.
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rasterbudget.errors import InputValueError
from rasterbudget.physics import soil_evaporation as se

INPUT_KINDS = ["scalar", "ndarray"]


def as_type(value, kind):
    return np.full(3, value) if kind == "ndarray" else value


# ---------------------------------------------------------------------------------------
# Total evaporable water, FAO-56 eq. 73
# ---------------------------------------------------------------------------------------


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_total_evaporable_water_loam(kind):
    # A loam: theta_FC 0.25 and theta_WP 0.12, the middles of FAO-56 Table 19's loam ranges
    # 0.20-0.30 and 0.07-0.17 (from memory). Eq. 73 by hand with Ze = 0.10 m:
    # 1000 * (0.25 - 0.5 * 0.12) * 0.10 = 1000 * 0.19 * 0.10 = 19.0 mm
    tew = se.total_evaporable_water(as_type(0.25, kind), as_type(0.12, kind))
    np.testing.assert_allclose(tew, 19.0, rtol=1e-12)
    # the same soil with the deeper layer FAO-56 allows, Ze = 0.15 m: 28.5 mm
    np.testing.assert_allclose(se.total_evaporable_water(0.25, 0.12, 0.15), 28.5, rtol=1e-12)


@pytest.mark.parametrize(
    ("soil", "field_capacity", "wilting_point", "tew_range"),
    [  # FAO-56 Table 19, middles of the theta ranges and the TEW range for Ze = 0.10 m
        # (all from memory)
        ("sand", 0.12, 0.045, (6.0, 12.0)),
        ("sandy loam", 0.23, 0.11, (15.0, 20.0)),
        ("loam", 0.25, 0.12, (16.0, 22.0)),
        ("silt loam", 0.29, 0.15, (18.0, 25.0)),
        ("clay", 0.36, 0.22, (22.0, 29.0)),
    ],
)
def test_total_evaporable_water_within_table_19_ranges(
    soil, field_capacity, wilting_point, tew_range
):
    tew = se.total_evaporable_water(field_capacity, wilting_point)
    assert tew_range[0] <= tew <= tew_range[1], soil


# ---------------------------------------------------------------------------------------
# Evaporation reduction coefficient, FAO-56 eq. 74
# ---------------------------------------------------------------------------------------

LOAM_TEW = 19.0  # mm, eq. 73 for the loam above
LOAM_REW = 9.0  # mm, inside FAO-56 Table 19's loam REW range 8-10 mm (from memory)


@pytest.mark.parametrize("kind", INPUT_KINDS)
@pytest.mark.parametrize("depletion", [0.0, 4.5, LOAM_REW])
def test_reduction_is_one_in_stage_1(kind, depletion):
    # up to and including De = REW the surface is wet enough to evaporate at the full rate
    kr = se.evaporation_reduction(as_type(depletion, kind), LOAM_REW, LOAM_TEW)
    np.testing.assert_array_equal(kr, 1.0)


@pytest.mark.parametrize(
    ("depletion", "expected"),
    [  # stage 2 by hand: (19 - De) / (19 - 9)
        (11.5, 0.75),
        (14.0, 0.5),
        (16.5, 0.25),
        (LOAM_TEW, 0.0),  # all evaporable water gone
        (25.0, 0.0),  # beyond TEW still 0, never negative
    ],
)
def test_reduction_is_linear_in_stage_2_and_zero_at_tew(depletion, expected):
    kr = se.evaporation_reduction(depletion, LOAM_REW, LOAM_TEW)
    np.testing.assert_allclose(kr, expected, rtol=0, atol=1e-15)


def test_reduction_on_arrays_of_soils():
    # three pixels, three soils: each its own REW and TEW
    depletion = np.array([5.0, 12.0, 30.0])
    rew = np.array([6.0, 8.0, 10.0])
    tew = np.array([10.0, 16.0, 25.0])
    kr = se.evaporation_reduction(depletion, rew, tew)
    np.testing.assert_allclose(kr, [1.0, 0.5, 0.0], rtol=0, atol=1e-15)


def test_reduction_without_stage_2_and_nan():
    # REW = TEW: the layer goes from stage 1 straight to dry; NaN stays NaN
    kr = se.evaporation_reduction(np.array([7.0, 7.5, np.nan]), 7.0, 7.0)
    np.testing.assert_array_equal(kr[:2], [1.0, 0.0])
    assert np.isnan(kr[2])


# ---------------------------------------------------------------------------------------
# Kc max, FAO-56 eq. 72, and Ke, FAO-56 eq. 71
# ---------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("u2", "rh_min", "height", "basal", "expected"),
    [
        (2.0, 45.0, 1.0, 0.15, 1.2),  # standard climate: the climate term is 0
        (5.0, 20.0, 0.0, 0.15, 1.2),  # bare soil, h = 0: (h/3)^0.3 = 0
        # by hand: 1.2 + [0.04 * 2 - 0.004 * (-25)] * (3/3)^0.3 = 1.2 + 0.18 = 1.38
        (4.0, 20.0, 3.0, 0.15, 1.38),
        # humid and calm: 1.2 + [0.04 * (-1) - 0.004 * 35] * 1 = 1.02
        (1.0, 80.0, 3.0, 0.15, 1.02),
        # tall dense cover: Kcb + 0.05 wins over 1.2
        (2.0, 45.0, 2.0, 1.25, 1.30),
    ],
)
def test_max_crop_coefficient(u2, rh_min, height, basal, expected):
    kc_max = se.max_crop_coefficient(u2, rh_min, height, basal)
    np.testing.assert_allclose(kc_max, expected, rtol=0, atol=1e-12)


def test_max_crop_coefficient_height_exponent():
    # (h/3)^0.3 at h = 0.5 m: 0.584 of the climate term at 3 m (6^-0.3 = exp(-0.3 ln 6) = 0.584191)
    tall = se.max_crop_coefficient(4.0, 20.0, 3.0) - 1.2
    short = se.max_crop_coefficient(4.0, 20.0, 0.5) - 1.2
    np.testing.assert_allclose(short / tall, 6.0**-0.3, rtol=1e-12)
    np.testing.assert_allclose(6.0**-0.3, 0.584191, rtol=0, atol=5e-7)


@pytest.mark.parametrize("kind", INPUT_KINDS)
def test_soil_evaporation_coefficient_stage_1_bare_soil(kind):
    # bare soil right after rain: Ke = 1 * (1.2 - 0.15) = 1.05
    ke = se.soil_evaporation_coefficient(as_type(1.0, kind), 1.2, 0.15)
    np.testing.assert_allclose(ke, 1.05, rtol=1e-12)
    # half-way through stage 2: Ke = 0.5 * 1.05
    np.testing.assert_allclose(se.soil_evaporation_coefficient(0.5, 1.2, 0.15), 0.525, rtol=1e-12)


def test_soil_evaporation_coefficient_limited_by_exposed_wetted_fraction():
    # only 30 % of the surface exposed and wetted: Ke = min(1.05, 0.3 * 1.2) = 0.36
    ke = se.soil_evaporation_coefficient(1.0, 1.2, 0.15, exposed_wetted_fraction=0.3)
    np.testing.assert_allclose(ke, 0.36, rtol=1e-12)
    # deeper in stage 2 the reduction term is the smaller one again: 0.2 * 1.05 = 0.21
    ke = se.soil_evaporation_coefficient(0.2, 1.2, 0.15, exposed_wetted_fraction=0.3)
    np.testing.assert_allclose(ke, 0.21, rtol=1e-12)


@settings(max_examples=300, deadline=None)
@given(
    kr=st.floats(0.0, 1.0),
    kc_max=st.floats(1.0, 1.4),
    basal=st.floats(0.0, 1.2),
    few=st.floats(0.01, 1.0),
)
def test_soil_evaporation_coefficient_never_exceeds_few_kc_max(kr, kc_max, basal, few):
    ke = se.soil_evaporation_coefficient(kr, kc_max, basal, few)
    assert 0.0 <= ke <= few * kc_max


# ---------------------------------------------------------------------------------------
# The daily series against an independent closed form
# ---------------------------------------------------------------------------------------


def two_stage_closed_form(tew, rew, kc_max, basal, eto, n_days):
    """Depletion at the start of each day after a soaking rain on day 0, constant ETo.

    Stage 1: Kr = 1, so each day evaporates e1 = (Kc_max - Kcb) ETo and the depletion at the
    start of day j is j * e1, for as long as that is at most REW: days 0 .. n1 - 1 with
    n1 = floor(REW / e1) + 1. Stage 2 starts on day n1 at D_s = n1 * e1. There
    D_{i+1} = D_i + (TEW - D_i) / (TEW - REW) * (Kc_max - Kcb) * ETo, so
    TEW - D_{i+1} = (1 - a)(TEW - D_i) with a = e1 / (TEW - REW): a geometric decay,
    TEW - D_{n1 + k} = (TEW - D_s)(1 - a)^k.
    """
    e1 = (kc_max - basal) * eto
    a = e1 / (tew - rew)
    n1 = int(np.floor(rew / e1)) + 1
    d_s = n1 * e1
    assert 0.0 < a < 1.0 and rew < d_s <= tew  # the closed form's assumptions
    start = np.empty(n_days + 1)
    for day in range(n_days + 1):
        k = day - n1
        start[day] = day * e1 if k < 0 else tew - (tew - d_s) * (1.0 - a) ** k
    return start, n1


CLOSED_FORM_CASES = [
    # tew, rew, kc_max, basal, eto
    (20.0, 8.0, 1.2, 0.15, 5.0),  # e1 = 5.25 mm: 2 days of stage 1, a = 0.4375
    (19.0, 9.0, 1.25, 0.25, 3.0),  # e1 = 3 mm, REW = 3 e1: Kr = 1 still at De = REW, 4 days
    (12.0, 5.0, 1.1, 0.15, 2.0),  # sandier soil, cool day: e1 = 1.9 mm, 3 days, a = 0.271
    (25.0, 11.0, 1.38, 0.15, 7.5),  # clay, windy and dry: e1 = 9.225 mm, 2 days
]


@pytest.mark.parametrize(("tew", "rew", "kc_max", "basal", "eto"), CLOSED_FORM_CASES)
def test_series_after_soaking_rain_matches_two_stage_closed_form(tew, rew, kc_max, basal, eto):
    n_days = 30
    rain = np.zeros(n_days)
    rain[0] = 60.0  # more than TEW: the dry layer is soaked to field capacity on day 0
    result = se.surface_evaporation_series(
        rain, np.full(n_days, eto), tew, rew, kc_max=kc_max, basal=basal
    )
    start, n1 = two_stage_closed_form(tew, rew, kc_max, basal, eto, n_days)

    np.testing.assert_allclose(result.depletion_start, start[:-1], rtol=0, atol=1e-9)
    np.testing.assert_allclose(result.depletion_end, start[1:], rtol=0, atol=1e-9)
    np.testing.assert_allclose(result.evaporation, np.diff(start), rtol=0, atol=1e-9)
    # stage 1 lasts exactly until REW is depleted: Kr = 1 on days 0 .. n1 - 1, then < 1
    np.testing.assert_array_equal(result.reduction[:n1], 1.0)
    assert np.all(result.reduction[n1:] < 1.0)
    assert result.depletion_start[n1 - 1] <= rew < result.depletion_start[n1]
    # stage 2: Kr = (TEW - D) / (TEW - REW) and E = Kr (Kc_max - Kcb) ETo
    kr2 = (tew - start[n1:-1]) / (tew - rew)
    np.testing.assert_allclose(result.reduction[n1:], kr2, rtol=0, atol=1e-9)
    np.testing.assert_allclose(
        result.evaporation[n1:], kr2 * (kc_max - basal) * eto, rtol=0, atol=1e-9
    )


def test_series_exact_boundary_day_counts_as_stage_1():
    # e1 = (1.25 - 0.25) * 3 = 3 mm exactly, REW = 9 mm: the start of day 3 is at De = REW
    # exactly (binary-exact arithmetic). Eq. 74 is continuous there (both branches give 1),
    # so day 3 still evaporates the full 3 mm and stage 2 starts on day 4 at De = 12 mm
    rain = np.array([40.0, 0.0, 0.0, 0.0, 0.0])
    result = se.surface_evaporation_series(rain, np.full(5, 3.0), 19.0, 9.0, 1.25, 0.25)
    assert result.depletion_start[3] == 9.0
    np.testing.assert_array_equal(result.reduction[:4], 1.0)
    np.testing.assert_array_equal(result.evaporation[:4], 3.0)
    assert result.reduction[4] == pytest.approx((19.0 - 12.0) / 10.0, abs=1e-15)


def test_series_long_dry_spell_evaporates_all_evaporable_water():
    # after a soaking rain, with no more rain, the layer gives up TEW in total (geometric
    # tail: 0.5625^198 of the stage-2 start is left after 200 days, far below 1e-9 mm)
    rain = np.zeros(200)
    rain[0] = 50.0
    result = se.surface_evaporation_series(rain, np.full(200, 5.0), 20.0, 8.0)
    np.testing.assert_allclose(result.evaporation.sum(), 20.0, rtol=0, atol=1e-9)


# ---------------------------------------------------------------------------------------
# The layer's water balance
# ---------------------------------------------------------------------------------------


def test_dry_layer_without_rain_evaporates_nothing():
    # initial_depletion None: the layer starts dry (De = TEW) and no rain comes
    result = se.surface_evaporation_series(np.zeros(10), np.full(10, 6.0), 19.0, 9.0)
    np.testing.assert_array_equal(result.evaporation, 0.0)
    np.testing.assert_array_equal(result.reduction, 0.0)
    np.testing.assert_array_equal(result.depletion_end, 19.0)


def test_rain_beyond_the_depletion_fills_the_layer_and_no_more():
    # the layer lacks 6 mm; 20 mm of rain refills it and 14 mm percolate below it
    eto = np.full(8, 4.0)
    big = np.array([20.0, 0, 0, 0, 0, 0, 0, 0])
    just = np.array([6.0, 0, 0, 0, 0, 0, 0, 0])
    soaked = se.surface_evaporation_series(big, eto, 19.0, 9.0, initial_depletion=6.0)
    filled = se.surface_evaporation_series(just, eto, 19.0, 9.0, initial_depletion=6.0)
    assert soaked.depletion_start[0] == 0.0
    assert soaked.deep_percolation[0] == pytest.approx(14.0, abs=1e-12)
    assert filled.deep_percolation[0] == 0.0
    # the 14 mm extra change nothing afterwards: the layer holds no more than field capacity
    np.testing.assert_array_equal(soaked.evaporation, filled.evaporation)
    np.testing.assert_array_equal(soaked.depletion_end, filled.depletion_end)


def test_rain_day_evaporates_from_the_wetted_layer():
    # this package's reading of eq. 77: the rain comes first, so on the rain day after a dry
    # spell the layer already evaporates at the stage-1 rate, 1.05 * 4 = 4.2 mm
    rain = np.array([0.0, 0.0, 25.0])
    result = se.surface_evaporation_series(rain, np.full(3, 4.0), 19.0, 9.0)
    np.testing.assert_array_equal(result.evaporation[:2], 0.0)
    np.testing.assert_allclose(result.evaporation[2], 4.2, rtol=1e-12)
    np.testing.assert_allclose(result.depletion_end[2], 4.2, rtol=1e-12)


def test_small_rain_on_a_dry_layer_stays_in_stage_2():
    # 4 mm on a dry loam: De = 19 - 4 = 15 > REW, Kr = (19 - 15) / 10 = 0.4,
    # E = 0.4 * 1.05 * 5 = 2.1 mm (less than the 4 mm of rain: the rest stays for tomorrow)
    result = se.surface_evaporation_series([4.0], [5.0], 19.0, 9.0)
    np.testing.assert_allclose(result.depletion_start, [15.0], rtol=1e-12)
    np.testing.assert_allclose(result.reduction, [0.4], rtol=1e-12)
    np.testing.assert_allclose(result.evaporation, [2.1], rtol=1e-12)


def test_evaporation_capped_at_the_water_left_in_the_layer():
    # a sand with TEW 9 and REW 8 mm on a hot day (ETo 10): stage-1 Ke * ETo = 10.5 mm but
    # the layer holds 9 mm after the rain; 8 mm of rain on a layer 8 mm short leaves 0
    result = se.surface_evaporation_series(
        [8.0, 0.0], [10.0, 10.0], 9.0, 8.0, initial_depletion=8.0
    )
    np.testing.assert_allclose(result.ke[0], 1.05, rtol=1e-12)
    np.testing.assert_allclose(result.evaporation, [9.0, 0.0], rtol=0, atol=1e-12)
    np.testing.assert_allclose(result.depletion_end, [9.0, 9.0], rtol=0, atol=1e-12)


def random_weather(seed, n_days, n_pixels=None):
    rng = np.random.default_rng(seed)
    shape = (n_days,) if n_pixels is None else (n_days, n_pixels)
    rain = np.where(rng.random(shape) < 0.2, rng.gamma(1.2, 8.0, shape), 0.0)
    eto = rng.uniform(0.5, 9.0, shape)
    return rain, eto


@pytest.mark.parametrize("few", [1.0, 0.6, 0.25])
def test_series_water_balance_closes(few):
    # eq. 77 each day: De,i = De,i-1 - P + DP + E / few, with 0 <= De <= TEW and
    # Ke <= few Kc_max throughout (eq. 71)
    rain, eto = random_weather(7, 365)
    tew, rew, kc_max = 17.5, 8.0, 1.3
    result = se.surface_evaporation_series(
        rain, eto, tew, rew, kc_max=kc_max, exposed_wetted_fraction=few, initial_depletion=3.0
    )
    previous = np.concatenate([[3.0], result.depletion_end[:-1]])
    balance = previous - rain + result.deep_percolation + result.evaporation / few
    np.testing.assert_allclose(result.depletion_end, balance, rtol=0, atol=1e-9)
    assert np.all((result.depletion_end >= 0.0) & (result.depletion_end <= tew))
    assert np.all(result.ke <= few * kc_max + 1e-15)
    assert np.all(result.evaporation <= result.ke * eto + 1e-12)
    # over the year, in the exposed wetted soil: rain = E / few + percolation - storage change
    stored_change = -(result.depletion_end[-1] - 3.0)
    total_out = result.evaporation.sum() / few + result.deep_percolation.sum() + stored_change
    np.testing.assert_allclose(rain.sum(), total_out, rtol=1e-12)


def test_series_pixels_along_trailing_axes():
    # three pixels with their own soils, run together, equal three runs of one pixel
    rain, eto = random_weather(3, 60, n_pixels=3)
    tew, rew = np.array([9.0, 19.0, 25.0]), np.array([5.0, 9.0, 11.0])
    together = se.surface_evaporation_series(
        rain, eto, tew, rew, initial_depletion=[0.0, 5.0, 25.0]
    )
    for pixel, initial in enumerate([0.0, 5.0, 25.0]):
        alone = se.surface_evaporation_series(
            rain[:, pixel], eto[:, pixel], tew[pixel], rew[pixel], initial_depletion=initial
        )
        for field in se.SurfaceEvaporation._fields:
            np.testing.assert_array_equal(getattr(together, field)[:, pixel], getattr(alone, field))


@pytest.mark.parametrize(
    ("arguments", "keywords"),
    [
        ((np.zeros(3), np.ones(4), 19.0, 9.0), {}),  # one ETo short
        ((5.0, 4.0, 19.0, 9.0), {}),  # no day axis
        ((np.array([1.0, -2.0]), np.ones(2), 19.0, 9.0), {}),  # negative rain
        ((np.zeros(2), np.ones(2), 9.0, 19.0), {}),  # REW > TEW
        ((np.zeros(2), np.ones(2), 19.0, 9.0), {"exposed_wetted_fraction": 0.0}),
    ],
)
def test_series_refuses_inconsistent_inputs(arguments, keywords):
    with pytest.raises(InputValueError):
        se.surface_evaporation_series(*arguments, **keywords)
