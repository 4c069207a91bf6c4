"""The catalogue of output variables: one row each, everything the package says about it.

A row gives the file stem, units, description and data type of an output raster, the histogram
that makes its exact per-class and per-tile percentiles (range and bin width), and its panel in
the quick-look picture. Writers, summaries, the quick-look and the Zarr store all read it here;
a new output variable is one row (and the line of the per-block code that computes it).
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

__all__ = [
    "MEMBER_FRACTIONS",
    "QA_OUTPUT",
    "VARIABLES",
    "Variable",
    "histogram_variables",
    "panel_variables",
    "scene_outputs",
]


@dataclass(frozen=True)
class Variable:
    """One output variable."""

    name: str  # file stem and band name
    units: str
    description: str
    group: str  # "flux", "component", "reference", "ensemble", "qa", "internal", "season", ...
    dtype: str = "float32"
    nodata: float | None = float("nan")  # None: no nodata value (QA: 0 means "no flag")
    #: exact summaries: histogram range and bin width (low, high, step), or None
    histogram: tuple[float, float, float] | None = None
    #: quick-look panel: (matplotlib colour map, fixed (vmin, vmax) or None), or None
    panel: tuple[str, tuple[float, float] | None] | None = None
    #: category rasters: (code, name, colour #rrggbb) of each category (GeoTIFF colour table
    #: and GDAL category names)
    categories: tuple[tuple[int, str, str], ...] | None = None


#: Drought categories of standardized anomalies (McKee, Doesken & Kleist 1993 classes), dry
#: (brown) to wet (blue); 0 = no value.
DROUGHT_CATEGORIES = (
    (1, "extremely dry", "#7f3b08"),
    (2, "severely dry", "#c2661a"),
    (3, "moderately dry", "#f1b36a"),
    (4, "near normal", "#e8e8e8"),
    (5, "moderately wet", "#8ec7e0"),
    (6, "severely wet", "#3a8fc4"),
    (7, "extremely wet", "#08407a"),
)


_ROWS = (
    Variable(
        "net_radiation",
        "W m-2",
        "net radiation Rn at overpass",
        "flux",
        histogram=(-300.0, 1200.0, 0.5),
        panel=("inferno", None),
    ),
    Variable(
        "ground_heat_flux",
        "W m-2",
        "ground heat flux G at overpass",
        "flux",
        histogram=(-300.0, 700.0, 0.5),
        panel=("copper", None),
    ),
    Variable(
        "sensible_heat_flux",
        "W m-2",
        "sensible heat flux H at overpass",
        "flux",
        histogram=(-400.0, 1200.0, 0.5),
        panel=("OrRd", None),
    ),
    Variable(
        "latent_heat_flux",
        "W m-2",
        "latent heat flux LE = Rn - G - H at overpass",
        "flux",
        histogram=(0.0, 1200.0, 0.5),
        panel=("PuBuGn", None),
    ),
    Variable(
        "evaporative_fraction",
        "1",
        "evaporative fraction LE / (Rn - G)",
        "flux",
        histogram=(0.0, 1.0, 0.001),
        panel=("BrBG", (0.0, 1.0)),
    ),
    Variable(
        "et_hourly",
        "mm h-1",
        "actual evapotranspiration rate at overpass",
        "flux",
        histogram=(0.0, 2.0, 0.001),
    ),
    Variable(
        "et_daily",
        "mm d-1",
        "daily actual evapotranspiration (scaling in the manifest)",
        "flux",
        histogram=(0.0, 20.0, 0.01),
        panel=("YlGnBu", None),
    ),
    Variable("shortwave_in", "W m-2", "incoming shortwave radiation at overpass", "component"),
    Variable("longwave_in", "W m-2", "incoming longwave radiation at overpass", "component"),
    Variable("longwave_out", "W m-2", "outgoing longwave radiation at overpass", "component"),
    Variable("net_radiation_daily", "MJ m-2 d-1", "FAO-56 daily net radiation", "component"),
    # the surface state the fluxes came from (given, or derived from a product's bands)
    Variable("albedo", "1", "broadband surface albedo used", "component"),
    Variable("surface_temperature", "K", "land-surface temperature used", "component"),
    Variable(
        "surface_class",
        "1",
        "class code used (given land cover, or recognised from NDVI and albedo)",
        "component",
        dtype="uint8",
        nodata=0,
    ),
    Variable(
        "reference_et_fraction",
        "1",
        "ET at overpass / hourly standardized reference ET",
        "reference",
    ),
    Variable(
        "et_daily_p10",
        "mm d-1",
        "daily ET, 10th percentile of the uncertainty ensemble",
        "ensemble",
        histogram=(0.0, 20.0, 0.01),
    ),
    Variable(
        "et_daily_p90",
        "mm d-1",
        "daily ET, 90th percentile of the uncertainty ensemble",
        "ensemble",
        histogram=(0.0, 20.0, 0.01),
    ),
    # one band per ensemble member (band descriptions member_01, ...; the manifest's ensemble)
    Variable(
        "reference_et_fraction_members",  # MEMBER_FRACTIONS
        "1",
        "each ensemble member's ET at overpass / its hourly reference ET",
        "members",
    ),
    Variable(
        "qa_flags", "bitmask", "QA flags, bits in the README", "qa", dtype="uint16", nodata=None
    ),
    # carried through pass 2 for the per-class summaries, never written
    Variable("land_cover_code", "1", "land-cover class code", "internal"),
    # season totals ({start}, {end}, {fraction} filled per season)
    Variable("et_season", "mm", "ET {start} to {end}", "season"),
    Variable(
        "mean_fraction",
        "1",
        "season mean {fraction}, weighted by daily reference ET (et_season / reference ET)",
        "season",
    ),
    Variable("scene_count", "1", "valid scenes per pixel", "season", dtype="uint8", nodata=255),
    Variable(
        "season_qa",
        "bitmask",
        "1: filled from neighbouring scenes, 2: no valid scene, 4: a scene flagged the "
        "residual unreliable (water, snow, built-up)",
        "season",
        dtype="uint8",
        nodata=255,
    ),
    # season totals of the ensemble members (percentiles per pixel over the members' totals)
    Variable(
        "et_season_p10",
        "mm",
        "ET {start} to {end}, 10th percentile of the members",
        "season_members",
    ),
    Variable("et_season_p50", "mm", "ET {start} to {end}, median of the members", "season_members"),
    Variable(
        "et_season_p90",
        "mm",
        "ET {start} to {end}, 90th percentile of the members",
        "season_members",
    ),
    Variable(
        "et_season_members",  # one band per member, as the scenes' member fractions
        "mm",
        "ET {start} to {end} of each ensemble member",
        "season_members",
    ),
    # comparisons ({units}: those of the compared rasters)
    Variable("difference", "{units}", "current - previous", "comparison"),
    Variable(
        "difference_p10",
        "{units}",
        "current - previous, 10th percentile of the members",
        "comparison",
    ),
    Variable(
        "difference_p50", "{units}", "current - previous, median of the members", "comparison"
    ),
    Variable(
        "difference_p90",
        "{units}",
        "current - previous, 90th percentile of the members",
        "comparison",
    ),
    Variable("percent_change", "%", "100 (current - previous) / previous", "comparison"),
    Variable("standardized_anomaly", "1", "(current - baseline mean) / baseline std", "comparison"),
    Variable(
        "drought_category",
        "class",
        "1 extremely dry ... 4 near normal ... 7 extremely wet (McKee et al. 1993 classes)",
        "comparison",
        dtype="uint8",
        nodata=0,
        categories=DROUGHT_CATEGORIES,
    ),
)

VARIABLES: dict[str, Variable] = {v.name: v for v in _ROWS}
"""Every output variable by name, in the order the package writes and summarises them."""

QA_OUTPUT = "qa_flags"
MEMBER_FRACTIONS = "reference_et_fraction_members"


def _of_group(*groups: str) -> dict[str, Variable]:
    return {n: v for n, v in VARIABLES.items() if v.group in groups}


def scene_outputs(components: bool, reference: bool, ensemble: bool) -> tuple[str, ...]:
    """The float rasters a scene run writes, in order: the fluxes, then what was asked for."""
    groups = ["flux"]
    groups += ["component"] if components else []
    groups += ["reference"] if reference else []
    groups += ["ensemble"] if ensemble else []
    return tuple(_of_group(*groups))


def histogram_variables(names: Iterable[str]) -> list[str]:
    """Those of ``names`` with summary histograms, in catalogue order."""
    chosen = set(names)
    return [n for n, v in VARIABLES.items() if v.histogram is not None and n in chosen]


def panel_variables() -> list[str]:
    """The quick-look panels, in catalogue order."""
    return [n for n, v in VARIABLES.items() if v.panel is not None]


#: file stem -> (units, description) of each group, for code that lists outputs by group
FLUX_OUTPUTS = {n: (v.units, v.description) for n, v in _of_group("flux").items()}
COMPONENT_OUTPUTS = {n: (v.units, v.description) for n, v in _of_group("component").items()}
REFERENCE_OUTPUTS = {n: (v.units, v.description) for n, v in _of_group("reference").items()}
ENSEMBLE_OUTPUTS = {n: (v.units, v.description) for n, v in _of_group("ensemble").items()}
