"""Cloud-native outputs of a scene: a Zarr store beside the GeoTIFFs, and a STAC Item.

Both are optional (``[run] zarr``, ``[run] stac``). The Zarr arrays are extra targets of the one
``da.store`` of pass 2, so they are filled by the same ``dask.compute`` that writes the GeoTIFFs
and nothing is computed twice. The store is built under ``outputs.zarr.partial`` and renamed when
complete. The STAC Item describes the committed files and is written atomically before
``manifest.json`` (which stays the last file of a scene, the mark of a complete one).

Cloud Optimized GeoTIFFs (``[run] cog``) are made by :class:`rasterbudget.io.writers.AtomicRaster`.
"""

from __future__ import annotations

import datetime as dt
import json
import os
import shutil
from pathlib import Path

import numpy as np

from ..catalog.qa import QA, QA_DESCRIPTIONS
from ..errors import RecipeError
from .grid import Grid
from .writers import PARTIAL_SUFFIX, write_text_atomic

ZARR_NAME = "outputs.zarr"
ZARR_FORMAT = 2  # see AtomicZarr
#: CF grid-mapping variable that carries the CRS (the name GDAL and xarray tools look for).
GRID_MAPPING = "spatial_ref"
#: Edge points per side of the footprint: curved edges in lon/lat (e.g. UTM) stay accurate.
FOOTPRINT_POINTS_PER_EDGE = 21

# ----------------------------------------------------------------------------- grid geometry


def pixel_centres(grid: Grid) -> tuple[np.ndarray, np.ndarray]:
    """Map x of each column's and y of each row's pixel centre (north-up grid)."""
    t = grid.transform
    x = t.c + (np.arange(grid.width) + 0.5) * t.a
    y = t.f + (np.arange(grid.height) + 0.5) * t.e
    return x, y


def coordinate_attributes(grid: Grid) -> tuple[dict, dict]:
    """CF attributes of the x and y coordinate arrays for the grid's CRS."""
    if grid.crs.is_geographic:
        return (
            {"standard_name": "longitude", "units": "degrees_east", "axis": "X"},
            {"standard_name": "latitude", "units": "degrees_north", "axis": "Y"},
        )
    unit = grid.crs.linear_units or "unknown"
    units = "m" if unit.lower() in ("metre", "meter", "m") else unit
    return (
        {"standard_name": "projection_x_coordinate", "units": units, "axis": "X"},
        {"standard_name": "projection_y_coordinate", "units": units, "axis": "Y"},
    )


def qa_flag_attributes() -> dict:
    """CF flag attributes of the QA bit mask: one mask and one meaning per bit."""
    return {
        "flag_masks": [int(bit) for bit in QA],
        "flag_meanings": " ".join(bit.name.lower() for bit in QA),
        "comment": "; ".join(
            f"bit {int(bit).bit_length() - 1}: {QA_DESCRIPTIONS[bit]}" for bit in QA
        ),
    }


def footprint_lonlat(
    grid: Grid, points_per_edge: int = FOOTPRINT_POINTS_PER_EDGE
) -> tuple[list[float], dict]:
    """The grid's bounding box and outline in WGS84 longitude/latitude.

    The outline follows the grid's outer pixel edges with ``points_per_edge`` points per side, so
    edges that curve in lon/lat stay close; it runs counter-clockwise (RFC 7946). The box comes
    from ``transform_bounds`` with the same densification.
    """
    from rasterio.warp import transform, transform_bounds

    left, bottom, right, top = grid.bounds
    steps = np.linspace(0.0, 1.0, points_per_edge)[:-1]
    xs = np.concatenate(
        [
            np.full_like(steps, left),  # west edge, north to south
            left + steps * (right - left),  # south edge, west to east
            np.full_like(steps, right),  # east edge, south to north
            right - steps * (right - left),  # north edge, east to west
        ]
    )
    ys = np.concatenate(
        [
            top - steps * (top - bottom),
            np.full_like(steps, bottom),
            bottom + steps * (top - bottom),
            np.full_like(steps, top),
        ]
    )
    lons, lats = transform(grid.crs, "EPSG:4326", xs.tolist(), ys.tolist())
    ring = [[float(x), float(y)] for x, y in zip(lons, lats, strict=True)]
    ring.append(ring[0])
    bbox = transform_bounds(grid.crs, "EPSG:4326", left, bottom, right, top, densify_pts=21)
    return [float(v) for v in bbox], {"type": "Polygon", "coordinates": [ring]}


