"""Sensible heat by hot/cold anchor calibration of a near-surface temperature difference.

The near-surface air temperature difference is taken linear in surface temperature,
``dT = a + b Ts`` (Bastiaanssen et al. 1998, J. Hydrol. 212-213, eq. 13), fitted so that the hot
anchor (dry bare soil) has ``H = (1 - EF_hot)(Rn - G)`` and the cold anchor (well-watered crop)
``H = (1 - EF_cold)(Rn - G)``. The aerodynamic resistance between z1 = 0.1 m and z2 = 2 m is
corrected for stability with Monin-Obukhov similarity (Paulson 1970; Webb 1970), iterated on the
anchor scalars only; each pixel is then iterated on its own in pass 2.

Pass 1 (``anchor_histograms_block``) reduces every block to histograms of surface temperature over
the cold and hot candidates at 0.01 K resolution, carrying per-bin sums of the quantities the
calibration needs. Order statistics taken from these histograms are exact to the bin width (0.01 K),
whatever the chunking - unlike dask's approximate percentile, measured several kelvin off.
"""

from __future__ import annotations

import dataclasses
from dataclasses import asdict, dataclass
from typing import Literal

import numpy as np
from pydantic import Field, model_validator

from .. import screens
from ..catalog.qa import QA
from ..errors import AnchorError, RasterBudgetError
from ..physics import partition, turbulence
from ..physics.constants import SECONDS_PER_HOUR, SPECIFIC_HEAT_AIR
from ..surface import perturbed_air
from .base import (
    Calibrated,
    CalibrationContext,
    ReportFigure,
    SensibleHeatMethod,
    StrictSettings,
    register,
)
from .ensemble import sample_members
from .histograms import RangeHistogram, merge_optional, range_histogram


class HotSoilSettings(StrictSettings):
    """``[scene.anchors.hot_soil]``: the hot anchor's remaining evaporation from a daily balance
    of the soil surface layer (FAO-56 chapter 7) driven by daily rain and grass reference ET."""

    table: str  # CSV: date (YYYY-MM-DD), precipitation_mm, reference_et_mm (grass, daily)
    days: int = Field(30, ge=1, le=366)  # days of the balance, ending on the scene's date
    # FAO-56 Table 19, loam, evaporating layer 0.10 m (from memory): REW 8-10, TEW 16-22 mm
    readily_evaporable_mm: float = Field(9.0, gt=0.0, le=20.0)
    total_evaporable_mm: float = Field(19.0, gt=0.0, le=60.0)
    kc_max: float = Field(1.2, gt=0.5, le=1.5)  # FAO-56 eq. 72, standard climate
    basal: float = Field(0.15, ge=0.0, le=0.5)  # Kcb of bare soil (FAO-56 chapter 7)

    @model_validator(mode="after")
    def _readily_below_total(self) -> HotSoilSettings:
        if self.readily_evaporable_mm > self.total_evaporable_mm:
            raise ValueError("readily_evaporable_mm must not exceed total_evaporable_mm")
        return self


class AnchorSettings(StrictSettings):
    """``[scene.anchors]``: hot/cold anchor calibration of the sensible heat flux."""

    cold_percentile: float = Field(5.0, gt=0.0, lt=50.0)
    hot_percentile: float = Field(95.0, gt=50.0, lt=100.0)
    percentile_band: float = Field(1.0, gt=0.0, le=10.0)
    cold_min_ndvi: float = Field(0.6, ge=-1.0, le=1.0)
    hot_max_ndvi: float = Field(0.25, ge=-1.0, le=1.0)
    cold_evaporative_fraction: float = Field(1.0, ge=0.0, le=1.2)
    hot_evaporative_fraction: float = Field(0.0, ge=0.0, le=0.5)
    cold_xy: tuple[float, float] | None = None
    hot_xy: tuple[float, float] | None = None
    surface_lapse_rate_k_per_km: float = Field(6.5, ge=0.0, le=15.0)
    max_elevation_difference_m: float = Field(500.0, gt=0.0)
    blending_height_m: float = Field(200.0, ge=20.0, le=1000.0)
    station_roughness_m: float = Field(0.0148, gt=0.0, le=2.0)
    max_iterations: int = Field(30, ge=1, le=200)
    tolerance_k: float = Field(0.001, gt=0.0, le=1.0)
    min_candidates: int = Field(20, ge=1)
    # where anchors may stand (rasterbudget.screens): any class with a reliable residual, or
    # only the class table's cold_anchor / hot_anchor classes
    candidate_surfaces: Literal["surface", "classes"] = "surface"
    illumination_tolerance: float = Field(0.05, gt=0.0, le=1.0)  # |cos i / cos z - 1|
    max_ts_spread_k: float = Field(1.0, gt=0.0)  # 3 x 3 standard deviation of Ts
    max_ndvi_spread: float = Field(0.05, gt=0.0)  # 3 x 3 standard deviation of NDVI
    cloud_distance_px: int = Field(3, ge=0, le=50)  # no masked pixel this near
    hot_soil: HotSoilSettings | None = None  # else the hot anchor's EF is hot_evaporative_fraction


#: Surface-temperature histogram: lower edge, upper edge and bin width [K].
TS_LOW, TS_HIGH, TS_STEP = 200.0, 350.0, 0.01
N_BINS = round((TS_HIGH - TS_LOW) / TS_STEP)

#: Per-bin sums carried by the pass-1 histogram (row order of the histogram array).
HISTOGRAM_ROWS = (
    "count",
    "surface_temperature",
    "available_energy",
    "log_roughness_length",
    "air_density",
    "net_radiation",
    "ground_heat_flux",
    "stability_temperature",
    "blending_wind_speed",
)
ROLES = ("cold", "hot")

#: Heights between which the near-surface temperature difference is defined [m]
#: (Bastiaanssen et al. 1998).
Z1, Z2 = 0.1, 2.0

#: Pixels iterated together by :func:`sensible_heat_block`: 128 kB per float64 temporary, so the
#: iteration's temporaries stay in the CPU cache [-].
PIECE = 16384


