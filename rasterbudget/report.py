"""One HTML report per run: a table of contents, the colour scales all its maps share, maps,
histograms, energy partition, anchors or edges, seasons, zone tables, QA statistics and the
cautions.

Maps show missing pixels in grey and, on the latent heat, evaporative fraction and ET maps,
pixels of classes whose residual is unreliable (QA bit 10) in magenta; each has coordinates in
its CRS and a scale bar. A small report embeds its images (base64 PNG: one self-contained file);
a large one (more than ``IMAGE_BYTES_INLINE`` of images, or more than ``SCENES_INLINE`` scenes)
writes them as PNG files in ``OUT/report_files/`` and links them.
"""

from __future__ import annotations

import base64
import csv
import hashlib
import html
import io
import json
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .catalog.variables import VARIABLES
from .io.paths import output_folder
from .io.writers import write_bytes_atomic, write_text_atomic
from .methods import METHODS
from .scene.manifest import CAUTION
from .scene.quicklook import (
    MAP_PANELS,
    NO_DATA_COLOUR,
    RESIDUAL_VARIABLES,
    UNRELIABLE_COLOUR,
    MapFrame,
    crs_name,
    draw_flagged,
    frame_axes,
    legend_handles,
    no_data_cmap,
    plain_number,
    unreliable_mask,
)

#: Above this many bytes of images, or more than ``SCENES_INLINE`` scenes, the report links its
#: images as files in ``REPORT_FILES`` instead of embedding them (the 25-scene series demo's
#: self-contained report was 14 MB).
IMAGE_BYTES_INLINE = 3_000_000
SCENES_INLINE = 10
REPORT_FILES = "report_files"

#: Percentiles of the pooled pixels that bound a shared colour scale without a fixed range.
STRETCH = (2.0, 98.0)
_STRETCH_TEXT = "2nd to 98th percentile"


def _all(n: int, what: str) -> str:
    return f"the run's one {what}" if n == 1 else f"all {n} {what}s"


SEASON_COLOURS = "YlGnBu"


def _png(fig) -> str:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=80)
    import matplotlib.pyplot as plt

    plt.close(fig)
    return "data:image/png;base64," + base64.b64encode(buffer.getvalue()).decode()


def _img(src: str, alt: str) -> str:
    return f'<img src="{src}" alt="{html.escape(alt)}">'


def _file_img(path: Path, alt: str) -> str:
    data = base64.b64encode(path.read_bytes()).decode()
    return _img(f"data:image/png;base64,{data}", alt)


def _anchor(kind: str, name: str) -> str:
    """An HTML id for a section (``kind``: scene, season, comparison)."""
    return f"{kind}-" + re.sub(r"[^A-Za-z0-9_.-]", "-", name)


def _section(anchor: str, body: str) -> str:
    return f'<section id="{html.escape(anchor)}">\n{body}\n</section>'


#: Zone-table columns shown in the report (zones.csv has more).
ZONE_COLUMNS = [
    "zone_id",
    "area_m2",
    "covered_share",
    "valid_share",
    "flagged_share",
    "mean_depth_mm",
    "volume_m3",
]

#: Columns of names, codes and identifiers: printed as given, never as numbers.
TEXT_COLUMNS = {"bit", "code", "name", "category", "variable", "zone_id", "id"}


def _cell(column: str, value) -> str:
    """A table cell's text: integers with thousands separators, other numbers with four
    significant digits and no exponent for ordinary magnitudes (:func:`plain_number`)."""
    if column in TEXT_COLUMNS or column.endswith("_id") or isinstance(value, bool):
        return html.escape(str(value))
    if isinstance(value, int):
        return f"{value:,}"
    text = str(value).strip()
    if re.fullmatch(r"[+-]?\d+", text):
        return f"{int(text):,}"
    try:
        number = float(text)
    except ValueError:
        return html.escape(text)
    return plain_number(number, 4)


def _table(rows: list[dict], columns: list[str]) -> str:
    # a break opportunity after each underscore keeps long column names from widening the table
    head = "".join(f"<th>{html.escape(c).replace('_', '_<wbr>')}</th>" for c in columns)
    body = []
    for row in rows:
        cells = "".join(f"<td>{_cell(c, row.get(c, ''))}</td>" for c in columns)
        body.append(f"<tr>{cells}</tr>")
    return f"<div class='table-wrap'><table><tr>{head}</tr>{''.join(body)}</table></div>"