# ----------------------------------------------------------------------------- Zarr


def require_zarr() -> None:
    """Fail early, before any pass, when ``run.zarr`` is set but zarr is not installed."""
    try:
        import zarr  # noqa: F401
    except ImportError:
        raise RecipeError(
            "run.zarr = true needs the zarr package, which is not installed; install it with "
            "`pip install 'rasterbudget[cloud]'` or set zarr = false."
        ) from None


class AtomicZarr:
    """A Zarr group of 2-D arrays on the scene grid, built under a temporary name.

    ``arrays`` are the ``da.store`` targets: chunks equal the run's chunks, so each dask block
    fills whole Zarr chunks and no two tasks write the same chunk (no lock needed). Coordinates
    (pixel centres), the CRS as WKT and CF attributes (units, long_name, grid_mapping, QA flag
    meanings) are written at once; ``commit`` consolidates the metadata (one read for a remote
    reader) and renames the folder, ``abort`` removes it.

    Zarr format 2: GDAL 3.10 (the rasterio wheels') cannot read format 3's ``bytes`` codec, while
    format 2 opens in GDAL - with its CRS and grid, from ``_CRS`` and the x/y arrays - as well as
    in xarray and every zarr-python. Dimension names are the ``_ARRAY_DIMENSIONS`` attribute.
    """

    def __init__(
        self,
        path: Path,
        grid: Grid,
        chunk: int,
        variables: dict[str, tuple[str, str, str]],
        attributes: dict,
    ) -> None:
        """``variables``: name -> (dtype, units, long_name); ``attributes`` go on the group."""
        self.path = Path(path)
        self.partial = self.path.with_name(self.path.name + PARTIAL_SUFFIX)
        self.committed = False
        shutil.rmtree(self.partial, ignore_errors=True)
        try:
            self.arrays = self._create(grid, chunk, variables, attributes)
        except BaseException:
            self.abort()  # nothing half-made is left if creating the store fails
            raise

    def _create(
        self, grid: Grid, chunk: int, variables: dict[str, tuple[str, str, str]], attributes: dict
    ) -> dict:
        import pyproj
        import zarr

        # CF grid mapping from pyproj (grid_mapping_name, its parameters, crs_wkt as WKT2), plus
        # GDAL's WKT and geotransform, which GDAL-based readers look for.
        cf = pyproj.CRS.from_wkt(grid.crs.to_wkt()).to_cf()
        gdal_crs = {"wkt": grid.crs.to_wkt()}  # GDAL's Zarr driver reads the CRS from _CRS
        group = zarr.open_group(self.partial, mode="w", zarr_format=ZARR_FORMAT)
        group.attrs.update({**attributes, "crs_wkt": cf["crs_wkt"]})
        x, y = pixel_centres(grid)
        x_attrs, y_attrs = coordinate_attributes(grid)
        for name, values, attrs in (("x", x, x_attrs), ("y", y, y_attrs)):
            coord = group.create_array(
                name,
                shape=values.shape,
                dtype="float64",
                chunks=values.shape,
                attributes={**attrs, "_ARRAY_DIMENSIONS": [name]},
            )
            coord[:] = values
        t = grid.transform
        group.create_array(
            GRID_MAPPING,
            shape=(),
            dtype="int32",
            fill_value=0,
            attributes={
                **cf,
                "_ARRAY_DIMENSIONS": [],
                "spatial_ref": grid.crs.to_wkt(),
                # GDAL order: origin x, pixel width, row rotation, origin y, column rotation, height
                "GeoTransform": " ".join(repr(v) for v in (t.c, t.a, t.b, t.f, t.d, t.e)),
            },
        )
        arrays = {}
        for name, (dtype, units, long_name) in variables.items():
            is_float = np.dtype(dtype).kind == "f"
            attrs = {
                "long_name": long_name,
                "grid_mapping": GRID_MAPPING,
                # CF: the grid mapping as a coordinate, so xarray (by default) keeps it beside
                # every variable and rioxarray finds the CRS without decode_coords="all"
                "coordinates": GRID_MAPPING,
                "_ARRAY_DIMENSIONS": ["y", "x"],
                "_CRS": gdal_crs,
            }
            if is_float:
                attrs["units"] = units
            else:  # the QA bit mask: flags, not a physical quantity
                attrs |= qa_flag_attributes()
            arrays[name] = group.create_array(
                name,
                shape=(grid.height, grid.width),
                dtype=dtype,
                chunks=(min(chunk, grid.height), min(chunk, grid.width)),
                # the QA mask has no fill value: 0 means "no flag", and a fill value of 0
                # made xarray mask 95 % of the pixels and turn the flags into floats
                fill_value=np.nan if is_float else None,
                attributes=attrs,
            )
        return arrays

    def commit(self) -> Path:
        """Rename the finished store to its final name, replacing a previous run's store."""
        import zarr

        zarr.consolidate_metadata(self.partial)
        if self.path.exists():
            # Move the old store aside under a .partial name (cleared by remove_stale_partials if
            # we stop here), so the final name is never a half-replaced folder.
            old = self.path.with_name(self.path.name + ".old" + PARTIAL_SUFFIX)
            shutil.rmtree(old, ignore_errors=True)
            os.replace(self.path, old)
            os.replace(self.partial, self.path)
            shutil.rmtree(old, ignore_errors=True)
        else:
            os.replace(self.partial, self.path)
        self.committed = True
        return self.path

    def abort(self) -> None:
        shutil.rmtree(self.partial, ignore_errors=True)


