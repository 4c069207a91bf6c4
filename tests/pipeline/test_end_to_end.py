"""The demo recipe end to end: reopen the written GeoTIFFs and check them."""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest
import rasterio

from rasterbudget.catalog.qa import QA
from rasterbudget.catalog.variables import FLUX_OUTPUTS

SCENES = ("kessendry_20260614", "kessendry_20260823")
EXPECTED_FILES = [f"{n}.tif" for n in FLUX_OUTPUTS] + [
    "qa_flags.tif",
    "tiles.csv",
    "tiles.geojson",
    "classes.csv",
    "quicklook.png",
    "manifest.json",
    "reference_et_fraction.tif",  # the demo has humidity and wind at overpass
]


def read(path):
    with rasterio.open(path) as src:
        return src.read(1, masked=False), src.profile, src.tags(1), src.descriptions


@pytest.mark.parametrize("scene", SCENES)
def test_every_output_is_written_with_georeferencing_and_units(demo_run, scene):
    folder = demo_run / scene
    names = sorted(p.name for p in folder.iterdir())
    assert names == sorted([*EXPECTED_FILES, f"{scene}.stac.json"])  # run.stac is on by default
    with rasterio.open("tiny_rasters/albedo_20260614.tif") as ref:
        crs, transform, shape = ref.crs, ref.transform, ref.shape
    for name, (units, _) in FLUX_OUTPUTS.items():
        data, profile, tags, descriptions = read(folder / f"{name}.tif")
        assert profile["crs"] == crs and profile["transform"] == transform
        assert data.shape == shape and data.dtype == np.float32
        assert profile["tiled"] and profile["compress"] == "zstd"  # the default codec
        assert np.isnan(profile["nodata"])
        assert tags["units"] == units and descriptions == (name,)
    qa, profile, _, _ = read(folder / "qa_flags.tif")
    assert qa.dtype == np.uint16
    assert profile["nodata"] is None  # 0 is "no flag", not "no data": viewers must show it


@pytest.mark.parametrize("scene", SCENES)
def test_energy_closes_on_every_valid_pixel(demo_run, scene):
    folder = demo_run / scene
    rn, g, h, le = (
        read(folder / f"{n}.tif")[0].astype(np.float64)
        for n in ("net_radiation", "ground_heat_flux", "sensible_heat_flux", "latent_heat_flux")
    )
    valid = np.isfinite(rn)
    assert valid.mean() > 0.99
    # float32 storage of each term: closure to a few ulps of ~800 W m-2
    np.testing.assert_allclose(rn[valid], (g + h + le)[valid], atol=1e-3)
    assert np.all(le[valid] >= 0)


@pytest.mark.parametrize("scene", SCENES)
def test_qa_and_ranges_are_consistent(demo_run, scene):
    folder = demo_run / scene
    qa = read(folder / "qa_flags.tif")[0]
    ef = read(folder / "evaporative_fraction.tif")[0]
    et_daily = read(folder / "et_daily.tif")[0]
    rn = read(folder / "net_radiation.tif")[0]
    no_flux = (qa & (QA.INPUT_MISSING | QA.SURFACE_TEMPERATURE_IMPLAUSIBLE)) > 0
    assert no_flux.sum() >= 20  # the demo's planted nodata patch/stripe
    assert np.all(np.isnan(rn[no_flux])) and np.all(np.isfinite(rn[~no_flux]))
    finite = np.isfinite(ef)
    assert np.all((ef[finite] >= 0) & (ef[finite] <= 1))
    assert np.nanmax(et_daily) < 12 and np.nanmin(et_daily) >= 0
    assert ((qa & QA.COLD_ANCHOR) > 0).sum() > 10 and ((qa & QA.HOT_ANCHOR) > 0).sum() > 10
    assert ((qa & QA.ALBEDO_OUT_OF_CLASS_RANGE) > 0).sum() >= 20  # planted outliers


