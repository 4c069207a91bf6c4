"""A delivered product as a scene's inputs: which file gives which input role, read how.

A Landsat Collection 2 Level-2 product gives surface reflectance bands (from which the input
registry derives albedo and NDVI), the surface-temperature band, and the pixel QA band as the
cloud mask. Scale and offset come from the product's metadata, else from the product's published
defaults, unless the recipe gives them; the manifest records where each fact came from.

A Level-1 product gives digital numbers. Each reflective band's chain (radiance, top-of-
atmosphere reflectance, at-surface reflectance by Tasumi, Allen & Trezza 2008) is linear in the
digital number with scene-wide sun and weather, so it becomes one scale and offset per band;
the thermal band becomes radiance, from which the registry derives surface temperature with the
scene facts computed here (K1, K2, transmittance, path radiances).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path

from ..errors import InputRasterError, InputValueError
from ..io.landsat_metadata import LandsatBand, LandsatMetadata, read_landsat_metadata
from ..recipe import (
    InputSpec,
    ProductSettings,
    Recipe,
    Scene,
    resolve_path,
    resolve_raster_path,
)

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
    derive_facts: dict = field(default_factory=dict)  # scene facts for derived inputs
    mask_buffer: int = 0  # halo read for a derived cloud mask's buffer [pixels]


def product_inputs(recipe: Recipe, scene: Scene) -> ProductInputs:
    """The roles, files and scaling of the scene's product (see the module docstring); the
    scene's time is checked against the metadata's date."""
    if scene.product.kind == "landsat_level1":
        return level1_inputs(recipe, scene)
    return level2_inputs(recipe, scene.product, scene.acquired_utc)


def level2_inputs(
    recipe: Recipe, product: ProductSettings, acquired: datetime | None = None
) -> ProductInputs:
    """The roles, files and scaling of a Level-2 product."""
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
        files = _band_files(recipe, product, metadata, SENSOR_BANDS[sensor])
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


#: Level-1 band keys of the metadata (``io.landsat_metadata``) per common band name and sensor;
#: ETM+ band 6 by gain (low: VCID_1, high: VCID_2).
LEVEL1_BANDS: dict[str, dict[str, str]] = {
    sensor: bands | {"thermal": {"TM": "6", "ETM": "6", "OLI_TIRS": "10"}[sensor]}
    for sensor, bands in SENSOR_BANDS.items()
}
_ETM_THERMAL = {"low": "6_VCID_1", "high": "6_VCID_2"}

#: The TM/ETM+ band whose Tasumi et al. (2008) coefficients each common band takes; on OLI the
#: same coefficients on the matching bands are an adaptation.
_TASUMI_BAND = {"blue": 1, "red": 3, "nir": 4, "swir1": 5, "swir2": 7}

#: Native thermal pixel size per sensor [m] (TM 120, ETM+ 60, TIRS 100; from memory). Level-1
#: files deliver them resampled to 30 m by the provider; other grids are warped here.
THERMAL_PIXEL_M = {"TM": 120, "ETM": 60, "OLI_TIRS": 100}


def level1_inputs(recipe: Recipe, scene: Scene) -> ProductInputs:
    """The roles, files, scaling and scene facts of a Level-1 product of digital numbers."""
    import math

    from ..physics import atmosphere, radiometry, turbulence

    product = scene.product
    metadata = None
    if product.metadata is not None:
        metadata = read_landsat_metadata(resolve_path(recipe, product.metadata))
        _same_scene(metadata, product, scene.acquired_utc)
    sensor = product.sensor or _sensor_of(metadata)
    keys = dict(LEVEL1_BANDS[sensor])
    if sensor == "ETM":
        keys["thermal"] = _ETM_THERMAL[product.thermal_gain]
    files = _band_files(recipe, product, metadata, keys)
    where = f"scene {scene.id}"

    def fact(name: str, recipe_value, metadata_value, metadata_key: str):
        if recipe_value is not None:
            return recipe_value, f"recipe product.{name}"
        if metadata_value is not None:
            return metadata_value, f"metadata {metadata.source_of(metadata_key).describe()}"
        return None, None

    elevation, elevation_source = fact(
        "sun_elevation_deg",
        product.sun_elevation_deg,
        getattr(metadata, "sun_elevation", None),
        "sun_elevation",
    )
    if elevation is None:
        raise InputValueError(
            f"{where}: the product states no sun elevation; give product.sun_elevation_deg "
            "(the metadata's SUN_ELEVATION)."
        )
    distance, distance_source = fact(
        "earth_sun_distance_au",
        product.earth_sun_distance_au,
        getattr(metadata, "earth_sun_distance", None),
        "earth_sun_distance",
    )
    if distance is None:
        distance = radiometry.earth_sun_distance(scene.acquired_utc)
        distance_source = "NREL SPA at acquired_utc"
    overpass = scene.overpass
    if not isinstance(overpass.air_temperature_c, float):
        raise InputValueError(
            f"{where}: a Level-1 product is corrected with the station's overpass weather; give "
            "overpass.air_temperature_c as a number (gridded weather is read per pixel later)."
        )
    air_temperature = overpass.air_temperature_c + 273.15  # [K]
    pressure = float(turbulence.air_pressure(overpass.station_elevation_m))  # [kPa]
    water_mm, water_source = product.atmosphere.precipitable_water_mm, "recipe"
    if water_mm is None:
        if not isinstance(overpass.relative_humidity_pct, float):
            raise InputValueError(
                f"{where}: the Level-1 atmospheric correction needs the water vapour; give "
                "overpass.relative_humidity_pct (a number) or "
                "product.atmosphere.precipitable_water_mm."
            )
        vapour = turbulence.vapour_pressure_from_relative_humidity(
            air_temperature, overpass.relative_humidity_pct
        )
        water_mm = atmosphere.precipitable_water(vapour, pressure)
        water_source = "Garrison & Adler (1990) from the overpass humidity and station pressure"
    clearness = product.atmosphere.clearness
    cos_zenith = math.sin(math.radians(elevation))
    facts: dict = {
        "kind": product.kind,
        "metadata": None if metadata is None else str(metadata.path),
        "sensor": sensor,
        "sun_elevation_deg": elevation,
        "sun_elevation_source": elevation_source,
        "earth_sun_distance_au": distance,
        "earth_sun_distance_source": distance_source,
        "bands": {name: str(path) for name, path in files.items()},
        "albedo": _ALBEDO_WEIGHTS[sensor].replace("OLI bands", "OLI at-surface bands"),
        "at_surface_reflectance": (
            "Tasumi, Allen & Trezza (2008), coefficients of TM/ETM+ bands 1, 3, 4, 5, 7"
            + (" on OLI bands 2, 4, 5, 6, 7: an adaptation" if sensor == "OLI_TIRS" else "")
            + f"; pressure {pressure:.2f} kPa at the station, precipitable water "
            f"{water_mm:.1f} mm ({water_source}), clearness {clearness}"
        ),
    }
    paths, specs = {}, {}
    for name, key in keys.items():
        band = _band_facts(metadata, key)
        given = product.calibration.get(name)
        mult, add, rescaling_source = _radiance_rescaling(given, band, name, where, metadata)
        if name == "thermal":
            paths["thermal_radiance"] = files[name]
            specs["thermal_radiance"] = InputSpec(
                path=str(files[name]), scale=mult, offset=add, nodata=0.0
            )
            facts["thermal_radiance_scaling"] = {
                "scale": mult,
                "offset": add,
                "source": rescaling_source,
            }
            continue
        sun_term = math.pi * distance**2 / cos_zenith
        if given is not None and given.solar_irradiance is not None:
            esun = given.solar_irradiance
            toa = (sun_term * mult / esun, sun_term * add / esun)
            toa_source = f"{rescaling_source}; ESUN recipe product.calibration.{name}"
        elif band is not None and band.reflectance_mult is not None and given is None:
            # the metadata's reflectance rescaling is before division by the sine of the sun
            toa = (
                band.reflectance_mult / cos_zenith,
                band.reflectance_add / cos_zenith,
            )
            toa_source = f"metadata {metadata.path} REFLECTANCE_MULT/ADD, sun elevation"
        else:
            esun = _esun(sensor, metadata, key, where, name)
            toa = (sun_term * mult / esun, sun_term * add / esun)
            toa_source = f"{rescaling_source}; ESUN {esun} (Chander et al. 2009, from memory)"
        coefficients = atmosphere.TASUMI_2008[_TASUMI_BAND[name]]
        tau_in = atmosphere.band_transmittance(
            coefficients, pressure, water_mm, cos_zenith, clearness
        )
        tau_out = atmosphere.band_transmittance(coefficients, pressure, water_mm, 1.0, clearness)
        path_rho = atmosphere.path_reflectance(coefficients, tau_in)
        scale = toa[0] / (tau_in * tau_out)
        offset = (toa[1] - path_rho) / (tau_in * tau_out)
        paths[name] = files[name]
        specs[name] = InputSpec(path=str(files[name]), scale=scale, offset=offset, nodata=0.0)
        facts[f"{name}_scaling"] = {
            "scale": scale,
            "offset": offset,
            "source": f"{toa_source}; at surface: transmittance in {tau_in:.4f}, out "
            f"{tau_out:.4f}, path reflectance {path_rho:.4f}",
        }
    k1, k2, k_source = _thermal_constants(sensor, metadata, keys["thermal"], product, where)
    given_atmosphere = product.atmosphere
    transmittance = given_atmosphere.transmittance
    tau_source = "recipe product.atmosphere.transmittance"
    if transmittance is None:
        transmittance = atmosphere.thermal_transmittance(water_mm / 10.0, air_temperature)
        tau_source = f"Qin et al. (2001) from {water_mm:.1f} mm of water vapour" + (
            " (fitted for TM band 6; on TIRS an approximation)" if sensor == "OLI_TIRS" else ""
        )
    mean_temperature = atmosphere.effective_atmospheric_temperature(
        air_temperature, given_atmosphere.profile
    )
    path_radiance = atmosphere.thermal_path_radiance(transmittance, mean_temperature, k1, k2)
    upwelling = given_atmosphere.upwelling_radiance
    downwelling = given_atmosphere.downwelling_radiance
    derive = {
        "thermal_k1": k1,
        "thermal_k2": k2,
        "thermal_transmittance": transmittance,
        "upwelling_radiance": path_radiance if upwelling is None else upwelling,
        "downwelling_radiance": path_radiance if downwelling is None else downwelling,
    }
    facts["thermal"] = {
        "band": keys["thermal"],
        "gain": product.thermal_gain if sensor == "ETM" else None,
        "gain_why": (
            "ETM+ band 6 low gain (6_VCID_1) by default: its range reaches about 350 K where "
            "high gain saturates near 320 K, and hot anchors are the hottest pixels"
            if sensor == "ETM"
            else None
        ),
        "native_pixel_m": THERMAL_PIXEL_M[sensor],
        "resampling": "thermal pixels coarser than the grid are warped to it bilinearly when "
        "the band file is on another grid; files on the grid keep the provider's resampling",
        "k1": k1,
        "k2": k2,
        "k_source": k_source,
        "transmittance": transmittance,
        "transmittance_source": tau_source,
        "upwelling_radiance": derive["upwelling_radiance"],
        "downwelling_radiance": derive["downwelling_radiance"],
        "path_radiance_source": (
            f"Qin et al. (2001): (1 - tau) B(Ta), Ta {mean_temperature:.2f} K "
            f"({given_atmosphere.profile})"
            if upwelling is None or downwelling is None
            else "recipe product.atmosphere"
        ),
        "emissivity": "band emissivity from NDVI (Sobrino et al. 2004), 0.99 where NDVI < 0",
    }
    mask_bits: tuple[int, ...] = ()
    buffer = 0
    if product.mask_clouds:
        from ..catalog.surfaces import (
            BUFFER_BIT,
            BUFFER_HALO,
            BUFFER_PIXELS,
            CLOUD_BIT,
            SHADOW_BIT,
        )

        if "pixel_qa" in files:
            paths["cloud_mask"] = files["pixel_qa"]
            mask_bits = CLOUD_BITS
            facts["cloud_mask"] = f"pixel QA bits {list(CLOUD_BITS)}"
        else:  # the registry derives a screen from the bands
            derive["screen_air_temperature"] = air_temperature
            mask_bits = (BUFFER_BIT, CLOUD_BIT, SHADOW_BIT)
            buffer = BUFFER_HALO
            facts["cloud_mask"] = (
                "screen of bright-cold (cloud) and dark (shadow) pixels with a "
                f"{BUFFER_PIXELS}-pixel buffer, catalog.surfaces (common practice)"
            )
    return ProductInputs(
        paths=paths,
        specs=specs,
        mask_bits=mask_bits,
        facts=facts,
        derive_facts=derive,
        mask_buffer=buffer,
    )


def _band_facts(metadata: LandsatMetadata | None, key: str) -> LandsatBand | None:
    return None if metadata is None else metadata.bands.get(key)


def _radiance_rescaling(given, band, name: str, where: str, metadata) -> tuple[float, float, str]:
    """A band's DN-to-radiance rescaling and its source: the recipe's, else the metadata's."""
    if given is not None:
        if given.radiance_scale is not None and given.radiance_offset is not None:
            return given.radiance_scale, given.radiance_offset, f"recipe product.calibration.{name}"
        limits = (given.lmin, given.lmax, given.qcalmin, given.qcalmax)
        if None not in limits and given.qcalmax != given.qcalmin:
            mult = (given.lmax - given.lmin) / (given.qcalmax - given.qcalmin)
            return (
                mult,
                given.lmin - mult * given.qcalmin,
                f"recipe product.calibration.{name} LMIN/LMAX/QCALMIN/QCALMAX",
            )
    if band is not None:
        stated = band.radiance_rescaling()
        if stated is not None:
            mult, add, how = stated
            return mult, add, f"metadata {metadata.path} ({how})"
    raise InputValueError(
        f"{where}: no radiance rescaling for the {name} band; give "
        f"product.calibration.{name}.radiance_scale and radiance_offset (or lmin, lmax, "
        "qcalmin, qcalmax)."
    )