# ----------------------------------------------------------------------------- STAC

#: Non-raster outputs: file name -> (asset key, media type, roles, title).
AUXILIARY_ASSETS: dict[str, tuple[str, str, list[str], str]] = {
    "manifest.json": (
        "manifest",
        "application/json",
        ["metadata"],
        "inputs, parameters, anchors, QA counts, versions, timings",
    ),
    "tiles.csv": ("tiles_table", "text/csv", ["metadata"], "statistics per summary tile"),
    "tiles.geojson": (
        "tiles_footprints",
        "application/geo+json",
        ["metadata"],
        "summary tiles with their statistics",
    ),
    "classes.csv": ("classes_table", "text/csv", ["metadata"], "statistics per land-cover class"),
    "compare.json": (
        "summary",
        "application/json",
        ["metadata"],
        "what was compared, inputs' checksums, category shares, zones, uncertainty",
    ),
    "categories.csv": ("categories_table", "text/csv", ["metadata"], "area per category"),
    "zones.csv": ("zones_table", "text/csv", ["metadata"], "per-zone means and volumes"),
    "quicklook.png": ("quicklook", "image/png", ["overview"], "quick-look maps"),
    "edges.png": ("edges_plot", "image/png", ["metadata"], "surface temperature against albedo"),
    ZARR_NAME: (
        "zarr",
        "application/vnd+zarr",
        ["data"],
        "all float outputs and qa_flags as one Zarr (format 2) store",
    ),
}

GEOTIFF_MEDIA_TYPE = "image/tiff; application=geotiff"
COG_MEDIA_TYPE = "image/tiff; application=geotiff; profile=cloud-optimized"


def projection_fields(grid: Grid) -> dict:
    """Projection-extension values: the EPSG code when the CRS has one, else WKT2."""
    epsg = grid.crs.to_epsg()
    left, bottom, right, top = grid.bounds
    fields = {
        "shape": [grid.height, grid.width],
        "transform": [float(v) for v in list(grid.transform)[:6]],
        "bbox": [float(left), float(bottom), float(right), float(top)],
    }
    if epsg is not None:
        fields["code"] = f"EPSG:{epsg}"
    else:
        fields["code"] = None
        fields["wkt2"] = grid.crs.to_wkt(version="WKT2_2019")
    return fields


def add_projection(item, grid: Grid) -> None:
    """The projection extension's fields on an Item: ``proj:code`` (extension v2) and, where
    the CRS has an EPSG code, also ``proj:epsg`` (v1), which stackstac and older readers use."""
    from pystac.extensions.projection import ProjectionExtension

    ProjectionExtension.ext(item, add_if_missing=True).apply(**projection_fields(grid))
    epsg = grid.crs.to_epsg()
    if epsg is not None:
        item.properties["proj:epsg"] = int(epsg)


def raster_asset(
    name: str, href: str, units: str, description: str, dtype: str, nodata, cog: bool
) -> tuple[str, dict]:
    """Asset key and fields of one output raster (STAC 1.1 data values: type, nodata, unit)."""
    fields = {
        "href": href,
        "type": COG_MEDIA_TYPE if cog else GEOTIFF_MEDIA_TYPE,
        "title": name,
        "description": description,
        "roles": ["data"] if np.dtype(dtype).kind == "f" else ["metadata"],
        "data_type": str(np.dtype(dtype)),
    }
    if nodata is not None:  # qa_flags has none: every pixel carries its flags, 0 = no flag
        # JSON has no NaN: STAC writes the float nodata NaN as the string "nan".
        fields["nodata"] = "nan" if isinstance(nodata, float) and np.isnan(nodata) else nodata
    if np.dtype(dtype).kind == "f":
        fields["unit"] = units
    return name, fields


