"""Evaporative fraction from the dry and wet edges of the surface temperature-albedo scatter.

Over a scene with the same weather everywhere, the upper (dry) boundary of the Ts-albedo scatter
is where LE = 0 and the lower (wet) boundary where H = 0; a pixel's evaporative fraction is its
place between them at its albedo (Roerink, Su & Menenti 2000, Phys. Chem. Earth B 25, 147-157):

    EF = (T_H - Ts) / (T_H - T_LE),  T_H = a_H + b_H albedo,  T_LE = a_LE + b_LE albedo

The method needs no wind speed and no air humidity. Pass 1 reduces every block to a 2-D histogram
of (albedo, Ts) over QA-clean pixels; per albedo bin, the edge temperatures are high and low
percentiles of Ts taken from that histogram (exact to the Ts bin width, whatever the chunking);
the dry edge is fitted where Ts falls with albedo (above the albedo of the hottest bin, the
radiation-controlled branch) and the wet edge where Ts rises with albedo (at or below it, the
evaporation-controlled branch), each with the Theil-Sen estimator (scipy), robust to outlying bins.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Literal

import numpy as np
from pydantic import Field

from ..errors import AnchorError
from .base import (
    Calibrated,
    CalibrationContext,
    ReportFigure,
    SensibleHeatMethod,
    StrictSettings,
    register,
)
from .histograms import RangeHistogram, merge_optional, range_histogram


class EdgeSettings(StrictSettings):
    """``[scene.edges]``: dry and wet edges of the surface temperature-albedo scatter."""

    dry_percentile: float = Field(99.0, gt=50.0, lt=100.0)
    wet_percentile: float = Field(1.0, gt=0.0, lt=50.0)
    min_pixels_per_bin: int = Field(50, ge=5)
    min_bins: int = Field(4, ge=3)
    wet_edge: Literal["flat", "fitted"] = "flat"


#: 2-D histogram layout: albedo bins [-] and surface-temperature bins [K].
ALBEDO_STEP = 0.005
N_ALBEDO = round(1.0 / ALBEDO_STEP)
TS_LOW, TS_HIGH, TS_STEP = 200.0, 350.0, 0.1
N_TS = round((TS_HIGH - TS_LOW) / TS_STEP)


def scatter_histogram_block(state: dict[str, np.ndarray]) -> RangeHistogram | None:
    """Pass-1 reduction: counts of QA-clean pixels per (albedo bin, Ts bin), flattened row-major."""
    mask = state["edge_candidate"]
    if not mask.any():
        return None
    a_bin = np.clip(np.floor(state["albedo"][mask] / ALBEDO_STEP), 0, N_ALBEDO - 1)
    # like the anchors, the edges use Ts carried to the station elevation (one weather for all)
    ts = state["datum_surface_temperature"][mask]
    t_bin = np.clip(np.floor((ts - TS_LOW) / TS_STEP), 0, N_TS - 1)
    return range_histogram((a_bin * N_TS + t_bin).astype(np.intp), [])


combine_histograms = merge_optional


@dataclass(frozen=True)
class Edges:
    """The fitted dry and wet edges and the per-bin points behind them (for the manifest)."""

    dry_intercept: float  # [K]
    dry_slope: float  # [K per unit albedo]
    wet_intercept: float  # [K]
    wet_slope: float  # [K per unit albedo]
    albedo_of_hottest_bin: float  # [-]
    bin_albedo: list[float]  # bin centres used [-]
    bin_dry_temperature: list[float]  # [K]
    bin_wet_temperature: list[float]  # [K]
    bin_pixels: list[int]
    dry_percentile: float
    wet_percentile: float
    wet_edge: str

    def as_dict(self) -> dict:
        return asdict(self)

    def dry(self, albedo):
        return self.dry_intercept + self.dry_slope * albedo

    def wet(self, albedo):
        return self.wet_intercept + self.wet_slope * albedo


def _percentile_of_counts(counts: np.ndarray, q: float) -> float:
    upper = np.cumsum(counts)
    rank = q / 100.0 * upper[-1]
    k = min(int(np.searchsorted(upper, rank, side="left")), counts.size - 1)
    inside = (rank - (upper[k] - counts[k])) / counts[k] if counts[k] else 0.5
    return float(TS_LOW + (k + inside) * TS_STEP)


def fit_edges(
    histogram: RangeHistogram | None,
    dry_percentile: float = 99.0,
    wet_percentile: float = 1.0,
    min_pixels_per_bin: int = 50,
    min_bins: int = 4,
    wet_edge: str = "flat",
) -> Edges:
    """Fit the dry and wet edges from the pass-1 histogram (see module docstring).

    ``wet_edge = "fitted"`` fits the wet edge to the per-bin low percentiles of the
    evaporation-controlled branch (Roerink, Su & Menenti 2000). That needs wet pixels across the
    branch's albedos; where wet surfaces are few and clustered (a handful of irrigated fields) the
    bins without any pull the line up. ``"flat"`` takes a horizontal wet edge at the
    ``wet_percentile`` of all clean pixels (common practice for triangle-type methods, no
    published source).
    """
    if histogram is None:
        raise AnchorError(
            "no QA-clean land pixels for the temperature-albedo edges; check the inputs' QA "
            "flags and the class table's residual_reliable settings."
        )
    counts = histogram.dense(N_ALBEDO * N_TS)[0].reshape(N_ALBEDO, N_TS)
    per_bin = counts.sum(axis=1)
    used = np.flatnonzero(per_bin >= min_pixels_per_bin)
    if used.size < min_bins:
        raise AnchorError(
            f"only {used.size} albedo bins of width {ALBEDO_STEP} hold at least "
            f"{min_pixels_per_bin} clean pixels (need {min_bins}); the scene's albedo range is "
            "too narrow for the edges method: lower edges.min_pixels_per_bin or use anchors."
        )
    albedo = (used + 0.5) * ALBEDO_STEP
    dry = np.array([_percentile_of_counts(counts[k], dry_percentile) for k in used])
    wet = np.array([_percentile_of_counts(counts[k], wet_percentile) for k in used])
    hottest = int(np.argmax(dry))
    dry_branch = slice(hottest, None)
    wet_branch = slice(0, hottest + 1)
    if albedo[dry_branch].size < 2 or albedo[wet_branch].size < 2:
        # the scatter has no turning point inside the data: fit both edges over all bins
        dry_branch = wet_branch = slice(None)
    from scipy.stats import theilslopes  # here: scipy.stats takes ~1.4 s to import

    dry_slope, dry_intercept, *_ = theilslopes(dry[dry_branch], albedo[dry_branch])
    if wet_edge == "flat":
        wet_slope, wet_intercept = 0.0, _percentile_of_counts(counts.sum(axis=0), wet_percentile)
    else:
        wet_slope, wet_intercept, *_ = theilslopes(wet[wet_branch], albedo[wet_branch])
    edges = Edges(
        dry_intercept=float(dry_intercept),
        dry_slope=float(dry_slope),
        wet_intercept=float(wet_intercept),
        wet_slope=float(wet_slope),
        albedo_of_hottest_bin=float(albedo[hottest]),
        bin_albedo=albedo.tolist(),
        bin_dry_temperature=dry.tolist(),
        bin_wet_temperature=wet.tolist(),
        bin_pixels=per_bin[used].astype(int).tolist(),
        dry_percentile=dry_percentile,
        wet_percentile=wet_percentile,
        wet_edge=wet_edge,
    )
    spread = edges.dry(albedo) - edges.wet(albedo)
    if np.any(spread < 1.0):
        raise AnchorError(
            "the fitted dry and wet edges come closer than 1 K within the scene's albedo range "
            f"({albedo[0]:.3f}-{albedo[-1]:.3f}); the scene lacks wet or dry surfaces for the "
            "edges method: use anchors instead."
        )
    return edges


def evaporative_fraction_block(
    albedo: np.ndarray, surface_temperature: np.ndarray, edges: Edges
) -> np.ndarray:
    """Unclipped evaporative fraction of each pixel (Roerink, Su & Menenti 2000, eq. 9). [-]"""
    dry = edges.dry(albedo)
    with np.errstate(invalid="ignore", divide="ignore"):
        return (dry - surface_temperature) / (dry - edges.wet(albedo))


def scatter_picture(histogram: RangeHistogram, edges: Edges, path, title: str) -> None:
    """Ts against albedo as a density image with both edges and the bin points drawn."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.colors import LogNorm

    counts = histogram.dense(N_ALBEDO * N_TS)[0].reshape(N_ALBEDO, N_TS)
    rows = np.flatnonzero(counts.sum(axis=1))
    cols = np.flatnonzero(counts.sum(axis=0))
    a0, a1 = rows[0], rows[-1] + 1
    t0, t1 = cols[0], cols[-1] + 1
    fig, ax = plt.subplots(figsize=(7, 5), constrained_layout=True)
    image = ax.imshow(
        counts[a0:a1, t0:t1].T,
        origin="lower",
        aspect="auto",
        cmap="Greys",
        norm=LogNorm(),
        extent=(a0 * ALBEDO_STEP, a1 * ALBEDO_STEP, TS_LOW + t0 * TS_STEP, TS_LOW + t1 * TS_STEP),
    )
    x = np.array([a0, a1]) * ALBEDO_STEP
    ax.plot(x, edges.dry(x), color="firebrick", label="dry edge (LE = 0)")
    ax.plot(x, edges.wet(x), color="royalblue", label="wet edge (H = 0)")
    ax.plot(edges.bin_albedo, edges.bin_dry_temperature, ".", color="firebrick", ms=4)
    ax.plot(edges.bin_albedo, edges.bin_wet_temperature, ".", color="royalblue", ms=4)
    ax.set_xlabel("albedo [-]")
    ax.set_ylabel("surface temperature [K]")
    ax.set_title(title)
    ax.legend(loc="upper right")
    fig.colorbar(image, ax=ax, label="pixels")
    fig.savefig(path, dpi=90, format="png")
    plt.close(fig)


