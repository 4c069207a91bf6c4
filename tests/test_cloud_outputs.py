"""Cloud-native outputs: COGs, the STAC Item, the Zarr store, and remote-looking input paths."""

from __future__ import annotations

import datetime as dt
import itertools
import json
from pathlib import Path

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner
from rasterio.crs import CRS
from rasterio.warp import transform as warp_transform

from rasterbudget.catalog.classes import load_class_table
from rasterbudget.catalog.variables import FLUX_OUTPUTS, REFERENCE_OUTPUTS
from rasterbudget.cli import main
from rasterbudget.errors import InputRasterError, OutputError
from rasterbudget.io import writers as outputs
from rasterbudget.io.paths import is_remote
from rasterbudget.recipe import parse_recipe, resolve_raster_path
from rasterbudget.scene import blocks
from rasterbudget.scene import run as pipeline
from tests.conftest import demo_recipe_dict, write_toml

SCENES = ("kessendry_20260614", "kessendry_20260823")
SCENE = SCENES[0]
CHUNK = 256  # the demo recipe's chunk_size
FLOATS = {**FLUX_OUTPUTS, **REFERENCE_OUTPUTS}  # the demo writes reference_et_fraction too


def _recipe(tmp_path: Path, scenes: int = 2, **run) -> Path:
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:scenes]
    data["run"].update(run)
    return write_toml(data, tmp_path / "recipe.toml")


@pytest.fixture(scope="module")
def cloud_run(tmp_path_factory) -> Path:
    """The demo with cog, stac and zarr on; returns the output folder."""
    tmp = tmp_path_factory.mktemp("cloud")
    recipe = _recipe(tmp, cog=True, stac=True, zarr=True)
    out = tmp / "out"
    result = CliRunner().invoke(main, ["run", str(recipe), "--out", str(out), "--quiet"])
    assert result.exit_code == 0, result.output
    return out


def _rasters(folder: Path) -> list[Path]:
    return sorted(folder.glob("*.tif"))


# ----------------------------------------------------------------------------- COG


@pytest.mark.parametrize("scene", SCENES)
def test_every_raster_is_a_valid_cog_with_overviews(cloud_run, demo_run, scene):
    folder = cloud_run / scene
    names = [p.name for p in _rasters(folder)]
    assert names == [p.name for p in _rasters(demo_run / scene)]
    assert len(names) == len(FLOATS) + 1
    for path in _rasters(folder):
        with rasterio.open(path) as src, rasterio.open(demo_run / scene / path.name) as plain:
            structure = src.tags(ns="IMAGE_STRUCTURE")
            assert structure.get("LAYOUT") == "COG", path.name
            assert (
                structure["COMPRESSION"] == "ZSTD"
            )  # the default codec, as for the plain GeoTIFFs
            integer = src.dtypes[0] == "uint16"
            assert structure["PREDICTOR"] == ("2" if integer else "3")
            assert src.overviews(1) == [2], path.name  # 300 x 400 with 256-pixel tiles
            assert src.profile["tiled"] and src.block_shapes == [(CHUNK, CHUNK)]
            # same grid, metadata and pixels as the plain tiled GeoTIFF of the default run
            assert (src.crs, src.transform, src.shape) == (plain.crs, plain.transform, plain.shape)
            assert src.descriptions == plain.descriptions
            assert src.tags(1)["units"] == plain.tags(1)["units"]
            assert src.tags()["scene_id"] == scene
            assert src.nodata == plain.nodata or (np.isnan(src.nodata) and np.isnan(plain.nodata))
            np.testing.assert_array_equal(src.read(1), plain.read(1))


