"""Per-zone ET depth and volume from a polygon file (GeoJSON).

Each cell counts with the exact share of it inside the polygon (exactextract's coverage
fraction, computed block by block so memory stays bounded) times its ground area on the
ellipsoid (:mod:`rasterbudget.io.areas`, true on any projection). Zones may overlap (fields
inside sub-basins). Per zone: its true area (geodesic, of the polygon itself), the share of it
on the grid, the shares of valid and of flagged cells (water, snow, built-up: the residual is no
ET there), the coverage-weighted mean depth over valid unflagged cells, ``volume_m3`` over the
zone's unflagged part on the grid with missing cells at the mean depth,
``volume_valid_pixels_m3`` over valid unflagged cells only, and apart the residual over flagged
cells (``flagged_residual_volume_m3``), which is no ET estimate and is never mixed in.
Volume = depth [mm] / 1000 x cell area [m2]; acre-feet = m3 / 1233.48 (1 acre-foot = 43,560 ft3,
exact definition).
"""

from __future__ import annotations

import functools
import io
import itertools
import json
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import RecipeError
from ..methods.ensemble import member_percentiles

CUBIC_METRES_PER_ACRE_FOOT = 1233.48183754752  # 43,560 ft3 x 0.3048^3 m3 per ft3


def read_zone_features(path: Path, id_property: str) -> tuple[list[dict], str]:
    """The features of a GeoJSON zone file, each checked (a polygon with numeric coordinates
    and a unique id), and the file's CRS; one line naming the feature where one is not."""
    if not path.is_file():
        raise RecipeError(f"zone file {path} does not exist; fix zones.path in the recipe.")
    if path.suffix.lower() in (".geojson", ".json"):
        features, source_crs = _geojson_features(path)
    elif path.suffix.lower() in RASTER_SUFFIXES:
        features, source_crs = _raster_features(path, id_property)
    else:
        features, source_crs = _ogr_features(path)
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


def _geojson_features(path: Path) -> tuple[list, str]:
    """The features of a GeoJSON file and its CRS (its ``crs`` member, else EPSG:4326)."""
    try:
        collection = json.loads(path.read_text("utf-8"))
        features = collection["features"]
        if not isinstance(features, list):
            raise TypeError("'features' is not a list")
    except (json.JSONDecodeError, UnicodeDecodeError, KeyError, TypeError) as err:
        raise RecipeError(f"zone file {path} is not a GeoJSON FeatureCollection ({err}).") from None
    crs = collection.get("crs") if isinstance(collection.get("crs"), dict) else {}
    return features, (crs.get("properties") or {}).get("name", "EPSG:4326")


#: File suffixes read as a zone raster (integer zone ids per cell; 0 and nodata: no zone).
RASTER_SUFFIXES = (".tif", ".tiff", ".vrt", ".img")


def _raster_features(path: Path, id_property: str) -> tuple[list, str]:
    """The zones of an integer raster: each zone id's cells as one (Multi)Polygon of the cell
    outlines (``rasterio.features.shapes``), in the raster's CRS; 0 and nodata are no zone."""
    import rasterio
    from rasterio import features

    try:
        with rasterio.open(path) as src:
            if src.crs is None:
                raise RecipeError(f"zone raster {path} has no CRS; assign one.")
            ids = src.read(1)
            valid = src.read_masks(1) > 0
            transform, crs = src.transform, src.crs.to_string()
    except rasterio.errors.RasterioIOError as err:
        raise RecipeError(f"zone raster {path} cannot be read ({err}).") from None
    if not np.issubdtype(ids.dtype, np.integer):
        raise RecipeError(f"zone raster {path} holds {ids.dtype} values; zone ids are integers.")
    polygons: dict[int, list] = {}
    for geometry, value in features.shapes(ids, mask=valid & (ids != 0), transform=transform):
        polygons.setdefault(int(value), []).append(geometry["coordinates"])
    zones = [
        {
            "type": "Feature",
            "properties": {id_property: str(value)},
            "geometry": {"type": "MultiPolygon", "coordinates": rings},
        }
        for value, rings in sorted(polygons.items())
    ]
    return json.loads(json.dumps(zones)), crs


