"""Shared fixtures: the demo recipe and a session-wide run of it."""

from __future__ import annotations

import shutil
import tomllib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMO_RECIPE = ROOT / "workflows" / "demo.toml"
TINY = ROOT / "tiny_rasters"


def demo_recipe_dict() -> dict:
    """The demo recipe as a dict with absolute input paths (so copies can live anywhere)."""
    data = tomllib.loads(DEMO_RECIPE.read_text())
    data["defaults"]["inputs"]["elevation"] = str(TINY / "elevation.tif")
    for scene in data["scene"]:
        for key, value in scene["inputs"].items():
            scene["inputs"][key] = str((DEMO_RECIPE.parent / value).resolve())
    return data


def write_toml(data: dict, path: Path) -> Path:
    """Minimal TOML writer for recipe dicts (tables, arrays of tables, scalars)."""
    import datetime as dt

    def scalar(v):
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, (int, float)):
            return repr(v)
        if isinstance(v, dt.datetime):
            return v.isoformat().replace("+00:00", "Z")
        if isinstance(v, (list, tuple)):
            return "[" + ", ".join(scalar(x) for x in v) + "]"
        return '"' + str(v).replace("\\", "\\\\").replace('"', '\\"') + '"'

    lines: list[str] = []

    def table(prefix: str, d: dict, header: str | None) -> None:
        if header:
            lines.append(header)
        for k, v in d.items():
            if not isinstance(v, dict) and not (
                isinstance(v, list) and v and isinstance(v[0], dict)
            ):
                lines.append(f"{k} = {scalar(v)}")
        for k, v in d.items():
            name = f"{prefix}{k}"
            if isinstance(v, dict):
                table(name + ".", v, f"[{name}]")
            elif isinstance(v, list) and v and isinstance(v[0], dict):
                for item in v:
                    table(name + ".", item, f"[[{name}]]")

    table("", data, None)
    path.write_text("\n".join(lines) + "\n")
    return path


@pytest.fixture(scope="session")
def demo_run(tmp_path_factory) -> Path:
    """Run the shipped demo recipe once through the command line; return the output folder."""
    from click.testing import CliRunner

    from rasterbudget.cli import main

    out = tmp_path_factory.mktemp("demo") / "out"
    result = CliRunner().invoke(main, ["run", str(DEMO_RECIPE), "--out", str(out), "--quiet"])
    assert result.exit_code == 0, result.output
    return out


@pytest.fixture
def tiny_copy(tmp_path) -> Path:
    """A private copy of tiny_rasters that a test may damage."""
    target = tmp_path / "tiny"
    shutil.copytree(TINY, target)
    return target


def render_in_chromium(page: Path, workdir: Path) -> Path:
    """Screenshot an HTML file in headless Chromium (no network); returns the PNG."""
    import subprocess

    shot = workdir / f"{page.stem}.png"
    subprocess.run(
        [
            "chromium",
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            f"--user-data-dir={workdir / 'profile'}",
            "--window-size=1200,2000",
            f"--screenshot={shot}",
            page.as_uri(),
        ],
        check=True,
        timeout=120,
        capture_output=True,
    )
    return shot