def test_overviews_average_fluxes_and_keep_real_qa_values(cloud_run):
    folder = cloud_run / SCENE
    with rasterio.open(folder / "net_radiation.tif") as src:
        full = src.read(1).astype(np.float64)
    with rasterio.open(folder / "net_radiation.tif", overview_level=0) as ovr:
        reduced = ovr.read(1).astype(np.float64)
    blocks = full.reshape(150, 2, 200, 2)
    with np.errstate(invalid="ignore"), pytest.warns(RuntimeWarning, match="Mean of empty"):
        expected = np.nanmean(blocks, axis=(1, 3))
    both = np.isfinite(expected) & np.isfinite(reduced)
    assert both.mean() > 0.95
    np.testing.assert_allclose(reduced[both], expected[both], rtol=1e-5, atol=1e-3)
    assert not np.isfinite(reduced[~np.isfinite(expected)]).any()  # all-NaN blocks stay NaN

    with rasterio.open(folder / "qa_flags.tif") as src:
        qa = src.read(1)
    with rasterio.open(folder / "qa_flags.tif", overview_level=0) as ovr:
        qa_reduced = ovr.read(1)
    quads = qa.reshape(150, 2, 200, 2).transpose(0, 2, 1, 3).reshape(150, 200, 4)
    # nearest: every overview pixel holds the flags of one of its four pixels, never a blend
    assert (quads == qa_reduced[..., None]).any(axis=-1).all()
    assert len(np.unique(qa_reduced)) > 1


def test_cog_is_off_by_default(demo_run):
    with rasterio.open(demo_run / SCENE / "et_daily.tif") as src:
        assert src.tags(ns="IMAGE_STRUCTURE").get("LAYOUT") != "COG"
        assert src.overviews(1) == []


def test_failed_cog_conversion_leaves_nothing_under_a_final_name(tmp_path, monkeypatch):
    original = outputs.write_cog
    calls = {"n": 0}

    def failing(*args):
        calls["n"] += 1
        if calls["n"] == 3:
            raise OSError("no space left on device (simulated)")
        return original(*args)

    monkeypatch.setattr(outputs, "write_cog", failing)
    recipe = parse_recipe(demo_recipe_dict())
    settings = pipeline.RunOptions(
        out_dir=tmp_path / "out", chunk_size=CHUNK, tile_size=100, cog=True, zarr=True
    )
    with pytest.raises(OutputError, match="no space left"):
        pipeline.run_scene(recipe, recipe.scene[0], load_class_table(), settings)
    assert calls["n"] >= 3
    assert sorted(p.name for p in (tmp_path / "out" / SCENE).iterdir()) == []


# ----------------------------------------------------------------------------- STAC


def _core_schema_errors(item: dict, kind: str = "item") -> list[str]:
    """Errors of the Item against STAC's core Item schema bundled with pystac (no network)."""
    from jsonschema import Draft7Validator
    from pystac.validation.local_validator import get_local_schema_cache
    from referencing import Registry, Resource
    from referencing.jsonschema import DRAFT7

    cache = get_local_schema_cache()
    registry = Registry().with_resources(
        (uri, Resource(contents=schema, specification=DRAFT7)) for uri, schema in cache.items()
    )
    schema = cache[
        f"https://schemas.stacspec.org/v{item['stac_version']}/{kind}-spec/json-schema/{kind}.json"
    ]
    validator = Draft7Validator(schema, registry=registry)
    return [e.message for e in validator.iter_errors(item)]


