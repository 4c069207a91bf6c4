"""Warping inputs window by window matches a direct rasterio reproject of the whole input."""

from __future__ import annotations

import numpy as np
import rasterio
from hypothesis import given, settings
from hypothesis import strategies as st
from rasterio.crs import CRS
from rasterio.transform import from_origin
from rasterio.warp import Resampling, reproject

from rasterbudget.io.grid import Grid, InputSource, read_window


@settings(max_examples=25, deadline=None)
@given(
    seed=st.integers(0, 10_000),
    src_size=st.integers(20, 60),
    dst_size=st.integers(10, 50),
    src_pixel=st.floats(20.0, 120.0),
    dst_pixel=st.floats(20.0, 120.0),
    shift=st.floats(-300.0, 300.0),
    geographic=st.booleans(),
    categorical=st.booleans(),
    split=st.integers(1, 9),
)
def test_window_warp_equals_direct_reproject(
    tmp_path_factory,
    seed,
    src_size,
    dst_size,
    src_pixel,
    dst_pixel,
    shift,
    geographic,
    categorical,
    split,
):
    rng = np.random.default_rng(seed)
    folder = tmp_path_factory.mktemp("warp")
    if geographic:  # source in lon/lat around the demo's region
        src_crs, src_transform = (
            CRS.from_epsg(4326),
            from_origin(-105.25, 40.02, src_pixel * 1e-5, src_pixel * 1e-5),
        )
    else:
        src_crs, src_transform = (
            CRS.from_epsg(32613),
            from_origin(480000.0 + shift, 4430000.0 - shift, src_pixel, src_pixel),
        )
    if categorical:
        data = rng.integers(1, 10, (src_size, src_size)).astype(np.uint8)
    else:
        data = rng.normal(300.0, 5.0, (src_size, src_size)).astype(np.float32)
    path = folder / "src.tif"
    with rasterio.open(
        path,
        "w",
        driver="GTiff",
        width=src_size,
        height=src_size,
        count=1,
        dtype=data.dtype,
        crs=src_crs,
        transform=src_transform,
        nodata=0 if categorical else np.nan,
    ) as dst:
        dst.write(data, 1)
    grid = Grid(
        CRS.from_epsg(32613),
        from_origin(480100.0, 4429900.0, dst_pixel, dst_pixel),
        dst_size,
        dst_size,
    )
    source = InputSource(
        role="land_cover" if categorical else "surface_temperature",
        path=str(path),
        grid=grid,
        same_grid=False,
    )
    cut = max(1, min(dst_size - 1, dst_size * split // 10))
    windowed = np.vstack(
        [
            read_window(source, slice(0, cut), slice(0, dst_size)),
            read_window(source, slice(cut, dst_size), slice(0, dst_size)),
        ]
    )
    direct = np.full(
        (dst_size, dst_size),
        np.nan if not categorical else 0,
        dtype=np.float64 if not categorical else np.uint8,
    )
    with rasterio.open(path) as src:
        reproject(
            rasterio.band(src, 1),
            direct,
            dst_transform=grid.transform,
            dst_crs=grid.crs,
            dst_nodata=0 if categorical else np.nan,
            resampling=Resampling.nearest if categorical else Resampling.bilinear,
        )
    if categorical:
        direct = np.where(direct == 0, np.nan, direct.astype(np.float64))
    both = np.isfinite(windowed) & np.isfinite(direct)
    # the footprints agree except possibly along the source's very edge
    assert np.mean(np.isfinite(windowed) == np.isfinite(direct)) > 0.95
    if both.any():
        np.testing.assert_allclose(windowed[both], direct[both], rtol=0, atol=1e-3)
