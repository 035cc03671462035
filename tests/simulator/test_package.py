"""The package surface and the command line.

The public surface is checked in a fresh interpreter started in the repository
root: under pytest the name ``simulator`` is this test package (tests/simulator
has an ``__init__.py``), so ``import simulator`` here would not be the real one.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from simulator.__main__ import main

from .conftest import ROOT

PROBE = """
import json, simulator
names = list(simulator.__all__)
print(json.dumps({
    "file": simulator.__file__,
    "names": names,
    "missing": [n for n in names if not hasattr(simulator, n)],
}))
"""


def test_public_surface() -> None:
    output = subprocess.run(
        [sys.executable, "-c", PROBE], cwd=ROOT, capture_output=True, text=True, check=True
    )
    found = json.loads(output.stdout)
    assert Path(found["file"]) == ROOT / "simulator" / "__init__.py"
    assert found["missing"] == []
    assert {"run", "what_if", "load_building", "load_scenario", "synthetic", "Weather"} <= set(
        found["names"]
    )


def test_command_line_run(capsys: pytest.CaptureFixture[str]) -> None:
    status = main(["--start", "2024-07-01", "--end", "2024-07-02", "--step", "3600"])
    out = capsys.readouterr().out
    assert status == 0
    assert out.startswith("Quarry Lane Commons: 2024-07-01 to 2024-07-02, synthetic")
    assert "free_cooling_hours" in out and "classroom_east" in out


def test_command_line_what_if(capsys: pytest.CaptureFixture[str]) -> None:
    status = main(
        [
            "--start",
            "2024-05-01",
            "--end",
            "2024-05-02",
            "--step",
            "3600",
            "--what-if",
            "free_cooling.open_above=22,24",
        ]
    )
    out = capsys.readouterr().out
    assert status == 0
    assert "free_cooling.open_above" in out and "peak_temperature" in out


def test_command_line_reports_file_problems(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    scenario = tmp_path / "drill.yaml"
    scenario.write_text("events:\n  - rain: {after: soon}\n", encoding="utf-8")
    status = main(["--start", "2024-07-01", "--end", "2024-07-02", "--scenario", str(scenario)])
    err = capsys.readouterr().err
    assert status == 2
    assert f"{scenario}:2 events[0].rain.after: got 'soon', expected a duration" in err