@pytest.mark.parametrize("scene", SCENES)
def test_stac_item_describes_the_scene(cloud_run, scene):
    import pystac
    from pystac.extensions.projection import ProjectionExtension

    folder = cloud_run / scene
    path = folder / f"{scene}.stac.json"
    item = json.loads(path.read_text())
    assert _core_schema_errors(item) == []
    manifest = json.loads((folder / "manifest.json").read_text())
    assert manifest["outputs"][path.name] == path.name
    assert manifest["formats"] == {"cog": True, "stac": True, "zarr": True}

    assert item["type"] == "Feature" and item["id"] == scene
    acquired = dt.datetime.fromisoformat(manifest["parameters"]["acquired_utc"])
    assert dt.datetime.fromisoformat(item["properties"]["datetime"]) == acquired
    assert "links" in item and not any(link["rel"] == "self" for link in item["links"])

    with rasterio.open(folder / "net_radiation.tif") as src:
        crs, transform, shape, bounds = src.crs, src.transform, src.shape, src.bounds
    props = item["properties"]
    assert props["proj:code"] == f"EPSG:{crs.to_epsg()}" == "EPSG:32613"
    assert props["proj:shape"] == list(shape)
    assert props["proj:transform"] == pytest.approx(list(transform)[:6])
    assert props["proj:bbox"] == pytest.approx(list(bounds))
    assert any("projection" in uri for uri in item["stac_extensions"])

    # bbox and outline in WGS84 hold every pixel-corner of the grid, transformed independently
    west, south, east, north = item["bbox"]
    xs = [bounds.left, bounds.right, bounds.left, bounds.right, (bounds.left + bounds.right) / 2]
    ys = [bounds.top, bounds.top, bounds.bottom, bounds.bottom, bounds.bottom]
    lons, lats = warp_transform(crs, "EPSG:4326", xs, ys)
    assert all(west - 1e-9 <= x <= east + 1e-9 for x in lons)
    assert all(south - 1e-9 <= y <= north + 1e-9 for y in lats)
    assert -106 < west < east < -104 and 39 < south < north < 41  # the demo's place
    ring = item["geometry"]["coordinates"][0]
    assert item["geometry"]["type"] == "Polygon" and ring[0] == ring[-1] and len(ring) > 40
    twice_area = sum(x0 * y1 - x1 * y0 for (x0, y0), (x1, y1) in itertools.pairwise(ring))
    assert twice_area > 0  # counter-clockwise, as RFC 7946 asks
    ring_lons, ring_lats = np.array(ring).T
    assert (min(ring_lons), min(ring_lats), max(ring_lons), max(ring_lats)) == pytest.approx(
        (west, south, east, north), abs=1e-6
    )

    assets = item["assets"]
    for tif in _rasters(folder):
        asset = assets[tif.stem]
        assert asset["href"] == f"./{tif.name}"
        assert asset["type"] == "image/tiff; application=geotiff; profile=cloud-optimized"
        if tif.stem == "qa_flags":
            assert asset["roles"] == ["metadata"] and asset["data_type"] == "uint16"
        else:
            assert asset["roles"] == ["data"] and asset["data_type"] == "float32"
            assert asset["unit"] == FLOATS[tif.stem][0] and asset["nodata"] == "nan"
    assert assets["quicklook"]["roles"] == ["overview"]
    assert assets["quicklook"]["type"] == "image/png"
    assert assets["manifest"] == {
        "href": "./manifest.json",
        "type": "application/json",
        "title": assets["manifest"]["title"],
        "roles": ["metadata"],
    }
    assert assets["zarr"]["href"] == "./outputs.zarr" and assets["zarr"]["roles"] == ["data"]
    for asset in assets.values():  # every relative href points at a file of the scene folder
        assert (folder / asset["href"]).exists(), asset["href"]
    assert len(assets) == len(FLOATS) + 1 + 6  # rasters, qa, zarr, tables, quick-look, manifest

    # pystac reads it back, projection extension included
    parsed = pystac.Item.from_dict(item)
    proj = ProjectionExtension.ext(parsed)
    assert proj.code == "EPSG:32613" and proj.shape == list(shape)


def test_stac_item_is_written_by_default_with_plain_geotiff_type(demo_run):
    item = json.loads((demo_run / SCENE / f"{SCENE}.stac.json").read_text())
    assert item["assets"]["et_daily"]["type"] == "image/tiff; application=geotiff"
    assert "zarr" not in item["assets"]
    assert _core_schema_errors(item) == []


