"""Quick-look picture: one panel per main output, with colour bars and units, map coordinates, a
scale bar, missing pixels in grey and unreliable-residual pixels marked.

The map helpers here (no-data and unreliable colours, coordinate axes, scale bar) draw the
report's maps too, so both pictures read the same way.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..catalog.qa import QA
from ..catalog.variables import QA_OUTPUT, VARIABLES, panel_variables
from ..io.writers import PARTIAL_SUFFIX

#: Drawn panels: (variable, colour map, fixed colour range or None), from the catalogue.
MAP_PANELS = tuple((n, *VARIABLES[n].panel) for n in panel_variables())

#: Every decimated layer the pipeline hands to :func:`write_quicklook`: the drawn panels, then
#: the QA flags (not drawn as a panel: they mark the unreliable-residual pixels).
PANELS = (*MAP_PANELS, (QA_OUTPUT, None, None))

MAX_PIXELS = 800  # longest side of each panel

#: Missing pixels (NaN). A mid grey lies in none of the catalogue's colour maps (RGB distance at
#: least 0.28 from every colour of each) nor among the drought-category colours.
NO_DATA_COLOUR = "#808080"
#: Pixels whose latent heat is an energy residual of a class marked unreliable (QA bit 10: open
#: water, snow, built-up). Magenta is at least 0.7 (RGB distance) from every catalogue colour.
UNRELIABLE_COLOUR = "#ff00ff"
UNRELIABLE_BIT = int(QA.RESIDUAL_UNRELIABLE_CLASS)
#: The maps on which those pixels are marked: the residual and what follows from it.
RESIDUAL_VARIABLES = ("latent_heat_flux", "evaporative_fraction", "et_daily")
NO_DATA_LABEL = "no data"
UNRELIABLE_LABEL = "residual unreliable (water, snow, built-up; QA bit 10)"


def decimation_factor(width: int, height: int) -> int:
    """Every n-th pixel in both directions keeps the longest panel side within ``MAX_PIXELS``."""
    return max(1, int(np.ceil(max(width, height) / MAX_PIXELS)))


def plain_number(value: float, digits: int = 4) -> str:
    """``value`` with about ``digits`` significant digits, thousands separators and no exponent
    for ordinary magnitudes (1e-3 to 1e15); an exponent only beyond them."""
    value = float(value)
    if not math.isfinite(value):
        return "n/a" if math.isnan(value) else ("inf" if value > 0 else "-inf")
    if value == 0:
        return "0"
    magnitude = abs(value)
    if magnitude < 1e-3 or magnitude >= 1e15:
        return f"{value:.{digits - 1}e}"
    decimals = max(0, digits - 1 - math.floor(math.log10(magnitude)))
    text = f"{value:,.{decimals}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def no_data_cmap(name: str):
    """The named matplotlib colour map with NaN pixels in :data:`NO_DATA_COLOUR`."""
    import matplotlib

    return matplotlib.colormaps[name].with_extremes(bad=NO_DATA_COLOUR)


def unreliable_mask(qa: np.ndarray) -> np.ndarray:
    """Pixels with QA bit 10 set (``qa``: the QA flags as numbers; NaN counts as no flag)."""
    flags = np.nan_to_num(np.asarray(qa, dtype=np.float64), nan=0.0).astype(np.int64)
    return (flags & UNRELIABLE_BIT) != 0


def draw_flagged(ax, mask: np.ndarray, extent=None) -> bool:
    """Paint the ``mask`` pixels in :data:`UNRELIABLE_COLOUR` over a map; True if any."""
    from matplotlib.colors import ListedColormap

    if not mask.any():
        return False
    ax.imshow(
        np.ma.masked_where(~mask, np.ones(mask.shape)),
        cmap=ListedColormap([UNRELIABLE_COLOUR]),
        vmin=0,
        vmax=1,
        interpolation="nearest",
        extent=extent,
    )
    return True


def legend_handles(unreliable: bool) -> list:
    """Legend patches for the grey no-data colour and, if drawn, the unreliable colour."""
    from matplotlib.patches import Patch

    handles = [Patch(facecolor=NO_DATA_COLOUR, edgecolor="#333", label=NO_DATA_LABEL)]
    if unreliable:
        handles.append(Patch(facecolor=UNRELIABLE_COLOUR, edgecolor="#333", label=UNRELIABLE_LABEL))
    return handles


@dataclass(frozen=True)
class MapFrame:
    """Where a map's pixels lie: its CRS (WKT, or None when unknown) and its extent."""

    crs: str | None
    extent: tuple[float, float, float, float]  # left, right, bottom, top in CRS units

    @classmethod
    def of(cls, crs, bounds) -> MapFrame:
        """From a rasterio CRS (or None) and bounds (left, bottom, right, top)."""
        left, bottom, right, top = bounds
        return cls(crs.to_wkt() if crs else None, (left, right, bottom, top))