def _ogr_features(path: Path) -> tuple[list, str]:
    """The features of any vector file GDAL/OGR reads (GeoPackage, shapefile, ...), as GeoJSON
    feature dicts, and its CRS (pyogrio; shapely for the geometries)."""
    import shapely
    from pyogrio import raw
    from pyogrio.errors import DataSourceError

    try:
        meta, _, geometries, fields = raw.read(path)
    except (DataSourceError, OSError, ValueError) as err:
        reason = str(err).splitlines()[0]
        raise RecipeError(f"zone file {path} cannot be read as vector data ({reason}).") from None
    if meta.get("crs") is None:
        raise RecipeError(f"zone file {path} has no CRS; assign one (e.g. with ogr2ogr -a_srs).")
    features = []
    for k, wkb in enumerate(geometries):
        properties = {
            str(name): (values[k].item() if hasattr(values[k], "item") else values[k])
            for name, values in zip(meta["fields"], fields, strict=True)
        }
        geometry = None if wkb is None else shapely.geometry.mapping(shapely.from_wkb(wkb))
        features.append({"type": "Feature", "properties": properties, "geometry": geometry})
    return json.loads(json.dumps(features)), meta["crs"]  # tuples to lists, as GeoJSON's


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


#: Per-zone sums carried through the blocks (rows of :func:`zone_block`'s result).
SUMS = (
    "pixels",  # covered pixels, fractional at the edges [-]
    "valid_pixels",
    "area_in_grid_m2",  # coverage x ground area of each cell [m2]
    "valid_area_m2",  # valid cells whose residual is an ET estimate
    "valid_volume_m3",  # coverage x area x depth / 1000 over those cells [m3]
    "flagged_area_m2",  # of cells whose residual is flagged unreliable (water, snow, built-up)
    "flagged_volume_m3",  # the residual over flagged cells with a value: reported apart
)


def zone_block(
    depth: np.ndarray,
    coverage: list[tuple[int, np.ndarray, np.ndarray, np.ndarray, np.ndarray]],
    n_zones: int,
    flagged: np.ndarray | None = None,
) -> np.ndarray:
    """Per zone the :data:`SUMS` of one block; ``coverage`` holds per zone touching the block
    (zone index, rows, cols, coverage fraction, fraction x ground area [m2]) of its cells."""
    out = np.zeros((len(SUMS), n_zones))
    for k, rows, cols, share, weight in coverage:
        values = depth[rows, cols]
        finite = np.isfinite(values)
        bad = np.zeros(values.shape, bool) if flagged is None else flagged[rows, cols]
        valid, apart = finite & ~bad, finite & bad
        out[:, k] = (
            share.sum(),
            share[valid].sum(),
            weight.sum(),
            weight[valid].sum(),
            (weight[valid] * values[valid]).sum() / 1000.0,
            weight[bad].sum(),
            (weight[apart] * values[apart]).sum() / 1000.0,
        )
    return out