# ----------------------------------------------------------------------------- the method


class EdgeMethod(SensibleHeatMethod):
    """Dry and wet edges of the Ts-albedo scatter (Roerink, Su & Menenti 2000)."""

    name = "edges"
    settings_key = "edges"
    settings_model = EdgeSettings

    def pass1_block(self, state, location, ctx):
        return scatter_histogram_block(state)

    def combine(self, a, b):
        return merge_optional(a, b)

    def calibrate(self, reduced, ctx: CalibrationContext) -> Calibrated:
        e = ctx.settings
        fitted = fit_edges(
            reduced,
            e.dry_percentile,
            e.wet_percentile,
            e.min_pixels_per_bin,
            e.min_bins,
            e.wet_edge,
        )
        return Calibrated(params=fitted, facts={"edges": fitted.as_dict()})

    def sensible_heat_block(self, state, params, constants, inverse_length_out):
        # H is what the edges leave of the available energy: (1 - EF) (Rn - G), unclipped here
        ef = evaporative_fraction_block(state["albedo"], state["datum_surface_temperature"], params)
        h = np.where(state["valid"], (1.0 - ef) * state["available_energy"], np.nan)
        return h, np.ones(h.shape, dtype=bool)

    def extra_outputs(self, reduced, params, out_dir, title):
        picture = out_dir / "edges.png"
        partial = picture.with_name(picture.name + ".partial")
        scatter_picture(reduced, params, partial, f"{title}: surface temperature against albedo")
        return {"edges.png": partial.replace(picture)}

    def summary(self, facts):
        e = facts["edges"]
        return (
            f"dry edge {e['dry_intercept']:.1f} {e['dry_slope']:+.1f} albedo K, "
            f"wet edge {e['wet_intercept']:.1f} {e['wet_slope']:+.1f} albedo K"
        )

    def report_figure(self, manifest, folder):
        if not (folder / "edges.png").is_file():
            return None
        return ReportFigure("Temperature-albedo edges", image=folder / "edges.png")


register(EdgeMethod())