def test_stac_can_be_switched_off(tmp_path):
    recipe = _recipe(tmp_path, scenes=1, stac=False)
    out = tmp_path / "out"
    result = CliRunner().invoke(
        main, ["run", str(recipe), "--out", str(out), "--quiet", "--no-quicklook"]
    )
    assert result.exit_code == 0, result.output
    assert not list((out / SCENE).glob("*.stac.json"))


def test_outline_of_a_geographic_grid_is_its_box():
    from rasterio.transform import from_origin

    from rasterbudget.io.cloud import footprint_lonlat
    from rasterbudget.io.grid import Grid

    grid = Grid(CRS.from_epsg(4326), from_origin(10.0, 50.0, 0.01, 0.01), 300, 200)
    bbox, geometry = footprint_lonlat(grid)
    assert bbox == pytest.approx([10.0, 48.0, 13.0, 50.0])
    ring = np.array(geometry["coordinates"][0])
    assert ring[:, 0].min() == pytest.approx(10.0) and ring[:, 1].max() == pytest.approx(50.0)


def test_epsg_less_crs_gives_wkt2():
    from rasterio.transform import from_origin

    from rasterbudget.io.cloud import projection_fields
    from rasterbudget.io.grid import Grid

    crs = CRS.from_proj4("+proj=aea +lat_1=30 +lat_2=45 +lat_0=20 +lon_0=-100 +datum=WGS84")
    fields = projection_fields(Grid(crs, from_origin(0, 0, 30, 30), 10, 10))
    assert fields["code"] is None and "CONVERSION" in fields["wkt2"]
    assert CRS.from_wkt(fields["wkt2"]).to_proj4() == crs.to_proj4()


# ----------------------------------------------------------------------------- Zarr


@pytest.mark.parametrize("scene", SCENES)
def test_zarr_store_holds_the_geotiff_values(cloud_run, scene):
    import zarr

    folder = cloud_run / scene
    group = zarr.open_group(folder / "outputs.zarr", mode="r")
    with rasterio.open(folder / "net_radiation.tif") as src:
        crs, transform, (height, width) = src.crs, src.transform, src.shape
    expected_vars = {*FLOATS, "qa_flags"}
    assert set(group.array_keys()) == expected_vars | {"x", "y", "spatial_ref"}
    for name in sorted(expected_vars):
        array = group[name]
        assert array.shape == (height, width) and array.chunks == (CHUNK, CHUNK)
        assert array.metadata.zarr_format == 2
        assert array.attrs["_ARRAY_DIMENSIONS"] == ["y", "x"]
        assert array.attrs["grid_mapping"] == "spatial_ref"
        with rasterio.open(folder / f"{name}.tif") as src:
            tif = src.read(1)
        assert array.dtype == tif.dtype
        np.testing.assert_array_equal(array[:], tif)
        if name == "qa_flags":
            assert array.attrs["flag_masks"][:3] == [1, 2, 4]
            assert "cold_anchor" in array.attrs["flag_meanings"].split()
        else:
            assert array.attrs["units"] == FLOATS[name][0]
            assert array.attrs["long_name"] == FLOATS[name][1]
    x, y = group["x"][:], group["y"][:]
    np.testing.assert_allclose(x, transform.c + (np.arange(width) + 0.5) * transform.a)
    np.testing.assert_allclose(y, transform.f + (np.arange(height) + 0.5) * transform.e)
    assert group["x"].attrs["units"] == "m"
    assert CRS.from_wkt(group.attrs["crs_wkt"]) == crs
    mapping = group["spatial_ref"].attrs
    assert CRS.from_wkt(mapping["crs_wkt"]) == crs == CRS.from_wkt(mapping["spatial_ref"])
    assert mapping["grid_mapping_name"] == "transverse_mercator"
    assert mapping["longitude_of_central_meridian"] == -105.0  # UTM zone 13
    assert group.attrs["scene_id"] == scene
    assert not list(folder.glob("*.partial"))


