"""Per-zone ET depth and volume from a polygon file (GeoJSON).

Zones are burnt onto the output grid block by block (``rasterio.features.rasterize``, pixel
centres inside a polygon), one zone at a time, so zones may overlap (fields inside
sub-basins). Cell areas are exact on a projected grid and geodesic on a geographic grid
(pyproj.Geod on each row's cell polygon). ``volume_m3`` counts the whole zone, its missing pixels
at the zone's mean depth; ``volume_valid_pixels_m3`` only the valid pixels.
Volume = depth [mm] / 1000 x cell area [m2]; acre-feet = m3 / 1233.48 (1 acre-foot = 43,560 ft3,
exact definition).
"""

from __future__ import annotations

import io
import json
import warnings
from pathlib import Path

import numpy as np

from ..errors import RecipeError

# rasterio's in-memory rasterize target warns before its transform is set (the masks are right).
# A filter for that module only: catch_warnings() is not thread-safe under dask's threads.
warnings.filterwarnings("ignore", message="Dataset has no geotransform", module="rasterio.features")

CUBIC_METRES_PER_ACRE_FOOT = 1233.48183754752  # 43,560 ft3 x 0.3048^3 m3 per ft3


def read_zone_features(path: Path, id_property: str) -> tuple[list[dict], str]:
    """The features of a GeoJSON zone file, each checked (a polygon with numeric coordinates
    and a unique id), and the file's CRS; one line naming the feature where one is not."""
    if not path.is_file():
        raise RecipeError(f"zone file {path} does not exist; fix zones.path in the recipe.")
    try:
        collection = json.loads(path.read_text("utf-8"))
        features = collection["features"]
        if not isinstance(features, list):
            raise TypeError("'features' is not a list")
    except (json.JSONDecodeError, UnicodeDecodeError, KeyError, TypeError) as err:
        raise RecipeError(f"zone file {path} is not a GeoJSON FeatureCollection ({err}).") from None
    crs = collection.get("crs") if isinstance(collection.get("crs"), dict) else {}
    source_crs = (crs.get("properties") or {}).get("name", "EPSG:4326")
    ids = []
    for k, feature in enumerate(features):
        where = f"zone file {path}: feature {k}"
        if not isinstance(feature, dict):
            raise RecipeError(f"{where} is not a GeoJSON Feature object.")
        props = feature.get("properties") or {}
        if not isinstance(props, dict) or id_property not in props:
            raise RecipeError(
                f"{where} has no property {id_property!r}; set zones.id_property to the property "
                "holding each zone's id."
            )
        where = f"{where} ({id_property} {props[id_property]!r})"
        geometry = feature.get("geometry")
        kind = geometry.get("type") if isinstance(geometry, dict) else type(geometry).__name__
        if kind not in POLYGON_TYPES:
            raise RecipeError(
                f"{where} has no polygon geometry (got {kind!r}); zones must be Polygon or "
                "MultiPolygon features."
            )
        depth = 3 if geometry["type"] == "Polygon" else 4
        if not _numeric_rings(geometry.get("coordinates"), depth):
            raise RecipeError(
                f"{where}: its coordinates are not rings of numeric [x, y] positions; fix the "
                "geometry (e.g. a coordinate written as text)."
            )
        ids.append(str(props[id_property]))
    if len(set(ids)) != len(ids):
        raise RecipeError(f"zone file {path}: zone ids in {id_property!r} are not unique.")
    return features, source_crs


#: Geometry types a zone may have.
POLYGON_TYPES = ("Polygon", "MultiPolygon")


def _numeric_rings(coordinates, depth: int) -> bool:
    """Nested lists ``depth`` deep ending in positions of two or three real numbers."""
    if depth == 1:
        return (
            isinstance(coordinates, list)
            and len(coordinates) in (2, 3)
            and all(
                isinstance(c, int | float) and not isinstance(c, bool) and np.isfinite(c)
                for c in coordinates
            )
        )
    return (
        isinstance(coordinates, list)
        and len(coordinates) > 0
        and all(_numeric_rings(c, depth - 1) for c in coordinates)
    )


