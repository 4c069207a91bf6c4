"""Comparisons: difference and percent change of two rasters, standardized anomaly of one period
against a baseline stack, and drought categories of the anomaly.

Categories follow the classes of standardized anomalies published for the standardized
precipitation index (McKee, Doesken & Kleist 1993, 8th Conf. Applied Climatology): |z| >= 2
extreme, 1.5-2 severe, 1-1.5 moderate, below 1 near normal. A value exactly on a boundary falls
in the more extreme class (z = -1.0 is moderately dry). For ET, below normal reads as dry.
"""

from __future__ import annotations

import itertools
from pathlib import Path

import numpy as np

from .errors import InputRasterError

#: Category code -> name (codes of the drought_category raster; 0 = no value).
CATEGORIES = {
    1: "extremely dry",
    2: "severely dry",
    3: "moderately dry",
    4: "near normal",
    5: "moderately wet",
    6: "severely wet",
    7: "extremely wet",
}


def difference(current: np.ndarray, previous: np.ndarray) -> np.ndarray:
    """current - previous, in the rasters' units."""
    return current - previous


def percent_change(current: np.ndarray, previous: np.ndarray) -> np.ndarray:
    """100 (current - previous) / previous [%]; NaN where previous is 0."""
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(previous != 0, 100.0 * (current - previous) / previous, np.nan)


def standardized_anomaly(current: np.ndarray, baseline: np.ndarray) -> np.ndarray:
    """(x - mean) / std over the baseline's leading axis (sample std, ddof = 1) [-].

    NaN where fewer than two baseline values exist or their spread is zero.
    """
    import warnings

    count = np.isfinite(baseline).sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN pixels: handled below
        mean = np.nanmean(baseline, axis=0)
        std = np.nanstd(baseline, axis=0, ddof=1)
        z = (current - mean) / std
    return np.where((count >= 2) & (std > 0), z, np.nan)


def drought_category(z: np.ndarray) -> np.ndarray:
    """Category codes 1-7 (``CATEGORIES``) of standardized anomalies; 0 where z is NaN."""
    code = np.full(z.shape, 4, dtype=np.uint8)
    with np.errstate(invalid="ignore"):
        code[z <= -1.0] = 3
        code[z <= -1.5] = 2
        code[z <= -2.0] = 1
        code[z >= 1.0] = 5
        code[z >= 1.5] = 6
        code[z >= 2.0] = 7
    code[~np.isfinite(z)] = 0
    return code


def run_compare(
    current: Path,
    out_dir: Path,
    previous: Path | None = None,
    baseline: list[Path] = (),
    chunk: int = 1024,
) -> dict:
    """Write the comparison rasters into ``out_dir`` in one chunked pass; return a summary."""
    import dask
    import dask.array as da
    import rasterio
    from rasterio import windows

    from .grid import GDAL_OPTIONS, Grid
    from .outputs import AtomicRaster, block_size_for, write_text_atomic
    from .pipeline import effective_chunk_size
    from .summaries import rows_to_csv

    paths = [current, *([previous] if previous else []), *baseline]
    for p in paths:
        if not Path(p).is_file():
            raise InputRasterError(
                f"raster {p} does not exist; give the path of an output "
                "GeoTIFF (e.g. OUT/<season>/et_season.tif)."
            )
    with rasterio.open(current) as src:
        grid = Grid(src.crs, src.transform, src.width, src.height)
        units = src.tags(1).get("units", "")
    for p in paths[1:]:
        with rasterio.open(p) as src:
            if (src.crs, src.transform, src.shape) != (
                grid.crs,
                grid.transform,
                (grid.height, grid.width),
            ):
                raise InputRasterError(
                    f"raster {p} is not on the grid of {current}; compare outputs made on one "
                    "target grid ([scene.grid])."
                )
    if previous is None and len(baseline) < 2:
        raise InputRasterError(
            "give --previous for a difference, or at least two --baseline "
            "rasters for a standardized anomaly."
        )
    chunk = effective_chunk_size(chunk)
    block = block_size_for(chunk)
    names = []
    if previous is not None:
        names += ["difference", "percent_change"]
    if len(baseline) >= 2:
        names += ["standardized_anomaly", "drought_category"]

    def task(r0, r1, c0, c1):
        window = windows.Window(c0, r0, c1 - c0, r1 - r0)

        def read(p):
            with rasterio.open(p) as src:
                return src.read(1, window=window, masked=True).astype(np.float64).filled(np.nan)

        x = read(current)
        out = []
        if previous is not None:
            y = read(previous)
            out += [difference(x, y), percent_change(x, y)]
        if len(baseline) >= 2:
            z = standardized_anomaly(x, np.stack([read(p) for p in baseline]))
            out += [z, drought_category(z).astype(np.float64)]
        return np.stack(out)

    rows = [*range(0, grid.height, chunk), grid.height]
    cols = [*range(0, grid.width, chunk), grid.width]
    stacked = da.block(
        [
            [
                da.from_delayed(
                    dask.delayed(task)(r0, r1, c0, c1),
                    shape=(len(names), r1 - r0, c1 - c0),
                    dtype=np.float64,
                )
                for c0, c1 in itertools.pairwise(cols)
            ]
            for r0, r1 in itertools.pairwise(rows)
        ]
    )
    out_dir.mkdir(parents=True, exist_ok=True)
    described = {
        "difference": (units, "current - previous"),
        "percent_change": ("%", "100 (current - previous) / previous"),
        "standardized_anomaly": ("1", "(current - baseline mean) / baseline std"),
        "drought_category": (
            "class",
            "1 extremely dry ... 4 near normal ... 7 extremely wet (McKee et al. 1993 classes)",
        ),
    }
    writers, sources = [], []
    for k, name in enumerate(names):
        categorical = name == "drought_category"
        writers.append(
            AtomicRaster(
                out_dir / f"{name}.tif",
                grid,
                "uint8" if categorical else "float32",
                0 if categorical else np.nan,
                block,
                name,
                *described[name],
            )
        )
        sources.append(stacked[k].astype(np.uint8 if categorical else np.float32))
    counts = None
    if "drought_category" in names:
        codes = stacked[names.index("drought_category")]
        counts = [da.sum(codes == c) for c in range(8)]
    try:
        with rasterio.Env(**GDAL_OPTIONS):
            store = da.store(sources, writers, lock=False, compute=False)
            _, counts = dask.compute(store, counts)
        for w in writers:
            w.commit()
    finally:
        for w in writers:
            if not w.dataset.closed:
                w.abort()
    summary = {"outputs": [f"{n}.tif" for n in names]}
    if counts is not None:
        valid = sum(int(c) for c in counts[1:])
        share = [
            {
                "code": c,
                "category": CATEGORIES[c],
                "pixels": int(counts[c]),
                "share_of_valid_area": int(counts[c]) / valid if valid else float("nan"),
            }
            for c in range(1, 8)
        ]
        write_text_atomic(out_dir / "categories.csv", rows_to_csv(share))
        summary["categories"] = share
    return summary