def stac_item(
    scene_id: str,
    acquired_utc: dt.datetime | None,
    grid: Grid,
    rasters: dict[str, tuple[str, str, str, float | int]],
    files: list[str],
    cog: bool,
    created: dt.datetime,
    period: tuple[dt.datetime, dt.datetime] | None = None,
    title: str | None = None,
) -> dict:
    """A scene's (or, with ``period`` instead of a time, a season's or comparison's) STAC Item
    as a dict (pystac builds it; hrefs relative to its folder).

    ``rasters``: output stem -> (units, description, dtype, nodata), one asset each at
    ``./<stem>.tif``; ``files``: the other file names of the folder that become metadata,
    overview or data assets (see :data:`AUXILIARY_ASSETS`).
    """
    import pystac

    bbox, geometry = footprint_lonlat(grid)
    properties = {
        "title": title or f"{scene_id}: surface energy balance and evapotranspiration",
        "created": _stac_time(created),
    }
    if period is not None:  # a span of time: datetime null, start and end given
        properties |= {
            "start_datetime": _stac_time(period[0]),
            "end_datetime": _stac_time(period[1]),
        }
    item = pystac.Item(
        id=scene_id,
        geometry=geometry,
        bbox=bbox,
        datetime=None if acquired_utc is None else acquired_utc.astimezone(dt.UTC),
        properties=properties,
    )
    add_projection(item, grid)
    for stem, (units, description, dtype, nodata) in rasters.items():
        key, fields = raster_asset(stem, f"./{stem}.tif", units, description, dtype, nodata, cog)
        item.add_asset(key, _asset(pystac, fields))
    for name in files:
        if name not in AUXILIARY_ASSETS:
            continue
        key, media_type, roles, title = AUXILIARY_ASSETS[name]
        fields = {"href": f"./{name}", "type": media_type, "roles": roles, "title": title}
        item.add_asset(key, _asset(pystac, fields))
    return item.to_dict(include_self_link=False, transform_hrefs=False)


def _stac_time(when: dt.datetime) -> str:
    return when.astimezone(dt.UTC).isoformat().replace("+00:00", "Z")


def stac_collection(collection_id: str, items: list[tuple[str, dict]], created: dt.datetime):
    """A STAC Collection of a run's Items (``items``: relative href and Item dict of each):
    its extent spans theirs; one ``item`` link each."""
    import pystac

    boxes = np.array([item["bbox"] for _, item in items], dtype=float)
    times = []
    for _, item in items:
        p = item["properties"]
        for key in ("datetime", "start_datetime", "end_datetime"):
            if p.get(key):
                times.append(dt.datetime.fromisoformat(p[key].replace("Z", "+00:00")))
    collection = pystac.Collection(
        id=collection_id,
        description=(
            f"rasterbudget outputs of {collection_id}: per-scene surface energy balance and ET, "
            "season totals and comparisons. Estimates with uncertainty; they do not replace "
            "local regulations or licensed professional judgement."
        ),
        extent=pystac.Extent(
            pystac.SpatialExtent(
                [[*boxes[:, :2].min(axis=0).tolist(), *boxes[:, 2:].max(axis=0).tolist()]]
            ),
            pystac.TemporalExtent([[min(times), max(times)]]),
        ),
        license="other",
        extra_fields={"created": _stac_time(created)},
    )
    for href, item in items:
        collection.add_link(
            pystac.Link(
                "item",
                href,
                media_type="application/geo+json",
                title=item["properties"].get("title"),
            )
        )
    return collection.to_dict(include_self_link=False, transform_hrefs=False)


def _asset(pystac, fields: dict):
    known = {"href", "type", "title", "description", "roles"}
    return pystac.Asset(
        href=fields["href"],
        media_type=fields["type"],
        title=fields.get("title"),
        description=fields.get("description"),
        roles=fields["roles"],
        extra_fields={k: v for k, v in fields.items() if k not in known},
    )


def write_stac_item(item: dict, path: Path) -> Path:
    """Write the Item JSON atomically (temporary name, renamed when complete)."""
    return write_text_atomic(path, json.dumps(item, indent=2) + "\n")