def block_coverage(
    geometries: list, boxes: list, grid, location
) -> list[tuple[int, np.ndarray, np.ndarray, np.ndarray, np.ndarray]]:
    """Per zone touching one block: its cells' rows and columns in the block and their
    coverage fraction (exactextract: the exact share of each cell inside the polygon) times
    the cell's ground area (:func:`rasterbudget.io.areas.cell_areas`)."""
    from exactextract import exact_extract
    from exactextract.raster import NumPyRasterSource

    from ..io.areas import cell_areas

    (r0, r1), (c0, c1) = location
    t = grid.transform
    left, top = t.c + c0 * t.a, t.f + r0 * t.e
    right, bottom = t.c + c1 * t.a, t.f + r1 * t.e
    touching = [
        k
        for k, (x0, y0, x1, y1) in enumerate(boxes)
        if not (x1 < left or x0 > right or y1 < bottom or y0 > top)
    ]
    if not touching:
        return []
    # a NaN-free stand-in of the block: exactextract leaves out nodata cells, but the zone's
    # area counts its missing cells too
    frame = NumPyRasterSource(np.zeros((r1 - r0, c1 - c0)), left, bottom, right, top)
    features = [{"type": "Feature", "properties": {}, "geometry": geometries[k]} for k in touching]
    found = exact_extract(frame, features, ["cell_id", "coverage"], output="geojson")
    out = []
    for k, result in zip(touching, found, strict=True):
        cells = np.asarray(result["properties"]["cell_id"], dtype=np.int64)
        if cells.size == 0:
            continue
        share = np.asarray(result["properties"]["coverage"], dtype=np.float64)
        rows, cols = np.divmod(cells, c1 - c0)
        out.append((k, rows, cols, share, share * cell_areas(grid, rows + r0, cols + c0)))
    return out


def zone_sums_of_raster_block(
    rasters: list[tuple[Path, bool]], geometries: list, boxes: list, grid, qa: Path | None, location
) -> list[tuple[np.ndarray, ...]]:
    """A one-item list holding, for each (raster, bands) of ``rasters``, ``zone_block`` of one
    block of that depth raster [mm] (with ``bands``, of each of its bands, stacked): the cells'
    coverage is found once for all. A list so that the blocks' sums concatenate in row-major
    order and are added in that order."""
    import rasterio
    from rasterio import windows

    from ..catalog.qa import QA

    (r0, r1), (c0, c1) = location
    window = windows.Window(c0, r0, c1 - c0, r1 - r0)
    flagged = None
    if qa is not None:
        from .totals import SEASON_QA, SEASON_UNRELIABLE

        # a scene's QA flags, or a season's QA bits (a scene flagged the pixel's residual)
        bit = SEASON_UNRELIABLE if qa.name == SEASON_QA else int(QA.RESIDUAL_UNRELIABLE_CLASS)
        with rasterio.open(qa) as src:
            bits = src.read(1, window=window).astype(np.int64)
        flagged = (bits & bit) != 0
    coverage = block_coverage(geometries, boxes, grid, location)
    sums = []
    for raster, bands in rasters:
        with rasterio.open(raster) as src:
            indexes = None if bands else 1
            depth = src.read(indexes, window=window, masked=True)
        depth = depth.astype(np.float64).filled(np.nan)
        if bands:
            sums.append(
                np.stack([zone_block(d, coverage, len(geometries), flagged) for d in depth])
            )
        else:
            sums.append(zone_block(depth, coverage, len(geometries), flagged))
    return [tuple(sums)]


def zone_totals(
    raster: Path, geometries: list, chunk: int, qa: Path | None = None, bands: bool = False
) -> np.ndarray:
    """Sum zone_block over the raster's blocks of ``chunk`` pixels (one pass, bounded memory):
    per zone the :data:`SUMS`, an array (sums, zones); with ``bands`` for each band of the
    raster, an array (bands, sums, zones)."""
    return zone_totals_of([(raster, bands)], geometries, chunk, qa)[0]


def zone_totals_of(
    rasters: list[tuple[Path, bool]], geometries: list, chunk: int, qa: Path | None = None
) -> list[np.ndarray]:
    """:func:`zone_totals` of several rasters of one grid, (raster, bands) each, in one pass:
    the cells' coverage by the zones (the costly part) found once per block for all of them."""
    import operator

    import rasterio
    from rasterio import features

    from ..io.engine import BlockLayout, run_blockwise
    from ..io.grid import Grid

    with rasterio.open(rasters[0][0]) as src:
        grid = Grid(src.crs, src.transform, src.width, src.height)
    boxes = [features.bounds(g) for g in geometries]
    result = run_blockwise(
        BlockLayout(grid.height, grid.width, chunk),
        zone_sums_of_raster_block,
        args=(rasters, geometries, boxes, grid, qa),
        combine=operator.add,  # concatenates the blocks' one-item lists, in row-major order
    )
    # added block after block in row-major order, whatever the engine's reduction tree: the
    # totals' last bits do not depend on how the blocks were combined
    return [np.sum([block[k] for block in result.summary], axis=0) for k in range(len(rasters))]


