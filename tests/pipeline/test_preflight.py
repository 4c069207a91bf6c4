"""Pre-flight checks: a scene whose blocks cannot fit in memory, or whose outputs cannot fit
on the disk, is refused before its passes with the estimate and the fix."""

from __future__ import annotations

from collections import namedtuple

from click.testing import CliRunner

from rasterbudget.cli import main
from rasterbudget.scene import preflight

from ..conftest import demo_recipe_dict, write_toml

SCENE = "kessendry_20260614"


def _recipe(tmp_path):
    data = demo_recipe_dict()
    data["scene"] = data["scene"][:1]
    return write_toml(data, tmp_path / "recipe.toml")


def _run(tmp_path, *extra):
    return CliRunner().invoke(
        main, ["run", str(_recipe(tmp_path)), "--out", str(tmp_path / "out"), "--quiet", *extra]
    )


def test_memory_estimate_follows_the_chunk_area_and_the_threads():
    small = preflight.memory_estimate_gb(512, threads=2)
    large = preflight.memory_estimate_gb(1024, threads=2)
    base = preflight.BASE_MEMORY_GB
    assert abs((large - base) - 4 * (small - base)) < 1e-12
    # 2 threads x 512^2 x 400 bytes + 0.3 GB (README, Performance: about 0.44 GB at chunk 512)
    assert abs(small - (0.3 + 2 * 512**2 * 400 / 1e9)) < 1e-12


def test_a_chunk_that_cannot_fit_in_memory_is_refused_with_the_fix(tmp_path, monkeypatch):
    monkeypatch.setattr(preflight, "available_memory_gb", lambda: 0.35)
    result = _run(tmp_path, "--chunk-size", "1024")
    assert result.exit_code == 2, result.output
    line = result.output.strip()
    assert "chunk size" in line and "GB of memory" in line and "--chunk-size" in line
    assert not list((tmp_path / "out").rglob("*.tif"))


def test_outputs_that_cannot_fit_on_the_disk_are_refused(tmp_path, monkeypatch):
    usage = namedtuple("usage", "total used free")
    monkeypatch.setattr(preflight.shutil, "disk_usage", lambda path: usage(10**9, 10**9, 1000))
    result = _run(tmp_path)
    assert result.exit_code == 2, result.output
    assert "GB free" in result.output and "another --out" in result.output
    assert not list((tmp_path / "out").rglob("*.tif"))
