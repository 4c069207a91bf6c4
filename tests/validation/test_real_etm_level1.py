"""The REAL Landsat 7 ETM+ subset of ../shared/real/ (path 15 row 32, 20 July 2002) run from its
digital numbers through the Level-1 path by the shipped workflow, with no hand-made input file:
no land-cover map, no metadata file of the provider, no acquisition time (solved from the sun
angles). The weather in the workflow is assumed (see its header), so the fluxes are checked only
for their physics; the derived surface state is checked against published ranges.
"""

from __future__ import annotations

import json
import math
import shutil
from pathlib import Path

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner

from rasterbudget.catalog.classes import load_class_table
from rasterbudget.catalog.inputs import derive_inputs
from rasterbudget.catalog.qa import QA
from rasterbudget.cli import main
from rasterbudget.physics import atmosphere, radiometry, turbulence
from rasterbudget.recipe import load_recipe
from rasterbudget.scene.inputs import scene_files

ROOT = Path(__file__).resolve().parents[2]
WORKFLOW = ROOT / "workflows" / "real_etm_level1.toml"
REAL = ROOT.parent / "shared" / "real" / "landsat7_etm_p015r032_20020720"
SCENE = "etm_p015r032_20020720"

pytestmark = pytest.mark.skipif(not REAL.is_dir(), reason="../shared/real is not beside the repo")


@pytest.fixture(scope="module")
def real_run(tmp_path_factory):
    work = tmp_path_factory.mktemp("real")
    # the workflow's paths are relative to workflows/: keep it there, send outputs elsewhere
    result = CliRunner().invoke(
        main, ["run", str(WORKFLOW), "--out", str(work / "out"), "--components", "--quiet"]
    )
    assert result.exit_code == 0, result.output
    folder = work / "out" / SCENE
    rasters = {}
    for name in (
        "albedo",
        "surface_temperature",
        "surface_class",
        "et_daily",
        "qa_flags",
        "shortwave_in",
    ):
        with rasterio.open(folder / f"{name}.tif") as src:
            rasters[name] = src.read(1).astype(np.float64)
    manifest = json.loads((folder / "manifest.json").read_text())
    yield rasters, manifest
    shutil.rmtree(work, ignore_errors=True)


def _class_mask(rasters, name):
    code = next(c.code for c in load_class_table().classes if c.name == name)
    clear = (rasters["qa_flags"].astype(int) & QA.MASKED) == 0
    return (rasters["surface_class"] == code) & clear & np.isfinite(rasters["et_daily"])


def test_the_time_is_solved_from_the_sun_angles_near_the_paths_usual_overpass(real_run):
    _, manifest = real_run
    params = manifest["parameters"]
    assert params["acquired_from"].startswith("solved from the sun elevation 61.4")
    # a Landsat 7 overpass of WRS-2 path 15 is around 15:30 UTC (metadata.json, typical note)
    hour = int(params["acquired_utc"][11:13]) + int(params["acquired_utc"][14:16]) / 60
    assert 15.25 < hour < 15.75


def test_the_manifest_says_where_every_calibration_fact_came_from(real_run):
    _, manifest = real_run
    product = manifest["scene_facts"]["product"]
    assert product["kind"] == "landsat_level1"
    assert product["sun_elevation_source"] == "recipe product.sun_elevation_deg"
    assert product["earth_sun_distance_source"] == "NREL SPA at acquired_utc"
    assert "ESUN 1533.0" in product["red_scaling"]["source"]
    assert product["thermal"]["band"] == "6_VCID_1" and product["thermal"]["gain"] == "low"
    assert product["thermal"]["native_pixel_m"] == 60
    assert "Qin et al. (2001)" in product["thermal"]["transmittance_source"]
    assert "common practice" in product["cloud_mask"]


def test_clouds_and_their_shadows_are_screened(real_run):
    rasters, _ = real_run
    masked = (rasters["qa_flags"].astype(int) & QA.MASKED) != 0
    # small cumulus and their shadows (visible in the data, metadata.json), with their 3-pixel
    # buffers: measured 12.7 % of the subset (5.1 % without the buffer)
    assert 0.05 < masked.mean() < 0.15
    # what stays is not cloud edge: nothing colder than 285 K is left (measured 285.7 K; the
    # per-pixel rules alone left 295 pixels below 285 K, down to 276 K)
    assert np.nanmin(rasters["surface_temperature"][~masked]) > 285.0


def test_results_do_not_depend_on_the_chunk_size(real_run, tmp_path):
    """The buffer of the derived cloud mask crosses block edges through the blocks' halo."""
    rasters, _ = real_run
    out = tmp_path / "out"
    args = ["run", str(WORKFLOW), "--out", str(out), "--chunk-size", "64", "--quiet"]
    result = CliRunner().invoke(main, args)
    assert result.exit_code == 0, result.output
    for name in ("qa_flags", "et_daily"):
        with rasterio.open(out / SCENE / f"{name}.tif") as src:
            np.testing.assert_array_equal(src.read(1).astype(np.float64), rasters[name])