@dataclass
class ZonesOnGrid:
    """A zone file's zones in one grid's CRS: ids, properties, geometries on the grid; their
    geodesic areas and WGS84 outlines made when first asked for."""

    ids: list[str]
    properties: list[dict]
    geometries: list[dict]
    crs: object

    @functools.cached_property
    def areas(self) -> list[float]:
        return [polygon_area(g, self.crs.to_wkt()) for g in self.geometries]

    @functools.cached_property
    def lonlat(self) -> list[dict]:
        from rasterio.warp import transform_geom

        return [transform_geom(self.crs, "EPSG:4326", g) for g in self.geometries]


def zones_on_grid(path: Path, id_property: str, crs) -> ZonesOnGrid:
    """The zones of ``path`` in ``crs``, read and transformed once per file version and CRS
    (every scene, season and zone series of a run shares them)."""
    stat = Path(path).stat()
    return _zones_on_grid(str(path), stat.st_mtime_ns, stat.st_size, id_property, crs.to_wkt())


@functools.lru_cache(maxsize=8)
def _zones_on_grid(path: str, _mtime: int, _size: int, id_property: str, wkt: str) -> ZonesOnGrid:
    from rasterio.crs import CRS

    crs = CRS.from_wkt(wkt)
    ids, properties, _, geometries = load_zones(Path(path), id_property, crs)
    return ZonesOnGrid(ids, properties, geometries, crs)


def polygon_area(geometry: dict, crs) -> float:
    """Ground area of a Polygon or MultiPolygon given in ``crs`` [m2]: its rings' geodesic
    areas (pyproj.Geod on WGS84), each edge densified so the ring follows the map's straight
    lines."""
    from pyproj import Geod, Transformer

    geod = Geod(ellps="WGS84")
    to_lonlat = Transformer.from_crs(crs, "EPSG:4326", always_xy=True)
    coordinates = geometry["coordinates"]
    polygons = [coordinates] if geometry["type"] == "Polygon" else coordinates
    total = 0.0
    for polygon in polygons:
        for k, ring in enumerate(polygon):
            xy = np.asarray(ring, dtype=np.float64)[:, :2]
            steps = np.linspace(0.0, 1.0, 32, endpoint=False)
            dense = np.concatenate(
                [a + (b - a) * steps[:, None] for a, b in itertools.pairwise(xy)]
            )
            lon, lat = to_lonlat.transform(dense[:, 0], dense[:, 1])
            area, _ = geod.polygon_area_perimeter(lon, lat)
            total += abs(area) if k == 0 else -abs(area)  # holes after the outer ring
    return total


def zone_rows(
    ids: list[str], totals: np.ndarray, variable: str, areas: list[float] | None = None
) -> list[dict]:
    """One row per zone: its true area, the share the grid covers, the shares valid and
    flagged, mean depth and volumes."""
    rows = []
    for k, zone in enumerate(ids):
        sums = dict(zip(SUMS, totals[:, k], strict=True))
        in_grid, valid_area = sums["area_in_grid_m2"], sums["valid_area_m2"]
        area = areas[k] if areas is not None else in_grid
        depth = sums["valid_volume_m3"] / valid_area * 1000.0 if valid_area else float("nan")
        # volume over the zone's unflagged part on the grid, missing cells at the mean depth;
        # flagged cells (water, snow, built-up) are reported apart, never filled silently
        volume = depth / 1000.0 * (in_grid - sums["flagged_area_m2"]) if valid_area else np.nan
        rows.append(
            {
                "zone_id": zone,
                "variable": variable,
                "pixels": sums["pixels"],
                "area_m2": area,
                "area_in_grid_m2": in_grid,
                "covered_share": in_grid / area if area else float("nan"),
                "valid_share": valid_area / in_grid if in_grid else float("nan"),
                "flagged_share": sums["flagged_area_m2"] / in_grid if in_grid else float("nan"),
                "mean_depth_mm": depth,
                "volume_m3": volume,
                "volume_acre_feet": volume / CUBIC_METRES_PER_ACRE_FOOT,
                "volume_valid_pixels_m3": sums["valid_volume_m3"],
                # the residual over flagged cells: not an ET estimate (README, QA bit 10)
                "flagged_residual_volume_m3": sums["flagged_volume_m3"],
            }
        )
    return rows