def temperature_bins(surface_temperature: np.ndarray) -> np.ndarray:
    """Histogram bin index of each surface temperature [K] (clipped to the histogram range)."""
    index = np.floor((surface_temperature - TS_LOW) / TS_STEP)
    return np.clip(np.nan_to_num(index, nan=0.0), 0, N_BINS - 1).astype(np.intp)


def anchor_histograms_block(
    state: dict[str, np.ndarray],
    flat_index: np.ndarray,
    member_rows: list[tuple[np.ndarray, np.ndarray]] = (),
) -> tuple[RangeHistogram | None, RangeHistogram | None]:
    """Pass-1 reduction of one block.

    Parameters
    ----------
    state : output of :func:`rasterbudget.surface.surface_block` for the block.
    flat_index : global row-major pixel index of each pixel of the block. [-]
    member_rows : per ensemble member, its (available energy, air density) arrays; their
        per-bin sums follow the ``HISTOGRAM_ROWS`` rows (see :func:`member_histogram`).
    member_rows : per ensemble member, its (available energy, air density) arrays; their
        per-bin sums follow the ``HISTOGRAM_ROWS`` rows (see :func:`member_histogram`).

    Returns
    -------
    Per role (cold, hot) a histogram over the elevation-adjusted surface temperature whose rows
    are ``HISTOGRAM_ROWS`` (count, then per-bin sums) and, last, the smallest global pixel index in
    each bin; None where the block has no candidate of that role.
    """
    # Anchors are ranked and calibrated on the elevation-adjusted surface temperature.
    ts = state["datum_surface_temperature"]
    weights = {
        "surface_temperature": ts,
        "available_energy": state["available_energy"],
        "log_roughness_length": np.log(state["roughness_length"]),
        "air_density": state["air_density"],
        "net_radiation": state["net_radiation"],
        "ground_heat_flux": state["ground_heat_flux"],
        # the plain Ts enters the Monin-Obukhov length, as it does per pixel in pass 2
        "stability_temperature": state["surface_temperature"],
        # the pipeline adds it (gridded or station wind); absent: the calibration's one value
        "blending_wind_speed": state.get("blending_wind_speed", np.full(ts.shape, np.nan)),
    }
    out = []
    for role in ROLES:
        mask = state[f"{role}_candidate"]
        if not mask.any():
            out.append(None)
            continue
        extra = [x[mask] for pair in member_rows for x in pair]
        out.append(
            range_histogram(
                temperature_bins(ts[mask]),
                [weights[name][mask] for name in HISTOGRAM_ROWS[1:]] + extra,
                min_values=[flat_index[mask]],
            )
        )
    return out[0], out[1]


def combine_histograms(a: tuple, b: tuple) -> tuple:
    """Merge two pass-1 results role by role: sums add, smallest pixel index wins."""
    return tuple(merge_optional(x, y) for x, y in zip(a, b, strict=True))


def member_histogram(dense: np.ndarray, member: int) -> np.ndarray:
    """A role's dense histogram with ensemble member ``member``'s energy and density rows."""
    out = dense.copy()
    first = len(HISTOGRAM_ROWS) + 2 * member
    out[HISTOGRAM_ROWS.index("available_energy")] = dense[first]
    out[HISTOGRAM_ROWS.index("air_density")] = dense[first + 1]
    return out


def dense_histogram(histogram: RangeHistogram | None, n_members: int = 0) -> np.ndarray:
    """One role's pass-1 histogram as an array (rows, N_BINS); last row: smallest pixel index."""
    if histogram is None:
        out = np.zeros((len(HISTOGRAM_ROWS) + 2 * n_members + 1, N_BINS))
        out[-1] = np.inf
        return out
    return histogram.dense(N_BINS)


def too_few_candidates(
    role: str,
    total: int,
    needed: int,
    rule_counts: np.ndarray | None = None,
    surfaces: str = "surface",
) -> str:
    """The message of a scene with too few candidates: the rule that removed them, the pixels
    left after each rule, and what to change."""
    if rule_counts is None:
        return (
            f"only {total} {role}-anchor candidate pixels (need {needed}); give anchors.{role}_xy "
            "or check the anchor settings."
        )
    rule = screens.removing_rule(rule_counts, role, needed)
    return (
        f"only {total} {role}-anchor candidate pixels (need {needed}); the '{rule}' screen "
        f"left fewer than {needed} (pixels left after each screen: "
        f"{screens.describe_counts(rule_counts, role)}): {screens.advice(rule, surfaces)}; or give "
        f"anchors.{role}_xy."
    )


@dataclass(frozen=True)
class Anchor:
    """One calibration anchor: a population of candidate pixels around a Ts percentile."""

    role: str
    surface_temperature: float  # population mean of the elevation-adjusted Ts (for dT) [K]
    available_energy: float  # [W m-2]
    net_radiation: float  # [W m-2]
    ground_heat_flux: float  # [W m-2]
    roughness_length: float  # geometric mean [m]
    air_density: float  # [kg m-3]
    pixel_count: float  # pixels in the population (fractional at bin edges)
    candidates: int  # candidate pixels of this role in the scene
    percentile: float | None  # [%] None for a user-given anchor
    percentile_temperature: float | None  # Ts at the percentile [K]
    ts_range: tuple[float, float] | None  # Ts interval of the population [K]
    row: int
    col: int
    stability_temperature: float = float("nan")  # mean plain Ts, for the Obukhov length [K]
    blending_wind_speed: float = float("nan")  # mean wind at the blending height [m s-1]

    def as_dict(self) -> dict:
        return asdict(self)


