"""Small invented scenes for the anchor-placement tests (``test_anchor_scenes.py``).

Each scene is four GeoTIFFs (albedo, surface temperature in K, NDVI, elevation in m) on a UTM
zone 13 N grid of 30 m pixels near 40 N, 105.2 W, with no land-cover raster: the surfaces are
recognised from NDVI and albedo. A recipe with the weather of a clear summer day is written
beside them and run through the command line; the helpers read back the anchor populations
(QA bits 7 and 8), the manifest and any output raster.
"""

from __future__ import annotations

import datetime as dt
import json
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import rasterio
from click.testing import CliRunner, Result
from rasterio.transform import from_origin

from rasterbudget.catalog.qa import QA
from rasterbudget.cli import main
from tests.conftest import write_toml

CRS = "EPSG:32613"
LEFT, TOP = 480_000.0, 4_430_000.0  # about 40.02 N, 105.23 W
PIXEL = 30.0  # [m]
STATION_ELEVATION = 1560.0  # [m]
SCENE_ID = "scene"

#: A clear, dry summer day (as the demo's first scene): 14 June, 17:52 UTC is about 10:50 local
#: solar time at 105.2 W, the sun about 65 degrees high in the south-east.
ACQUIRED = dt.datetime(2026, 6, 14, 17, 52, tzinfo=dt.UTC)
OVERPASS = {
    "station_elevation_m": STATION_ELEVATION,
    "wind_height_m": 2.0,
    "air_temperature_c": 26.5,
    "relative_humidity_pct": 28.0,
    "wind_speed_m_s": 3.4,
}
DAILY = {
    "tmax_c": 31.0,
    "tmin_c": 12.5,
    "rh_max_pct": 62.0,
    "rh_min_pct": 18.0,
    "shortwave_mj_m2": 29.8,
    "wind_speed_m_s": 2.9,
}
#: Air temperature at the station at the overpass [K].
AIR_K = OVERPASS["air_temperature_c"] + 273.15


@dataclass
class Scene:
    """The four input rasters of a scene, each (rows, cols) float."""

    albedo: np.ndarray
    surface_temperature: np.ndarray  # [K]
    ndvi: np.ndarray
    elevation: np.ndarray  # [m]

    @property
    def shape(self) -> tuple[int, int]:
        return self.albedo.shape


@dataclass
class Surface:
    """Mean state of one surface type; ``noise`` gives mild pixel-to-pixel scatter (standard
    deviations of NDVI, albedo and Ts) so that nothing is perfectly uniform."""

    ndvi: float
    albedo: float
    ts: float  # [K]
    noise: tuple[float, float, float] = field(default=(0.012, 0.004, 0.25))


#: Typical surfaces of a summer scene (common working values; Ts relative to the 299.65 K air).
FOREST = Surface(0.86, 0.12, AIR_K + 0.8)
IRRIGATED = Surface(0.80, 0.20, AIR_K - 2.5)  # transpiring freely: cooler than the air
PASTURE = Surface(0.62, 0.18, AIR_K + 4.0)
DRY_GRASS = Surface(0.30, 0.22, AIR_K + 15.0)
BARE_SOIL = Surface(0.10, 0.26, AIR_K + 22.0)


def blank(shape: tuple[int, int], elevation: float = STATION_ELEVATION) -> Scene:
    """A scene of the given shape filled with NaN, on flat ground at ``elevation``."""
    nan = np.full(shape, np.nan)
    return Scene(nan.copy(), nan.copy(), nan.copy(), np.full(shape, float(elevation)))


