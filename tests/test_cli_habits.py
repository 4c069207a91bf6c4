"""Command-line habits: shared options on every command, scene selection, quiet output, and
progress bars that never share a terminal line with a report line."""

from __future__ import annotations

import csv
import os
import subprocess
import sys

import pytest
from click.testing import CliRunner

from rasterbudget.cli import main
from tests.conftest import DEMO_RECIPE, ROOT

COMMANDS = ("run", "compare", "inspect", "demo", "bench")


@pytest.mark.parametrize("command", COMMANDS)
def test_every_command_has_the_shared_options(command):
    result = CliRunner().invoke(main, [command, "--help"])
    assert result.exit_code == 0
    for option in ("--quiet", "--verbose", "--threads", "--debug"):
        assert option in result.output, (command, option)


def test_scene_selection_runs_only_the_matching_scenes(tmp_path):
    out = tmp_path / "out"
    args = ["run", str(DEMO_RECIPE), "--out", str(out), "--no-quicklook", "--threads", "1"]
    result = CliRunner().invoke(main, [*args, "--scene", "*0823"])
    assert result.exit_code == 0, result.output
    with (out / "batch.csv").open() as f:
        assert [r["scene_id"] for r in csv.DictReader(f)] == ["kessendry_20260823"]
    assert not (out / "kessendry_20260614").exists()
    assert "kessendry_20260823: done" in result.output
    result = CliRunner().invoke(main, [*args, "--scene", "nowhere_*"])
    assert result.exit_code == 2
    assert "--scene 'nowhere_*' matches no scene of the recipe" in result.output
    assert "kessendry_20260614" in result.output  # the scenes it could have named


def test_quiet_commands_print_nothing_on_success(tmp_path, demo_run):
    result = CliRunner().invoke(main, ["inspect", str(DEMO_RECIPE), "-q"])
    assert result.exit_code == 0 and result.output == ""
    tif = demo_run / "kessendry_20260614" / "et_daily.tif"
    result = CliRunner().invoke(
        main, ["compare", str(tif), "--previous", str(tif), "--out", str(tmp_path / "c"), "-q"]
    )
    assert result.exit_code == 0 and result.output == ""
    assert (tmp_path / "c" / "difference.tif").is_file()


def test_inspect_writes_places_with_hemisphere_letters():
    result = CliRunner().invoke(main, ["inspect", str(DEMO_RECIPE)])
    assert result.exit_code == 0, result.output
    assert "39.980° N, 105.164° W" in result.output and "-105" not in result.output


@pytest.mark.skipif(sys.platform != "linux", reason="a pseudo-terminal as Linux has it")
def test_progress_bars_and_report_lines_never_share_a_terminal_line(tmp_path):
    """On a terminal (a pseudo-terminal, its screen rebuilt by the pyte terminal emulator) the
    bars on standard error are cleared before each report line on standard output: no line of
    the final screen holds a bar and a report line. Printing the lines plainly left
    'scenes:  20%|...| 1/5 [...]kessendry_...' on the screen."""
    import fcntl
    import pty
    import struct
    import termios

    import pyte

    leader, follower = pty.openpty()
    # a terminal 40 rows by 100 columns (a new pseudo-terminal has 0 columns: no bar fits)
    fcntl.ioctl(follower, termios.TIOCSWINSZ, struct.pack("HHHH", 40, 100, 0, 0))
    process = subprocess.Popen(
        [
            sys.executable,
            "-m",
            "rasterbudget.cli",
            "run",
            str(DEMO_RECIPE),
            "--out",
            str(tmp_path / "out"),
            "--force",
            "--no-quicklook",
        ],
        stdout=follower,
        stderr=follower,
        cwd=ROOT,
    )
    os.close(follower)
    chunks = []
    while True:
        try:
            data = os.read(leader, 4096)
        except OSError:  # the follower closed: the process ended
            break
        if not data:
            break
        chunks.append(data)
    assert process.wait(timeout=120) == 0
    raw = b"".join(chunks)
    assert b"scenes:" in raw and b"pass 1" in raw  # the bars were drawn
    screen = pyte.Screen(100, 40)
    pyte.ByteStream(screen).feed(raw)
    shown = [line.rstrip() for line in screen.display if line.strip()]
    done = [line for line in shown if ": done in " in line]
    assert len(done) == 2, shown
    assert all(line.startswith("kessendry_2026") for line in done), shown
    assert not any("%|" in line for line in shown), shown  # no bar left behind