def select_anchor(
    histogram: np.ndarray,
    role: str,
    percentile: float,
    band: float,
    min_candidates: int,
    width: int,
    rule_counts: np.ndarray | None = None,
    surfaces: str = "surface",
) -> Anchor:
    """Choose an anchor population from one role's pass-1 histogram.

    The population is every candidate whose rank lies within ``percentile +- band`` percent of the
    candidates sorted by surface temperature; bins cut by the rank limits count pro rata.
    ``rule_counts`` (pixels left after each screen, :data:`rasterbudget.screens.RULES`) name the
    screen that removed the candidates when too few are left.
    """
    counts = histogram[0]
    total = counts.sum()
    if total < min_candidates:
        raise AnchorError(
            too_few_candidates(role, int(total), min_candidates, rule_counts, surfaces)
        )
    upper = np.cumsum(counts)
    lower = upper - counts
    lo = max(0.0, (percentile - band) / 100.0 * total)
    hi = min(total, (percentile + band) / 100.0 * total)
    if hi - lo < 1.0:  # at least one pixel
        mid = 0.5 * (lo + hi)
        lo, hi = max(0.0, mid - 0.5), min(total, mid + 0.5)
    overlap = np.clip(np.minimum(upper, hi) - np.maximum(lower, lo), 0.0, None)
    weight = np.divide(overlap, counts, out=np.zeros_like(counts), where=counts > 0)
    n = float((weight * counts).sum())

    def mean(row: str) -> float:
        return float((weight * histogram[HISTOGRAM_ROWS.index(row)]).sum() / n)

    used = np.nonzero(weight > 0)[0]
    rank = percentile / 100.0 * total
    k = int(np.searchsorted(upper, rank, side="left"))
    k = min(k, N_BINS - 1)
    inside = (rank - lower[k]) / counts[k] if counts[k] > 0 else 0.5
    pixel = histogram[-1, k]
    if not np.isfinite(pixel):  # rank fell on an empty bin edge: nearest used bin
        pixel = histogram[-1, used[np.argmin(np.abs(used - k))]]
    row, col = divmod(int(pixel), width)
    return Anchor(
        role=role,
        surface_temperature=mean("surface_temperature"),
        available_energy=mean("available_energy"),
        net_radiation=mean("net_radiation"),
        ground_heat_flux=mean("ground_heat_flux"),
        roughness_length=float(np.exp(mean("log_roughness_length"))),
        air_density=mean("air_density"),
        pixel_count=n,
        candidates=int(total),
        percentile=percentile,
        percentile_temperature=float(TS_LOW + (k + inside) * TS_STEP),
        ts_range=(float(TS_LOW + used[0] * TS_STEP), float(TS_LOW + (used[-1] + 1) * TS_STEP)),
        row=row,
        col=col,
        stability_temperature=mean("stability_temperature"),
        blending_wind_speed=mean("blending_wind_speed"),
    )


def anchor_from_pixel(
    state: dict[str, np.ndarray], role: str, row: int, col: int, centre: tuple[int, int]
) -> Anchor:
    """An anchor given by the user: the pixel at ``centre`` of a small evaluated window."""
    i, j = centre
    if not state["valid"][i, j] or not np.isfinite(state["available_energy"][i, j]):
        raise AnchorError(
            f"the {role} anchor given at row {row}, column {col} has no valid inputs "
            f"(QA flags {int(state['qa'][i, j])}); choose another location for anchors.{role}_xy."
        )
    return Anchor(
        role=role,
        surface_temperature=float(state["datum_surface_temperature"][i, j]),
        available_energy=float(state["available_energy"][i, j]),
        net_radiation=float(state["net_radiation"][i, j]),
        ground_heat_flux=float(state["ground_heat_flux"][i, j]),
        roughness_length=float(state["roughness_length"][i, j]),
        air_density=float(state["air_density"][i, j]),
        pixel_count=1.0,
        candidates=1,
        percentile=None,
        percentile_temperature=None,
        ts_range=None,
        row=row,
        col=col,
        stability_temperature=float(state["surface_temperature"][i, j]),
        blending_wind_speed=float(state["blending_wind_speed"][i, j])
        if "blending_wind_speed" in state
        else float("nan"),
    )


def _resistance(
    u_blend: float | np.ndarray,
    blending_height: float,
    roughness_length: float | np.ndarray,
    inverse_length: float | np.ndarray,
) -> tuple:
    """Friction velocity and near-surface aerodynamic resistance with stability corrections."""
    psi_m = turbulence.stability_correction_momentum(blending_height * inverse_length)
    u_star = turbulence.friction_velocity(u_blend, blending_height, roughness_length, psi_m)
    psi_h2 = turbulence.stability_correction_heat(Z2 * inverse_length)
    psi_h1 = turbulence.stability_correction_heat(Z1 * inverse_length)
    rah = turbulence.aerodynamic_resistance(u_star, Z1, Z2, psi_h1, psi_h2)
    return u_star, rah


def _inverse_obukhov(rho, u_star, ts, h):
    # 1/L rather than L: zero for neutral, finite everywhere (no inf * 0 in z/L).
    return turbulence.inverse_monin_obukhov_length(rho, u_star, ts, h)


@dataclass(frozen=True)
class Calibration:
    """Fitted dT = a + b Ts and the anchor-scalar iteration that produced it."""

    a: float  # [K]
    b: float  # [-]
    iterations: int
    converged: bool
    cold_sensible_heat: float  # [W m-2]
    hot_sensible_heat: float  # [W m-2]
    cold_temperature_difference: float  # [K]
    hot_temperature_difference: float  # [K]
    cold_resistance: float  # [s m-1]
    hot_resistance: float  # [s m-1]
    blending_wind_speed: float  # [m s-1]

    def as_dict(self) -> dict:
        return asdict(self)


