"""One self-contained HTML report per run: maps, histograms, energy partition, anchors or edges,
seasons, zone tables, QA statistics and the cautions. Images are embedded (base64 PNG)."""

from __future__ import annotations

import base64
import csv
import html
import io
import json
from pathlib import Path

import numpy as np

from .io.paths import output_folder
from .io.writers import write_text_atomic
from .methods import METHODS
from .scene.manifest import CAUTION


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


def _table(rows: list[dict], columns: list[str]) -> str:
    head = "".join(f"<th>{html.escape(c)}</th>" for c in columns)
    body = []
    for row in rows:
        cells = []
        for c in columns:
            value = row.get(c, "")
            try:
                value = f"{float(value):.4g}"
            except (TypeError, ValueError):
                value = html.escape(str(value))
            cells.append(f"<td>{value}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table><tr>{head}</tr>{''.join(body)}</table>"


def _read_small(path: Path, side: int = 500) -> tuple[np.ndarray, object]:
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
        return data, (src.bounds, src.transform)


def _scene_section(folder: Path) -> str:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    manifest = json.loads((folder / "manifest.json").read_text())
    parts = [f"<h2>Scene {html.escape(manifest['scene_id'])}</h2>"]
    if (folder / "quicklook.png").is_file():
        parts.append(_file_img(folder / "quicklook.png", "quick-look maps"))
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
    # the method's picture: points on the daily-ET map (anchors), or a file of its own (edges)
    figure = METHODS[manifest["sensible_heat_method"]].report_figure(manifest, folder)
    if figure is not None and figure.image is not None:
        parts.append(f"<h3>{figure.title}</h3>" + _file_img(figure.image, figure.image.stem))
    elif figure is not None:
        data, (bounds, _) = _read_small(folder / "et_daily.tif")
        fig, ax = plt.subplots(figsize=(6, 4.5))
        fig.subplots_adjust(left=0.12, right=0.95, bottom=0.08, top=0.95)
        image = ax.imshow(
            data, cmap="YlGnBu", extent=(bounds.left, bounds.right, bounds.bottom, bounds.top)
        )
        for x, y, label, colour in figure.markers:
            ax.plot(x, y, "o", mfc="none", mec=colour, ms=12, mew=2, label=label)
        ax.legend(loc="lower right")
        fig.colorbar(image, ax=ax, label="mm d-1")
        parts.append(f"<h3>{figure.title}</h3>" + _img(_png(fig), "anchors"))
    parts.append(
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
    )
    qa = [
        {"bit": k, "name": v["name"], "pixels": v["pixels"]}
        for k, v in manifest["qa_bits"].items()
        if v["pixels"]
    ]
    parts.append("<h3>QA flags set</h3>" + _table(qa, ["bit", "name", "pixels"]))
    if (folder / "zones.csv").is_file():
        zones = list(csv.DictReader((folder / "zones.csv").open()))
        parts.append("<h3>Zones (daily ET)</h3>" + _table(zones, ZONE_COLUMNS))
    return "\n".join(parts)


def _season_section(folder: Path) -> str:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    manifest = json.loads((folder / "manifest.json").read_text())
    data, (bounds, _) = _read_small(folder / "et_season.tif")
    fig, ax = plt.subplots(figsize=(6, 4.5))
    fig.subplots_adjust(left=0.12, right=0.95, bottom=0.08, top=0.95)
    image = ax.imshow(
        data, cmap="YlGnBu", extent=(bounds.left, bounds.right, bounds.bottom, bounds.top)
    )
    fig.colorbar(image, ax=ax, label="mm")
    parts = [
        f"<h2>Season {html.escape(manifest['season_id'])} ({manifest['start']} to "
        f"{manifest['end']})</h2>",
        f"<p>Scenes: {', '.join(manifest['scenes'])}; reference ET "
        f"{manifest['reference_et_total_mm']:.0f} mm; mean ET "
        f"{manifest['mean_et_season_mm']:.0f} mm.</p>",
        _img(_png(fig), "season ET"),
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


STYLE = """body{font-family:sans-serif;max-width:1100px;margin:2em auto;color:#222}
img{max-width:100%;display:block;margin:0.5em 0}
table{border-collapse:collapse;font-size:0.85em;margin:0.5em 0;display:block;overflow-x:auto}
td,th{border:1px solid #ccc;padding:2px 6px;text-align:right}
.caution{background:#fff4e0;border-left:4px solid #d08020;padding:0.6em 1em}"""


SECTION_CACHE = ".report_sections"  # folder under OUT: one rendered section per scene


def _cached_scene_section(folder: Path) -> str:
    """The scene's report section, rendered once per scene run.

    A skipped scene of a batch keeps its section (figures are most of a report's cost); a
    redone scene rewrites its manifest, which makes the cached section stale.
    """
    cache = folder.parent / SECTION_CACHE / f"{folder.name}.html"
    manifest = folder / "manifest.json"
    if cache.is_file() and cache.stat().st_mtime_ns >= manifest.stat().st_mtime_ns:
        return cache.read_text("utf-8")
    section = _scene_section(folder)
    cache.parent.mkdir(exist_ok=True)
    write_text_atomic(cache, section)
    return section


def write_report(out_dir: Path, scene_ids: list[str], season_ids: list[str]) -> Path:
    """Write ``out_dir/report.html`` for the given (complete) scene and season folders."""
    sections = [
        _cached_scene_section(out_dir / s)
        for s in scene_ids
        if (out_dir / s / "manifest.json").is_file()
    ]
    sections += [
        _season_section(out_dir / s)
        for s in season_ids
        if (out_dir / s / "manifest.json").is_file()
    ]
    sections.append(_zone_series_section(out_dir, season_ids))
    page = (
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
        f"<title>rasterbudget report</title><style>{STYLE}</style></head><body>"
        "<h1>rasterbudget report</h1>"
        f"<p class='caution'><b>Caution.</b> {html.escape(CAUTION)}</p>"
        + "\n".join(sections)
        + "</body></html>"
    )
    return write_text_atomic(out_dir / "report.html", page)


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
    if maps:
        fig, axes = plt.subplots(1, len(maps), figsize=(6 * len(maps), 4.2), squeeze=False)
        fig.subplots_adjust(left=0.04, right=0.96, bottom=0.05, top=0.9, wspace=0.15)
        for ax, (name, title, cmap, centred) in zip(axes[0], maps, strict=True):
            data, (bounds, _) = _read_small(folder / f"{name}.tif")
            finite = data[np.isfinite(data)]
            limit = float(np.percentile(np.abs(finite), 98)) if finite.size else 1.0
            image = ax.imshow(
                data,
                cmap=cmap,
                vmin=-limit if centred else None,
                vmax=limit if centred else None,
                extent=(bounds.left, bounds.right, bounds.bottom, bounds.top),
            )
            ax.set_title(title)
            fig.colorbar(image, ax=ax, shrink=0.85)
        parts.append(_img(_png(fig), "comparison maps"))
    if (folder / "drought_category.tif").is_file():
        data, (bounds, _) = _read_small(folder / "drought_category.tif")
        data[~np.isfinite(data) | (data == 0)] = np.nan
        colours = ListedColormap([CATEGORY_COLOURS[c] for c in range(1, 8)])
        fig, ax = plt.subplots(figsize=(8, 4.5))
        fig.subplots_adjust(left=0.08, right=0.7, bottom=0.08, top=0.92)
        ax.imshow(
            data,
            cmap=colours,
            norm=BoundaryNorm(np.arange(0.5, 8.5), 7),
            interpolation="nearest",
            extent=(bounds.left, bounds.right, bounds.bottom, bounds.top),
        )
        ax.set_title("drought category (McKee et al. 1993 classes)")
        ax.legend(
            handles=[Patch(color=CATEGORY_COLOURS[c], label=CATEGORIES[c]) for c in range(1, 8)],
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
    sections = [_comparison_section(folder, summary) for folder, summary in results]
    page = (
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
        f"<title>rasterbudget comparison report</title><style>{STYLE}</style></head><body>"
        "<h1>rasterbudget comparison report</h1>"
        f"<p class='caution'><b>Caution.</b> {html.escape(CAUTION)} Standardized anomalies "
        "from a baseline of a few years are themselves uncertain: with n baseline years the "
        "standard deviation is estimated from n values.</p>"
        + "\n".join(sections)
        + "</body></html>"
    )
    output_folder(out_dir)
    return write_text_atomic(out_dir / "report.html", page)