def load_zones(path: Path, id_property: str, grid_crs) -> tuple[list, list, list, list]:
    """Zone ids, properties, original geometries and geometries in the grid's CRS."""
    from rasterio.errors import RasterioError
    from rasterio.warp import transform_geom

    features, source_crs = read_zone_features(path, id_property)
    ids, properties, geometries = [], [], []
    for feature in features:
        props = feature.get("properties") or {}
        ids.append(str(props[id_property]))
        properties.append(props)
        try:
            geometries.append(transform_geom(source_crs, grid_crs, feature["geometry"]))
        except (RasterioError, ValueError) as err:
            raise RecipeError(
                f"zone file {path}: zone {props[id_property]!r} cannot be brought to the grid's "
                f"CRS from {source_crs} ({err})."
            ) from None
    return ids, properties, [f["geometry"] for f in features], geometries


def cell_areas(grid, rows: slice) -> np.ndarray:
    """Area of each pixel of the given rows [m2]: exact when projected, geodesic when geographic."""
    t = grid.transform
    if not grid.crs.is_geographic:
        return np.full(rows.stop - rows.start, abs(t.a * t.e))
    from pyproj import Geod

    geod = Geod(ellps="WGS84")
    out = np.empty(rows.stop - rows.start)
    for k, r in enumerate(range(rows.start, rows.stop)):
        top, bottom = t.f + r * t.e, t.f + (r + 1) * t.e
        lons = [t.c, t.c + t.a, t.c + t.a, t.c]
        lats = [top, top, bottom, bottom]
        area, _ = geod.polygon_area_perimeter(lons, lats)
        out[k] = abs(area)
    return out


def zone_block(
    depth: np.ndarray, masks: list[tuple[int, np.ndarray]], areas: np.ndarray, n_zones: int
) -> np.ndarray:
    """Per zone: pixels, valid pixels, zone area [m2], valid area [m2], volume [m3]."""
    area = np.broadcast_to(areas[:, None], depth.shape)
    valid = np.isfinite(depth)
    volume = np.where(valid, depth, 0.0) / 1000.0 * area
    out = np.zeros((5, n_zones))
    for k, inside in masks:
        out[:, k] = (
            inside.sum(),
            (inside & valid).sum(),
            area[inside].sum(),
            area[inside & valid].sum(),
            volume[inside].sum(),
        )
    return out


def block_masks(
    geometries: list, boxes: list[tuple[float, float, float, float]], transform, shape
) -> list[tuple[int, np.ndarray]]:
    """(zone index, pixel-centre mask) of the zones that touch one block.

    ``boxes`` are the zones' bounds in the grid's CRS (skips the rasterizing of far zones);
    ``transform`` is the block's own affine transform, ``shape`` its (rows, cols).
    """
    from rasterio import features

    height, width = shape
    left, top = transform.c, transform.f
    right, bottom = left + width * transform.a, top + height * transform.e
    masks = []
    for k, (g, (x0, y0, x1, y1)) in enumerate(zip(geometries, boxes, strict=True)):
        if x1 < left or x0 > right or y1 < bottom or y0 > top:
            continue  # this zone misses the block
        mask = features.rasterize(
            [(g, 1)], out_shape=shape, transform=transform, fill=0, dtype="uint8"
        ).astype(bool)
        if mask.any():
            masks.append((k, mask))
    return masks


def zone_sums_of_raster_block(
    raster: Path, geometries: list, boxes: list, grid, location
) -> list[np.ndarray]:
    """A one-item list holding ``zone_block`` of one block of a depth raster [mm]: pixels,
    valid pixels, zone area [m2], valid area [m2], volume [m3] per zone. A list so that the
    blocks' sums concatenate in row-major order and are added in that order afterwards."""
    import rasterio
    from rasterio import windows

    (r0, r1), (c0, c1) = location
    window = windows.Window(c0, r0, c1 - c0, r1 - r0)
    with rasterio.open(raster) as src:
        depth = src.read(1, window=window, masked=True).astype(np.float64).filled(np.nan)
        transform = src.window_transform(window)
    masks = block_masks(geometries, boxes, transform, depth.shape)
    return [zone_block(depth, masks, cell_areas(grid, slice(r0, r1)), len(geometries))]