def calibrate(
    cold: Anchor,
    hot: Anchor,
    blending_wind_speed: float,
    blending_height: float,
    cold_evaporative_fraction: float,
    hot_evaporative_fraction: float,
    max_iterations: int = 30,
    tolerance: float = 0.001,
    gridded_wind: bool = False,
    wind_factor: float = 1.0,
) -> Calibration:
    """Fit dT = a + b Ts through the two anchors, iterating the stability correction.

    At each anchor H is fixed by its energy condition, H = (1 - EF) (Rn - G); the iteration finds
    the stability-corrected resistance consistent with that H, hence dT = H rah / (rho cp)
    (Bastiaanssen et al. 1998; Allen, Tasumi & Trezza 2007, J. Irrig. Drain. Eng. 133, for the
    anchor conditions - from memory).
    """
    if hot.surface_temperature - cold.surface_temperature < 1.0:
        raise AnchorError(
            f"hot anchor ({hot.surface_temperature:.2f} K) is not at least 1 K warmer than the "
            f"cold anchor ({cold.surface_temperature:.2f} K); the scene lacks contrast: check "
            "the surface-temperature raster or give anchors.cold_xy and anchors.hot_xy."
        )
    anchors = (cold, hot)
    h = np.array(
        [
            (1.0 - cold_evaporative_fraction) * cold.available_energy,
            (1.0 - hot_evaporative_fraction) * hot.available_energy,
        ]
    )
    z0m = np.array([a.roughness_length for a in anchors])
    rho = np.array([a.air_density for a in anchors])
    ts = np.array([a.surface_temperature for a in anchors])
    # the Obukhov length takes the plain Ts (as sensible_heat_block does per pixel); the dT
    # relation takes the elevation-adjusted one. Without a DEM both are the same.
    ts_stability = np.array(
        [
            a.surface_temperature if np.isnan(a.stability_temperature) else a.stability_temperature
            for a in anchors
        ]
    )
    # gridded wind: each anchor's own (population mean) wind; otherwise the station's one value
    wind = np.array(
        [
            blending_wind_speed
            if not np.isfinite(a.blending_wind_speed) or not gridded_wind
            else a.blending_wind_speed * wind_factor
            for a in anchors
        ]
    )
    inverse_length = np.zeros(2)
    dt_prev = np.full(2, np.inf)
    converged = False
    iteration = 0
    while iteration < max_iterations:
        iteration += 1
        u_star, rah = _resistance(wind, blending_height, z0m, inverse_length)
        dt = h * rah / (rho * SPECIFIC_HEAT_AIR)
        if np.all(np.abs(dt - dt_prev) < tolerance):
            converged = True
            break
        dt_prev = dt
        inverse_length = _inverse_obukhov(rho, u_star, ts_stability, h)
    b = (dt[1] - dt[0]) / (ts[1] - ts[0])
    a = dt[0] - b * ts[0]
    return Calibration(
        a=float(a),
        b=float(b),
        iterations=iteration,
        converged=converged,
        cold_sensible_heat=float(h[0]),
        hot_sensible_heat=float(h[1]),
        cold_temperature_difference=float(dt[0]),
        hot_temperature_difference=float(dt[1]),
        cold_resistance=float(rah[0]),
        hot_resistance=float(rah[1]),
        blending_wind_speed=blending_wind_speed,
    )


@dataclass(frozen=True)
class StabilityTable:
    r"""Converged 1/L by roughness length and the pixel's stability parameter dT / (Ts u^2).

    Monin-Obukhov similarity (Monin and Obukhov 1954; the corrections of Paulson 1970 and Webb
    1970, :mod:`rasterbudget.physics.turbulence`) makes the converged 1/L a function of these two
    alone: with
    :math:`u_* = k u / (\ln(z_b/z_{0m}) - \psi_m)` and :math:`r_{ah} = (\ln(z_2/z_1) - \psi_h(z_2)
    + \psi_h(z_1)) / (k u_*)`, the fixed point :math:`1/L = -k g H / (\rho c_p u_*^3 T_s)` with
    :math:`H = \rho c_p dT / r_{ah}` reads

    .. math:: \frac{1}{L} = -\frac{g\, dT}{T_s u^2}
              \frac{(\ln(z_b/z_{0m}) - \psi_m)^2}{\ln(z_2/z_1) - \psi_h(z_2) + \psi_h(z_1)}

    in which air density, the calibration and the wind enter only through dT / (Ts u^2) (the
    corrections depend on z/L at the fixed heights). One table thus serves every pixel, every
    ensemble member and gridded wind. Its nodes are spaced evenly in asinh(beta / BETA_SCALE):
    finely near neutral, coarsely in strong instability.
    """

    roughness_lengths: np.ndarray  # sorted, unique [m]
    first_node: float  # asinh(beta / BETA_SCALE) of the first column [-]
    node_step: float  # [-]
    inverse_length: np.ndarray  # (roughness, beta) [m-1]
    converged: np.ndarray  # (roughness, beta): the node's iteration converged [bool]

    def lookup(
        self,
        roughness_length: np.ndarray,
        temperature_difference: np.ndarray,
        surface_temperature: np.ndarray,
        wind_speed: np.ndarray,
    ) -> tuple[np.ndarray, np.ndarray]:
        """1/L [m-1] for each pixel (at the tabulated roughness length at or above its own, linear
        between nodes, held at the table's ends), and whether it is the converged 1/L itself:
        the pixel's roughness length is tabulated, its air unstable (beta > 0) and both nodes
        converged. On the stable side the capped z/L puts a kink between nodes, so stable
        pixels iterate from the looked-up value."""
        n_z0, n_nodes = self.inverse_length.shape
        row = np.searchsorted(self.roughness_lengths, roughness_length).clip(0, n_z0 - 1)
        with np.errstate(divide="ignore", invalid="ignore"):
            beta = temperature_difference / (surface_temperature * wind_speed * wind_speed)
        position = (np.arcsinh(beta / BETA_SCALE) - self.first_node) / self.node_step
        inside = (position >= 0.0) & (position <= n_nodes - 1)
        position = np.nan_to_num(position).clip(0.0, n_nodes - 1.000001)
        column = position.astype(np.intp)
        weight = position - column
        index = row * n_nodes + column
        flat = self.inverse_length.reshape(-1)
        inverse_length = flat[index] * (1.0 - weight) + flat[index + 1] * weight
        converged = self.converged.reshape(-1)
        exact = (
            inside
            & (beta > 0.0)
            & (self.roughness_lengths[row] == roughness_length)
            & converged[index]
            & converged[index + 1]
        )
        return inverse_length, exact