@pytest.mark.parametrize("scene", SCENES)
def test_anchors_satisfy_their_energy_conditions(demo_run, scene):
    """At the anchor populations H must come out as the calibration demanded."""
    folder = demo_run / scene
    manifest = json.loads((folder / "manifest.json").read_text())
    qa = read(folder / "qa_flags.tif")[0]
    ef = read(folder / "evaporative_fraction.tif")[0]
    cold = (qa & QA.COLD_ANCHOR) > 0
    hot = (qa & QA.HOT_ANCHOR) > 0
    # cold anchor: EF = 1 by default; hot anchor: EF = 0. The condition holds for the population's
    # mean values; single pixels differ in Rn - G, and clipping at [0, 1] skews their mean, so
    # the median is the fair check.
    assert np.nanmedian(ef[cold]) == pytest.approx(1.0, abs=0.01)
    assert np.nanmedian(ef[hot]) == pytest.approx(0.0, abs=0.01)
    a = manifest["anchors"]
    assert a["hot"]["surface_temperature"] - a["cold"]["surface_temperature"] > 20
    assert manifest["calibration"]["converged"]
    assert manifest["anchors"]["cold"]["candidates"] > 1000


@pytest.mark.parametrize("scene", SCENES)
def test_tile_summaries_match_the_written_geotiffs(demo_run, scene):
    folder = demo_run / scene
    rows = list(csv.DictReader((folder / "tiles.csv").open()))
    assert len(rows) == 3 * 4  # 300 x 400 pixels in tiles of 100
    arrays = {n: read(folder / f"{n}.tif")[0] for n in FLUX_OUTPUTS}
    for row in rows:
        r0, c0 = int(row["row_off"]), int(row["col_off"])
        r1, c1 = r0 + int(row["height"]), c0 + int(row["width"])
        for name, data in arrays.items():
            values = data[r0:r1, c0:c1]
            values = values[np.isfinite(values)].astype(np.float64)
            if name == "net_radiation":
                assert int(row["valid_pixels"]) == values.size
            expected = {
                "mean": values.mean(),
                "std": values.std(),
                "min": values.min(),
                "p10": np.percentile(values, 10),
                "p50": np.percentile(values, 50),
                "p90": np.percentile(values, 90),
                "max": values.max(),
            }
            for stat, value in expected.items():
                assert float(row[f"{name}_{stat}"]) == pytest.approx(value, rel=1e-5, abs=1e-6)
    features = json.loads((folder / "tiles.geojson").read_text())["features"]
    assert len(features) == len(rows)


@pytest.mark.parametrize("scene", SCENES)
def test_class_summaries_match_the_written_geotiffs(demo_run, scene):
    folder = demo_run / scene
    codes = rasterio.open(
        "tiny_rasters/land_cover.tif"
        if scene.endswith("0614")
        else "tiny_rasters/land_cover_20260823.tif"
    ).read(1)
    rows = {int(r["code"]): r for r in csv.DictReader((folder / "classes.csv").open())}
    le = read(folder / "latent_heat_flux.tif")[0].astype(np.float64)
    h = read(folder / "sensible_heat_flux.tif")[0].astype(np.float64)
    for code, row in rows.items():
        values = le[(codes == code) & np.isfinite(le)]
        assert int(row["valid_pixels"]) == values.size
        assert float(row["latent_heat_flux_mean"]) == pytest.approx(values.mean(), rel=1e-6)
        assert float(row["latent_heat_flux_max"]) == pytest.approx(values.max(), rel=1e-6)
        # percentiles from 0.5 W m-2 bins
        assert float(row["latent_heat_flux_p50"]) == pytest.approx(np.median(values), abs=0.51)
        hv = h[(codes == code) & np.isfinite(h)]
        share = values.sum() / (values.sum() + hv.sum())
        assert float(row["share_to_latent_heat"]) == pytest.approx(share, rel=1e-6)


def test_manifest_says_how_each_number_was_made(demo_run):
    manifest = json.loads((demo_run / SCENES[0] / "manifest.json").read_text())
    for key in (
        "inputs",
        "parameters",
        "anchors",
        "calibration",
        "versions",
        "timings_s",
        "scene_constants",
        "qa_bits",
        "caution",
    ):
        assert key in manifest
    albedo = manifest["inputs"]["albedo"]
    assert len(albedo["sha256"]) == 64 and albedo["bytes"] > 0
    cold = manifest["anchors"]["cold"]
    assert {"x", "y", "row", "col", "surface_temperature", "percentile"} <= set(cold)
    assert manifest["status"] == "complete"


@pytest.mark.parametrize("scene", SCENES)
def test_manifest_qa_counts_match_the_written_qa_raster(demo_run, scene):
    manifest = json.loads((demo_run / scene / "manifest.json").read_text())
    qa = read(demo_run / scene / "qa_flags.tif")[0]
    for bit in QA:
        entry = manifest["qa_bits"][f"bit {bit.bit_length() - 1}"]
        assert entry["pixels"] == int(np.count_nonzero(qa & np.uint16(bit))), bit.name