def zone_totals(raster: Path, geometries: list, chunk: int) -> np.ndarray:
    """Sum zone_block over the raster's blocks of ``chunk`` pixels (one pass, bounded memory):
    per zone pixels, valid pixels, area [m2], valid area [m2], volume [m3]."""
    import operator

    import rasterio
    from rasterio import features

    from ..io.engine import BlockLayout, run_blockwise
    from ..io.grid import Grid

    with rasterio.open(raster) as src:
        grid = Grid(src.crs, src.transform, src.width, src.height)
    boxes = [features.bounds(g) for g in geometries]
    result = run_blockwise(
        BlockLayout(grid.height, grid.width, chunk),
        zone_sums_of_raster_block,
        args=(raster, geometries, boxes, grid),
        combine=operator.add,  # concatenates the blocks' one-item lists, in row-major order
    )
    # added block after block in row-major order, whatever the engine's reduction tree: the
    # totals' last bits do not depend on how the blocks were combined
    return np.sum(result.summary, axis=0)


def zone_rows(ids: list[str], totals: np.ndarray, variable: str) -> list[dict]:
    rows = []
    for k, zone in enumerate(ids):
        pixels, valid, area, valid_area, volume = totals[:, k]
        depth = volume / valid_area * 1000.0 if valid_area else float("nan")
        rows.append(
            {
                "zone_id": zone,
                "variable": variable,
                "pixels": int(pixels),
                "area_m2": area,
                "valid_fraction": valid / pixels if pixels else float("nan"),
                "mean_depth_mm": depth,
                # volume over the whole zone, with missing pixels at the zone's mean depth
                "volume_m3": depth / 1000.0 * area if valid_area else float("nan"),
                "volume_acre_feet": depth / 1000.0 * area / CUBIC_METRES_PER_ACRE_FOOT
                if valid_area
                else float("nan"),
                "volume_valid_pixels_m3": volume,
            }
        )
    return rows


def write_zone_tables(
    out_dir: Path, rows: list[dict], properties: list[dict], geometries: list
) -> None:
    from ..io.writers import write_text_atomic
    from ..scene.summaries import rows_to_csv

    write_text_atomic(out_dir / "zones.csv", rows_to_csv(rows))
    features = []
    for row, props, geometry in zip(rows, properties, geometries, strict=True):
        clean = {
            k: (None if isinstance(v, float) and not np.isfinite(v) else v) for k, v in row.items()
        }
        features.append({"type": "Feature", "geometry": geometry, "properties": {**props, **clean}})
    buffer = io.StringIO()
    json.dump({"type": "FeatureCollection", "features": features}, buffer)
    write_text_atomic(out_dir / "zones.geojson", buffer.getvalue())


def run_zones(recipe, settings, targets: list[tuple[str, str]]) -> list[Path]:
    """Zone tables for each (folder, variable) target that exists under ``settings.out_dir``."""
    import rasterio

    from ..io.engine import effective_chunk_size
    from ..recipe import resolve_path

    spec = recipe.zones
    written = []
    for folder, variable in targets:
        raster = settings.out_dir / folder / f"{variable}.tif"
        if not raster.is_file():
            continue
        with rasterio.open(raster) as src:
            crs = src.crs
        ids, props, original, geometries = load_zones(
            resolve_path(recipe, spec.path), spec.id_property, crs
        )
        totals = zone_totals(raster, geometries, effective_chunk_size(settings.chunk_size))
        write_zone_tables(
            settings.out_dir / folder, zone_rows(ids, totals, variable), props, original
        )
        written.append(settings.out_dir / folder / "zones.csv")
    return written
