"""Per-zone depth and volume against independent computations."""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest
import rasterio
from pyproj import Geod
from rasterio.transform import from_origin

from rasterbudget.season.zones import CUBIC_METRES_PER_ACRE_FOOT, load_zones, zone_rows, zone_totals


def _raster(path, data, crs, transform):
    with rasterio.open(
        path,
        "w",
        driver="GTiff",
        width=data.shape[1],
        height=data.shape[0],
        count=1,
        dtype="float32",
        crs=crs,
        transform=transform,
        nodata=np.nan,
    ) as dst:
        dst.write(data.astype(np.float32), 1)
    return path


def _zones(path, crs, features):
    path.write_text(
        json.dumps(
            {
                "type": "FeatureCollection",
                "crs": {"type": "name", "properties": {"name": crs}},
                "features": [
                    {"type": "Feature", "properties": {"zone_id": z}, "geometry": g}
                    for z, g in features
                ],
            }
        )
    )
    return path


def _box(x0, y0, x1, y1):
    return {"type": "Polygon", "coordinates": [[[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]]]}


def test_projected_volumes_match_numpy_on_the_raster(tmp_path):
    rng = np.random.default_rng(2)
    depth = rng.uniform(200.0, 800.0, (120, 150))
    depth[10:14, 20:30] = np.nan  # a gap inside the first zone
    transform = from_origin(500000.0, 4400000.0, 30.0, 30.0)
    raster = _raster(tmp_path / "et.tif", depth, "EPSG:32613", transform)
    depth = depth.astype(np.float32).astype(np.float64)  # as stored
    field = _box(500000.0 + 15 * 30, 4400000.0 - 40 * 30, 500000.0 + 45 * 30, 4400000.0 - 5 * 30)
    basin = _box(500000.0, 4400000.0 - 120 * 30, 500000.0 + 75 * 30, 4400000.0)  # overlaps field
    zones = _zones(tmp_path / "z.geojson", "EPSG:32613", [("field", field), ("basin", basin)])
    ids, _, _, geometries = load_zones(zones, "zone_id", "EPSG:32613")
    rows = {r["zone_id"]: r for r in zone_rows(ids, zone_totals(raster, geometries, 64), "et")}
    # by hand: the field covers rows 5-39 and columns 15-44; the basin columns 0-74, all rows
    for zone, (rs, cs) in {
        "field": (slice(5, 40), slice(15, 45)),
        "basin": (slice(0, 120), slice(0, 75)),
    }.items():
        part = depth[rs, cs]
        ok = np.isfinite(part)
        assert rows[zone]["pixels"] == part.size
        assert rows[zone]["area_m2"] == pytest.approx(part.size * 900.0)
        assert rows[zone]["valid_fraction"] == pytest.approx(ok.mean())
        assert rows[zone]["mean_depth_mm"] == pytest.approx(part[ok].mean(), rel=1e-9)
        assert rows[zone]["volume_valid_pixels_m3"] == pytest.approx(
            (part[ok] / 1000.0 * 900.0).sum(), rel=1e-9
        )
        assert rows[zone]["volume_acre_feet"] == pytest.approx(
            rows[zone]["volume_m3"] / CUBIC_METRES_PER_ACRE_FOOT
        )


def test_geographic_areas_are_geodesic(tmp_path):
    """A 1 x 0.5 degree zone at 45 N: area against pyproj.Geod on the zone polygon itself."""
    res = 0.01
    depth = np.full((100, 200), 100.0)
    transform = from_origin(-106.0, 46.0, res, res)
    raster = _raster(tmp_path / "et.tif", depth, "EPSG:4326", transform)
    zone = _box(-105.5, 45.0, -104.5, 45.5)
    zones = _zones(tmp_path / "z.geojson", "EPSG:4326", [("zone", zone)])
    ids, _, _, geometries = load_zones(zones, "zone_id", "EPSG:4326")
    (row,) = zone_rows(ids, zone_totals(raster, geometries, 64), "et")
    lons, lats = zip(*zone["coordinates"][0][:-1], strict=True)
    area, _ = Geod(ellps="WGS84").polygon_area_perimeter(lons, lats)
    # geodesic edges of the polygon versus parallels of the cells: far below 1e-4 at this size
    assert row["area_m2"] == pytest.approx(abs(area), rel=1e-4)
    assert row["volume_m3"] == pytest.approx(0.1 * abs(area), rel=1e-4)


def test_demo_season_zone_table(tmp_path):
    from click.testing import CliRunner

    from rasterbudget.cli import main
    from tests.conftest import ROOT

    out = tmp_path / "out"
    result = CliRunner().invoke(
        main,
        [
            "run",
            str(ROOT / "workflows" / "demo_season.toml"),
            "--out",
            str(out),
            "--quiet",
            "--no-quicklook",
        ],
    )
    assert result.exit_code == 0, result.output
    rows = list(csv.DictReader((out / "kessendry_summer_2026" / "zones.csv").open()))
    assert {r["zone_id"] for r in rows} >= {"field_A", "basin_west", "basin_east"}
    basins = [r for r in rows if r["zone_id"].startswith("basin")]
    assert sum(int(r["pixels"]) for r in basins) == 300 * 400  # the two basins tile the scene
    features = json.loads((out / "kessendry_summer_2026" / "zones.geojson").read_text())
    assert len(features["features"]) == len(rows)
    assert (out / "kessendry_20260614" / "zones.csv").is_file()
