"""Per-zone depth and volume against independent computations."""

from __future__ import annotations

import csv
import itertools
import json

import numpy as np
import pytest
import rasterio
from pyproj import Geod, Transformer
from rasterio.transform import from_origin

from rasterbudget.io.areas import cell_areas
from rasterbudget.io.grid import Grid
from rasterbudget.season.zones import (
    CUBIC_METRES_PER_ACRE_FOOT,
    load_zones,
    polygon_area,
    zone_rows,
    zone_totals,
)


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
    areas = [polygon_area(g, "EPSG:32613") for g in geometries]
    rows = {
        r["zone_id"]: r for r in zone_rows(ids, zone_totals(raster, geometries, 64), "et", areas)
    }
    grid = Grid(rasterio.crs.CRS.from_epsg(32613), transform, 150, 120)
    # by hand: the field covers rows 5-39 and columns 15-44; the basin columns 0-74, all rows
    for zone, (rs, cs) in {
        "field": (slice(5, 40), slice(15, 45)),
        "basin": (slice(0, 120), slice(0, 75)),
    }.items():
        part = depth[rs, cs]
        ok = np.isfinite(part)
        r, c = np.mgrid[rs, cs]
        cell = cell_areas(grid, r, c)  # ground areas: UTM's scale factor, 0.9996 on the meridian
        assert rows[zone]["pixels"] == pytest.approx(part.size)
        assert rows[zone]["area_in_grid_m2"] == pytest.approx(cell.sum(), rel=1e-9)
        assert rows[zone]["area_m2"] == pytest.approx(cell.sum(), rel=1e-6)  # fully on the grid
        assert rows[zone]["covered_share"] == pytest.approx(1.0, abs=1e-6)
        assert rows[zone]["valid_share"] == pytest.approx(cell[ok].sum() / cell.sum())
        mean = (part[ok] * cell[ok]).sum() / cell[ok].sum()
        assert rows[zone]["mean_depth_mm"] == pytest.approx(mean, rel=1e-9)
        assert rows[zone]["volume_valid_pixels_m3"] == pytest.approx(
            (part[ok] / 1000.0 * cell[ok]).sum(), rel=1e-9
        )
        # volume = mean depth x the zone's true area on the grid
        assert rows[zone]["volume_m3"] == pytest.approx(
            rows[zone]["mean_depth_mm"] / 1000.0 * rows[zone]["area_in_grid_m2"], rel=1e-12
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
    assert row["area_in_grid_m2"] == pytest.approx(abs(area), rel=1e-4)
    assert row["volume_m3"] == pytest.approx(0.1 * abs(area), rel=1e-4)


def _geodesic_area_of_map_polygon(ring, crs) -> float:
    """Independent: the ring's edges cut into 64 pieces in map coordinates, to lon/lat, Geod."""
    xy = np.asarray(ring, dtype=np.float64)
    pieces = [
        a + (b - a) * t
        for a, b in itertools.pairwise(xy)
        for t in np.linspace(0, 1, 64, endpoint=False)
    ]
    x, y = np.asarray(pieces).T
    lon, lat = Transformer.from_crs(crs, "EPSG:4326", always_xy=True).transform(x, y)
    area, _ = Geod(ellps="WGS84").polygon_area_perimeter(lon, lat)
    return abs(area)


#: (CRS, grid origin, cell size) of four projections; the zones are irregular polygons that cut
#: cells, so their areas rest on exact coverage fractions and true cell areas.
PROJECTIONS = {
    "utm": ("EPSG:32613", (480000.0, 4430000.0), 30.0),
    "web_mercator": ("EPSG:3857", (1_000_000.0, 8_450_000.0), 250.0),
    "polar": ("EPSG:3413", (-200_000.0, -2_000_000.0), 250.0),
    "geographic": ("EPSG:4326", (10.0, 60.0), 0.002),
}


@pytest.mark.parametrize("name", sorted(PROJECTIONS))
def test_zone_areas_agree_with_geodesic_polygon_areas(tmp_path, name):
    crs, (x0, y0), res = PROJECTIONS[name]
    n = 200
    raster = _raster(tmp_path / "et.tif", np.full((n, n), 3.0), crs, from_origin(x0, y0, res, res))
    # a pentagon and a rotated quadrilateral, vertices off the cell corners
    w = n * res
    ring_a = [
        (x0 + f * w, y0 - g * w)
        for f, g in (
            (0.11, 0.13),
            (0.57, 0.10),
            (0.73, 0.41),
            (0.41, 0.66),
            (0.09, 0.47),
            (0.11, 0.13),
        )
    ]
    ring_b = [
        (x0 + f * w, y0 - g * w)
        for f, g in ((0.55, 0.55), (0.93, 0.61), (0.87, 0.95), (0.51, 0.89), (0.55, 0.55))
    ]
    features = [
        ("a", {"type": "Polygon", "coordinates": [ring_a]}),
        ("b", {"type": "Polygon", "coordinates": [ring_b]}),
    ]
    zones = _zones(tmp_path / "z.geojson", crs, features)
    ids, _, _, geometries = load_zones(zones, "zone_id", crs)
    areas = [polygon_area(g, crs) for g in geometries]
    rows = zone_rows(ids, zone_totals(raster, geometries, 64), "et", areas)
    for row, ring in zip(rows, (ring_a, ring_b), strict=True):
        expected = _geodesic_area_of_map_polygon(ring, crs)
        assert row["area_in_grid_m2"] == pytest.approx(expected, rel=1e-3)  # acceptance: 0.1 %
        assert row["area_m2"] == pytest.approx(expected, rel=1e-4)
        assert row["mean_depth_mm"] == pytest.approx(3.0)
        assert row["volume_m3"] == pytest.approx(3.0 / 1000.0 * row["area_in_grid_m2"])


def test_utm_zone_means_agree_with_exactextract(tmp_path):
    from exactextract import exact_extract

    rng = np.random.default_rng(11)
    depth = rng.gamma(4.0, 1.0, (150, 180))
    depth[40:60, 30:80] = np.nan
    transform = from_origin(480000.0, 4430000.0, 30.0, 30.0)
    raster = _raster(tmp_path / "et.tif", depth, "EPSG:32613", transform)
    ring = [
        (480000.0 + x * 30, 4430000.0 - y * 30)
        for x, y in (
            (5.3, 7.7),
            (120.2, 15.1),
            (170.6, 90.4),
            (60.1, 140.9),
            (10.2, 100.3),
            (5.3, 7.7),
        )
    ]
    zones = _zones(
        tmp_path / "z.geojson", "EPSG:32613", [("z", {"type": "Polygon", "coordinates": [ring]})]
    )
    ids, _, _, geometries = load_zones(zones, "zone_id", "EPSG:32613")
    (row,) = zone_rows(ids, zone_totals(raster, geometries, 64), "et")
    feature = {"type": "Feature", "properties": {}, "geometry": geometries[0]}
    (theirs,) = exact_extract(str(raster), [feature], ["mean"], output="geojson")
    # exactextract weighs by coverage only; ours by coverage x ground area (uniform to 1e-5 here)
    assert row["mean_depth_mm"] == pytest.approx(theirs["properties"]["mean"], rel=1e-3)


def test_a_zone_half_off_the_grid_says_so(tmp_path):
    depth = np.full((100, 100), 2.0)
    transform = from_origin(480000.0, 4430000.0, 30.0, 30.0)
    raster = _raster(tmp_path / "et.tif", depth, "EPSG:32613", transform)
    zone = _box(480000.0 + 50 * 30, 4430000.0 - 80 * 30, 480000.0 + 150 * 30, 4430000.0 - 20 * 30)
    zones = _zones(tmp_path / "z.geojson", "EPSG:32613", [("half", zone)])
    ids, _, _, geometries = load_zones(zones, "zone_id", "EPSG:32613")
    (row,) = zone_rows(
        ids, zone_totals(raster, geometries, 64), "et", [polygon_area(geometries[0], "EPSG:32613")]
    )
    assert row["covered_share"] == pytest.approx(0.5, rel=1e-4)
    assert row["volume_m3"] == pytest.approx(0.002 * row["area_in_grid_m2"])


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
    # the two basins tile the scene: their coverage fractions add up to every pixel
    assert sum(float(r["pixels"]) for r in basins) == pytest.approx(300 * 400, rel=1e-9)
    features = json.loads((out / "kessendry_summer_2026" / "zones.geojson").read_text())
    assert len(features["features"]) == len(rows)
    # RFC 7946: WGS84 longitude/latitude, no crs member; the demo lies near 40 N, 105 W
    assert "crs" not in features
    lon, lat = features["features"][0]["geometry"]["coordinates"][0][0]
    assert -106.0 < lon < -104.0 and 39.0 < lat < 41.0
    assert (out / "kessendry_20260614" / "zones.csv").is_file()


def test_flagged_cells_are_reported_apart_not_mixed_into_et(tmp_path):
    """Water (QA bit 10) inside a field: its residual is no ET; the field's mean and volume
    leave it out, and its residual volume is reported apart."""
    from rasterbudget.catalog.qa import QA

    depth = np.full((60, 60), 4.0)
    depth[20:30, 20:30] = 9.0  # a pond's residual
    transform = from_origin(480000.0, 4430000.0, 30.0, 30.0)
    raster = _raster(tmp_path / "et.tif", depth, "EPSG:32613", transform)
    qa = np.zeros((60, 60), dtype=np.uint16)
    qa[20:30, 20:30] = QA.RESIDUAL_UNRELIABLE_CLASS
    with rasterio.open(
        tmp_path / "qa.tif",
        "w",
        driver="GTiff",
        width=60,
        height=60,
        count=1,
        dtype="uint16",
        crs="EPSG:32613",
        transform=transform,
    ) as dst:
        dst.write(qa, 1)
    zone = _box(480000.0, 4430000.0 - 60 * 30, 480000.0 + 60 * 30, 4430000.0)
    zones = _zones(tmp_path / "z.geojson", "EPSG:32613", [("field", zone)])
    ids, _, _, geometries = load_zones(zones, "zone_id", "EPSG:32613")
    (row,) = zone_rows(ids, zone_totals(raster, geometries, 32, tmp_path / "qa.tif"), "et")
    assert row["mean_depth_mm"] == pytest.approx(4.0)  # the pond's 9 mm left out
    assert row["flagged_share"] == pytest.approx(100 / 3600, rel=1e-6)
    assert row["volume_m3"] == pytest.approx(
        0.004 * row["area_in_grid_m2"] * (1 - row["flagged_share"]), rel=1e-9
    )
    assert row["flagged_residual_volume_m3"] == pytest.approx(
        0.009 * row["area_in_grid_m2"] * row["flagged_share"], rel=1e-4
    )


@pytest.mark.parametrize("driver, suffix", [("GPKG", ".gpkg"), ("ESRI Shapefile", ".shp")])
def test_zones_from_geopackage_and_shapefile_equal_the_geojson(tmp_path, driver, suffix):
    import shapely

    depth = np.random.default_rng(3).uniform(1.0, 5.0, (80, 80))
    transform = from_origin(480000.0, 4430000.0, 30.0, 30.0)
    raster = _raster(tmp_path / "et.tif", depth, "EPSG:32613", transform)
    ring = [
        (480100.0, 4429100.0),
        (481900.0, 4429300.0),
        (481500.0, 4428000.0),
        (480100.0, 4429100.0),
    ]
    geojson = _zones(
        tmp_path / "z.geojson", "EPSG:32613", [("tri", {"type": "Polygon", "coordinates": [ring]})]
    )
    other = tmp_path / f"z{suffix}"
    from pyogrio import raw  # the raw writer: no GeoDataFrame needed

    raw.write(
        other,
        geometry=np.array([shapely.to_wkb(shapely.Polygon(ring))], dtype=object),
        field_data=[np.array(["tri"], dtype=object)],
        fields=["zone_id"],
        crs="EPSG:32613",
        driver=driver,
        geometry_type="Polygon",
    )
    rows = []
    for path in (geojson, other):
        ids, _, _, geometries = load_zones(path, "zone_id", "EPSG:32613")
        rows.append(zone_rows(ids, zone_totals(raster, geometries, 64), "et")[0])
    assert rows[1]["zone_id"] == "tri"
    assert rows[1]["mean_depth_mm"] == pytest.approx(rows[0]["mean_depth_mm"], rel=1e-12)
    assert rows[1]["area_in_grid_m2"] == pytest.approx(rows[0]["area_in_grid_m2"], rel=1e-12)


def test_a_requested_substitute_for_flagged_cells_is_its_own_column():
    from rasterbudget.season.zones import with_substitute

    row = {"flagged_share": 0.1, "area_in_grid_m2": 1.0e6, "volume_m3": 4000.0}
    (out,) = with_substitute([row], 0.85, 10.0)  # 10 mm of reference ET that day
    assert out["flagged_substitute_volume_m3"] == pytest.approx(0.85 * 0.010 * 1.0e5)
    assert out["volume_with_substitute_m3"] == pytest.approx(4000.0 + 850.0)
    assert out["volume_m3"] == 4000.0  # the ET volume itself is unchanged
    assert "zones.flagged_substitute" in out["flagged_substitute"]
    (unknown,) = with_substitute([row], 0.85, None)  # no reference ET: said, not guessed
    assert np.isnan(unknown["flagged_substitute_volume_m3"])


def test_a_zone_raster_gives_its_cells_as_zones(tmp_path):
    """Integer zone ids on the output grid: each zone is exactly its cells (coverage 1), so the
    zone means equal numpy's over the cells of each id."""
    depth = np.random.default_rng(5).uniform(1.0, 6.0, (50, 60))
    transform = from_origin(480000.0, 4430000.0, 30.0, 30.0)
    raster = _raster(tmp_path / "et.tif", depth, "EPSG:32613", transform)
    depth = depth.astype(np.float32).astype(np.float64)
    ids = np.zeros((50, 60), dtype=np.int32)
    ids[5:20, 5:30] = 3
    ids[25:45, 10:55] = 7
    ids[30:35, 40:50] = 3  # zone 3 in two parts
    with rasterio.open(
        tmp_path / "zones.tif",
        "w",
        driver="GTiff",
        width=60,
        height=50,
        count=1,
        dtype="int32",
        crs="EPSG:32613",
        transform=transform,
        nodata=0,
    ) as dst:
        dst.write(ids, 1)
    zone_ids, _, _, geometries = load_zones(tmp_path / "zones.tif", "zone_id", "EPSG:32613")
    assert zone_ids == ["3", "7"]
    rows = {r["zone_id"]: r for r in zone_rows(zone_ids, zone_totals(raster, geometries, 16), "et")}
    for value in (3, 7):
        cells = ids == value
        assert rows[str(value)]["pixels"] == pytest.approx(cells.sum(), rel=1e-9)
        assert rows[str(value)]["mean_depth_mm"] == pytest.approx(depth[cells].mean(), rel=1e-5)


def test_gdal_places_the_written_zones_geojson_right(tmp_path):
    """GDAL (through pyogrio) reads zones.geojson as WGS84 longitude/latitude, and its polygon
    maps back onto the zone drawn on the UTM grid."""
    import shapely
    from pyogrio import raw
    from rasterio.warp import transform_geom

    from rasterbudget.season.zones import write_zone_tables

    ring = [
        (480300.0, 4429700.0),
        (481200.0, 4429700.0),
        (481200.0, 4428800.0),
        (480300.0, 4428800.0),
        (480300.0, 4429700.0),
    ]
    utm = {"type": "Polygon", "coordinates": [ring]}
    lonlat = transform_geom("EPSG:32613", "EPSG:4326", utm)
    row = {"zone_id": "f", "mean_depth_mm": 3.0}
    write_zone_tables(tmp_path, [row], [{"zone_id": "f"}], [lonlat])
    meta, _, geometries, _ = raw.read(tmp_path / "zones.geojson")
    assert meta["crs"] == "EPSG:4326"
    to_utm = Transformer.from_crs("EPSG:4326", "EPSG:32613", always_xy=True)
    back = shapely.transform(
        shapely.from_wkb(geometries[0]), lambda xy: np.column_stack(to_utm.transform(*xy.T))
    )
    assert back.equals_exact(shapely.Polygon(ring), tolerance=1e-3)  # millimetres


def test_geopandas_places_the_demo_zones_geojson_right(tmp_path):
    """GeoPandas reads a run's zones.geojson as EPSG:4326 and, projected back to the grid's
    UTM zone, each polygon is the zone file's own (to a millimetre)."""
    import geopandas
    from click.testing import CliRunner

    from rasterbudget.cli import main
    from tests.conftest import ROOT

    recipe = ROOT / "workflows" / "demo_season.toml"
    out = tmp_path / "out"
    result = CliRunner().invoke(
        main, ["run", str(recipe), "--out", str(out), "--quiet", "--no-quicklook"]
    )
    assert result.exit_code == 0, result.output
    written = geopandas.read_file(out / "kessendry_summer_2026" / "zones.geojson")
    assert written.crs.to_epsg() == 4326
    source = geopandas.read_file(ROOT / "tiny_rasters" / "zones.geojson")
    assert source.crs.to_epsg() == 32613
    back = written.to_crs(32613).set_index("zone_id").geometry
    for zone_id, polygon in source.set_index("zone_id").geometry.items():
        assert back[zone_id].equals_exact(polygon, tolerance=1e-3), zone_id