def test_zarr_store_opens_in_gdal_with_its_grid(cloud_run):
    store = cloud_run / SCENE / "outputs.zarr"
    assert (store / ".zmetadata").is_file()  # consolidated: one read for a remote reader
    with (
        rasterio.open(f'ZARR:"{store}":/latent_heat_flux') as zarr_band,
        rasterio.open(cloud_run / SCENE / "latent_heat_flux.tif") as tif,
    ):
        assert zarr_band.crs == tif.crs
        assert zarr_band.transform.almost_equals(tif.transform)
        np.testing.assert_array_equal(zarr_band.read(1), tif.read(1))


def test_zarr_store_opens_as_a_labelled_dataset(cloud_run):
    xr = pytest.importorskip("xarray")
    ds = xr.open_zarr(cloud_run / SCENE / "outputs.zarr")
    assert ds["et_daily"].dims == ("y", "x")
    assert ds["et_daily"].attrs["units"] == "mm d-1"
    with rasterio.open(cloud_run / SCENE / "et_daily.tif") as src:
        row, col = 123, 201
        x, y = src.xy(row, col)
        value = src.read(1)[row, col]
    assert float(ds["et_daily"].sel(x=x, y=y, method="nearest")) == pytest.approx(value)


def test_zarr_rerun_replaces_the_store_and_stale_temporaries_go(tmp_path):
    recipe = _recipe(tmp_path, scenes=1, zarr=True)
    out = tmp_path / "out"
    command = ["run", str(recipe), "--out", str(out), "--quiet", "--no-quicklook"]
    assert CliRunner().invoke(main, command).exit_code == 0
    folder = out / SCENE
    stale = folder / "outputs.zarr.partial"
    stale.mkdir()
    (stale / "junk").write_text("left by a crash")
    marker = folder / "outputs.zarr" / "from_the_first_run"
    marker.write_text("")
    result = CliRunner().invoke(main, [*command, "--force"])
    assert result.exit_code == 0, result.output
    assert not stale.exists() and not marker.exists()
    assert not [p for p in folder.iterdir() if p.name.endswith(".partial")]
    import zarr

    assert np.isfinite(zarr.open_group(folder / "outputs.zarr", mode="r")["et_daily"][:]).any()
    # a scene with a zarr store counts as complete: a plain rerun skips it
    result = CliRunner().invoke(main, ["run", str(recipe), "--out", str(out), "--no-quicklook"])
    assert result.exit_code == 0 and "skipped" in result.output


def test_failed_pass_two_leaves_no_zarr_behind(tmp_path, monkeypatch):
    original = blocks.pass2_block
    calls = {"n": 0}

    def failing(*args):
        calls["n"] += 1
        if calls["n"] == 2:
            raise OSError("disk full (simulated)")
        return original(*args)

    monkeypatch.setattr(blocks, "pass2_block", failing)
    recipe = parse_recipe(demo_recipe_dict())
    settings = pipeline.RunOptions(out_dir=tmp_path / "out", chunk_size=64, tile_size=64, zarr=True)
    with pytest.raises(OutputError, match="disk full"):
        pipeline.run_scene(recipe, recipe.scene[0], load_class_table(), settings)
    assert sorted(p.name for p in (tmp_path / "out" / SCENE).iterdir()) == []


def test_missing_zarr_package_is_named_before_any_work(monkeypatch, tmp_path):
    import builtins

    real_import = builtins.__import__

    def no_zarr(name, *args, **kwargs):
        if name == "zarr" or name.startswith("zarr."):
            raise ImportError("No module named 'zarr'")
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_zarr)
    recipe = parse_recipe(demo_recipe_dict())
    settings = pipeline.RunOptions(
        out_dir=tmp_path / "out", chunk_size=CHUNK, tile_size=100, zarr=True
    )
    with pytest.raises(
        Exception, match=r"run\.zarr = true needs the zarr package.*rasterbudget\[cloud\]"
    ):
        pipeline.run_scene(recipe, recipe.scene[0], load_class_table(), settings)
    assert not (tmp_path / "out").exists()