def _esun(sensor: str, metadata, key: str, where: str, name: str) -> float:
    from ..physics.radiometry import ESUN

    if sensor == "ETM":
        table = ESUN["ETM+"]
    elif sensor == "TM":
        table = ESUN["TM4" if getattr(metadata, "spacecraft", "") == "LANDSAT_4" else "TM5"]
    else:
        table = {}
    if not key.isdigit() or int(key) not in table:
        raise InputValueError(
            f"{where}: no solar irradiance (ESUN) for the {sensor} {name} band and the metadata "
            f"give no REFLECTANCE_MULT/ADD; give product.calibration.{name}.solar_irradiance."
        )
    return table[int(key)]


def _thermal_constants(sensor, metadata, key, product, where) -> tuple[float, float, str]:
    from ..physics.radiometry import THERMAL_CONSTANTS

    given = product.calibration.get("thermal")
    if given is not None and given.k1 is not None and given.k2 is not None:
        return given.k1, given.k2, "recipe product.calibration.thermal"
    band = _band_facts(metadata, key)
    if band is not None and band.k1 is not None and band.k2 is not None:
        return band.k1, band.k2, f"metadata {metadata.path}"
    if sensor == "ETM":
        pair = THERMAL_CONSTANTS["ETM+"][6]
    elif sensor == "TM":
        spacecraft = getattr(metadata, "spacecraft", "")
        pair = THERMAL_CONSTANTS["TM4" if spacecraft == "LANDSAT_4" else "TM5"][6]
    else:
        pair = THERMAL_CONSTANTS["TIRS"][int(key)]
    return pair.k1, pair.k2, "Chander et al. (2009) table (from memory)"


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
    recipe: Recipe,
    product: ProductSettings,
    metadata: LandsatMetadata | None,
    keys: dict[str, str],
) -> dict[str, Path | str]:
    """Each band's file: the recipe's, else the metadata's file name beside the metadata."""
    files: dict[str, Path | str] = {}
    for name in (*keys, "pixel_qa"):
        if name in product.bands:
            files[name] = resolve_raster_path(recipe, product.bands[name])
            continue
        if metadata is None:
            continue
        if name == "pixel_qa":
            stated = metadata.qa_files.get("QUALITY_L1_PIXEL")
        else:
            band = metadata.bands.get(keys[name])
            stated = None if band is None else band.file_name
        if stated is None:
            continue
        files[name] = Path(metadata.path).parent / stated
    missing = [n for n in keys if n not in files]
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
