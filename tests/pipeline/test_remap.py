"""Land-cover codes of the user's own, remapped to the class table; unmapped codes are listed."""

from __future__ import annotations

import numpy as np
import rasterio
from click.testing import CliRunner

from rasterbudget.cli import main
from tests.conftest import demo_recipe_dict, write_toml

USER_CODES = {1: 110, 2: 120, 3: 300, 4: 400, 5: 510, 6: 800, 7: 900, 8: 610, 9: 700}


def _user_land_cover(tmp_path, drop=None):
    src_path = demo_recipe_dict()["scene"][0]["inputs"]["land_cover"]
    with rasterio.open(src_path) as src:
        codes, profile = src.read(1), src.profile
    user = np.zeros(codes.shape, dtype=np.uint16)
    for ours, theirs in USER_CODES.items():
        user[codes == ours] = theirs
    path = tmp_path / "user_land_cover.tif"
    with rasterio.open(path, "w", **(profile | {"dtype": "uint16"})) as dst:
        dst.write(user, 1)
    table = tmp_path / "remap.csv"
    rows = [f"{theirs},{ours}" for ours, theirs in USER_CODES.items() if theirs != drop]
    table.write_text("source_code,class_code\n" + "\n".join(rows) + "\n")
    return path, table


def _run(tmp_path, path, table):
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    data["scene"][0]["inputs"]["land_cover"] = {"path": str(path), "remap": str(table)}
    recipe = write_toml(data, tmp_path / "recipe.toml")
    return CliRunner().invoke(
        main, ["run", str(recipe), "--out", str(tmp_path / "out"), "--quiet", "--no-quicklook"]
    )


def test_remapped_codes_give_the_same_result(tmp_path, demo_run):
    path, table = _user_land_cover(tmp_path)
    result = _run(tmp_path, path, table)
    assert result.exit_code == 0, result.output
    et = rasterio.open(tmp_path / "out" / "kessendry_20260614" / "et_daily.tif").read(1)
    reference = rasterio.open(demo_run / "kessendry_20260614" / "et_daily.tif").read(1)
    np.testing.assert_allclose(et, reference, rtol=1e-6, equal_nan=True)


def test_unmapped_codes_are_listed_with_pixel_counts(tmp_path):
    path, table = _user_land_cover(tmp_path, drop=800)  # the reservoir's code is left out
    result = _run(tmp_path, path, table)
    assert result.exit_code == 2
    assert "800 (458 pixels)" in result.output and "remap" in result.output