# ----------------------------------------------------------------------------- remote inputs


@pytest.mark.parametrize(
    ("location", "remote"),
    [
        ("https://example.org/scenes/albedo.tif", True),
        ("s3://bucket/albedo.tif", True),
        ("/vsicurl/https://example.org/albedo.tif", True),
        ("/vsizip/archive.zip/albedo.tif", True),
        ("../tiny_rasters/albedo.tif", False),
        ("/data/vsi/albedo.tif", False),
        ("C:/data/albedo.tif", False),
    ],
)
def test_remote_locations_are_recognised(location, remote):
    assert is_remote(location) is remote


def test_remote_locations_are_kept_verbatim_and_local_ones_resolved(tmp_path):
    recipe = parse_recipe(demo_recipe_dict(), path=tmp_path / "recipe.toml")
    url = "/vsicurl/https://example.org/a//b.tif"
    assert resolve_raster_path(recipe, url) == url  # a Path would fold the // of the URL
    assert resolve_raster_path(recipe, "https://example.org/a.tif") == "https://example.org/a.tif"
    assert resolve_raster_path(recipe, "sub/a.tif") == (tmp_path / "sub" / "a.tif").resolve()


@pytest.fixture
def albedo_in_memory():
    """The demo albedo copied to GDAL's in-memory file system: a /vsi path, no network."""
    data = demo_recipe_dict()
    location = "/vsimem/rasterbudget_test/albedo.tif"
    with rasterio.open(data["scene"][0]["inputs"]["albedo"]) as src:
        profile, values = src.profile, src.read(1)
    with rasterio.open(location, "w", **profile) as dst:
        dst.write(values, 1)
    yield location
    from rasterio.shutil import delete

    delete(location)


def test_a_vsi_input_goes_to_gdal_and_runs(tmp_path, albedo_in_memory, demo_run):
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    data["scene"][0]["inputs"]["albedo"] = albedo_in_memory
    recipe = write_toml(data, tmp_path / "recipe.toml")
    out = tmp_path / "out"
    result = CliRunner().invoke(
        main, ["run", str(recipe), "--out", str(out), "--quiet", "--no-quicklook"]
    )
    assert result.exit_code == 0, result.output
    manifest = json.loads((out / SCENE / "manifest.json").read_text())
    albedo = manifest["inputs"]["albedo"]
    assert albedo["path"] == albedo_in_memory
    assert albedo["bytes"] is None and albedo["sha256"] is None  # not fetched again to hash
    assert manifest["inputs"]["ndvi"]["sha256"] is not None  # local files still are
    with (
        rasterio.open(out / SCENE / "et_daily.tif") as a,
        rasterio.open(demo_run / SCENE / "et_daily.tif") as b,
    ):
        np.testing.assert_array_equal(a.read(1), b.read(1))


def test_an_unopenable_remote_input_gets_a_clear_error(tmp_path):
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    location = "/vsimem/rasterbudget_test/nothing_here.tif"
    data["scene"][0]["inputs"]["surface_temperature"] = location
    recipe = write_toml(data, tmp_path / "recipe.toml")
    result = CliRunner().invoke(
        main, ["run", str(recipe), "--out", str(tmp_path / "out"), "--quiet"]
    )
    assert result.exit_code == 2, result.output
    line = result.output.strip().splitlines()[-1]
    assert line.startswith("rasterbudget: error: ")
    for words in (location, "could not be opened", "inputs.surface_temperature"):
        assert words in line, line
    assert "does not exist" not in line  # no local-file check for a /vsi path
    with pytest.raises(InputRasterError):
        from rasterbudget.io.grid import target_grid

        target_grid(location)


