"""A delivered product as a scene's inputs: which file gives which input role, read how.

A Landsat Collection 2 Level-2 product gives surface reflectance bands (from which the input
registry derives albedo and NDVI), the surface-temperature band, and the pixel QA band as the
cloud mask. Scale and offset come from the product's metadata, else from the product's published
defaults, unless the recipe gives them; the manifest records where each fact came from.
"""

from __future__ import annotations

from dataclasses import dataclass, field
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


def product_inputs(recipe: Recipe, product: ProductSettings) -> ProductInputs:
    """The roles, files and scaling of a Level-2 product (see the module docstring)."""
    metadata = None
    if product.metadata is not None:
        metadata = read_landsat_metadata(resolve_path(recipe, product.metadata))
    sensor = product.sensor or _sensor_of(metadata)
    files = _band_files(recipe, product, metadata, sensor)
    facts: dict = {
        "kind": product.kind,
        "metadata": None if metadata is None else str(metadata.path),
        "sensor": sensor,
        "bands": {name: str(path) for name, path in files.items()},
        "albedo": _ALBEDO_WEIGHTS[sensor],
    }
    paths, specs = {}, {}
    for name, path in files.items():
        if name == "pixel_qa":
            continue
        kind = "temperature" if name == "thermal" else "reflectance"
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