#: Scale of the table's stability parameter dT / (Ts u^2) [K K-1 m-2 s2]: nodes are even in
#: asinh(beta / BETA_SCALE), so about 1e-4 apart near neutral and relatively even beyond.
BETA_SCALE = 1e-4
#: The table's range of dT / (Ts u^2): from strongly stable (dT = -30 K, 300 K, 1 m s-1 is -0.1)
#: to strongly unstable [K K-1 m-2 s2].
BETA_RANGE = (-0.6, 1.0)


def stability_table(
    roughness_lengths: np.ndarray, blending_height: float, points: int = 3201
) -> StabilityTable | None:
    """The :class:`StabilityTable` of every roughness length of the class table, the nodes
    iterated to 1e-9 W m-2 (about 0.05 s per scene); None without a roughness length.

    Measured against pixels iterated to 1e-9 W m-2 (300,000 random pixels: Ts 280-335 K, dT -6 to
    25 K, wind 2-15 m s-1 at 200 m, five roughness lengths): unstable pixels read from the table
    are within 0.003 W m-2 of their own fixed point up to H = 800 W m-2 (4e-6 relative beyond);
    the iteration to 0.1 W m-2 that they replace stopped up to 1.9 W m-2 from it (slowly
    converging pixels).
    """
    z0 = np.unique(np.asarray(roughness_lengths, dtype=np.float64))
    z0 = z0[np.isfinite(z0) & (z0 > 0)]
    if z0.size == 0:
        return None
    nodes = np.linspace(*np.arcsinh(np.array(BETA_RANGE) / BETA_SCALE), points)
    beta = BETA_SCALE * np.sinh(nodes)
    # any air, Ts and wind with the node's beta: 300 K, 5 m s-1, 1 kg m-3
    ts, wind = 300.0, 5.0
    grid_z0, grid_beta = np.meshgrid(z0, beta, indexing="ij")
    identity = Calibration(0.0, 1.0, 0, True, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, wind)
    inverse_length = np.zeros(grid_z0.shape)
    _, converged = sensible_heat_block(
        np.full(grid_z0.shape, ts),
        grid_z0,
        np.ones(grid_z0.shape),
        identity,
        blending_height,
        max_iterations=200,
        tolerance=1e-9,
        datum_surface_temperature=grid_beta * ts * wind**2,  # dT = 0 + 1 * this
        inverse_length_out=inverse_length,
    )
    return StabilityTable(
        z0, float(nodes[0]), float(nodes[1] - nodes[0]), np.nan_to_num(inverse_length), converged
    )