def test_zarr_is_filled_by_the_same_compute_without_recomputing_blocks(tmp_path, monkeypatch):
    original = blocks.pass2_block
    calls = []

    def counting(ctx, params, loc):
        calls.append(loc)
        return original(ctx, params, loc)

    monkeypatch.setattr(blocks, "pass2_block", counting)
    recipe = parse_recipe(demo_recipe_dict())
    settings = pipeline.RunOptions(
        out_dir=tmp_path / "out", chunk_size=128, tile_size=100, zarr=True, quicklook=False
    )
    pipeline.run_scene(recipe, recipe.scene[0], load_class_table(), settings)
    # 300 x 400 pixels in 128-pixel chunks: 3 x 4 blocks, each computed once for every output
    assert len(calls) == 12 and len(set(calls)) == 12


# ----------------------------------------------------------------- read by the ecosystem


@pytest.mark.parametrize("scene", SCENES)
def test_rio_cogeo_validates_every_raster(cloud_run, scene):
    from rio_cogeo.cogeo import cog_validate

    for tif in _rasters(cloud_run / scene):
        valid, errors, _ = cog_validate(str(tif))
        assert valid and errors == [], (tif.name, errors)


def test_every_band_has_gdal_units_and_the_qa_band_its_bit_meanings(cloud_run):
    from rasterbudget.catalog.qa import QA
    from rasterbudget.catalog.variables import VARIABLES

    for tif in _rasters(cloud_run / SCENE):
        with rasterio.open(tif) as src:  # rasterio's units are GDAL's band unit type
            assert src.units == (VARIABLES[tif.stem].units,) * src.count, tif.name
    with rasterio.open(cloud_run / SCENE / "qa_flags.tif") as src:
        tags = src.tags(1)
    for bit in QA:
        position = int(bit).bit_length() - 1
        assert tags[f"bit_{position}"].startswith(bit.name.lower() + ": ")


def test_xarray_opens_the_zarr_with_integer_flags_and_rioxarray_finds_the_crs(cloud_run):
    import rioxarray  # noqa: F401  (registers the .rio accessor)
    import xarray as xr

    data = xr.open_zarr(cloud_run / SCENE / "outputs.zarr")  # xarray's defaults
    assert data.qa_flags.dtype == np.uint16
    with rasterio.open(cloud_run / SCENE / "qa_flags.tif") as src:
        np.testing.assert_array_equal(data.qa_flags.values, src.read(1))
        crs, transform = src.crs, src.transform
    assert data.rio.crs == crs and data.et_daily.rio.crs == crs
    assert data.rio.transform().almost_equals(transform)
    assert data.qa_flags.attrs["flag_masks"][10] == 1024


def test_odc_stac_loads_the_item_pixel_identical(cloud_run):
    import odc.stac
    import pystac

    folder = cloud_run / SCENE
    item = pystac.Item.from_file(str(folder / f"{SCENE}.stac.json"))
    loaded = odc.stac.load([item], bands=["et_daily", "qa_flags"])
    with rasterio.open(folder / "et_daily.tif") as src:
        np.testing.assert_array_equal(loaded.et_daily.isel(time=0).values, src.read(1))
        assert loaded.odc.geobox.crs.epsg == src.crs.to_epsg()
    with rasterio.open(folder / "qa_flags.tif") as src:
        np.testing.assert_array_equal(loaded.qa_flags.isel(time=0).values, src.read(1))
    raw = json.loads((folder / f"{SCENE}.stac.json").read_text())
    assert raw["properties"]["proj:epsg"] == 32613  # what stackstac reads