def with_member_percentiles(
    rows: list[dict], ids: list[str], member_totals: np.ndarray, areas: list[float] | None
) -> list[dict]:
    """Rows with the p10, p50 and p90 of the zone's mean depth and volume over the ensemble
    members, each member's own zone total first (``member_totals``: (members, sums, zones))."""
    per_member = [zone_rows(ids, totals, "", areas) for totals in member_totals]
    out = []
    for k, row in enumerate(rows):
        extra = {}
        for column in ("mean_depth_mm", "volume_m3"):
            found = member_percentiles([m[k][column] for m in per_member])
            extra |= {f"{column}_{suffix}": float(v) for suffix, v in found.items()}
        out.append(row | extra | {"members": len(per_member)})
    return out


def reference_depth(folder: Path) -> float | None:
    """The reference ET of a scene's day or a season's days [mm], from its manifest."""
    try:
        manifest = json.loads((folder / "manifest.json").read_text())
    except (OSError, ValueError):
        return None
    if "season_id" in manifest:
        return manifest.get("reference_et_total_mm")
    return (manifest.get("reference_et") or {}).get("daily_mm")


def with_substitute(rows: list[dict], coefficient: float, reference_mm: float | None) -> list:
    """Rows with the flagged cells' substitute ET (``coefficient`` x reference ET) as a volume
    of its own and added to the zone's volume in a separate column; stated in each row."""
    out = []
    for row in rows:
        flagged_area = row["flagged_share"] * row["area_in_grid_m2"]
        if reference_mm is None or not np.isfinite(flagged_area):
            substitute = float("nan")
        else:
            substitute = coefficient * reference_mm / 1000.0 * flagged_area
        out.append(
            row
            | {
                "flagged_substitute": f"{coefficient} x reference ET (zones.flagged_substitute)",
                "flagged_substitute_volume_m3": substitute,
                "volume_with_substitute_m3": row["volume_m3"] + substitute,
            }
        )
    return out


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
    from .totals import SEASON_QA

    spec = recipe.zones
    written = []
    for folder, variable in targets:
        raster = settings.out_dir / folder / f"{variable}.tif"
        if not raster.is_file():
            continue
        with rasterio.open(raster) as src:
            zones = zones_on_grid(resolve_path(recipe, spec.path), spec.id_property, src.crs)
        qa = settings.out_dir / folder / "qa_flags.tif"
        if not qa.is_file():  # a season: its own QA bits
            qa = settings.out_dir / folder / SEASON_QA
        members = settings.out_dir / folder / f"{variable}_members.tif"
        rasters = [(raster, False)] + ([(members, True)] if members.is_file() else [])
        # one pass for the raster and, for a season, its members' stack
        totals, *member_totals = zone_totals_of(
            rasters,
            zones.geometries,
            effective_chunk_size(settings.chunk_size),
            qa if qa.is_file() else None,
        )
        rows = zone_rows(zones.ids, totals, variable, zones.areas)
        if member_totals:  # a season's members: their zone totals' percentiles
            rows = with_member_percentiles(rows, zones.ids, member_totals[0], zones.areas)
        if spec.flagged_substitute is not None:
            rows = with_substitute(
                rows, spec.flagged_substitute, reference_depth(settings.out_dir / folder)
            )
        write_zone_tables(settings.out_dir / folder, rows, zones.properties, zones.lonlat)
        written.append(settings.out_dir / folder / "zones.csv")
    return written