def paint(scene: Scene, where: np.ndarray | tuple, surface: Surface, rng) -> None:
    """Fill ``where`` (a boolean mask or an index) of ``scene`` with ``surface`` plus noise."""
    mask = np.zeros(scene.shape, dtype=bool)
    mask[where] = True
    n = int(mask.sum())
    s_ndvi, s_albedo, s_ts = surface.noise
    scene.ndvi[mask] = surface.ndvi + rng.normal(0.0, s_ndvi, n)
    scene.albedo[mask] = surface.albedo + rng.normal(0.0, s_albedo, n)
    scene.surface_temperature[mask] = surface.ts + rng.normal(0.0, s_ts, n)


def write_raster(path: Path, array: np.ndarray) -> Path:
    """A float32 GeoTIFF on the scene grid (nodata NaN)."""
    rows, cols = array.shape
    with rasterio.open(
        path,
        "w",
        driver="GTiff",
        width=cols,
        height=rows,
        count=1,
        dtype="float32",
        crs=CRS,
        transform=from_origin(LEFT, TOP, PIXEL, PIXEL),
        nodata=np.nan,
    ) as dst:
        dst.write(array.astype(np.float32), 1)
    return path


def recipe(
    folder: Path,
    scene: Scene,
    anchors: dict | None = None,
    overpass: dict | None = None,
    daily: dict | None = None,
    acquired: dt.datetime = ACQUIRED,
) -> Path:
    """Write the scene's rasters and a one-scene recipe into ``folder``; return the recipe."""
    for array in (scene.albedo, scene.surface_temperature, scene.ndvi, scene.elevation):
        assert np.isfinite(array).all(), "every pixel of a test scene must be painted"
    folder.mkdir(parents=True, exist_ok=True)
    inputs = {
        name: str(write_raster(folder / f"{name}.tif", getattr(scene, name)))
        for name in ("albedo", "surface_temperature", "ndvi", "elevation")
    }
    entry = {
        "id": SCENE_ID,
        "acquired_utc": acquired,
        "inputs": inputs,
        "overpass": OVERPASS | (overpass or {}),
        "daily": DAILY | (daily or {}),
    }
    if anchors:
        entry["anchors"] = anchors
    data = {"run": {"chunk_size": 256, "tile_size": 100}, "scene": [entry]}
    return write_toml(data, folder / "recipe.toml")


@dataclass
class Outcome:
    """A finished (or failed) run: the CLI result and the scene's output folder."""

    result: Result
    folder: Path

    @property
    def manifest(self) -> dict:
        return json.loads((self.folder / "manifest.json").read_text())

    def read(self, name: str) -> np.ndarray:
        with rasterio.open(self.folder / f"{name}.tif") as src:
            return src.read(1)

    def populations(self) -> tuple[np.ndarray, np.ndarray]:
        """Boolean maps of the cold and hot anchor populations (QA bits 7 and 8)."""
        qa = self.read("qa_flags")
        return (qa & QA.COLD_ANCHOR) > 0, (qa & QA.HOT_ANCHOR) > 0

    def describe(self) -> str:
        """Where the anchors went and the screens' counts, for assertion messages."""
        m = self.manifest
        anchors = {
            role: {k: m["anchors"][role][k] for k in ("row", "col", "surface_temperature")}
            for role in ("cold", "hot")
        }
        return f"anchors {anchors}; screens {m['anchor_screens']}"


def run(
    folder: Path,
    scene: Scene,
    anchors: dict | None = None,
    components: bool = True,
    **weather,
) -> Outcome:
    """Write the scene and its recipe into ``folder`` and run it through the command line."""
    path = recipe(folder / "inputs", scene, anchors, **weather)
    out = folder / "out"
    args = ["run", str(path), "--out", str(out), "--quiet", "--no-quicklook"]
    if components:
        args.append("--components")
    result = CliRunner().invoke(main, args)
    return Outcome(result, out / SCENE_ID)


def distance_to(mask: np.ndarray) -> np.ndarray:
    """Per pixel, the Chebyshev distance in pixels to the nearest pixel of ``mask``."""
    from scipy.ndimage import distance_transform_cdt

    return distance_transform_cdt(~mask, metric="chessboard")
