"""Every ``[run] compression`` choice writes a valid, lossless GeoTIFF with the right codec."""

from __future__ import annotations

import numpy as np
import pytest
import rasterio
from rasterio.crs import CRS
from rasterio.transform import from_origin

from rasterbudget.io.grid import Grid
from rasterbudget.io.writers import COMPRESSION, AtomicRaster


@pytest.mark.parametrize("compression", sorted(COMPRESSION))
@pytest.mark.parametrize("dtype", ["float32", "uint16"])
def test_codec_round_trip(tmp_path, compression, dtype):
    grid = Grid(CRS.from_epsg(32613), from_origin(480000.0, 4430000.0, 30.0, 30.0), 96, 64)
    rng = np.random.default_rng(1)
    data = (rng.normal(300.0, 20.0, (64, 96))).astype(dtype)
    writer = AtomicRaster(
        tmp_path / "x.tif", grid, dtype, 0, 32, "x", "1", "x", compression=compression
    )
    writer[slice(0, 64), slice(0, 96)] = data
    path = writer.commit()
    with rasterio.open(path) as src:
        np.testing.assert_array_equal(src.read(1), data)
        codec = src.compression.value.lower() if src.compression else "none"
        assert codec == compression
        if compression != "none":
            assert src.tags(ns="IMAGE_STRUCTURE").get("PREDICTOR") == (
                "3" if dtype == "float32" else "2"
            )