def _read_small(path: Path, side: int = 500) -> tuple[np.ndarray, tuple]:
    """The raster decimated to at most ``side`` pixels a side (NaN where masked), with its
    (bounds, transform, crs)."""
    import rasterio

    with rasterio.open(path) as src:
        factor = max(1, int(np.ceil(max(src.width, src.height) / side)))
        data = (
            src.read(
                1,
                out_shape=(max(1, src.height // factor), max(1, src.width // factor)),
                masked=True,
            )
            .astype(float)
            .filled(np.nan)
        )
        return data, (src.bounds, src.transform, src.crs)


def _frame(geo: tuple) -> MapFrame:
    bounds, _, crs = geo
    return MapFrame.of(crs, bounds)


# ---- shared colour scales ------------------------------------------------------------------


@dataclass(frozen=True)
class Scale:
    """One colour scale shared by the maps of a variable, and how it was found."""

    low: float
    high: float
    basis: str

    def key(self) -> list:
        return [round(self.low, 9), round(self.high, 9)]


def _rounded(low: float, high: float) -> tuple[float, float]:
    """``low`` down and ``high`` up to a step of 2 x 10^k (about 2-5 % of the range): the stated
    ranges read as round numbers and stay put when one more scene barely moves a percentile
    (every scene's maps are redrawn when the scales change)."""
    span = high - low
    if not (np.isfinite(span) and span > 0):
        return low, high
    step = 2 * 10.0 ** (np.floor(np.log10(span)) - 1)
    return float(np.floor(low / step) * step), float(np.ceil(high / step) * step)


def _scene_value_counts(folder: Path) -> dict[str, list]:
    """Per stretched panel variable, the counts of the scene's decimated pixels in the bins of
    the catalogue histogram (sparse: [[bin, count], ...]), cached until the scene reruns."""

    def count() -> dict:
        result = {}
        for name, _, fixed in MAP_PANELS:
            histogram = VARIABLES[name].histogram
            path = folder / f"{name}.tif"
            if fixed is not None or histogram is None or not path.is_file():
                continue
            low, high, step = histogram
            bins = round((high - low) / step)
            data, _ = _read_small(path)
            values = data[np.isfinite(data)]
            index = np.clip(np.floor((values - low) / step), 0, bins - 1).astype(np.int64)
            counts = np.bincount(index, minlength=bins)
            nonzero = np.flatnonzero(counts)
            result[name] = [[int(i), int(counts[i])] for i in nonzero]
        return result

    return _cached(folder, "values", "v1", count)


def _shared_scales(out_dir: Path, scene_ids: list[str]) -> dict[str, Scale]:
    """One colour scale per map variable for every scene of the run: the catalogue's fixed
    range where it gives one, otherwise the 2nd to 98th percentile of all scenes' decimated
    pixels pooled (at the catalogue histogram's bin width)."""
    counts = [_scene_value_counts(out_dir / s) for s in scene_ids]
    scales = {}
    n = len(scene_ids)
    for name, _, fixed in MAP_PANELS:
        if fixed is not None:
            scales[name] = Scale(*fixed, "fixed range of the variable catalogue")
            continue
        histogram = VARIABLES[name].histogram
        pooled = None
        if histogram is not None:
            low, high, step = histogram
            pooled = np.zeros(round((high - low) / step), dtype=np.int64)
            for scene in counts:
                pairs = np.array(scene.get(name, []), dtype=np.int64).reshape(-1, 2)
                np.add.at(pooled, pairs[:, 0], pairs[:, 1])
        if pooled is None or not pooled.sum():
            scales[name] = Scale(0.0, 1.0, "no valid pixels")
            continue
        cumulative = np.cumsum(pooled) / pooled.sum()
        first = int(np.searchsorted(cumulative, STRETCH[0] / 100))
        last = int(np.searchsorted(cumulative, STRETCH[1] / 100))
        scales[name] = Scale(
            *_rounded(low + first * step, low + (last + 1) * step),
            f"{_STRETCH_TEXT} of the pixels of {_all(n, 'scene')} (decimated maps), rounded "
            "outwards",
        )
    return scales


def _season_scale(values: list[np.ndarray]) -> Scale:
    """The season-ET colour scale shared by every season map: 2-98 % of all seasons' pixels."""
    finite = np.concatenate([v[np.isfinite(v)] for v in values]) if values else np.array([])
    if not finite.size:
        return Scale(0.0, 1.0, "no valid pixels")
    low, high = np.percentile(finite, STRETCH)
    n = len(values)
    return Scale(
        *_rounded(float(low), float(high)),
        f"{_STRETCH_TEXT} of the pixels of {_all(n, 'season')} (decimated maps), rounded outwards",
    )


def _scales_section(scales: dict[str, Scale]) -> str:
    """The one statement of every shared colour scale."""
    rows = []
    for name, scale in scales.items():
        units = VARIABLES[name].units
        rows.append(
            f"<tr data-variable='{name}'><td>{name}</td><td>{html.escape(units)}</td>"
            f"<td>{plain_number(scale.low)}</td><td>{plain_number(scale.high)}</td>"
            f"<td style='text-align:left'>{html.escape(scale.basis)}</td></tr>"
        )
    return (
        "<h2>Colour scales</h2><p>Every map of a variable in this report uses the one colour "
        "scale below, so maps of different scenes (or seasons) compare by eye; a value beyond a "
        "scale takes its end colour. "
        f"<span class='swatch' style='background:{NO_DATA_COLOUR}'></span> grey: no data. "
        f"<span class='swatch' style='background:{UNRELIABLE_COLOUR}'></span> magenta: the "
        "residual is unreliable (QA bit 10: water, snow, built-up), on the latent heat, "
        "evaporative fraction and ET maps.</p>"
        "<div class='table-wrap'><table class='scales'><tr><th>variable</th><th>units</th>"
        f"<th>from</th><th>to</th><th>range</th></tr>{''.join(rows)}</table></div>"
    )


# ---- maps ----------------------------------------------------------------------------------


def _map(ax, data, frame: MapFrame, cmap: str, scale: Scale):
    return ax.imshow(
        data,
        cmap=no_data_cmap(cmap),
        vmin=scale.low,
        vmax=scale.high,
        interpolation="nearest",
        extent=frame.extent,
    )


def _colour_note(frame: MapFrame, unreliable: bool, scales_link: bool = True) -> str:
    parts = []
    if scales_link:
        parts.append(
            "Colours on the run's shared scales (<a href='#colour-scales'>Colour scales</a>)."
        )
    parts.append("Grey: no data.")
    if unreliable:
        parts.append("Magenta: residual unreliable (water, snow, built-up; QA bit 10).")
    parts.append(f"Coordinates: {html.escape(crs_name(frame))}.")
    return "<p class='note'>" + " ".join(parts) + "</p>"


def _scene_maps(folder: Path, manifest: dict, scales: dict[str, Scale]) -> dict:
    """The scene's maps on the shared scales, and the anchors map when its method has one."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    qa_path = folder / "qa_flags.tif"
    flagged = unreliable_mask(_read_small(qa_path)[0]) if qa_path.is_file() else None
    fig, axes = plt.subplots(2, 3, figsize=(12, 6.8), sharex=True, sharey=True)
    fig.subplots_adjust(left=0.05, right=0.97, bottom=0.13, top=0.94, wspace=0.1, hspace=0.22)
    frame, marked, et = None, False, None
    for k, (ax, (name, cmap, _)) in enumerate(zip(axes.flat, MAP_PANELS, strict=True)):
        path = folder / f"{name}.tif"
        if not path.is_file():
            ax.set_axis_off()
            continue
        data, geo = _read_small(path)
        frame = _frame(geo)
        if name == "et_daily":
            et = (data, frame)
        image = _map(ax, data, frame, cmap, scales[name])
        if flagged is not None and name in RESIDUAL_VARIABLES and flagged.shape == data.shape:
            marked |= draw_flagged(ax, flagged, frame.extent)
        units = VARIABLES[name].units
        ax.set_title(f"{name.replace('_', ' ')} [{units}]", fontsize=9)
        frame_axes(ax, frame, x_label=k >= 3, y_label=k % 3 == 0)
        fig.colorbar(image, ax=ax, shrink=0.85, extend="both")
    fig.legend(handles=legend_handles(marked), loc="lower center", ncol=2, fontsize=8)
    shown = {name: scales[name].key() for name, *_ in MAP_PANELS}
    parts = [
        f"<figure class='maps' data-scales='{html.escape(json.dumps(shown))}'>"
        + _img(_png(fig), "maps on the shared colour scales")
        + "</figure>"
    ]
    if frame is not None:
        parts.append(_colour_note(frame, marked))
    method = ""
    figure = METHODS[manifest["sensible_heat_method"]].report_figure(manifest, folder)
    if figure is not None and figure.image is None and et is not None:
        data, frame = et
        fig, ax = plt.subplots(figsize=(7, 4.6))
        fig.subplots_adjust(left=0.1, right=0.97, bottom=0.17, top=0.97)
        image = _map(ax, data, frame, "YlGnBu", scales["et_daily"])
        drawn = flagged is not None and flagged.shape == data.shape
        drawn = drawn and draw_flagged(ax, flagged, frame.extent)
        handles = []
        for x, y, label, colour in figure.markers:
            (point,) = ax.plot(x, y, "o", mfc="none", mec=colour, ms=12, mew=2, label=label)
            handles.append(point)
        frame_axes(ax, frame)
        fig.colorbar(image, ax=ax, label="mm d-1", extend="both")
        fig.legend(handles=handles + legend_handles(drawn), loc="lower center", ncol=2, fontsize=8)
        method = (
            f"<h3>{figure.title}</h3>" + _img(_png(fig), "anchors") + _colour_note(frame, drawn)
        )
    return {"maps": "\n".join(parts), "method": method}


def _scene_static(folder: Path, manifest: dict) -> dict:
    """The parts of a scene's section that do not depend on the run's colour scales."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    parts = []
    # histograms
    # Fixed layouts throughout: constrained layout dominated the report's time on long batches.
    fig, axes = plt.subplots(1, 3, figsize=(12, 3))
    fig.subplots_adjust(left=0.05, right=0.98, bottom=0.12, top=0.88, wspace=0.25)
    for ax, name in zip(
        axes, ("et_daily", "evaporative_fraction", "sensible_heat_flux"), strict=True
    ):
        data, _ = _read_small(folder / f"{name}.tif")
        ax.hist(data[np.isfinite(data)], bins=60, color="#3b6e8f")
        ax.set_title(name.replace("_", " "))
    parts.append(_img(_png(fig), "histograms"))
    # per-class energy partition
    classes = list(csv.DictReader((folder / "classes.csv").open()))
    fig, ax = plt.subplots(figsize=(8, 3))
    fig.subplots_adjust(left=0.09, right=0.98, bottom=0.3, top=0.95)
    names = [c["name"] for c in classes]
    le = [float(c["share_to_latent_heat"] or 0) for c in classes]
    h = [float(c["share_to_sensible_heat"] or 0) for c in classes]
    ax.bar(names, le, color="#2f7f5f", label="to LE")
    ax.bar(names, h, bottom=le, color="#c0603a", label="to H")
    ax.set_ylabel("share of Rn - G")
    ax.tick_params(axis="x", rotation=30)
    ax.legend()
    parts.append("<h3>How available energy splits per land-cover class</h3>")
    parts.append(_img(_png(fig), "energy partition"))
    # the method's own picture file (edges); points on the daily-ET map go with the maps
    method = ""
    figure = METHODS[manifest["sensible_heat_method"]].report_figure(manifest, folder)
    if figure is not None and figure.image is not None:
        method = f"<h3>{figure.title}</h3>" + _file_img(figure.image, figure.image.stem)
    tables = [
        "<h3>Per class</h3>"
        + _table(
            classes,
            [
                "name",
                "valid_pixels",
                "net_radiation_mean",
                "ground_heat_flux_mean",
                "sensible_heat_flux_mean",
                "latent_heat_flux_mean",
                "et_daily_mean",
                "et_daily_p10",
                "et_daily_p90",
            ],
        )
    ]
    qa = [
        {"bit": k, "name": v["name"], "pixels": v["pixels"]}
        for k, v in manifest["qa_bits"].items()
        if v["pixels"]
    ]
    tables.append("<h3>QA flags set</h3>" + _table(qa, ["bit", "name", "pixels"]))
    if (folder / "zones.csv").is_file():
        zones = list(csv.DictReader((folder / "zones.csv").open()))
        tables.append("<h3>Zones (daily ET)</h3>" + _table(zones, ZONE_COLUMNS))
    return {"before": "\n".join(parts), "method": method, "after": "\n".join(tables)}


SECTION_CACHE = ".report_sections"  # folder under OUT: rendered parts of each scene's section


def _cached(folder: Path, part: str, key, render) -> dict:
    """``render()`` (a JSON-able dict), kept in ``OUT/.report_sections/<scene>.<part>.json``.

    A skipped scene of a batch keeps its parts (figures are most of a report's cost); a redone
    scene rewrites its manifest, which makes its cached parts stale, and so does another ``key``
    (the maps' colour scales: a scene added to the run can move them).
    """
    cache = folder.parent / SECTION_CACHE / f"{folder.name}.{part}.json"
    manifest = folder / "manifest.json"
    if cache.is_file() and cache.stat().st_mtime_ns >= manifest.stat().st_mtime_ns:
        try:
            stored = json.loads(cache.read_text("utf-8"))
        except ValueError:
            stored = {}
        if stored.get("key") == key:
            return stored["value"]
    value = render()
    cache.parent.mkdir(exist_ok=True)
    write_text_atomic(cache, json.dumps({"key": key, "value": value}))
    return value


def _scene_section(folder: Path, scales: dict[str, Scale]) -> str:
    """The scene's report section: its static parts and its maps, each rendered once per scene
    run (and per set of colour scales for the maps)."""
    manifest = json.loads((folder / "manifest.json").read_text())
    static = _cached(folder, "static", "v2", lambda: _scene_static(folder, manifest))
    key = {name: scales[name].key() for name, *_ in MAP_PANELS}
    maps = _cached(folder, "maps", key, lambda: _scene_maps(folder, manifest, scales))
    quicklook = ""
    if (folder / "quicklook.png").is_file():
        target = html.escape(f"{folder.name}/quicklook.png")
        quicklook = (
            f"<p class='note'>The scene's own quick-look, each panel on its own stretch: "
            f"<a href='{target}'>quicklook.png</a>.</p>"
        )
    return "\n".join(
        p
        for p in (
            f"<h2>Scene {html.escape(manifest['scene_id'])}</h2>",
            maps["maps"],
            quicklook,
            static["before"],
            maps["method"] or static["method"],
            static["after"],
        )
        if p
    )


def _season_section(folder: Path, scale: Scale, reads: dict) -> str:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    manifest = json.loads((folder / "manifest.json").read_text())
    data, geo = reads[folder.name]
    frame = _frame(geo)
    fig, ax = plt.subplots(figsize=(7, 4.6))
    fig.subplots_adjust(left=0.1, right=0.97, bottom=0.17, top=0.97)
    image = _map(ax, data, frame, SEASON_COLOURS, scale)
    flagged = False
    if (folder / "season_qa.tif").is_file():
        qa, _ = _read_small(folder / "season_qa.tif")
        if qa.shape == data.shape:
            codes = np.nan_to_num(qa, nan=0.0).astype(np.int64)
            flagged = draw_flagged(ax, (codes & 4) != 0, frame.extent)
    frame_axes(ax, frame)
    fig.colorbar(image, ax=ax, label="mm", extend="both")
    handles = legend_handles(flagged)
    if flagged:
        handles[-1].set_label("a scene's residual unreliable (water, snow, built-up)")
    fig.legend(handles=handles, loc="lower center", ncol=2, fontsize=8)
    parts = [
        f"<h2>Season {html.escape(manifest['season_id'])} ({manifest['start']} to "
        f"{manifest['end']})</h2>",
        f"<p>Scenes: {', '.join(manifest['scenes'])}; reference ET "
        f"{manifest['reference_et_total_mm']:.0f} mm; mean ET "
        f"{manifest['mean_et_season_mm']:.0f} mm.</p>",
        f"<figure class='maps' data-scales='{html.escape(json.dumps({'et_season': scale.key()}))}'>"
        + _img(_png(fig), "season ET")
        + "</figure>",
        _colour_note(frame, flagged).replace(
            "Magenta: residual unreliable",
            "Magenta: a scene of the season flagged the residual unreliable",
        ),
    ]
    spread = manifest.get("uncertainty") or {}
    if spread.get("members"):
        p = spread["mean_et_season_mm"]
        parts.append(
            f"<p>Uncertainty: over {spread['members']} ensemble members the mean season ET is "
            f"{p['p10']:.0f} to {p['p90']:.0f} mm (p10 to p90; median {p['p50']:.0f} mm), "
            "each percentile taken over the members' own totals. Assumed: "
            f"{html.escape(spread['assumption'])}.</p>"
        )
    if (folder / "zones.csv").is_file():
        zones = list(csv.DictReader((folder / "zones.csv").open()))
        columns = [*ZONE_COLUMNS, "volume_acre_feet"]
        if zones and "mean_depth_mm_p10" in zones[0]:
            columns += [f"{c}_{q}" for c in ("mean_depth_mm", "volume_m3") for q in ("p10", "p90")]
        parts.append("<h3>Zones</h3>" + _table(zones, columns))
    return "\n".join(parts)


def _zone_series_section(out_dir: Path, season_ids: list[str] = ()) -> str:
    """Every zone's ET at the scene dates (one curve per zone, its members' p10-p90 as a band
    where the scenes have an ensemble), from ``zones_series.csv``; and every zone's season
    totals season by season, with the members' p10-p90 as error bars."""
    import datetime as dt

    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    path = out_dir / "zones_series.csv"
    if not path.is_file():
        return ""
    rows = list(csv.DictReader(path.open()))
    banded = bool(rows) and "et_daily_mm_p10" in rows[0]
    fig, ax = plt.subplots(figsize=(8, 4))
    for zone in sorted({r["zone_id"] for r in rows}):
        mine = sorted((r for r in rows if r["zone_id"] == zone), key=lambda r: r["date"])
        dates = [dt.date.fromisoformat(r["date"]) for r in mine]
        (line,) = ax.plot(dates, [float(r["et_daily_mm"]) for r in mine], marker="o", label=zone)
        if banded:
            low = [float(r["et_daily_mm_p10"] or "nan") for r in mine]
            high = [float(r["et_daily_mm_p90"] or "nan") for r in mine]
            ax.fill_between(dates, low, high, color=line.get_color(), alpha=0.18, lw=0)
    ax.set_ylabel("daily ET, zone mean [mm/d]")
    ax.legend(fontsize=7, ncol=2)
    fig.autofmt_xdate()
    fig.tight_layout()
    band = " Shaded: the ensemble members' p10 to p90." if banded else ""
    parts = [
        "<h2>Zone time series</h2><p>Each zone's coverage-weighted mean daily ET at the scene "
        "dates (<code>zones_series.csv</code>; monthly and water-year totals in "
        f"<code>zones_monthly.csv</code>).{band}</p>" + _img(_png(fig), "zone time series")
    ]
    totals = _season_zone_totals(out_dir, season_ids)
    if totals:
        parts.append(totals)
    return "\n".join(parts)


def _season_zone_totals(out_dir: Path, season_ids: list[str]) -> str:
    """Each zone's season ET, season after season, with the members' p10-p90 where present."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    tables = {}
    for sid in season_ids:
        path = out_dir / sid / "zones.csv"
        if path.is_file():
            tables[sid] = {r["zone_id"]: r for r in csv.DictReader(path.open())}
    if not tables:
        return ""
    zones = sorted({z for table in tables.values() for z in table})
    seasons = list(tables)
    fig, ax = plt.subplots(figsize=(8, 4))
    width = 0.8 / max(len(zones), 1)
    banded = False
    for k, zone in enumerate(zones):
        x = np.arange(len(seasons)) + (k - (len(zones) - 1) / 2) * width
        got = [tables[s].get(zone, {}) for s in seasons]
        mid = np.array([float(r.get("mean_depth_mm") or "nan") for r in got])
        low = np.array([float(r.get("mean_depth_mm_p10") or "nan") for r in got])
        high = np.array([float(r.get("mean_depth_mm_p90") or "nan") for r in got])
        ax.bar(x, mid, width, label=zone)
        if np.isfinite(low).any():
            banded = True
            ax.errorbar(
                x,
                mid,
                yerr=[np.clip(mid - low, 0, None), np.clip(high - mid, 0, None)],
                fmt="none",
                ecolor="#333",
                elinewidth=1,
                capsize=2,
            )
    ax.set_xticks(np.arange(len(seasons)), seasons, rotation=20)
    ax.set_ylabel("season ET, zone mean [mm]")
    ax.legend(fontsize=7, ncol=3)
    fig.tight_layout()
    note = (
        " Whiskers: the members' p10 to p90 of each zone's own season total; the bar (the "
        "central run) need not lie between them."
        if banded
        else ""
    )
    return (
        "<h3>Season totals per zone</h3><p>Coverage-weighted mean season ET of every zone "
        f"(<code>&lt;season&gt;/zones.csv</code>).{note}</p>"
        + _img(_png(fig), "zone season totals")
    )


STYLE = """body{font-family:sans-serif;max-width:1100px;margin:2em auto;padding:0 1em;color:#222}
img{max-width:100%;height:auto;display:block;margin:0.5em 0}
figure{margin:0}
.table-wrap{max-width:100%;overflow-x:auto;margin:0.5em 0}
table{border-collapse:collapse;font-size:0.8em}
td,th{border:1px solid #ccc;padding:2px 5px;text-align:right;white-space:nowrap}
th{white-space:normal;vertical-align:bottom;min-width:4.5em;background:#f4f4f4}
.note{font-size:0.85em;color:#444}
.swatch{display:inline-block;width:1em;height:0.8em;border:1px solid #333;vertical-align:middle}
nav.toc{background:#f6f6f6;padding:0.4em 1em;font-size:0.9em}
nav.toc ol{margin:0.2em 0;padding-left:1.4em}
nav.toc ol ol{columns:3}
.caution{background:#fff4e0;border-left:4px solid #d08020;padding:0.6em 1em}"""


def _contents(entries: list[tuple[str, str, list[tuple[str, str]]]]) -> str:
    """A table of contents: (anchor, title, [(anchor, title) of its subsections]) per entry."""
    items = []
    for anchor, title, children in entries:
        item = f"<li><a href='#{html.escape(anchor)}'>{html.escape(title)}</a>"
        if children:
            item += (
                "<ol>"
                + "".join(
                    f"<li><a href='#{html.escape(a)}'>{html.escape(t)}</a></li>"
                    for a, t in children
                )
                + "</ol>"
            )
        items.append(item + "</li>")
    return f"<nav class='toc'><b>Contents</b><ol>{''.join(items)}</ol></nav>"


_EMBEDDED = re.compile(r'src="data:image/png;base64,([A-Za-z0-9+/=]+)"')
_LINKED_NAME = re.compile(r"[0-9a-f]{24}\.png")


def _place_images(out_dir: Path, page: str, scenes: int) -> tuple[str, set[str]]:
    """The page with its images embedded (a small report) or linked as PNG files written to
    ``OUT/report_files/`` (named by their content, so an unchanged image is not rewritten);
    returns the page and the names of the files it links."""
    encoded = sum(len(m.group(1)) for m in _EMBEDDED.finditer(page))
    if encoded * 3 // 4 <= IMAGE_BYTES_INLINE and scenes <= SCENES_INLINE:
        return page, set()
    folder = output_folder(out_dir, REPORT_FILES)
    linked: set[str] = set()

    def link(match: re.Match) -> str:
        data = base64.b64decode(match.group(1))
        name = hashlib.sha256(data).hexdigest()[:24] + ".png"
        if name not in linked and not (folder / name).is_file():
            write_bytes_atomic(folder / name, data)
        linked.add(name)
        return f'src="{REPORT_FILES}/{name}" loading="lazy"'

    return _EMBEDDED.sub(link, page), linked


def _remove_unlinked(out_dir: Path, linked: set[str]) -> None:
    """Remove image files of earlier reports that the new report does not link."""
    folder = out_dir / REPORT_FILES
    if not folder.is_dir():
        return
    for path in folder.iterdir():
        if _LINKED_NAME.fullmatch(path.name) and path.name not in linked:
            path.unlink(missing_ok=True)
    if not any(folder.iterdir()):
        folder.rmdir()


def _write_page(out_dir: Path, page: str, scenes: int) -> Path:
    page, linked = _place_images(out_dir, page, scenes)
    path = write_text_atomic(out_dir / "report.html", page)
    _remove_unlinked(out_dir, linked)
    return path


def write_report(out_dir: Path, scene_ids: list[str], season_ids: list[str]) -> Path:
    """Write ``out_dir/report.html`` for the given (complete) scene and season folders."""
    scene_ids = [s for s in scene_ids if (out_dir / s / "manifest.json").is_file()]
    season_ids = [s for s in season_ids if (out_dir / s / "manifest.json").is_file()]
    scales = _shared_scales(out_dir, scene_ids) if scene_ids else {}
    reads = {s: _read_small(out_dir / s / "et_season.tif") for s in season_ids}
    if season_ids:
        scales["et_season"] = _season_scale([data for data, _ in reads.values()])
    sections, contents = [], []
    if scales:
        sections.append(_section("colour-scales", _scales_section(scales)))
        contents.append(("colour-scales", "Colour scales", []))
    scenes = [(_anchor("scene", s), s) for s in scene_ids]
    sections += [_section(a, _scene_section(out_dir / s, scales)) for (a, s) in scenes]
    if scenes:
        contents.append((scenes[0][0], f"Scenes ({len(scenes)})", scenes))
    seasons = [(_anchor("season", s), s) for s in season_ids]
    sections += [
        _section(a, _season_section(out_dir / s, scales["et_season"], reads)) for (a, s) in seasons
    ]
    if seasons:
        contents.append((seasons[0][0], f"Seasons ({len(seasons)})", seasons))
    series = _zone_series_section(out_dir, season_ids)
    if series:
        sections.append(_section("zone-series", series))
        contents.append(("zone-series", "Zone time series", []))
    page = (
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
        f"<title>rasterbudget report</title><style>{STYLE}</style></head><body>"
        "<h1>rasterbudget report</h1>"
        f"<p class='caution'><b>Caution.</b> {html.escape(CAUTION)}</p>"
        + _contents(contents)
        + "\n".join(sections)
        + "</body></html>"
    )
    return _write_page(out_dir, page, len(scene_ids))


#: Category colours of the drought_category map, dry (brown) to wet (blue); 0 = no value.
CATEGORY_COLOURS = {
    1: "#7f3b08",
    2: "#c2661a",
    3: "#f1b36a",
    4: "#e8e8e8",
    5: "#8ec7e0",
    6: "#3a8fc4",
    7: "#08407a",
}


def _comparison_section(folder: Path, summary: dict) -> str:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.colors import BoundaryNorm, ListedColormap
    from matplotlib.patches import Patch

    from .season.compare import CATEGORIES

    parts = [f"<h2>Comparison {html.escape(summary['comparison'])}</h2>"]
    described = [f"current: {html.escape(summary['current'])}"]
    if summary.get("previous"):
        described.append(f"previous: {html.escape(summary['previous'])}")
    if summary.get("baseline"):
        described.append(f"baseline: {len(summary['baseline'])} rasters")
    parts.append("<p>" + "; ".join(described) + "</p>")
    maps = []
    if (folder / "difference.tif").is_file():
        maps.append(("difference", f"difference [{summary.get('units', '')}]", "BrBG", True))
    if (folder / "standardized_anomaly.tif").is_file():
        maps.append(("standardized_anomaly", "standardized anomaly [-]", "BrBG", True))
    frame = None
    if maps:
        fig, axes = plt.subplots(1, len(maps), figsize=(6 * len(maps), 4.6), squeeze=False)
        fig.subplots_adjust(left=0.06, right=0.96, bottom=0.2, top=0.9, wspace=0.2)
        for ax, (name, title, cmap, centred) in zip(axes[0], maps, strict=True):
            data, geo = _read_small(folder / f"{name}.tif")
            frame = _frame(geo)
            finite = data[np.isfinite(data)]
            limit = float(np.percentile(np.abs(finite), 98)) if finite.size else 1.0
            limit = limit if limit > 0 else 1.0
            image = ax.imshow(
                data,
                cmap=no_data_cmap(cmap),
                vmin=-limit if centred else None,
                vmax=limit if centred else None,
                interpolation="nearest",
                extent=frame.extent,
            )
            ax.set_title(
                f"{title}\ncolours -{plain_number(limit, 3)} to {plain_number(limit, 3)} "
                "(98th percentile of |value|)",
                fontsize=9,
            )
            frame_axes(ax, frame)
            fig.colorbar(image, ax=ax, shrink=0.85, extend="both")
        fig.legend(handles=legend_handles(False), loc="lower center", fontsize=8)
        parts.append(_img(_png(fig), "comparison maps"))
    if (folder / "drought_category.tif").is_file():
        data, geo = _read_small(folder / "drought_category.tif")
        frame = _frame(geo)
        data[~np.isfinite(data) | (data == 0)] = np.nan
        colours = ListedColormap([CATEGORY_COLOURS[c] for c in range(1, 8)]).with_extremes(
            bad=NO_DATA_COLOUR
        )
        fig, ax = plt.subplots(figsize=(8, 4.5))
        fig.subplots_adjust(left=0.1, right=0.7, bottom=0.14, top=0.92)
        ax.imshow(
            data,
            cmap=colours,
            norm=BoundaryNorm(np.arange(0.5, 8.5), 7),
            interpolation="nearest",
            extent=frame.extent,
        )
        ax.set_title("drought category (McKee et al. 1993 classes)")
        frame_axes(ax, frame)
        ax.legend(
            handles=[Patch(color=CATEGORY_COLOURS[c], label=CATEGORIES[c]) for c in range(1, 8)]
            + legend_handles(False),
            loc="center left",
            bbox_to_anchor=(1.02, 0.5),
        )
        parts.append(_img(_png(fig), "drought categories"))
        parts.append(
            "<h3>Share of area per category</h3><p>Classes of standardized anomalies after "
            "McKee, Doesken &amp; Kleist (1993): |z| &ge; 2 extreme, 1.5-2 severe, 1-1.5 "
            "moderate, below 1 near normal; below normal ET reads as dry.</p>"
            + _table(summary["categories"], ["category", "pixels", "share_of_valid_area"])
        )
    if frame is not None:
        parts.insert(2, _colour_note(frame, False, scales_link=False))
    spread = summary.get("uncertainty") or {}
    if spread.get("members"):
        p = spread["mean_difference"]
        parts.append(
            f"<p>Uncertainty: over {spread['members']} ensemble members (member k minus member "
            f"k) the mean difference is {p['p10']:.4g} to {p['p90']:.4g} "
            f"{html.escape(summary.get('units', ''))} (p10 to p90; median {p['p50']:.4g}).</p>"
        )
    if summary.get("zones"):
        columns = [c for c in summary["zones"][0] if c not in ("pixels",)]
        parts.append("<h3>Zones</h3>" + _table(summary["zones"], columns))
    return "\n".join(parts)


def write_compare_report(out_dir: Path, results: list[tuple[Path, dict]]) -> Path:
    """Write ``out_dir/report.html`` for the comparisons of a comparison recipe."""
    entries = [(_anchor("comparison", s["comparison"]), s["comparison"]) for _, s in results]
    sections = [
        _section(anchor, _comparison_section(folder, summary))
        for (anchor, _), (folder, summary) in zip(entries, results, strict=True)
    ]
    contents = [(a, f"Comparison {t}", []) for a, t in entries]
    page = (
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
        f"<title>rasterbudget comparison report</title><style>{STYLE}</style></head><body>"
        "<h1>rasterbudget comparison report</h1>"
        f"<p class='caution'><b>Caution.</b> {html.escape(CAUTION)} Standardized anomalies "
        "from a baseline of a few years are themselves uncertain: with n baseline years the "
        "standard deviation is estimated from n values.</p>"
        + _contents(contents)
        + "\n".join(sections)
        + "</body></html>"
    )
    output_folder(out_dir)
    return _write_page(out_dir, page, 0)
