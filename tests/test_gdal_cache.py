"""GDAL's block cache is what the run says it is (rasterio passes an integer in bytes)."""

from __future__ import annotations

import ctypes
import glob
import os

import pytest
import rasterio

from rasterbudget.io.grid import GDAL_CACHE_BYTES, GDAL_OPTIONS


def _gdal_cache_max() -> int:
    """The effective cache size from the GDAL library rasterio loaded (GDALGetCacheMax64)."""
    found = glob.glob(os.path.join(os.path.dirname(rasterio.__file__) + ".libs", "libgdal*"))
    if not found:
        pytest.skip("rasterio is not a wheel with its own libgdal: no library to ask")
    library = ctypes.CDLL(found[0])  # the loaded library itself: dlopen returns its handle
    library.GDALGetCacheMax64.restype = ctypes.c_int64
    return library.GDALGetCacheMax64()


def test_the_runs_gdal_block_cache_holds_8_mib():
    # GDAL_CACHEMAX = 32 (meant as MB) was 32 bytes: no tile stayed cached
    with rasterio.Env(**GDAL_OPTIONS):
        assert _gdal_cache_max() == GDAL_CACHE_BYTES == 8 * 2**20


def test_the_workers_get_the_same_cache():
    from rasterbudget.io.cluster import _bound_gdal_cache

    before = _gdal_cache_max()
    try:
        _bound_gdal_cache(GDAL_OPTIONS["GDAL_CACHEMAX"])
        assert _gdal_cache_max() == GDAL_CACHE_BYTES
    finally:
        _bound_gdal_cache(before)
