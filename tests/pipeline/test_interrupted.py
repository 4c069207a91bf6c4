"""Killing a real run mid-write leaves nothing incomplete under a final name; a rerun completes."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time

import numpy as np
import rasterio
from rasterio.windows import Window

from tests.conftest import TINY, demo_recipe_dict, write_toml

SCENE = "kessendry_20260614"


def _tiled_copy(src_path, dst_path, reps=4):
    """The demo raster repeated reps x reps times: a scene big enough to kill mid-run."""
    with rasterio.open(src_path) as src:
        data, profile = src.read(1), src.profile
    big = np.tile(data, (reps, reps))
    profile.update(width=big.shape[1], height=big.shape[0])
    with rasterio.open(dst_path, "w", **profile) as dst:
        dst.write(big, 1, window=Window(0, 0, big.shape[1], big.shape[0]))


def test_kill_mid_write_then_rerun(tmp_path):
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    inputs = data["scene"][0]["inputs"]
    for role in ("albedo", "surface_temperature", "land_cover", "ndvi"):
        target = tmp_path / f"{role}.tif"
        _tiled_copy(inputs[role], target)
        inputs[role] = str(target)
    _tiled_copy(TINY / "elevation.tif", tmp_path / "elevation.tif")
    data["defaults"]["inputs"]["elevation"] = str(tmp_path / "elevation.tif")
    data["scene"][0]["inputs"].pop("elevation", None)
    recipe = write_toml(data, tmp_path / "recipe.toml")
    out = tmp_path / "out"
    command = [
        sys.executable,
        "-m",
        "rasterbudget.cli",
        "run",
        str(recipe),
        "--out",
        str(out),
        "--quiet",
        "--chunk-size",
        "128",
        "--no-quicklook",
    ]
    scene_dir = out / SCENE

    process = subprocess.Popen(command, start_new_session=True)
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and process.poll() is None:
        if scene_dir.exists() and any(p.name.endswith(".partial") for p in scene_dir.iterdir()):
            break
        time.sleep(0.01)
    assert process.poll() is None, "the run ended before it could be interrupted"
    time.sleep(0.3)  # well inside pass 2: outputs are being written
    os.killpg(process.pid, signal.SIGKILL)
    process.wait()

    left = sorted(p.name for p in scene_dir.iterdir())
    finals = [n for n in left if not n.endswith(".partial")]
    assert finals == [], f"incomplete outputs under final names: {finals}"
    assert any(n.endswith(".partial") for n in left)

    subprocess.run(command, check=True, timeout=300)
    names = sorted(p.name for p in scene_dir.iterdir())
    assert not [n for n in names if n.endswith(".partial")]
    assert "manifest.json" in names and "et_daily.tif" in names
    with rasterio.open(scene_dir / "et_daily.tif") as src:
        assert np.isfinite(src.read(1)).mean() > 0.99