def test_drought_categories_carry_a_colour_table_and_gdal_category_names(tmp_path):
    from rasterio.shutil import copy as gdal_copy
    from rasterio.transform import from_origin

    from rasterbudget.catalog.variables import DROUGHT_CATEGORIES
    from rasterbudget.season.compare import run_compare

    rng = np.random.default_rng(3)
    profile = {
        "driver": "GTiff",
        "width": 32,
        "height": 32,
        "count": 1,
        "dtype": "float32",
        "crs": "EPSG:32613",
        "transform": from_origin(500000.0, 4400000.0, 30.0, 30.0),
    }
    paths = []
    for k in range(4):
        paths.append(tmp_path / f"season_{k}.tif")
        with rasterio.open(paths[-1], "w", **profile) as dst:
            dst.write(rng.normal(400.0, 40.0, (1, 32, 32)).astype(np.float32))
    run_compare(paths[0], tmp_path / "cmp", baseline=paths[1:], chunk=64, tile_size=16)
    category = tmp_path / "cmp" / "drought_category.tif"
    with rasterio.open(category) as src:
        table = src.colormap(1)
    for code, _, colour in DROUGHT_CATEGORIES:
        assert table[code][:3] == tuple(int(colour[i : i + 2], 16) for i in (1, 3, 5))
    # GDAL itself reads the category names (from the GeoTIFF's PAM sidecar) into a VRT copy
    gdal_copy(category, tmp_path / "category.vrt", driver="VRT")
    vrt = (tmp_path / "category.vrt").read_text()
    for _, name, _ in DROUGHT_CATEGORIES:
        assert f"<Category>{name}</Category>" in vrt


def test_a_run_has_a_collection_of_its_scene_and_season_items_that_readers_load(tmp_path):
    import odc.stac
    import pystac

    from rasterbudget.season.compare import run_compare
    from tests.conftest import ROOT

    out = tmp_path / "out"
    recipe = ROOT / "workflows" / "demo_season.toml"
    result = CliRunner().invoke(main, ["run", str(recipe), "--out", str(out), "--quiet"])
    assert result.exit_code == 0, result.output
    raw = json.loads((out / "collection.json").read_text())
    assert _core_schema_errors(raw, "collection") == []
    collection = pystac.Collection.from_file(str(out / "collection.json"))
    items = {item.id: item for item in collection.get_items()}
    season_id = "kessendry_summer_2026"
    assert set(items) == {*SCENES, season_id}
    interval = collection.extent.temporal.intervals[0]
    assert interval[0] == dt.datetime(2026, 6, 1, tzinfo=dt.UTC)
    assert interval[1] == dt.datetime(2026, 8, 31, 23, 59, 59, tzinfo=dt.UTC)
    season_item = json.loads((out / season_id / f"{season_id}.stac.json").read_text())
    assert _core_schema_errors(season_item) == []
    assert season_item["properties"]["datetime"] is None
    assert season_item["properties"]["start_datetime"] == "2026-06-01T00:00:00Z"
    loaded = odc.stac.load([items[season_id]], bands=["et_season"])
    with rasterio.open(out / season_id / "et_season.tif") as src:
        np.testing.assert_array_equal(loaded.et_season.isel(time=0).values, src.read(1))
    # a comparison has its Item too, over the compared season's days
    current = out / season_id / "et_season.tif"
    run_compare(current, tmp_path / "cmp", current, chunk=64, tile_size=50, label="same")
    compared = json.loads((tmp_path / "cmp" / "same.stac.json").read_text())
    assert _core_schema_errors(compared) == []
    assert compared["properties"]["end_datetime"] == "2026-08-31T23:59:59Z"
    assert {"difference", "percent_change", "summary"} <= set(compared["assets"])
    # pystac's own validator, core specification (its extension schemas need the network)
    from pystac.validation.stac_validator import JsonSchemaSTACValidator

    validator = JsonSchemaSTACValidator()
    for document, kind in (
        (raw, pystac.STACObjectType.COLLECTION),
        (season_item, pystac.STACObjectType.ITEM),
        (compared, pystac.STACObjectType.ITEM),
        (json.loads((out / SCENE / f"{SCENE}.stac.json").read_text()), pystac.STACObjectType.ITEM),
    ):
        assert validator.validate_core(document, kind, document["stac_version"]) is not None