def test_derived_surface_state_falls_in_published_ranges(real_run):
    """Oke (1987) Table 1.1 (from memory): deciduous forest albedo 0.15-0.20, conifers
    0.05-0.15, crops 0.18-0.25, soils 0.05-0.40. A transpiring canopy runs near or below the
    air temperature, bare ground well above it (common practice)."""
    rasters, _ = real_run
    air = 273.15 + 29.0  # the workflow's assumed overpass air temperature
    dense = _class_mask(rasters, "vegetation_dense")
    bare = _class_mask(rasters, "bare_soil")
    assert dense.sum() > 30000 and bare.sum() > 1000
    albedo_dense = rasters["albedo"][dense].mean()
    ts_dense = rasters["surface_temperature"][dense].mean()
    ts_bare = rasters["surface_temperature"][bare].mean()
    assert 0.10 < albedo_dense < 0.20  # measured 0.129
    assert 0.05 < rasters["albedo"][bare].mean() < 0.40  # measured 0.153
    assert air - 8.0 < ts_dense < air + 1.0  # measured 297.2 K against 302.2 K of air
    assert ts_bare > ts_dense + 5.0  # measured 307.9 K
    et_dense = rasters["et_daily"][dense].mean()
    assert 2.0 < et_dense < 8.0  # July in a humid temperate climate (assumed weather)


def test_the_folded_scaling_equals_the_radiometric_chain_step_by_step():
    """The per-band scale and offset the product path folds equal the chain of radiometric
    functions applied one by one to the real digital numbers (radiance, ESUN reflectance,
    Tasumi correction), and NDVI and albedo derived in the registry agree with it."""
    recipe = load_recipe(WORKFLOW)
    scene = recipe.scene[0]
    files = scene_files(recipe, scene, load_class_table())
    data = {}
    for role, path in files.paths.items():
        with rasterio.open(path) as src:
            raw = src.read(1).astype(np.float64)
        spec = files.specs.get(role)
        data[role] = raw if spec is None or spec.scale is None else raw * spec.scale + spec.offset
    data = derive_inputs(data, files.derive_facts)
    sine = math.sin(math.radians(61.4))
    distance = radiometry.earth_sun_distance(scene.acquired_utc)
    pressure = turbulence.air_pressure(300.0)
    vapour = turbulence.vapour_pressure_from_relative_humidity(273.15 + 29.0, 55.0)
    water = atmosphere.precipitable_water(vapour, pressure)
    by_hand = {}
    for name, band, gain, bias in (("red", 3, 0.61922, -5.0), ("nir", 4, 0.63725, -5.1)):
        with rasterio.open(REAL / f"L7ETM_p015r032_20020720_B{band}.tif") as src:
            dn = src.read(1).astype(np.float64)
        radiance = radiometry.radiance_from_dn(dn, gain, bias)
        toa = radiometry.toa_reflectance_from_radiance(
            radiance, radiometry.ESUN["ETM+"][band], distance, math.radians(90.0 - 61.4)
        )
        by_hand[name] = atmosphere.at_surface_reflectance(
            toa, atmosphere.TASUMI_2008[band], pressure, water, sine
        )
        np.testing.assert_allclose(data[name], by_hand[name], rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(
        data["ndvi"], radiometry.ndvi(by_hand["red"], by_hand["nir"]), rtol=1e-9
    )
    # NDVI of the closed canopy (the recognised dense class): 0.7-0.9 for full green cover
    # (common practice)
    dense = data["land_cover"] == 11
    assert 0.7 < np.median(data["ndvi"][dense]) < 0.9


def test_the_anchors_stand_on_lit_homogeneous_ground_of_the_right_kind(real_run):
    """Without a land-cover map: the cold anchor's population receives the shortwave of the
    scene's vegetation (within 3 %, not a shaded slope), the hot anchor's lies on sparse, dry,
    well-lit ground."""
    rasters, manifest = real_run
    qa = rasters["qa_flags"].astype(int)
    cold, hot = (qa & QA.COLD_ANCHOR) != 0, (qa & QA.HOT_ANCHOR) != 0
    assert cold.sum() >= 20 and hot.sum() >= 1
    vegetated = _class_mask(rasters, "vegetation_dense") | _class_mask(rasters, "vegetation_sparse")
    shortwave = rasters["shortwave_in"]
    ratio = shortwave[cold].mean() / shortwave[vegetated].mean()
    assert abs(ratio - 1.0) < 0.03  # measured +0.4 %
    assert abs(shortwave[hot].mean() / shortwave[vegetated].mean() - 1.0) < 0.05  # +2.6 %
    codes = {c.name: c.code for c in load_class_table().classes}
    assert set(np.unique(rasters["surface_class"][hot])) <= {
        codes["bare_soil"],
        codes["vegetation_sparse"],
    }
    assert set(np.unique(rasters["surface_class"][cold])) == {codes["vegetation_dense"]}
    # the hot anchor is the hot end of the scene: more than 15 K above the canopy mean
    dense = _class_mask(rasters, "vegetation_dense")
    ts = rasters["surface_temperature"]
    assert ts[hot].mean() > ts[dense].mean() + 15.0
    screens = manifest["anchor_screens"]
    for role in ("cold", "hot"):  # every screen removed some candidates on this scene
        counts = list(screens[role].values())
        assert counts == sorted(counts, reverse=True)
    assert screens["cold"]["illumination"] < screens["cold"]["elevation"]
    assert screens["hot"]["homogeneity"] < screens["hot"]["illumination"]