@functools.lru_cache(maxsize=16)
def _crs_facts(wkt: str | None) -> tuple[str, bool, float, str] | None:
    """(name, geographic?, metres per CRS unit (0 for degrees: varies), unit name), or None for
    a CRS pyproj cannot read (the map then keeps bare axes: a picture never fails a run)."""
    from pyproj import CRS
    from pyproj.exceptions import CRSError

    if not wkt:
        return None
    try:
        crs = CRS.from_wkt(wkt)
    except CRSError:
        return None
    epsg = crs.to_epsg()
    name = f"EPSG:{epsg} ({crs.name})" if epsg else crs.name
    if crs.is_geographic:
        return name, True, 0.0, "°"
    axis = crs.axis_info[0] if crs.axis_info else None
    factor = axis.unit_conversion_factor if axis else 1.0
    unit = "m" if axis is None or axis.unit_name in ("metre", "meter") else axis.unit_name
    return name, False, factor, unit


def crs_name(frame: MapFrame) -> str:
    """The CRS as people read it, e.g. ``EPSG:32613 (WGS 84 / UTM zone 13N)``."""
    facts = _crs_facts(frame.crs)
    return facts[0] if facts else "unknown CRS"


def nice_length(target: float) -> float:
    """The largest 1, 2 or 5 x 10^k not above ``target`` (a scale bar's length)."""
    power = 10.0 ** math.floor(math.log10(target))
    return next(m * power for m in (5, 2, 1) if m * power <= target * (1 + 1e-9))


def _length_label(metres: float) -> str:
    return f"{metres / 1000:g} km" if metres >= 1000 else f"{metres:g} m"


def scale_bar(frame: MapFrame) -> tuple[float, str] | None:
    """A scale bar of about a fifth of the map's width: (length in CRS units, label), or None
    when the CRS is unknown. Geographic maps: metres along the centre latitude (pyproj.Geod)."""
    facts = _crs_facts(frame.crs)
    left, right, bottom, top = frame.extent
    width = abs(right - left)
    if facts is None or not width > 0:
        return None
    _, geographic, per_unit, _ = facts
    note = ""
    if geographic:
        from pyproj import CRS

        geod = CRS.from_wkt(frame.crs).get_geod()
        lat = (bottom + top) / 2
        lon = (left + right) / 2
        per_unit = geod.inv(lon - 0.5, lat, lon + 0.5, lat)[2]  # metres per degree of longitude
        note = f" at {abs(lat):.1f}°{'N' if lat >= 0 else 'S'}"
        if per_unit <= 0:
            return None
    metres = nice_length(width * per_unit / 5)
    if metres / per_unit > width:  # near a pole a degree of longitude is almost no length
        return None
    return metres / per_unit, _length_label(metres) + note


def frame_axes(ax, frame: MapFrame, x_label: bool = True, y_label: bool = True, size=7) -> None:
    """Coordinates in CRS units on the map's axes (the CRS named on the x label) and a scale bar
    at its lower left; a map of unknown CRS keeps bare axes."""
    import matplotlib.patheffects as effects
    from matplotlib.ticker import FuncFormatter, MaxNLocator

    left, right, bottom, top = frame.extent
    facts = _crs_facts(frame.crs)
    if facts is None:
        ax.set_xticks([])
        ax.set_yticks([])
        return
    _, geographic, _, unit = facts
    if geographic:
        span = max(abs(right - left), abs(top - bottom))
        decimals = max(0, 2 - math.floor(math.log10(span))) if span > 0 else 2
        ticks = FuncFormatter(lambda v, _: f"{v:.{decimals}f}°")
        names = ("longitude [°]", "latitude [°]")
    else:
        ticks = FuncFormatter(lambda v, _: f"{v:,.0f}")
        names = (f"easting [{unit}]", f"northing [{unit}]")
    for axis in (ax.xaxis, ax.yaxis):
        axis.set_major_locator(MaxNLocator(3))
        axis.set_major_formatter(ticks)
    ax.tick_params(labelsize=size)
    ax.tick_params(axis="y", labelrotation=90)
    for label in ax.get_yticklabels():
        label.set_verticalalignment("center")
    if x_label:
        ax.set_xlabel(f"{names[0]}, {crs_name(frame)}", fontsize=size)
    if y_label:
        ax.set_ylabel(names[1], fontsize=size)
    bar = scale_bar(frame)
    if bar is not None:
        length, text = bar
        x0 = left + 0.05 * (right - left)
        y0 = bottom + 0.06 * (top - bottom)
        halo = [effects.withStroke(linewidth=5, foreground="white")]
        ax.plot([x0, x0 + length], [y0, y0], color="black", lw=3, solid_capstyle="butt")
        ax.lines[-1].set_path_effects(halo)
        ax.text(
            x0 + length / 2,
            y0 + 0.025 * (top - bottom),
            text,
            ha="center",
            va="bottom",
            fontsize=size,
            path_effects=[effects.withStroke(linewidth=2.5, foreground="white")],
        )
    ax.set_xlim(left, right)
    ax.set_ylim(bottom, top)


