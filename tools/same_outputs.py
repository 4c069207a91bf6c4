"""Run every shipped recipe and compare two such runs file by file (a developer's check).

    python tools/same_outputs.py snapshot /tmp/before     # run workflows/*.toml into a folder
    python tools/same_outputs.py diff /tmp/before /tmp/after

``snapshot`` runs each recipe of ``workflows/`` with its own ``out`` (under ``out/``), the
comparison recipe last (it reads the series outputs), then moves ``out/`` to the folder.
``diff`` compares every file of both folders: rasters, CSV, GeoJSON and pictures byte for byte;
manifests and STAC items as JSON with the keys that hold timings, clock times and versions left
out. It prints one line per difference and exits 1 if there is any.
"""

from __future__ import annotations

import json
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
VOLATILE_KEYS = {"timings_s", "versions", "written_utc", "created", "updated", "datetime_written"}
COMPARISONS = {"demo_compare.toml"}


def snapshot(dest: Path) -> None:
    out = ROOT / "out"
    if out.exists():
        shutil.rmtree(out)
    recipes = sorted(ROOT.glob("workflows/*.toml"), key=lambda p: p.name in COMPARISONS)
    for recipe in recipes:
        command = ["compare"] if recipe.name in COMPARISONS else ["run", "--quiet"]
        subprocess.run(
            ["rasterbudget", *command, str(recipe)], check=True, cwd=ROOT, stdout=subprocess.DEVNULL
        )
    if dest.exists():
        shutil.rmtree(dest)
    shutil.move(str(out), str(dest))


def _without_volatile(value):
    if isinstance(value, dict):
        return {k: _without_volatile(v) for k, v in value.items() if k not in VOLATILE_KEYS}
    if isinstance(value, list):
        return [_without_volatile(v) for v in value]
    return value


def _raster_facts(path: Path) -> tuple:
    """What a GeoTIFF holds, apart from where its tiles sit in the file (threads write them in
    any order): pixels, grid, types, codec, tags, descriptions, units and colour tables."""
    import numpy as np
    import rasterio

    with rasterio.open(path) as src:
        colormaps = []
        for band in src.indexes:
            try:
                colormaps.append(src.colormap(band))
            except ValueError:
                colormaps.append(None)
        profile = {k: v for k, v in src.profile.items() if k != "nodata"}
        return (
            src.read().tobytes(),
            repr(src.nodata),
            sorted((k, str(v)) for k, v in profile.items()),
            src.tags(),
            [src.tags(b) for b in src.indexes],
            src.descriptions,
            src.units,
            colormaps,
            [np.asarray(src.block_shapes).tolist()],
        )


def _csv_without_seconds(path: Path) -> list[list[str]]:
    import csv

    rows = list(csv.reader(path.read_text().splitlines()))
    if rows and "seconds" in rows[0]:
        k = rows[0].index("seconds")
        rows = [row[:k] + row[k + 1 :] for row in rows]
    return rows


def _same(a: Path, b: Path) -> bool:
    if a.suffix == ".tif":
        return _raster_facts(a) == _raster_facts(b)
    if a.name == "batch.csv":  # holds each scene's run time
        return _csv_without_seconds(a) == _csv_without_seconds(b)
    if a.name == "manifest.json" or a.name.endswith(".stac.json"):
        return _without_volatile(json.loads(a.read_text())) == _without_volatile(
            json.loads(b.read_text())
        )
    if a.suffix == ".html":  # the report prints its run time; compare it apart from that line
        strip = [line for line in a.read_text().splitlines() if "written" not in line]
        other = [line for line in b.read_text().splitlines() if "written" not in line]
        return strip == other
    return a.read_bytes() == b.read_bytes()


def diff(first: Path, second: Path) -> int:
    files_a = {p.relative_to(first) for p in first.rglob("*") if p.is_file()}
    files_b = {p.relative_to(second) for p in second.rglob("*") if p.is_file()}
    problems = [f"only in {first}: {p}" for p in sorted(files_a - files_b)]
    problems += [f"only in {second}: {p}" for p in sorted(files_b - files_a)]
    same = 0
    for rel in sorted(files_a & files_b):
        if _same(first / rel, second / rel):
            same += 1
        else:
            problems.append(f"differs: {rel}")
    print("\n".join(problems))
    print(f"{same} files identical, {len(problems)} differences")
    return 1 if problems else 0


if __name__ == "__main__":
    verb, *folders = sys.argv[1:]
    if verb == "snapshot":
        snapshot(Path(folders[0]).resolve())
    elif verb == "diff":
        sys.exit(diff(Path(folders[0]), Path(folders[1])))
    else:
        sys.exit("usage: same_outputs.py snapshot DEST | diff FIRST SECOND")