def sensible_heat_block(
    surface_temperature: np.ndarray,
    roughness_length: np.ndarray,
    air_density: np.ndarray,
    calibration: Calibration,
    blending_height: float,
    max_iterations: int = 30,
    tolerance: float = 0.1,
    datum_surface_temperature: np.ndarray | None = None,
    initial_inverse_length: np.ndarray | None = None,
    inverse_length_out: np.ndarray | None = None,
    blending_wind_speed: np.ndarray | None = None,
    table: StabilityTable | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Per-pixel sensible heat flux [W m-2] and a convergence mask, for one block.

    ``initial_inverse_length`` [m-1] starts the stability iteration from a known state; without
    it, ``table`` (:func:`stability_table`) gives unstable pixels of a tabulated roughness length
    their converged 1/L directly (H in one evaluation) and the others a start near it, and
    without either the iteration starts neutral.
    ``inverse_length_out``, an array of the block's shape, receives the converged 1/L.
    ``blending_wind_speed`` [m s-1] gives each pixel its own wind (gridded weather) instead of
    the calibration's one value.

    dT = a + b Ts_datum (Ts_datum: the elevation-adjusted surface temperature the anchors were
    calibrated on; the plain Ts when not given), then H = rho cp dT / rah with rah iterated to
    stability convergence pixel by pixel. A pixel stops iterating once its H changes by less than
    ``tolerance`` [W m-2], so its value never depends on the other pixels of its block (hence not
    on chunking).
    """
    ts_for_dt = surface_temperature
    if datum_surface_temperature is not None:
        ts_for_dt = datum_surface_temperature
    dt = calibration.a + calibration.b * ts_for_dt
    h = np.full(surface_temperature.shape, np.nan)
    converged = np.zeros(surface_temperature.shape, dtype=bool)
    active = np.isfinite(surface_temperature) & np.isfinite(roughness_length) & np.isfinite(dt)
    # Iterate on a compact copy of the still-unconverged pixels, shrinking it as pixels converge.
    where = np.flatnonzero(active)
    wind_field = (
        np.full(surface_temperature.shape, calibration.blending_wind_speed)
        if (blending_wind_speed is None)
        else blending_wind_speed
    )
    z0m, rho, ts, dtc, wind = (
        np.ravel(x)[where]
        for x in (roughness_length, air_density, surface_temperature, dt, wind_field)
    )
    h_flat, conv_flat = h.reshape(-1), converged.reshape(-1)
    length_flat = None if inverse_length_out is None else inverse_length_out.reshape(-1)
    if initial_inverse_length is not None:
        inverse_length = np.nan_to_num(np.ravel(initial_inverse_length)[where])
    elif table is not None:
        inverse_length, exact = table.lookup(z0m, dtc, ts, wind)
        # the table holds these pixels' converged 1/L: H in one evaluation (py-spy: the
        # iteration's rounds were 58 % of an 8-member ensemble's time)
        _, rah = _resistance(wind[exact], blending_height, z0m[exact], inverse_length[exact])
        h_flat[where[exact]] = turbulence.sensible_heat_flux(rho[exact], dtc[exact], rah)
        conv_flat[where[exact]] = True
        if length_flat is not None:
            length_flat[where[exact]] = inverse_length[exact]
        rest = ~exact  # the others iterate from the table's value
        where, z0m, rho, ts, dtc, wind, inverse_length = (
            x[rest] for x in (where, z0m, rho, ts, dtc, wind, inverse_length)
        )
    else:
        inverse_length = np.zeros(where.size)
    neutral = initial_inverse_length is None and table is None
    # Pieces small enough for the iteration's temporaries to stay in the CPU cache (35 % faster
    # than the whole block at once); pixels iterate independently, so the result
    # is the same.
    for i in range(0, where.size, PIECE):
        piece = slice(i, i + PIECE)
        _iterate_pixels(
            (where[piece], z0m[piece], rho[piece], ts[piece], dtc[piece], wind[piece]),
            inverse_length[piece],
            neutral,
            (h_flat, conv_flat, length_flat),
            blending_height,
            max_iterations,
            tolerance,
        )
    return h, converged | ~active


def _iterate_pixels(
    pixels: tuple[np.ndarray, ...],
    inverse_length: np.ndarray,
    neutral: bool,
    out: tuple[np.ndarray, np.ndarray, np.ndarray | None],
    blending_height: float,
    max_iterations: int,
    tolerance: float,
) -> None:
    """The stability iteration of :func:`sensible_heat_block` for a set of pixels.

    ``pixels``: flat index into the block, z0m [m], rho [kg m-3], Ts [K], dT [K] and wind at the
    blending height [m s-1], 1-D; ``neutral``: ``inverse_length`` is zero (psi = 0 in the first
    round). Writes H, the convergence flag and 1/L at the flat indices of ``out``.
    """
    where, z0m, rho, ts, dtc, wind = pixels
    h_flat, conv_flat, length_flat = out
    h_prev = np.full(where.size, np.nan)
    for _ in range(max_iterations):
        if where.size == 0:
            break
        if neutral:
            u_star = turbulence.friction_velocity(wind, blending_height, z0m)
            rah = turbulence.aerodynamic_resistance(u_star, Z1, Z2)
        else:
            u_star, rah = _resistance(wind, blending_height, z0m, inverse_length)
        neutral = False
        h_new = turbulence.sensible_heat_flux(rho, dtc, rah)
        h_flat[where] = h_new
        if length_flat is not None:
            length_flat[where] = inverse_length
        done = np.abs(h_new - h_prev) < tolerance
        if done.any():  # shrink the working set to the pixels still iterating
            conv_flat[where[done]] = True
            keep = ~done
            where, z0m, rho, ts, dtc, wind, u_star, h_new = (
                x[keep] for x in (where, z0m, rho, ts, dtc, wind, u_star, h_new)
            )
        inverse_length = _inverse_obukhov(rho, u_star, ts, h_new)
        h_prev = h_new


# ----------------------------------------------------------------------------- the method


@dataclass(frozen=True)
class AnchorParameters:
    """What pass 2 needs from the anchor calibration."""

    calibration: Calibration
    cold: Anchor
    hot: Anchor
    explicit_cold: bool
    explicit_hot: bool
    blending_height: float
    max_iterations: int
    stability_table: StabilityTable | None


def _anchor_map_xy(grid, anchor: Anchor) -> dict:
    """Map coordinates of the anchor's pixel centre on a north-up grid."""
    t = grid.transform
    return {"x": t.c + (anchor.col + 0.5) * t.a, "y": t.f + (anchor.row + 0.5) * t.e}


class AnchorMethod(SensibleHeatMethod):
    """Hot/cold anchor calibration of dT = a + b Ts (Bastiaanssen et al. 1998)."""

    name = "anchors"
    settings_key = "anchors"
    settings_model = AnchorSettings
    needs = (
        ("overpass.wind_speed_m_s", "the anchor calibration needs the wind; 'edges' does not"),
    )
    ensemble = True
    pass1_candidates_only = True
    anchor_screens = True
    batch_columns = ("cold_anchor_ts_k", "hot_anchor_ts_k")

    def pass1_block(self, state, location, ctx):
        """Per-role Ts histograms of the anchor candidates, with per-member energy rows."""
        (r0, _), (c0, c1) = location
        # global row-major index of each candidate pixel (ties between blocks go to the lowest)
        row, col = np.divmod(state["window_index"], c1 - c0)
        flat = (row + r0).astype(np.float64) * ctx.grid.width + (col + c0)
        members = [perturbed_air(ctx.constants, state, *o) for o in ctx.member_offsets]
        return (*anchor_histograms_block(state, flat, members), state["candidate_counts"])

    def combine(self, a, b):
        return (*combine_histograms(a[:2], b[:2]), a[2] + b[2])

    def calibrate(self, reduced, ctx: CalibrationContext) -> Calibrated:
        """Choose (or read) both anchors and fit dT = a + b Ts, for the run and every member."""
        s, scene = ctx.settings, ctx.scene
        chosen, explicit, pixel_states = {}, {}, {}
        percentiles = {"cold": s.cold_percentile, "hot": s.hot_percentile}
        for r, (role, xy) in enumerate((("cold", s.cold_xy), ("hot", s.hot_xy))):
            explicit[role] = xy is not None
            if xy is None:
                chosen[role] = select_anchor(
                    dense_histogram(reduced[r]),
                    role,
                    percentiles[role],
                    s.percentile_band,
                    s.min_candidates,
                    ctx.grid.width,
                    reduced[2],
                    s.candidate_surfaces,
                )
                continue
            row, col = _pixel_of(ctx.grid, xy, role, scene.id)
            pixel_states[role] = ctx.pixel_state(row, col)
            chosen[role] = anchor_from_pixel(pixel_states[role], role, row, col, (0, 0))
        k_ref, cold_basis = cold_anchor_basis(scene, ctx.constants)
        gridded_wind = "wind_speed_m_s" in ctx.gridded_weather

        def cold_condition(cold: Anchor, factor: float = 1.0) -> float:
            """The cold anchor's imposed EF: given, or k ETr(hour) as a flux over Rn - G."""
            if k_ref is None:
                return min(factor * s.cold_evaporative_fraction, 1.2)
            lam = float(turbulence.latent_heat_of_vaporization(cold.surface_temperature))
            cold_le = factor * k_ref * ctx.constants.reference_et_hourly * lam / SECONDS_PER_HOUR
            return min(cold_le / cold.available_energy, 1.2)

        def fit(anchors: dict, fraction: float, wind_factor: float | None = None) -> Calibration:
            return calibrate(
                anchors["cold"],
                anchors["hot"],
                ctx.blending_wind_speed * (1.0 if wind_factor is None else wind_factor),
                s.blending_height_m,
                fraction,
                hot_fraction,
                s.max_iterations,
                s.tolerance_k,
                gridded_wind=gridded_wind,
                **({} if wind_factor is None else {"wind_factor": wind_factor}),
            )

        hot_fraction, hot_basis = hot_anchor_basis(scene, s, ctx.constants, chosen["hot"])
        cold_fraction = cold_condition(chosen["cold"])
        calibration = fit(chosen, cold_fraction)
        params = AnchorParameters(
            calibration=calibration,
            cold=chosen["cold"],
            hot=chosen["hot"],
            explicit_cold=explicit["cold"],
            explicit_hot=explicit["hot"],
            blending_height=s.blending_height_m,
            max_iterations=s.max_iterations,
            # each pixel's converged stability (or where its iteration starts)
            stability_table=stability_table(ctx.lookups.roughness_length, s.blending_height_m),
        )
        facts = {
            "anchors": {k: v.as_dict() | _anchor_map_xy(ctx.grid, v) for k, v in chosen.items()},
            "anchor_screens": {
                role: dict(zip(screens.RULES, map(int, reduced[2][r]), strict=True))
                for r, role in enumerate(ROLES)
            },
            "calibration": calibration.as_dict()
            | {"cold_evaporative_fraction": cold_fraction, "cold_anchor_basis": cold_basis}
            | {"hot_evaporative_fraction": hot_fraction, "hot_anchor_basis": hot_basis},
        }
        # ensemble members: the same pass-1 histograms, perturbed choices and weather
        members = []
        dense = [dense_histogram(reduced[r], len(ctx.member_offsets)) for r in range(2)]
        for m, member in enumerate(sample_members(scene.uncertainty)):
            anchors_m = {}
            for r, role in enumerate(ROLES):
                if explicit[role]:
                    st = pixel_states[role]
                    available, rho = perturbed_air(ctx.constants, st, *member.offsets)
                    anchors_m[role] = dataclasses.replace(
                        chosen[role],
                        available_energy=float(available[0, 0]),
                        air_density=float(rho[0, 0]),
                    )
                else:
                    pct = member.cold_percentile if role == "cold" else member.hot_percentile
                    anchors_m[role] = select_anchor(
                        member_histogram(dense[r], m),
                        role,
                        pct,
                        s.percentile_band,
                        s.min_candidates,
                        ctx.grid.width,
                    )
            fraction_m = cold_condition(
                anchors_m["cold"], member.cold_anchor_factor * member.reference_et_factor
            )
            members.append((member, fit(anchors_m, fraction_m, member.wind_factor)))
        if members:
            facts["ensemble"] = [
                m.as_dict() | {"a": c.a, "b": c.b, "converged": c.converged} for m, c in members
            ]
        return Calibrated(params=params, facts=facts, members=tuple(members))

    def sensible_heat_block(self, state, params, constants, inverse_length_out):
        return sensible_heat_block(
            np.where(state["valid"], state["surface_temperature"], np.nan),
            state["roughness_length"],
            state["air_density"],
            params.calibration,
            params.blending_height,
            params.max_iterations,
            datum_surface_temperature=state["datum_surface_temperature"],
            inverse_length_out=inverse_length_out,
            blending_wind_speed=state["blending_wind_speed"],
            table=params.stability_table,
        )

    def qa_block(self, state, params, location):
        """The anchor populations (or the given anchor pixels) flagged in the QA raster."""
        (r0, r1), (c0, c1) = location
        qa = np.zeros(state["qa"].shape, dtype=np.uint16)
        for anchor, explicit, flag, candidates in (
            (params.cold, params.explicit_cold, QA.COLD_ANCHOR, state["cold_candidate"]),
            (params.hot, params.explicit_hot, QA.HOT_ANCHOR, state["hot_candidate"]),
        ):
            if explicit:
                if r0 <= anchor.row < r1 and c0 <= anchor.col < c1:
                    qa[anchor.row - r0, anchor.col - c0] |= np.uint16(flag)
            else:
                low, high = anchor.ts_range
                datum = state["datum_surface_temperature"]
                with np.errstate(invalid="ignore"):
                    inside = candidates & (datum >= low) & (datum < high)
                qa |= np.where(inside, np.uint16(flag), np.uint16(0))
        return qa

    def ensemble_block(self, state, params, members, constants, valid, lam, length):
        """Every ensemble member's ET at overpass [mm h-1] and evaporative fraction on one
        block, each an array (members, rows, cols)."""
        c = constants
        ts = np.where(valid, state["surface_temperature"], np.nan)
        et_hourly = np.empty((len(members), *ts.shape))
        fraction = np.empty((len(members), *ts.shape))
        for m, (member, calibration) in enumerate(members):
            available, rho = perturbed_air(c, state, *member.offsets)
            available = np.where(valid, available, np.nan)
            # the scene's table of converged 1/L at the member's own dT and wind (py-spy, 2048
            # with 8 members: the members' iterations took 46 % of the run starting from the
            # central run's 1/L)
            h, _ = sensible_heat_block(
                ts,
                state["roughness_length"],
                rho,
                calibration,
                params.blending_height,
                params.max_iterations,
                datum_surface_temperature=state["datum_surface_temperature"],
                initial_inverse_length=None if params.stability_table is not None else length,
                blending_wind_speed=state["blending_wind_speed"] * member.wind_factor,
                table=params.stability_table,
            )
            le = partition.clip_latent_heat(available - h, c.max_evaporative_fraction * available)
            et_hourly[m] = partition.et_depth(le, lam, SECONDS_PER_HOUR)
            fraction[m] = partition.evaporative_fraction(le, available)
        return {"et_hourly": et_hourly, "evaporative_fraction": fraction}

    def summary(self, facts):
        a = facts["anchors"]
        return (
            f"cold anchor {a['cold']['surface_temperature']:.2f} K, "
            f"hot anchor {a['hot']['surface_temperature']:.2f} K"
        )

    def batch_values(self, manifest):
        anchors = manifest.get("anchors", {})
        return {
            "cold_anchor_ts_k": anchors.get("cold", {}).get("surface_temperature", ""),
            "hot_anchor_ts_k": anchors.get("hot", {}).get("surface_temperature", ""),
        }

    def report_figure(self, manifest, folder):
        markers = tuple(
            (
                manifest["anchors"][role]["x"],
                manifest["anchors"][role]["y"],
                f"{role} anchor {manifest['anchors'][role]['surface_temperature']:.1f} K",
                colour,
            )
            for role, colour in (("cold", "royalblue"), ("hot", "firebrick"))
        )
        return ReportFigure("Daily ET with the anchors", markers=markers)

    def inspect(self, scene, state, factor):
        s = scene.anchors
        lines = []
        counts = state["candidate_counts"] * factor**2
        for role in ROLES:
            n = int(state[f"{role}_candidate"].sum()) * factor**2
            lines.append(
                f"  {role}-anchor candidates: about {n} (sampled; left after each screen: "
                f"{screens.describe_counts(counts, role)})"
            )
        lines.append("  (sampled: the homogeneity and cloud-distance screens run in the full run)")
        problems = []  # both roles', not the first
        for role in ROLES:
            n = int(state[f"{role}_candidate"].sum()) * factor**2
            if n < s.min_candidates and getattr(s, f"{role}_xy") is None:
                message = too_few_candidates(
                    role, n, s.min_candidates, counts, s.candidate_surfaces
                )
                problems.append(f"about {message.removeprefix('only ')}")
        return lines, problems


#: The cold anchor's LE over the hourly tall reference ET by default: a well-watered full
#: canopy transpires about 5 % above the tall reference (common practice; Allen, Tasumi &
#: Trezza 2007, from memory).
AUTO_COLD_ANCHOR_FRACTION = 1.05


def cold_anchor_basis(scene, constants) -> tuple[float | None, str]:
    """The cold anchor's multiple of hourly reference ET (None: a fixed EF) and why."""
    asked = scene.reference_et.cold_anchor_fraction
    surface = scene.reference_et.surface
    if isinstance(asked, float):
        return asked, f"{asked} x hourly {surface} reference ET (reference_et.cold_anchor_fraction)"
    if asked == "auto" and constants.reference_et_hourly is not None:
        return (
            AUTO_COLD_ANCHOR_FRACTION,
            f"{AUTO_COLD_ANCHOR_FRACTION} x hourly {surface} reference ET (default, common "
            "practice)",
        )
    why = (
        "reference_et.cold_anchor_fraction = 'off'"
        if asked == "off"
        else "the recipe lacks the overpass humidity or wind for the hourly reference ET"
    )
    return None, f"EF = anchors.cold_evaporative_fraction ({why})"


#: Upper bound of the hot anchor's EF from the soil balance: wetter than this, the scene's driest
#: ground is no dry extreme and the calibration would rest on two wet anchors (common practice).
MAX_HOT_EVAPORATIVE_FRACTION = 0.8


def hot_anchor_basis(scene, settings, constants, hot: Anchor) -> tuple[float, str]:
    """The hot anchor's EF and why: from the FAO-56 soil-surface balance when
    ``anchors.hot_soil`` gives the rain, else ``anchors.hot_evaporative_fraction``.

    With the balance, the anchor's LE is Ke x the hourly grass reference ET at the overpass
    (Allen, Tasumi & Trezza 2007 use the soil balance's Ke for their hot anchor; from memory),
    Ke of the scene's day after the days of rain and reference ET before it.
    """
    soil = settings.hot_soil
    if soil is None:
        value = settings.hot_evaporative_fraction
        return value, f"EF = anchors.hot_evaporative_fraction ({value}; no anchors.hot_soil)"
    from ..io.daily import read_daily_series
    from ..physics.soil_evaporation import surface_evaporation_series

    series = read_daily_series(
        soil.table, ("precipitation_mm", "reference_et_mm"), scene.acquired_utc.date(), soil.days
    )
    balance = surface_evaporation_series(
        series["precipitation_mm"],
        series["reference_et_mm"],
        soil.total_evaporable_mm,
        soil.readily_evaporable_mm,
        kc_max=soil.kc_max,
        basal=soil.basal,
    )
    ke = float(balance.ke[-1])
    lam = float(turbulence.latent_heat_of_vaporization(hot.surface_temperature))
    hot_le = ke * constants.grass_reference_et_hourly * lam / SECONDS_PER_HOUR
    unbounded = max(hot_le / hot.available_energy, 0.0)
    fraction = min(unbounded, MAX_HOT_EVAPORATIVE_FRACTION)
    rain = float(series["precipitation_mm"].sum())
    bounded = (
        f"; EF {unbounded:.2f} bounded to {MAX_HOT_EVAPORATIVE_FRACTION}: the driest ground is "
        "still wet, so the calibration rests on two wet anchors (a scene a few dry days later "
        "is a better one)"
        if unbounded > MAX_HOT_EVAPORATIVE_FRACTION
        else ""
    )
    return fraction, (
        f"FAO-56 soil-surface balance over {soil.days} days ({rain:.1f} mm of rain, table "
        f"{soil.table}): Ke {ke:.3f} on the scene's day, depletion "
        f"{float(balance.depletion_start[-1]):.1f} of {soil.total_evaporable_mm} mm; LE = Ke x "
        f"hourly grass reference ET ({constants.grass_reference_et_hourly:.3f} mm/h){bounded}"
    )


def _pixel_of(grid, xy: tuple[float, float], role: str, scene_id: str) -> tuple[int, int]:
    """Row and column of a given anchor's map coordinates; refused outside the grid."""
    import rasterio

    row, col = rasterio.transform.rowcol(grid.transform, *xy)
    if not (0 <= row < grid.height and 0 <= col < grid.width):
        raise RasterBudgetError(
            f"scene {scene_id}: anchors.{role}_xy = {list(xy)} lies outside the scene "
            f"grid {tuple(round(b) for b in grid.bounds)}; give map coordinates in "
            f"{grid.crs.to_string()}."
        )
    return row, col


register(AnchorMethod())