def _sibling_frame(folder: Path, shape: tuple[int, int]) -> MapFrame | None:
    """The panels' frame from a written raster next to the quick-look (its header only): the
    decimated panel's pixel k covers full-resolution pixels k x step to (k + 1) x step."""
    import rasterio

    for name, *_ in MAP_PANELS:
        path = folder / f"{name}.tif"
        if not path.is_file():
            continue
        with rasterio.open(path) as src:
            step = decimation_factor(src.width, src.height)
            t = src.transform
            left, top = t.c, t.f
            right = left + shape[1] * step * t.a
            bottom = top + shape[0] * step * t.e
            return MapFrame(src.crs.to_wkt() if src.crs else None, (left, right, bottom, top))
    return None


def write_quicklook(
    panels: dict[str, np.ndarray], path: Path, title: str, frame: MapFrame | None = None
) -> Path:
    """Render the panels (decimated output arrays, NaN = no value) to a PNG, written atomically.

    Missing pixels are grey; where the QA flags are among the panels, unreliable-residual pixels
    are magenta on the latent heat, evaporative fraction and daily ET panels. A panel with a
    fixed range in the catalogue uses it; any other is stretched over the 2nd to 98th percentile
    of its pixels, the range stated in its title. ``frame`` (default: read from a raster written
    next to ``path``) gives the coordinates and scale bar.

    The pipeline takes the decimated arrays from its pass-2 blocks in the same compute as the
    GeoTIFFs: reading the written outputs back cost about 1 s at 4096 x 4096.
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    shape = np.shape(panels[MAP_PANELS[0][0]])
    if frame is None:
        frame = _sibling_frame(path.parent, shape)
    extent = frame.extent if frame is not None else None
    qa = panels.get(QA_OUTPUT)
    flagged = unreliable_mask(qa) if qa is not None else None
    # A fixed layout: constrained layout cost about 0.35 s per figure, most of a small scene's run.
    fig, axes = plt.subplots(2, 3, figsize=(13, 7.2), sharex=True, sharey=True)
    fig.subplots_adjust(left=0.04, right=0.97, bottom=0.13, top=0.89, wspace=0.12, hspace=0.28)
    marked = False
    for k, (ax, (name, cmap, fixed)) in enumerate(zip(axes.flat, MAP_PANELS, strict=True)):
        data = np.asarray(panels[name], dtype=np.float64)
        finite = data[np.isfinite(data)]
        if fixed is not None:
            (vmin, vmax), how = fixed, "fixed"
        elif finite.size:
            (vmin, vmax), how = np.percentile(finite, [2, 98]), "2-98 %"
        else:
            (vmin, vmax), how = (0.0, 1.0), "no data"
        image = ax.imshow(
            data,
            cmap=no_data_cmap(cmap),
            vmin=vmin,
            vmax=vmax,
            interpolation="nearest",
            extent=extent,
        )
        if flagged is not None and name in RESIDUAL_VARIABLES:
            marked |= draw_flagged(ax, flagged, extent)
        units = VARIABLES[name].units
        ax.set_title(
            f"{name.replace('_', ' ')}\n{plain_number(vmin, 3)} to {plain_number(vmax, 3)}"
            f"{'' if units == '1' else ' ' + units} ({how})",
            fontsize=9,
        )
        if frame is not None:
            frame_axes(ax, frame, x_label=k >= 3, y_label=k % 3 == 0)
        else:
            ax.set_xticks([])
            ax.set_yticks([])
        fig.colorbar(image, ax=ax, shrink=0.85, label=units)
    fig.legend(handles=legend_handles(marked), loc="lower center", ncol=2, fontsize=8)
    fig.suptitle(title)
    partial = path.with_name(path.name + PARTIAL_SUFFIX)
    try:
        fig.savefig(partial, dpi=90, format="png")
        partial.replace(path)
    except BaseException:
        partial.unlink(missing_ok=True)
        raise
    finally:
        plt.close(fig)
    return path
