"""A delivered product as a scene's inputs: which file gives which input role, read how.

A Landsat Collection 2 Level-2 product gives surface reflectance bands (from which the input
registry derives albedo and NDVI), the surface-temperature band, and the pixel QA band as the
cloud mask. Scale and offset come from the product's metadata, else from the product's published
defaults, unless the recipe gives them; the manifest records where each fact came from.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path

from ..errors import InputRasterError, InputValueError
from ..io.landsat_metadata import LandsatMetadata, read_landsat_metadata
from ..recipe import InputSpec, ProductSettings, Recipe, resolve_path, resolve_raster_path

#: Band keys of the metadata (``io.landsat_metadata``) for each common band name, per sensor.
SENSOR_BANDS: dict[str, dict[str, str]] = {
    "TM": {"blue": "1", "red": "3", "nir": "4", "swir1": "5", "swir2": "7", "thermal": "ST_B6"},
    "ETM": {"blue": "1", "red": "3", "nir": "4", "swir1": "5", "swir2": "7", "thermal": "ST_B6"},
    "OLI_TIRS": {
        "blue": "2",
        "red": "4",
        "nir": "5",
        "swir1": "6",
        "swir2": "7",
        "thermal": "ST_B10",
    },
}

#: Collection 2 Level-2 scaling where the metadata do not state it: surface reflectance
#: 0.0000275 x DN - 0.2, surface temperature 0.00341802 x DN + 149.0 K; 0 is fill (Landsat
#: Collection 2 Level-2 product guide, from memory).
LEVEL2_DEFAULTS = {"reflectance": (2.75e-05, -0.2), "temperature": (0.00341802, 149.0)}

#: Pixel QA bits dropped as clouds: fill 0, dilated cloud 1, cirrus 2, cloud 3, cloud shadow 4
#: (Landsat Collection 2 QA_PIXEL, from memory). Snow (5) and water (7) stay: they are surfaces.
CLOUD_BITS = (0, 1, 2, 3, 4)

_ALBEDO_WEIGHTS = {
    "TM": "Liang (2001) TM/ETM+ weights",
    "ETM": "Liang (2001) TM/ETM+ weights",
    "OLI_TIRS": "Liang (2001) TM/ETM+ weights on OLI bands 2, 4, 5, 6, 7: an adaptation",
}


@dataclass(frozen=True)
class ProductInputs:
    """The input roles a product gives: path and read options per role, the mask bits."""

    paths: dict[str, Path | str] = field(default_factory=dict)
    specs: dict[str, InputSpec] = field(default_factory=dict)
    mask_bits: tuple[int, ...] = ()
    facts: dict = field(default_factory=dict)  # for the manifest, with where each came from


def product_inputs(
    recipe: Recipe, product: ProductSettings, acquired: datetime | None = None
) -> ProductInputs:
    """The roles, files and scaling of a Level-2 product (see the module docstring);
    ``acquired`` (the scene's time) is checked against the metadata's date."""
    metadata, item_scaling = None, {}
    if product.stac_item is not None:
        item = resolve_path(recipe, product.stac_item)
        sensor_of_item, files, item_scaling = stac_item_bands(item)
        sensor = product.sensor or sensor_of_item
        files |= {n: resolve_raster_path(recipe, v) for n, v in product.bands.items()}
        missing = [n for n in ("blue", "red", "nir", "swir1", "swir2", "thermal") if n not in files]
        if missing:
            raise InputValueError(
                f"STAC item {item} has no asset for the bands {missing} (by common name: blue, "
                "red, nir08, swir16, swir22, lwir11); give them as product.bands.<name>."
            )
    else:
        if product.metadata is not None:
            metadata = read_landsat_metadata(resolve_path(recipe, product.metadata))
            _same_scene(metadata, product, acquired)
        sensor = product.sensor or _sensor_of(metadata)
        files = _band_files(recipe, product, metadata, sensor)
    facts: dict = {
        "kind": product.kind,
        "sun_elevation_deg": None if metadata is None else metadata.sun_elevation,
        "metadata": None if metadata is None else str(metadata.path),
        "stac_item": None if product.stac_item is None else str(item),
        "sensor": sensor,
        "bands": {name: str(path) for name, path in files.items()},
        "albedo": _ALBEDO_WEIGHTS.get(sensor, "Liang (2001) TM/ETM+ weights on the item's bands"),
    }
    paths, specs = {}, {}
    for name, path in files.items():
        if name == "pixel_qa":
            continue
        kind = "temperature" if name == "thermal" else "reflectance"
        if name in item_scaling and getattr(product, f"{kind}_scale") is None:
            scale, offset, source = item_scaling[name]
        else:
            scale, offset, source = _scaling(product, metadata, sensor, name, kind)
        facts[f"{name}_scaling"] = {"scale": scale, "offset": offset, "source": source}
        role = "surface_temperature" if name == "thermal" else name
        paths[role] = path
        specs[role] = InputSpec(path=str(path), scale=scale, offset=offset, nodata=0.0)
    mask_bits: tuple[int, ...] = ()
    if product.mask_clouds and "pixel_qa" in files:
        paths["cloud_mask"] = files["pixel_qa"]
        mask_bits = CLOUD_BITS
        facts["cloud_mask_bits"] = list(CLOUD_BITS)
    return ProductInputs(paths=paths, specs=specs, mask_bits=mask_bits, facts=facts)


def _same_scene(
    metadata: LandsatMetadata, product: ProductSettings, acquired: datetime | None
) -> None:
    """Refuse metadata of another day than the scene's, or of another sensor than the recipe's."""
    stated = metadata.acquisition_date
    if acquired is not None and stated is not None and abs((acquired.date() - stated).days) > 1:
        raise InputValueError(
            f"product metadata {metadata.path} is of {stated}, but the scene is acquired "
            f"{acquired.date()}: the metadata of another scene? Check product.metadata and "
            "acquired_utc."
        )
    sensor = (metadata.sensor or "").replace("+", "")
    if product.sensor is not None and sensor and sensor != product.sensor:
        raise InputValueError(
            f"product metadata {metadata.path} is of sensor {sensor}, but product.sensor = "
            f"{product.sensor!r}; remove product.sensor or check the metadata."
        )


def _sensor_of(metadata: LandsatMetadata | None) -> str:
    sensor = None if metadata is None else (metadata.sensor or "").replace("+", "")
    if sensor not in SENSOR_BANDS:
        where = "" if metadata is None else f" ({metadata.path} says {metadata.sensor!r})"
        raise InputValueError(
            f"product sensor{where} is not one of {sorted(SENSOR_BANDS)}; set product.sensor."
        )
    return sensor


def _band_files(
    recipe: Recipe, product: ProductSettings, metadata: LandsatMetadata | None, sensor: str
) -> dict[str, Path | str]:
    """Each band's file: the recipe's, else the metadata's file name beside the metadata."""
    files: dict[str, Path | str] = {}
    for name in (*SENSOR_BANDS[sensor], "pixel_qa"):
        if name in product.bands:
            files[name] = resolve_raster_path(recipe, product.bands[name])
            continue
        if metadata is None:
            continue
        if name == "pixel_qa":
            stated = metadata.qa_files.get("QUALITY_L1_PIXEL")
        else:
            band = metadata.bands.get(SENSOR_BANDS[sensor][name])
            stated = None if band is None else band.file_name
        if stated is None:
            continue
        files[name] = Path(metadata.path).parent / stated
    missing = [n for n in SENSOR_BANDS[sensor] if n not in files]
    if missing:
        raise InputValueError(
            f"product bands {missing} are neither in the metadata nor in product.bands; "
            'give them as product.bands.<name> = "file.tif".'
        )
    for name, path in files.items():
        if isinstance(path, Path) and not path.is_file():
            raise InputRasterError(
                f"product {name} band {path} does not exist; check product.metadata's folder "
                f"or give product.bands.{name}."
            )
    return files


def _scaling(
    product: ProductSettings,
    metadata: LandsatMetadata | None,
    sensor: str,
    name: str,
    kind: str,
) -> tuple[float, float, str]:
    """Scale and offset of a band, and where they came from: the recipe, the metadata, or the
    product's published defaults."""
    given = (getattr(product, f"{kind}_scale"), getattr(product, f"{kind}_offset"))
    if given[0] is not None and given[1] is not None:
        return given[0], given[1], f"recipe product.{kind}_scale/offset"
    if metadata is not None:
        band = metadata.bands.get(SENSOR_BANDS[sensor][name])
        if band is not None and band.l2_scale is not None and band.l2_offset is not None:
            return band.l2_scale, band.l2_offset, f"metadata {metadata.path}"
    scale, offset = LEVEL2_DEFAULTS[kind]
    return scale, offset, "Collection 2 Level-2 default (product guide, from memory)"


#: STAC band common names (eo:bands / STAC 1.1 bands) -> the product band names used here.
STAC_COMMON_NAMES = {
    "blue": "blue",
    "red": "red",
    "nir": "nir",
    "nir08": "nir",
    "swir16": "swir1",
    "swir22": "swir2",
    "lwir": "thermal",
    "lwir11": "thermal",
}
_STAC_INSTRUMENTS = {"oli": "OLI_TIRS", "tirs": "OLI_TIRS", "etm+": "ETM", "etm": "ETM", "tm": "TM"}


def stac_item_bands(path: Path) -> tuple[str | None, dict[str, Path | str], dict]:
    """The sensor, band files and band scaling of a local STAC Item of a Level-2 product.

    Bands are found by their common name (``eo:bands`` of STAC 1.0, ``bands`` with
    ``eo:common_name`` of STAC 1.1); the thermal band by ``lwir11``/``lwir``, the pixel QA band
    by the asset key ``qa_pixel``. Scale and offset come from ``raster:bands`` (STAC 1.0) or
    the band objects (STAC 1.1). Relative hrefs are relative to the item file.
    """
    import json

    try:
        item = json.loads(Path(path).read_text())
    except (OSError, ValueError) as err:
        raise InputRasterError(f"STAC item {path} cannot be read as JSON ({err}).") from None
    if item.get("type") != "Feature" or "assets" not in item:
        raise InputValueError(f"{path} is not a STAC Item (no Feature with assets).")
    files: dict[str, Path | str] = {}
    scaling: dict[str, tuple[float, float, str]] = {}
    for key, asset in item["assets"].items():
        href = asset.get("href", "")
        target = href if "://" in href else Path(path).parent / href
        if key == "qa_pixel":
            files["pixel_qa"] = target
            continue
        bands = asset.get("bands") or asset.get("eo:bands") or []
        if len(bands) != 1:
            continue
        common = bands[0].get("eo:common_name") or bands[0].get("common_name")
        name = STAC_COMMON_NAMES.get(common)
        if name is None:
            continue
        files[name] = target
        raster = (asset.get("raster:bands") or [bands[0]])[0]
        if "scale" in raster and "offset" in raster:
            scaling[name] = (float(raster["scale"]), float(raster["offset"]), f"STAC item {path}")
    instruments = [str(i).lower() for i in item.get("properties", {}).get("instruments", [])]
    sensor = next((_STAC_INSTRUMENTS[i] for i in instruments if i in _STAC_INSTRUMENTS), None)
    return sensor, files, scaling
